//! Equivalence of two programs up to a global phase.
//!
//! Programs are cut into segments at measurements, resets and conditioned
//! operations; the cuts must match one to one, and each pair of unitary segments is
//! compared in one of three modes:
//! - `tableau`: both segments are Clifford (after fusing runs of MS pulses, see
//!   [`super::tableau::fuse_xx_runs`]); exact, any qubit count.
//! - `unitary`: the full unitaries are built and `|tr(A^dagger B)| / 2^n` is compared
//!   with one; exact up to rounding, for small registers.
//! - `random`: both run on Haar-random states from a fixed seed; the worst fidelity
//!   `|<a|b>|^2` over the trials is reported. A non-equivalent pair passes a trial
//!   only on a set of states of measure zero.
//!
//! A program with fewer qubits is padded with idle qubits, so extra ions of a device
//! must be left as they were.

use super::apply::{run_kernels, unitary_of};
use super::program::{Item, Kernel, LowerError, Program};
use super::state::StateVector;
use super::tableau::{fuse_xx_runs, tableau_of};
use crate::circuit::{Condition, Mat2};
use num_complex::Complex64 as C64;
use rand::SeedableRng;

#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Mode {
    Auto,
    Unitary,
    Random,
    Tableau,
}

impl Mode {
    pub fn name(self) -> &'static str {
        match self {
            Mode::Auto => "auto",
            Mode::Unitary => "unitary",
            Mode::Random => "random",
            Mode::Tableau => "tableau",
        }
    }
}

/// Settings of the checker; `Default` gives the documented defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CheckConfig {
    pub mode: Mode,
    /// Random states per segment in random mode.
    pub trials: usize,
    pub seed: u64,
    /// Fidelities within this of one count as equal.
    pub tolerance: f64,
    /// Auto mode builds full unitaries up to this many qubits.
    pub max_unitary_qubits: usize,
    /// Largest statevector memory the checker may use, in bytes (two states, plus
    /// the unitaries in unitary mode).
    pub memory_budget: usize,
    /// Accept a final diagonal on the qubits measured at the end.
    pub up_to_final_diagonal: bool,
    /// Most work one comparison may take, in amplitude updates (operations of both
    /// programs times 2^qubits times trials; 4^qubits per operation for unitaries).
    /// Infinite by default; the compile driver sets a bound and then verifies gate
    /// by gate instead of waiting for hours.
    pub max_work: f64,
}

impl Default for CheckConfig {
    fn default() -> CheckConfig {
        CheckConfig {
            mode: Mode::Auto,
            trials: 3,
            seed: 0x7u64 << 40 | 0x2026,
            tolerance: 1e-9,
            max_unitary_qubits: 10,
            memory_budget: 8 << 30,
            up_to_final_diagonal: false,
            max_work: f64::INFINITY,
        }
    }
}

/// The checker's answer.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Verdict {
    pub equivalent: bool,
    /// The mode used; with several segments, the most expensive one used.
    pub mode: Mode,
    /// The worst fidelity over segments (1 for equal tableaux, 0 for different ones).
    pub fidelity: f64,
    /// The global phase `g` with `B = e^{ig} A` of the first unitary segment, where
    /// the mode measures it.
    pub global_phase: Option<f64>,
    pub segments: usize,
    pub qubits: usize,
    /// The most qubits one segment comparison needed after untouched qubits were
    /// split off.
    pub compared_qubits: usize,
    /// What differed, when the programs are not equivalent.
    pub detail: String,
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CheckError {
    #[error(transparent)]
    Lower(#[from] LowerError),
    #[error("{qubits} qubits need {needed} bytes of statevector memory, more than the budget of {budget} bytes; raise --memory or make both programs Clifford for tableau mode")]
    TooLarge {
        qubits: usize,
        needed: usize,
        budget: usize,
    },
    #[error("{qubits} qubits with {operations} operations need about {work:.1e} amplitude updates, more than the budget of {budget:.1e}")]
    TooSlow {
        qubits: usize,
        operations: usize,
        work: f64,
        budget: f64,
    },
    #[error("tableau mode needs Clifford programs, but {0}")]
    NotClifford(String),
    #[error("the programs cannot be compared segment by segment: {0}")]
    Segments(String),
    #[error("{0}")]
    Unsupported(String),
}

#[derive(Debug, Clone, PartialEq)]
enum Seg {
    Unitary(Vec<Kernel>),
    Measure {
        q: usize,
        clbit: u32,
    },
    Reset {
        q: usize,
    },
    Conditioned {
        condition: Condition,
        body: Vec<Kernel>,
    },
}

/// Cuts a program into alternating unitary segments and cuts: `U B U B ... U`.
fn segments(p: &Program) -> Vec<Seg> {
    let mut out = vec![Seg::Unitary(Vec::new())];
    for item in &p.items {
        match item {
            Item::Unitary(k) => match out.last_mut() {
                Some(Seg::Unitary(v)) => v.push(k.clone()),
                _ => out.push(Seg::Unitary(vec![k.clone()])),
            },
            Item::Conditioned { condition, kernel } => {
                if let Some(Seg::Conditioned { condition: c, body }) = out.last_mut() {
                    if c == condition {
                        body.push(kernel.clone());
                        continue;
                    }
                }
                if !matches!(out.last(), Some(Seg::Unitary(_))) {
                    out.push(Seg::Unitary(Vec::new()));
                }
                out.push(Seg::Conditioned {
                    condition: *condition,
                    body: vec![kernel.clone()],
                });
            }
            Item::Measure { q, clbit } => {
                if !matches!(out.last(), Some(Seg::Unitary(_))) {
                    out.push(Seg::Unitary(Vec::new()));
                }
                out.push(Seg::Measure {
                    q: *q,
                    clbit: *clbit,
                });
            }
            Item::Reset { q } => {
                if !matches!(out.last(), Some(Seg::Unitary(_))) {
                    out.push(Seg::Unitary(Vec::new()));
                }
                out.push(Seg::Reset { q: *q });
            }
        }
    }
    if !matches!(out.last(), Some(Seg::Unitary(_))) {
        out.push(Seg::Unitary(Vec::new()));
    }
    out
}

/// Measurements at the very end may be reordered; they and the qubits they measure
/// are collected here.
fn trailing_measured(segs: &[Seg]) -> Vec<usize> {
    let mut qs = Vec::new();
    for s in segs.iter().rev() {
        match s {
            Seg::Measure { q, .. } => qs.push(*q),
            Seg::Unitary(v) if v.is_empty() => {}
            _ => break,
        }
    }
    qs
}

struct SegResult {
    /// Qubits compared after splitting off untouched ones.
    compared: usize,
    equal: bool,
    mode: Mode,
    fidelity: f64,
    phase: Option<f64>,
    /// Why the segments differ, when a reason is known beyond the fidelity.
    reason: Option<String>,
}

/// Compares two programs. See the module documentation for the modes.
pub fn check(a: &Program, b: &Program, cfg: &CheckConfig) -> Result<Verdict, CheckError> {
    let n = a.n_qubits.max(b.n_qubits);
    let (sa, sb) = (segments(a), segments(b));
    if sa.len() != sb.len() {
        return Err(CheckError::Segments(format!(
            "one program has {} measurements, resets or conditioned blocks, the other {}",
            sa.len() / 2,
            sb.len() / 2
        )));
    }
    let measured_a = trailing_measured(&sa);
    let mut verdict = Verdict {
        equivalent: true,
        mode: Mode::Tableau,
        fidelity: 1.0,
        global_phase: None,
        segments: sa.len().div_ceil(2),
        qubits: n,
        compared_qubits: 0,
        detail: String::new(),
    };
    let mut rank = 0;
    let last_unitary = sa
        .iter()
        .rposition(|s| matches!(s, Seg::Unitary(v) if !v.is_empty()))
        .unwrap_or(0);
    let last_unitary_b = sb
        .iter()
        .rposition(|s| matches!(s, Seg::Unitary(v) if !v.is_empty()))
        .unwrap_or(0);
    let final_index = last_unitary.max(last_unitary_b);
    for (i, (x, y)) in sa.iter().zip(&sb).enumerate() {
        let bodies = match (x, y) {
            (Seg::Unitary(p), Seg::Unitary(q)) => Some((p, q, false)),
            (
                Seg::Conditioned {
                    condition: c1,
                    body: p,
                },
                Seg::Conditioned {
                    condition: c2,
                    body: q,
                },
            ) if c1 == c2 => Some((p, q, true)),
            (Seg::Measure { q: q1, clbit: c1 }, Seg::Measure { q: q2, clbit: c2 })
                if q1 == q2 && c1 == c2 =>
            {
                None
            }
            (Seg::Reset { q: q1 }, Seg::Reset { q: q2 }) if q1 == q2 => None,
            _ if i > final_index
                && matches!((x, y), (Seg::Measure { .. }, Seg::Measure { .. })) =>
            {
                // Terminal measurements in another order are still the same readout.
                let mb = trailing_measured(&sb);
                let (mut p, mut q) = (measured_a.clone(), mb);
                p.sort_unstable();
                q.sort_unstable();
                if p == q {
                    None
                } else {
                    return Err(CheckError::Segments("the final measurements differ".into()));
                }
            }
            _ => {
                return Err(CheckError::Segments(format!(
                    "cut {} differs: {} against {}",
                    i / 2 + 1,
                    describe(x),
                    describe(y)
                )))
            }
        };
        let Some((p, q, _conditioned)) = bodies else {
            continue;
        };
        let diagonal = if cfg.up_to_final_diagonal && i == final_index && !measured_a.is_empty() {
            Some(measured_a.as_slice())
        } else {
            None
        };
        let r = compare(p, q, n, cfg, diagonal)?;
        let this_rank = match r.mode {
            Mode::Tableau => 0,
            Mode::Unitary => 1,
            _ => 2,
        };
        if this_rank >= rank {
            rank = this_rank;
            verdict.mode = r.mode;
        }
        if verdict.global_phase.is_none() && !p.is_empty() {
            verdict.global_phase = r.phase;
        }
        verdict.fidelity = verdict.fidelity.min(r.fidelity);
        verdict.compared_qubits = verdict.compared_qubits.max(r.compared);
        if !r.equal && verdict.equivalent {
            verdict.equivalent = false;
            verdict.detail = match &r.reason {
                Some(reason) => format!("segment {} differs: {reason}", i / 2 + 1),
                None => format!(
                    "segment {} differs (fidelity {:.12})",
                    i / 2 + 1,
                    r.fidelity
                ),
            };
        }
    }
    if sa.len() == 1
        && matches!(&sa[0], Seg::Unitary(v) if v.is_empty())
        && matches!(&sb[0], Seg::Unitary(v) if v.is_empty())
    {
        verdict.mode = if cfg.mode == Mode::Auto {
            Mode::Tableau
        } else {
            cfg.mode
        };
    }
    Ok(verdict)
}

fn describe(s: &Seg) -> String {
    match s {
        Seg::Unitary(_) => "gates".into(),
        Seg::Measure { q, clbit } => format!("measure of qubit {q} into bit {clbit}"),
        Seg::Reset { q } => format!("reset of qubit {q}"),
        Seg::Conditioned { condition, .. } => {
            format!(
                "operations conditioned on register #{} == {}",
                condition.creg, condition.value
            )
        }
    }
}

fn state_bytes(n: usize) -> usize {
    16usize.saturating_mul(1usize.checked_shl(n as u32).unwrap_or(usize::MAX))
}

/// Removes couplings that cancelled to zero (an echo's non-target pairs).
fn drop_zero_couplings(ks: Vec<Kernel>) -> Vec<Kernel> {
    ks.into_iter()
        .filter_map(|k| match k {
            Kernel::Ising { axis, terms } => {
                let terms: Vec<_> = terms.into_iter().filter(|t| t.2.abs() > 1e-12).collect();
                (!terms.is_empty()).then_some(Kernel::Ising { axis, terms })
            }
            other => Some(other),
        })
        .collect()
}

/// The single-qubit part of `k` on qubit `q` (One or Collective kernels).
fn local_part(k: &Kernel, q: usize) -> Option<Mat2> {
    match k {
        Kernel::One { q: kq, m } if *kq == q => Some(*m),
        Kernel::Collective { m, qubits } if qubits.contains(&q) => Some(*m),
        _ => None,
    }
}

fn is_multi(k: &Kernel) -> bool {
    !matches!(k, Kernel::One { .. } | Kernel::Collective { .. })
}

type Reduced = (Vec<Kernel>, Vec<Kernel>, usize);

/// Splits off the qubits that no multi-qubit kernel of either program touches: the
/// programs factor into a product over those qubits and the rest. Returns the
/// reduced programs and their qubit count, or the first isolated qubit whose
/// single-qubit products differ (up to phase).
fn reduce(p: Vec<Kernel>, q: Vec<Kernel>, n: usize) -> Result<Reduced, usize> {
    let mut entangled = vec![false; n];
    for k in p.iter().chain(&q).filter(|k| is_multi(k)) {
        for x in k.qubits() {
            entangled[x] = true;
        }
    }
    if entangled.iter().all(|&e| e) {
        return Ok((p, q, n));
    }
    for x in (0..n).filter(|&x| !entangled[x]) {
        let product = |ks: &[Kernel]| {
            ks.iter()
                .filter_map(|k| local_part(k, x))
                .fold(identity2(), |acc, m| mul2(&m, &acc))
        };
        let (a, b) = (product(&p), product(&q));
        let mut tr = C64::new(0.0, 0.0);
        for i in 0..2 {
            for j in 0..2 {
                tr += a[i][j].conj() * b[i][j];
            }
        }
        if (tr.norm() / 2.0 - 1.0).abs() > 1e-9 {
            return Err(x);
        }
    }
    let kept: Vec<usize> = (0..n).filter(|&x| entangled[x]).collect();
    let mut index = vec![usize::MAX; n];
    for (new, &old) in kept.iter().enumerate() {
        index[old] = new;
    }
    let remap = |ks: Vec<Kernel>| -> Vec<Kernel> {
        ks.into_iter()
            .filter_map(|k| match k {
                Kernel::One { q, m } => {
                    (index[q] != usize::MAX).then(|| Kernel::One { q: index[q], m })
                }
                Kernel::Collective { m, qubits } => {
                    let qs: Vec<usize> = qubits
                        .iter()
                        .filter(|&&x| index[x] != usize::MAX)
                        .map(|&x| index[x])
                        .collect();
                    (!qs.is_empty()).then_some(Kernel::Collective { m, qubits: qs })
                }
                other => Some(remap_kernel(other, &index)),
            })
            .collect()
    };
    Ok((remap(p), remap(q), kept.len()))
}

fn remap_kernel(k: Kernel, index: &[usize]) -> Kernel {
    let f = |x: usize| index[x];
    match k {
        Kernel::One { q, m } => Kernel::One { q: f(q), m },
        Kernel::Controlled {
            controls,
            target,
            m,
        } => Kernel::Controlled {
            controls: controls.into_iter().map(f).collect(),
            target: f(target),
            m,
        },
        Kernel::Swap { a, b } => Kernel::Swap { a: f(a), b: f(b) },
        Kernel::Ising { axis, terms } => Kernel::Ising {
            axis,
            terms: terms.into_iter().map(|(a, b, w)| (f(a), f(b), w)).collect(),
        },
        Kernel::Ms { theta, phi, qubits } => Kernel::Ms {
            theta,
            phi,
            qubits: qubits.into_iter().map(f).collect(),
        },
        Kernel::Collective { m, qubits } => Kernel::Collective {
            m,
            qubits: qubits.into_iter().map(f).collect(),
        },
        Kernel::Dense { qubits, m } => Kernel::Dense {
            qubits: qubits.into_iter().map(f).collect(),
            m,
        },
    }
}

/// Multiplies consecutive single-qubit operations on each qubit into one, flushing a
/// qubit when a multi-qubit kernel touches it. Exact; cuts simulation work.
fn merge_single_qubit_runs(ks: &[Kernel], n: usize) -> Vec<Kernel> {
    let mut pending: Vec<Option<Mat2>> = vec![None; n];
    let mut out = Vec::with_capacity(ks.len());
    let add = |pending: &mut Vec<Option<Mat2>>, q: usize, m: &Mat2| {
        let acc = pending[q].unwrap_or_else(identity2);
        pending[q] = Some(mul2(m, &acc));
    };
    for k in ks {
        match k {
            Kernel::One { q, m } => add(&mut pending, *q, m),
            Kernel::Collective { m, qubits } => {
                for &q in qubits {
                    add(&mut pending, q, m);
                }
            }
            other => {
                for q in other.qubits() {
                    if let Some(m) = pending[q].take() {
                        out.push(Kernel::One { q, m });
                    }
                }
                out.push(other.clone());
            }
        }
    }
    for (q, m) in pending.into_iter().enumerate() {
        if let Some(m) = m {
            out.push(Kernel::One { q, m });
        }
    }
    out
}

fn identity2() -> Mat2 {
    [
        [C64::new(1.0, 0.0), C64::new(0.0, 0.0)],
        [C64::new(0.0, 0.0), C64::new(1.0, 0.0)],
    ]
}

fn mul2(a: &Mat2, b: &Mat2) -> Mat2 {
    let mut o = [[C64::new(0.0, 0.0); 2]; 2];
    for i in 0..2 {
        for j in 0..2 {
            o[i][j] = a[i][0] * b[0][j] + a[i][1] * b[1][j];
        }
    }
    o
}

fn compare(
    p: &[Kernel],
    q: &[Kernel],
    n: usize,
    cfg: &CheckConfig,
    diagonal: Option<&[usize]>,
) -> Result<SegResult, CheckError> {
    // Fusing MS runs and splitting off untouched qubits are exact (up to global
    // phase); they let compiled programs on many ions be compared on few qubits.
    let (fp, fq) = (
        drop_zero_couplings(fuse_xx_runs(p)),
        drop_zero_couplings(fuse_xx_runs(q)),
    );
    let (p, q, n) = if diagonal.is_some() {
        (fp, fq, n)
    } else {
        match reduce(fp, fq, n) {
            Ok(r) => r,
            Err(qubit) => {
                return Ok(SegResult {
                    compared: 1,
                    equal: false,
                    mode: Mode::Unitary,
                    fidelity: 0.0,
                    phase: None,
                    reason: Some(format!(
                        "qubit {qubit} takes part in no interaction, yet its own operations differ between the programs"
                    )),
                })
            }
        }
    };
    let (p, q) = (
        merge_single_qubit_runs(&p, n),
        merge_single_qubit_runs(&q, n),
    );
    let (p, q) = (p.as_slice(), q.as_slice());
    let want_tableau = matches!(cfg.mode, Mode::Auto | Mode::Tableau) && diagonal.is_none();
    if want_tableau {
        match (tableau_of(p, n), tableau_of(q, n)) {
            (Ok(ta), Ok(tb)) => {
                let equal = ta == tb;
                return Ok(SegResult {
                    reason: None,
                    compared: n,
                    equal,
                    mode: Mode::Tableau,
                    fidelity: if equal { 1.0 } else { 0.0 },
                    phase: None,
                });
            }
            (Err(k), _) | (_, Err(k)) if cfg.mode == Mode::Tableau => {
                return Err(CheckError::NotClifford(format!(
                    "{k} is not a Clifford operation"
                )));
            }
            _ => {}
        }
    }
    if cfg.mode == Mode::Tableau {
        return Err(CheckError::Unsupported(
            "tableau mode cannot compare up to a final diagonal".into(),
        ));
    }
    let use_unitary =
        cfg.mode == Mode::Unitary || (cfg.mode == Mode::Auto && n <= cfg.max_unitary_qubits);
    let needed = if use_unitary {
        state_bytes(2 * n).saturating_mul(2)
    } else {
        state_bytes(n).saturating_mul(2)
    };
    if needed > cfg.memory_budget || n >= 48 {
        return Err(CheckError::TooLarge {
            qubits: n,
            needed,
            budget: cfg.memory_budget,
        });
    }
    let operations = p.len() + q.len();
    let work = if use_unitary {
        operations as f64 * 4f64.powi(n as i32)
    } else {
        operations as f64 * 2f64.powi(n as i32) * cfg.trials.max(1) as f64
    };
    if work > cfg.max_work {
        return Err(CheckError::TooSlow {
            qubits: n,
            operations,
            work,
            budget: cfg.max_work,
        });
    }
    if use_unitary {
        let (ua, ub) = (unitary_of(p, n), unitary_of(q, n));
        let dim = (1usize << n) as f64;
        if let Some(measured) = diagonal {
            // B = D A with D diagonal and depending only on the measured bits.
            let d = &ub * ua.adjoint();
            let mask: usize = measured.iter().map(|q| 1usize << q).sum();
            let mut worst: f64 = 0.0;
            for i in 0..d.nrows() {
                for j in 0..d.ncols() {
                    let want = if i == j {
                        d[(i & mask, i & mask)]
                    } else {
                        C64::new(0.0, 0.0)
                    };
                    worst = worst.max((d[(i, j)] - want).norm());
                }
                worst = worst.max((d[(i, i)].norm() - 1.0).abs());
            }
            let fidelity = (1.0 - worst).max(0.0);
            return Ok(SegResult {
                reason: None,
                compared: n,
                equal: worst < cfg.tolerance.sqrt(),
                mode: Mode::Unitary,
                fidelity,
                phase: None,
            });
        }
        let tr = (ua.adjoint() * &ub).trace() / dim;
        let fidelity = tr.norm_sqr();
        return Ok(SegResult {
            reason: None,
            compared: n,
            equal: fidelity > 1.0 - cfg.tolerance,
            mode: Mode::Unitary,
            fidelity,
            phase: Some(tr.arg()),
        });
    }
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(cfg.seed);
    let mut worst: f64 = 1.0;
    let mut phase = None;
    for _ in 0..cfg.trials.max(1) {
        let start = StateVector::haar_random(n, &mut rng);
        let (mut sa, mut sb) = (start.clone(), start);
        run_kernels(p, &mut sa);
        run_kernels(q, &mut sb);
        let f = if let Some(measured) = diagonal {
            diagonal_fidelity(&sa, &sb, measured)
        } else {
            let ov = sa.inner(&sb);
            phase.get_or_insert(ov.arg());
            ov.norm_sqr()
        };
        worst = worst.min(f);
    }
    Ok(SegResult {
        reason: None,
        compared: n,
        equal: worst > 1.0 - cfg.tolerance,
        mode: Mode::Random,
        fidelity: worst,
        phase,
    })
}

/// `(sum_m |<a_m|b_m>|)^2` over the patterns `m` of the measured bits, where `a_m` is
/// the part of `a` with those bits: one exactly when `b = D a` for a diagonal `D`
/// that depends only on the measured bits.
fn diagonal_fidelity(a: &StateVector, b: &StateVector, measured: &[usize]) -> f64 {
    let mask: usize = measured.iter().map(|q| 1usize << q).sum();
    let mut overlaps = std::collections::HashMap::<usize, C64>::new();
    for (i, (x, y)) in a.amps.iter().zip(&b.amps).enumerate() {
        *overlaps.entry(i & mask).or_default() += x.conj() * y;
    }
    let s: f64 = overlaps.values().map(|v| v.norm()).sum();
    s * s
}

/// The outcome of a gate-by-gate verification.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BlockVerdict {
    pub equivalent: bool,
    /// Instructions checked, each against its block of native steps.
    pub blocks: usize,
    /// The worst fidelity over the blocks.
    pub fidelity: f64,
    /// The most qubits one block comparison needed.
    pub compared_qubits: usize,
    /// The first block that differs, when one does.
    pub detail: String,
}

/// Verifies a compiled sequence gate by gate: `origin[k]` names the circuit
/// instruction that step `k` came from; the steps of one instruction must be
/// contiguous and in instruction order (checked here). Each instruction is compared
/// with its block on the whole device, so extra ions must be left as they were. The
/// product of equal blocks is equal, so this proves the whole sequence equal (up to
/// global phase) at the cost of many small comparisons instead of one large one.
pub fn check_blockwise(
    circuit: &crate::circuit::Circuit,
    seq: &crate::native::Sequence,
    origin: &[u32],
    cfg: &CheckConfig,
) -> Result<BlockVerdict, CheckError> {
    use rayon::prelude::*;
    if origin.len() != seq.steps.len() || origin.windows(2).any(|w| w[0] > w[1]) {
        return Err(CheckError::Segments(
            "the trace does not map the steps to instructions in order".into(),
        ));
    }
    if origin
        .last()
        .is_some_and(|&o| o as usize >= circuit.instrs.len())
    {
        return Err(CheckError::Segments(
            "the trace names an instruction the circuit does not have".into(),
        ));
    }
    let mut starts = vec![0usize; circuit.instrs.len() + 1];
    for (i, start) in starts.iter_mut().enumerate() {
        *start = origin.partition_point(|&o| (o as usize) < i);
    }
    let results: Vec<Result<(Verdict, usize), CheckError>> = (0..circuit.instrs.len())
        .into_par_iter()
        .map(|i| {
            let one = crate::circuit::Circuit {
                instrs: vec![circuit.instrs[i].clone()],
                ..circuit.clone()
            };
            let mut block = crate::native::Sequence::new(seq.n_ions, seq.cregs.clone());
            block.steps = seq.steps[starts[i]..starts[i + 1]].to_vec();
            let a = Program::from_circuit(&one)?;
            let b = Program::from_sequence(&block);
            check(&a, &b, cfg).map(|v| (v, i))
        })
        .collect();
    let mut out = BlockVerdict {
        equivalent: true,
        blocks: circuit.instrs.len(),
        fidelity: 1.0,
        compared_qubits: 0,
        detail: String::new(),
    };
    for r in results {
        let (v, i) = r?;
        out.fidelity = out.fidelity.min(v.fidelity);
        out.compared_qubits = out.compared_qubits.max(v.compared_qubits);
        if !v.equivalent && out.equivalent {
            out.equivalent = false;
            out.detail = format!(
                "instruction {} differs from its pulses (fidelity {:.12})",
                i + 1,
                v.fidelity
            );
        }
    }
    Ok(out)
}
