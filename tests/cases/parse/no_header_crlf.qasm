include "qelib1.inc";
qreg q[1];
x q[0];
