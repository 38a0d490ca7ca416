OPENQASM 2.0;
include "qelib1.inc";
gate g x { h y; }
