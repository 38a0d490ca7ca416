//! The optimizing compiler: one pipeline, data flowing one way (ARCHITECTURE.md):
//!
//! ```text
//! circuit --segments--> instruction ranges between fences (measure, reset,
//!         condition, barrier; and, for window-by-window verification, a cap on the
//!         qubits one range touches)
//! range --phase_poly--> CNOT/diagonal regions as ZZ interactions
//!       --lower--> canonical form --dag::PASSES--> fused canonical form
//!       --schedule--> layers and blocks --emit--> native steps (peephole included)
//! ```
//!
//! Each range is compiled on its own, so its steps are the range's unitary and a
//! sync point `(range end, steps so far)` lies after it: the checker can verify the
//! output window by window at those points.
//!
//! Invariant: the output equals the input up to global phase, with the device's other
//! ions left as they were (the driver verifies this unless told not to).

pub mod controlled;
pub mod dag;
pub mod emit;
pub mod ladder;
pub mod multi_control;
pub mod pair_runs;
pub mod phase_poly;
pub mod schedule;

use super::baseline::{CompileError, Target, BYTES_PER_STEP};
use super::lower::{lower, Canon};
use crate::circuit::{Circuit, Instr, Op};
use crate::native::profile::Profile;
use crate::native::SyncPoint;
use crate::native::{NativeOp, Sequence, Step};

pub use emit::BlockReport;

/// What the optimizer minimises when it chooses how to make a block.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Objective {
    /// MS pulses, then MS area.
    Pulses,
    /// MS area, then MS pulses.
    Area,
    /// Duration from the profile's timings (the default).
    #[default]
    Duration,
    /// The budget's expected error.
    Error,
}

impl Objective {
    pub const ALL: [Objective; 4] = [
        Objective::Pulses,
        Objective::Area,
        Objective::Duration,
        Objective::Error,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Objective::Pulses => "pulses",
            Objective::Area => "area",
            Objective::Duration => "duration",
            Objective::Error => "error",
        }
    }
}

/// Settings of one optimizing compile.
#[derive(Debug, Clone, Copy)]
pub struct OptConfig {
    pub target: Target,
    pub objective: Objective,
    /// Most steps the output may have.
    pub max_steps: usize,
    /// Most qubits one range may touch (ranges end early to keep each window of a
    /// window-by-window verification small); `None` for no cap.
    pub window_qubits: Option<usize>,
    /// Most instructions in one range (at most [`MAX_RANGE_INSTRS`]): every range
    /// end is a sync point, so a smaller value gives a finer compile trace at the
    /// cost of blocks that cannot span the cuts.
    pub max_range_instrs: usize,
    /// Time one block's coupling program may take before the fallback is used.
    pub block_time: std::time::Duration,
    /// Solver time for the whole compile; once spent, new blocks are made by the
    /// constructions alone (so a long circuit never stalls in the solver).
    pub solver_time: std::time::Duration,
    /// Keep every block's coupling and synthesis in [`Optimized::certificates`].
    pub keep_certificates: bool,
    /// Leave out the Z rotations that would end on a qubit just before the final
    /// measurements ([`final_measured`]). The output then equals the input only up
    /// to a final diagonal on the measured qubits: verify it with
    /// `CheckConfig::up_to_final_diagonal`.
    pub drop_final_z: bool,
    /// Build and cost every candidate construction of every block, and run the
    /// coupling program for every block, instead of skipping those whose lower
    /// bounds cannot win (docs/optimizer.md): slower, same costs; for tests and
    /// measurements.
    pub build_all: bool,
}

impl Default for OptConfig {
    fn default() -> OptConfig {
        OptConfig {
            target: Target::Collective,
            objective: Objective::default(),
            max_steps: super::DEFAULT_MAX_STEPS,
            window_qubits: None,
            max_range_instrs: MAX_RANGE_INSTRS,
            block_time: std::time::Duration::from_secs(2),
            solver_time: std::time::Duration::from_secs(3),
            keep_certificates: false,
            drop_final_z: false,
            build_all: false,
        }
    }
}

/// An optimized sequence with its sync points and what each block cost.
pub struct Optimized {
    pub sequence: Sequence,
    pub sync: Vec<SyncPoint>,
    pub blocks: Vec<BlockReport>,
    /// Time spent in the coupling program's solver.
    pub solver_time: std::time::Duration,
    /// With [`OptConfig::build_all`]: built candidates whose key was below the lower
    /// bound they carried (the one they are skipped by otherwise). Zero when the
    /// bounds are sound.
    pub bound_violations: usize,
    /// Each block's coupling on its own ions and the synthesis offered for it (sign
    /// vectors and weights), when asked for.
    pub certificates: Vec<(
        crate::compile::couple::Coupling,
        std::sync::Arc<crate::compile::couple::Synthesis>,
    )>,
}

/// Most instructions in one range: blocks never span more, and the memory of a
/// range's two plans (with and without the shared quiet column) stays bounded.
pub const MAX_RANGE_INSTRS: usize = 4096;

/// One range of instructions and how to compile it.
enum Range {
    /// Unconditioned gates.
    Gates(std::ops::Range<usize>),
    /// One instruction with a condition.
    Conditioned(usize),
    /// A measurement or reset.
    Fence(usize),
    /// A barrier: nothing to emit, but nothing moves across it.
    Barrier(usize),
}

fn ranges(c: &Circuit, window_qubits: Option<usize>, max_len: usize) -> Vec<Range> {
    let max_len = max_len.clamp(1, MAX_RANGE_INSTRS);
    let mut out = Vec::new();
    let mut start = 0;
    let mut touched: Vec<bool> = vec![false; c.n_qubits() as usize];
    let mut count = 0;
    let close = |out: &mut Vec<Range>, start: usize, end: usize| {
        if end > start {
            out.push(Range::Gates(start..end));
        }
    };
    for (i, instr) in c.instrs.iter().enumerate() {
        let special = instr.condition.is_some()
            || matches!(
                instr.op,
                Op::Measure { .. } | Op::Reset { .. } | Op::Barrier { .. }
            );
        if special {
            close(&mut out, start, i);
            out.push(match instr.op {
                _ if instr.condition.is_some() => Range::Conditioned(i),
                Op::Barrier { .. } => Range::Barrier(i),
                _ => Range::Fence(i),
            });
            start = i + 1;
            touched.iter_mut().for_each(|t| *t = false);
            count = 0;
            continue;
        }
        if i - start >= max_len {
            // Bounded ranges keep the memory of one range's plans small.
            close(&mut out, start, i);
            start = i;
            touched.iter_mut().for_each(|t| *t = false);
            count = 0;
        }
        if let Some(cap) = window_qubits {
            let new = instr
                .op
                .qubits()
                .iter()
                .filter(|q| !touched[q.0 as usize])
                .count();
            if count > 0 && count + new > cap {
                close(&mut out, start, i);
                start = i;
                touched.iter_mut().for_each(|t| *t = false);
                count = 0;
            }
            for q in instr.op.qubits() {
                if !touched[q.0 as usize] {
                    touched[q.0 as usize] = true;
                    count += 1;
                }
            }
        }
    }
    close(&mut out, start, c.instrs.len());
    out
}

/// The qubits of the circuit's final run of measurements (unconditioned
/// measurements, with only barriers between them, that end the circuit), and the
/// index where that run starts.
pub fn final_measured(c: &Circuit) -> (Vec<bool>, usize) {
    let mut measured = vec![false; c.n_qubits() as usize];
    let mut start = c.instrs.len();
    for (i, instr) in c.instrs.iter().enumerate().rev() {
        match (&instr.op, &instr.condition) {
            (Op::Measure { qubit, .. }, None) => {
                measured[qubit.0 as usize] = true;
                start = i;
            }
            (Op::Barrier { .. }, None) => {}
            _ => break,
        }
    }
    (measured, start)
}

/// A circuit holding `instrs` with `c`'s registers.
fn sub_circuit(c: &Circuit, instrs: Vec<Instr>) -> Circuit {
    Circuit {
        qregs: c.qregs.clone(),
        cregs: c.cregs.clone(),
        opaque: c.opaque.clone(),
        instrs,
    }
}

/// An unconditioned library gate on the given qubits (what the circuit passes emit).
pub(crate) fn gate(kind: crate::circuit::GateKind, params: &[f64], qs: &[u32]) -> Instr {
    Instr {
        op: Op::Gate {
            gate: crate::circuit::Gate::new(kind, params),
            qubits: qs
                .iter()
                .map(|&q| crate::circuit::Qubit(q))
                .collect::<crate::circuit::Qubits>(),
        },
        condition: None,
    }
}

/// A pass that expands single gates: `expand` sees each unconditioned gate of one
/// of the `kinds` with its qubits and pushes its replacement; everything else
/// passes unchanged.
pub(crate) fn expand_gates(
    instrs: Vec<Instr>,
    kinds: &[crate::circuit::GateKind],
    mut expand: impl FnMut(&crate::circuit::Gate, &[u32], &mut Vec<Instr>),
) -> Vec<Instr> {
    let wanted = |instr: &Instr| match (&instr.op, &instr.condition) {
        (Op::Gate { gate, .. }, None) => kinds.contains(&gate.kind),
        _ => false,
    };
    // Nothing to expand (the usual case for most of these passes): the list as it
    // is, without moving every instruction into a new one.
    if !instrs.iter().any(wanted) {
        return instrs;
    }
    let mut out = Vec::with_capacity(instrs.len());
    for instr in instrs {
        match &instr.op {
            Op::Gate { gate, qubits } if wanted(&instr) => {
                let q: smallvec::SmallVec<[u32; 5]> = qubits.iter().map(|q| q.0).collect();
                expand(gate, &q, &mut out);
            }
            _ => out.push(instr),
        }
    }
    out
}

/// A pass over a range's instructions, keeping its unitary (it takes them, so that
/// what it leaves alone moves through rather than being copied).
pub type CircuitPass = fn(Vec<Instr>) -> Vec<Instr>;

/// The circuit-level passes for `target`, in order, with their names. The ladder and
/// multi-control rewrites (the first two) trade more interactions for fewer blocks, which only the
/// collective target turns into less area (their module docs).
pub fn circuit_passes(target: Target) -> Vec<(&'static str, CircuitPass)> {
    let mut passes: Vec<(&'static str, CircuitPass)> = Vec::new();
    if target == Target::Collective {
        passes.push(("multi_control", multi_control::rewrite));
        passes.push(("ladder", ladder::rewrite));
    }
    passes.push(("controlled", controlled::rewrite));
    passes.push(("phase_poly", phase_poly::rewrite));
    passes
}

/// The canonical form of `instrs` after the circuit-level and DAG passes.
pub fn canonical(
    c: &Circuit,
    instrs: &[Instr],
    target: Target,
) -> Result<Vec<Canon>, CompileError> {
    let mut rewritten = instrs.to_vec();
    for (_, pass) in circuit_passes(target) {
        rewritten = pass(rewritten);
    }
    let lowered = lower(&sub_circuit(c, rewritten))?;
    let mut g = dag::Dag::new(lowered.into_iter().map(|s| s.op));
    for (_, pass) in dag::PASSES {
        pass(&mut g);
    }
    Ok(g.ops())
}

/// Compiles `c` for `profile` with the optimizer.
pub fn compile_optimized(
    c: &Circuit,
    profile: &Profile,
    cfg: &OptConfig,
) -> Result<Optimized, CompileError> {
    super::baseline::check_device(c, profile, cfg.target)?;
    let ions = profile.device.ions;
    let shared = emit::Shared::new(cfg.solver_time);
    let n = c.n_qubits() as usize;
    let (final_qubits, final_start) = final_measured(c);
    // A range ending at or after `last_start` has only barriers between it and the
    // final run: its carried Z rotations end right before the final measurements.
    let last_start = c.instrs[..final_start]
        .iter()
        .rposition(|i| !(matches!(i.op, Op::Barrier { .. }) && i.condition.is_none()))
        .map_or(0, |k| k + 1);
    let all = ranges(c, cfg.window_qubits, cfg.max_range_instrs);
    // Ranges are compiled on their own, so a few at a time run in parallel (sharing
    // the synthesis cache and the solver time) and join in order: the output is
    // the same as one after the other, unless the solver time runs out. Several
    // per thread in each batch, so that a long range does not leave threads idle;
    // few enough that the outputs waiting to join (two batches' at most: one
    // joining, one compiling) stay small.
    let batch = 8 * rayon::current_num_threads().max(1);
    let make = |range: &Range| -> Result<RangeOut, CompileError> {
        let mut emitter = emit::Emitter::new(profile, cfg.target, cfg.objective, &shared);
        emitter.synth.time_limit = cfg.block_time;
        if cfg.keep_certificates {
            emitter.certificates = Some(Vec::new());
        }
        emitter.build_all = cfg.build_all;
        let drop: &[bool] = match range {
            Range::Gates(r) if cfg.drop_final_z && r.end >= last_start => &final_qubits,
            _ => &[],
        };
        let (end, steps) = compile_range(c, range, cfg.target, n, &mut emitter, drop)?;
        Ok(RangeOut {
            end,
            steps,
            reports: emitter.reports,
            certificates: emitter.certificates.unwrap_or_default(),
        })
    };
    let mut joined = Joined {
        seq: Sequence::new(ions, c.cregs.clone()),
        sync: Vec::new(),
        blocks: Vec::new(),
        certificates: Vec::new(),
        max_steps: cfg.max_steps,
    };
    // Each batch joins (a copy of its steps into the sequence, serial) while the
    // next batch compiles, so that copy does not leave the other threads idle. A
    // failure is reported in range order: a batch's joining ends before the next
    // batch's outcomes are looked at.
    let mut pending: Vec<Result<RangeOut, CompileError>> = Vec::new();
    for chunk in all.chunks(batch) {
        use rayon::prelude::*;
        let (made, done) = rayon::join(
            || chunk.par_iter().map(make).collect::<Vec<_>>(),
            || joined.take(std::mem::take(&mut pending)),
        );
        done?;
        pending = made;
    }
    joined.take(pending)?;
    let Joined {
        seq,
        sync,
        blocks,
        certificates,
        ..
    } = joined;
    Ok(Optimized {
        sequence: seq,
        sync,
        solver_time: shared.solver_spent(),
        bound_violations: shared.bound_violations(),
        certificates,
        blocks,
    })
}

/// Blocks' couplings with the syntheses offered for them.
type Certificates = Vec<(
    crate::compile::couple::Coupling,
    std::sync::Arc<crate::compile::couple::Synthesis>,
)>;

/// The ranges joined so far, in order.
struct Joined {
    seq: Sequence,
    sync: Vec<SyncPoint>,
    blocks: Vec<BlockReport>,
    certificates: Certificates,
    max_steps: usize,
}

impl Joined {
    /// Appends `made` in order; the first failure (of a range, or of the step limit
    /// or memory) ends it.
    fn take(&mut self, made: Vec<Result<RangeOut, CompileError>>) -> Result<(), CompileError> {
        for out in made {
            let out = out?;
            if self.seq.steps.len() + out.steps.len() > self.max_steps {
                return Err(CompileError::TooManySteps {
                    limit: self.max_steps,
                    instruction: out.end,
                    bytes_per_step: BYTES_PER_STEP,
                });
            }
            self.seq
                .steps
                .try_reserve(out.steps.len())
                .map_err(|_| CompileError::OutOfMemory {
                    steps: self.seq.steps.len(),
                    instruction: out.end,
                })?;
            self.seq.steps.extend(out.steps);
            self.blocks.extend(out.reports);
            self.certificates.extend(out.certificates);
            self.sync.push(SyncPoint {
                instrs: out.end,
                steps: self.seq.steps.len(),
            });
        }
        Ok(())
    }
}

/// What one range made: the instruction it ends before, its steps, and its block
/// reports and certificates.
struct RangeOut {
    end: usize,
    steps: Vec<Step>,
    reports: Vec<BlockReport>,
    certificates: Certificates,
}

/// The steps of one range, and the instruction it ends before.
fn compile_range(
    c: &Circuit,
    range: &Range,
    target: Target,
    n: usize,
    emitter: &mut emit::Emitter,
    drop: &[bool],
) -> Result<(usize, Vec<Step>), CompileError> {
    Ok(match *range {
        Range::Gates(ref r) => {
            let ops = canonical(c, &c.instrs[r.clone()], target)?;
            let s = schedule::schedule(&ops, n);
            (r.end, emitter.segment(&s, None, drop))
        }
        Range::Conditioned(i) => {
            let instr = &c.instrs[i];
            let steps = match instr.op {
                Op::Measure { qubit, clbit } => vec![Step {
                    op: NativeOp::Measure {
                        ion: qubit.0,
                        clbit: clbit.0,
                    },
                    condition: instr.condition.clone().map(Box::new),
                }],
                Op::Reset { qubit } => vec![Step {
                    op: NativeOp::Reset { ion: qubit.0 },
                    condition: instr.condition.clone().map(Box::new),
                }],
                Op::Barrier { .. } => Vec::new(),
                _ => {
                    let mut bare = instr.clone();
                    bare.condition = None;
                    let ops = canonical(c, std::slice::from_ref(&bare), target)?;
                    let s = schedule::schedule(&ops, n);
                    emitter.segment(&s, instr.condition.as_ref(), &[])
                }
            };
            (i + 1, steps)
        }
        Range::Fence(i) => {
            let step = match c.instrs[i].op {
                Op::Measure { qubit, clbit } => NativeOp::Measure {
                    ion: qubit.0,
                    clbit: clbit.0,
                },
                Op::Reset { qubit } => NativeOp::Reset { ion: qubit.0 },
                _ => unreachable!("fences are measurements and resets"),
            };
            (
                i + 1,
                vec![Step {
                    op: step,
                    condition: None,
                }],
            )
        }
        Range::Barrier(i) => (i + 1, Vec::new()),
    })
}
