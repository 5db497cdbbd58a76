* expect: 2 missing resistance value
R1 a 0
