//! Coupling synthesis: a symmetric coupling `exp(-i sum_{i<j} w_ij X_i X_j)` as a
//! product of sign-vector pulses `exp(-i t sum_{i<j} s_i s_j X_i X_j)`, `t >= 0`
//! (gate-set facts 5 to 9, docs/gate-set.md).
//!
//! The smallest total weight `sum t` is a linear program over the sign vectors
//! (Bassler, Zipper, Cedzich, Heinrich, Huber, Johanning, Kliesch, Quantum 7, 984,
//! 2023, arXiv:2206.06387):
//!
//! ```text
//! minimise sum_s t_s   subject to   sum_s t_s s_i s_j = w_ij  (i < j),   t >= 0.
//! ```
//!
//! - Up to [`EXACT_IONS`] ions every sign vector is a column (`s_0 = +1` fixes the
//!   global sign), solved by the Clarabel interior-point solver.
//! - Above that, column generation: the restricted program is solved, its dual
//!   prices `y` pick the column `s` of largest `sum y_ij s_i s_j` (exactly, by a
//!   Gray-code walk over all sign vectors, up to [`EXACT_PRICING_IONS`] ions; by
//!   local search from several starts above) until no column prices above 1.
//!   `y / max(1, g)`, with `g` an upper bound on the best price, is a feasible dual,
//!   so `w . y / g` is a certified lower bound on the optimum.
//! - Every solution is moved to a vertex of its optimal face (a step along a null
//!   vector of the support until a weight reaches zero, repeated), so it uses at
//!   most one pulse per coupled pair, and re-solved exactly on that support.
//! - The Hadamard construction of gate-set fact 6 (each coupling isolated on its own)
//!   is the fallback when the solver fails or runs out of time.
//!
//! Invariant: every [`Synthesis`] satisfies `sum_k t_k s_k s_k^T = w` off the
//! diagonal within [`CERTIFICATE_EPS`] times the largest weight ([`Synthesis::residual`]),
//! and every weight is non-negative; the synthesiser checks this before returning.

use super::hadamard::smallest_hadamard;
use clarabel::algebra::CscMatrix;
use clarabel::solver::{
    DefaultSettingsBuilder, DefaultSolver, IPSolver, SolverStatus, SupportedConeT,
};
use nalgebra::{DMatrix, DVector};
use std::time::{Duration, Instant};

mod constructions;
mod lp;
mod signed;

pub use constructions::{hadamard_each, matching, matching_layers, pad_idle};
use lp::{columns, exact};
pub use signed::{signed_classes, signed_labels, SignedPlan};
/// Up to this many ions the program is solved over all `2^(n-1)` sign vectors.
pub const EXACT_IONS: usize = 10;
/// Up to this many ions the pricing step of column generation is exact.
pub const EXACT_PRICING_IONS: usize = 20;
/// How far a certificate may miss its coupling, relative to the largest weight.
pub const CERTIFICATE_EPS: f64 = 1e-9;

/// A symmetric coupling on `n` ions, `w[pair(i, j)]` for `i < j`.
#[derive(Debug, Clone, PartialEq)]
pub struct Coupling {
    pub n: usize,
    pub w: Vec<f64>,
}

/// Index of the pair `(i, j)`, `i < j < n`, in row-major upper-triangle order.
pub fn pair(n: usize, i: usize, j: usize) -> usize {
    debug_assert!(i < j && j < n);
    i * n - i * (i + 1) / 2 + (j - i - 1)
}

impl Coupling {
    pub fn zero(n: usize) -> Coupling {
        Coupling {
            n,
            w: vec![0.0; n * n.saturating_sub(1) / 2],
        }
    }

    pub fn get(&self, i: usize, j: usize) -> f64 {
        match i.cmp(&j) {
            std::cmp::Ordering::Less => self.w[pair(self.n, i, j)],
            std::cmp::Ordering::Greater => self.w[pair(self.n, j, i)],
            std::cmp::Ordering::Equal => 0.0,
        }
    }

    pub fn set(&mut self, i: usize, j: usize, v: f64) {
        let (i, j) = if i < j { (i, j) } else { (j, i) };
        let p = pair(self.n, i, j);
        self.w[p] = v;
    }

    /// Whether `f(i, j, w_ij)` holds for every pair `i < j`, asked in the order of
    /// `w` (row by row of the upper triangle) until one does not.
    pub fn all_pairs(&self, mut f: impl FnMut(usize, usize, f64) -> bool) -> bool {
        let mut p = 0;
        for i in 0..self.n {
            for j in i + 1..self.n {
                if !f(i, j, self.w[p]) {
                    return false;
                }
                p += 1;
            }
        }
        true
    }

    /// The largest coupling in absolute value.
    pub fn max_abs(&self) -> f64 {
        self.w.iter().fold(0.0f64, |m, x| m.max(x.abs()))
    }

    /// `sum w_ij s_i s_j`: the coupling's inner product with the column of `s`.
    fn dot_signs(&self, s: &[i8]) -> f64 {
        let mut acc = 0.0;
        for i in 0..self.n {
            for j in i + 1..self.n {
                acc += self.w[pair(self.n, i, j)] * (s[i] * s[j]) as f64;
            }
        }
        acc
    }
}

/// The signs of one pulse, one per ion: held inline up to 64 ions (a block's echo
/// makes tens of pulses, and a long circuit millions, each of which was an
/// allocation of its own).
pub type Signs = smallvec::SmallVec<[i8; 64]>;

/// One pulse of a synthesis: `exp(-i weight sum_{i<j} s_i s_j X_i X_j)`.
#[derive(Debug, Clone, PartialEq)]
pub struct Pulse {
    pub signs: Signs,
    pub weight: f64,
}

/// How a synthesis was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    /// Two ions: one pulse.
    Single,
    /// The linear program over every sign vector.
    Exact,
    /// Column generation.
    Columns,
    /// gate-set fact 7: disjoint pairs of equal coupling share a Hadamard matrix.
    Matching,
    /// gate-set fact 6 for each coupling on its own (the fallback).
    Hadamard,
    /// gate-set fact 10: pulses of both signs, the other ions never flipped.
    Signed,
}

/// Sign vectors and weights realising a coupling, with what is known of the optimum.
#[derive(Debug, Clone, PartialEq)]
pub struct Synthesis {
    pub pulses: Vec<Pulse>,
    /// `sum t_k`.
    pub weight: f64,
    /// A certified lower bound on the smallest total weight (0 when none is known).
    pub lower_bound: f64,
    pub method: Method,
}

impl Synthesis {
    /// No pulses: the synthesis of a coupling that is zero.
    pub fn empty() -> Synthesis {
        Synthesis {
            pulses: Vec::new(),
            weight: 0.0,
            lower_bound: 0.0,
            method: Method::Single,
        }
    }

    /// The largest entry of `sum_k t_k s_k s_k^T - w` (the certificate check); a
    /// pulse with a sign vector of another length than `c`'s makes it infinite.
    /// The couplings are one matrix product `(S T) S^T`, `S` the signs (a column
    /// per pulse) and `T` the weights on the diagonal, which nalgebra hands to a
    /// blocked kernel: a block of 50 ions and thousands of pulses is checked in a
    /// fraction of the time a sum per pair takes.
    pub fn residual(&self, c: &Coupling) -> f64 {
        let n = c.n;
        if self.pulses.iter().any(|p| p.signs.len() != n) {
            return f64::INFINITY;
        }
        let signs = nalgebra::DMatrix::from_fn(n, self.pulses.len(), |i, k| {
            f64::from(self.pulses[k].signs[i])
        });
        let weighted = nalgebra::DMatrix::from_fn(n, self.pulses.len(), |i, k| {
            self.pulses[k].weight * signs[(i, k)]
        });
        let made = weighted * signs.transpose();
        let mut worst = 0.0f64;
        c.all_pairs(|i, j, w| {
            worst = worst.max((made[(i, j)] - w).abs());
            true
        });
        worst
    }

    /// True when the certificate holds: weights non-negative, couplings matched.
    pub fn certifies(&self, c: &Coupling) -> bool {
        self.pulses
            .iter()
            .all(|p| p.weight >= 0.0 && p.signs.len() == c.n)
            && self.residual(c) <= CERTIFICATE_EPS * c.max_abs().max(1.0)
    }
}

/// What any synthesis of a coupling must spend, known without solving the program:
/// a floor on its total weight and on the number of its distinct sign vectors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Floor {
    /// No synthesis has total weight `sum t_k` below this.
    pub weight: f64,
    /// No synthesis has fewer distinct sign vectors (counting `s` and `-s` as one).
    pub distinct: usize,
}

/// The floor of [`Floor`] from the spectrum of the coupling matrix (derived here).
///
/// Every sign vector has `s_i^2 = 1`, so a synthesis of total weight `T` satisfies
/// `sum_k t_k s_k s_k^T = T I + W` with `W` the symmetric coupling matrix (zero
/// diagonal). The left side is positive semidefinite, so `T >= -lambda_min(W)` (the
/// spectral relaxation of the cut polytope, common practice since Goemans and
/// Williamson's semidefinite relaxation of max-cut, J. ACM 42, 1995), and `T` is at
/// least the largest `|w_ij|` (each pulse adds at most its weight to a pair). Its
/// rank is at most the number of distinct `s_k s_k^T`, and `T I + W` with
/// `T >= -lambda_min` has rank at least `n` minus the multiplicity of `lambda_min`
/// (eigenvalues within a tolerance far above the certificate's rounding count as
/// equal, so a certified synthesis, which meets `w` only to [`CERTIFICATE_EPS`],
/// still obeys the floor).
pub fn floor(c: &Coupling) -> Floor {
    floor_of_parts(c.n, &components(c)).0
}

/// [`floor`] of a coupling from its connected components (as [`components`] gives
/// them, covering all `n` ions): the spectrum of a block-diagonal matrix is the
/// union of its blocks' spectra, a lone pair's is `+-|w|` and a lone ion's `0`, so
/// only parts of three ions or more need an eigenvalue solver. Also the largest
/// `distinct` floor of any one part.
pub fn floor_of_parts(n: usize, parts: &[(Vec<usize>, Coupling)]) -> (Floor, usize) {
    let mut values: Vec<f64> = Vec::with_capacity(n);
    let mut largest = 0.0f64;
    let mut most = 0;
    for (_, sub) in parts {
        let start = values.len();
        match sub.n {
            0 => {}
            1 => values.push(0.0),
            2 => values.extend([sub.w[0].abs(), -sub.w[0].abs()]),
            _ => {
                let m = DMatrix::from_fn(sub.n, sub.n, |i, j| sub.get(i, j));
                values.extend(m.symmetric_eigenvalues().iter());
            }
        }
        largest = largest.max(sub.max_abs());
        most = most.max(spectral_floor(&values[start..], sub.max_abs(), sub.n).distinct);
    }
    (spectral_floor(&values, largest, n), most)
}

/// The floor from the eigenvalues of an `n`-ion coupling whose largest weight is
/// `largest`.
fn spectral_floor(values: &[f64], largest: f64, n: usize) -> Floor {
    if n < 2 || largest == 0.0 {
        return Floor {
            weight: 0.0,
            distinct: 0,
        };
    }
    let lowest = values.iter().copied().fold(f64::INFINITY, f64::min);
    // The certificate allows an error of CERTIFICATE_EPS * max(1, largest) per
    // entry, which moves an eigenvalue by at most n times that.
    let tol = 1e-6 * largest.max(1.0) * n as f64;
    let multiplicity = values.iter().filter(|&&v| v <= lowest + tol).count();
    Floor {
        weight: largest.max(-lowest),
        distinct: n - multiplicity,
    }
}

/// Which program to solve.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Strategy {
    /// Every sign vector up to [`EXACT_IONS`] ions, column generation above.
    Auto,
    /// Column generation at any size (to compare the two in tests).
    Columns,
}

/// Settings of one synthesis.
#[derive(Debug, Clone, Copy)]
pub struct Budget {
    /// Wall-clock time after which the solver gives up and the fallback is used.
    pub time_limit: Duration,
    pub strategy: Strategy,
}

impl Default for Budget {
    fn default() -> Budget {
        Budget {
            time_limit: Duration::from_secs(5),
            strategy: Strategy::Auto,
        }
    }
}

/// The fewest-weight synthesis this module can find for `c` within the budget.
/// Never fails: the Hadamard construction is the fallback.
pub fn synthesize(c: &Coupling, budget: Budget) -> Synthesis {
    let nonzero: Vec<usize> = (0..c.w.len()).filter(|&p| c.w[p] != 0.0).collect();
    if nonzero.is_empty() {
        return Synthesis::empty();
    }
    if c.n == 2 {
        let w = c.w[0];
        return Synthesis {
            pulses: vec![Pulse {
                signs: smallvec::smallvec![1, if w < 0.0 { -1 } else { 1 }],
                weight: w.abs(),
            }],
            weight: w.abs(),
            lower_bound: w.abs(),
            method: Method::Single,
        };
    }
    // Disjoint pairs: the closed form is optimal, no solver needed.
    if let Some(m) = matching_layers(c) {
        return m;
    }
    if budget.time_limit.is_zero() {
        return hadamard_each(c);
    }
    let deadline = Instant::now() + budget.time_limit;
    let parts = components(c);
    if parts.len() > 1 {
        let solved: Vec<(Vec<usize>, Synthesis)> = parts
            .into_iter()
            .map(|(ions, sub)| {
                let left = deadline.saturating_duration_since(Instant::now());
                let s = synthesize(
                    &sub,
                    Budget {
                        time_limit: left,
                        ..budget
                    },
                );
                (ions, s)
            })
            .collect();
        return join_parts(c, &solved);
    }
    let found = if c.n <= EXACT_IONS && budget.strategy == Strategy::Auto {
        exact(c)
    } else {
        columns(c, deadline)
    };
    match found {
        Some(s) if s.certifies(c) => s,
        _ => hadamard_each(c),
    }
}

/// Whether [`synthesize`] makes `c` from its components' syntheses: when it has
/// more than one component and is not a layer of disjoint pairs, and `time` is left
/// for the program (else the construction stands). A caller that keeps the
/// components' syntheses makes the same with [`join_parts`].
pub fn by_parts(c: &Coupling, parts: usize, time: Duration) -> bool {
    c.n > 2
        && parts > 1
        && !time.is_zero()
        && c.w.iter().any(|w| *w != 0.0)
        && matching_layers(c).is_none()
}

/// `c` made of its components' syntheses `solved` (ions, synthesis), side by side;
/// the Hadamard construction where that does not certify.
pub fn join_parts(c: &Coupling, solved: &[(Vec<usize>, Synthesis)]) -> Synthesis {
    let joined = side_by_side(c.n, solved);
    if joined.certifies(c) {
        joined
    } else {
        hadamard_each(c)
    }
}

/// Orders pulses so that consecutive sign vectors differ on few ions, starting and
/// ending with no ion flipped (greedy nearest neighbour on the Hamming distance,
/// among the next [`ORDER_WINDOW`] pulses of the list, so the cost stays linear),
/// and picks for each pulse the one of `s`, `-s` closer to the one before (the two
/// give the same pulse).
pub fn order_pulses(pulses: Vec<Pulse>) -> Vec<Pulse> {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("popcnt") {
        // SAFETY: the CPU has POPCNT (checked just above), the one feature the
        // function is compiled for.
        return unsafe { order_pulses_popcnt(pulses) };
    }
    order_pulses_any(pulses)
}

/// [`order_pulses`] with the distances counted by the POPCNT instruction (without
/// it, a popcount is a dozen shifts and masks, and the distances are most of the
/// ordering's time).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "popcnt")]
unsafe fn order_pulses_popcnt(pulses: Vec<Pulse>) -> Vec<Pulse> {
    order_pulses_any(pulses)
}

/// [`order_pulses`] for any CPU; inlined into each caller, so that a caller compiled
/// for POPCNT counts with it.
#[inline(always)]
fn order_pulses_any(pulses: Vec<Pulse>) -> Vec<Pulse> {
    let n = pulses.first().map_or(0, |p| p.signs.len());
    // As bit sets, a distance is a few popcounts; `-s` is the complement within
    // the n bits.
    let (bits, words) = packed(&pulses);
    let all: Vec<u64> = (0..words).map(|w| word_mask(n, w)).collect();
    // One word per pulse (up to 64 ions, the usual case) is the same loop with the
    // word count known when compiling.
    let order = if words == 1 {
        greedy_order::<1>(&bits, 1, &all, n)
    } else {
        greedy_order::<0>(&bits, words, &all, n)
    };
    placed(pulses, order)
}

/// The pulses' sign vectors as bit sets (bit set = -1), one row of `words` words per
/// pulse (at least one), and `words`.
fn packed(pulses: &[Pulse]) -> (Vec<u64>, usize) {
    let n = pulses.first().map_or(0, |p| p.signs.len());
    let words = n.div_ceil(64).max(1);
    let mut bits = vec![0u64; pulses.len() * words];
    for (row, p) in bits.chunks_mut(words).zip(pulses) {
        for (word, signs) in row.iter_mut().zip(p.signs.chunks(64)) {
            *word = sign_bits(signs);
        }
    }
    (bits, words)
}

/// Bit `i` set where `signs[i] < 0`, for up to 64 signs: eight at a time, each
/// byte's sign bit gathered by one multiplication (bit `7 + 8k` of the masked word
/// lands on bit `56 + k`; the other products fall below bit 56 without carrying
/// into it, or above bit 63), then the rest one by one.
fn sign_bits(signs: &[i8]) -> u64 {
    debug_assert!(signs.len() <= 64);
    let mut word = 0u64;
    let mut eights = signs.chunks_exact(8);
    for (k, chunk) in eights.by_ref().enumerate() {
        let bytes: [u8; 8] = std::array::from_fn(|i| chunk[i] as u8);
        let high = u64::from_le_bytes(bytes) & 0x8080_8080_8080_8080;
        word |= (high.wrapping_mul(0x0002_0408_1020_4081) >> 56) << (8 * k);
    }
    let done = signs.len() - eights.remainder().len();
    for (i, &s) in eights.remainder().iter().enumerate() {
        word |= u64::from(s < 0) << (done + i);
    }
    word
}

/// The bits of word `w` that hold ions of `n`.
fn word_mask(n: usize, w: usize) -> u64 {
    match n.saturating_sub(64 * w) {
        r if r >= 64 => u64::MAX,
        r => (1u64 << r) - 1,
    }
}

/// How many distinct sign vectors the pulses have, a vector and its negation
/// counted once (they make the same MS pulse, and [`order_pulses`] takes either).
/// However they are ordered, a change from one to another flips at least one ion.
pub fn distinct_up_to_sign(pulses: &[Pulse]) -> usize {
    let (mut bits, words) = packed(pulses);
    let n = pulses.first().map_or(0, |p| p.signs.len());
    // Each vector with its first ion at +1 (its negation, where that ion is -1).
    for row in bits.chunks_mut(words) {
        if row[0] & 1 == 1 {
            for (w, word) in row.iter_mut().enumerate() {
                *word = !*word & word_mask(n, w);
            }
        }
    }
    if words == 1 {
        // Up to 64 ions (the usual case): plain words sort faster than slices.
        bits.sort_unstable();
        bits.dedup();
        return bits.len();
    }
    let mut rows: Vec<&[u64]> = bits.chunks(words).collect();
    rows.sort_unstable();
    rows.dedup();
    rows.len()
}

/// The order of [`order_pulses`] on sign vectors packed `words` to a row (`W`, when
/// not 0, is `words` known at compile time): each next pulse the nearest of the
/// first [`ORDER_WINDOW`] still to place, in list order (the first nearest on a
/// tie), taken as `s` or `-s` (complement within `all`), whichever is nearer.
#[inline(always)]
fn greedy_order<const W: usize>(
    bits: &[u64],
    words: usize,
    all: &[u64],
    n: usize,
) -> Vec<(usize, bool)> {
    let words = if W > 0 { W } else { words };
    let len = bits.len() / words;
    let row = |k: usize| &bits[k * words..(k + 1) * words];
    let mut order: Vec<(usize, bool)> = Vec::with_capacity(len);
    // The pulses still to place: the window, then `next..len`.
    let mut window: Vec<usize> = (0..len.min(ORDER_WINDOW)).collect();
    let mut next = window.len();
    let mut frame = vec![0u64; words];
    while !window.is_empty() {
        let mut best = (usize::MAX, 0usize, false);
        for (at, &k) in window.iter().enumerate() {
            let d: usize = frame
                .iter()
                .zip(row(k))
                .map(|(x, y)| (x ^ y).count_ones() as usize)
                .sum();
            let (d, neg) = if n - d < d { (n - d, true) } else { (d, false) };
            if d < best.0 {
                best = (d, at, neg);
            }
        }
        let k = window.remove(best.1);
        if next < len {
            window.push(next);
            next += 1;
        }
        for ((f, &b), &m) in frame.iter_mut().zip(row(k)).zip(all) {
            *f = if best.2 { !b & m } else { b };
        }
        order.push((k, best.2));
    }
    order
}

/// `pulses` in `order`, each negated where it says so.
#[inline(always)]
fn placed(pulses: Vec<Pulse>, order: Vec<(usize, bool)>) -> Vec<Pulse> {
    let mut slots: Vec<Option<Pulse>> = pulses.into_iter().map(Some).collect();
    order
        .into_iter()
        .map(|(k, neg)| {
            let mut p = slots[k].take().expect("each pulse once");
            if neg {
                p.signs.iter_mut().for_each(|s| *s = -*s);
            }
            p
        })
        .collect()
}

/// How many of the remaining pulses [`order_pulses`] considers for the next one.
pub const ORDER_WINDOW: usize = 32;

/// The connected components of the coupling graph (an ion with no coupling is one
/// alone), each sorted, with the coupling among its ions.
pub fn components(c: &Coupling) -> Vec<(Vec<usize>, Coupling)> {
    let mut sets = petgraph::unionfind::UnionFind::<usize>::new(c.n);
    c.all_pairs(|i, j, w| {
        if w != 0.0 {
            sets.union(i, j);
        }
        true
    });
    // Each ion's group, numbered by first ion; then the groups at their sizes.
    let mut index = vec![usize::MAX; c.n];
    let mut sizes: Vec<usize> = Vec::new();
    let group: Vec<usize> = (0..c.n)
        .map(|i| {
            let r = sets.find(i);
            if index[r] == usize::MAX {
                index[r] = sizes.len();
                sizes.push(0);
            }
            sizes[index[r]] += 1;
            index[r]
        })
        .collect();
    let mut groups: Vec<Vec<usize>> = sizes.iter().map(|&k| Vec::with_capacity(k)).collect();
    for (i, &g) in group.iter().enumerate() {
        groups[g].push(i);
    }
    groups
        .into_iter()
        .map(|ions| {
            let mut sub = Coupling::zero(ions.len());
            for (x, &i) in ions.iter().enumerate() {
                for (y, &j) in ions.iter().enumerate().skip(x + 1) {
                    sub.set(x, y, c.get(i, j));
                }
            }
            (ions, sub)
        })
        .collect()
}

/// Uncoupled components made at once, at the area of the costliest (derived here,
/// gate-set fact 9 generalised): each component's pulses are padded to the largest
/// total `T` with pulses that couple nothing (the rows of a Hadamard matrix, whose
/// columns are orthogonal), the time `[0, T]` is cut where any component changes
/// pulse, and each piece is played `m` times with component `c`'s signs multiplied by
/// `H[j][c]` (`m >= ` the number of components): the couplings inside a component
/// are its own, those between components cancel as distinct columns are orthogonal.
/// The lower bound is the largest component's: restricting any synthesis of the whole
/// to one component's ions synthesises that component at no more weight.
pub fn side_by_side(n: usize, parts: &[(Vec<usize>, Synthesis)]) -> Synthesis {
    let lower_bound = parts
        .iter()
        .map(|(_, s)| s.lower_bound)
        .fold(0.0f64, f64::max);
    let method = parts
        .iter()
        .max_by(|a, b| a.1.weight.total_cmp(&b.1.weight))
        .map_or(Method::Single, |p| p.1.method);
    let plan = SideBySide::new(parts);
    let h = smallest_hadamard(parts.len());
    let mut pulses = Vec::new();
    let mut at = vec![0usize; parts.len()];
    for (start, end) in plan.slices() {
        let mid = start + (end - start) / 2.0;
        for (k, part) in plan.steps.iter().enumerate() {
            while at[k] + 1 < part.len() && part[at[k]].0 < mid {
                at[k] += 1;
            }
        }
        for row in h.iter() {
            let mut signs = Signs::from_elem(1, n);
            let out: &mut [i8] = &mut signs;
            for (k, (ions, _)) in parts.iter().enumerate() {
                let own: &[i8] = &plan.steps[k][at[k]].1;
                debug_assert_eq!(own.len(), ions.len());
                for (&ion, &s) in ions.iter().zip(own) {
                    out[ion] = row[k] * s;
                }
            }
            pulses.push(Pulse {
                signs,
                weight: (end - start) / h.len() as f64,
            });
        }
    }
    finish(order_pulses(pulses), lower_bound, method)
}

/// How many pulses [`side_by_side`] makes of `parts`, without making them: one per
/// Hadamard row in each slice of time.
pub fn side_by_side_pulses(parts: &[(Vec<usize>, Synthesis)]) -> usize {
    crate::compile::hadamard::smallest_order(parts.len()) * SideBySide::new(parts).slices().count()
}

/// The time plan of [`side_by_side`]: each part as a step function over
/// `[0, total]` (end time, signs on its ions), padded to `total` with Hadamard rows,
/// and the times where any part changes pulse.
struct SideBySide {
    steps: Vec<Vec<(f64, Signs)>>,
    cuts: Vec<f64>,
}

impl SideBySide {
    fn new(parts: &[(Vec<usize>, Synthesis)]) -> SideBySide {
        let total = parts.iter().map(|(_, s)| s.weight).fold(0.0f64, f64::max);
        let mut steps: Vec<Vec<(f64, Signs)>> = Vec::with_capacity(parts.len());
        let mut cuts: Vec<f64> = Vec::new();
        for (ions, s) in parts {
            let mut t = 0.0;
            let mut part = Vec::new();
            for p in &s.pulses {
                if p.weight <= 0.0 {
                    continue;
                }
                t += p.weight;
                part.push((t, p.signs.clone()));
            }
            let spare = total - t;
            if spare > 1e-15 * total.max(1.0) {
                let h = smallest_hadamard(ions.len());
                for row in h.iter() {
                    t += spare / h.len() as f64;
                    part.push((t, Signs::from_slice(&row[..ions.len()])));
                }
            }
            if let Some(last) = part.last_mut() {
                last.0 = total;
            }
            cuts.extend(part.iter().map(|p| p.0));
            steps.push(part);
        }
        cuts.sort_by(f64::total_cmp);
        cuts.dedup_by(|a, b| (*a - *b).abs() <= 1e-15 * total.max(1.0));
        SideBySide { steps, cuts }
    }

    /// The slices of time of positive length, as (start, end).
    fn slices(&self) -> impl Iterator<Item = (f64, f64)> + '_ {
        let starts = std::iter::once(0.0).chain(self.cuts.iter().copied());
        starts
            .zip(self.cuts.iter().copied())
            .filter(|(a, b)| b - a > 0.0)
    }
}

fn finish(pulses: Vec<Pulse>, lower_bound: f64, method: Method) -> Synthesis {
    let weight = pulses.iter().map(|p| p.weight).sum();
    Synthesis {
        pulses,
        weight,
        lower_bound,
        method,
    }
}

#[cfg(test)]
mod tests {
    use super::lp::{all_signs, price_exact, unpair};
    use super::*;
    use rand::{Rng, SeedableRng};

    /// The packed signs are the signs: for every pattern of eight signs (each
    /// gathered by one multiplication, so no two bits may collide) and for 0 to 64
    /// random signs (of runs of equal and of alternating signs too), `sign_bits`
    /// sets bit `i` exactly where sign `i` is -1, as a plain loop says.
    #[test]
    fn sign_bits_are_the_negative_signs() {
        for pattern in 0..256u64 {
            let signs: Vec<i8> = (0..8).map(|i| 1 - 2 * ((pattern >> i) & 1) as i8).collect();
            assert_eq!(sign_bits(&signs), pattern, "{signs:?}");
        }
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5b17);
        for round in 0..2000 {
            let len = round % 65;
            let signs: Vec<i8> = (0..len)
                .map(|i| match round % 4 {
                    0 => -1,
                    1 => 1 - 2 * (i % 2) as i8,
                    _ => [1, -1][rng.gen_range(0..2)],
                })
                .collect();
            let plain = signs
                .iter()
                .enumerate()
                .fold(0u64, |w, (i, &s)| w | (u64::from(s < 0) << i));
            assert_eq!(sign_bits(&signs), plain, "round {round}: {signs:?}");
        }
    }

    /// Distinct vectors up to sign, as a set of normalised vectors counts them: on
    /// random pulse lists over 1 to 130 ions drawn from a few vectors and their
    /// negations (so repeats and negations occur), over one word and several.
    #[test]
    fn distinct_up_to_sign_counts_each_vector_and_its_negation_once() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xd157);
        for round in 0..300 {
            let n = rng.gen_range(1..=130);
            let pool: Vec<Signs> = (0..rng.gen_range(1..8))
                .map(|_| (0..n).map(|_| [1i8, -1][rng.gen_range(0..2)]).collect())
                .collect();
            let pulses: Vec<Pulse> = (0..rng.gen_range(1..30))
                .map(|_| {
                    let v = &pool[rng.gen_range(0..pool.len())];
                    let sign = [1i8, -1][rng.gen_range(0..2)];
                    Pulse {
                        signs: v.iter().map(|&s| s * sign).collect(),
                        weight: 0.1,
                    }
                })
                .collect();
            let set: std::collections::HashSet<Vec<i8>> = pulses
                .iter()
                .map(|p| {
                    let flip = p.signs[0];
                    p.signs.iter().map(|&s| s * flip).collect()
                })
                .collect();
            assert_eq!(
                distinct_up_to_sign(&pulses),
                set.len(),
                "round {round}, n {n}"
            );
        }
    }

    /// What the optimizer does for a coupling of several components (each
    /// component's synthesis, cached there, then `join_parts` when `by_parts` says
    /// so) makes the same pulses as `synthesize` itself, on random couplings of two
    /// or three components of 2 to 4 ions; and `by_parts` refuses one component, a
    /// layer of disjoint pairs, and no time.
    #[test]
    fn joining_cached_components_is_what_synthesize_makes() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x9a27);
        let budget = Budget::default();
        let mut joined = 0;
        for round in 0..40 {
            let sizes: Vec<usize> = (0..rng.gen_range(2..=3))
                .map(|_| rng.gen_range(2..=4))
                .collect();
            let n: usize = sizes.iter().sum();
            let mut c = Coupling::zero(n);
            let mut first = 0;
            for &k in &sizes {
                for i in first..first + k - 1 {
                    c.set(i, i + 1, rng.gen_range(-0.7..0.7));
                }
                if k > 2 && rng.gen_bool(0.5) {
                    c.set(first, first + k - 1, rng.gen_range(-0.7..0.7));
                }
                first += k;
            }
            let parts = components(&c);
            assert_eq!(parts.len(), sizes.len(), "round {round}");
            let whole = synthesize(&c, budget);
            if !by_parts(&c, parts.len(), budget.time_limit) {
                // Disjoint pairs only: the matching layers, not the components.
                assert!(matching_layers(&c).is_some(), "round {round}");
                continue;
            }
            let solved: Vec<(Vec<usize>, Synthesis)> = parts
                .into_iter()
                .map(|(ions, sub)| (ions, synthesize(&sub, budget)))
                .collect();
            let made = join_parts(&c, &solved);
            assert_eq!(made.pulses, whole.pulses, "round {round}");
            assert!(made.certifies(&c), "round {round}");
            joined += 1;
        }
        assert!(joined > 20, "{joined} joined");
        let mut one = Coupling::zero(3);
        one.set(0, 1, 0.2);
        one.set(1, 2, 0.3);
        assert!(!by_parts(&one, components(&one).len(), budget.time_limit));
        let mut pairs = Coupling::zero(4);
        pairs.set(0, 1, 0.2);
        pairs.set(2, 3, 0.3);
        assert!(!by_parts(&pairs, 2, budget.time_limit));
        let mut two = pairs.clone();
        two.set(0, 2, 0.1);
        let mut three = Coupling::zero(5);
        three.set(0, 1, 0.2);
        three.set(1, 2, 0.3);
        three.set(3, 4, 0.1);
        assert!(by_parts(&three, 2, budget.time_limit));
        assert!(!by_parts(&three, 2, Duration::ZERO));
        assert!(!by_parts(&two, components(&two).len(), budget.time_limit));
    }

    #[test]
    fn pair_indices_cover_the_triangle() {
        let n = 6;
        let mut seen = vec![false; n * (n - 1) / 2];
        for i in 0..n {
            for j in i + 1..n {
                let p = pair(n, i, j);
                assert!(!seen[p]);
                seen[p] = true;
                assert_eq!(unpair(n, p), (i, j));
            }
        }
        assert!(seen.iter().all(|&s| s));
    }

    #[test]
    fn gray_code_pricing_matches_brute_force() {
        let n = 7;
        let mut y = Coupling::zero(n);
        for (k, w) in y.w.iter_mut().enumerate() {
            *w = ((k * 37 % 11) as f64 - 5.0) / 3.0;
        }
        let (best, s) = price_exact(n, &y);
        let brute = all_signs(n)
            .iter()
            .map(|s| y.dot_signs(s))
            .fold(f64::NEG_INFINITY, f64::max);
        assert!((best - brute).abs() < 1e-12);
        assert!((y.dot_signs(&s) - best).abs() < 1e-12);
    }
}
