OPENQASM 2.0;
include "qelib1.inc";
qreg 3q[2];
