// limits: max_gate_nesting=3
OPENQASM 2.0;
include "qelib1.inc";
gate g1 a { h a; }
gate g2 a { g1 a; }
gate g3 a { g2 a; }
gate g4 a { g3 a; }
