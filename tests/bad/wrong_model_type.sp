* expect: 2 not nmos or pmos
V1 d 0 1
M1 d d 0 0 qn
.model qn npn
