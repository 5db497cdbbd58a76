* expect: 2 loop of voltage sources
I1 0 a 1m
V1 a b 1
E1 c 0 a b 1
E2 c 0 a b 2
