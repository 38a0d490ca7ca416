OPENQASM 2.0;
include "qelib1.inc";
qreg q[2];
h q[5];
cx q[0] q[1];
foo q[0];
rx(1,2) q[0];
measure q -> d;
