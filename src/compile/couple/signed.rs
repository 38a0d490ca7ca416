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

/// The labelling of a coupling's ions: columns, and each label with its weight.
struct Labels {
    y: Vec<Option<u32>>,
    /// By value of the label bits (`2^bits` of them): the coupling weight of the
    /// pairs that XOR to it, 0 where it is no label (a label's weight never is).
    weight: Vec<f64>,
    /// By value of the label bits: whether an uncoupled pair XORs to it (then it
    /// is never a label).
    free: Vec<bool>,
    bits: u32,
}

impl Labels {
    /// The weight of label `z`, if it is one.
    fn label(&self, z: u32) -> Option<f64> {
        let w = self.weight[z as usize];
        (w != 0.0).then_some(w)
    }

    /// One more label bit: the values double.
    fn widen(&mut self) {
        self.bits += 1;
        self.weight.resize(1 << self.bits, 0.0);
        self.free.resize(1 << self.bits, false);
    }
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
    /// The weight of row `j`: `t` repeats with the length of the label rows, a
    /// power of two, so `j` is taken modulo it by a mask.
    #[inline]
    fn row(&self, j: usize) -> f64 {
        debug_assert!(self.t.len().is_power_of_two());
        self.t[j & (self.t.len() - 1)]
    }

    /// Its ions that change sign between rows `j` and `j ^ x`: those whose column
    /// has odd overlap with `x`.
    fn flipped(&self, x: u32) -> impl Iterator<Item = usize> + '_ {
        self.ions
            .iter()
            .zip(&self.column)
            .filter(move |&(_, &c)| odd(x & c))
            .map(|(&u, _)| u)
    }

    /// The largest row weight.
    fn top(&self) -> f64 {
        self.t.iter().fold(0.0f64, |a, b| a.max(b.abs()))
    }

    /// Whether row `j` makes a pulse: rows of `t` below 1e-15 of the largest do not.
    fn keeps(&self) -> impl Fn(usize) -> bool + '_ {
        let top = self.top();
        move |j| self.row(j).abs() > 1e-15 * top
    }

    /// What its pulses sum to, by the XOR of two columns: `sums(x) = sum_j T_j
    /// H[j][x]` over its rows (`T_j` the weight of row `j`, 0 for a row that makes
    /// no pulse). Since `H[j][a] H[j][b] = H[j][a ^ b]`, ions with columns `a`, `b`
    /// are coupled by `sums(a ^ b)`, an ion and a spectator (column 0) by
    /// `sums(a)`, and two spectators by `sums(0)`. One fast Walsh-Hadamard
    /// transform of the weights gives them all, where a sum over the pulses for
    /// each pair of ions would take `m` per pair. The weights repeat with the
    /// period `L = t.len()` (row `j` weighs `t[j mod L]`, and whether it makes a
    /// pulse depends on that weight alone), so the transform of all `m` rows is
    /// that of one period times `m / L` below `L`, and 0 from `L` on: the stages
    /// that span more than a period add and subtract equal copies, which is exact
    /// in floating point too (as is scaling by a power of two). So one transform
    /// of the `L` weights (`L log L` additions) gives every sum.
    fn sums(&self) -> impl Fn(u32) -> f64 {
        let keeps = self.keeps();
        let period = self.t.len();
        debug_assert!(self.m % period == 0);
        let mut s: Vec<f64> = (0..period)
            .map(|j| if keeps(j) { self.t[j] } else { 0.0 })
            .collect();
        let mut h = 1;
        while h < s.len() {
            for block in s.chunks_mut(2 * h) {
                let (low, high) = block.split_at_mut(h);
                for (x, y) in low.iter_mut().zip(high) {
                    (*x, *y) = (*x + *y, *x - *y);
                }
            }
            h *= 2;
        }
        let scale = (self.m / period) as f64;
        move |x| s.get(x as usize).map_or(0.0, |v| v * scale)
    }

    /// Its rows in the order that flips few ions between pulses: a Gray code over a
    /// basis of the row bits. Going from row `j` to `j ^ v` flips the ions whose
    /// column has odd overlap with `v`, so the flips of the whole cycle (back to row
    /// 0, all +1) are `sum_k 2^(D-1-k) flips(b_k)` for basis vectors `b_0, b_1, ..`
    /// toggled every 2nd, 4th, .. step. The basis taken greedily from the rows by
    /// fewest flips is a least-weight basis of the linear matroid, with its sorted
    /// weights each at most those of any other basis (the matroid greedy
    /// algorithm, common knowledge); so the lightest toggles most, and no other
    /// basis gives a cycle of fewer flips. Rows of weight zero (dropped by
    /// [`Self::keeps`]) are skipped.
    fn walk(&self) -> impl Iterator<Item = usize> + '_ {
        let bits = self.m.trailing_zeros() as usize;
        debug_assert!(bits <= 32, "{bits} row bits");
        let flips = |v: usize| self.flipped(v as u32).count() as u32;
        let mut rows: smallvec::SmallVec<[(u32, u32); 16]> =
            (1..self.m).map(|v| (flips(v), v as u32)).collect();
        rows.sort_unstable();
        // Reduced vectors by their highest bit, to test independence (rows fit 32
        // bits: plans stop at `max_pulses` rows, 1024 in the optimizer).
        let mut reduced = [0u32; 32];
        let mut basis: smallvec::SmallVec<[usize; 8]> = smallvec::SmallVec::new();
        for &(_, v) in &rows {
            let mut x = v;
            while x != 0 {
                let top = 31 - x.leading_zeros() as usize;
                if reduced[top] == 0 {
                    reduced[top] = x;
                    basis.push(v as usize);
                    break;
                }
                x ^= reduced[top];
            }
            if basis.len() == bits {
                break;
            }
        }
        let kept = self.keeps();
        let mut j = 0usize;
        (0..self.m)
            .map(move |i| {
                if i > 0 {
                    j ^= basis[i.trailing_zeros() as usize];
                }
                j
            })
            .filter(move |&j| kept(j))
    }

    /// Its pulses but row 0's (the shared one), in the order of [`Self::walk`],
    /// with the signs of `ions[k]` at `at(ions[k])` among `n`, the rest +1.
    fn pulses(&self, n: usize, at: &dyn Fn(usize) -> usize, out: &mut Vec<Pulse>) {
        let places: Vec<usize> = self.ions.iter().map(|&u| at(u)).collect();
        out.reserve(self.m);
        for j in self.walk().filter(|&j| j != 0) {
            let mut signs = Signs::from_elem(1, n);
            for (&q, &col) in places.iter().zip(&self.column) {
                signs[q] = parity_sign(j as u32 & col);
            }
            out.push(Pulse {
                signs,
                weight: self.row(j),
            });
        }
    }
}

/// Whether `x` has an odd number of set bits: `H[j][c] = -1` for `x = j & c`.
fn odd(x: u32) -> bool {
    x.count_ones() % 2 == 1
}

/// `H[j][c]` for `x = j & c`: `-1` where [`odd`], else `+1`.
fn parity_sign(x: u32) -> i8 {
    if odd(x) {
        -1
    } else {
        1
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
    /// The weight of the pulse every labelling shares, if it is not zero: row 0 of
    /// each (every sign +1, its ions and the spectators alike) is one and the same
    /// sign vector, and pulses of one sign vector add, so all of them are played as
    /// one pulse of their summed weight.
    fn shared_row(&self) -> Option<f64> {
        let (mut sum, mut top) = (0.0, 0.0f64);
        for w in &self.walsh {
            top = top.max(w.top());
            if w.keeps()(0) {
                sum += w.t[0];
            }
        }
        (f64::abs(sum) > 1e-15 * top).then_some(sum)
    }

    /// The number of pulses and the sum of their magnitudes, in one pass over the
    /// rows.
    pub fn size(&self) -> (usize, f64) {
        let (mut count, mut weight) = (0, 0.0);
        for w in &self.walsh {
            // Every row but 0 that makes a pulse.
            let keeps = w.keeps();
            let mut own = 0.0;
            for j in (1..w.m).filter(|&j| keeps(j)) {
                count += 1;
                own += w.row(j).abs();
            }
            weight += own;
        }
        match self.shared_row() {
            Some(t) => (count + 1, weight + t.abs()),
            None => (count, weight),
        }
    }

    /// The pulses on `n` ions, ion `u` of the coupling at `at(u)`, every other +1:
    /// the shared pulse first, then each labelling's other rows in the order of its
    /// walk (so its return to all +1 falls in one layer with the next one's first
    /// flips).
    pub fn pulses_on(&self, n: usize, at: &dyn Fn(usize) -> usize) -> Vec<Pulse> {
        let mut out = Vec::new();
        if let Some(weight) = self.shared_row() {
            out.push(Pulse {
                signs: Signs::from_elem(1, n),
                weight,
            });
        }
        for w in &self.walsh {
            w.pulses(n, at, &mut out);
        }
        out
    }

    /// [`Self::pulses_on`] as played from every sign +1, without writing out a sign
    /// vector per pulse: `step(flips, Some(weight))` for each pulse in turn, `flips`
    /// the ions (at `at(u)`, increasing) whose sign changes before it, then
    /// `step(flips, None)` with the ions left at -1. Going from row `j` to row `j'`
    /// of a labelling flips its ions whose column has odd overlap with `j ^ j'`;
    /// its ions left at -1 flip back with the next labelling's first flips.
    pub fn play(&self, at: &dyn Fn(usize) -> usize, mut step: impl FnMut(&[usize], Option<f64>)) {
        let mut flips: Vec<usize> = Vec::new();
        if let Some(weight) = self.shared_row() {
            step(&flips, Some(weight));
        }
        for w in &self.walsh {
            let mut now = 0usize;
            for j in w.walk().filter(|&j| j != 0) {
                flips.extend(w.flipped((j ^ now) as u32).map(at));
                flips.sort_unstable();
                step(&flips, Some(w.row(j)));
                flips.clear();
                now = j;
            }
            // Back to +1, played with what comes next.
            flips.extend(w.flipped(now as u32).map(at));
        }
        flips.sort_unstable();
        step(&flips, None);
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

    /// The certificate, labelling by labelling: each one's pulses couple its own
    /// ions as `c` does and leave every coupling to a spectator (any other ion) and
    /// among spectators at zero, within [`CERTIFICATE_EPS`] times its largest
    /// coupling (as the tests ask of the pulses themselves); and every coupling of `c`
    /// lies within one labelling. Together: the plan realises `c` with spectators
    /// still. The sums come from `Walsh::sums`, over the rows' weights and the
    /// ions' columns from which the pulses are made (pulse `j` gives ion `u` the
    /// sign `H[j][c_u]`), not from the labels the construction aimed at. Each
    /// labelling's row 0 counts as its own pulse: played as part of the shared
    /// pulse, it adds the same term to the same sums.
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
        let within =
            c.all_pairs(|i, j, w| w == 0.0 || (group[i] == group[j] && group[i] != usize::MAX));
        within
            && self.walsh.iter().all(|w| {
                if w.column.len() != w.ions.len() || w.column.iter().any(|&x| x as usize >= w.m) {
                    return false;
                }
                // Each pair of its ions: the coupling wanted, and the XOR of their
                // columns.
                let k = w.ions.len();
                let mut pairs: Vec<(f64, u32)> = Vec::with_capacity(k * k.saturating_sub(1) / 2);
                for a in 0..k {
                    for b in a + 1..k {
                        let want = c.get(w.ions[a], w.ions[b]);
                        pairs.push((want, w.column[a] ^ w.column[b]));
                    }
                }
                let largest = pairs.iter().fold(0.0f64, |m, &(want, _)| m.max(want.abs()));
                let tol = CERTIFICATE_EPS * largest.max(1.0);
                let sums = w.sums();
                sums(0).abs() <= tol
                    && w.column.iter().all(|&x| sums(x).abs() <= tol)
                    && pairs.iter().all(|&(want, x)| (sums(x) - want).abs() <= tol)
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
    if let Some(w) = pairs_of_one_weight(parts) {
        return pairs_labelled(parts, w, max_pulses);
    }
    let p_bits = usize::BITS - parts.len().leading_zeros();
    // The most label bits that leave at most `max_pulses` rows (and 24 bits).
    let most = max_pulses.checked_ilog2()?.min(24).checked_sub(p_bits)?;
    let labels = label(c, parts, true, most).or_else(|| label(c, parts, false, most))?;
    let m = 1usize << (labels.bits + p_bits);
    let count = parts.iter().map(|p| p.0.len()).sum();
    let mut ions = Vec::with_capacity(count);
    let mut column = Vec::with_capacity(count);
    for (k, (members, _)) in parts.iter().enumerate() {
        for &u in members {
            ions.push(u);
            column.push(((k as u32 + 1) << labels.bits) | labels.y[u]?);
        }
    }
    // In increasing order of the label.
    let alphas: Vec<(u32, f64)> = (0..labels.weight.len() as u32)
        .filter_map(|x| labels.label(x).map(|w| (x, w / m as f64)))
        .collect();
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

/// The weight of `parts` when every one is a pair and all have that weight (the
/// commonest class).
fn pairs_of_one_weight(parts: &[&Part]) -> Option<f64> {
    let w = parts[0].1.w.first().copied()?;
    parts
        .iter()
        .all(|(ions, sub)| ions.len() == 2 && sub.w[0].to_bits() == w.to_bits())
        .then_some(w)
}

/// [`labelled`] for pairs of one weight `w`, without the search: [`label`] gives
/// each pair's first ion 0 and its second the one label 1, of weight `w`.
fn pairs_labelled(parts: &[&Part], w: f64, max_pulses: usize) -> Option<Walsh> {
    let p_bits = usize::BITS - parts.len().leading_zeros();
    let bits = 1 + p_bits;
    if 1usize << bits > max_pulses {
        return None;
    }
    let m = 1usize << bits;
    let mut ions = Vec::with_capacity(2 * parts.len());
    let mut column = Vec::with_capacity(2 * parts.len());
    for (k, (members, _)) in parts.iter().enumerate() {
        let p = (k as u32 + 1) << 1;
        ions.extend_from_slice(members);
        column.extend([p, p | 1]);
    }
    let alpha = w / m as f64;
    Some(Walsh {
        ions,
        column,
        t: vec![alpha, -alpha],
        m,
    })
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
    let mut classes: Vec<(smallvec::SmallVec<[u64; 4]>, Vec<&Part>)> = Vec::new();
    for part in parts {
        let mut key: smallvec::SmallVec<[u64; 4]> = part
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
/// pair's XOR is then the tree path between them. `None` when that takes more
/// than `most` label bits (sharing never takes more bits than not sharing: each
/// ion placed adds at most one).
fn label(c: &Coupling, parts: &[&Part], share: bool, most: u32) -> Option<Labels> {
    let mut l = Labels {
        y: vec![None; c.n],
        weight: Vec::with_capacity(1 << most.min(10)),
        free: Vec::with_capacity(1 << most.min(10)),
        bits: 0,
    };
    l.weight.push(0.0);
    l.free.push(false);
    let mut new: Vec<(u32, f64)> = Vec::with_capacity(c.n);
    let mut placed: Vec<usize> = Vec::with_capacity(c.n);
    for &(ions, _) in parts {
        placed.clear();
        placed.push(ions[0]);
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
                // Sharing: first a label of the same weight, then any value of the
                // label bits so far that is neither a label nor a free XOR (so
                // distinct weights need only as many bits as it takes to count
                // them).
                let mut done = false;
                if share {
                    // The labels of this weight, in increasing order.
                    let shared = (1..1u32 << l.bits)
                        .filter(|&x| l.weight[x as usize].to_bits() == w.to_bits());
                    let unused = (1..1u32 << l.bits)
                        .filter(|&x| l.label(x).is_none() && !l.free[x as usize]);
                    for x in shared.chain(unused) {
                        if fits(c, &l, &placed, u, yv ^ x, &mut new) {
                            done = true;
                            commit(&mut l, u, yv ^ x, &mut new);
                            break;
                        }
                    }
                }
                if !done {
                    if l.bits >= most {
                        return None;
                    }
                    let x = 1u32 << l.bits;
                    l.widen();
                    if !fits(c, &l, &placed, u, yv ^ x, &mut new) {
                        return None;
                    }
                    commit(&mut l, u, yv ^ x, &mut new);
                }
                placed.push(u);
            }
        }
    }
    Some(l)
}

/// Whether ion `u` fits at `y` (nothing collides with the ions already placed in
/// its component); if so, `new` holds what placing it adds (labels, and free XORs
/// with weight 0).
fn fits(
    c: &Coupling,
    l: &Labels,
    placed: &[usize],
    u: usize,
    y: u32,
    new: &mut Vec<(u32, f64)>,
) -> bool {
    new.clear();
    for &v in placed.iter().filter(|&&v| v != u) {
        let Some(yv) = l.y[v] else {
            return false;
        };
        let z = y ^ yv;
        let w = c.get(u, v);
        let have = l
            .label(z)
            .or_else(|| new.iter().find(|n| n.0 == z && n.1 != 0.0).map(|n| n.1));
        match (w == 0.0, have) {
            (true, None) => new.push((z, 0.0)),
            (true, Some(_)) => return false,
            (false, Some(h)) if h == w => {}
            (false, Some(_)) => return false,
            (false, None) if z == 0 || l.free[z as usize] => return false,
            (false, None) => new.push((z, w)),
        }
    }
    // A free XOR must not be (or become) a label.
    let labels_now = |z: u32| l.label(z).is_some() || new.iter().any(|n| n.0 == z && n.1 != 0.0);
    !new.iter().any(|n| n.1 == 0.0 && labels_now(n.0))
}

fn commit(l: &mut Labels, u: usize, y: u32, new: &mut Vec<(u32, f64)>) {
    l.y[u] = Some(y);
    for (z, w) in new.drain(..) {
        if w == 0.0 {
            l.free[z as usize] = true;
        } else {
            l.weight[z as usize] = w;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compile::couple::components;
    use rand::{Rng, SeedableRng};
    use std::f64::consts::FRAC_PI_4;

    /// The pulse-level check: true when `s` (weights of either sign) realises `c` with spectators at +1: the
    /// couplings among `c`'s ions match, and `sum_k t_k s_k[u]` (ion `u` against a
    /// spectator) and `sum_k t_k` (spectators among themselves) vanish, within
    /// [`CERTIFICATE_EPS`] times the largest weight.
    fn certifies_signed(s: &Synthesis, c: &Coupling) -> bool {
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
                    let (count, weight) = plan.size();
                    assert_eq!(count, s.pulses.len());
                    assert!((weight - s.weight).abs() <= 1e-12 * s.weight);
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
            assert_eq!(plan.size().0, s.pulses.len());
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

    /// The flips of playing `order` (rows of `w`) from all +1 and back: the ions
    /// whose sign differs between consecutive pulses.
    fn cycle_flips(w: &Walsh, order: &[usize]) -> u32 {
        let pattern = |j: usize| -> u64 {
            w.column.iter().enumerate().fold(0, |p, (k, &c)| {
                p | (u64::from((j as u32 & c).count_ones() % 2) << k)
            })
        };
        let mut frame = 0u64;
        let mut flips = 0;
        for &j in order.iter().chain([0usize].iter()) {
            flips += (frame ^ pattern(j)).count_ones();
            frame = pattern(j);
        }
        flips
    }

    /// The fewest flips of a Gray cycle over any ordered basis of `bits` bits,
    /// by trying them all.
    fn fewest_over_bases(w: &Walsh, bits: usize) -> u32 {
        fn go(w: &Walsh, bits: usize, basis: &mut Vec<usize>, best: &mut u32) {
            if basis.len() == bits {
                let mut order = vec![0usize];
                let mut j = 0;
                for i in 1..1usize << bits {
                    j ^= basis[i.trailing_zeros() as usize];
                    order.push(j);
                }
                *best = (*best).min(cycle_flips(w, &order));
                return;
            }
            for v in 1..1usize << bits {
                // Independent of the basis so far: not in its span.
                let span = (0..1usize << basis.len()).any(|mask| {
                    basis
                        .iter()
                        .enumerate()
                        .filter(|(k, _)| mask >> k & 1 == 1)
                        .fold(0, |x, (_, &b)| x ^ b)
                        == v
                });
                if !span {
                    basis.push(v);
                    go(w, bits, basis, best);
                    basis.pop();
                }
            }
        }
        let mut best = u32::MAX;
        go(w, bits, &mut Vec::new(), &mut best);
        best
    }

    #[test]
    fn the_walk_plays_every_row_once_with_the_fewest_flips_of_any_gray_cycle() {
        // Columns at random (any ions, repeated columns and columns that do not
        // span included), every row weighted: the walk is a permutation of the
        // rows from row 0, and no ordered basis gives a Gray cycle of fewer flips
        // (all 168 ordered bases of 3 bits, all 20160 of 4, tried).
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x6a1c);
        for round in 0..60 {
            let bits = rng.gen_range(1..=4usize);
            let m = 1usize << bits;
            let k = rng.gen_range(1..=7);
            let w = Walsh {
                ions: (0..k).collect(),
                column: (0..k).map(|_| rng.gen_range(0..m as u32)).collect(),
                t: (0..m).map(|j| 1.0 + j as f64).collect(),
                m,
            };
            let order: Vec<usize> = w.walk().collect();
            let mut sorted = order.clone();
            sorted.sort_unstable();
            assert_eq!(sorted, (0..m).collect::<Vec<_>>(), "round {round}");
            assert_eq!(order[0], 0);
            let flips = cycle_flips(&w, &order);
            assert_eq!(flips, fewest_over_bases(&w, bits), "round {round}: {w:?}");
            // Never more than playing the rows in their own order.
            let plain: Vec<usize> = (0..m).collect();
            assert!(flips <= cycle_flips(&w, &plain), "round {round}");
        }
    }

    #[test]
    fn labellings_share_their_all_plus_pulse() {
        // Three pairs of distinct weights: three classes of four pulses each, whose
        // rows 0 (every sign +1) are one pulse: 3 * 3 + 1 pulses.
        let mut c = Coupling::zero(6);
        c.set(0, 1, 0.3);
        c.set(2, 3, -0.2);
        c.set(4, 5, FRAC_PI_4);
        let plan = signed_classes(&c, &components(&c), 64).expect("three classes");
        assert_eq!(plan.walsh.len(), 3);
        let s = plan.synthesis(&c);
        assert_eq!(s.pulses.len(), 10);
        assert_eq!(plan.size().0, 10);
        let all_plus = s.pulses.iter().filter(|p| p.signs.iter().all(|&x| x == 1));
        assert_eq!(all_plus.count(), 1);
        let w: f64 = s.pulses.iter().map(|p| p.weight.abs()).sum();
        assert!((plan.size().1 - w).abs() <= 1e-15 * w);
        // Each pair's row 0 is w/4 (derived in the module doc): the shared pulse
        // weighs their sum, (0.3 - 0.2 + pi/4) / 4.
        assert!((s.pulses[0].weight - (0.3 - 0.2 + FRAC_PI_4) / 4.0).abs() < 1e-15);
        assert!(plan.certifies(&c));
        assert!(certifies_signed(&s, &c) && realises(&s, &c));
    }

    /// A coupling on 2 to `most` ions with up to as many couplings as ions, each of
    /// a weight drawn from `weights`.
    fn random_graph(rng: &mut impl Rng, most: usize, weights: &[f64]) -> Coupling {
        let n = rng.gen_range(2..=most);
        let mut c = Coupling::zero(n);
        for _ in 0..rng.gen_range(1..=n) {
            let (i, j) = (rng.gen_range(0..n), rng.gen_range(0..n));
            if i != j {
                c.set(i, j, weights[rng.gen_range(0..weights.len())]);
            }
        }
        c
    }

    /// The plans the optimizer offers for `c`: one labelling, and the classes in
    /// turn (each when it exists).
    fn both_plans(c: &Coupling) -> Vec<SignedPlan> {
        let parts = components(c);
        [
            signed_labels(c, &parts, 1 << 12),
            signed_classes(c, &parts, 1 << 12),
        ]
        .into_iter()
        .flatten()
        .collect()
    }

    #[test]
    fn the_certificate_agrees_with_the_pulses_on_nudged_plans() {
        // The certificate reads the rows' weights and the columns; the pulses are
        // made from them. Plans of random graphs with one row weight moved by
        // 1e-8, two ions' columns swapped, a column set to the spectators', or
        // every column of a labelling XORed with one value:
        // the certificate says yes exactly when the pulse-level check does.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xce27);
        let weights = [FRAC_PI_4, -0.3, 0.11];
        let (mut refused, mut tried) = (0, 0);
        for round in 0..300 {
            let c = random_graph(&mut rng, 7, &weights);
            for mut plan in both_plans(&c) {
                let l = rng.gen_range(0..plan.walsh.len());
                let w = &mut plan.walsh[l];
                match rng.gen_range(0..4) {
                    0 => {
                        let j = rng.gen_range(0..w.t.len());
                        w.t[j] += 1e-8;
                    }
                    // Pairs within keep their XORs; against spectators they move.
                    3 => {
                        let d = rng.gen_range(1..w.m as u32);
                        w.column.iter_mut().for_each(|x| *x ^= d);
                    }
                    1 if w.ions.len() > 1 => {
                        let a = rng.gen_range(0..w.ions.len());
                        let b = (a + 1) % w.ions.len();
                        w.column.swap(a, b);
                    }
                    _ => {
                        let a = rng.gen_range(0..w.ions.len());
                        w.column[a] = 0;
                    }
                }
                let pulses = certifies_signed(&plan.synthesis(&c), &c);
                assert_eq!(plan.certifies(&c), pulses, "round {round}: {plan:?}");
                tried += 1;
                refused += usize::from(!pulses);
            }
        }
        // Some nudges change nothing (two ions of one column swapped, a row that
        // makes no pulse moved): most must be refused.
        assert!(
            tried > 250 && refused * 10 > tried * 7,
            "{refused} of {tried}"
        );
    }

    #[test]
    fn pairs_of_one_weight_are_labelled_as_the_search_labels_them() {
        // The shortcut for the commonest class against the search it skips.
        for k in 1..=9usize {
            for w in [0.3, -FRAC_PI_4, 1e-7] {
                let mut c = Coupling::zero(2 * k + 3);
                for i in 0..k {
                    c.set(2 * i + 1, 2 * i + 2, w);
                }
                let parts = components(&c);
                let pairs: Vec<&Part> = parts.iter().filter(|p| p.0.len() > 1).collect();
                let fast = labelled(&c, &pairs, 1 << 10).expect("pairs are labelled");
                assert!(pairs_of_one_weight(&pairs).is_some());
                let labels = label(&c, &pairs, true, 24).expect("the search labels pairs");
                let p_bits = usize::BITS - pairs.len().leading_zeros();
                assert_eq!(fast.m, 1 << (labels.bits + p_bits), "k = {k}");
                for (ion, col) in fast.ions.iter().zip(&fast.column) {
                    let k = pairs
                        .iter()
                        .position(|p| p.0.contains(ion))
                        .expect("in a pair");
                    let y = labels.y[*ion].expect("labelled");
                    assert_eq!(*col, ((k as u32 + 1) << labels.bits) | y);
                }
                let plan = SignedPlan { walsh: vec![fast] };
                assert!(plan.certifies(&c));
                assert!(realises(&plan.synthesis(&c), &c));
            }
        }
    }

    #[test]
    fn playing_a_plan_flips_what_its_pulses_differ_in() {
        // The flips `play` reports against the pulses of `pulses_on` played from
        // all +1 (each pulse's signs compared with the frame before it, ions in
        // order, then the frame taken back), on the plans of random graphs placed
        // among spare ions.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x91a4);
        let weights = [FRAC_PI_4, -0.3, 0.11, 0.3];
        let mut plans = 0;
        for round in 0..300 {
            let c = random_graph(&mut rng, 8, &weights);
            let device = c.n + 5;
            // Reversed, so a labelling's flips come out of order before sorting.
            let at = |u: usize| device - 1 - u;
            for plan in both_plans(&c) {
                plans += 1;
                let mut want: Vec<(Vec<usize>, Option<f64>)> = Vec::new();
                let mut frame = vec![1i8; device];
                for p in plan.pulses_on(device, &at) {
                    let flips = (0..device).filter(|&i| frame[i] != p.signs[i]).collect();
                    frame.copy_from_slice(&p.signs);
                    want.push((flips, Some(p.weight)));
                }
                want.push(((0..device).filter(|&i| frame[i] < 0).collect(), None));
                let mut got: Vec<(Vec<usize>, Option<f64>)> = Vec::new();
                plan.play(&at, |flips, w| got.push((flips.to_vec(), w)));
                assert_eq!(got, want, "round {round}");
            }
        }
        assert!(plans > 300, "{plans}");
    }
}
