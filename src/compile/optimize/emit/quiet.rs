//! Quiet ions (docs/optimizer.md): ions a range never couples or rotates off Z
//! share one echo column per block, and the per-ion signs that cancel their mutual
//! couplings over the range are resolved here into light shifts and pulses.

use super::*;

/// One pulse of a block's synthesis spread over the non-quiet idle ions (gate-set
/// fact 9): `m` rows of weight `t/m`; the quiet ions hold the row's sign of one
/// further Hadamard column, still to be multiplied by their own sign.
#[derive(Clone)]
pub(super) struct Group {
    pub(super) weight: f64,
    pub(super) pulses: Vec<Pulse>,
}

/// The groups of a synthesis on `active` among the device's ions: the other
/// non-quiet ions take columns 1 to r of a Hadamard matrix, the active ions column
/// 0 times the pulse's signs, the quiet ions column r + 1 (all ions of a pair of
/// distinct columns are decoupled, at unchanged total weight).
pub(super) fn quiet_groups(s: &Synthesis, active: &[usize], quiet: &[bool]) -> Vec<Group> {
    let n = quiet.len();
    let mut col = vec![usize::MAX; n];
    let mut next = 1;
    let mut is_active = vec![usize::MAX; n];
    for (k, &a) in active.iter().enumerate() {
        is_active[a] = k;
    }
    for ion in 0..n {
        if is_active[ion] == usize::MAX && !quiet[ion] {
            col[ion] = next;
            next += 1;
        }
    }
    let quiet_col = next;
    let h = smallest_hadamard(next + 1);
    let m = h.len();
    s.pulses
        .iter()
        .map(|p| Group {
            weight: p.weight,
            pulses: h
                .iter()
                .map(|row| Pulse {
                    signs: (0..n)
                        .map(|ion| match is_active[ion] {
                            usize::MAX if quiet[ion] => row[quiet_col],
                            usize::MAX => row[col[ion]],
                            k => row[0] * p.signs[k],
                        })
                        .collect(),
                    weight: p.weight / m as f64,
                })
                .collect(),
        })
        .collect()
}

/// A block whose quiet ions share one column, as made, and as made without it.
pub(super) struct QuietPart {
    pub(super) groups: Vec<Group>,
    /// The block made without the shared column (between its collective rotations).
    pub(super) plain: Vec<NativeOp>,
    pub(super) plain_report: Option<BlockReport>,
    /// Where the block's report is in the segment's reports.
    pub(super) report: usize,
}

impl QuietPart {
    fn weight(&self) -> f64 {
        self.groups.iter().map(|g| g.weight).sum()
    }
}

/// How the quiet ions' mutual couplings are made to vanish over a segment.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
pub(super) enum QuietSigns<'a> {
    /// Each ion its own sign from a Hadamard matrix `H_Q`, the segment's weight split
    /// evenly over its rows: the couplings sum to zero.
    Split,
    /// One sign for all: every pair of quiet ions is coupled by the segment's total
    /// weight `T`, padded up to a multiple of pi/2 (docs/optimizer.md). The parts
    /// listed (indices into the parts) are made without the shared column.
    Folded(&'a [usize]),
}

/// Gives the quiet ions their signs and flattens the parts.
///
/// `Split`: within a group the quiet ions share one column, so every coupling
/// between two quiet ions is the group's weight times the product of their signs;
/// the signs are rows of a Hadamard matrix `H_Q` (one column per quiet ion), each row
/// used for exactly `1/m_Q` of the total weight (groups are split at the
/// boundaries), so those couplings sum to zero over the segment.
///
/// `Folded`: the quiet ions keep the sign of their shared column, so each pair of
/// them is coupled by `T`. The last group gets pulses of total weight `T' - T`, `T'`
/// the next multiple of pi/2, in which the quiet ions share one column of a Hadamard
/// matrix and every other ion has a column of its own (coupling only the quiet ions
/// to each other). `exp(-i (pi/2) Z_a Z_b)` is `-i Z_a Z_b`, so couplings of `k pi/2`
/// on every pair of `q` quiet ions are, up to global phase, nothing for even `k` or
/// odd `q`, and `Z` on each quiet ion for odd `k` and even `q`: undone at the end by
/// a frame change of pi and a light shift of -pi on every other ion.
///
/// Ions marked in `drop_z` are measured right after the segment: the light shifts
/// that undo Z on them are left out like the segment's other final Z rotations.
pub(super) fn resolve_quiet<'a>(
    parts: &'a [Part],
    quiet: &[bool],
    how: QuietSigns,
    drop_z: &[bool],
) -> Vec<NativeOp> {
    let (folded, swap) = match how {
        QuietSigns::Split => (false, &[][..]),
        QuietSigns::Folded(swap) => (true, swap),
    };
    // The parts sharing the column, and their total weight.
    let shared = |k: usize| match &parts[k] {
        Part::Quiet(q) if !swap.contains(&k) => Some(q),
        _ => None,
    };
    let total: f64 = (0..parts.len())
        .filter_map(shared)
        .map(|q| q.weight())
        .sum();
    let Some(last_quiet) = (0..parts.len()).rev().find(|&k| shared(k).is_some()) else {
        let plain = |p: &'a Part| match p {
            Part::Ops(v) => v.as_slice(),
            Part::Quiet(q) => q.plain.as_slice(),
        };
        let mut out = Vec::with_capacity(parts.iter().map(|p| plain(p).len()).sum());
        parts.iter().for_each(|p| out.extend_from_slice(plain(p)));
        return out;
    };
    let quiet_ions: Vec<usize> = (0..quiet.len()).filter(|&i| quiet[i]).collect();
    let split = !folded && quiet_ions.len() > 1;
    let hq = smallest_hadamard(if split { quiet_ions.len() } else { 1 });
    let share = total / hq.len() as f64;
    let mut row = 0usize;
    let mut room = share;
    let mut out = Vec::new();
    for (index, part) in parts.iter().enumerate() {
        match part {
            Part::Ops(v) => out.extend_from_slice(v),
            Part::Quiet(q) if shared(index).is_none() => out.extend_from_slice(&q.plain),
            Part::Quiet(q) => {
                let mut pulses = Vec::new();
                for g in &q.groups {
                    let mut left = g.weight;
                    while left > 0.0 {
                        let take = if split { left.min(room) } else { left };
                        let fraction = take / g.weight;
                        let r = &hq[row.min(hq.len() - 1)];
                        for p in &g.pulses {
                            let mut signs = p.signs.clone();
                            match (split, quiet_ions.first()) {
                                (true, _) => {
                                    for (c, &ion) in quiet_ions.iter().enumerate() {
                                        signs[ion] *= r[c];
                                    }
                                }
                                // The same pulse with the quiet ions at +1 (they
                                // share one sign), so they never flip.
                                (false, Some(&first)) if signs[first] < 0 => {
                                    signs.iter_mut().for_each(|s| *s = -*s);
                                }
                                _ => {}
                            }
                            if p.weight * fraction > 0.0 {
                                pulses.push(Pulse {
                                    signs,
                                    weight: p.weight * fraction,
                                });
                            }
                        }
                        left -= take;
                        room -= take;
                        if split && room <= 1e-12 * share {
                            row += 1;
                            room = share;
                        }
                        if left <= 1e-15 * g.weight {
                            break;
                        }
                    }
                }
                if folded && index == last_quiet {
                    // A padding pulse with the signs of one already there (up to
                    // sign: the same pulse) adds to its weight.
                    for pad in quiet_pad(total, quiet) {
                        match pulses.iter_mut().find(|p| same_pulse(&p.signs, &pad.signs)) {
                            Some(p) => p.weight += pad.weight,
                            None => pulses.push(pad),
                        }
                    }
                }
                out.push(NativeOp::Collective {
                    theta: FRAC_PI_2,
                    phi: FRAC_PI_2,
                });
                out.extend(pulse_ops(pulses));
                out.push(NativeOp::Collective {
                    theta: -FRAC_PI_2,
                    phi: FRAC_PI_2,
                });
            }
        }
    }
    if folded && quiet_ions.len() % 2 == 0 && half_turns(total) % 2 == 1 {
        out.push(NativeOp::VirtualZ { theta: PI });
        for ion in
            (0..quiet.len()).filter(|&i| !quiet[i] && !drop_z.get(i).copied().unwrap_or(false))
        {
            out.push(NativeOp::LightShift {
                ion: ion as u32,
                theta: -PI,
            });
        }
    }
    out
}

/// Whether two sign vectors give the same pulse (equal, or opposite).
fn same_pulse(a: &[i8], b: &[i8]) -> bool {
    a == b || a.iter().zip(b).all(|(x, y)| *x == -*y)
}

/// The weight of all quiet parts together.
fn shared_weight(parts: &[Part]) -> f64 {
    parts
        .iter()
        .map(|p| match p {
            Part::Quiet(q) => q.weight(),
            Part::Ops(_) => 0.0,
        })
        .sum()
}

/// How far from a multiple of pi/2 a sum of weights may be and still count as one
/// (rounding: the sums here are of at most thousands of terms).
fn fold_tolerance(total: f64) -> f64 {
    1e-13 * total.max(1.0)
}

/// Whether folding all quiet parts needs padding (their weight is not a multiple of
/// pi/2).
pub(super) fn fold_needs_pad(parts: &[Part]) -> bool {
    let total = shared_weight(parts);
    off_half_turn(total) > fold_tolerance(total)
}

/// How far `x` is from the nearest multiple of pi/2.
fn off_half_turn(x: f64) -> f64 {
    (x - FRAC_PI_2 * (x / FRAC_PI_2).round()).abs()
}

/// The quiet parts to make without the shared column so that the weight of the
/// others is a multiple of pi/2 (a fold with no padding), when some part's weight,
/// or some two parts' weights together, are the remainder (within rounding): the
/// choice that adds the fewest MS pulses over the parts' shared-column pulses.
/// Pairs are tried among at most 200 parts. `None` when no such choice exists, or
/// when the total is a multiple already.
pub(super) fn fold_swaps(parts: &[Part]) -> Option<Vec<usize>> {
    let total = shared_weight(parts);
    let tol = fold_tolerance(total);
    if off_half_turn(total) <= tol {
        return None;
    }
    let quiet: Vec<(usize, &QuietPart)> = parts
        .iter()
        .enumerate()
        .filter_map(|(k, p)| match p {
            Part::Quiet(q) if !q.plain.is_empty() => Some((k, &**q)),
            _ => None,
        })
        .collect();
    let added = |q: &QuietPart| {
        let plain = q.plain.iter().filter(|op| op.is_entangling()).count();
        let shared: usize = q.groups.iter().map(|g| g.pulses.len()).sum();
        plain as i64 - shared as i64
    };
    let mut best: Option<(i64, Vec<usize>)> = None;
    let mut consider = |cost: i64, swap: Vec<usize>| {
        if best.as_ref().map_or(true, |b| cost < b.0) {
            best = Some((cost, swap));
        }
    };
    for (i, &(a, qa)) in quiet.iter().enumerate() {
        if off_half_turn(total - qa.weight()) <= tol {
            consider(added(qa), vec![a]);
        }
        if quiet.len() <= 200 {
            for &(b, qb) in &quiet[i + 1..] {
                if off_half_turn(total - qa.weight() - qb.weight()) <= tol {
                    consider(added(qa) + added(qb), vec![a, b]);
                }
            }
        }
    }
    best.map(|b| b.1)
}

/// The multiple of pi/2 that a total weight is padded up to (a total within
/// [`fold_tolerance`] of a multiple is not padded).
fn half_turns(total: f64) -> i64 {
    let x = total / FRAC_PI_2;
    if off_half_turn(total) <= fold_tolerance(total) {
        x.round() as i64
    } else {
        x.ceil() as i64
    }
}

/// The pulses that bring the quiet ions' mutual coupling from `total` up to a
/// multiple of pi/2: the rows of a Hadamard matrix with the quiet ions on one column
/// (sign +1) and every other ion on a column of its own, so only pairs of quiet
/// ions are coupled. None when `total` is (within rounding) such a multiple.
fn quiet_pad(total: f64, quiet: &[bool]) -> Vec<Pulse> {
    let pad = half_turns(total) as f64 * FRAC_PI_2 - total;
    if pad <= fold_tolerance(total) {
        return Vec::new();
    }
    let others = quiet.iter().filter(|&&q| !q).count();
    let h = smallest_hadamard(others + 1);
    let weight = pad / h.len() as f64;
    h.iter()
        .map(|row| {
            let mut col = 0;
            Pulse {
                signs: quiet
                    .iter()
                    .map(|&q| {
                        if q {
                            1
                        } else {
                            col += 1;
                            row[col] * row[0]
                        }
                    })
                    .collect(),
                weight,
            }
        })
        .collect()
}

pub(super) fn push_shift(ops: &mut Vec<NativeOp>, ion: u32, theta: f64) {
    let t = wrap(theta);
    if t.abs() > EPS {
        ops.push(NativeOp::LightShift { ion, theta: t });
    }
}
