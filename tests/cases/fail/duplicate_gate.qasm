OPENQASM 2.0;
include "qelib1.inc";
gate cx a,b { CX a,b; }
