OPENQASM 2.0;
include "qelib1.inc";
include "include_local_defs.inc";
qreg q[2];
entangle q[0],q[1];
