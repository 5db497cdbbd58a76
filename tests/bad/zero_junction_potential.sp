* expect: 2 PB must be positive
V1 d 0 1
M1 d d 0 0 mn w=1u l=1u
.model mn nmos (vto=0.5 kp=100u pb=0)
