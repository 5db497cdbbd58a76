* expect: 2 undefined parameter 'abc'
R1 a 0 abc
