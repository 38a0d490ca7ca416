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
//! Invariant: a plan the optimizer keeps has passed [`SignedPlan::certifies`]: it
//! realises the coupling among its ions, leaves every ion's coupling to a spectator
//! at zero, and sums to zero weight (no coupling among spectators), each within
//! [`CERTIFICATE_EPS`]. The constructions return unchecked plans, since the
//! optimizer plans several per block and checks only those it may keep.

use super::{Coupling, Method, Pulse, Signs, Synthesis, CERTIFICATE_EPS};
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

/// A component of a coupling: its ions and the coupling among them.
type Part = (Vec<usize>, Coupling);

/// One Walsh labelling: the ions it labels with their columns, and the weight of
/// each row of the label bits (pulse `j` of the `m` weighs `t[j % t.len()]`).
#[derive(Debug, Clone)]
struct Walsh {
    ions: Vec<usize>,
    column: Vec<u32>,
    t: Vec<f64>,
    m: usize,
}

impl Walsh {
    /// Rows of `t` below this (relative to the largest) make no pulse.
    fn kept(&self) -> impl Iterator<Item = usize> + '_ {
        let top = self.t.iter().fold(0.0f64, |a, b| a.max(b.abs()));
        (0..self.m).filter(move |&j| self.t[j % self.t.len()].abs() > 1e-15 * top)
    }

    /// Its pulses with the signs of `ions[k]` at `at(ions[k])` among `n`, the rest +1.
    fn pulses(&self, n: usize, at: &dyn Fn(usize) -> usize, out: &mut Vec<Pulse>) {
        for j in self.kept() {
            let mut signs = Signs::from_elem(1, n);
            for (&u, &col) in self.ions.iter().zip(&self.column) {
                signs[at(u)] = parity_sign(j as u32 & col);
            }
            out.push(Pulse {
                signs,
                weight: self.t[j % self.t.len()],
            });
        }
    }
}

/// `+1` for an even number of set bits, else `-1`: `H[j][c]` for `x = j & c`.
fn parity_sign(x: u32) -> i8 {
    if x.count_ones() % 2 == 0 {
        1
    } else {
        -1
    }
}

/// Signed pulses for a coupling, as labellings played one after the other (each
/// one's ions spectators of the others), known by count and weight before any pulse
/// is made.
#[derive(Debug, Clone)]
pub struct SignedPlan {
    walsh: Vec<Walsh>,
}

impl SignedPlan {
    /// The number of pulses.
    pub fn count(&self) -> usize {
        self.walsh.iter().map(|w| w.kept().count()).sum()
    }

    /// The sum of the pulses' magnitudes.
    pub fn weight(&self) -> f64 {
        self.walsh
            .iter()
            .map(|w| (w.m / w.t.len()) as f64 * w.t.iter().map(|t| t.abs()).sum::<f64>())
            .sum()
    }

    /// The pulses on `n` ions, ion `u` of the coupling at `at(u)`, every other +1.
    pub fn pulses_on(&self, n: usize, at: &dyn Fn(usize) -> usize) -> Vec<Pulse> {
        let mut out = Vec::new();
        for w in &self.walsh {
            w.pulses(n, at, &mut out);
        }
        out
    }

    /// The pulses on the coupling's own `n` ions, as a synthesis.
    pub fn synthesis(&self, c: &Coupling) -> Synthesis {
        let pulses = self.pulses_on(c.n, &|u| u);
        Synthesis {
            weight: pulses.iter().map(|p| p.weight.abs()).sum(),
            pulses,
            lower_bound: c.max_abs(),
            method: Method::Signed,
        }
    }

    /// The certificate, labelling by labelling: each one's pulses on its own ions
    /// pass `certifies_signed` against `c` there (so its ions are uncoupled from
    /// everything else, which it sees as spectators), and every coupling of `c` lies
    /// within one labelling. Together: the plan realises `c` with spectators still.
    pub fn certifies(&self, c: &Coupling) -> bool {
        let mut group = vec![usize::MAX; c.n];
        for (g, w) in self.walsh.iter().enumerate() {
            for &u in &w.ions {
                if u >= c.n || group[u] != usize::MAX {
                    return false;
                }
                group[u] = g;
            }
        }
        let within = (0..c.n).all(|i| {
            (i + 1..c.n)
                .all(|j| c.get(i, j) == 0.0 || (group[i] == group[j] && group[i] != usize::MAX))
        });
        within
            && self.walsh.iter().all(|w| {
                let mut own = Coupling::zero(w.ions.len());
                for (a, &i) in w.ions.iter().enumerate() {
                    for (b, &j) in w.ions.iter().enumerate().skip(a + 1) {
                        own.set(a, b, c.get(i, j));
                    }
                }
                let mut pulses = Vec::new();
                let local: FxHashMap<usize, usize> =
                    w.ions.iter().enumerate().map(|(k, &u)| (u, k)).collect();
                w.pulses(w.ions.len(), &|u| local[&u], &mut pulses);
                let s = Synthesis {
                    pulses,
                    weight: 0.0,
                    lower_bound: 0.0,
                    method: Method::Signed,
                };
                certifies_signed(&s, &own)
            })
    }
}

/// Pulses of both signs realising `c` with any other ion (a spectator) at sign +1
/// throughout and uncoupled, in one labelling of at most `max_pulses` pulses; `None`
/// when it needs more (or more than 24 label bits). `parts` are `c`'s components
/// ([`components`](super::components)). Not yet checked: the caller runs
/// [`SignedPlan::certifies`] on what it keeps (the optimizer plans several per block
/// and makes and checks only those it may keep).
pub fn signed_labels(c: &Coupling, parts: &[Part], max_pulses: usize) -> Option<SignedPlan> {
    let parts: Vec<&Part> = parts.iter().filter(|p| p.0.len() > 1).collect();
    Some(SignedPlan {
        walsh: vec![labelled(c, &parts, max_pulses)?],
    })
}

/// One labelling of the components `parts` of `c` (each with a coupling).
fn labelled(c: &Coupling, parts: &[&Part], max_pulses: usize) -> Option<Walsh> {
    if parts.is_empty() {
        return None;
    }
    let labels = label(c, parts, true).or_else(|| label(c, parts, false))?;
    let p_bits = usize::BITS - parts.len().leading_zeros();
    let bits = labels.bits + p_bits;
    if bits > 24 || 1usize << bits > max_pulses {
        return None;
    }
    let m = 1usize << bits;
    let mut ions = Vec::new();
    let mut column = Vec::new();
    for (k, (members, _)) in parts.iter().enumerate() {
        for &u in members {
            ions.push(u);
            column.push(((k as u32 + 1) << labels.bits) | labels.y[u]?);
        }
    }
    let mut alphas: Vec<(u32, f64)> = labels
        .weight
        .iter()
        .map(|(&x, &w)| (x, w / m as f64))
        .collect();
    alphas.sort_by_key(|a| a.0);
    // The weights depend on the label bits of j alone: one sum per label row.
    let t: Vec<f64> = (0..1u32 << labels.bits)
        .map(|j| {
            alphas
                .iter()
                .map(|&(x, a)| a * f64::from(parity_sign(j & x)))
                .sum()
        })
        .collect();
    Some(Walsh { ions, column, t, m })
}

/// [`signed_labels`] for each class of components with the same set of weights (all
/// pairs of one weight are a class), one class after the other: each class's ions
/// are spectators of the others. The area is the classes' sum, the pulses about four
/// per coupling at most, where one labelling of a block with many distinct weights
/// multiplies the classes' pulse counts. `None` when some class cannot be labelled
/// within `max_pulses`, or when there is only one class. Not yet checked, as
/// [`signed_labels`].
pub fn signed_classes(c: &Coupling, parts: &[Part], max_pulses: usize) -> Option<SignedPlan> {
    // Each class: its weights (as bits) and its components.
    let mut classes: Vec<(Vec<u64>, Vec<&Part>)> = Vec::new();
    for part in parts {
        let mut key: Vec<u64> = part
            .1
            .w
            .iter()
            .filter(|w| **w != 0.0)
            .map(|w| w.to_bits())
            .collect();
        key.sort_unstable();
        key.dedup();
        if key.is_empty() {
            continue;
        }
        match classes.iter_mut().find(|(k, _)| *k == key) {
            Some((_, members)) => members.push(part),
            None => classes.push((key, vec![part])),
        }
    }
    if classes.len() < 2 {
        return None;
    }
    let walsh = classes
        .iter()
        .map(|(_, members)| labelled(c, members, max_pulses))
        .collect::<Option<Vec<Walsh>>>()?;
    Some(SignedPlan { walsh })
}

/// Labels the ions of `parts` (components of `c` with a coupling each); `share`
/// lets couplings of equal weight share a label, and new labels take unused values
/// before a new bit, where nothing collides. Without it every coupling of a
/// component's spanning tree takes a bit of its own, which always succeeds: each
/// pair's XOR is then the tree path between them.
fn label(c: &Coupling, parts: &[&Part], share: bool) -> Option<Labels> {
    let mut l = Labels {
        y: vec![None; c.n],
        weight: FxHashMap::default(),
        free: FxHashSet::default(),
        bits: 0,
    };
    for &(ions, _) in parts {
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
                // Then, sharing, any value of the label bits so far that is neither
                // a label nor a free XOR (so distinct weights need only as many bits
                // as it takes to count them).
                let unused: Vec<u32> = if share {
                    (1..1u32 << l.bits)
                        .filter(|x| !l.weight.contains_key(x) && !l.free.contains(x))
                        .collect()
                } else {
                    Vec::new()
                };
                let mut done = false;
                for x in shared.into_iter().chain(unused) {
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
    use crate::compile::couple::components;
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
        let plan = signed_labels(&c, &components(&c), 64).expect("a pair is labelled");
        assert!(plan.certifies(&c));
        let s = plan.synthesis(&c);
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
            let s = signed_labels(&c, &components(&c), 1 << 10)
                .expect("pairs are labelled")
                .synthesis(&c);
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
            match signed_labels(&c, &components(&c), 1 << 16) {
                Some(plan) => {
                    made += 1;
                    assert!(plan.certifies(&c), "round {round}");
                    let s = plan.synthesis(&c);
                    assert!(certifies_signed(&s, &c), "round {round}");
                    assert_eq!(plan.count(), s.pulses.len());
                    assert!((plan.weight() - s.weight).abs() <= 1e-12 * s.weight);
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
        let s = signed_labels(&c, &components(&c), 64)
            .expect("a star is labelled")
            .synthesis(&c);
        assert_eq!(s.pulses.len(), 4);
        assert!(realises(&s, &c));
    }

    #[test]
    fn a_near_miss_certificate_is_refused() {
        let mut c = Coupling::zero(3);
        c.set(0, 1, 0.2);
        c.set(1, 2, 0.5);
        let s = signed_labels(&c, &components(&c), 64)
            .expect("a path is labelled")
            .synthesis(&c);
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

    #[test]
    fn classes_played_in_turn_are_realised_and_certified() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xc1a5);
        let weights = [FRAC_PI_4, 0.3, -0.2, 0.05];
        let mut made = 0;
        for round in 0..300 {
            // Disjoint pairs and stars on up to 14 ions, weights from a few values.
            let n = rng.gen_range(4..=14);
            let mut c = Coupling::zero(n);
            let mut i = 0;
            while i + 1 < n {
                let leaves = rng.gen_range(1..=3).min(n - i - 1);
                let w = weights[rng.gen_range(0..weights.len())];
                for leaf in 1..=leaves {
                    c.set(i, i + leaf, w);
                }
                i += leaves + 1;
            }
            let Some(plan) = signed_classes(&c, &components(&c), 1 << 12) else {
                continue;
            };
            made += 1;
            assert!(plan.certifies(&c), "round {round}");
            let s = plan.synthesis(&c);
            assert!(realises(&s, &c), "round {round}: {c:?}");
            assert_eq!(plan.count(), s.pulses.len());
            // A coupling changed by 1e-8, or one left out: refused.
            let mut off = c.clone();
            let k = off.w.iter().position(|w| *w != 0.0).expect("a coupling");
            off.w[k] += 1e-8;
            assert!(!plan.certifies(&off), "round {round}: off by 1e-8");
            off.w[k] = 0.0;
            assert!(!plan.certifies(&off), "round {round}: one left out");
        }
        assert!(made > 200, "{made}");
    }
}
