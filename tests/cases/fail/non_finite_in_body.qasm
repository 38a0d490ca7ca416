OPENQASM 2.0;
include "qelib1.inc";
gate g(a) x { rz(ln(a)) x; }
qreg q[1];
g(-1) q[0];
