// One QAOA layer for MaxCut on an invented 6-node ring.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[6];
creg c[6];
h q;
rzz(0.820000) q[0],q[1];
rzz(0.820000) q[1],q[2];
rzz(0.820000) q[2],q[3];
rzz(0.820000) q[3],q[4];
rzz(0.820000) q[4],q[5];
rzz(0.820000) q[5],q[0];
rx(0.460000) q;
measure q -> c;
