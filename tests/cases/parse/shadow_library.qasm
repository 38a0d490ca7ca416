OPENQASM 2.0;
include "qelib1.inc";
// rzz is not in the 2017 library file, so a file may define its own.
gate rzz(t) a,b { cx a,b; u1(t) b; cx a,b; }
qreg q[2];
rzz(0.5) q[0],q[1];
