//! Verifying a long sequence against its circuit window by window.
//!
//! A sync point `(instrs, steps)` claims that the first `instrs` instructions of the
//! circuit and the first `steps` steps of the sequence are the same unitary (up to
//! global phase). Between consecutive sync points lies a window; the windows are
//! compared independently (in parallel) with [`check`], and the product of equal
//! windows is equal, so equal windows prove the whole sequence equal. A window may
//! span many instructions, so an optimizer that merges pulses across gates still
//! gets verified, at the sync points it can name.
//!
//! The circuit is lowered once. State that crosses a window boundary is carried:
//! which ions are hidden at the start of each window comes from a sequential scan,
//! and an ion still hidden after the last window is a fault. The cost is linear in
//! the instructions and steps.

use super::{check, CheckConfig, CheckError, Mode};
use crate::circuit::Circuit;
use crate::native::{NativeOp, Sequence};
use crate::sim::program::{still_hidden, Program};
use rayon::prelude::*;
use std::sync::Arc;

pub use crate::native::SyncPoint;

/// Most memory one window's comparison may take when windows share a memory pool
/// with other jobs (256 MiB: a 12-qubit unitary pair, or a 23-qubit state pair).
pub const WINDOW_MEMORY: usize = 256 << 20;

/// The outcome of a window-by-window verification.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct WindowVerdict {
    pub equivalent: bool,
    pub windows: usize,
    /// The most expensive mode any window needed.
    pub mode: Mode,
    /// The distance of the window closest to failing (largest distance over
    /// tolerance), and its tolerance; `None` when a window differs in a way no
    /// distance measures.
    pub distance: Option<f64>,
    pub tolerance: f64,
    /// The worst fidelity over the windows (informative).
    pub fidelity: f64,
    /// The most qubits one window comparison needed.
    pub compared_qubits: usize,
    /// The first window that differs, when one does.
    pub detail: String,
    /// Its index (0-based), when one does.
    pub first_difference: Option<usize>,
}

/// Sync points at every instruction boundary, from `origin[k]`, the instruction
/// that step `k` came from. The steps of one instruction must be contiguous and in
/// instruction order.
pub fn sync_points_from_origin(
    origin: &[u32],
    n_instrs: usize,
) -> Result<Vec<SyncPoint>, CheckError> {
    if origin.windows(2).any(|w| w[0] > w[1]) {
        return Err(CheckError::Windows(
            "the trace does not map the steps to instructions in order".into(),
        ));
    }
    if origin.last().is_some_and(|&o| o as usize >= n_instrs) {
        return Err(CheckError::Windows(
            "the trace names an instruction the circuit does not have".into(),
        ));
    }
    let mut out = Vec::with_capacity(n_instrs);
    let mut step = 0;
    for i in 1..=n_instrs {
        while step < origin.len() && (origin[step] as usize) < i {
            step += 1;
        }
        out.push(SyncPoint {
            instrs: i,
            steps: step,
        });
    }
    Ok(out)
}

/// How far a long verification has got, for a progress display: windows done of
/// windows in all. Shared between threads; `total` is set when the work starts.
#[derive(Debug, Default)]
pub struct WorkCounter {
    pub done: std::sync::atomic::AtomicUsize,
    pub total: std::sync::atomic::AtomicUsize,
}

/// One window's result, small enough to keep a million of.
struct Outcome {
    equivalent: bool,
    mode: Mode,
    distance: Option<f64>,
    tolerance: f64,
    fidelity: f64,
    compared: usize,
    detail: String,
}

/// Verifies `seq` against `circuit` window by window between the `sync` points
/// (strictly increasing in instructions, non-decreasing in steps, the last one
/// covering both whole programs).
pub fn check_windows(
    circuit: &Circuit,
    seq: &Sequence,
    sync: &[SyncPoint],
    cfg: &CheckConfig,
) -> Result<WindowVerdict, CheckError> {
    check_windows_counted(circuit, seq, sync, cfg, &WorkCounter::default())
}

/// [`check_windows`], counting the windows done in `counter`.
pub fn check_windows_counted(
    circuit: &Circuit,
    seq: &Sequence,
    sync: &[SyncPoint],
    cfg: &CheckConfig,
    counter: &WorkCounter,
) -> Result<WindowVerdict, CheckError> {
    use std::sync::atomic::Ordering;
    let last = sync.last().copied().unwrap_or(SyncPoint {
        instrs: 0,
        steps: 0,
    });
    if last.instrs != circuit.instrs.len() || last.steps != seq.steps.len() {
        return Err(CheckError::Windows(format!(
            "the last sync point covers {} instruction(s) and {} step(s), but the programs have {} and {}",
            last.instrs,
            last.steps,
            circuit.instrs.len(),
            seq.steps.len()
        )));
    }
    let mut bounds = Vec::with_capacity(sync.len() + 1);
    bounds.push(SyncPoint {
        instrs: 0,
        steps: 0,
    });
    for s in sync {
        let prev = *bounds.last().expect("starts with the origin");
        if s.instrs <= prev.instrs || s.steps < prev.steps {
            return Err(CheckError::Windows(format!(
                "sync point ({}, {}) does not come after ({}, {})",
                s.instrs, s.steps, prev.instrs, prev.steps
            )));
        }
        bounds.push(*s);
    }
    let (program, starts) = Program::from_circuit_with_starts(circuit)?;
    let n_ions = seq.n_ions;
    let hidden_at = hidden_at_starts(seq, bounds.windows(2).map(|w| (w[0].steps, w[1].steps)));
    let n_windows = bounds.len() - 1;
    let (cfg, _grant) = window_config(cfg, n_windows)?;
    let cfg = &cfg;
    counter.done.store(0, Ordering::Relaxed);
    counter.total.store(n_windows, Ordering::Relaxed);
    let outcomes: Vec<Result<Outcome, CheckError>> = (0..n_windows)
        .into_par_iter()
        .with_min_len(64)
        .map(|w| {
            let (from, to) = (bounds[w], bounds[w + 1]);
            let a = Program {
                n_qubits: program.n_qubits,
                items: program.items[starts[from.instrs]..starts[to.instrs]].to_vec(),
                faults: Vec::new(),
            };
            let mut hidden = hidden_at[w].to_vec();
            let mut b = Program::from_steps(n_ions, &seq.steps[from.steps..to.steps], &mut hidden);
            if w + 1 == n_windows {
                b.faults.extend(still_hidden(&hidden));
            }
            let v = check(&a, &b, cfg)?;
            counter.done.fetch_add(1, Ordering::Relaxed);
            Ok(outcome(v, || {
                let place = if to.instrs == from.instrs + 1 {
                    format!("instruction {}", to.instrs)
                } else {
                    format!("instructions {} to {}", from.instrs + 1, to.instrs)
                };
                format!("{place} and steps {} to {}", from.steps + 1, to.steps)
            }))
        })
        .collect();
    fold(outcomes)
}

/// How many steps two step lists share at their start, and then at their end.
fn shared_ends(a: &[crate::native::Step], b: &[crate::native::Step]) -> (usize, usize) {
    let head = a.iter().zip(b).take_while(|(x, y)| x == y).count();
    let tail = a[head..]
        .iter()
        .rev()
        .zip(b[head..].iter().rev())
        .take_while(|(x, y)| x == y)
        .count();
    (head, tail)
}

/// Which ions are hidden at the start of each window (`(from, to)` step ranges of
/// `seq`, in order): one sequential scan.
fn hidden_at_starts(
    seq: &Sequence,
    windows: impl Iterator<Item = (usize, usize)>,
) -> Vec<Arc<Vec<bool>>> {
    let mut out = Vec::new();
    let mut hidden = Arc::new(vec![false; seq.n_ions as usize]);
    for (from, to) in windows {
        out.push(Arc::clone(&hidden));
        let steps = &seq.steps[from..to];
        if steps
            .iter()
            .any(|s| matches!(s.op, NativeOp::Hide { .. } | NativeOp::Unhide { .. }))
        {
            let h: &mut Vec<bool> = Arc::make_mut(&mut hidden);
            advance_hidden(steps, h);
        }
    }
    out
}

/// Marks which ions `steps` leave hidden.
fn advance_hidden(steps: &[crate::native::Step], hidden: &mut [bool]) {
    for step in steps {
        match step.op {
            NativeOp::Hide { ion } => hidden[ion as usize] = true,
            NativeOp::Unhide { ion } => hidden[ion as usize] = false,
            _ => {}
        }
    }
}

/// The configuration each window runs with. Windows are compared on rayon's
/// workers, where a shared pool cannot be waited for: the memory of as many windows
/// as run at once is reserved here, on the caller's thread, and each window gets its
/// share as its own budget.
fn window_config(
    cfg: &CheckConfig,
    n_windows: usize,
) -> Result<(CheckConfig, Option<crate::memory::Grant<'_>>), CheckError> {
    match &cfg.pool {
        Some(pool) => {
            let threads = rayon::current_num_threads().clamp(1, n_windows.max(1));
            let share = WINDOW_MEMORY
                .min(cfg.memory_budget)
                .min(pool.0.total() / threads);
            let grant = pool.0.reserve(share * threads).map_err(|r| match r {
                crate::memory::Refusal::Busy { free } => CheckError::Busy {
                    needed: share * threads,
                    free,
                    total: pool.0.total(),
                },
                crate::memory::Refusal::Exceeds { total } => CheckError::TooLarge {
                    qubits: 0,
                    needed: share * threads,
                    budget: total,
                },
            })?;
            let inner = CheckConfig {
                pool: None,
                memory_budget: share,
                ..cfg.clone()
            };
            Ok((inner, Some(grant)))
        }
        None => Ok((cfg.clone(), None)),
    }
}

/// One window's outcome from its verdict; `place` names the window in the detail.
fn outcome(v: super::Verdict, place: impl FnOnce() -> String) -> Outcome {
    Outcome {
        equivalent: v.equivalent,
        mode: v.mode,
        distance: v.distance,
        tolerance: v.tolerance,
        fidelity: v.fidelity,
        compared: v.compared_qubits,
        detail: if v.equivalent {
            String::new()
        } else {
            format!("{} differ: {}", place(), v.detail)
        },
    }
}

/// The verdict of all windows: equal when every window is, else the first that
/// differs; the worst distance relative to its tolerance.
fn fold(outcomes: Vec<Result<Outcome, CheckError>>) -> Result<WindowVerdict, CheckError> {
    let mut out = WindowVerdict {
        equivalent: true,
        windows: outcomes.len(),
        mode: Mode::Tableau,
        distance: Some(0.0),
        tolerance: super::TOLERANCE_FLOOR,
        fidelity: 1.0,
        compared_qubits: 0,
        detail: String::new(),
        first_difference: None,
    };
    let mut worst_ratio = -1.0;
    for (w, r) in outcomes.into_iter().enumerate() {
        let o = r?;
        if o.mode.rank() >= out.mode.rank() {
            out.mode = o.mode;
        }
        out.fidelity = out.fidelity.min(o.fidelity);
        out.compared_qubits = out.compared_qubits.max(o.compared);
        if !out.equivalent {
            continue;
        }
        if !o.equivalent {
            out.equivalent = false;
            out.first_difference = Some(w);
            out.distance = o.distance;
            out.tolerance = o.tolerance;
            out.detail = o.detail;
            continue;
        }
        let ratio = o.distance.map_or(f64::INFINITY, |d| d / o.tolerance);
        if ratio > worst_ratio {
            worst_ratio = ratio;
            out.distance = o.distance;
            out.tolerance = o.tolerance;
        }
    }
    Ok(out)
}

/// Compares two sequences section by section: `cuts` are the step counts of each
/// side at the end of each section (non-decreasing on both sides, the last covering
/// both whole sequences). Hidden ions carry across sections on each side; an ion
/// still hidden at the end is a fault.
pub fn check_sequence_windows(
    a: &Sequence,
    b: &Sequence,
    cuts: &[(usize, usize)],
    cfg: &CheckConfig,
) -> Result<WindowVerdict, CheckError> {
    let last = cuts.last().copied().unwrap_or((0, 0));
    if last != (a.steps.len(), b.steps.len()) {
        return Err(CheckError::Windows(format!(
            "the last section ends at steps {} and {}, but the sequences have {} and {}",
            last.0,
            last.1,
            a.steps.len(),
            b.steps.len()
        )));
    }
    let mut bounds = vec![(0usize, 0usize)];
    for &c in cuts {
        let prev = *bounds.last().expect("starts with the origin");
        if c.0 < prev.0 || c.1 < prev.1 {
            return Err(CheckError::Windows(format!(
                "section end ({}, {}) comes before ({}, {})",
                c.0, c.1, prev.0, prev.1
            )));
        }
        bounds.push(c);
    }
    let n_windows = bounds.len() - 1;
    let hidden_a = hidden_at_starts(a, bounds.windows(2).map(|w| (w[0].0, w[1].0)));
    let hidden_b = hidden_at_starts(b, bounds.windows(2).map(|w| (w[0].1, w[1].1)));
    let (cfg, _grant) = window_config(cfg, n_windows)?;
    let cfg = &cfg;
    let outcomes: Vec<Result<Outcome, CheckError>> = (0..n_windows)
        .into_par_iter()
        .map(|w| {
            let (from, to) = (bounds[w], bounds[w + 1]);
            // Steps both sides share at the start and at the end of the window are
            // set aside: `S M_a R` and `S M_b R` are equal exactly when `M_a` and
            // `M_b` are (same ions on both sides; not with a final diagonal allowed,
            // which needs the final measurements in view).
            let (xa, xb) = (&a.steps[from.0..to.0], &b.steps[from.1..to.1]);
            let (head, tail) = if a.n_ions == b.n_ions && !cfg.up_to_final_diagonal {
                shared_ends(xa, xb)
            } else {
                (0, 0)
            };
            let lower = |s: &Sequence, hidden: &[bool], from: usize, to: usize| {
                let mut hidden = hidden.to_vec();
                // Past the shared start: which ions it hides.
                advance_hidden(&s.steps[from..from + head], &mut hidden);
                let mut p =
                    Program::from_steps(s.n_ions, &s.steps[from + head..to - tail], &mut hidden);
                advance_hidden(&s.steps[to - tail..to], &mut hidden);
                if w + 1 == n_windows {
                    p.faults.extend(still_hidden(&hidden));
                }
                p
            };
            let pa = lower(a, &hidden_a[w], from.0, to.0);
            let pb = lower(b, &hidden_b[w], from.1, to.1);
            let v = check(&pa, &pb, cfg)?;
            Ok(outcome(v, || {
                format!(
                    "steps {} to {} of the first and {} to {} of the second",
                    from.0 + 1,
                    to.0,
                    from.1 + 1,
                    to.1
                )
            }))
        })
        .collect();
    fold(outcomes)
}
