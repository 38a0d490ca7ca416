OPENQASM two;
qreg q[1];
