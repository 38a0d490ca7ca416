OPENQASM 2.0;
include "qelib1.inc";
opaque magic(a) x,y;
gate wrap x,y { magic(0.25) x,y; h y; }
qreg q[2];
magic(pi) q[0],q[1];
wrap q[1],q[0];
