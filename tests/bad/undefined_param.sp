* expect: 2 undefined parameter 'rx'
R1 a 0 {rx*2}
