* expect: 2 unknown element letter
R1 a 0 1k
Z1 a 0 1
