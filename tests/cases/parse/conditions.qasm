OPENQASM 2.0;
include "qelib1.inc";
gate g(a) x,y { rx(a) x; cz x,y; }
qreg q[2];
creg c[2];
creg d[1];
h q[0];
measure q[0] -> c[0];
if(c==1) x q[1];
if(c==3) g(0.5) q[0],q[1];
if(d==0) measure q[1] -> d[0];
if(c==2) reset q[0];
