//! Native operations of a collective-gate trapped-ion processor, as plain data.
//!
//! Conventions (fixed; docs/gate-set.md, and grammar/pulses.ebnf for the text form):
//! with
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

pub mod budget;
pub mod crosstalk;
pub mod profile;
pub mod qasm_out;
pub mod text;

use crate::circuit::{Condition, Register};

/// The one name of each native operation. Every format (pulse list, JSON, the QASM
/// header), the device profile's capability and cost keys, the budget and the docs
/// use these and no other (docs/formats.md has the table with the unitaries).
pub mod names {
    pub const CHAIN_ROTATE: &str = "chain_rotate";
    pub const LIGHT_SHIFT: &str = "light_shift";
    pub const CHAIN_MS: &str = "chain_ms";
    pub const PAIR_MS: &str = "pair_ms";
    pub const ION_ROTATE: &str = "ion_rotate";
    pub const FRAME_Z: &str = "frame_z";
    pub const HIDE: &str = "hide";
    pub const UNHIDE: &str = "unhide";
    pub const MEASURE: &str = "measure";
    pub const RESET: &str = "reset";
    /// All of them, in the order of [`super::NativeOp`]'s variants.
    pub const ALL: [&str; 10] = [
        CHAIN_ROTATE,
        LIGHT_SHIFT,
        CHAIN_MS,
        PAIR_MS,
        ION_ROTATE,
        FRAME_Z,
        HIDE,
        UNHIDE,
        MEASURE,
        RESET,
    ];
}

/// One native operation.
#[derive(Debug, Clone, Copy, PartialEq)]
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
    /// The operation's one name ([`names`]).
    pub fn name(&self) -> &'static str {
        match self {
            NativeOp::Collective { .. } => names::CHAIN_ROTATE,
            NativeOp::LightShift { .. } => names::LIGHT_SHIFT,
            NativeOp::Ms { .. } => names::CHAIN_MS,
            NativeOp::PairMs { .. } => names::PAIR_MS,
            NativeOp::Addressed { .. } => names::ION_ROTATE,
            NativeOp::VirtualZ { .. } => names::FRAME_Z,
            NativeOp::Hide { .. } => names::HIDE,
            NativeOp::Unhide { .. } => names::UNHIDE,
            NativeOp::Measure { .. } => names::MEASURE,
            NativeOp::Reset { .. } => names::RESET,
        }
    }

    /// The single ion this operation addresses, if it addresses one or two (the
    /// lower for a pair).
    pub fn addressed_ions(&self) -> Option<(u32, Option<u32>)> {
        match *self {
            NativeOp::LightShift { ion, .. }
            | NativeOp::Addressed { ion, .. }
            | NativeOp::Hide { ion }
            | NativeOp::Unhide { ion }
            | NativeOp::Measure { ion, .. }
            | NativeOp::Reset { ion } => Some((ion, None)),
            NativeOp::PairMs { a, b, .. } => Some((a, Some(b))),
            NativeOp::Collective { .. } | NativeOp::Ms { .. } | NativeOp::VirtualZ { .. } => None,
        }
    }

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
    /// Where the sequence came from, when tutti compiled it. Written into every
    /// format and read back, never part of equivalence (the checker ignores it).
    pub provenance: Option<Provenance>,
    /// Checkpoints, in order: checkpoint `k` lies before step `checkpoints[k]`
    /// (non-decreasing; equal to the step count at the end). A compile puts one
    /// where the circuit has a barrier; `check --locate` compares section by section
    /// between them. Not part of the unitary.
    pub checkpoints: Vec<usize>,
    /// The compile trace: at each point the circuit's first `instrs` instructions
    /// and the sequence's first `steps` steps are claimed to be the same unitary
    /// (strictly increasing in instructions, non-decreasing in steps). Written by
    /// every compile; `check --locate` aligns a sequence with its circuit through it
    /// when there are no checkpoints. Not part of the unitary.
    pub trace: Vec<SyncPoint>,
}

/// Where a compiled sequence came from: written as comments in the pulse list and
/// the QASM output and as a field in JSON.
#[derive(Debug, Clone, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Provenance {
    /// The circuit file as named on the command line, and the SHA-256 of its bytes.
    pub source: String,
    pub source_sha256: String,
    /// The device profile's name, and the SHA-256 of its TOML text.
    pub device: String,
    pub device_sha256: String,
    pub target: String,
    /// Which compiler made it (and, once there is a choice, what it minimised).
    pub compiler: String,
    /// `tutti` and its version.
    pub tool: String,
    /// How it was verified: `whole`, `window by window`, or `no`.
    pub verified: String,
}

impl Provenance {
    /// The fields as (key, value) pairs, in a fixed order, for the text formats.
    pub fn fields(&self) -> [(&'static str, &str); 8] {
        [
            ("source", &self.source),
            ("source_sha256", &self.source_sha256),
            ("device", &self.device),
            ("device_sha256", &self.device_sha256),
            ("target", &self.target),
            ("compiler", &self.compiler),
            ("tool", &self.tool),
            ("verified", &self.verified),
        ]
    }

    /// Sets a field read back from a text format; unknown keys are ignored.
    pub fn set(&mut self, key: &str, value: &str) {
        let slot = match key {
            "source" => &mut self.source,
            "source_sha256" => &mut self.source_sha256,
            "device" => &mut self.device,
            "device_sha256" => &mut self.device_sha256,
            "target" => &mut self.target,
            "compiler" => &mut self.compiler,
            "tool" => &mut self.tool,
            "verified" => &mut self.verified,
            _ => return,
        };
        *slot = value.to_string();
    }

    /// Reads `PREFIX key: value` lines (comment lines of a text format).
    pub fn from_comment_lines(text: &str, prefix: &str) -> Option<Provenance> {
        let mut p = Provenance::default();
        let mut any = false;
        for line in text.lines() {
            if let Some(rest) = line.strip_prefix(prefix) {
                if let Some((k, v)) = rest.split_once(": ") {
                    p.set(k.trim(), v.trim_end());
                    any = true;
                }
            }
        }
        any.then_some(p)
    }
}

impl Sequence {
    pub fn new(n_ions: u32, cregs: Vec<Register>) -> Sequence {
        Sequence {
            n_ions,
            cregs,
            steps: Vec::new(),
            provenance: None,
            checkpoints: Vec::new(),
            trace: Vec::new(),
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

    /// One more than the highest ion any step addresses by number (0 when none
    /// does): the ions a hand-written or compiled program uses on purpose.
    pub fn addressed_ion_count(&self) -> u32 {
        self.steps
            .iter()
            .filter_map(|s| s.op.addressed_ions())
            .map(|(a, b)| a.max(b.unwrap_or(0)) + 1)
            .max()
            .unwrap_or(0)
    }

    /// What `tutti inspect` shows of a sequence.
    pub fn summary(&self) -> SequenceSummary {
        let mut by_op = std::collections::BTreeMap::new();
        for s in &self.steps {
            *by_op.entry(s.op.name().to_string()).or_insert(0) += 1;
        }
        SequenceSummary {
            ions: self.n_ions,
            addressed_ions: self.addressed_ion_count(),
            bits: self.n_clbits(),
            steps: self.steps.len(),
            entangling_pulses: self.steps.iter().filter(|s| s.op.is_entangling()).count(),
            conditioned: self.steps.iter().filter(|s| s.condition.is_some()).count(),
            by_op,
        }
    }
}

/// The figures `tutti inspect` prints for a pulse sequence.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SequenceSummary {
    pub ions: u32,
    /// One more than the highest ion addressed by number.
    pub addressed_ions: u32,
    pub bits: u32,
    pub steps: usize,
    pub entangling_pulses: usize,
    pub conditioned: usize,
    /// Steps by operation name (the pulse list's names).
    pub by_op: std::collections::BTreeMap<String, usize>,
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

/// `exp(-i theta/2 sigma_phi)`: the single-ion unitary of a collective rotation
/// `R(theta, phi)` (and of an addressed one).
pub fn rotation(theta: f64, phi: f64) -> crate::circuit::Mat2 {
    let (s, c) = (theta / 2.0).sin_cos();
    let e = num_complex::Complex64::from_polar(1.0, phi);
    let mi = num_complex::Complex64::new(0.0, -1.0);
    [
        [num_complex::Complex64::new(c, 0.0), mi * s * e.conj()],
        [mi * s * e, num_complex::Complex64::new(c, 0.0)],
    ]
}

/// `exp(-i theta/2 Z)`: a light shift, or a frame change on every ion.
pub fn z_rotation(theta: f64) -> crate::circuit::Mat2 {
    let z = num_complex::Complex64::new(0.0, 0.0);
    [
        [num_complex::Complex64::from_polar(1.0, -theta / 2.0), z],
        [z, num_complex::Complex64::from_polar(1.0, theta / 2.0)],
    ]
}

/// A point where a prefix of a circuit (its first `instrs` instructions) and a prefix
/// of a sequence compiled from it (its first `steps` steps) are claimed to be the
/// same unitary; the checker verifies a sequence window by window between them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SyncPoint {
    pub instrs: usize,
    pub steps: usize,
}
