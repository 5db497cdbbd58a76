* expect: 2 unknown subcircuit
X1 a nosuch
