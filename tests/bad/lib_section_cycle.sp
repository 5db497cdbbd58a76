* expect: 2 selects itself
.lib 'lib_section_cycle.sp' outer
R1 a 0 1k
.lib outer
.lib 'lib_section_cycle.sp' inner
.endl outer
.lib inner
.lib 'lib_section_cycle.sp' outer
.endl inner
