* expect: 2 not UTF-8
V1 a 0 1
R1 a b 1k ; résistance
