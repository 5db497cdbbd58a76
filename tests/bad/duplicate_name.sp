* expect: 2 defined twice
V1 a 0 1
R1 a 0 1k
R1 a 0 2k
