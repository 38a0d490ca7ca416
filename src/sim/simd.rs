//! The vector kernels of the statevector passes: the real-arithmetic `Rx` butterfly
//! (on pairs, on adjacent amplitudes, and two levels at once) and scaling by
//! diagonal factors, each with an AVX2/FMA version chosen at run time and a scalar
//! version that computes the same values.
//!
//! Safety argument: every `unsafe fn` here is compiled with `target_feature(avx2,
//! fma)` and reads and writes through raw pointers. It is called only from the safe
//! wrapper beside it, which (1) checks at run time that the CPU has both features,
//! and (2) checks the slice lengths that the function's loop bounds rely on,
//! panicking otherwise. Inside, every pointer offset stays below the length of the
//! slice it came from; each `SAFETY` comment says why.
//!
//! [`set_vector_kernels`] switches the vector versions off (for tests that must
//! exercise the scalar ones on a machine with AVX2, and for comparisons).

use num_complex::Complex64 as C64;
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

/// `Rx` on the pair `(x, y)`, in real arithmetic: `Rx = [[c, -i s], [-i s, c]]`.
#[inline(always)]
pub fn rx_pair(x: C64, y: C64, c: f64, s: f64) -> (C64, C64) {
    (
        C64::new(c * x.re + s * y.im, c * x.im - s * y.re),
        C64::new(s * x.im + c * y.re, c * y.im - s * x.re),
    )
}

/// `Rx` on the pairs `(lo[k], hi[k])`. The slices must have the same length.
#[inline(always)]
pub fn rx_butterfly(lo: &mut [C64], hi: &mut [C64], c: f64, s: f64) {
    assert_eq!(lo.len(), hi.len(), "rx_butterfly: halves of unequal length");
    #[cfg(target_arch = "x86_64")]
    if vector_kernels() {
        // SAFETY: the CPU has the features; the lengths are equal (checked above).
        unsafe { rx_butterfly_avx2(lo, hi, c, s) };
        return;
    }
    for (a, b) in lo.iter_mut().zip(hi.iter_mut()) {
        (*a, *b) = rx_pair(*a, *b, c, s);
    }
}

/// [`rx_butterfly`] two pairs at a time in 256-bit registers: with `swap` exchanging
/// the real and imaginary parts, `a' = c a + (s, -s) swap(b)` and
/// `b' = c b + (s, -s) swap(a)`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn rx_butterfly_avx2(lo: &mut [C64], hi: &mut [C64], c: f64, s: f64) {
    use std::arch::x86_64::*;
    let n = lo.len().min(hi.len());
    let (pl, ph) = (lo.as_mut_ptr() as *mut f64, hi.as_mut_ptr() as *mut f64);
    let vc = _mm256_set1_pd(c);
    let vs = _mm256_setr_pd(s, -s, s, -s);
    for k in 0..n / 2 {
        // SAFETY: `4k + 3 < 2n` doubles lie inside each slice (C64 is two f64).
        let a = _mm256_loadu_pd(pl.add(4 * k));
        let b = _mm256_loadu_pd(ph.add(4 * k));
        let na = _mm256_fmadd_pd(vc, a, _mm256_mul_pd(vs, _mm256_permute_pd(b, 0b0101)));
        let nb = _mm256_fmadd_pd(vc, b, _mm256_mul_pd(vs, _mm256_permute_pd(a, 0b0101)));
        _mm256_storeu_pd(pl.add(4 * k), na);
        _mm256_storeu_pd(ph.add(4 * k), nb);
    }
    if n % 2 == 1 {
        (lo[n - 1], hi[n - 1]) = rx_pair(lo[n - 1], hi[n - 1], c, s);
    }
}

/// `Rx` on two qubits at once: on the pairs `(w, x)` and `(y, z)` (the lower qubit),
/// then `(w, y)` and `(x, z)` (the upper one). The four slices must have the same
/// length.
#[inline(always)]
pub fn rx4(w: &mut [C64], x: &mut [C64], y: &mut [C64], z: &mut [C64], c: f64, s: f64) {
    let n = w.len();
    assert!(
        x.len() == n && y.len() == n && z.len() == n,
        "rx4: quarters of unequal length"
    );
    #[cfg(target_arch = "x86_64")]
    if vector_kernels() {
        // SAFETY: the CPU has the features; the four lengths are equal (checked above).
        unsafe { rx4_avx2(w, x, y, z, c, s) };
        return;
    }
    for i in 0..n {
        let (a, b) = rx_pair(w[i], x[i], c, s);
        let (cc, d) = rx_pair(y[i], z[i], c, s);
        (w[i], y[i]) = rx_pair(a, cc, c, s);
        (x[i], z[i]) = rx_pair(b, d, c, s);
    }
}

/// [`rx4`] with two amplitudes per register.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn rx4_avx2(w: &mut [C64], x: &mut [C64], y: &mut [C64], z: &mut [C64], c: f64, s: f64) {
    use std::arch::x86_64::*;
    let n = w.len();
    let (pw, px, py, pz) = (
        w.as_mut_ptr() as *mut f64,
        x.as_mut_ptr() as *mut f64,
        y.as_mut_ptr() as *mut f64,
        z.as_mut_ptr() as *mut f64,
    );
    let vc = _mm256_set1_pd(c);
    let vs = _mm256_setr_pd(s, -s, s, -s);
    let rx = |a: __m256d, b: __m256d| -> (__m256d, __m256d) {
        (
            _mm256_fmadd_pd(vc, a, _mm256_mul_pd(vs, _mm256_permute_pd(b, 0b0101))),
            _mm256_fmadd_pd(vc, b, _mm256_mul_pd(vs, _mm256_permute_pd(a, 0b0101))),
        )
    };
    for k in 0..n / 2 {
        // SAFETY: the four slices have `n` amplitudes each (the caller checked),
        // `2k + 1 < n`.
        let (a, b) = rx(
            _mm256_loadu_pd(pw.add(4 * k)),
            _mm256_loadu_pd(px.add(4 * k)),
        );
        let (cc, d) = rx(
            _mm256_loadu_pd(py.add(4 * k)),
            _mm256_loadu_pd(pz.add(4 * k)),
        );
        let (a, cc) = rx(a, cc);
        let (b, d) = rx(b, d);
        _mm256_storeu_pd(pw.add(4 * k), a);
        _mm256_storeu_pd(px.add(4 * k), b);
        _mm256_storeu_pd(py.add(4 * k), cc);
        _mm256_storeu_pd(pz.add(4 * k), d);
    }
    if n % 2 == 1 {
        let i = n - 1;
        let (a, b) = rx_pair(w[i], x[i], c, s);
        let (cc, d) = rx_pair(y[i], z[i], c, s);
        (w[i], y[i]) = rx_pair(a, cc, c, s);
        (x[i], z[i]) = rx_pair(b, d, c, s);
    }
}

/// `Rx` on qubit 0 of `t`: the pairs are adjacent amplitudes (a trailing odd
/// amplitude is left alone).
pub fn rx_adjacent(t: &mut [C64], c: f64, s: f64) {
    #[cfg(target_arch = "x86_64")]
    if vector_kernels() {
        // SAFETY: the CPU has the features; the function stays inside `t`.
        unsafe { rx_adjacent_avx2(t, c, s) };
        return;
    }
    for pair in t.chunks_exact_mut(2) {
        (pair[0], pair[1]) = rx_pair(pair[0], pair[1], c, s);
    }
}

/// [`rx_adjacent`] with one pair per 256-bit register `[x, y]`: the new value is
/// `c [x, y] + (s, -s, s, -s) swap([y, x])`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn rx_adjacent_avx2(t: &mut [C64], c: f64, s: f64) {
    use std::arch::x86_64::*;
    let p = t.as_mut_ptr() as *mut f64;
    let vc = _mm256_set1_pd(c);
    let vs = _mm256_setr_pd(s, -s, s, -s);
    for k in 0..t.len() / 2 {
        // SAFETY: pair `k` is the doubles `4k .. 4k + 4`, inside the slice.
        let v = _mm256_loadu_pd(p.add(4 * k));
        let crossed = _mm256_permute_pd(_mm256_permute2f128_pd(v, v, 1), 0b0101);
        _mm256_storeu_pd(
            p.add(4 * k),
            _mm256_fmadd_pd(vc, v, _mm256_mul_pd(vs, crossed)),
        );
    }
}

/// Multiplies `t[k]` by `f[k]`, or by `f[0]` for all `k` when `f` has one entry.
/// Otherwise `f` must be at least as long as `t`.
pub fn scale(t: &mut [C64], f: &[C64]) {
    assert!(
        f.len() == 1 || f.len() >= t.len(),
        "scale: {} factors for {} amplitudes",
        f.len(),
        t.len()
    );
    #[cfg(target_arch = "x86_64")]
    if vector_kernels() {
        // SAFETY: the CPU has the features; `f` has one entry or covers `t` (checked
        // above).
        unsafe { scale_avx2(t, f) };
        return;
    }
    if f.len() == 1 {
        t.iter_mut().for_each(|a| *a *= f[0]);
    } else {
        t.iter_mut().zip(f).for_each(|(a, g)| *a *= *g);
    }
}

/// [`scale`] two amplitudes per register: `a f = fmaddsub(a, re(f), swap(a) im(f))`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn scale_avx2(t: &mut [C64], f: &[C64]) {
    use std::arch::x86_64::*;
    let n = t.len();
    let p = t.as_mut_ptr() as *mut f64;
    let q = f.as_ptr() as *const f64;
    let one = f.len() == 1;
    let (fre1, fim1) = (_mm256_set1_pd(f[0].re), _mm256_set1_pd(f[0].im));
    for k in 0..n / 2 {
        // SAFETY: amplitudes `2k, 2k + 1` are inside `t`, and inside `f` unless `f` has
        // one entry (the caller checked that `f` covers `t` otherwise).
        let a = _mm256_loadu_pd(p.add(4 * k));
        let (fre, fim) = if one {
            (fre1, fim1)
        } else {
            let g = _mm256_loadu_pd(q.add(4 * k));
            (_mm256_movedup_pd(g), _mm256_permute_pd(g, 0b1111))
        };
        let r = _mm256_fmaddsub_pd(a, fre, _mm256_mul_pd(_mm256_permute_pd(a, 0b0101), fim));
        _mm256_storeu_pd(p.add(4 * k), r);
    }
    if n % 2 == 1 {
        t[n - 1] *= if one { f[0] } else { f[n - 1] };
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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
