//! Any 2x2 matrix on pairs of amplitudes: `(a, b) -> (m00 a + m01 b, m10 a + m11 b)`,
//! on two slices of pairs, on every chunk of a block (pairs `half` apart) and on
//! adjacent amplitudes (qubit 0).
//!
//! Safety argument: each `unsafe fn` here is compiled with `target_feature(avx2,
//! fma)` and is called only from the safe wrapper above it, which first checks
//! [`super::vector_kernels`] (the CPU has both features) and asserts the equal slice
//! lengths the pair kernel relies on. Inside, every pointer offset is below `2 * len`
//! doubles of the slice it came from: each loop runs over whole registers of two
//! amplitudes and leaves the remainder to scalar code; each `SAFETY` comment gives
//! the bound.

use super::vector_kernels;
use crate::circuit::Mat2;
use num_complex::Complex64 as C64;

/// The matrix on one pair.
#[inline(always)]
fn pair(a: C64, b: C64, m: &Mat2) -> (C64, C64) {
    (m[0][0] * a + m[0][1] * b, m[1][0] * a + m[1][1] * b)
}

/// `m` on the pairs `(lo[k], hi[k])`. The slices must have the same length.
#[inline(always)]
pub fn mat2_butterfly(lo: &mut [C64], hi: &mut [C64], m: &Mat2) {
    assert_eq!(
        lo.len(),
        hi.len(),
        "mat2_butterfly: halves of unequal length"
    );
    #[cfg(target_arch = "x86_64")]
    if vector_kernels() {
        // SAFETY: the CPU has the features; the lengths are equal (checked above).
        unsafe { mat2_butterfly_avx2(lo, hi, m) };
        return;
    }
    for (a, b) in lo.iter_mut().zip(hi.iter_mut()) {
        (*a, *b) = pair(*a, *b, m);
    }
}

/// A complex factor `z` in a 256-bit register pair: `z v = re * v + im_signed *
/// swap(v)`, with `swap` exchanging each amplitude's real and imaginary parts.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn factor(z0: C64, z1: C64) -> (std::arch::x86_64::__m256d, std::arch::x86_64::__m256d) {
    use std::arch::x86_64::*;
    (
        _mm256_setr_pd(z0.re, z0.re, z1.re, z1.re),
        _mm256_setr_pd(-z0.im, z0.im, -z1.im, z1.im),
    )
}

/// The matrix's four entries as register factors (see [`factor`]).
#[cfg(target_arch = "x86_64")]
type Factors = [(std::arch::x86_64::__m256d, std::arch::x86_64::__m256d); 4];

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn factors(m: &Mat2) -> Factors {
    [
        factor(m[0][0], m[0][0]),
        factor(m[0][1], m[0][1]),
        factor(m[1][0], m[1][0]),
        factor(m[1][1], m[1][1]),
    ]
}

/// Two pairs, `lo[2k..2k + 2]` and `hi[2k..2k + 2]`, through the matrix.
///
/// # Safety
/// The CPU has AVX2 and FMA; `pl` and `ph` point to at least `4k + 4` doubles.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
#[inline]
unsafe fn two_pairs(pl: *mut f64, ph: *mut f64, k: usize, f: &Factors) {
    use std::arch::x86_64::*;
    let [(r00, i00), (r01, i01), (r10, i10), (r11, i11)] = *f;
    let a = _mm256_loadu_pd(pl.add(4 * k));
    let b = _mm256_loadu_pd(ph.add(4 * k));
    let (sa, sb) = (_mm256_permute_pd(a, 0b0101), _mm256_permute_pd(b, 0b0101));
    let na = _mm256_fmadd_pd(
        r00,
        a,
        _mm256_fmadd_pd(i00, sa, _mm256_fmadd_pd(r01, b, _mm256_mul_pd(i01, sb))),
    );
    let nb = _mm256_fmadd_pd(
        r10,
        a,
        _mm256_fmadd_pd(i10, sa, _mm256_fmadd_pd(r11, b, _mm256_mul_pd(i11, sb))),
    );
    _mm256_storeu_pd(pl.add(4 * k), na);
    _mm256_storeu_pd(ph.add(4 * k), nb);
}

/// [`mat2_butterfly`] two pairs at a time: `a' = m00 a + m01 b`, `b' = m10 a + m11 b`
/// with each complex product as `re * v + (-im, im) * swap(v)`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
pub(super) unsafe fn mat2_butterfly_avx2(lo: &mut [C64], hi: &mut [C64], m: &Mat2) {
    let n = lo.len().min(hi.len());
    let (pl, ph) = (lo.as_mut_ptr() as *mut f64, hi.as_mut_ptr() as *mut f64);
    let f = factors(m);
    for k in 0..n / 2 {
        // SAFETY: `4k + 3 < 2n` doubles lie inside each slice (C64 is two f64).
        two_pairs(pl, ph, k, &f);
    }
    if n % 2 == 1 {
        (lo[n - 1], hi[n - 1]) = pair(lo[n - 1], hi[n - 1], m);
    }
}

/// `m` on the qubit whose pairs lie `half` apart, over a block whose length is a
/// multiple of `2 half`: every chunk of `2 half` amplitudes is one butterfly. The
/// feature check and the factors are made once for the block, not once per chunk
/// (for the low qubits a chunk is only a few amplitudes).
pub fn mat2_strided(block: &mut [C64], half: usize, m: &Mat2) {
    assert!(
        half > 0 && block.len() % (2 * half) == 0,
        "mat2_strided: a block of whole chunks"
    );
    #[cfg(target_arch = "x86_64")]
    if vector_kernels() {
        // SAFETY: the CPU has the features; every chunk is whole (checked above).
        unsafe { mat2_strided_avx2(block, half, m) };
        return;
    }
    for chunk in block.chunks_exact_mut(2 * half) {
        let (lo, hi) = chunk.split_at_mut(half);
        for (a, b) in lo.iter_mut().zip(hi.iter_mut()) {
            (*a, *b) = pair(*a, *b, m);
        }
    }
}

/// [`mat2_strided`] with the factors made once.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
pub(super) unsafe fn mat2_strided_avx2(block: &mut [C64], half: usize, m: &Mat2) {
    let f = factors(m);
    for chunk in block.chunks_exact_mut(2 * half) {
        let (lo, hi) = chunk.split_at_mut(half);
        let (pl, ph) = (lo.as_mut_ptr() as *mut f64, hi.as_mut_ptr() as *mut f64);
        for k in 0..half / 2 {
            // SAFETY: `4k + 3 < 2 half` doubles lie inside each half.
            two_pairs(pl, ph, k, &f);
        }
        if half % 2 == 1 {
            (lo[half - 1], hi[half - 1]) = pair(lo[half - 1], hi[half - 1], m);
        }
    }
}

/// `m` on qubit 0 of `t`: the pairs are adjacent amplitudes (a trailing odd
/// amplitude is left alone).
pub fn mat2_adjacent(t: &mut [C64], m: &Mat2) {
    #[cfg(target_arch = "x86_64")]
    if vector_kernels() {
        // SAFETY: the CPU has the features; the function stays inside `t`.
        unsafe { mat2_adjacent_avx2(t, m) };
        return;
    }
    for p in t.chunks_exact_mut(2) {
        (p[0], p[1]) = pair(p[0], p[1], m);
    }
}

/// [`mat2_adjacent`] with one pair per register `v = [a, b]`: the new value is
/// `[m00, m11] v + [m01, m10] [b, a]`, lane by lane.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
pub(super) unsafe fn mat2_adjacent_avx2(t: &mut [C64], m: &Mat2) {
    use std::arch::x86_64::*;
    let p = t.as_mut_ptr() as *mut f64;
    let (rd, id) = factor(m[0][0], m[1][1]);
    let (ro, io) = factor(m[0][1], m[1][0]);
    for k in 0..t.len() / 2 {
        // SAFETY: pair `k` is the doubles `4k .. 4k + 4`, inside the slice.
        let v = _mm256_loadu_pd(p.add(4 * k));
        let crossed = _mm256_permute2f128_pd(v, v, 1);
        let out = _mm256_fmadd_pd(
            rd,
            v,
            _mm256_fmadd_pd(
                id,
                _mm256_permute_pd(v, 0b0101),
                _mm256_fmadd_pd(
                    ro,
                    crossed,
                    _mm256_mul_pd(io, _mm256_permute_pd(crossed, 0b0101)),
                ),
            ),
        );
        _mm256_storeu_pd(p.add(4 * k), out);
    }
}
