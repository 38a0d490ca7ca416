OPENQASM 2.0;
include "qelib1.inc";
qreg measure[2];
