//! Native operations of a collective-gate trapped-ion processor, as plain data.
//!
//! Conventions (fixed; see grammar/pulses.ebnf and ARCHITECTURE.md): with
//! `sigma_phi = cos(phi) X + sin(phi) Y` and `S_phi` its sum over the ions that are
//! not hidden,
//! - `Collective(theta, phi)` = `exp(-i theta/2 S_phi)`,
//! - `LightShift(ion, theta)` = `exp(-i theta/2 Z_ion)`,
//! - `Ms(theta, phi)` = `exp(-i theta/4 S_phi^2)` over the ions that are not hidden,
//! - `PairMs(a, b, theta, phi)` = `exp(-i theta/4 (sigma_phi^a + sigma_phi^b)^2)`,
//! - `Addressed(ion, theta, phi)` = `exp(-i theta/2 sigma_phi^ion)`,
//! - `VirtualZ(theta)` = `exp(-i theta/2 sum_j Z_j)`: a change of phase reference,
//! - `Hide(ion)` / `Unhide(ion)`: the ion takes no part in collective and MS pulses
//!   in between.
//!
//! Invariant: every ion index of a [`Sequence`] is below `n_ions`.

pub mod profile;
pub mod qasm_out;
pub mod text;

use crate::circuit::{Condition, Register};

/// One native operation.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(tag = "op", rename_all = "snake_case")]
pub enum NativeOp {
    Collective {
        theta: f64,
        phi: f64,
    },
    LightShift {
        ion: u32,
        theta: f64,
    },
    Ms {
        theta: f64,
        phi: f64,
    },
    PairMs {
        a: u32,
        b: u32,
        theta: f64,
        phi: f64,
    },
    Addressed {
        ion: u32,
        theta: f64,
        phi: f64,
    },
    VirtualZ {
        theta: f64,
    },
    Hide {
        ion: u32,
    },
    Unhide {
        ion: u32,
    },
    Measure {
        ion: u32,
        clbit: u32,
    },
    Reset {
        ion: u32,
    },
}

impl NativeOp {
    /// True for the entangling pulses (global and pair MS).
    pub fn is_entangling(&self) -> bool {
        matches!(self, NativeOp::Ms { .. } | NativeOp::PairMs { .. })
    }
}

/// A native operation with an optional classical condition.
#[derive(Debug, Clone, PartialEq)]
pub struct Step {
    pub op: NativeOp,
    /// Boxed: conditions are rare, and a step without one stays 40 bytes.
    pub condition: Option<Box<Condition>>,
}

/// A pulse sequence for a device of `n_ions` ions; the circuit's qubit `k` is ion `k`.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Sequence {
    pub n_ions: u32,
    /// Classical registers, kept from the source circuit for measurements and conditions.
    pub cregs: Vec<Register>,
    pub steps: Vec<Step>,
}

impl Sequence {
    pub fn new(n_ions: u32, cregs: Vec<Register>) -> Sequence {
        Sequence {
            n_ions,
            cregs,
            steps: Vec::new(),
        }
    }

    pub fn push(&mut self, op: NativeOp) {
        self.steps.push(Step {
            op,
            condition: None,
        });
    }

    pub fn n_clbits(&self) -> u32 {
        self.cregs.iter().map(|r| r.size).sum()
    }
}

#[cfg(test)]
mod tests {
    /// Compiled sequences run to millions of steps: a step stays at 40 bytes (an
    /// operation of 32, a boxed condition of 8).
    #[test]
    fn a_step_is_compact() {
        assert!(std::mem::size_of::<super::Step>() <= 40);
    }
}
