OPENQASM 2.0;
include "qelib1.inc";
gate rot(a,b) x { rz(a) x; ry(b/2) x; }
gate pair(t) x,y { rot(t,2*t) x; cx x,y; barrier x,y; rot(-t,0) y; }
gate nop x { }
qreg q[2];
pair(pi/3) q[1],q[0];
nop q[0];
