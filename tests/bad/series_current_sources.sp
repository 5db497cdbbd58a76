* expect: 2 no DC path
I1 0 a 1m
I2 a b 1m
R1 b 0 1k
