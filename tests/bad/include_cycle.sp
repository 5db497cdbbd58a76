* expect: 2 include cycle
.include 'include_cycle.sp'
R1 a 0 1
