OPENQASM 2.0;
include "qelib1.inc";
include qelib1;
