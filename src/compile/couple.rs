//! Coupling synthesis: a symmetric coupling `exp(-i sum_{i<j} w_ij X_i X_j)` as a
//! product of sign-vector pulses `exp(-i t sum_{i<j} s_i s_j X_i X_j)`, `t >= 0`
//! (DESIGN section 1, facts 5 to 9).
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
//! - The Hadamard construction of DESIGN fact 6 (each coupling isolated on its own)
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

    fn max_abs(&self) -> f64 {
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

/// One pulse of a synthesis: `exp(-i weight sum_{i<j} s_i s_j X_i X_j)`.
#[derive(Debug, Clone, PartialEq)]
pub struct Pulse {
    pub signs: Vec<i8>,
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
    /// DESIGN fact 7: disjoint pairs of equal coupling share a Hadamard matrix.
    Matching,
    /// DESIGN fact 6 for each coupling on its own (the fallback).
    Hadamard,
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
    /// The largest entry of `sum_k t_k s_k s_k^T - w` (the certificate check).
    pub fn residual(&self, c: &Coupling) -> f64 {
        let mut acc = vec![0.0; c.w.len()];
        for p in &self.pulses {
            for i in 0..c.n {
                for j in i + 1..c.n {
                    acc[pair(c.n, i, j)] += p.weight * (p.signs[i] * p.signs[j]) as f64;
                }
            }
        }
        acc.iter()
            .zip(&c.w)
            .fold(0.0f64, |m, (a, b)| m.max((a - b).abs()))
    }

    /// True when the certificate holds: weights non-negative, couplings matched.
    pub fn certifies(&self, c: &Coupling) -> bool {
        self.pulses
            .iter()
            .all(|p| p.weight >= 0.0 && p.signs.len() == c.n)
            && self.residual(c) <= CERTIFICATE_EPS * c.max_abs().max(1.0)
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
        return Synthesis {
            pulses: Vec::new(),
            weight: 0.0,
            lower_bound: 0.0,
            method: Method::Single,
        };
    }
    if c.n == 2 {
        let w = c.w[0];
        return Synthesis {
            pulses: vec![Pulse {
                signs: vec![1, if w < 0.0 { -1 } else { 1 }],
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

/// The Hadamard construction (DESIGN fact 6) for every non-zero coupling on its own:
/// `m` pulses of weight `|w|/m`, `m` the smallest Hadamard order `>= n - 1`.
pub fn hadamard_each(c: &Coupling) -> Synthesis {
    let n = c.n;
    let h = smallest_hadamard(n.saturating_sub(1).max(1));
    let m = h.len();
    let mut pulses = Vec::new();
    for i in 0..n {
        for j in i + 1..n {
            let w = c.get(i, j);
            if w == 0.0 {
                continue;
            }
            // i and j share column 0 (j with the coupling's sign); the others
            // take columns 1, 2, ... in turn.
            let mut col = vec![0usize; n];
            let mut next = 1;
            for (k, slot) in col.iter_mut().enumerate() {
                if k != i && k != j {
                    *slot = next;
                    next += 1;
                }
            }
            for row in &h {
                let signs: Vec<i8> = (0..n)
                    .map(|k| {
                        let s = row[col[k]];
                        if k == j && w < 0.0 {
                            -s
                        } else {
                            s
                        }
                    })
                    .collect();
                pulses.push(Pulse {
                    signs,
                    weight: w.abs() / m as f64,
                });
            }
        }
    }
    let weight = c.w.iter().map(|w| w.abs()).sum();
    Synthesis {
        pulses,
        weight,
        lower_bound: c.max_abs(),
        method: Method::Hadamard,
    }
}

/// DESIGN fact 7: when the coupled pairs are disjoint and all of weight `|w|`, one
/// Hadamard matrix of order `m >= pairs + others` gives every pair column `c_i`
/// (the second ion with the coupling's sign) and every other ion its own column;
/// its rows, each of weight `|w|/m`, realise the layer with total weight `|w|`.
/// `None` unless the coupling is such a layer.
pub fn matching(c: &Coupling) -> Option<Synthesis> {
    let n = c.n;
    let mut partner = vec![usize::MAX; n];
    let mut weight: Option<f64> = None;
    for i in 0..n {
        for j in i + 1..n {
            let w = c.get(i, j);
            if w == 0.0 {
                continue;
            }
            if partner[i] != usize::MAX || partner[j] != usize::MAX {
                return None;
            }
            match weight {
                Some(x) if (x - w.abs()).abs() > 1e-12 * x.max(1.0) => return None,
                _ => weight = Some(w.abs()),
            }
            partner[i] = j;
            partner[j] = i;
        }
    }
    let weight = weight?;
    // Columns: each pair one, each uncoupled ion one.
    let mut col = vec![usize::MAX; n];
    let mut sign = vec![1i8; n];
    let mut next = 0;
    for i in 0..n {
        if col[i] != usize::MAX {
            continue;
        }
        col[i] = next;
        if partner[i] != usize::MAX {
            let j = partner[i];
            col[j] = next;
            sign[j] = if c.get(i, j) < 0.0 { -1 } else { 1 };
        }
        next += 1;
    }
    let h = smallest_hadamard(next);
    let m = h.len();
    let pulses = h
        .iter()
        .map(|row| Pulse {
            signs: (0..n).map(|k| row[col[k]] * sign[k]).collect(),
            weight: weight / m as f64,
        })
        .collect();
    Some(Synthesis {
        pulses,
        weight,
        lower_bound: weight,
        method: Method::Matching,
    })
}

/// DESIGN fact 7 generalised to disjoint pairs of different weights: with the
/// weights sorted, `|w_1| >= |w_2| >= ...`, level `l` couples pairs 1 to l equally
/// with weight `|w_l| - |w_{l+1}|` by fact 7 (the other ions idle); the total weight
/// is `|w_1|`, the largest coupling, which is also a lower bound (no pulse adds more
/// than its weight to one coupling): optimal. `None` unless the pairs are disjoint.
pub fn matching_layers(c: &Coupling) -> Option<Synthesis> {
    let n = c.n;
    let mut pairs: Vec<(usize, usize, f64)> = Vec::new();
    let mut used = vec![false; n];
    for i in 0..n {
        for j in i + 1..n {
            let w = c.get(i, j);
            if w == 0.0 {
                continue;
            }
            if used[i] || used[j] {
                return None;
            }
            used[i] = true;
            used[j] = true;
            pairs.push((i, j, w));
        }
    }
    if pairs.is_empty() {
        return None;
    }
    pairs.sort_by(|a, b| b.2.abs().total_cmp(&a.2.abs()));
    let mut pulses = Vec::new();
    for level in 0..pairs.len() {
        let here = pairs[level].2.abs();
        let next = pairs.get(level + 1).map_or(0.0, |p| p.2.abs());
        let step = here - next;
        if step <= 0.0 {
            continue;
        }
        let mut layer = Coupling::zero(n);
        for &(i, j, w) in &pairs[..=level] {
            layer.set(i, j, step * w.signum());
        }
        pulses.extend(matching(&layer).expect("equal disjoint pairs").pulses);
    }
    let weight = pairs[0].2.abs();
    Some(Synthesis {
        pulses,
        weight,
        lower_bound: weight,
        method: Method::Matching,
    })
}

/// DESIGN fact 9: the pulses of `s` (on the ions `active`, in that order) extended to
/// `n` ions so that every coupling touching another ion is zero, at unchanged total
/// weight: each pulse becomes `m` pulses of a `m`-row Hadamard matrix (`m >= r + 1`
/// for the `r` other ions), active ions on column 0 times the pulse's signs, the
/// others on columns 1 to r.
pub fn pad_idle(s: &Synthesis, active: &[usize], n: usize) -> Vec<Pulse> {
    let r = n - active.len();
    let mut is_active = vec![usize::MAX; n];
    for (k, &ion) in active.iter().enumerate() {
        is_active[ion] = k;
    }
    let mut other_col = vec![0usize; n];
    let mut next = 1;
    for ion in 0..n {
        if is_active[ion] == usize::MAX {
            other_col[ion] = next;
            next += 1;
        }
    }
    if r == 0 {
        return s
            .pulses
            .iter()
            .map(|p| Pulse {
                signs: (0..n).map(|ion| p.signs[is_active[ion]]).collect(),
                weight: p.weight,
            })
            .collect();
    }
    let h = smallest_hadamard(r + 1);
    let m = h.len();
    let mut out = Vec::with_capacity(s.pulses.len() * m);
    for p in &s.pulses {
        for row in &h {
            let signs = (0..n)
                .map(|ion| match is_active[ion] {
                    usize::MAX => row[other_col[ion]],
                    k => row[0] * p.signs[k],
                })
                .collect();
            out.push(Pulse {
                signs,
                weight: p.weight / m as f64,
            });
        }
    }
    out
}

/// Orders pulses so that consecutive sign vectors differ on few ions, starting and
/// ending with no ion flipped (greedy nearest neighbour on the Hamming distance,
/// among the next [`ORDER_WINDOW`] pulses of the list, so the cost stays linear),
/// and picks for each pulse the one of `s`, `-s` closer to the one before (the two
/// give the same pulse).
pub fn order_pulses(pulses: Vec<Pulse>) -> Vec<Pulse> {
    let n = pulses.first().map_or(0, |p| p.signs.len());
    let words = n.div_ceil(64);
    // Sign vectors as bit sets (bit set = -1), so a distance is a few popcounts.
    let pack = |signs: &[i8]| -> Vec<u64> {
        let mut w = vec![0u64; words];
        for (i, &s) in signs.iter().enumerate() {
            if s < 0 {
                w[i / 64] |= 1 << (i % 64);
            }
        }
        w
    };
    let mut left: std::collections::VecDeque<(Vec<u64>, Pulse)> =
        pulses.into_iter().map(|p| (pack(&p.signs), p)).collect();
    let mut frame = vec![0u64; words];
    let dist = |a: &[u64], b: &[u64]| -> usize {
        a.iter()
            .zip(b)
            .map(|(x, y)| (x ^ y).count_ones() as usize)
            .sum()
    };
    let mut out = Vec::with_capacity(left.len());
    while !left.is_empty() {
        let mut best = (usize::MAX, 0usize, false);
        for (k, (bits, _)) in left.iter().take(ORDER_WINDOW).enumerate() {
            let d = dist(&frame, bits);
            let (d, neg) = if n - d < d { (n - d, true) } else { (d, false) };
            if d < best.0 {
                best = (d, k, neg);
            }
        }
        let (mut bits, mut p) = left.remove(best.1).expect("in range");
        if best.2 {
            p.signs.iter_mut().for_each(|s| *s = -*s);
            bits = pack(&p.signs);
        }
        frame = bits;
        out.push(p);
    }
    out
}

/// How many of the remaining pulses [`order_pulses`] considers for the next one.
pub const ORDER_WINDOW: usize = 32;

/// Every sign vector on `n` ions with `s_0 = +1`.
fn all_signs(n: usize) -> Vec<Vec<i8>> {
    (0..1usize << (n - 1))
        .map(|bits| {
            (0..n)
                .map(|i| {
                    if i > 0 && bits >> (i - 1) & 1 == 1 {
                        -1
                    } else {
                        1
                    }
                })
                .collect()
        })
        .collect()
}

/// The solution of the restricted program over `cols`.
struct Lp {
    x: Vec<f64>,
    /// Dual prices of the coupling rows, in the convention `A^T y <= 1`.
    y: Vec<f64>,
}

/// Solves `min sum t` over the columns `cols` (plus, if `artificial` is set, one
/// pair of columns `+-e_p` of that cost per row, so the program is always feasible).
fn solve(c: &Coupling, cols: &[Vec<i8>], artificial: Option<f64>, deadline: Instant) -> Option<Lp> {
    let rows = c.w.len();
    let n_art = if artificial.is_some() { 2 * rows } else { 0 };
    let ncols = cols.len() + n_art;
    let mut colptr = Vec::with_capacity(ncols + 1);
    let mut rowval = Vec::new();
    let mut nzval = Vec::new();
    colptr.push(0);
    for (k, s) in cols.iter().enumerate() {
        for i in 0..c.n {
            for j in i + 1..c.n {
                rowval.push(pair(c.n, i, j));
                nzval.push((s[i] * s[j]) as f64);
            }
        }
        rowval.push(rows + k);
        nzval.push(-1.0);
        colptr.push(rowval.len());
    }
    for a in 0..n_art {
        rowval.push(a / 2);
        nzval.push(if a % 2 == 0 { 1.0 } else { -1.0 });
        rowval.push(rows + cols.len() + a);
        nzval.push(-1.0);
        colptr.push(rowval.len());
    }
    let a = CscMatrix::new(rows + ncols, ncols, colptr, rowval, nzval);
    let p = CscMatrix::zeros((ncols, ncols));
    let mut q = vec![1.0; cols.len()];
    q.extend(std::iter::repeat(artificial.unwrap_or(0.0)).take(n_art));
    let mut b = c.w.clone();
    b.extend(std::iter::repeat(0.0).take(ncols));
    let cones = [
        SupportedConeT::ZeroConeT(rows),
        SupportedConeT::NonnegativeConeT(ncols),
    ];
    let left = deadline.checked_duration_since(Instant::now())?;
    let settings = DefaultSettingsBuilder::default()
        .verbose(false)
        .time_limit(left.as_secs_f64())
        .tol_gap_abs(1e-10)
        .tol_gap_rel(1e-10)
        .tol_feas(1e-10)
        .build()
        .ok()?;
    let mut solver = DefaultSolver::new(&p, &q, &a, &b, &cones, settings).ok()?;
    solver.solve();
    let sol = &solver.solution;
    if !matches!(
        sol.status,
        SolverStatus::Solved | SolverStatus::AlmostSolved
    ) {
        return None;
    }
    Some(Lp {
        x: sol.x.clone(),
        y: sol.z[..rows].iter().map(|z| -z).collect(),
    })
}

/// The column matrix of `cols` on the coupling rows.
fn column_matrix(c: &Coupling, cols: &[&Vec<i8>]) -> DMatrix<f64> {
    DMatrix::from_fn(c.w.len(), cols.len(), |r, k| {
        // Row r is pair (i, j); recover it by walking (small matrices only).
        let (i, j) = unpair(c.n, r);
        (cols[k][i] * cols[k][j]) as f64
    })
}

fn unpair(n: usize, mut r: usize) -> (usize, usize) {
    for i in 0..n {
        let len = n - i - 1;
        if r < len {
            return (i, i + 1 + r);
        }
        r -= len;
    }
    unreachable!("pair index below n(n-1)/2")
}

/// A null vector of `a` (unit length), if its columns are dependent.
fn null_vector(a: &DMatrix<f64>) -> Option<DVector<f64>> {
    let ata = a.transpose() * a;
    let e = ata.symmetric_eigen();
    let top = e.eigenvalues.max().max(1e-300);
    let (k, &low) = e
        .eigenvalues
        .iter()
        .enumerate()
        .min_by(|p, q| p.1.total_cmp(q.1))?;
    (low <= 1e-10 * top).then(|| e.eigenvectors.column(k).into_owned())
}

/// Moves a feasible solution to a vertex of the same or lower weight and re-solves
/// the couplings exactly on its support. Each step takes a null vector of at most
/// `rows + 1` support columns, so it costs `O(rows^3)`.
fn purify(c: &Coupling, cols: &[Vec<i8>], x: &[f64]) -> Option<Vec<Pulse>> {
    let rows = c.w.len();
    let scale = x.iter().fold(0.0f64, |m, v| m.max(*v)).max(1e-300);
    let mut support: Vec<usize> = (0..cols.len()).filter(|&k| x[k] > 1e-9 * scale).collect();
    let mut xs: Vec<f64> = support.iter().map(|&k| x[k]).collect();
    // Columns known to be independent of the ones before them are skipped.
    loop {
        let take = support.len().min(rows + 1);
        let refs: Vec<&Vec<i8>> = support[..take].iter().map(|&k| &cols[k]).collect();
        let Some(mut d) = null_vector(&column_matrix(c, &refs)) else {
            break;
        };
        if d.sum() > 0.0 {
            d = -d;
        }
        // Step until the first weight reaches zero (the sum does not grow).
        let mut step = f64::INFINITY;
        let mut hit = usize::MAX;
        for (k, &dk) in d.iter().enumerate() {
            if dk < -1e-14 && xs[k] / -dk < step {
                step = xs[k] / -dk;
                hit = k;
            }
        }
        if hit == usize::MAX {
            break;
        }
        for (k, &dk) in d.iter().enumerate() {
            xs[k] += step * dk;
        }
        support.remove(hit);
        xs.remove(hit);
        let mut k = 0;
        let keep: Vec<bool> = xs.iter().map(|&v| v > 1e-12 * scale).collect();
        support.retain(|_| {
            k += 1;
            keep[k - 1]
        });
        xs.retain(|&v| v > 1e-12 * scale);
    }
    // Exact weights on the independent support.
    let refs: Vec<&Vec<i8>> = support.iter().map(|&k| &cols[k]).collect();
    let a = column_matrix(c, &refs);
    let b = DVector::from_column_slice(&c.w);
    // Independent columns: the normal equations are positive definite.
    let exact = (a.transpose() * &a).cholesky()?.solve(&(a.transpose() * b));
    if exact.iter().any(|&t| t < -1e-12 * scale) {
        return None;
    }
    Some(
        support
            .iter()
            .zip(exact.iter())
            .filter(|(_, &t)| t > 0.0)
            .map(|(&k, &t)| Pulse {
                signs: cols[k].clone(),
                weight: t,
            })
            .collect(),
    )
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

/// The program over every sign vector.
fn exact(c: &Coupling) -> Option<Synthesis> {
    let cols = all_signs(c.n);
    let lp = solve(c, &cols, None, Instant::now() + Duration::from_secs(60))?;
    let bound = c.w.iter().zip(&lp.y).map(|(w, y)| w * y).sum::<f64>();
    let pulses = purify(c, &cols, &lp.x)?;
    Some(finish(pulses, bound, Method::Exact))
}

/// The best price `max_s sum y_ij s_i s_j` over every sign vector, by a Gray-code
/// walk that updates the local fields in `O(n)` per step.
fn price_exact(n: usize, y: &Coupling) -> (f64, Vec<i8>) {
    let mut s = vec![1i8; n];
    // field[i] = sum_j y_ij s_j
    let mut field: Vec<f64> = (0..n).map(|i| (0..n).map(|j| y.get(i, j)).sum()).collect();
    let mut value = y.w.iter().sum::<f64>();
    let mut best = (value, s.clone());
    for g in 1..1usize << (n - 1) {
        // The bit that changes between Gray codes g-1 and g; ion 0 stays +1.
        let i = g.trailing_zeros() as usize + 1;
        // Flipping s_i changes the value by -2 s_i field_i.
        value -= 2.0 * s[i] as f64 * field[i];
        s[i] = -s[i];
        for (j, f) in field.iter_mut().enumerate() {
            if j != i {
                *f += 2.0 * s[i] as f64 * y.get(i, j);
            }
        }
        if value > best.0 {
            best = (value, s.clone());
        }
    }
    best
}

/// A good price by single-flip local search from `starts` starting points.
fn price_local(n: usize, y: &Coupling, starts: &[Vec<i8>]) -> Vec<(f64, Vec<i8>)> {
    let mut out = Vec::new();
    for start in starts {
        let mut s = start.clone();
        let mut field: Vec<f64> = (0..n)
            .map(|i| (0..n).map(|j| y.get(i, j) * s[j] as f64).sum())
            .collect();
        loop {
            // The flip with the largest gain: -2 s_i field_i.
            let (i, gain) = (0..n)
                .map(|i| (i, -2.0 * s[i] as f64 * field[i]))
                .max_by(|a, b| a.1.total_cmp(&b.1))
                .expect("n >= 2");
            if gain <= 1e-12 {
                break;
            }
            s[i] = -s[i];
            for (j, f) in field.iter_mut().enumerate() {
                if j != i {
                    *f += 2.0 * s[i] as f64 * y.get(i, j);
                }
            }
        }
        if s[0] < 0 {
            s.iter_mut().for_each(|v| *v = -*v);
        }
        out.push((y.dot_signs(&s), s));
    }
    out
}

/// An upper bound on `max_s sum_{i<j} y_ij s_i s_j`: `n lambda_max(Y) / 2`.
fn price_bound(y: &Coupling) -> f64 {
    let m = DMatrix::from_fn(y.n, y.n, |i, j| y.get(i, j));
    let top = m.symmetric_eigenvalues().max();
    y.n as f64 * top / 2.0
}

/// Column generation (see the module header).
fn columns(c: &Coupling, deadline: Instant) -> Option<Synthesis> {
    use rand::{Rng, SeedableRng};
    let n = c.n;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x7u64 ^ n as u64);
    // Start from the columns the coupling itself prices best.
    let starts: Vec<Vec<i8>> = (0..8)
        .map(|k| {
            (0..n)
                .map(|i| {
                    if k == 0 || i == 0 || rng.gen_bool(0.5) {
                        1
                    } else {
                        -1
                    }
                })
                .collect()
        })
        .collect();
    let mut cols: Vec<Vec<i8>> = Vec::new();
    for (_, s) in price_local(n, c, &starts) {
        if !cols.contains(&s) {
            cols.push(s);
        }
    }
    // Artificial columns keep the restricted program feasible; they cost more than
    // any pair isolated on its own could (its weight |w| at most the sum of all).
    let big = 4.0 * (1.0 + n as f64 * n as f64);
    let mut lower_bound: f64 = 0.0;
    for _round in 0..400 {
        if Instant::now() >= deadline {
            return None;
        }
        let lp = solve(c, &cols, Some(big), deadline)?;
        let y = Coupling { n, w: lp.y.clone() };
        let dual_value: f64 = c.w.iter().zip(&lp.y).map(|(w, y)| w * y).sum();
        let (best, new_cols): (f64, Vec<Vec<i8>>) = if n <= EXACT_PRICING_IONS {
            let (v, s) = price_exact(n, &y);
            (v, vec![s])
        } else {
            let mut starts: Vec<Vec<i8>> = cols.iter().rev().take(8).cloned().collect();
            for _ in 0..24 {
                starts.push(
                    (0..n)
                        .map(|_| if rng.gen_bool(0.5) { 1 } else { -1 })
                        .collect(),
                );
            }
            let mut found = price_local(n, &y, &starts);
            found.sort_by(|a, b| b.0.total_cmp(&a.0));
            let best = found.first().map_or(0.0, |f| f.0);
            (
                best,
                found
                    .into_iter()
                    .filter(|f| f.0 > 1.0 + 1e-9)
                    .map(|f| f.1)
                    .take(16)
                    .collect(),
            )
        };
        // y / g is dual feasible when g bounds every price from above.
        let g = if n <= EXACT_PRICING_IONS {
            best
        } else {
            price_bound(&y)
        };
        if g > 0.0 {
            lower_bound = lower_bound.max(dual_value / g.max(1.0));
        }
        let mut fresh: Vec<Vec<i8>> = new_cols.into_iter().filter(|s| !cols.contains(s)).collect();
        fresh.dedup();
        if best <= 1.0 + 1e-9 || fresh.is_empty() {
            // No improving column: the restricted optimum is the optimum (exactly
            // so with exact pricing). Artificial columns left in use mean failure.
            let art = &lp.x[cols.len()..];
            let scale = c.max_abs().max(1e-300);
            if art.iter().any(|&a| a > 1e-9 * scale) {
                return None;
            }
            if n <= EXACT_PRICING_IONS {
                lower_bound = lower_bound.max(dual_value);
            }
            let pulses = purify(c, &cols, &lp.x[..cols.len()])?;
            return Some(finish(pulses, lower_bound, Method::Columns));
        }
        cols.extend(fresh);
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

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
