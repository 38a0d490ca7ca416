//! Stabilizer tableaux (Aaronson and Gottesman, "Improved simulation of stabilizer
//! circuits", PRA 70, 052328, 2004) and the recognition of Clifford kernels.
//!
//! A Clifford unitary is determined up to global phase by the images of all `X_j`
//! and `Z_j` with their signs: the full `2n`-row tableau (destabilizers and
//! stabilizers) started from the identity. Two Clifford programs are equal up to
//! global phase exactly when their tableaux are equal. Cost per gate `O(n / 64)`
//! words, per comparison `O(n^2 / 64)`.

use super::apply::z_to_sigma;
use super::program::Kernel;
use crate::circuit::Mat2;
use num_complex::Complex64 as C64;
use std::f64::consts::{FRAC_PI_2, FRAC_PI_4, PI};
use std::sync::OnceLock;

/// How far a coefficient or an angle may be from its exact Clifford value and still
/// be read as that value. Every such reading adds its actual deviation to a bound
/// that the checker adds to the distance it measures, so nothing that differs by
/// more than the rounding floor is ever accepted as an exact Clifford.
pub const CLIFFORD_EPS: f64 = 1e-12;

/// A Clifford generator.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cliff {
    H(usize),
    S(usize),
    Cx(usize, usize),
}

/// The tableau of a Clifford unitary on `n` qubits, stored by columns of bits over
/// the `2n` rows so that each gate is a few word operations per 64 rows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Tableau {
    pub n: usize,
    words: usize,
    x: Vec<Vec<u64>>,
    z: Vec<Vec<u64>>,
    r: Vec<u64>,
}

impl Tableau {
    /// The identity: row `i < n` is `X_i`, row `n + i` is `Z_i`.
    pub fn identity(n: usize) -> Tableau {
        let words = (2 * n).div_ceil(64).max(1);
        let mut t = Tableau {
            n,
            words,
            x: vec![vec![0; words]; n],
            z: vec![vec![0; words]; n],
            r: vec![0; words],
        };
        for q in 0..n {
            t.x[q][q / 64] |= 1 << (q % 64);
            let row = n + q;
            t.z[q][row / 64] |= 1 << (row % 64);
        }
        t
    }

    pub fn apply(&mut self, g: Cliff) {
        match g {
            Cliff::H(a) => {
                for w in 0..self.words {
                    self.r[w] ^= self.x[a][w] & self.z[a][w];
                }
                std::mem::swap(&mut self.x[a], &mut self.z[a]);
            }
            Cliff::S(a) => {
                for w in 0..self.words {
                    self.r[w] ^= self.x[a][w] & self.z[a][w];
                    self.z[a][w] ^= self.x[a][w];
                }
            }
            Cliff::Cx(a, b) => {
                for w in 0..self.words {
                    let (xa, za, xb, zb) = (self.x[a][w], self.z[a][w], self.x[b][w], self.z[b][w]);
                    self.r[w] ^= xa & zb & !(xb ^ za);
                    self.x[b][w] = xb ^ xa;
                    self.z[a][w] = za ^ zb;
                }
            }
        }
    }
}

/// The 24 single-qubit Cliffords as words over H and S (time order), with their
/// matrices normalised to a fixed global phase.
fn single_qubit_cliffords() -> &'static Vec<(Vec<Cliff>, Mat2)> {
    static TABLE: OnceLock<Vec<(Vec<Cliff>, Mat2)>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let r = std::f64::consts::FRAC_1_SQRT_2;
        let h = [
            [C64::new(r, 0.0), C64::new(r, 0.0)],
            [C64::new(r, 0.0), C64::new(-r, 0.0)],
        ];
        let s = [
            [C64::new(1.0, 0.0), C64::new(0.0, 0.0)],
            [C64::new(0.0, 0.0), C64::new(0.0, 1.0)],
        ];
        let id = [
            [C64::new(1.0, 0.0), C64::new(0.0, 0.0)],
            [C64::new(0.0, 0.0), C64::new(1.0, 0.0)],
        ];
        let mut found: Vec<(Vec<Cliff>, Mat2)> = vec![(vec![], normalise(&id))];
        let mut frontier = 0;
        while frontier < found.len() {
            let (word, m) = found[frontier].clone();
            for (g, gm) in [(Cliff::H(0), h), (Cliff::S(0), s)] {
                let next = normalise(&mul(&gm, &m));
                if !found.iter().any(|(_, f)| close(f, &next)) {
                    let mut w = word.clone();
                    w.push(g);
                    found.push((w, next));
                }
            }
            frontier += 1;
        }
        debug_assert_eq!(found.len(), 24);
        found
    })
}

use crate::circuit::mat2::mul;

/// Divides by the phase of the first entry of modulus above one half.
fn normalise(m: &Mat2) -> Mat2 {
    let pivot = [m[0][0], m[0][1], m[1][0], m[1][1]]
        .into_iter()
        .find(|e| e.norm() > 0.5)
        .unwrap_or(C64::new(1.0, 0.0));
    let ph = pivot / pivot.norm();
    [[m[0][0] / ph, m[0][1] / ph], [m[1][0] / ph, m[1][1] / ph]]
}

/// The largest entry distance between two 2x2 matrices.
fn entry_distance(a: &Mat2, b: &Mat2) -> f64 {
    let mut worst: f64 = 0.0;
    for i in 0..2 {
        for j in 0..2 {
            worst = worst.max((a[i][j] - b[i][j]).norm());
        }
    }
    worst
}

fn close(a: &Mat2, b: &Mat2) -> bool {
    entry_distance(a, b) < CLIFFORD_EPS
}

/// The H/S word of a single-qubit Clifford, if `m` is one up to global phase within
/// [`CLIFFORD_EPS`] per entry; adds to `dev` a bound on the operator-norm distance
/// between `m` and the word (up to phase).
pub fn clifford_word(m: &Mat2, dev: &mut f64) -> Option<&'static [Cliff]> {
    let n = normalise(m);
    single_qubit_cliffords().iter().find_map(|(w, f)| {
        let d = entry_distance(f, &n);
        (d < CLIFFORD_EPS).then(|| {
            *dev += 2.0 * d;
            w.as_slice()
        })
    })
}

/// `m = t P` for a Pauli `P` (0 = I, 1 = X, 2 = Y, 3 = Z) and a phase `t`, within
/// [`CLIFFORD_EPS`] per Pauli coefficient: returns `(P, t, d)` with `d` a bound on the
/// operator-norm distance between `m` and `t P`.
pub fn as_pauli(m: &Mat2) -> Option<(u8, C64, f64)> {
    let t = [
        (m[0][0] + m[1][1]) / 2.0,
        (m[0][1] + m[1][0]) / 2.0,
        (m[1][0] - m[0][1]) / C64::new(0.0, 2.0),
        (m[0][0] - m[1][1]) / 2.0,
    ];
    let p = (0..4u8).find(|&p| (t[p as usize].norm() - 1.0).abs() < CLIFFORD_EPS)?;
    // Each Pauli has operator norm one: the distance is at most the sum of the
    // other coefficients plus the modulus error of this one.
    let d = (t[p as usize].norm() - 1.0).abs()
        + (0..4)
            .filter(|&o| o != p as usize)
            .map(|o| t[o].norm())
            .sum::<f64>();
    (d < 4.0 * CLIFFORD_EPS).then(|| (p, t[p as usize] / t[p as usize].norm(), d))
}

/// `k` with `x = k * unit` (mod `period`), if `x` is such a multiple within
/// [`CLIFFORD_EPS`]; adds the actual offset to `dev`.
fn multiple_of(x: f64, unit: f64, period: u32, dev: &mut f64) -> Option<u32> {
    let k = (x / unit).round();
    let off = (x - k * unit).abs();
    (off < CLIFFORD_EPS).then(|| {
        *dev += off;
        (k.rem_euclid(period as f64)) as u32
    })
}

fn push_word(out: &mut Vec<Cliff>, word: &[Cliff], q: usize) {
    out.extend(word.iter().map(|g| match g {
        Cliff::H(_) => Cliff::H(q),
        Cliff::S(_) => Cliff::S(q),
        Cliff::Cx(..) => unreachable!("single-qubit words hold only H and S"),
    }));
}

/// `exp(-i w sum P_a P_b)` over `terms` with `P = Z` or `sigma_axis`, as Clifford
/// generators; `None` unless every `w` is a multiple of pi/4 and the axis of pi/2.
/// Adds to `dev` a bound on the operator-norm distance to the exact Clifford.
fn ising(
    axis: Option<f64>,
    terms: &[(usize, usize, f64)],
    out: &mut Vec<Cliff>,
    dev: &mut f64,
) -> Option<()> {
    let mut qubits: Vec<usize> = terms.iter().flat_map(|t| [t.0, t.1]).collect();
    qubits.sort_unstable();
    qubits.dedup();
    let basis = match axis {
        Some(phi) => {
            let mut off = 0.0;
            multiple_of(phi, FRAC_PI_2, 4, &mut off)?;
            let phi = (phi / FRAC_PI_2).round() * FRAC_PI_2;
            // Turning the axis by `off` moves each basis change by at most `off / 2`,
            // and it is applied twice per qubit.
            *dev += off * qubits.len() as f64;
            let (w, wd) = z_to_sigma(phi);
            Some((clifford_word(&w, dev)?, clifford_word(&wd, dev)?))
        }
        None => None,
    };
    if let Some((_, wd)) = basis {
        for &q in &qubits {
            push_word(out, wd, q);
        }
    }
    for &(a, b, w) in terms {
        // exp(-i pi/4 Z_a Z_b) = CX(a,b) exp(-i pi/4 Z_b) CX(a,b), and exp(-i pi/4 Z) is
        // S up to phase; four units make -1.
        let units = multiple_of(w, FRAC_PI_4, 4, dev)?;
        for _ in 0..units {
            out.extend([Cliff::Cx(a, b), Cliff::S(b), Cliff::Cx(a, b)]);
        }
    }
    if let Some((w, _)) = basis {
        for &q in &qubits {
            push_word(out, w, q);
        }
    }
    Some(())
}

/// The Clifford generators of a kernel, or `None` if it is not Clifford within
/// [`CLIFFORD_EPS`]. Adds to `dev` a bound on the operator-norm distance between
/// the kernel and the generators (up to global phase).
pub fn kernel_to_clifford(k: &Kernel, out: &mut Vec<Cliff>, dev: &mut f64) -> Option<()> {
    match k {
        Kernel::One { q, m } => push_word(out, clifford_word(m, dev)?, *q),
        Kernel::Collective { m, qubits } => {
            let mut one = 0.0;
            let w = clifford_word(m, &mut one)?;
            *dev += one * qubits.len() as f64;
            for &q in qubits {
                push_word(out, w, q);
            }
        }
        Kernel::Controlled {
            controls,
            target,
            m,
        } if controls.len() == 1 => {
            let (c, t) = (controls[0], *target);
            let (p, factor, d) = as_pauli(m)?;
            *dev += d;
            // controlled-(e^{i a} P) = diag(1, e^{i a}) on the control, times controlled-P.
            let quarter_turns = multiple_of(factor.arg(), FRAC_PI_2, 4, dev)?;
            match p {
                0 => {}
                1 => out.push(Cliff::Cx(c, t)),
                2 => {
                    out.extend([Cliff::S(t), Cliff::S(t), Cliff::S(t)]);
                    out.push(Cliff::Cx(c, t));
                    out.push(Cliff::S(t));
                }
                _ => out.extend([Cliff::H(t), Cliff::Cx(c, t), Cliff::H(t)]),
            }
            for _ in 0..quarter_turns {
                out.push(Cliff::S(c));
            }
        }
        Kernel::Controlled { .. } | Kernel::Dense { .. } => return None,
        Kernel::Swap { a, b } => {
            out.extend([Cliff::Cx(*a, *b), Cliff::Cx(*b, *a), Cliff::Cx(*a, *b)])
        }
        Kernel::Ising { axis, terms } => ising(*axis, terms, out, dev)?,
        Kernel::Ms { theta, phi, qubits } => {
            let mut off = 0.0;
            multiple_of(theta / 2.0, FRAC_PI_4, 4, &mut off)?;
            let mut terms = Vec::new();
            for (i, &a) in qubits.iter().enumerate() {
                for &b in &qubits[i + 1..] {
                    terms.push((a, b, theta / 2.0));
                }
            }
            ising(Some(*phi), &terms, out, dev)?;
        }
    }
    Some(())
}

/// Whether a Pauli (0 I, 1 X, 2 Y, 3 Z) commutes (`Some(false)`) or anticommutes
/// (`Some(true)`) with `sigma_phi`; `None` when it does neither. Adds the axis's
/// offset from the exact axis to `dev`.
fn anticommutes_with_sigma(p: u8, phi: f64, dev: &mut f64) -> Option<bool> {
    let mut off_x = 0.0;
    let mut off_y = 0.0;
    let along_x = multiple_of(phi, PI, 2, &mut off_x).is_some();
    let along_y = multiple_of(phi - FRAC_PI_2, PI, 2, &mut off_y).is_some();
    let answer = match p {
        0 => Some(false),
        3 => Some(true),
        1 if along_x => Some(false),
        1 if along_y => Some(true),
        2 if along_x => Some(true),
        2 if along_y => Some(false),
        _ => None,
    };
    if matches!(p, 1 | 2) && answer.is_some() {
        *dev += off_x + off_y;
    }
    answer
}

/// Fuses each run of MS kernels on the same qubits with the same axis (mod pi),
/// separated only by Pauli operations, into one Ising kernel followed by those
/// Paulis. Pushing a Pauli `P` past `exp(-i w sigma_a sigma_b)` flips the sign of
/// `w` when `P` anticommutes with exactly one of `sigma_a`, `sigma_b`, so the
/// coupling matrix is tracked with signs. The product is unchanged (up to global
/// phase), and a sign-vector echo of non-Clifford pulses becomes a Clifford
/// interaction when its couplings are.
///
/// Operations read as Paulis or axes read as equal within [`CLIFFORD_EPS`] are not
/// exactly so: the second value returned bounds, in operator norm, how far the
/// fused product can be from the original one on that account.
pub fn fuse_xx_runs(kernels: &[Kernel]) -> (Vec<Kernel>, f64) {
    struct Run {
        phi: f64,
        qubits: Vec<usize>,
        weights: Vec<f64>,
        signs: Vec<f64>,
        paulis: Vec<Kernel>,
        /// Sum over pulses of |theta| / 2 times the pairs.
        weight_sum: f64,
    }
    fn flush(run: &mut Option<Run>, out: &mut Vec<Kernel>) {
        if let Some(r) = run.take() {
            let mut terms = Vec::new();
            let mut k = 0;
            for (i, &a) in r.qubits.iter().enumerate() {
                for &b in &r.qubits[i + 1..] {
                    terms.push((a, b, r.weights[k]));
                    k += 1;
                }
            }
            out.push(Kernel::Ising {
                axis: Some(r.phi),
                terms,
            });
            out.extend(r.paulis);
        }
    }
    let mut out = Vec::with_capacity(kernels.len());
    let mut run: Option<Run> = None;
    let mut slack = 0.0;
    for k in kernels {
        match k {
            Kernel::Ms { theta, phi, qubits } => {
                let mut off = 0.0;
                let compatible = run.as_ref().is_some_and(|r| {
                    r.qubits == *qubits && multiple_of(phi - r.phi, PI, 2, &mut off).is_some()
                });
                let m = qubits.len();
                if !compatible {
                    flush(&mut run, &mut out);
                    run = Some(Run {
                        phi: *phi,
                        qubits: qubits.clone(),
                        weights: vec![0.0; m * (m.saturating_sub(1)) / 2],
                        signs: vec![1.0; m],
                        paulis: Vec::new(),
                        weight_sum: 0.0,
                    });
                } else {
                    // ||S_phi' - S_phi|| <= m off, so the exponents differ by at most
                    // |theta| / 4 * 2 m * m off.
                    slack += theta.abs() / 2.0 * (m * m) as f64 * off;
                }
                let r = run.as_mut().expect("a run is open");
                r.weight_sum += theta.abs() / 2.0 * r.weights.len() as f64;
                let mut idx = 0;
                for i in 0..r.qubits.len() {
                    for j in i + 1..r.qubits.len() {
                        r.weights[idx] += theta / 2.0 * r.signs[i] * r.signs[j];
                        idx += 1;
                    }
                }
            }
            Kernel::One { m, .. } | Kernel::Collective { m, .. } if run.is_some() => {
                let r = run.as_mut().expect("checked");
                let mut axis_off = 0.0;
                let reading = as_pauli(m).and_then(|(p, _, d)| {
                    anticommutes_with_sigma(p, r.phi, &mut axis_off).map(|anti| (anti, d))
                });
                match reading {
                    Some((anti, d)) => {
                        // Moving `t P + E` instead of `t P` costs at most 2 ||E|| per
                        // qubit; an axis off by `a` costs at most 2 a per unit weight.
                        let n_q = k.qubits().len() as f64;
                        slack += 2.0 * d * n_q + 2.0 * axis_off * r.weight_sum * n_q;
                        if anti {
                            for q in k.qubits() {
                                if let Some(i) = r.qubits.iter().position(|&x| x == q) {
                                    r.signs[i] = -r.signs[i];
                                }
                            }
                        }
                        r.paulis.push(k.clone());
                    }
                    None => {
                        flush(&mut run, &mut out);
                        out.push(k.clone());
                    }
                }
            }
            other => {
                flush(&mut run, &mut out);
                out.push(other.clone());
            }
        }
    }
    flush(&mut run, &mut out);
    (out, slack)
}

/// The tableau of a list of kernels with a bound on the operator-norm distance
/// between the kernels and the Cliffords they were read as, or the first kernel
/// that is not Clifford within [`CLIFFORD_EPS`].
pub fn tableau_of(kernels: &[Kernel], n: usize) -> Result<(Tableau, f64), Kernel> {
    let mut t = Tableau::identity(n);
    let mut gates = Vec::new();
    let mut dev = 0.0;
    for k in kernels {
        gates.clear();
        if kernel_to_clifford(k, &mut gates, &mut dev).is_none() {
            return Err(k.clone());
        }
        for &g in &gates {
            t.apply(g);
        }
    }
    Ok((t, dev))
}
