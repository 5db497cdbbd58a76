* expect: 2 square root of a negative value
V1 a 0 1
R1 a 0 {sqrt(-1)}
