* expect: 2 cannot read the expression
R1 a 0 {__import__('os').system('touch MARKER')}
