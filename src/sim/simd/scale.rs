//! The scaling family: amplitudes multiplied by diagonal factors (one factor for
//! all, or one per amplitude).
//!
//! Safety argument: the `unsafe fn` here is compiled with `target_feature(avx2,
//! fma)` and is called only from [`scale`], which first checks
//! [`super::vector_kernels`] and asserts that the factors have one entry or cover
//! the amplitudes. Its loop reads and writes two amplitudes per register, at
//! offsets below the checked length; the odd remainder is scalar code.

use super::vector_kernels;
use num_complex::Complex64 as C64;

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
pub(super) unsafe fn scale_avx2(t: &mut [C64], f: &[C64]) {
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
