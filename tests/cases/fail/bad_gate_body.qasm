OPENQASM 2.0;
include "qelib1.inc";
gate g a { h a; measure a -> c[0]; }
