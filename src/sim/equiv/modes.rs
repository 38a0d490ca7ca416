//! The three comparison modes, each a distance against a tolerance.
//!
//! - `tableau`: both segments are Clifford within [`CLIFFORD_EPS`] per coefficient;
//!   the tableaux (Aaronson and Gottesman, PRA 70, 052328, 2004) are compared
//!   exactly. The distance is the bound on how far the kernels are from the
//!   Cliffords they were read as, plus the pre-pass slack.
//! - `unitary`: the full unitaries `A`, `B`; the distance is the largest entry
//!   `|B_ij - e^{ig} A_ij|` with `g = arg tr(A^dagger B)`.
//! - `random`: both run on the same Haar-random states; the distance is the largest
//!   amplitude difference `|b_i - e^{ig} a_i|` (with `g = arg <a|b>`) in units of the
//!   typical amplitude `2^(-n/2)`, worst over the trials.
//!
//! With a final diagonal allowed, the phase is aligned separately for every pattern
//! of the measured bits. docs/checker.md says what each mode can and cannot detect.
//!
//! Invariant: a segment pair is called equal only when its distance, plus the slack
//! of the pre-passes, is at most the tolerance; and the tolerance is the one the
//! verdict reports.

use super::prepass::{prepare, touches};
use super::{CheckConfig, CheckError, Mode};
use crate::sim::apply::run_kernels;
use crate::sim::program::Kernel;
use crate::sim::state::{try_zeroed_amps, StateVector};
use crate::sim::tableau::{tableau_of, CLIFFORD_EPS};
use num_complex::Complex64 as C64;
use rand::SeedableRng;
use rayon::prelude::*;

/// Rounding allowed per qubit operation of either program, as a distance: 64 units
/// of f64 rounding. The worst case grows linearly with the operations; rounding
/// seen in practice grows more slowly, so this holds with room to spare.
pub const ROUNDING_PER_TOUCH: f64 = 64.0 * f64::EPSILON;
/// The smallest tolerance, whatever the operation count.
pub const TOLERANCE_FLOOR: f64 = 1e-13;

/// The tolerance for two segments with `touches` qubit operations together, for
/// the unitary and tableau modes.
pub fn derived_tolerance(touches: usize) -> f64 {
    (ROUNDING_PER_TOUCH * touches as f64).max(TOLERANCE_FLOOR)
}

/// The tolerance of random mode on `n` qubits: [`derived_tolerance`] times
/// `1 + 2 n ln 2`. Random mode measures the largest of `2^n` amplitude errors in
/// units of the typical amplitude; the largest Haar amplitude is about
/// `sqrt(n ln 2)` typical ones and the largest of `2^n` errors about
/// `sqrt(2 n ln 2)` typical errors, and their product is this factor. (Measured:
/// a 2,000-gate, 21-qubit circuit compiled for 40 ions, 850k pulses, came to 3.0
/// times the plain derived tolerance; the factor here is 30.)
pub fn random_tolerance(touches: usize, n: usize) -> f64 {
    derived_tolerance(touches) * (1.0 + 2.0 * n as f64 * std::f64::consts::LN_2)
}

/// The outcome of one segment comparison.
pub(super) struct SegResult {
    /// Qubits compared after splitting off untouched ones.
    pub compared: usize,
    pub equal: bool,
    pub mode: Mode,
    /// `None` where the comparison is exact and found a difference (tableaux).
    pub distance: Option<f64>,
    pub tolerance: f64,
    pub fidelity: f64,
    pub phase: Option<f64>,
    /// Why the segments differ, when a reason is known beyond the distance.
    pub reason: Option<String>,
}

pub(super) fn state_bytes(n: usize) -> usize {
    16usize.saturating_mul(1usize.checked_shl(n as u32).unwrap_or(usize::MAX))
}

fn too_large(n: usize, needed: usize, budget: usize) -> CheckError {
    CheckError::TooLarge {
        qubits: n,
        needed,
        budget,
    }
}

/// Compares two unitary segments on `n` qubits; `diagonal` names the measured qubits
/// when a final diagonal on them is allowed.
pub(super) fn compare(
    p: &[Kernel],
    q: &[Kernel],
    n: usize,
    cfg: &CheckConfig,
    diagonal: Option<&[usize]>,
    counter: &super::WorkCounter,
) -> Result<SegResult, CheckError> {
    use std::sync::atomic::Ordering;
    let touched = p.iter().chain(q).map(touches).sum::<usize>() + 2 * n;
    let tolerance = cfg.tolerance.unwrap_or_else(|| derived_tolerance(touched));
    let prepared = match prepare(p, q, n, diagonal, tolerance) {
        Ok(r) => r,
        Err(idle) => {
            return Ok(SegResult {
                compared: 1,
                equal: false,
                mode: Mode::Unitary,
                distance: Some(idle.distance),
                tolerance,
                fidelity: 0.0,
                phase: None,
                reason: Some(format!(
                    "qubit {} takes part in no interaction, yet its own operations differ between the programs (distance {:.3e}, tolerance {:.3e})",
                    idle.qubit, idle.distance, tolerance
                )),
            })
        }
    };
    let (original_p, original_q, original_n) = (p, q, n);
    let (p, q, n, slack) = (
        prepared.p.as_slice(),
        prepared.q.as_slice(),
        prepared.n,
        prepared.slack,
    );
    let stray_reason = |distance: f64| {
        prepared
            .stray
            .filter(|_| distance > tolerance)
            .map(|(qubit, weight)| {
                format!(
                    "qubit {qubit} is coupled by one program only (stray coupling of total weight {weight:.3e}); distance {distance:.3e} is above the tolerance {tolerance:.3e}"
                )
            })
    };
    // Where the comparison would be refused (too large, too slow, not Clifford), an
    // exact proof of difference may still be at hand (module `witness`). Not with a
    // final diagonal allowed: a coupling is diagonal.
    let or_witness = |refusal: CheckError| -> Result<SegResult, CheckError> {
        if diagonal.is_some() || !cfg.seek_difference {
            return Err(refusal);
        }
        // On the programs as given (the pre-passes renumber qubits), each in the
        // interaction picture where that applies, its slack counted.
        let framed = |ks: &[Kernel]| {
            super::frame::interaction_picture(ks, original_n).unwrap_or_else(|| (ks.to_vec(), 0.0))
        };
        let ((fp, sp), (fq, sq)) = (framed(original_p), framed(original_q));
        let slack = sp + sq;
        if let Some(w) = super::witness::coupled_idle_qubit(&fp, &fq, original_n, tolerance + slack)
        {
            return Ok(SegResult {
                compared: original_n,
                equal: false,
                mode: Mode::Bound,
                distance: Some(w.bound - slack),
                tolerance,
                fidelity: 0.0,
                phase: None,
                reason: Some(format!(
                    "qubit {} is left coupled to qubit {} by the {} program only (net Z-Z angle {:.9} rad, not a multiple of pi/2), so the programs differ by at least {:.3e} in operator norm: an exact bound, without simulating (the full comparison was refused: {refusal})",
                    w.qubit, w.partner, w.side, w.weight, w.bound - slack
                )),
            });
        }
        match super::fields::held_fields(original_p, original_q, original_n, cfg, tolerance) {
            super::fields::Search::Proven(w) => Ok(SegResult {
                compared: w.simulated,
                equal: false,
                mode: Mode::Bound,
                distance: Some(w.bound),
                tolerance,
                fidelity: 0.0,
                phase: None,
                reason: Some(format!(
                    "{}; proven by simulating {} qubit(s) with the other {} held as fixed fields (each stays an eigenstate of every interaction it takes part in): the programs differ by at least {:.3e} in operator norm (the full comparison was refused: {refusal})",
                    w.describe(),
                    w.simulated,
                    w.held,
                    w.bound
                )),
            }),
            super::fields::Search::Tried(tried) => Err(CheckError::Undecided {
                refusal: Box::new(refusal),
                tried,
            }),
        }
    };
    let want_tableau = matches!(cfg.mode, Mode::Auto | Mode::Tableau) && diagonal.is_none();
    if want_tableau {
        match (tableau_of(p, n), tableau_of(q, n)) {
            (Ok((ta, da)), Ok((tb, db))) => {
                let bound = da + db + slack;
                if ta != tb {
                    return Ok(SegResult {
                        compared: n,
                        equal: false,
                        mode: Mode::Tableau,
                        distance: None,
                        tolerance,
                        fidelity: 0.0,
                        phase: None,
                        reason: Some("the stabilizer tableaux differ".into()),
                    });
                }
                if bound <= tolerance {
                    return Ok(SegResult {
                        compared: n,
                        equal: true,
                        mode: Mode::Tableau,
                        distance: Some(bound),
                        tolerance,
                        fidelity: 1.0,
                        phase: None,
                        reason: None,
                    });
                }
                if cfg.mode == Mode::Tableau {
                    return or_witness(CheckError::NotClifford(format!(
                        "its operations are Clifford only within {bound:.3e}, more than the tolerance {tolerance:.3e}"
                    )));
                }
            }
            (Err(k), _) | (_, Err(k)) if cfg.mode == Mode::Tableau => {
                return or_witness(CheckError::NotClifford(format!(
                    "{k} is not a Clifford operation (within {CLIFFORD_EPS:e} per coefficient)"
                )));
            }
            _ => {}
        }
    }
    if cfg.mode == Mode::Tableau {
        return Err(CheckError::Unsupported(
            "tableau mode cannot compare up to a final diagonal; use --mode unitary or random"
                .into(),
        ));
    }
    // Programs that act on the whole register alike: exactly, in the spaces of the
    // collective spin (at most n + 1 dimensions each) instead of 2^n.
    if cfg.mode == Mode::Auto && n > cfg.max_unitary_qubits && diagonal.is_none() {
        if let Some(d) = super::spin::whole_chain_distance(original_p, original_q, original_n) {
            let tolerance = tolerance + d.rounding;
            // On the programs as given (not pre-passed): no slack.
            let equal = d.distance <= tolerance;
            return Ok(SegResult {
                compared: original_n,
                equal,
                mode: Mode::Spin,
                distance: Some(d.distance),
                tolerance,
                fidelity: if equal { 1.0 } else { 0.0 },
                phase: None,
                reason: (!equal).then(|| {
                    format!(
                        "both act on the whole register alike, and in the spaces of the collective spin they differ by {:.3e} in operator norm (exact; tolerance {tolerance:.3e})",
                        d.distance
                    )
                }),
            });
        }
    }
    let use_unitary =
        cfg.mode == Mode::Unitary || (cfg.mode == Mode::Auto && n <= cfg.max_unitary_qubits);
    let needed = if use_unitary {
        // Two unitaries, and one column per thread while building them.
        state_bytes(2 * n)
            .saturating_mul(2)
            .saturating_add(state_bytes(n).saturating_mul(rayon::current_num_threads()))
    } else {
        state_bytes(n).saturating_mul(2)
    };
    if needed > cfg.memory_budget || n >= 48 || (use_unitary && n >= 24) {
        return or_witness(too_large(n, needed, cfg.memory_budget));
    }
    let operations = p.len() + q.len();
    let work = if use_unitary {
        operations as f64 * 4f64.powi(n as i32)
    } else {
        operations as f64 * 2f64.powi(n as i32) * cfg.trials.max(1) as f64
    };
    if work > cfg.max_work {
        return or_witness(CheckError::TooSlow {
            qubits: n,
            operations,
            work,
            budget: cfg.max_work,
        });
    }
    // With a pool shared by several comparisons, the memory is reserved there
    // first (waiting while the others hold it), and given back when this returns.
    let _grant = match &cfg.pool {
        Some(pool) => Some(pool.0.reserve(needed).map_err(|r| match r {
            crate::memory::Refusal::Exceeds { total } => too_large(n, needed, total),
            crate::memory::Refusal::Busy { free } => CheckError::Busy {
                needed,
                free,
                total: pool.0.total(),
            },
        })?),
        None => None,
    };
    let oom = |_| too_large(n, needed, cfg.memory_budget);
    if use_unitary {
        let dim = 1usize << n;
        counter
            .total
            .fetch_add(p.len() + q.len(), Ordering::Relaxed);
        let ua = try_unitary(p, n).map_err(oom)?;
        counter.done.fetch_add(p.len(), Ordering::Relaxed);
        let ub = try_unitary(q, n).map_err(oom)?;
        counter.done.fetch_add(q.len(), Ordering::Relaxed);
        let mask = measured_mask(diagonal, &prepared.kept);
        // Column-major: entry (i, j) at j * dim + i; the phase is aligned per pattern
        // of the measured bits of the row (one pattern without a diagonal).
        let phases = pattern_phases(&ua, &ub, dim, mask);
        let distance = ua
            .par_chunks(dim)
            .zip(ub.par_chunks(dim))
            .map(|(ca, cb)| {
                ca.iter()
                    .zip(cb)
                    .enumerate()
                    .map(|(i, (x, y))| (y - phases.of(i) * x).norm_sqr())
                    .fold(0.0, f64::max)
            })
            .reduce(|| 0.0, f64::max)
            .sqrt()
            + slack;
        let tr: C64 = ua.iter().zip(&ub).map(|(x, y)| x.conj() * y).sum::<C64>() / dim as f64;
        let equal = distance <= tolerance;
        // Which qubits the difference acts on, named in the original numbering
        // (not in the interaction picture, where each side has its own frame).
        let reason = stray_reason(distance).or_else(|| {
            (!equal && !prepared.framed && n <= AFFECTED_QUBITS).then(|| {
                let ions: Vec<String> = affected(&ua, &ub, n)
                    .into_iter()
                    .map(|k| prepared.kept[k].to_string())
                    .collect();
                format!(
                    "distance {distance:.3e} is above the tolerance {tolerance:.3e}; the difference acts on qubit(s) {}",
                    ions.join(", ")
                )
            })
        });
        return Ok(SegResult {
            compared: n,
            equal,
            mode: Mode::Unitary,
            distance: Some(distance),
            tolerance,
            fidelity: tr.norm_sqr(),
            phase: diagonal.is_none().then(|| tr.arg()),
            reason,
        });
    }
    let tolerance = cfg
        .tolerance
        .unwrap_or_else(|| random_tolerance(touched, n));
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(cfg.seed);
    let scale = (n as f64 / 2.0).exp2();
    let mask = measured_mask(diagonal, &prepared.kept);
    let mut worst: f64 = 0.0;
    let mut fidelity: f64 = 1.0;
    let mut phase = None;
    counter
        .total
        .fetch_add((p.len() + q.len()) * cfg.trials.max(1), Ordering::Relaxed);
    // Kernels run in chunks, each counted when done, for a progress display.
    let run_counted = |ks: &[Kernel], s: &mut StateVector| {
        for chunk in ks.chunks(64) {
            run_kernels(chunk, s);
            counter.done.fetch_add(chunk.len(), Ordering::Relaxed);
        }
    };
    for _ in 0..cfg.trials.max(1) {
        let mut sa = StateVector::try_haar_random(n, &mut rng).map_err(oom)?;
        let mut sb = sa.try_clone().map_err(oom)?;
        run_counted(p, &mut sa);
        run_counted(q, &mut sb);
        let phases = pattern_phases(&sa.amps, &sb.amps, sa.amps.len(), mask);
        let d = sa
            .amps
            .par_chunks(1 << 12)
            .zip(sb.amps.par_chunks(1 << 12))
            .enumerate()
            .map(|(c, (ca, cb))| {
                ca.iter()
                    .zip(cb)
                    .enumerate()
                    .map(|(k, (x, y))| (y - phases.of(c * (1 << 12) + k) * x).norm())
                    .fold(0.0, f64::max)
            })
            .reduce(|| 0.0, f64::max);
        worst = worst.max(d * scale);
        let ov = sa.inner(&sb);
        phase.get_or_insert(ov.arg());
        fidelity = fidelity.min(ov.norm_sqr());
    }
    let distance = worst + slack * scale;
    Ok(SegResult {
        compared: n,
        equal: distance <= tolerance,
        mode: Mode::Random,
        distance: Some(distance),
        tolerance,
        fidelity,
        phase: diagonal.is_none().then_some(phase).flatten(),
        reason: stray_reason(distance),
    })
}

/// Up to this many qubits a difference found in unitary mode is traced to the
/// qubits it acts on (a product of two unitaries: 4^8 entries at most).
const AFFECTED_QUBITS: usize = 8;

/// The qubits on which `D = B A^dagger` (`A`, `B` column-major on `n` qubits) is not
/// the identity: those where `D` fails to commute with `X` or `Z`. A commutator
/// counts when it is above 1e-3 of `||D - cI||` (`c` the phase of `tr D`), and
/// above rounding.
fn affected(a: &[C64], b: &[C64], n: usize) -> Vec<usize> {
    let dim = 1usize << n;
    let ma = nalgebra::DMatrix::from_column_slice(dim, dim, a);
    let mb = nalgebra::DMatrix::from_column_slice(dim, dim, b);
    let d = mb * ma.adjoint();
    let tr = d.trace();
    let c = if tr.norm() > 0.0 {
        tr / tr.norm()
    } else {
        C64::new(1.0, 0.0)
    };
    let total = (&d - nalgebra::DMatrix::<C64>::identity(dim, dim) * c).norm();
    let floor = (1e-3 * total).max(1e-12 * dim as f64);
    (0..n)
        .filter(|&k| {
            let bit = 1usize << k;
            let mut sum = 0.0;
            for j in 0..dim {
                for i in 0..dim {
                    sum += (d[(i ^ bit, j ^ bit)] - d[(i, j)]).norm_sqr();
                    if (i ^ j) & bit != 0 {
                        sum += 4.0 * d[(i, j)].norm_sqr();
                    }
                }
            }
            sum.sqrt() > floor
        })
        .collect()
}

/// The bits of the measured qubits among those compared (`kept[k]` is the original
/// index of compared qubit `k`); 0 without a final diagonal.
fn measured_mask(diagonal: Option<&[usize]>, kept: &[usize]) -> usize {
    diagonal.map_or(0, |m| {
        kept.iter()
            .enumerate()
            .filter(|(_, old)| m.contains(old))
            .map(|(new, _)| 1usize << new)
            .sum()
    })
}

/// Unit phases, one per pattern of the masked bits of an index.
struct PatternPhases {
    mask: usize,
    by_pattern: std::collections::HashMap<usize, C64>,
    single: C64,
}

impl PatternPhases {
    fn of(&self, i: usize) -> C64 {
        if self.mask == 0 {
            self.single
        } else {
            self.by_pattern
                .get(&(i & self.mask))
                .copied()
                .unwrap_or(C64::new(1.0, 0.0))
        }
    }
}

/// The phase `e^{ig}` that best aligns `b` with `a` on each pattern of `mask` (of the
/// index modulo `rows`): the phase of `sum conj(a_i) b_i` over that pattern.
fn pattern_phases(a: &[C64], b: &[C64], rows: usize, mask: usize) -> PatternPhases {
    let unit = |z: C64| {
        if z.norm() > 0.0 {
            z / z.norm()
        } else {
            C64::new(1.0, 0.0)
        }
    };
    if mask == 0 {
        let s: C64 = a
            .par_iter()
            .zip(b.par_iter())
            .map(|(x, y)| x.conj() * y)
            .sum();
        return PatternPhases {
            mask,
            by_pattern: Default::default(),
            single: unit(s),
        };
    }
    let mut sums = std::collections::HashMap::<usize, C64>::new();
    for (i, (x, y)) in a.iter().zip(b).enumerate() {
        *sums.entry((i % rows) & mask).or_default() += x.conj() * y;
    }
    PatternPhases {
        mask,
        by_pattern: sums.into_iter().map(|(k, v)| (k, unit(v))).collect(),
        single: C64::new(1.0, 0.0),
    }
}

/// The unitary of `kernels` on `n` qubits as a column-major vector, allocated
/// fallibly; blocks of columns are simulated in parallel.
fn try_unitary(
    kernels: &[Kernel],
    n: usize,
) -> Result<Vec<C64>, std::collections::TryReserveError> {
    let dim = 1usize << n;
    let mut out = try_zeroed_amps(dim * dim)?;
    crate::sim::apply::unitary_into(kernels, n, &mut out);
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The qubits a difference acts on: a small Z rotation on qubit 0, a CNOT on
    /// qubits 1 and 2, nothing, each after the same random-ish unitary on 3 qubits.
    #[test]
    fn a_difference_is_traced_to_the_qubits_it_acts_on() {
        let base = vec![
            Kernel::One {
                q: 0,
                m: crate::native::rotation(0.7, 0.3),
            },
            Kernel::Controlled {
                controls: vec![0],
                target: 2,
                m: crate::native::rotation(1.1, 0.0),
            },
            Kernel::One {
                q: 1,
                m: crate::native::rotation(0.4, 1.0),
            },
        ];
        let with = |k: Option<Kernel>| {
            let mut ks = base.clone();
            ks.extend(k);
            try_unitary(&ks, 3).unwrap()
        };
        let x = [
            [C64::new(0.0, 0.0), C64::new(1.0, 0.0)],
            [C64::new(1.0, 0.0), C64::new(0.0, 0.0)],
        ];
        let a = with(None);
        let z = with(Some(Kernel::One {
            q: 0,
            m: crate::native::z_rotation(1e-6),
        }));
        assert_eq!(affected(&a, &z, 3), vec![0]);
        let cx = with(Some(Kernel::Controlled {
            controls: vec![1],
            target: 2,
            m: x,
        }));
        assert_eq!(affected(&a, &cx, 3), vec![1, 2]);
        assert!(affected(&a, &a, 3).is_empty());
    }
}
