//! Exact rewrites that run before a comparison: MS runs fused into Ising
//! interactions, cancelled couplings dropped, qubits that no interaction touches
//! split off (and compared on their own), and runs of single-qubit operations
//! multiplied out.
//!
//! Invariant: each rewrite changes the product of a segment by at most the `slack`
//! it reports, in operator norm, up to global phase. The checker adds the slack to
//! the distance it measures, so a rewrite can never make unequal programs pass.

use crate::circuit::Mat2;
use crate::sim::program::Kernel;
use crate::sim::tableau::fuse_xx_runs;
use num_complex::Complex64 as C64;
use std::f64::consts::{FRAC_PI_2, FRAC_PI_4};

/// Couplings smaller than this are dropped (their total weight goes into the slack).
const ZERO_COUPLING: f64 = 1e-12;
/// A qubit coupled by one program only, by Ising terms of at most this total weight,
/// has those terms dropped into the slack: a tiny stray coupling (an echo that does
/// not quite cancel) then shows as a distance on the circuit's own qubits instead
/// of making every ion of the device part of the comparison.
const STRAY_COUPLING: f64 = 1e-6;

/// Two segments ready to compare on `n` qubits.
pub(super) struct Prepared {
    pub p: Vec<Kernel>,
    pub q: Vec<Kernel>,
    pub n: usize,
    /// Operator-norm bound on what the rewrites changed.
    pub slack: f64,
    /// The qubit with the most stray coupling dropped, and that coupling's weight.
    pub stray: Option<(usize, f64)>,
    /// The original index of each qubit compared.
    pub kept: Vec<usize>,
    /// Whether the programs were taken in the interaction picture (each with its
    /// own frame: the unitaries compared then differ from the originals by local
    /// rotations).
    pub framed: bool,
}

/// A qubit that no interaction touches, but whose own operations differ.
pub(super) struct IdleMismatch {
    pub qubit: usize,
    pub distance: f64,
}

/// How much rounding one kernel can add to an amplitude: the number of qubit
/// operations it takes (a collective rotation on 40 ions is 40).
pub(super) fn touches(k: &Kernel) -> usize {
    match k {
        Kernel::One { .. } => 1,
        Kernel::Controlled { controls, .. } => controls.len() + 1,
        Kernel::Swap { .. } => 6,
        Kernel::Ising { axis, terms } => {
            2 * terms.len()
                + if axis.is_some() {
                    4 * k.qubits().len()
                } else {
                    0
                }
        }
        Kernel::Ms { qubits, .. } => 3 * qubits.len() + 1,
        Kernel::Collective { qubits, .. } => qubits.len(),
        Kernel::Dense { qubits, .. } => 1 << qubits.len(),
    }
}

/// Fuses, drops and splits off idle qubits. `Err` names an idle qubit whose
/// operations differ by more than `tolerance`. With `measured` (a final diagonal
/// allowed on those qubits), a split-off measured qubit is compared up to a
/// diagonal (the interaction picture keeps each program's product, so it serves
/// here too).
pub(super) fn prepare(
    p: &[Kernel],
    q: &[Kernel],
    n: usize,
    measured: Option<&[usize]>,
    tolerance: f64,
) -> Result<Prepared, IdleMismatch> {
    // The interaction picture (module `frame`) of either side, when it applies:
    // taken only when it leaves fewer qubits to compare than the programs as given.
    let ip = super::frame::interaction_picture(p, n);
    let iq = super::frame::interaction_picture(q, n);
    if ip.is_none() && iq.is_none() {
        return prepare_as_given(p, q, n, measured, tolerance, 0.0, false);
    }
    // A tie goes to the programs as given: a Clifford pair stays readable as
    // tableaux, and a difference can be traced to the qubits it acts on. But a side
    // without a picture is the same in both preparations, and its firmly coupled
    // qubits are kept by both: when that side is not Clifford (no tableau either
    // way) and the picture keeps no more than those qubits, the programs as given
    // cannot keep fewer, and are not prepared at all (a collective sequence as
    // given couples every ion it pulses: preparing it costs as much again).
    let floor = match (&ip, &iq) {
        (None, Some(_)) if !all_clifford(p) => firmly_coupled(p, n),
        (Some(_), None) if !all_clifford(q) => firmly_coupled(q, n),
        _ => 0,
    };
    let (pk, ps) = ip.unwrap_or_else(|| (p.to_vec(), 0.0));
    let (qk, qs) = iq.unwrap_or_else(|| (q.to_vec(), 0.0));
    let framed = prepare_as_given(&pk, &qk, n, measured, tolerance, ps + qs, true)?;
    if framed.n <= floor {
        return Ok(framed);
    }
    let plain = prepare_as_given(p, q, n, measured, tolerance, 0.0, false)?;
    Ok(if framed.n < plain.n { framed } else { plain })
}

/// How many qubits `ks` couples in a way no pre-pass removes: after fusing MS runs
/// and dropping cancelled couplings, a qubit some non-Ising kernel touches, or whose
/// Ising weight is above what [`drop_stray_couplings`] may drop. Each is kept by
/// [`prepare_as_given`] whatever the other program is.
fn firmly_coupled(ks: &[Kernel], n: usize) -> usize {
    let (fused, _) = fuse_xx_runs(ks);
    let (fused, _) = fold_couplings(fused);
    let (_, other, weight) = survey(&fused, n);
    (0..n)
        .filter(|&x| other[x] || weight[x] > STRAY_COUPLING)
        .count()
}

/// Whether every kernel of `ks` is Clifford (within the tableau's tolerance).
fn all_clifford(ks: &[Kernel]) -> bool {
    let (mut gates, mut dev) = (Vec::new(), 0.0);
    ks.iter().all(|k| {
        gates.clear();
        crate::sim::tableau::kernel_to_clifford(k, &mut gates, &mut dev).is_some()
    })
}

/// Per qubit: coupled at all, coupled by a non-Ising kernel, total Ising weight.
fn survey(ks: &[Kernel], n: usize) -> (Vec<bool>, Vec<bool>, Vec<f64>) {
    let mut coupled = vec![false; n];
    let mut other = vec![false; n];
    let mut weight = vec![0.0f64; n];
    for k in ks.iter().filter(|k| is_multi(k)) {
        match k {
            Kernel::Ising { terms, .. } => {
                for &(a, b, w) in terms {
                    for x in [a, b] {
                        coupled[x] = true;
                        weight[x] += w.abs();
                    }
                }
            }
            _ => {
                for x in k.qubits() {
                    coupled[x] = true;
                    other[x] = true;
                }
            }
        }
    }
    (coupled, other, weight)
}

fn prepare_as_given(
    p: &[Kernel],
    q: &[Kernel],
    n: usize,
    measured: Option<&[usize]>,
    tolerance: f64,
    frame_slack: f64,
    framed: bool,
) -> Result<Prepared, IdleMismatch> {
    let (fp, sp) = fuse_xx_runs(p);
    let (fq, sq) = fuse_xx_runs(q);
    let (fp, dp) = fold_couplings(fp);
    let (fq, dq) = fold_couplings(fq);
    let (fp, fq, stray) = drop_stray_couplings(fp, fq, n);
    let slack = frame_slack + sp + sq + dp + dq + stray.map_or(0.0, |s| s.2);
    let stray = stray.map(|s| (s.0, s.1));
    let (p, q, n, kept) = reduce(fp, fq, n, tolerance, slack, measured)?;
    let (p, q) = (
        merge_single_qubit_runs(&p, n),
        merge_single_qubit_runs(&q, n),
    );
    Ok(Prepared {
        p,
        q,
        n,
        slack,
        stray,
        kept,
        framed,
    })
}

/// The qubit with the most stray coupling, its weight, and the total dropped.
type Stray = (usize, f64, f64);

/// Drops the Ising terms on qubits that only one program couples, when every
/// multi-qubit kernel touching such a qubit is an Ising kernel and its terms there
/// weigh at most [`STRAY_COUPLING`] together. Returns the programs, and the qubit with
/// the most dropped weight, that weight, and the total dropped (an operator-norm
/// bound on the change).
fn drop_stray_couplings(
    p: Vec<Kernel>,
    q: Vec<Kernel>,
    n: usize,
) -> (Vec<Kernel>, Vec<Kernel>, Option<Stray>) {
    let (cp, op, wp) = survey(&p, n);
    let (cq, oq, wq) = survey(&q, n);
    let stray_in =
        |coupled: &[bool], other: &[bool], weight: &[f64], coupled_elsewhere: &[bool]| {
            (0..n)
                .map(|x| {
                    coupled[x] && !coupled_elsewhere[x] && !other[x] && weight[x] <= STRAY_COUPLING
                })
                .collect::<Vec<bool>>()
        };
    let (sp, sq) = (stray_in(&cp, &op, &wp, &cq), stray_in(&cq, &oq, &wq, &cp));
    if !sp.iter().chain(&sq).any(|&s| s) {
        return (p, q, None);
    }
    let mut worst: Option<(usize, f64)> = None;
    for x in 0..n {
        let w = if sp[x] {
            wp[x]
        } else if sq[x] {
            wq[x]
        } else {
            0.0
        };
        if w > 0.0 && worst.map_or(true, |(_, v)| w > v) {
            worst = Some((x, w));
        }
    }
    let mut total = 0.0;
    let mut strip = |ks: Vec<Kernel>, stray: &[bool]| -> Vec<Kernel> {
        ks.into_iter()
            .filter_map(|k| match k {
                Kernel::Ising { axis, terms } => {
                    let terms: Vec<_> = terms
                        .into_iter()
                        .filter(|&(a, b, w)| {
                            let drop = stray[a] || stray[b];
                            if drop {
                                total += w.abs();
                            }
                            !drop
                        })
                        .collect();
                    (!terms.is_empty()).then_some(Kernel::Ising { axis, terms })
                }
                other => Some(other),
            })
            .collect()
    };
    let p = strip(p, &sp);
    let q = strip(q, &sq);
    (p, q, worst.map(|(x, w)| (x, w, total)))
}

/// Folds each coupling into (-pi/4, pi/4] and removes those left (nearly) zero, such
/// as an echo's non-target pairs; returns the total weight removed plus a bound on
/// the folds' rounding. With `w = k pi/2 + d`, `exp(-i w P_a P_b)` is
/// `(-i)^k (P_a P_b)^k exp(-i d P_a P_b)`, and the terms of one kernel commute with
/// each other and with `P_a P_b`: so an odd `k` becomes `P` on `a` and on `b`,
/// emitted after the kernel (once per qubit named an odd number of times), and `k`
/// even is a global phase. Spare ions that share one echo column over a segment are
/// coupled by a multiple of `pi/2` that this turns into nothing or a Pauli each.
/// `exp(-i sum w P P)` moves by at most the weight removed, in operator norm.
fn fold_couplings(ks: Vec<Kernel>) -> (Vec<Kernel>, f64) {
    let mut dropped = 0.0;
    let mut out = Vec::with_capacity(ks.len());
    let mut odd: Vec<bool> = Vec::new();
    for k in ks {
        match k {
            Kernel::Ising { axis, terms } => {
                let mut folded = false;
                let terms: Vec<_> = terms
                    .into_iter()
                    .filter_map(|(a, b, w)| {
                        let (w, k) = fold(w, &mut dropped);
                        if k % 2 != 0 {
                            let top = a.max(b) + 1;
                            if odd.len() < top {
                                odd.resize(top, false);
                            }
                            odd[a] = !odd[a];
                            odd[b] = !odd[b];
                            folded = true;
                        }
                        let keep = w.abs() > ZERO_COUPLING;
                        if !keep {
                            dropped += w.abs();
                        }
                        keep.then_some((a, b, w))
                    })
                    .collect();
                if !terms.is_empty() {
                    out.push(Kernel::Ising { axis, terms });
                }
                if folded {
                    let p = crate::circuit::mat2::pauli(axis);
                    for (q, flag) in odd.iter_mut().enumerate() {
                        if std::mem::take(flag) {
                            out.push(Kernel::One { q, m: p });
                        }
                    }
                }
            }
            other => out.push(other),
        }
    }
    (out, dropped)
}

/// `w` folded into (-pi/4, pi/4] (a weight within rounding of pi/4 is left as it
/// is), the multiple `k` of pi/2 taken off, and the fold's rounding added to `slack`:
/// `|k|` times the error of `FRAC_PI_2` (6.12e-17), and half a unit in the last
/// place of the product `k FRAC_PI_2` and of the difference.
fn fold(w: f64, slack: &mut f64) -> (f64, i64) {
    /// `|pi/2 - FRAC_PI_2|` is 6.123e-17; rounded up.
    const FRAC_PI_2_ERROR: f64 = 6.2e-17;
    if w.abs() <= FRAC_PI_4 * (1.0 + 1e-12) || !w.is_finite() {
        return (w, 0);
    }
    let k = (w / FRAC_PI_2).round();
    let product = k * FRAC_PI_2;
    let d = w - product;
    *slack += k.abs() * FRAC_PI_2_ERROR + 0.5 * f64::EPSILON * (product.abs() + d.abs());
    (d, k as i64)
}

fn is_multi(k: &Kernel) -> bool {
    !matches!(k, Kernel::One { .. } | Kernel::Collective { .. })
}

/// The largest entry distance between `b` and `a` after aligning the global phase
/// by `arg tr(a^dagger b)`.
pub(super) fn aligned_distance2(a: &Mat2, b: &Mat2) -> f64 {
    let mut tr = C64::new(0.0, 0.0);
    for i in 0..2 {
        for j in 0..2 {
            tr += a[i][j].conj() * b[i][j];
        }
    }
    let ph = if tr.norm() > 0.0 {
        tr / tr.norm()
    } else {
        C64::new(1.0, 0.0)
    };
    let mut worst: f64 = 0.0;
    for i in 0..2 {
        for j in 0..2 {
            worst = worst.max((b[i][j] - ph * a[i][j]).norm());
        }
    }
    worst
}

/// The largest entry of `|b - D a|` over unit diagonals `D`, each row aligned by its
/// own phase: how far `b` is from `a` followed by a Z rotation (up to phase).
pub(super) fn row_aligned_distance2(a: &Mat2, b: &Mat2) -> f64 {
    let mut worst: f64 = 0.0;
    for i in 0..2 {
        let dot = a[i][0].conj() * b[i][0] + a[i][1].conj() * b[i][1];
        let ph = if dot.norm() > 0.0 {
            dot / dot.norm()
        } else {
            C64::new(1.0, 0.0)
        };
        for j in 0..2 {
            worst = worst.max((b[i][j] - ph * a[i][j]).norm());
        }
    }
    worst
}

/// The programs on the qubits kept, their count, and the original index of each.
type Reduced = (Vec<Kernel>, Vec<Kernel>, usize, Vec<usize>);

/// Splits off the qubits that no multi-qubit kernel of either program touches: the
/// programs factor into a product over those qubits and the rest, and each split-off
/// qubit is compared here (largest entry distance after phase alignment, plus the
/// slack, against `tolerance`). A split-off qubit named in `measured` is compared up
/// to a diagonal (each row aligned by its own phase): `B = D A` with `D` diagonal
/// on the measured qubits holds for the product exactly when it holds for each factor.
fn reduce(
    p: Vec<Kernel>,
    q: Vec<Kernel>,
    n: usize,
    tolerance: f64,
    slack: f64,
    measured: Option<&[usize]>,
) -> Result<Reduced, IdleMismatch> {
    let mut entangled = vec![false; n];
    for k in p.iter().chain(&q).filter(|k| is_multi(k)) {
        for x in k.qubits() {
            entangled[x] = true;
        }
    }
    if entangled.iter().all(|&e| e) {
        return Ok((p, q, n, (0..n).collect()));
    }
    // Each idle qubit's product in each program, in one pass over the kernels.
    let products = |ks: &[Kernel]| {
        let mut out: Vec<Mat2> = vec![identity2(); n];
        for k in ks {
            match k {
                Kernel::One { q, m } if !entangled[*q] => out[*q] = mul2(m, &out[*q]),
                Kernel::Collective { m, qubits } => {
                    for &x in qubits.iter().filter(|&&x| !entangled[x]) {
                        out[x] = mul2(m, &out[x]);
                    }
                }
                _ => {}
            }
        }
        out
    };
    let (pa, pb) = (products(&p), products(&q));
    for x in (0..n).filter(|&x| !entangled[x]) {
        let (a, b) = (pa[x], pb[x]);
        let distance = if measured.is_some_and(|m| m.contains(&x)) {
            row_aligned_distance2(&a, &b)
        } else {
            aligned_distance2(&a, &b)
        } + slack;
        if distance > tolerance {
            return Err(IdleMismatch { qubit: x, distance });
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
    let n_kept = kept.len();
    Ok((remap(p), remap(q), n_kept, kept))
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
/// qubit when a multi-qubit kernel touches it. Exact up to rounding; cuts simulation
/// work.
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

pub(super) use crate::circuit::mat2::{adjoint as adjoint2, identity as identity2, mul as mul2};

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::program::{rotation, z_rotation};
    use rand::{Rng, SeedableRng};

    /// Folding couplings modulo pi/2 keeps the unitary up to global phase (against
    /// dense unitaries from nalgebra, `unitary_of`): random Ising kernels along Z or
    /// an axis in the XY plane, weights near multiples of pi/2 (some exactly, some
    /// off by 1e-9) or anywhere in [-7, 7], between random rotations. The distance
    /// stays within the reported slack, and folds to Paulis occur.
    #[test]
    fn folding_couplings_keeps_the_unitary() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(34);
        let n = 4;
        let mut paulis = 0;
        for _ in 0..200 {
            let mut ks = Vec::new();
            for _ in 0..rng.gen_range(1..6) {
                let axis = rng.gen_bool(0.5).then(|| rng.gen_range(-3.0..3.0));
                let terms = (0..rng.gen_range(1..5))
                    .map(|_| {
                        let a = rng.gen_range(0..n);
                        let b = (a + rng.gen_range(1..n)) % n;
                        let k = f64::from(rng.gen_range(-4i32..=4));
                        let w = match rng.gen_range(0..3) {
                            0 => k * FRAC_PI_2,
                            1 => k * FRAC_PI_2 + 1e-9,
                            _ => rng.gen_range(-7.0..7.0),
                        };
                        (a.min(b), a.max(b), w)
                    })
                    .collect();
                ks.push(Kernel::Ising { axis, terms });
                ks.push(Kernel::One {
                    q: rng.gen_range(0..n),
                    m: rotation(rng.gen_range(-3.0..3.0), rng.gen_range(-3.0..3.0)),
                });
            }
            let (out, slack) = fold_couplings(ks.clone());
            let ones = |ks: &[Kernel]| {
                ks.iter()
                    .filter(|k| matches!(k, Kernel::One { .. }))
                    .count()
            };
            paulis += ones(&out) - ones(&ks);
            use crate::sim::apply::{distance_up_to_phase, unitary_of};
            let d = distance_up_to_phase(&unitary_of(&ks, n), &unitary_of(&out, n));
            assert!(d < 1e-10 + slack, "distance {d}, slack {slack}");
        }
        assert!(paulis > 50, "{paulis}");
    }

    /// A coupling of exactly pi/2 is a Pauli product: no Ising kernel is left, and
    /// the qubits it named carry Z (Z_a Z_b = exp(i pi/2) exp(-i pi/2 Z_a Z_b)); a
    /// whole clique of pi/2 couplings on an odd number of qubits leaves nothing,
    /// since each qubit is named an even number of times.
    #[test]
    fn a_coupling_of_a_half_turn_is_a_pauli_product() {
        let (out, _) = fold_couplings(vec![Kernel::Ising {
            axis: None,
            terms: vec![(0, 2, FRAC_PI_2)],
        }]);
        let qs: Vec<usize> = out
            .iter()
            .map(|k| match k {
                Kernel::One { q, m } => {
                    assert!(
                        (m[0][0] - C64::ONE).norm() < 1e-15 && (m[1][1] + C64::ONE).norm() < 1e-15
                    );
                    *q
                }
                other => panic!("a coupling left: {other:?}"),
            })
            .collect();
        assert_eq!(qs, vec![0, 2]);
        let clique: Vec<_> = (0..5)
            .flat_map(|a| (a + 1..5).map(move |b| (a, b, -3.0 * FRAC_PI_2)))
            .collect();
        let (out, _) = fold_couplings(vec![Kernel::Ising {
            axis: None,
            terms: clique,
        }]);
        assert!(out.is_empty(), "{out:?}");
    }

    /// Skipping the preparation of the programs as given never costs qubits: on
    /// random pairs (a circuit side of rotations and couplings, strong, tiny or
    /// cancelling; a collective side of sandwiches, MS pulses and light shifts),
    /// [`prepare`] keeps exactly as few qubits as the better of both preparations.
    #[test]
    fn skipping_the_programs_as_given_keeps_the_fewest_qubits() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(21);
        let n = 6;
        let all: Vec<usize> = (0..n).collect();
        let mut skipped = 0;
        for _ in 0..300 {
            let mut p = Vec::new();
            for _ in 0..rng.gen_range(1..8) {
                let a = rng.gen_range(0..n);
                let b = (a + rng.gen_range(1..n)) % n;
                p.push(match rng.gen_range(0..4) {
                    0 => Kernel::Ising {
                        axis: None,
                        terms: vec![(a.min(b), a.max(b), rng.gen_range(-1.0..1.0))],
                    },
                    1 => Kernel::Ising {
                        axis: None,
                        terms: vec![(a.min(b), a.max(b), 1e-8)],
                    },
                    _ => Kernel::One {
                        q: a,
                        m: rotation(rng.gen_range(0.1..3.0), rng.gen_range(-3.0..3.0)),
                    },
                });
            }
            let sandwich = |theta: f64| Kernel::Collective {
                m: rotation(theta, std::f64::consts::FRAC_PI_2),
                qubits: all.clone(),
            };
            let mut q = vec![sandwich(std::f64::consts::FRAC_PI_2)];
            // Half the time each pulse is undone at once (an echo that cancels).
            let undone = rng.gen_bool(0.5);
            for _ in 0..rng.gen_range(1..6) {
                let theta = rng.gen_range(-1.0..1.0);
                for t in [theta, -theta].into_iter().take(1 + usize::from(undone)) {
                    q.push(Kernel::Ms {
                        theta: t,
                        phi: 0.0,
                        qubits: all.clone(),
                    });
                }
                q.push(Kernel::One {
                    q: rng.gen_range(0..n),
                    m: z_rotation(std::f64::consts::PI),
                });
            }
            q.push(sandwich(-std::f64::consts::FRAC_PI_2));
            let got = prepare(&p, &q, n, None, 1e9);
            let plain = prepare_as_given(&p, &q, n, None, 1e9, 0.0, false);
            let (qk, qs) = super::super::frame::interaction_picture(&q, n).expect("applies");
            let framed = prepare_as_given(&p, &qk, n, None, 1e9, qs, true);
            let (got, plain, framed) = match (got, plain, framed) {
                (Ok(g), Ok(a), Ok(b)) => (g, a, b),
                _ => panic!("a tolerance of 1e9 accepts every idle qubit"),
            };
            assert_eq!(got.n, plain.n.min(framed.n));
            skipped += usize::from(got.framed && framed.n == plain.n);
        }
        // Ties taken in the picture: the preparation as given was skipped.
        assert!(skipped > 20, "{skipped}");
    }
}
