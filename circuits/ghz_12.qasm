// GHZ state on 12 qubits: one Hadamard, then a chain of CNOTs.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[12];
creg c[12];
h q[0];
cx q[0],q[1];
cx q[1],q[2];
cx q[2],q[3];
cx q[3],q[4];
cx q[4],q[5];
cx q[5],q[6];
cx q[6],q[7];
cx q[7],q[8];
cx q[8],q[9];
cx q[9],q[10];
cx q[10],q[11];
measure q -> c;
