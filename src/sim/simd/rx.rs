//! The `Rx` family: the real-arithmetic butterfly on pairs of amplitudes, on two
//! qubits at once, and on adjacent amplitudes (qubit 0).
//!
//! Safety argument: each `unsafe fn` here is compiled with `target_feature(avx2,
//! fma)` and is called only from the safe wrapper above it, which first checks
//! [`super::vector_kernels`] (the CPU has both features) and asserts the slice
//! lengths its loops rely on (equal lengths for the pair and four-slice kernels).
//! Inside, every pointer offset is below `2 * len` doubles of the slice it came
//! from: each loop runs over whole registers of two amplitudes and leaves the
//! remainder to scalar code; each `SAFETY` comment gives the bound.

use super::vector_kernels;
use num_complex::Complex64 as C64;

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
pub(super) unsafe fn rx_butterfly_avx2(lo: &mut [C64], hi: &mut [C64], c: f64, s: f64) {
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
pub(super) unsafe fn rx4_avx2(
    w: &mut [C64],
    x: &mut [C64],
    y: &mut [C64],
    z: &mut [C64],
    c: f64,
    s: f64,
) {
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
pub(super) unsafe fn rx_adjacent_avx2(t: &mut [C64], c: f64, s: f64) {
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
