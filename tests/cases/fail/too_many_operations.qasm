// limits: max_ops=1000
OPENQASM 2.0;
include "qelib1.inc";
gate d0 a { h a; h a; }
gate d1 a { d0 a; d0 a; }
gate d2 a { d1 a; d1 a; }
gate d3 a { d2 a; d2 a; }
gate d4 a { d3 a; d3 a; }
gate d5 a { d4 a; d4 a; }
gate d6 a { d5 a; d5 a; }
gate d7 a { d6 a; d6 a; }
gate d8 a { d7 a; d7 a; }
gate d9 a { d8 a; d8 a; }
gate d10 a { d9 a; d9 a; }
gate d11 a { d10 a; d10 a; }
gate d12 a { d11 a; d11 a; }
gate d13 a { d12 a; d12 a; }
gate d14 a { d13 a; d13 a; }
gate d15 a { d14 a; d14 a; }
gate d16 a { d15 a; d15 a; }
gate d17 a { d16 a; d16 a; }
gate d18 a { d17 a; d17 a; }
gate d19 a { d18 a; d18 a; }
gate d20 a { d19 a; d19 a; }
qreg q[1];
d20 q[0];
