// W state on 5 qubits by a cascade of controlled rotations.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[5];
creg c[5];
x q[0];
cry(2.214297435588) q[0],q[1];
cx q[1],q[0];
cry(2.094395102393) q[1],q[2];
cx q[2],q[1];
cry(1.910633236249) q[2],q[3];
cx q[3],q[2];
cry(1.570796326795) q[3],q[4];
cx q[4],q[3];
measure q -> c;
