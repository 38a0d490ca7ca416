//! tutti compiles OpenQASM 2 circuits for trapped-ion processors whose gates act on
//! the whole ion chain, proves the result equal to the input, and budgets it.
//!
//! ```
//! let outcome = tutti::qasm::read_str("bell.qasm",
//!     "OPENQASM 2.0; include \"qelib1.inc\"; qreg q[2]; h q[0]; cx q[0],q[1];");
//! let circuit = outcome.circuit.expect("the program is valid");
//! assert_eq!(circuit.summary().two_qubit_ops, 1);
//! ```

pub mod batch;
pub mod circuit;
pub mod compile;
pub mod driver;
pub mod memory;
pub mod native;
pub mod qasm;
pub mod report;
pub mod sim;
