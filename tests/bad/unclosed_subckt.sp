* expect: 2 never closed
.subckt s a
R1 a 0 1
X1 n s
