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

/// Gives the quiet ions their signs and flattens the parts. Within a group the
/// quiet ions share one column, so every coupling between two quiet ions is the
/// group's weight times the product of their signs; the signs are rows of a
/// Hadamard matrix `H_Q` (one column per quiet ion), each row used for exactly
/// `1/m_Q` of the total weight (groups are split at the boundaries), so those
/// couplings sum to zero over the segment.
pub(super) fn resolve_quiet(parts: Vec<Part>, quiet: &[bool]) -> Vec<NativeOp> {
    if parts.iter().all(|p| matches!(p, Part::Ops(_))) {
        return parts
            .into_iter()
            .flat_map(|p| match p {
                Part::Ops(v) => v,
                Part::Quiet(_) => unreachable!("only operations"),
            })
            .collect();
    }
    let quiet_ions: Vec<usize> = (0..quiet.len()).filter(|&i| quiet[i]).collect();
    let total: f64 = parts
        .iter()
        .map(|p| match p {
            Part::Quiet(groups) => groups.iter().map(|g| g.weight).sum(),
            Part::Ops(_) => 0.0,
        })
        .sum();
    let hq = smallest_hadamard(quiet_ions.len().max(1));
    let share = total / hq.len() as f64;
    let mut row = 0usize;
    let mut room = share;
    let mut out = Vec::new();
    for part in parts {
        match part {
            Part::Ops(v) => out.extend(v),
            Part::Quiet(groups) => {
                let mut pulses = Vec::new();
                for g in groups {
                    let mut left = g.weight;
                    while left > 0.0 {
                        let take = if quiet_ions.len() <= 1 {
                            left
                        } else {
                            left.min(room)
                        };
                        let fraction = take / g.weight;
                        let r = &hq[row.min(hq.len() - 1)];
                        for p in &g.pulses {
                            let mut signs = p.signs.clone();
                            for (c, &ion) in quiet_ions.iter().enumerate() {
                                signs[ion] *= r[c];
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
                        if quiet_ions.len() > 1 && room <= 1e-12 * share {
                            row += 1;
                            room = share;
                        }
                        if left <= 1e-15 * g.weight {
                            break;
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
    out
}

pub(super) fn push_shift(ops: &mut Vec<NativeOp>, ion: u32, theta: f64) {
    let t = wrap(theta);
    if t.abs() > EPS {
        ops.push(NativeOp::LightShift { ion, theta: t });
    }
}
