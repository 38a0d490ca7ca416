OPENQASM 2.0;
include "qelib1.inc";
gate g(a,a) x { rz(a) x; }
