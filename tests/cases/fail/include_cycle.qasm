OPENQASM 2.0;
include "include_cycle_b.inc";
qreg q[1];
