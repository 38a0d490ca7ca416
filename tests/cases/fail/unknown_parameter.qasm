OPENQASM 2.0;
include "qelib1.inc";
gate g(a) x { rz(b) x; }
qreg q[1];
rz(theta) q[0];
