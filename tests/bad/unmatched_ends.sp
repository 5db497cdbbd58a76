* expect: 2 no open '.subckt'
R1 a 0 1
.ends
