* expect: 2 negative capacitance
V1 a 0 1 ac 1
R1 a b 1k
C1 b 0 -1p
