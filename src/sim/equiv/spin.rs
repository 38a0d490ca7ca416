//! Whole-chain programs compared through the collective spin.
//!
//! When every operation of both programs acts the same way on every qubit of the
//! register (collective rotations and frame changes, the same 2x2 on each qubit;
//! global MS pulses on all of them), both unitaries are functions of the collective
//! spin `J = S/2`. The register splits into irreducible spaces of total spin `j`
//! (`j = n/2, n/2 - 1, ...`), on each of which `J` acts as the spin-`j`
//! matrices, so each unitary is `sum_j U_j (x) I` with `U_j` of dimension `2j + 1`
//! (at most 41 for 40 ions, against `2^40`). Then
//! `min_c ||B - cA|| = min_c max_j ||B_j - c A_j|| = 2 sin(D/4)`, `D` the shortest
//! arc of the unit circle holding every eigenvalue of every `A_j^dagger B_j`: an
//! exact distance (operator norm), decided both ways. (Standard angular-momentum
//! algebra; the reduction is derived for this project.)
//!
//! Each operation becomes `exp(-i H)` in each space: a rotation `m = e^{i a} exp(-i t/2
//! n.sigma)` is `e^{i n a} exp(-i t n.J)` (the sign of `m`'s square root is the same
//! phase `(-1)^n` in every space), an MS pulse `exp(-i theta J_phi^2)`. The
//! exponentials come from Hermitian eigendecompositions, the eigenvalues of the
//! products from a Schur decomposition with a bounded number of iterations (none:
//! no verdict). Their rounding is allowed for in the tolerance: 64 units of f64
//! rounding times the norm of each exponent times the dimension.

use crate::circuit::Mat2;
use crate::sim::program::Kernel;
use nalgebra::DMatrix;
use num_complex::Complex64 as C64;

/// The outcome: the exact distance, and the rounding allowance to add to the
/// tolerance.
pub(super) struct SpinDistance {
    pub distance: f64,
    pub rounding: f64,
}

/// Below this a subdiagonal entry of the Schur iteration counts as zero.
const SCHUR_EPS: f64 = 1e-14;

/// Most operations compared this way (each costs one eigendecomposition per spin
/// space).
const MAX_KERNELS: usize = 20_000;

/// Whether a kernel acts the same way on all `n` qubits.
fn whole_chain(k: &Kernel, n: usize) -> bool {
    let all = |qs: &[usize]| qs.len() == n && qs.iter().enumerate().all(|(i, &q)| i == q);
    match k {
        Kernel::Collective { qubits, .. } | Kernel::Ms { qubits, .. } => all(qubits),
        _ => false,
    }
}

/// The spin-`j` matrices `J_x, J_y, J_z` in the basis `m = j, j - 1, ..., -j`.
fn spin_matrices(twice_j: usize) -> [DMatrix<C64>; 3] {
    let d = twice_j + 1;
    let j = twice_j as f64 / 2.0;
    let m = |k: usize| j - k as f64;
    let mut jx = DMatrix::zeros(d, d);
    let mut jy = DMatrix::zeros(d, d);
    let mut jz = DMatrix::zeros(d, d);
    for k in 0..d {
        jz[(k, k)] = C64::new(m(k), 0.0);
        if k + 1 < d {
            // J+ |j, m(k+1)> = sqrt(j(j+1) - m(k+1) m(k)) |j, m(k)>.
            let c = (j * (j + 1.0) - m(k + 1) * m(k)).sqrt();
            jx[(k, k + 1)] = C64::new(c / 2.0, 0.0);
            jx[(k + 1, k)] = C64::new(c / 2.0, 0.0);
            jy[(k, k + 1)] = C64::new(0.0, -c / 2.0);
            jy[(k + 1, k)] = C64::new(0.0, c / 2.0);
        }
    }
    [jx, jy, jz]
}

/// `exp(-i H)` for Hermitian `H`, and the largest |eigenvalue| (for the rounding).
fn expm_hermitian(h: DMatrix<C64>) -> (DMatrix<C64>, f64) {
    let eig = h.symmetric_eigen();
    let v = &eig.eigenvectors;
    let d = DMatrix::from_diagonal(&eig.eigenvalues.map(|x| C64::from_polar(1.0, -x)));
    let norm = eig.eigenvalues.iter().fold(0.0f64, |a, x| a.max(x.abs()));
    (v * d * v.adjoint(), norm)
}

/// The rotation of a 2x2 unitary: `m = e^{i a} exp(-i t/2 n.sigma)`, returned as
/// `(a, t n)`.
fn rotation_of(m: &Mat2) -> (f64, [f64; 3]) {
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    let a = det.arg() / 2.0;
    let u = C64::from_polar(1.0, -a);
    let s = [[m[0][0] * u, m[0][1] * u], [m[1][0] * u, m[1][1] * u]];
    // s = cos(t/2) I - i sin(t/2) (nx X + ny Y + nz Z).
    let c = ((s[0][0] + s[1][1]) / 2.0).re;
    let nz = -((s[0][0] - s[1][1]) / 2.0).im;
    let nx = -((s[0][1] + s[1][0]) / 2.0).im;
    let ny = -((s[0][1] - s[1][0]) / 2.0).re;
    let sin = (nx * nx + ny * ny + nz * nz).sqrt();
    let t = 2.0 * sin.atan2(c);
    if sin == 0.0 {
        return (a, [0.0, 0.0, 0.0]);
    }
    (a, [t * nx / sin, t * ny / sin, t * nz / sin])
}

/// The unitary of `ks` in the spin space of `2j + 1` dimensions, with the sum of
/// the exponents' norms.
fn in_space(ks: &[Kernel], n: usize, j: &[DMatrix<C64>; 3]) -> (DMatrix<C64>, f64) {
    let d = j[0].nrows();
    let mut u = DMatrix::<C64>::identity(d, d);
    let mut norms = 0.0;
    for k in ks {
        let (e, norm) = match k {
            Kernel::Collective { m, .. } => {
                let (a, v) = rotation_of(m);
                let h = &j[0] * C64::new(v[0], 0.0)
                    + &j[1] * C64::new(v[1], 0.0)
                    + &j[2] * C64::new(v[2], 0.0);
                let (e, norm) = expm_hermitian(h);
                (e * C64::from_polar(1.0, n as f64 * a), norm)
            }
            Kernel::Ms { theta, phi, .. } => {
                let jp = &j[0] * C64::new(phi.cos(), 0.0) + &j[1] * C64::new(phi.sin(), 0.0);
                expm_hermitian(&jp * &jp * C64::new(*theta, 0.0))
            }
            _ => unreachable!("only whole-chain kernels reach here"),
        };
        u = e * u;
        norms += norm;
    }
    (u, norms)
}

/// The exact phase-invariant distance of two whole-chain programs on `n` qubits, or
/// `None` where this does not apply (another kind of operation, too many, or an
/// eigenvalue computation that did not converge).
pub(super) fn whole_chain_distance(p: &[Kernel], q: &[Kernel], n: usize) -> Option<SpinDistance> {
    if n < 2 || p.len() + q.len() > MAX_KERNELS || !p.iter().chain(q).all(|k| whole_chain(k, n)) {
        return None;
    }
    let mut phases = Vec::new();
    let mut rounding: f64 = 0.0;
    let mut twice_j = n;
    loop {
        let j = spin_matrices(twice_j);
        let dim = (twice_j + 1) as f64;
        let (a, na) = in_space(p, n, &j);
        let (b, nb) = in_space(q, n, &j);
        let w = a.adjoint() * b;
        // Nearly a multiple of the identity (the usual case for equal programs,
        // where the Schur iteration may not converge): every eigenvalue lies within
        // ||W - cI|| of c, which goes into the rounding.
        let tr = w.trace();
        let c = if tr.norm() > 0.0 {
            tr / tr.norm()
        } else {
            C64::new(1.0, 0.0)
        };
        let off = (&w - DMatrix::<C64>::identity(w.nrows(), w.nrows()) * c).norm();
        let eigen_error = if off <= 1e-9 {
            phases.push(c.arg());
            off
        } else {
            let schur = nalgebra::linalg::Schur::try_new(w, SCHUR_EPS, 100_000)?;
            let (_, t) = schur.unpack();
            phases.extend((0..t.nrows()).map(|i| t[(i, i)].arg()));
            // What the iteration leaves below its threshold: an eigenvalue of a
            // normal matrix moves at most by the norm of what is dropped.
            SCHUR_EPS * dim * dim
        };
        // And the exponentials' rounding.
        rounding =
            rounding.max(super::modes::ROUNDING_PER_TOUCH * dim * (na + nb + 1.0) + eigen_error);
        if twice_j < 2 {
            break;
        }
        twice_j -= 2;
    }
    let tau = std::f64::consts::TAU;
    let mut ph: Vec<f64> = phases.iter().map(|x| x.rem_euclid(tau)).collect();
    ph.sort_by(f64::total_cmp);
    let mut gap = ph[0] + tau - ph[ph.len() - 1];
    for w in ph.windows(2) {
        gap = gap.max(w[1] - w[0]);
    }
    Some(SpinDistance {
        distance: 2.0 * ((tau - gap) / 4.0).sin().max(0.0),
        rounding,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::apply::unitary_of;

    /// Against dense unitaries on 5 qubits: the spin distance equals the
    /// phase-invariant operator-norm distance of the full matrices.
    #[test]
    fn the_spin_distance_matches_dense_unitaries() {
        use rand::{Rng, SeedableRng};
        let n = 5;
        let all: Vec<usize> = (0..n).collect();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(41);
        let random = |rng: &mut rand_chacha::ChaCha8Rng| -> Vec<Kernel> {
            (0..6)
                .map(|_| {
                    if rng.gen_bool(0.5) {
                        Kernel::Ms {
                            theta: rng.gen_range(-2.0..2.0),
                            phi: rng.gen_range(-3.0..3.0),
                            qubits: all.clone(),
                        }
                    } else if rng.gen_bool(0.5) {
                        Kernel::Collective {
                            m: crate::native::rotation(
                                rng.gen_range(-3.0..3.0),
                                rng.gen_range(-3.0..3.0),
                            ),
                            qubits: all.clone(),
                        }
                    } else {
                        Kernel::Collective {
                            m: crate::native::z_rotation(rng.gen_range(-3.0..3.0)),
                            qubits: all.clone(),
                        }
                    }
                })
                .collect()
        };
        for round in 0..30 {
            let p = random(&mut rng);
            let mut q = if round % 3 == 0 {
                p.clone()
            } else {
                random(&mut rng)
            };
            if round % 3 == 1 {
                // A near miss: one frame change of 1e-6 more.
                q = p.clone();
                q.insert(
                    3,
                    Kernel::Collective {
                        m: crate::native::z_rotation(1e-6),
                        qubits: all.clone(),
                    },
                );
            }
            let got = whole_chain_distance(&p, &q, n).expect("converges");
            let w = unitary_of(&p, n).adjoint() * unitary_of(&q, n);
            let dense = dense_distance(&w);
            assert!(
                (got.distance - dense).abs() <= 1e-9,
                "round {round}: spin {} dense {dense}",
                got.distance
            );
            if round % 3 == 0 {
                assert!(got.distance <= got.rounding.max(1e-13), "{}", got.distance);
            }
            if round % 3 == 1 {
                assert!(got.distance > 1e-7, "near miss: {}", got.distance);
            }
        }
    }

    /// `2 sin(D/4)` from the eigenphases of a dense unitary (nalgebra's complex
    /// Schur decomposition, a general-purpose reference).
    fn dense_distance(w: &DMatrix<C64>) -> f64 {
        let schur = nalgebra::linalg::Schur::try_new(w.clone(), 1e-14, 1_000_000)
            .expect("the Schur iteration converges");
        let (_, t) = schur.unpack();
        let tau = std::f64::consts::TAU;
        let mut ph: Vec<f64> = (0..t.nrows())
            .map(|i| t[(i, i)].arg().rem_euclid(tau))
            .collect();
        ph.sort_by(f64::total_cmp);
        let mut gap = ph[0] + tau - ph[ph.len() - 1];
        for x in ph.windows(2) {
            gap = gap.max(x[1] - x[0]);
        }
        2.0 * ((tau - gap) / 4.0).sin()
    }
}
