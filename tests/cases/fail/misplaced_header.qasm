include "qelib1.inc";
OPENQASM 2.0;
qreg q[1];
