//! The linear program over sign vectors: exact over every column up to
//! [`EXACT_IONS`] ions, column generation with exact or local-search pricing above,
//! the certified dual bound, and the move to a vertex with its exact re-solve. The
//! solver is Clarabel (it reports the dual values the pricing needs).

use super::*;

/// Every sign vector on `n` ions with `s_0 = +1`.
pub(super) fn all_signs(n: usize) -> Vec<Vec<i8>> {
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
pub(super) struct Lp {
    x: Vec<f64>,
    /// Dual prices of the coupling rows, in the convention `A^T y <= 1`.
    y: Vec<f64>,
}

/// Solves `min sum t` over the columns `cols` (plus, if `artificial` is set, one
/// pair of columns `+-e_p` of that cost per row, so the program is always feasible).
pub(super) fn solve(
    c: &Coupling,
    cols: &[Vec<i8>],
    artificial: Option<f64>,
    deadline: Instant,
) -> Option<Lp> {
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
pub(super) fn column_matrix(c: &Coupling, cols: &[&Vec<i8>]) -> DMatrix<f64> {
    DMatrix::from_fn(c.w.len(), cols.len(), |r, k| {
        // Row r is pair (i, j); recover it by walking (small matrices only).
        let (i, j) = unpair(c.n, r);
        (cols[k][i] * cols[k][j]) as f64
    })
}

pub(super) fn unpair(n: usize, mut r: usize) -> (usize, usize) {
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
pub(super) fn null_vector(a: &DMatrix<f64>) -> Option<DVector<f64>> {
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
pub(super) fn purify(c: &Coupling, cols: &[Vec<i8>], x: &[f64]) -> Option<Vec<Pulse>> {
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
                signs: Signs::from_slice(&cols[k]),
                weight: t,
            })
            .collect(),
    )
}

/// The program over every sign vector.
pub(super) fn exact(c: &Coupling) -> Option<Synthesis> {
    let cols = all_signs(c.n);
    let lp = solve(c, &cols, None, Instant::now() + Duration::from_secs(60))?;
    let bound = c.w.iter().zip(&lp.y).map(|(w, y)| w * y).sum::<f64>();
    let pulses = purify(c, &cols, &lp.x)?;
    Some(finish(pulses, bound, Method::Exact))
}

/// The best price `max_s sum y_ij s_i s_j` over every sign vector, by a Gray-code
/// walk that updates the local fields in `O(n)` per step.
pub(super) fn price_exact(n: usize, y: &Coupling) -> (f64, Vec<i8>) {
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
pub(super) fn price_local(n: usize, y: &Coupling, starts: &[Vec<i8>]) -> Vec<(f64, Vec<i8>)> {
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
pub(super) fn price_bound(y: &Coupling) -> f64 {
    let m = DMatrix::from_fn(y.n, y.n, |i, j| y.get(i, j));
    let top = m.symmetric_eigenvalues().max();
    y.n as f64 * top / 2.0
}

/// Column generation (see the module header).
pub(super) fn columns(c: &Coupling, deadline: Instant) -> Option<Synthesis> {
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
