//! The vector kernels of the statevector passes: the real-arithmetic `Rx` butterfly
//! (on pairs, on adjacent amplitudes, and two levels at once), any 2x2 matrix (on
//! pairs, on pairs a few apart and on adjacent amplitudes) and scaling by diagonal
//! factors, each with an AVX2/FMA version chosen at run time and a scalar version
//! that computes the same values.
//!
//! Safety argument: every `unsafe fn` here is compiled with `target_feature(avx2,
//! fma)` and reads and writes through raw pointers. It is called only from the safe
//! wrapper beside it, which (1) checks at run time that the CPU has both features,
//! and (2) checks the slice lengths that the function's loop bounds rely on,
//! panicking otherwise. Inside, every pointer offset stays below the length of the
//! slice it came from; each `SAFETY` comment says why.
//!
//! One private module per kernel family, each stating its own safety argument:
//! `rx` (the butterflies), `mat2` (any 2x2) and `scale` (diagonal factors).
//!
//! [`set_vector_kernels`] switches the vector versions off (for tests that must
//! exercise the scalar ones on a machine with AVX2, and for comparisons).

mod mat2;
mod rx;
mod scale;

pub use mat2::{mat2_adjacent, mat2_butterfly, mat2_strided};
pub use rx::{rx4, rx_adjacent, rx_butterfly};
pub use scale::scale;
use std::sync::atomic::{AtomicBool, Ordering};

static SCALAR_ONLY: AtomicBool = AtomicBool::new(false);

/// Uses the vector kernels where the CPU has them (`true`, the default) or the
/// scalar ones everywhere (`false`). Both give the same amplitudes up to rounding.
pub fn set_vector_kernels(enabled: bool) {
    SCALAR_ONLY.store(!enabled, Ordering::Relaxed);
}

/// Whether the vector kernels run: enabled, and the CPU has AVX2 and FMA.
#[inline(always)]
pub fn vector_kernels() -> bool {
    if SCALAR_ONLY.load(Ordering::Relaxed) {
        return false;
    }
    #[cfg(target_arch = "x86_64")]
    {
        std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

#[cfg(test)]
mod tests {
    use super::mat2::*;
    use super::rx::*;
    use super::scale::*;
    use num_complex::Complex64 as C64;

    fn sample(n: usize, seed: f64) -> Vec<C64> {
        (0..n)
            .map(|k| {
                C64::new(
                    (k as f64 * 0.37 + seed).sin(),
                    (k as f64 * 0.91 - seed).cos(),
                )
            })
            .collect()
    }

    fn close(a: &[C64], b: &[C64]) -> bool {
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).norm() < 1e-14)
    }

    /// The vector kernels against the plain loops they replace (odd lengths too).
    #[cfg(target_arch = "x86_64")]
    #[test]
    fn vector_kernels_match_the_plain_loops() {
        if !(std::arch::is_x86_feature_detected!("avx2")
            && std::arch::is_x86_feature_detected!("fma"))
        {
            return;
        }
        let (c, s) = (0.3f64.cos(), 0.3f64.sin());
        for n in [1usize, 2, 7, 64] {
            let (mut lo, mut hi) = (sample(n, 0.1), sample(n, 0.7));
            let (mut lo2, mut hi2) = (lo.clone(), hi.clone());
            unsafe { rx_butterfly_avx2(&mut lo, &mut hi, c, s) };
            for (a, b) in lo2.iter_mut().zip(hi2.iter_mut()) {
                (*a, *b) = rx_pair(*a, *b, c, s);
            }
            assert!(close(&lo, &lo2) && close(&hi, &hi2));

            let mut t = sample(2 * n, 0.3);
            let mut t2 = t.clone();
            unsafe { rx_adjacent_avx2(&mut t, c, s) };
            for pair in t2.chunks_exact_mut(2) {
                (pair[0], pair[1]) = rx_pair(pair[0], pair[1], c, s);
            }
            assert!(close(&t, &t2));

            let (mut w, mut x, mut y, mut z) = (
                sample(n, 0.2),
                sample(n, 0.4),
                sample(n, 0.6),
                sample(n, 0.8),
            );
            let mut plain = [w.clone(), x.clone(), y.clone(), z.clone()];
            unsafe { rx4_avx2(&mut w, &mut x, &mut y, &mut z, c, s) };
            for i in 0..n {
                let (a, b) = rx_pair(plain[0][i], plain[1][i], c, s);
                let (cc, d) = rx_pair(plain[2][i], plain[3][i], c, s);
                (plain[0][i], plain[2][i]) = rx_pair(a, cc, c, s);
                (plain[1][i], plain[3][i]) = rx_pair(b, d, c, s);
            }
            for (fast, slow) in [&w, &x, &y, &z].into_iter().zip(&plain) {
                assert!(close(fast, slow));
            }

            let m = [
                [C64::new(0.3, -0.2), C64::new(-0.7, 0.4)],
                [C64::new(0.1, 0.9), C64::new(0.5, -0.6)],
            ];
            let apply = |a: C64, b: C64| (m[0][0] * a + m[0][1] * b, m[1][0] * a + m[1][1] * b);
            let (mut lo, mut hi) = (sample(n, 0.15), sample(n, 0.75));
            let (mut lo2, mut hi2) = (lo.clone(), hi.clone());
            unsafe { mat2_butterfly_avx2(&mut lo, &mut hi, &m) };
            for (a, b) in lo2.iter_mut().zip(hi2.iter_mut()) {
                (*a, *b) = apply(*a, *b);
            }
            assert!(close(&lo, &lo2) && close(&hi, &hi2));
            let mut t = sample(2 * n + 1, 0.35);
            let mut t2 = t.clone();
            unsafe { mat2_adjacent_avx2(&mut t, &m) };
            for pair in t2.chunks_exact_mut(2) {
                (pair[0], pair[1]) = apply(pair[0], pair[1]);
            }
            assert!(close(&t, &t2));
            for half in [1usize, 2, 4] {
                let mut t = sample(2 * half * n, 0.45);
                let mut t2 = t.clone();
                unsafe { mat2_strided_avx2(&mut t, half, &m) };
                for chunk in t2.chunks_exact_mut(2 * half) {
                    for i in 0..half {
                        (chunk[i], chunk[i + half]) = apply(chunk[i], chunk[i + half]);
                    }
                }
                assert!(close(&t, &t2), "half {half}");
            }

            let f = sample(n, 1.9);
            let (mut u, mut v) = (sample(n, 2.3), sample(n, 2.3));
            unsafe { scale_avx2(&mut u, &f) };
            v.iter_mut().zip(&f).for_each(|(a, g)| *a *= *g);
            assert!(close(&u, &v));
            let (mut u, mut v) = (sample(n, 2.3), sample(n, 2.3));
            unsafe { scale_avx2(&mut u, &f[..1]) };
            v.iter_mut().for_each(|a| *a *= f[0]);
            assert!(close(&u, &v));
        }
    }

    // Bug: a vector kernel read past a shorter slice of factors. The safe wrapper
    // now refuses such a call with a panic instead of reading out of bounds.
    #[test]
    fn the_safe_wrappers_refuse_short_slices() {
        let mut t = sample(8, 0.1);
        let short = sample(3, 0.2);
        assert!(std::panic::catch_unwind(move || scale(&mut t, &short)).is_err());
        let (mut lo, mut hi) = (sample(8, 0.1), sample(5, 0.2));
        assert!(
            std::panic::catch_unwind(move || rx_butterfly(&mut lo, &mut hi, 1.0, 0.0)).is_err()
        );
        let (mut w, mut x, mut y, mut z) = (
            sample(4, 0.1),
            sample(4, 0.2),
            sample(3, 0.3),
            sample(4, 0.4),
        );
        assert!(
            std::panic::catch_unwind(move || rx4(&mut w, &mut x, &mut y, &mut z, 1.0, 0.0))
                .is_err()
        );
    }
}
