* expect: 2 instantiates itself
.subckt s a
X1 a s
.ends
X0 n s
