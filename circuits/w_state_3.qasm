// W state on 3 qubits by a cascade of controlled rotations.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[3];
creg c[3];
x q[0];
cry(1.910633236249) q[0],q[1];
cx q[1],q[0];
cry(1.570796326795) q[1],q[2];
cx q[2],q[1];
measure q -> c;
