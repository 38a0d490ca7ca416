OPENQASM 2.0;
include "qelib1.inc";
qreg q[99999999999999999999999];
