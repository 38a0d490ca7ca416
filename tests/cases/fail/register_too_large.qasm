// limits: max_qubits=100
OPENQASM 2.0;
include "qelib1.inc";
qreg a[60];
qreg b[60];
