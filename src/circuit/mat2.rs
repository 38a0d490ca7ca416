//! The one home of 2x2 complex-matrix algebra (products, adjoints, the identity),
//! on nalgebra's `Matrix2`. Single-qubit unitaries are stored as the plain arrays of
//! [`Mat2`] (row-major), which every part of the pipeline passes around; the algebra
//! converts to nalgebra and back, which the compiler reduces to the same arithmetic.

use nalgebra::Matrix2;
use num_complex::Complex64 as C64;

/// A 2x2 complex matrix, row-major.
pub type Mat2 = [[C64; 2]; 2];

/// The nalgebra matrix of `m`.
pub fn to_matrix(m: &Mat2) -> Matrix2<C64> {
    Matrix2::new(m[0][0], m[0][1], m[1][0], m[1][1])
}

/// The row-major array of `m`.
pub fn from_matrix(m: &Matrix2<C64>) -> Mat2 {
    [[m[(0, 0)], m[(0, 1)]], [m[(1, 0)], m[(1, 1)]]]
}

/// `a b` (as operators: `b` first, then `a`).
pub fn mul(a: &Mat2, b: &Mat2) -> Mat2 {
    from_matrix(&(to_matrix(a) * to_matrix(b)))
}

/// The conjugate transpose.
pub fn adjoint(a: &Mat2) -> Mat2 {
    from_matrix(&to_matrix(a).adjoint())
}

pub fn identity() -> Mat2 {
    from_matrix(&Matrix2::identity())
}

/// The Pauli operator along `axis`: Z without one, else
/// `sigma_phi = cos(phi) X + sin(phi) Y`.
pub fn pauli(axis: Option<f64>) -> Mat2 {
    match axis {
        None => [[C64::ONE, C64::ZERO], [C64::ZERO, -C64::ONE]],
        Some(phi) => {
            let (s, c) = phi.sin_cos();
            [[C64::ZERO, C64::new(c, -s)], [C64::new(c, s), C64::ZERO]]
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn products_and_adjoints_agree_with_the_definition() {
        let a: Mat2 = [
            [C64::new(0.3, -0.1), C64::new(0.2, 0.7)],
            [C64::new(-0.5, 0.4), C64::new(0.1, 0.9)],
        ];
        let b: Mat2 = [
            [C64::new(1.1, 0.2), C64::new(-0.4, 0.0)],
            [C64::new(0.0, -0.6), C64::new(0.8, 0.3)],
        ];
        let p = mul(&a, &b);
        for i in 0..2 {
            for j in 0..2 {
                let want = a[i][0] * b[0][j] + a[i][1] * b[1][j];
                assert!((p[i][j] - want).norm() < 1e-15);
                assert_eq!(adjoint(&a)[i][j], a[j][i].conj());
            }
        }
        assert_eq!(mul(&identity(), &a), a);
    }
}
