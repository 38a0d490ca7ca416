OPENQASM 3.0;
qreg q[1];
