OPENQASM 2.0;
// Without the library only U and CX exist.
qreg q[2];
U(pi/2,0,pi) q[0];
CX q[0],q[1];
gate mycx a,b { CX a,b; }
mycx q[1],q[0];
