* expect: 1 no DC path
V1 a 0 dc 1 ac 1
R1 a b 1k
C1 b f 1p
C2 f 0 1p
M1 b f 0 0 mn
.model mn nmos vto=0.5 kp=100u
