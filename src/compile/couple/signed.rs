//! Pulses of both signs with the spectators never flipped (docs/gate-set.md, fact
//! 10).
//!
//! With negative MS areas allowed, a block need not echo the ions it leaves alone:
//! they keep sign +1 for every pulse, and the pulses are weighted so that each
//! spectator's couplings cancel. Label the Walsh-Hadamard matrix of order `m = 2^D`
//! by `H[j][c] = (-1)^popcount(j & c)`; give each coupled ion `u` a column `c_u != 0`
//! and every spectator column 0 (all +1). Pulse `j` has signs `H[j][c_u]` and weight
//! `t_j = sum_x alpha_x H[j][x]` over a set `X` of labels. Since the columns are the
//! characters of `GF(2)^D`, `H[j][a] H[j][b] = H[j][a ^ b]` and `sum_j H[j][c] = m`
//! for `c = 0`, else 0; so
//!
//! ```text
//! coupling(u, v)         = sum_j t_j H[j][c_u ^ c_v] = m alpha(c_u ^ c_v),
//! coupling(u, spectator) = sum_j t_j H[j][c_u]       = m alpha(c_u),
//! coupling among spectators = sum_j t_j              = m alpha(0),
//! ```
//!
//! with `alpha` zero off `X`. The labelling asks: coupled pairs XOR to a label whose
//! `m alpha` is their weight, every other pair of coupled ions and every column XORs
//! to no label, and 0 is no label. Columns are `(p_C, y_u)`: a component index
//! `p_C != 0` in the high bits, so pairs across components and ions against
//! spectators never meet a label (labels live in the low bits), and a label
//! `y_u ^ y_v` per coupling inside a component, shared by couplings of equal weight
//! where no other pair then collides with it. A single coupling `w` takes four pulses
//! of weight `+-w/4` (total `w`); any number of disjoint pairs of one weight take
//! `m` pulses of total weight `w`.
//!
//! Invariant: a returned synthesis realises the coupling among its ions, leaves every
//! ion's coupling to a spectator at zero, and sums to zero weight (no coupling among
//! spectators), each within [`CERTIFICATE_EPS`] ([`certifies_signed`]).

use super::{components, Coupling, Method, Pulse, Signs, Synthesis, CERTIFICATE_EPS};
use rustc_hash::{FxHashMap, FxHashSet};

/// The labelling of a coupling's ions: columns, and each label with its weight.
struct Labels {
    y: Vec<Option<u32>>,
    /// Label -> the coupling weight of the pairs that XOR to it.
    weight: FxHashMap<u32, f64>,
    /// XORs of uncoupled pairs: never a label.
    free: FxHashSet<u32>,
    bits: u32,
}

/// Pulses of both signs realising `c` with any other ion (a spectator) at sign +1
/// throughout and uncoupled, at most `max_pulses` of them; `None` when the labelling
/// needs more (or more than 24 label bits).
pub fn signed_labels(c: &Coupling, max_pulses: usize) -> Option<Synthesis> {
    let parts: Vec<(Vec<usize>, Coupling)> = components(c)
        .into_iter()
        .filter(|(ions, _)| ions.len() > 1)
        .collect();
    if parts.is_empty() {
        return None;
    }
    let labels = label(c, &parts, true).or_else(|| label(c, &parts, false))?;
    let p_bits = usize::BITS - parts.len().leading_zeros();
    let bits = labels.bits + p_bits;
    if bits > 24 || 1usize << bits > max_pulses {
        return None;
    }
    let m = 1usize << bits;
    let mut column = vec![0u32; c.n];
    for (k, (ions, _)) in parts.iter().enumerate() {
        for &u in ions {
            column[u] = ((k as u32 + 1) << labels.bits) | labels.y[u]?;
        }
    }
    let mut alphas: Vec<(u32, f64)> = labels
        .weight
        .iter()
        .map(|(&x, &w)| (x, w / m as f64))
        .collect();
    alphas.sort_by_key(|a| a.0);
    let sign = |j: usize, col: u32| -> i8 {
        if (j as u32 & col).count_ones() % 2 == 0 {
            1
        } else {
            -1
        }
    };
    // The weights depend on the label bits of j alone: one sum per label row.
    let rows = 1usize << labels.bits;
    let t: Vec<f64> = (0..rows)
        .map(|j| alphas.iter().map(|&(x, a)| a * f64::from(sign(j, x))).sum())
        .collect();
    let top = t.iter().fold(0.0f64, |a, b| a.max(b.abs()));
    let mut pulses = Vec::new();
    for j in 0..m {
        let weight = t[j % rows];
        if weight.abs() <= 1e-15 * top {
            continue;
        }
        let signs: Signs = column.iter().map(|&col| sign(j, col)).collect();
        pulses.push(Pulse { signs, weight });
    }
    let weight = pulses.iter().map(|p| p.weight.abs()).sum();
    let s = Synthesis {
        pulses,
        weight,
        lower_bound: c.max_abs(),
        method: Method::Signed,
    };
    certifies_signed(&s, c).then_some(s)
}

/// Labels the ions of `parts` (components of `c` with a coupling each); `share`
/// lets couplings of equal weight share a label where nothing collides.
fn label(c: &Coupling, parts: &[(Vec<usize>, Coupling)], share: bool) -> Option<Labels> {
    let mut l = Labels {
        y: vec![None; c.n],
        weight: FxHashMap::default(),
        free: FxHashSet::default(),
        bits: 0,
    };
    for (ions, _) in parts {
        let mut placed: Vec<usize> = vec![ions[0]];
        l.y[ions[0]] = Some(0);
        let mut head = 0;
        while head < placed.len() {
            let v = placed[head];
            head += 1;
            for &u in ions {
                let w = c.get(u, v);
                if l.y[u].is_some() || w == 0.0 {
                    continue;
                }
                let yv = l.y[v]?;
                let shared: Vec<u32> = if share {
                    let mut s: Vec<u32> = l
                        .weight
                        .iter()
                        .filter(|&(_, &lw)| lw == w)
                        .map(|(&x, _)| x)
                        .collect();
                    s.sort_unstable();
                    s
                } else {
                    Vec::new()
                };
                let mut done = false;
                for x in shared {
                    if let Some(new) = fits(c, &l, &placed, u, yv ^ x) {
                        commit(&mut l, u, yv ^ x, new);
                        done = true;
                        break;
                    }
                }
                if !done {
                    if l.bits >= 24 {
                        return None;
                    }
                    let x = 1u32 << l.bits;
                    l.bits += 1;
                    let new = fits(c, &l, &placed, u, yv ^ x)?;
                    commit(&mut l, u, yv ^ x, new);
                }
                placed.push(u);
            }
        }
    }
    Some(l)
}

/// What placing ion `u` at `y` adds (labels and free XORs), if nothing collides with
/// the ions already placed in its component.
fn fits(c: &Coupling, l: &Labels, placed: &[usize], u: usize, y: u32) -> Option<Vec<(u32, f64)>> {
    let mut new: Vec<(u32, f64)> = Vec::new();
    for &v in placed.iter().filter(|&&v| v != u) {
        let z = y ^ l.y[v]?;
        let w = c.get(u, v);
        let have = l
            .weight
            .get(&z)
            .copied()
            .or_else(|| new.iter().find(|n| n.0 == z && n.1 != 0.0).map(|n| n.1));
        match (w == 0.0, have) {
            (true, None) => new.push((z, 0.0)),
            (true, Some(_)) => return None,
            (false, Some(h)) if h == w => {}
            (false, Some(_)) => return None,
            (false, None) if z == 0 || l.free.contains(&z) => return None,
            (false, None) => new.push((z, w)),
        }
    }
    // A free XOR must not be (or become) a label.
    let labels_now =
        |z: u32| l.weight.contains_key(&z) || new.iter().any(|n| n.0 == z && n.1 != 0.0);
    if new.iter().any(|n| n.1 == 0.0 && labels_now(n.0)) {
        return None;
    }
    Some(new)
}

fn commit(l: &mut Labels, u: usize, y: u32, new: Vec<(u32, f64)>) {
    l.y[u] = Some(y);
    for (z, w) in new {
        if w == 0.0 {
            l.free.insert(z);
        } else {
            l.weight.insert(z, w);
        }
    }
}

/// True when `s` (weights of either sign) realises `c` with spectators at +1: the
/// couplings among `c`'s ions match, and `sum_k t_k s_k[u]` (ion `u` against a
/// spectator) and `sum_k t_k` (spectators among themselves) vanish, within
/// [`CERTIFICATE_EPS`] times the largest weight.
pub fn certifies_signed(s: &Synthesis, c: &Coupling) -> bool {
    let tol = CERTIFICATE_EPS * c.max_abs().max(1.0);
    if s.pulses.iter().any(|p| p.signs.len() != c.n) || s.residual(c) > tol {
        return false;
    }
    let total: f64 = s.pulses.iter().map(|p| p.weight).sum();
    let spectator = (0..c.n).all(|u| {
        let sum: f64 = s
            .pulses
            .iter()
            .map(|p| p.weight * f64::from(p.signs[u]))
            .sum();
        sum.abs() <= tol
    });
    total.abs() <= tol && spectator
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use std::f64::consts::FRAC_PI_4;

    /// The couplings `sum_k t_k s_k[i] s_k[j]` of the pulses on `n + extra` ions, the
    /// `extra` spectators at +1, summed pair by pair (independently of `residual`).
    fn couplings_with_spectators(s: &Synthesis, n: usize, extra: usize) -> Vec<Vec<f64>> {
        let all = n + extra;
        let mut m = vec![vec![0.0; all]; all];
        for p in &s.pulses {
            let sign = |i: usize| if i < n { f64::from(p.signs[i]) } else { 1.0 };
            for (i, row) in m.iter_mut().enumerate() {
                for (j, x) in row.iter_mut().enumerate() {
                    if i != j {
                        *x += p.weight * sign(i) * sign(j);
                    }
                }
            }
        }
        m
    }

    /// Checks `s` against `c` with three spectators, from the summed couplings.
    fn realises(s: &Synthesis, c: &Coupling) -> bool {
        let m = couplings_with_spectators(s, c.n, 3);
        let tol = 1e-12 * c.max_abs().max(1.0);
        (0..c.n + 3).all(|i| {
            (0..c.n + 3).all(|j| {
                let want = if i < c.n && j < c.n { c.get(i, j) } else { 0.0 };
                i == j || (m[i][j] - want).abs() <= tol
            })
        })
    }

    #[test]
    fn one_coupling_is_four_pulses_of_a_quarter_with_spectators_still() {
        // Derived in the module doc: w = pi/4 (a CNOT's coupling) as weights
        // +-w/4 over the four sign patterns of the pair, total w.
        let mut c = Coupling::zero(2);
        c.set(0, 1, FRAC_PI_4);
        let s = signed_labels(&c, 64).expect("a pair is labelled");
        assert_eq!(s.pulses.len(), 4);
        assert!(s
            .pulses
            .iter()
            .all(|p| (p.weight.abs() - FRAC_PI_4 / 4.0).abs() < 1e-15));
        assert!((s.weight - FRAC_PI_4).abs() < 1e-15);
        assert!(certifies_signed(&s, &c) && realises(&s, &c));
        // Two pulses of each sign: a synthesis of one sign could not leave the
        // spectators uncoupled from one another.
        assert_eq!(s.pulses.iter().filter(|p| p.weight < 0.0).count(), 2);
    }

    #[test]
    fn disjoint_pairs_of_one_weight_cost_one_weight() {
        // Fact 10's layer: k pairs of weight w in 2^(1 + bits(k)) pulses of total w.
        for k in 1..=9usize {
            let mut c = Coupling::zero(2 * k);
            for i in 0..k {
                c.set(2 * i, 2 * i + 1, -0.3);
            }
            let s = signed_labels(&c, 1 << 10).expect("pairs are labelled");
            let bits = usize::BITS - k.leading_zeros();
            assert_eq!(s.pulses.len(), 1 << (1 + bits), "k = {k}");
            assert!((s.weight - 0.3).abs() < 1e-14, "k = {k}: {}", s.weight);
            assert!(realises(&s, &c), "k = {k}");
        }
    }

    #[test]
    fn random_forests_and_graphs_are_realised_exactly() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5167);
        let weights = [FRAC_PI_4, -FRAC_PI_4, 0.3, 0.11];
        let mut made = 0;
        for round in 0..400 {
            let n = rng.gen_range(2..=8);
            let mut c = Coupling::zero(n);
            let edges = rng.gen_range(1..=n * (n - 1) / 2);
            for _ in 0..edges {
                let (i, j) = (rng.gen_range(0..n), rng.gen_range(0..n));
                if i != j {
                    c.set(i, j, weights[rng.gen_range(0..weights.len())]);
                }
            }
            if c.max_abs() == 0.0 {
                continue;
            }
            match signed_labels(&c, 1 << 16) {
                Some(s) => {
                    made += 1;
                    assert!(certifies_signed(&s, &c), "round {round}");
                    assert!(realises(&s, &c), "round {round}: {c:?}");
                    let largest = c.max_abs();
                    assert!(s.weight >= largest - 1e-12, "round {round}");
                }
                // Without sharing every pair XORs to its own value, so only the
                // label bits can run out: a component of k ions needs k - 1.
                None => {
                    let comps = components(&c);
                    let tree: usize = comps.iter().map(|(ions, _)| ions.len() - 1).sum();
                    let p = usize::BITS
                        - comps
                            .iter()
                            .filter(|p| p.0.len() > 1)
                            .count()
                            .leading_zeros();
                    assert!(tree as u32 + p > 16, "round {round}: {c:?}");
                }
            }
        }
        assert!(made > 300, "{made}");
    }

    #[test]
    fn a_star_of_equal_couplings_shares_one_label() {
        // Leaves at the same column are uncoupled (alpha(0) = 0): a star of k
        // leaves is one label, four pulses.
        let mut c = Coupling::zero(5);
        for leaf in 1..5 {
            c.set(0, leaf, FRAC_PI_4);
        }
        let s = signed_labels(&c, 64).expect("a star is labelled");
        assert_eq!(s.pulses.len(), 4);
        assert!(realises(&s, &c));
    }

    #[test]
    fn a_near_miss_certificate_is_refused() {
        let mut c = Coupling::zero(3);
        c.set(0, 1, 0.2);
        c.set(1, 2, 0.5);
        let s = signed_labels(&c, 64).expect("a path is labelled");
        assert!(certifies_signed(&s, &c));
        // One pulse's weight off by 1e-8: the couplings, or the spectators', move.
        for k in 0..s.pulses.len() {
            let mut off = s.clone();
            off.pulses[k].weight += 1e-8;
            assert!(!certifies_signed(&off, &c), "pulse {k}");
        }
        // A spectator ion flipped for one pulse is an ion of the coupling with a
        // sign changed: here ion 2's sign in the first pulse.
        let mut flipped = s.clone();
        flipped.pulses[0].signs[2] *= -1;
        assert!(!certifies_signed(&flipped, &c));
        // All weights made positive (a synthesis of one sign): refused.
        let mut positive = s;
        positive
            .pulses
            .iter_mut()
            .for_each(|p| p.weight = p.weight.abs());
        assert!(!certifies_signed(&positive, &c));
    }
}
