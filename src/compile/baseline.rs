//! The baseline compiler of docs/budget.md: every operation of the canonical form
//! compiled on its own, no scheduling and no merging.
//!
//! - Collective target: a single-qubit unitary `e^{ia} Rz(b) Ry(g) Rz(d)` on ion k is
//!   `L_k(d)`, then `R(pi/2, 0) L_k(g) R(-pi/2, 0)` (gate-set fact 4), then `L_k(b)`. A
//!   ZZ interaction is turned into XX by collective `Ry(-/+ pi/2)` pulses and made by
//!   the sign-vector echo of gate-set facts 5 and 6 over every ion of the device:
//!   `m` MS pulses of area `theta/m`, `m` the order of the smallest Hadamard matrix of
//!   at least `n_ions - 1`.
//! - Addressed target: addressed rotations and light shifts for single-qubit
//!   unitaries; one pair MS (or, without pair MS, hiding every other ion around one
//!   global MS) per ZZ interaction.
//!
//! Invariant: the output is a sequence on the device's ion count whose unitary equals
//! the input's (up to global phase) with the extra ions left as they were.

use super::hadamard::smallest_hadamard;
use super::lower::{lower, zyz, Canon, CanonStep};
use crate::circuit::{Circuit, Condition};
use crate::native::profile::Profile;
use crate::native::{NativeOp, Sequence, Step};
use std::f64::consts::{FRAC_PI_2, PI};

/// Which native operations the compiler may use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Target {
    /// Collective rotations, light shifts and global MS pulses only.
    Collective,
    /// Also pair MS pulses, addressed rotations and hiding, where the device has them.
    Addressed,
}

impl Target {
    /// The name the command line takes and prints.
    pub fn name(self) -> &'static str {
        match self {
            Target::Collective => "collective",
            Target::Addressed => "addressed",
        }
    }
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CompileError {
    #[error(transparent)]
    Lower(#[from] super::lower::LowerError),
    #[error("the circuit needs {needed} qubits but the device `{device}` has {ions} ions")]
    TooFewIons {
        needed: u32,
        ions: u32,
        device: String,
    },
    #[error("the addressed target needs pair MS pulses or hiding, and device `{0}` has neither")]
    NoAddressedEntangler(String),
    #[error("the compiled sequence grows past {limit} steps (at instruction {instruction}); raise --max-pulses if the machine has the memory (about {bytes_per_step} bytes a step), or compile a smaller circuit")]
    TooManySteps {
        limit: usize,
        instruction: usize,
        bytes_per_step: usize,
    },
    #[error("out of memory after {steps} steps (at instruction {instruction}); lower --max-pulses to be told sooner, or run where more memory is available")]
    OutOfMemory { steps: usize, instruction: usize },
}

/// Most steps a compile may produce unless told otherwise (`--max-pulses`): about
/// 440 MB of sequence and trace (44 bytes a step).
pub const DEFAULT_MAX_STEPS: usize = 10_000_000;

/// Bytes one step of a compiled sequence takes, with its trace entry.
pub const BYTES_PER_STEP: usize = std::mem::size_of::<Step>() + std::mem::size_of::<u32>();

/// Whether `profile`'s device can run `c` on `target` at all: enough ions, and an
/// entangling operation the target may use. Shared by both compilers.
pub fn check_device(c: &Circuit, profile: &Profile, target: Target) -> Result<(), CompileError> {
    let ions = profile.device.ions;
    if c.n_qubits() > ions {
        return Err(CompileError::TooFewIons {
            needed: c.n_qubits(),
            ions,
            device: profile.device.name.clone(),
        });
    }
    let caps = profile.capabilities;
    if target == Target::Addressed && !caps.pair_ms && !caps.hiding {
        return Err(CompileError::NoAddressedEntangler(
            profile.device.name.clone(),
        ));
    }
    Ok(())
}

/// Angles this close to zero are left out.
const EPS: f64 = 1e-12;

struct Emit {
    seq: Sequence,
    condition: Option<Condition>,
}

impl Emit {
    fn push(&mut self, op: NativeOp) {
        self.seq.steps.push(Step {
            op,
            condition: self.condition.clone().map(Box::new),
        });
    }

    fn shift(&mut self, ion: u32, theta: f64) {
        let theta = wrap(theta);
        if theta.abs() > EPS {
            self.push(NativeOp::LightShift { ion, theta });
        }
    }
}

/// Wraps an angle into (-pi, pi]; rotations by 2 pi are -1, a global phase here.
pub(crate) fn wrap(theta: f64) -> f64 {
    // `%` returns its left side exactly when that is smaller than the modulus:
    // skipped then (it is a library call, and most angles here are small).
    let mut t = if theta.abs() < 2.0 * PI {
        theta
    } else {
        theta % (2.0 * PI)
    };
    if t > PI {
        t -= 2.0 * PI;
    } else if t <= -PI {
        t += 2.0 * PI;
    }
    t
}

/// Compiles a circuit with the baseline compiler.
pub fn compile_baseline(
    c: &Circuit,
    profile: &Profile,
    target: Target,
) -> Result<Sequence, CompileError> {
    compile_baseline_traced(c, profile, target).map(|(seq, _)| seq)
}

/// Like [`compile_baseline`], also returning for every step of the sequence the
/// index of the circuit instruction it came from. The steps of one instruction are
/// contiguous and in instruction order, so the sequence can be verified window by
/// window.
pub fn compile_baseline_traced(
    c: &Circuit,
    profile: &Profile,
    target: Target,
) -> Result<(Sequence, Vec<u32>), CompileError> {
    compile_baseline_bounded(c, profile, target, DEFAULT_MAX_STEPS)
}

/// [`compile_baseline_traced`] that stops with an error once the sequence has more
/// than `max_steps` steps, or when memory for it runs out (growth is fallible).
pub fn compile_baseline_bounded(
    c: &Circuit,
    profile: &Profile,
    target: Target,
    max_steps: usize,
) -> Result<(Sequence, Vec<u32>), CompileError> {
    check_device(c, profile, target)?;
    let ions = profile.device.ions;
    let caps = profile.capabilities;
    let canon = lower(c)?;
    let mut e = Emit {
        seq: Sequence::new(ions, c.cregs.clone()),
        condition: None,
    };
    let echo_rows = smallest_hadamard((ions as usize).saturating_sub(1).max(1));
    let mut origin = Vec::new();
    let mut last_source = 0;
    for CanonStep {
        op,
        condition,
        source,
    } in canon
    {
        // Steps emitted so far came from the previous canonical operation.
        let steps = e.seq.steps.len();
        if steps > max_steps {
            return Err(CompileError::TooManySteps {
                limit: max_steps,
                instruction: last_source as usize + 1,
                bytes_per_step: BYTES_PER_STEP,
            });
        }
        // Room for the largest block one operation makes, taken fallibly.
        let headroom = 4096 + 8 * (ions as usize) * (ions as usize);
        let oom = || CompileError::OutOfMemory {
            steps,
            instruction: last_source as usize + 1,
        };
        if e.seq.steps.capacity() - steps < headroom {
            e.seq
                .steps
                .try_reserve(steps.max(headroom))
                .map_err(|_| oom())?;
        }
        if origin.capacity() < e.seq.steps.capacity() {
            let more = e.seq.steps.capacity() - origin.len();
            origin.try_reserve_exact(more).map_err(|_| oom())?;
        }
        origin.resize(steps, last_source);
        last_source = source;
        e.condition = condition;
        match op {
            Canon::Local { q, m } => {
                let (_, beta, gamma, delta) = zyz(&m);
                e.shift(q, delta);
                if gamma.abs() > EPS {
                    if target == Target::Addressed && caps.addressed_rotation {
                        e.push(NativeOp::Addressed {
                            ion: q,
                            theta: gamma,
                            phi: FRAC_PI_2,
                        });
                    } else {
                        e.push(NativeOp::Collective {
                            theta: FRAC_PI_2,
                            phi: 0.0,
                        });
                        e.shift(q, gamma);
                        e.push(NativeOp::Collective {
                            theta: -FRAC_PI_2,
                            phi: 0.0,
                        });
                    }
                }
                e.shift(q, beta);
            }
            Canon::Zz { a, b, theta } => {
                if theta.abs() <= EPS {
                    continue;
                }
                match target {
                    Target::Collective => zz_by_echo(&mut e, a, b, theta, &echo_rows),
                    Target::Addressed => zz_addressed(&mut e, a, b, theta, profile),
                }
            }
            Canon::Measure { q, clbit } => e.push(NativeOp::Measure { ion: q, clbit }),
            Canon::Reset { q } => e.push(NativeOp::Reset { ion: q }),
        }
    }
    if e.seq.steps.len() > max_steps {
        return Err(CompileError::TooManySteps {
            limit: max_steps,
            instruction: last_source as usize + 1,
            bytes_per_step: BYTES_PER_STEP,
        });
    }
    origin.resize(e.seq.steps.len(), last_source);
    Ok((e.seq, origin))
}

/// `exp(-i theta/2 Z_a Z_b)` on the collective target: Z to X on every ion, the
/// echo, X back to Z. Ry(-pi/2) maps X to Z, so `ZZ = Ry(-pi/2) XX Ry(pi/2)`.
fn zz_by_echo(e: &mut Emit, a: u32, b: u32, theta: f64, rows: &[Vec<i8>]) {
    let n = e.seq.n_ions as usize;
    let m = rows.len();
    let mut column = vec![0usize; n];
    let mut next = 1;
    for (ion, col) in column.iter_mut().enumerate() {
        if ion as u32 != a && ion as u32 != b {
            *col = next;
            next += 1;
        }
    }
    e.push(NativeOp::Collective {
        theta: FRAC_PI_2,
        phi: FRAC_PI_2,
    });
    for row in rows {
        let flipped: Vec<u32> = (0..n)
            .filter(|&i| row[column[i]] < 0)
            .map(|i| i as u32)
            .collect();
        for &i in &flipped {
            e.push(NativeOp::LightShift { ion: i, theta: PI });
        }
        e.push(NativeOp::Ms {
            theta: theta / m as f64,
            phi: 0.0,
        });
        for &i in &flipped {
            e.push(NativeOp::LightShift { ion: i, theta: -PI });
        }
    }
    e.push(NativeOp::Collective {
        theta: -FRAC_PI_2,
        phi: FRAC_PI_2,
    });
}

/// `exp(-i theta/2 Z_a Z_b)` on the addressed target. A pair MS of area theta is
/// `exp(-i theta/2 X_a X_b)` up to phase (gate-set fact 1 with two ions).
fn zz_addressed(e: &mut Emit, a: u32, b: u32, theta: f64, profile: &Profile) {
    let caps = profile.capabilities;
    let to_x = |e: &mut Emit, sign: f64| {
        for ion in [a, b] {
            if caps.addressed_rotation {
                e.push(NativeOp::Addressed {
                    ion,
                    theta: sign * FRAC_PI_2,
                    phi: FRAC_PI_2,
                });
            } else {
                e.push(NativeOp::Collective {
                    theta: FRAC_PI_2,
                    phi: 0.0,
                });
                e.shift(ion, sign * FRAC_PI_2);
                e.push(NativeOp::Collective {
                    theta: -FRAC_PI_2,
                    phi: 0.0,
                });
            }
        }
    };
    to_x(e, 1.0);
    if caps.pair_ms {
        e.push(NativeOp::PairMs {
            a,
            b,
            theta,
            phi: 0.0,
        });
    } else {
        let others: Vec<u32> = (0..e.seq.n_ions).filter(|&i| i != a && i != b).collect();
        for &i in &others {
            e.push(NativeOp::Hide { ion: i });
        }
        e.push(NativeOp::Ms { theta, phi: 0.0 });
        for &i in &others {
            e.push(NativeOp::Unhide { ion: i });
        }
    }
    to_x(e, -1.0);
}
