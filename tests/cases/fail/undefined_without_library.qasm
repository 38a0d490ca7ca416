OPENQASM 2.0;
qreg q[2];
cx q[0],q[1];
