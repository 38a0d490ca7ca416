// A four-controlled X (c4x) after preparing the controls.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[5];
h q[0];
h q[1];
x q[2];
h q[3];
c4x q[0],q[1],q[2],q[3],q[4];
