// Controlled swap (Fredkin) on a mixed input.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[3];
h q[0];
x q[1];
cswap q[0],q[1],q[2];
