OPENQASM 2.0;
include "qelib1.inc";
qreg q[1];
creg c[2];
if(c==4) x q[0];
