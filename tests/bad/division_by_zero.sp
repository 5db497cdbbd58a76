* expect: 2 division by zero
.param z=0
R1 a 0 {1/z}
