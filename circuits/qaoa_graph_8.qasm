// One QAOA layer for MaxCut on an invented 8-node graph with 11 edges.
OPENQASM 2.0;
include "qelib1.inc";
qreg q[8];
creg c[8];
h q;
rzz(0.740000) q[0],q[1];
rzz(0.740000) q[0],q[4];
rzz(0.740000) q[1],q[2];
rzz(0.740000) q[1],q[5];
rzz(0.740000) q[2],q[3];
rzz(0.740000) q[2],q[6];
rzz(0.740000) q[3],q[7];
rzz(0.740000) q[4],q[5];
rzz(0.740000) q[5],q[6];
rzz(0.740000) q[6],q[7];
rzz(0.740000) q[0],q[7];
rx(1.220000) q;
measure q -> c;
