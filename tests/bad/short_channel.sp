* expect: 2 L - 2*LD
V1 d 0 1
M1 d d 0 0 mn w=1u l=0.1u
.model mn nmos (vto=0.5 kp=100u ld=0.05u)
