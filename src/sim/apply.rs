//! Applying kernels and programs to statevectors, and building small unitaries.

use super::program::Kernel;
use super::state::StateVector;
use crate::circuit::Mat2;
use nalgebra::DMatrix;
use num_complex::Complex64 as C64;
use rayon::prelude::*;
use std::f64::consts::FRAC_1_SQRT_2;

/// `W = Rz(phi) H` maps Z to `sigma_phi`: `W Z W^dagger = sigma_phi`.
pub fn z_to_sigma(phi: f64) -> (Mat2, Mat2) {
    let r = FRAC_1_SQRT_2;
    let e = C64::from_polar(1.0, phi / 2.0);
    // Rz(phi) H = [[e^{-i phi/2}, e^{-i phi/2}], [e^{i phi/2}, -e^{i phi/2}]] / sqrt 2.
    let w = [[e.conj() * r, e.conj() * r], [e * r, -e * r]];
    let wd = [
        [w[0][0].conj(), w[1][0].conj()],
        [w[0][1].conj(), w[1][1].conj()],
    ];
    (w, wd)
}

fn mask_of(qubits: &[usize]) -> usize {
    qubits.iter().map(|q| 1usize << q).sum()
}

/// Applies one kernel. Cost: one pass over the state, or a few for collective
/// kernels (see [`StateVector::apply_same_to_all`]).
///
/// Panics when the kernel names a qubit the state does not have (the state's
/// kernels check their own arguments; this covers the masks built here).
pub fn apply_kernel(s: &mut StateVector, k: &Kernel) {
    if let Some(q) = k.max_qubit().filter(|&q| q >= s.n) {
        panic!("{k} names qubit {q}, but the state has {} qubits", s.n);
    }
    match k {
        Kernel::One { q, m } => {
            if m[0][1] == C64::ZERO && m[1][0] == C64::ZERO {
                let bit = 1usize << q;
                let (d0, d1) = (m[0][0], m[1][1]);
                s.apply_diagonal(move |i| if i & bit == 0 { d0 } else { d1 });
            } else {
                s.apply_mat2(*q, m);
            }
        }
        Kernel::Controlled {
            controls,
            target,
            m,
        } => s.apply_controlled(controls, *target, m),
        Kernel::Swap { a, b } => {
            let x = [
                [C64::new(0.0, 0.0), C64::new(1.0, 0.0)],
                [C64::new(1.0, 0.0), C64::new(0.0, 0.0)],
            ];
            s.apply_controlled(&[*a], *b, &x);
            s.apply_controlled(&[*b], *a, &x);
            s.apply_controlled(&[*a], *b, &x);
        }
        Kernel::Ising { axis, terms } => {
            let qs = k.qubits();
            let terms = terms.clone();
            apply_ising(s, *axis, &qs, move |i| {
                let mut angle = 0.0;
                for &(a, b, w) in &terms {
                    let parity = ((i >> a) ^ (i >> b)) & 1;
                    angle -= if parity == 0 { w } else { -w };
                }
                C64::from_polar(1.0, angle)
            });
        }
        Kernel::Ms { theta, phi, qubits } => {
            let (w, wd) = z_to_sigma(*phi);
            s.apply_same_to_all(qubits, &wd);
            let mask = mask_of(qubits);
            let n = qubits.len() as f64;
            // Phases depend only on the population count: precompute them.
            let table: Vec<C64> = (0..=qubits.len())
                .map(|ones| {
                    let sz = n - 2.0 * ones as f64;
                    C64::from_polar(1.0, -theta / 4.0 * sz * sz)
                })
                .collect();
            s.apply_diagonal(move |i| table[(i & mask).count_ones() as usize]);
            s.apply_same_to_all(qubits, &w);
        }
        Kernel::Collective { m, qubits } => {
            if m[0][1] == C64::ZERO && m[1][0] == C64::ZERO {
                let mask = mask_of(qubits);
                let (d0, d1) = (m[0][0], m[1][1]);
                let ones: Vec<C64> = (0..=qubits.len())
                    .map(|k| d0.powi((qubits.len() - k) as i32) * d1.powi(k as i32))
                    .collect();
                s.apply_diagonal(move |i| ones[(i & mask).count_ones() as usize]);
            } else {
                s.apply_same_to_all(qubits, m);
            }
        }
        Kernel::Dense { qubits, m } => s.apply_dense(qubits, m),
    }
}

/// `exp(-i sum w P_a P_b)` with `P = sigma_axis` (Z without an axis), its diagonal
/// phases given per basis state.
fn apply_ising(
    s: &mut StateVector,
    axis: Option<f64>,
    qubits: &[usize],
    phase: impl Fn(usize) -> C64 + Sync,
) {
    if let Some(phi) = axis {
        let (_, wd) = z_to_sigma(phi);
        s.apply_same_to_all(qubits, &wd);
    }
    s.apply_diagonal(phase);
    if let Some(phi) = axis {
        let (w, _) = z_to_sigma(phi);
        s.apply_same_to_all(qubits, &w);
    }
}

/// Applies a list of kernels.
pub fn run_kernels<'a>(kernels: impl IntoIterator<Item = &'a Kernel>, s: &mut StateVector) {
    for k in kernels {
        apply_kernel(s, k);
    }
}

/// Most qubits one Ising kernel's phase table may span (2^16 phases, 1 MiB).
const TABLE_QUBITS: usize = 16;

/// A kernel list made ready to run many times (on the columns of a unitary): the
/// phases of each Ising kernel tabulated once over its own qubits, instead of a sine
/// and cosine per amplitude on every run.
pub struct Tabled<'a> {
    kernels: Vec<TabledKernel<'a>>,
}

enum TabledKernel<'a> {
    As(&'a Kernel),
    Ising {
        axis: Option<f64>,
        /// Sorted; bit `t` of a table index is the bit of `qubits[t]`.
        qubits: Vec<usize>,
        phases: Vec<C64>,
    },
}

impl<'a> Tabled<'a> {
    pub fn new(kernels: &'a [Kernel]) -> Tabled<'a> {
        let kernels = kernels
            .iter()
            .map(|k| match k {
                Kernel::Ising { axis, terms } if k.qubits().len() <= TABLE_QUBITS => {
                    let qubits = k.qubits();
                    let at = |q: usize| qubits.binary_search(&q).expect("a term's qubit");
                    let local: Vec<(usize, usize, f64)> =
                        terms.iter().map(|&(a, b, w)| (at(a), at(b), w)).collect();
                    let phases = (0..1usize << qubits.len())
                        .map(|i| {
                            let mut angle = 0.0;
                            for &(a, b, w) in &local {
                                let parity = ((i >> a) ^ (i >> b)) & 1;
                                angle -= if parity == 0 { w } else { -w };
                            }
                            C64::from_polar(1.0, angle)
                        })
                        .collect();
                    TabledKernel::Ising {
                        axis: *axis,
                        qubits,
                        phases,
                    }
                }
                other => TabledKernel::As(other),
            })
            .collect();
        Tabled { kernels }
    }

    /// Applies the kernels to `s`, as [`run_kernels`] does.
    pub fn run(&self, s: &mut StateVector) {
        for k in &self.kernels {
            match k {
                TabledKernel::As(k) => apply_kernel(s, k),
                TabledKernel::Ising {
                    axis,
                    qubits,
                    phases,
                } => {
                    if let Some(&q) = qubits.last().filter(|&&q| q >= s.n) {
                        panic!(
                            "an Ising kernel names qubit {q}, but the state has {} qubits",
                            s.n
                        );
                    }
                    // Qubits 0..k in order: the table index is the low bits.
                    let low = qubits.iter().enumerate().all(|(t, &q)| t == q);
                    let mask = (1usize << qubits.len()) - 1;
                    if low {
                        apply_ising(s, *axis, qubits, |i| phases[i & mask]);
                    } else {
                        apply_ising(s, *axis, qubits, |i| {
                            let mut index = 0;
                            for (t, &q) in qubits.iter().enumerate() {
                                index |= ((i >> q) & 1) << t;
                            }
                            phases[index]
                        });
                    }
                }
            }
        }
    }
}

/// The largest entry of `|b - e^{i a} a|`, the phase aligned on `a`'s largest entry:
/// how far apart two dense unitaries are up to global phase (for tests).
#[cfg(test)]
pub(crate) fn distance_up_to_phase(a: &DMatrix<C64>, b: &DMatrix<C64>) -> f64 {
    let (i, _) = a
        .iter()
        .enumerate()
        .max_by(|x, y| x.1.norm().total_cmp(&y.1.norm()))
        .expect("a nonempty matrix");
    let ph = b[i] / a[i];
    (a * ph - b).iter().fold(0.0f64, |m, z| m.max(z.norm()))
}

/// The full unitary of a list of kernels on `n` qubits (see [`unitary_into`]).
/// Cost `2^n` simulations; meant for `n` up to about 12.
pub fn unitary_of(kernels: &[Kernel], n: usize) -> DMatrix<C64> {
    let dim = 1usize << n;
    let mut out = vec![C64::ZERO; dim * dim];
    unitary_into(kernels, n, &mut out);
    DMatrix::from_vec(dim, dim, out)
}

/// Amplitudes of one state in [`unitary_into`]'s blocks of columns.
const BLOCK_AMPS: usize = 1 << 13;

/// The unitary of `kernels` on `n` qubits into `out`, column-major (entry `(i, j)`
/// at `j 2^n + i`). A block of `c` columns is simulated as one state on
/// `n + log2 c` qubits: its index is `(j - j0) 2^n + i`, so the high bits number the
/// column and start as the identity, and the kernels, which name only the low `n`
/// qubits, act on every column at once (one pass per kernel, not one per column).
/// Blocks run in parallel.
///
/// # Panics
/// When a kernel names a qubit at or above `n`, or `out` is not `4^n` long.
pub fn unitary_into(kernels: &[Kernel], n: usize, out: &mut [C64]) {
    let dim = 1usize << n;
    assert_eq!(out.len(), dim * dim, "a unitary on {n} qubits");
    if let Some(q) = kernels
        .iter()
        .filter_map(Kernel::max_qubit)
        .max()
        .filter(|&q| q >= n)
    {
        panic!("a kernel names qubit {q}, but the unitary has {n} qubits");
    }
    let tabled = Tabled::new(kernels);
    let per = (BLOCK_AMPS / dim).clamp(1, dim);
    let extra = per.trailing_zeros() as usize;
    out.par_chunks_mut(per * dim)
        .enumerate()
        .for_each(|(b, block)| {
            let mut s = StateVector {
                n: n + extra,
                amps: crate::sim::state::zeroed_amps(per * dim),
            };
            for c in 0..per {
                s.amps[c * dim + b * per + c] = C64::ONE;
            }
            tabled.run(&mut s);
            block.copy_from_slice(&s.amps);
        });
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::program::rotation;
    use rand::{Rng, SeedableRng};

    /// Tabulated Ising phases against the per-amplitude ones of [`run_kernels`], on
    /// random states and kernel lists: terms on qubits in any order, with and
    /// without an axis, mixed with single-qubit rotations.
    #[test]
    fn tabled_kernels_run_as_the_kernels_do() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let n = 6;
        for _ in 0..50 {
            let mut ks = Vec::new();
            for _ in 0..8 {
                if rng.gen_bool(0.5) {
                    let terms = (0..rng.gen_range(1..5))
                        .map(|_| {
                            let a = rng.gen_range(0..n);
                            let b = (a + rng.gen_range(1..n)) % n;
                            (a, b, rng.gen_range(-2.0..2.0))
                        })
                        .collect();
                    let axis = rng.gen_bool(0.5).then(|| rng.gen_range(-3.0..3.0));
                    ks.push(Kernel::Ising { axis, terms });
                } else {
                    ks.push(Kernel::One {
                        q: rng.gen_range(0..n),
                        m: rotation(rng.gen_range(-3.0..3.0), rng.gen_range(-3.0..3.0)),
                    });
                }
            }
            let start = StateVector::basis(n, rng.gen_range(0..1 << n));
            let (mut a, mut b) = (start.clone(), start);
            run_kernels(&ks, &mut a);
            Tabled::new(&ks).run(&mut b);
            let d = a
                .amps
                .iter()
                .zip(&b.amps)
                .fold(0.0f64, |m, (x, y)| m.max((x - y).norm()));
            assert!(d < 1e-12, "{d}");
        }
    }

    /// The unitary built in blocks of columns against one simulation per basis
    /// state with the untabled kernels, for 1 to 11 qubits (all columns in one
    /// block up to 6 qubits, then 2 blocks of 64 columns at 7 up to 512 blocks of
    /// 4 at 11), every kind of kernel.
    #[test]
    fn blocks_of_columns_are_the_columns() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(12);
        for n in 1..=11usize {
            let mut ks = Vec::new();
            for _ in 0..12 {
                let a = rng.gen_range(0..n);
                let b = (a + rng.gen_range(1..n.max(2))) % n;
                let m = rotation(rng.gen_range(-3.0..3.0), rng.gen_range(-3.0..3.0));
                ks.push(match rng.gen_range(0..5) {
                    0 => Kernel::One { q: a, m },
                    1 if n > 1 => Kernel::Controlled {
                        controls: vec![b],
                        target: a,
                        m,
                    },
                    2 if n > 1 => Kernel::Ising {
                        axis: rng.gen_bool(0.5).then(|| rng.gen_range(-3.0..3.0)),
                        terms: vec![(a, b, rng.gen_range(-2.0..2.0))],
                    },
                    3 => Kernel::Ms {
                        theta: rng.gen_range(-3.0..3.0),
                        phi: rng.gen_range(-3.0..3.0),
                        qubits: (0..n).collect(),
                    },
                    _ => Kernel::Collective {
                        m,
                        qubits: (0..n).filter(|_| rng.gen_bool(0.7)).collect(),
                    },
                });
            }
            let u = unitary_of(&ks, n);
            let columns = if n <= 8 { 1 << n } else { 16 };
            for j in 0..columns {
                let j = if n <= 8 { j } else { rng.gen_range(0..1 << n) };
                let mut s = StateVector::basis(n, j);
                run_kernels(&ks, &mut s);
                let d = (0..1usize << n)
                    .map(|i| (u[(i, j)] - s.amps[i]).norm())
                    .fold(0.0f64, f64::max);
                assert!(d < 1e-12, "n = {n}, column {j}: {d}");
            }
        }
    }
}
