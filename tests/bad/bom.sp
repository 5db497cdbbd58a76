* expect: 0 
V1 a 0 dc 1 ac 1
R1 a b 1k
C1 b 0 1p
