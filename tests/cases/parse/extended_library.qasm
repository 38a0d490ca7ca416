OPENQASM 2.0;
include "qelib1.inc";
qreg q[5];
sx q[0]; sxdg q[1]; p(0.1) q[2]; u(1,2,3) q[3]; u2(0,pi) q[4]; id q[0];
cp(0.2) q[0],q[1]; rxx(0.3) q[1],q[2]; ryy(0.35) q[2],q[3]; rzz(0.4) q[2],q[3];
swap q[3],q[4]; crx(0.5) q[0],q[2]; cry(0.6) q[1],q[3]; crz(0.7) q[2],q[4];
cu1(0.8) q[0],q[4]; cu3(0.1,0.2,0.3) q[1],q[0]; ch q[2],q[1]; cy q[3],q[0];
ccx q[0],q[1],q[2]; cswap q[2],q[3],q[4]; rccx q[4],q[3],q[2];
c3x q[0],q[1],q[2],q[3]; c4x q[4],q[3],q[2],q[1],q[0];
