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
            if m[0][1].norm() == 0.0 && m[1][0].norm() == 0.0 {
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
            if let Some(phi) = axis {
                let (_, wd) = z_to_sigma(*phi);
                s.apply_same_to_all(&qs, &wd);
            }
            let terms = terms.clone();
            s.apply_diagonal(move |i| {
                let mut angle = 0.0;
                for &(a, b, w) in &terms {
                    let parity = ((i >> a) ^ (i >> b)) & 1;
                    angle -= if parity == 0 { w } else { -w };
                }
                C64::from_polar(1.0, angle)
            });
            if let Some(phi) = axis {
                let (w, _) = z_to_sigma(*phi);
                s.apply_same_to_all(&qs, &w);
            }
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
            if m[0][1].norm() == 0.0 && m[1][0].norm() == 0.0 {
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

/// Applies a list of kernels.
pub fn run_kernels<'a>(kernels: impl IntoIterator<Item = &'a Kernel>, s: &mut StateVector) {
    for k in kernels {
        apply_kernel(s, k);
    }
}

/// The full unitary of a list of kernels on `n` qubits, column by column (columns in
/// parallel). Cost `2^n` simulations; meant for `n` up to about 12.
pub fn unitary_of(kernels: &[Kernel], n: usize) -> DMatrix<C64> {
    let dim = 1usize << n;
    let columns: Vec<Vec<C64>> = (0..dim)
        .into_par_iter()
        .map(|j| {
            let mut s = StateVector::basis(n, j);
            run_kernels(kernels, &mut s);
            s.amps
        })
        .collect();
    DMatrix::from_fn(dim, dim, |i, j| columns[j][i])
}
