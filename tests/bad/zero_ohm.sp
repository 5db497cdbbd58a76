* expect: 2 zero resistance
V1 a 0 1
R1 a 0 0
