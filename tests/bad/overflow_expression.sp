* expect: 2 not a finite number
V1 a 0 1
R1 a 0 {1e200*1e200}
