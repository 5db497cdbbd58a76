* expect: 2 out of range
V1 a 0 1
R1 a 0 1e400
