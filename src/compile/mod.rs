//! Compilation from circuits to native sequences.

pub mod hadamard;
