//! The form both OpenQASM circuits and native sequences take for simulation: a list
//! of unitary kernels cut by measurements, resets and conditions.
//!
//! Invariant: a [`Program`] of `n` qubits only names qubits below `n`; the unitary
//! of each kernel is exactly the unitary of the operation it came from (global phase
//! included, except where a comment says otherwise).

use crate::circuit::{Circuit, Condition, GateKind, Mat2, Op};
use crate::native::{NativeOp, Sequence};
use nalgebra::DMatrix;
use num_complex::Complex64 as C64;

/// A unitary operation in simulator terms.
#[derive(Debug, Clone, PartialEq)]
pub enum Kernel {
    /// A 2x2 on one qubit.
    One {
        q: usize,
        m: Mat2,
    },
    /// A 2x2 on `target` when every control is 1.
    Controlled {
        controls: Vec<usize>,
        target: usize,
        m: Mat2,
    },
    Swap {
        a: usize,
        b: usize,
    },
    /// `exp(-i sum_k w_k P_a P_b)` with `P = Z` when `axis` is `None`, else `sigma_axis`.
    Ising {
        axis: Option<f64>,
        terms: Vec<(usize, usize, f64)>,
    },
    /// `exp(-i theta/4 S_phi^2)` over `qubits` (the global MS pulse).
    Ms {
        theta: f64,
        phi: f64,
        qubits: Vec<usize>,
    },
    /// The same 2x2 on each of `qubits` (a collective rotation).
    Collective {
        m: Mat2,
        qubits: Vec<usize>,
    },
    /// A dense matrix on up to six qubits (argument 0 = bit 0).
    Dense {
        qubits: Vec<usize>,
        m: DMatrix<C64>,
    },
}

/// One item of a program.
#[derive(Debug, Clone, PartialEq)]
pub enum Item {
    Unitary(Kernel),
    Measure {
        q: usize,
        clbit: u32,
    },
    Reset {
        q: usize,
    },
    /// A unitary applied only when the condition holds.
    Conditioned {
        condition: Condition,
        kernel: Kernel,
    },
}

/// A program over `n_qubits` qubits, ready for the simulator and the checker.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Program {
    pub n_qubits: usize,
    pub items: Vec<Item>,
    /// Defects that no unitary shows, found while lowering: an ion measured or reset
    /// while hidden, an ion still hidden at the end. The checker never calls a
    /// program with faults equal to anything.
    pub faults: Vec<String>,
}

/// Why a program cannot be simulated.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LowerError {
    #[error(
        "gate `{0}` is opaque: its unitary is unknown, so it can be neither simulated nor compiled"
    )]
    Opaque(String),
}

pub use crate::native::{rotation, z_rotation};

impl Kernel {
    /// The kernel of a library gate on the given qubits (exact, phase included).
    pub fn of_gate(gate: &crate::circuit::Gate, qubits: &[usize]) -> Kernel {
        if let Some(m) = gate.matrix2() {
            return Kernel::One { q: qubits[0], m };
        }
        if let Some((n_controls, m)) = gate.controlled() {
            return Kernel::Controlled {
                controls: qubits[..n_controls].to_vec(),
                target: qubits[n_controls],
                m,
            };
        }
        let t = gate.params[0];
        match gate.kind {
            GateKind::Swap => Kernel::Swap {
                a: qubits[0],
                b: qubits[1],
            },
            GateKind::Rzz => Kernel::Ising {
                axis: None,
                terms: vec![(qubits[0], qubits[1], t / 2.0)],
            },
            GateKind::Rxx => Kernel::Ising {
                axis: Some(0.0),
                terms: vec![(qubits[0], qubits[1], t / 2.0)],
            },
            GateKind::Ryy => Kernel::Ising {
                axis: Some(std::f64::consts::FRAC_PI_2),
                terms: vec![(qubits[0], qubits[1], t / 2.0)],
            },
            _ => Kernel::Dense {
                qubits: qubits.to_vec(),
                m: gate.matrix(),
            },
        }
    }

    /// The highest qubit this kernel touches, without allocating (`None` for an
    /// empty list): the check that runs before every kernel is applied.
    pub fn max_qubit(&self) -> Option<usize> {
        match self {
            Kernel::One { q, .. } => Some(*q),
            Kernel::Controlled {
                controls, target, ..
            } => controls.iter().copied().chain([*target]).max(),
            Kernel::Swap { a, b } => Some(*a.max(b)),
            Kernel::Ising { terms, .. } => terms.iter().map(|t| t.0.max(t.1)).max(),
            Kernel::Ms { qubits, .. }
            | Kernel::Collective { qubits, .. }
            | Kernel::Dense { qubits, .. } => qubits.iter().copied().max(),
        }
    }

    /// The qubits this kernel touches.
    pub fn qubits(&self) -> Vec<usize> {
        match self {
            Kernel::One { q, .. } => vec![*q],
            Kernel::Controlled {
                controls, target, ..
            } => {
                let mut v = controls.clone();
                v.push(*target);
                v
            }
            Kernel::Swap { a, b } => vec![*a, *b],
            Kernel::Ising { terms, .. } => {
                let mut v: Vec<usize> = terms.iter().flat_map(|t| [t.0, t.1]).collect();
                v.sort_unstable();
                v.dedup();
                v
            }
            Kernel::Ms { qubits, .. }
            | Kernel::Collective { qubits, .. }
            | Kernel::Dense { qubits, .. } => qubits.clone(),
        }
    }
}

impl Program {
    /// Lowers a circuit. Barriers vanish; opaque gates are an error.
    pub fn from_circuit(c: &Circuit) -> Result<Program, LowerError> {
        Program::from_circuit_with_starts(c).map(|(p, _)| p)
    }

    /// [`Program::from_circuit`], also returning for each instruction the index of its
    /// first item (one more entry at the end: the item count), so that a range of
    /// instructions maps to a range of items.
    pub fn from_circuit_with_starts(c: &Circuit) -> Result<(Program, Vec<usize>), LowerError> {
        let mut items = Vec::with_capacity(c.instrs.len());
        let mut starts = Vec::with_capacity(c.instrs.len() + 1);
        for instr in &c.instrs {
            starts.push(items.len());
            let kernel = match &instr.op {
                Op::Gate { gate, qubits } => {
                    let qs: Vec<usize> = qubits.iter().map(|q| q.0 as usize).collect();
                    Kernel::of_gate(gate, &qs)
                }
                Op::Opaque { decl, .. } => {
                    return Err(LowerError::Opaque(c.opaque[*decl as usize].name.clone()))
                }
                Op::Barrier { .. } => continue,
                Op::Measure { qubit, clbit } => {
                    items.push(Item::Measure {
                        q: qubit.0 as usize,
                        clbit: clbit.0,
                    });
                    continue;
                }
                Op::Reset { qubit } => {
                    items.push(Item::Reset {
                        q: qubit.0 as usize,
                    });
                    continue;
                }
            };
            items.push(match &instr.condition {
                Some(condition) => Item::Conditioned {
                    condition: condition.clone(),
                    kernel,
                },
                None => Item::Unitary(kernel),
            });
        }
        starts.push(items.len());
        let p = Program {
            n_qubits: c.n_qubits() as usize,
            items,
            faults: Vec::new(),
        };
        Ok((p, starts))
    }

    /// Lowers a native sequence, resolving hidden ions: collective and MS pulses act
    /// on the ions not hidden at that point. An ion measured or reset while hidden, or
    /// still hidden at the end, is a fault.
    pub fn from_sequence(s: &Sequence) -> Program {
        let mut hidden = vec![false; s.n_ions as usize];
        let mut p = Program::from_steps(s.n_ions, &s.steps, &mut hidden);
        p.faults.extend(still_hidden(&hidden));
        p
    }

    /// Lowers a run of steps of a sequence of `n_ions` ions, starting with the ions
    /// marked in `hidden` hidden and leaving there which are hidden at the end (the
    /// state that crosses from one window of a sequence to the next).
    pub fn from_steps(n_ions: u32, steps: &[crate::native::Step], hidden: &mut [bool]) -> Program {
        let n = n_ions as usize;
        let mut items = Vec::with_capacity(steps.len());
        let mut faults = Vec::new();
        for step in steps {
            let visible = |hidden: &[bool]| (0..n).filter(|&i| !hidden[i]).collect::<Vec<usize>>();
            let kernel = match step.op {
                NativeOp::Collective { theta, phi } => Kernel::Collective {
                    m: rotation(theta, phi),
                    qubits: visible(hidden),
                },
                NativeOp::VirtualZ { theta } => Kernel::Collective {
                    m: z_rotation(theta),
                    qubits: (0..n).collect(),
                },
                NativeOp::LightShift { ion, theta } => Kernel::One {
                    q: ion as usize,
                    m: z_rotation(theta),
                },
                NativeOp::Addressed { ion, theta, phi } => Kernel::One {
                    q: ion as usize,
                    m: rotation(theta, phi),
                },
                NativeOp::Ms { theta, phi } => Kernel::Ms {
                    theta,
                    phi,
                    qubits: visible(hidden),
                },
                NativeOp::PairMs { a, b, theta, phi } => Kernel::Ms {
                    theta,
                    phi,
                    qubits: vec![a as usize, b as usize],
                },
                NativeOp::Hide { ion } => {
                    hidden[ion as usize] = true;
                    continue;
                }
                NativeOp::Unhide { ion } => {
                    hidden[ion as usize] = false;
                    continue;
                }
                NativeOp::Measure { ion, clbit } => {
                    if hidden[ion as usize] {
                        faults.push(format!("ion {ion} is measured while hidden"));
                    }
                    items.push(Item::Measure {
                        q: ion as usize,
                        clbit,
                    });
                    continue;
                }
                NativeOp::Reset { ion } => {
                    if hidden[ion as usize] {
                        faults.push(format!("ion {ion} is reset while hidden"));
                    }
                    items.push(Item::Reset { q: ion as usize });
                    continue;
                }
            };
            items.push(match &step.condition {
                Some(condition) => Item::Conditioned {
                    condition: (**condition).clone(),
                    kernel,
                },
                None => Item::Unitary(kernel),
            });
        }
        Program {
            n_qubits: n,
            items,
            faults,
        }
    }

    /// The unitary kernels, for a program without measurement, reset or condition.
    pub fn kernels(&self) -> impl Iterator<Item = &Kernel> {
        self.items.iter().filter_map(|i| match i {
            Item::Unitary(k) => Some(k),
            _ => None,
        })
    }
}

/// About how many bytes the checker holds for a sequence of `steps` steps on
/// `n_ions` ions while comparing it whole: the lowered items with their ion lists,
/// their copy in segments and the fused copy (three in all).
pub fn sequence_check_bytes(steps: usize, n_ions: usize) -> usize {
    let per_item = std::mem::size_of::<Item>() + std::mem::size_of::<usize>() * n_ions;
    steps.saturating_mul(per_item).saturating_mul(3)
}

/// The same for a circuit of `instrs` instructions.
pub fn circuit_check_bytes(instrs: usize) -> usize {
    let per_item = std::mem::size_of::<Item>() + 4 * std::mem::size_of::<usize>();
    instrs.saturating_mul(per_item).saturating_mul(3)
}

/// A fault for each ion left hidden.
pub fn still_hidden(hidden: &[bool]) -> impl Iterator<Item = String> + '_ {
    hidden
        .iter()
        .enumerate()
        .filter(|(_, &h)| h)
        .map(|(ion, _)| format!("ion {ion} is still hidden at the end of the sequence"))
}

impl std::fmt::Display for Kernel {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Kernel::One { q, .. } => write!(f, "a single-qubit gate on qubit {q}"),
            Kernel::Controlled {
                controls, target, ..
            } => {
                write!(f, "a gate on qubit {target} controlled by {controls:?}")
            }
            Kernel::Swap { a, b } => write!(f, "a swap of qubits {a} and {b}"),
            Kernel::Ising { terms, .. } => {
                write!(f, "a two-qubit interaction on {} pair(s)", terms.len())
            }
            Kernel::Ms { theta, qubits, .. } => {
                write!(f, "an MS pulse of area {theta} on {} ions", qubits.len())
            }
            Kernel::Collective { qubits, .. } => {
                write!(f, "a collective rotation on {} ions", qubits.len())
            }
            Kernel::Dense { qubits, .. } => {
                write!(f, "a {}-qubit gate on {qubits:?}", qubits.len())
            }
        }
    }
}
