OPENQASM 2.0;
include "qelib1.inc";
qreg a[2];
qreg b[3];
cx a,b;
