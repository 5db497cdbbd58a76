* expect: 2 not found in
.lib 'lib_sections.lib' ff
R1 a 0 1
