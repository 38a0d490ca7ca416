// limits: max_include_depth=2
OPENQASM 2.0;
include "deep_1.inc";
