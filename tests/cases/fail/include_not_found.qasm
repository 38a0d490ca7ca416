OPENQASM 2.0;
include "qelib1.inc";
include "no_such_file.inc";
