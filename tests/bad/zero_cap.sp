* expect: 0 zero value
V1 a 0 1 ac 1
R1 a b 1k
C1 b 0 0
C2 b 0 1p
