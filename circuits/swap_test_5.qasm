// Swap test comparing two invented two-qubit product states.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[5];
creg c[1];
ry(0.7) q[1];
ry(1.3) q[3];
rx(0.4) q[2];
rx(0.9) q[4];
h q[0];
cswap q[0],q[1],q[3];
cswap q[0],q[2],q[4];
h q[0];
measure q[0] -> c[0];
