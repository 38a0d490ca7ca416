OPENQASM 2.0;
include "qelib1.inc";
qreg q[1];
creg c[1];
measure c[0] -> q[0];
