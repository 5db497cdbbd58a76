* expect: 2 depends on itself
.param a={b} b={a}
R1 x 0 {a}
