* expect: 2 has 2 pins
.subckt s a b
R1 a b 1
.ends
X1 n s
