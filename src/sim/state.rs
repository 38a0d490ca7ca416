//! Statevector kernels. Amplitudes are complex f64; qubit 0 is the least significant
//! bit of the basis index.
//!
//! Every kernel makes one pass over memory per call, except
//! [`StateVector::apply_same_to_all`], which applies one 2x2 to many qubits in
//! `1 + ceil(high / GROUP)` passes: all qubits below [`TILE_BITS`] in one pass over
//! cache-sized tiles, then the others [`GROUP`] at a time. Large states run in
//! parallel with rayon.

use super::simd::{self, scale};
use crate::circuit::Mat2;
use num_complex::Complex64 as C64;
use rayon::prelude::*;

/// Qubits below this index are handled inside tiles of `2^TILE_BITS` amplitudes.
pub const TILE_BITS: usize = 14;
/// High qubits handled together in one pass of a collective operation.
pub const GROUP: usize = 6;
/// States at least this long run in parallel.
const PAR_LEN: usize = 1 << 14;
/// Work unit of a parallel pass, in amplitudes.
const CHUNK: usize = 1 << 12;
/// Halves at least this many amplitudes apart are processed through a local buffer.
const STAGE_DISTANCE: usize = 1 << 24;
/// Length of the contiguous runs that a high-qubit pass works on.
const ROW: usize = 1 << 8;

/// A pure state of `n` qubits.
#[derive(Debug, Clone, PartialEq)]
pub struct StateVector {
    pub n: usize,
    pub amps: Vec<C64>,
}

/// A zeroed amplitude vector. Large ones ask the kernel for transparent huge pages
/// before the first touch: passes over states of a GiB otherwise spend much of their
/// time on page-table walks for 4 KiB pages.
pub fn zeroed_amps(len: usize) -> Vec<C64> {
    let mut v: Vec<C64> = Vec::with_capacity(len);
    crate::memory::advise_huge_pages(&mut v);
    v.resize(len, C64::new(0.0, 0.0));
    v
}

/// [`zeroed_amps`] that reports a failed allocation instead of aborting.
pub fn try_zeroed_amps(len: usize) -> Result<Vec<C64>, std::collections::TryReserveError> {
    let mut v: Vec<C64> = Vec::new();
    v.try_reserve_exact(len)?;
    crate::memory::advise_huge_pages(&mut v);
    v.resize(len, C64::new(0.0, 0.0));
    Ok(v)
}

#[derive(Clone, Copy)]
struct SharedPtr(*mut C64);
// SAFETY: the passes that use it write disjoint index sets from different threads.
unsafe impl Send for SharedPtr {}
unsafe impl Sync for SharedPtr {}

/// Applies `m` to qubit `q` of a block whose length is a multiple of `2^(q+1)`.
fn mat2_serial(block: &mut [C64], q: usize, m: &Mat2) {
    if q == 0 {
        simd::mat2_adjacent(block, m);
        return;
    }
    simd::mat2_strided(block, 1usize << q, m);
}

/// The diagonal tables of one set of a collective rotation, indexed by the
/// population count of `index & mask`.
struct Diagonals {
    pre: Option<Vec<C64>>,
    /// `cos(x/2)` and `sin(x/2)` of the `Rx(x)` applied to every qubit of the set.
    rx: (f64, f64),
    post: Option<Vec<C64>>,
    mask: usize,
}

/// `Rx` on the qubits `low` (ascending) of a tile. Qubit 0 alone, then two qubits per
/// sweep where the vector kernels run (the four amplitudes of each 4-point stay in
/// registers, so the tile is read from cache half as often), else one per sweep.
fn rx_levels(t: &mut [C64], low: &[usize], c: f64, s: f64) {
    let mut rest = low;
    if rest.first() == Some(&0) {
        simd::rx_adjacent(t, c, s);
        rest = &rest[1..];
    }
    if simd::vector_kernels() {
        for pair in rest.chunks(2) {
            if let [qa, qb] = *pair {
                let (ha, hb) = (1usize << qa, 1usize << qb);
                for block in t.chunks_exact_mut(2 * hb) {
                    let (lo, hi) = block.split_at_mut(hb);
                    for (l, h) in lo.chunks_exact_mut(2 * ha).zip(hi.chunks_exact_mut(2 * ha)) {
                        let (w, x) = l.split_at_mut(ha);
                        let (y, z) = h.split_at_mut(ha);
                        simd::rx4(w, x, y, z, c, s);
                    }
                }
            } else {
                rx_single_level(t, pair[0], c, s);
            }
        }
        return;
    }
    for &q in rest {
        rx_single_level(t, q, c, s);
    }
}

fn rx_single_level(t: &mut [C64], q: usize, c: f64, s: f64) {
    let half = 1usize << q;
    for block in t.chunks_exact_mut(2 * half) {
        let (lo, hi) = block.split_at_mut(half);
        simd::rx_butterfly(lo, hi, c, s);
    }
}

/// Euler angles `m = e^{i a} Rz(z1) Rx(x) Rz(z0)`, returned as `(a, z1, x, z0)`,
/// from the ZYZ angles and `Ry(g) = Rz(pi/2) Rx(g) Rz(-pi/2)`.
fn zxz(m: &Mat2) -> (f64, f64, f64, f64) {
    let (alpha, beta, gamma, delta) = crate::circuit::gates::zyz(m);
    let half_pi = std::f64::consts::FRAC_PI_2;
    (alpha, beta + half_pi, gamma, delta - half_pi)
}

/// Inserts a zero bit at each position of `sorted` (ascending) into `c`.
#[inline(always)]
fn insert_zeros(mut c: usize, sorted: &[usize]) -> usize {
    for &b in sorted {
        let low = c & ((1usize << b) - 1);
        c = ((c >> b) << (b + 1)) | low;
    }
    c
}

impl StateVector {
    /// Panics unless the state holds `2^n` amplitudes and every qubit of `qubits` is
    /// below `n` and named once. Every public kernel calls it first: the passes
    /// below index raw memory from these numbers.
    fn check_qubits(&self, what: &str, qubits: &[usize]) {
        assert!(
            self.n < usize::BITS as usize && self.amps.len() == 1usize << self.n,
            "{what}: a state of {} qubits must hold 2^{} amplitudes, not {}",
            self.n,
            self.n,
            self.amps.len()
        );
        for (i, &q) in qubits.iter().enumerate() {
            assert!(
                q < self.n,
                "{what}: qubit {q} does not exist in a state of {} qubits",
                self.n
            );
            assert!(
                !qubits[..i].contains(&q),
                "{what}: qubit {q} is named twice"
            );
        }
    }

    /// The state `|0...0>`.
    pub fn zero(n: usize) -> StateVector {
        let mut amps = zeroed_amps(1usize << n);
        amps[0] = C64::new(1.0, 0.0);
        StateVector { n, amps }
    }

    /// The computational basis state with index `k`.
    pub fn basis(n: usize, k: usize) -> StateVector {
        let mut s = StateVector::zero(n);
        s.amps[0] = C64::new(0.0, 0.0);
        s.amps[k] = C64::new(1.0, 0.0);
        s
    }

    /// A Haar-random state: normalised independent complex Gaussians (real and
    /// imaginary parts from `rand_distr`'s standard normal).
    pub fn haar_random(n: usize, rng: &mut impl rand::Rng) -> StateVector {
        StateVector::try_haar_random(n, rng).unwrap_or_else(|e| panic!("{e}"))
    }

    /// [`StateVector::haar_random`], reporting a failed allocation.
    pub fn try_haar_random(
        n: usize,
        rng: &mut impl rand::Rng,
    ) -> Result<StateVector, std::collections::TryReserveError> {
        let mut amps = try_zeroed_amps(1usize << n)?;
        for slot in amps.iter_mut() {
            let re: f64 = rng.sample(rand_distr::StandardNormal);
            let im: f64 = rng.sample(rand_distr::StandardNormal);
            *slot = C64::new(re, im);
        }
        let norm = amps.iter().map(|a| a.norm_sqr()).sum::<f64>().sqrt();
        amps.iter_mut().for_each(|a| *a /= norm);
        Ok(StateVector { n, amps })
    }

    /// A copy, reporting a failed allocation instead of aborting.
    pub fn try_clone(&self) -> Result<StateVector, std::collections::TryReserveError> {
        let mut amps: Vec<C64> = Vec::new();
        amps.try_reserve_exact(self.amps.len())?;
        crate::memory::advise_huge_pages(&mut amps);
        amps.extend_from_slice(&self.amps);
        Ok(StateVector { n: self.n, amps })
    }

    /// `<self|other>`.
    pub fn inner(&self, other: &StateVector) -> C64 {
        assert_eq!(
            self.amps.len(),
            other.amps.len(),
            "inner: states of different sizes"
        );
        if self.amps.len() >= PAR_LEN {
            self.amps
                .par_iter()
                .zip(other.amps.par_iter())
                .map(|(a, b)| a.conj() * b)
                .sum()
        } else {
            self.amps
                .iter()
                .zip(&other.amps)
                .map(|(a, b)| a.conj() * b)
                .sum()
        }
    }

    /// Any 2x2 on one qubit. One pass.
    pub fn apply_mat2(&mut self, q: usize, m: &Mat2) {
        self.check_qubits("apply_mat2", &[q]);
        let half = 1usize << q;
        if self.amps.len() < PAR_LEN {
            mat2_serial(&mut self.amps, q, m);
        } else if half >= STAGE_DISTANCE {
            self.amps.par_chunks_mut(2 * half).for_each(|pair| {
                let (lo, hi) = pair.split_at_mut(half);
                // The two halves lie a power of two apart; staging one chunk at a time
                // in a local buffer reads and writes each half in bursts instead of
                // alternating between them, which the memory system punishes.
                lo.par_chunks_mut(CHUNK)
                    .zip(hi.par_chunks_mut(CHUNK))
                    .for_each_init(
                        || vec![C64::new(0.0, 0.0); CHUNK],
                        |buf, (l, h)| {
                            let buf = &mut buf[..h.len()];
                            buf.copy_from_slice(h);
                            simd::mat2_butterfly(l, buf, m);
                            h.copy_from_slice(buf);
                        },
                    );
            });
        } else if half >= CHUNK {
            self.amps.par_chunks_mut(2 * half).for_each(|pair| {
                let (lo, hi) = pair.split_at_mut(half);
                lo.par_chunks_mut(CHUNK)
                    .zip(hi.par_chunks_mut(CHUNK))
                    .for_each(|(l, h)| simd::mat2_butterfly(l, h, m));
            });
        } else {
            self.amps
                .par_chunks_mut(CHUNK.max(2 * half))
                .for_each(|c| mat2_serial(c, q, m));
        }
    }

    /// A 2x2 on `target` where every qubit of `controls` is 1. One pass.
    pub fn apply_controlled(&mut self, controls: &[usize], target: usize, m: &Mat2) {
        self.check_qubits("apply_controlled", controls);
        self.check_qubits("apply_controlled", &[target]);
        assert!(
            !controls.contains(&target),
            "apply_controlled: qubit {target} is both a control and the target"
        );
        let cmask: usize = controls.iter().map(|c| 1usize << c).sum();
        let half = 1usize << target;
        let apply = |base: usize, lo: &mut [C64], hi: &mut [C64]| {
            for (k, (a, b)) in lo.iter_mut().zip(hi.iter_mut()).enumerate() {
                if (base + k) & cmask == cmask {
                    let (x, y) = (*a, *b);
                    *a = m[0][0] * x + m[0][1] * y;
                    *b = m[1][0] * x + m[1][1] * y;
                }
            }
        };
        let block = CHUNK.max(2 * half);
        let run = |ci: usize, c: &mut [C64]| {
            if half >= c.len() {
                return;
            }
            for (pi, pair) in c.chunks_mut(2 * half).enumerate() {
                let (lo, hi) = pair.split_at_mut(half);
                apply(ci * block + pi * 2 * half, lo, hi);
            }
        };
        if self.amps.len() < PAR_LEN {
            for (pi, pair) in self.amps.chunks_mut(2 * half).enumerate() {
                let (lo, hi) = pair.split_at_mut(half);
                apply(pi * 2 * half, lo, hi);
            }
        } else if half >= CHUNK {
            self.amps
                .par_chunks_mut(2 * half)
                .enumerate()
                .for_each(|(pi, pair)| {
                    let (lo, hi) = pair.split_at_mut(half);
                    lo.par_chunks_mut(CHUNK)
                        .zip(hi.par_chunks_mut(CHUNK))
                        .enumerate()
                        .for_each(|(k, (l, h))| apply(pi * 2 * half + k * CHUNK, l, h));
                });
        } else {
            self.amps
                .par_chunks_mut(block)
                .enumerate()
                .for_each(|(ci, c)| run(ci, c));
        }
    }

    /// Multiplies amplitude `i` by `phase(i)`. One pass.
    pub fn apply_diagonal(&mut self, phase: impl Fn(usize) -> C64 + Sync) {
        self.check_qubits("apply_diagonal", &[]);
        if self.amps.len() < PAR_LEN {
            self.amps
                .iter_mut()
                .enumerate()
                .for_each(|(i, a)| *a *= phase(i));
        } else {
            self.amps
                .par_chunks_mut(CHUNK)
                .enumerate()
                .for_each(|(ci, c)| {
                    c.iter_mut()
                        .enumerate()
                        .for_each(|(k, a)| *a *= phase(ci * CHUNK + k))
                });
        }
    }

    /// The same 2x2 on every qubit of `qubits` (a collective rotation).
    ///
    /// With Euler angles `m = e^{ia} Rz(z1) Rx(x) Rz(z0)`, the product over any set of
    /// qubits is `D(z1) Rx(x)^{(x)set} D(z0)` times a phase, where each `D` is diagonal
    /// with a phase set by the population count within the set and `Rx` takes a
    /// real-arithmetic butterfly. The qubits are cut into sets that one pass can hold
    /// in cache (those below TILE_BITS, then GROUP at a time) and each set gets the
    /// whole product in one pass: `1 + ceil(h / GROUP)` passes, `h` the qubits at or
    /// above TILE_BITS.
    pub fn apply_same_to_all(&mut self, qubits: &[usize], m: &Mat2) {
        self.check_qubits("apply_same_to_all", qubits);
        if qubits.len() < 4 {
            return self.apply_same_to_all_direct(qubits, m);
        }
        let (alpha, z1, x, z0) = zxz(m);
        let mut sorted = qubits.to_vec();
        sorted.sort_unstable();
        let tile = TILE_BITS.min(self.n);
        let (low, high): (Vec<usize>, Vec<usize>) = sorted.iter().partition(|&&q| q < tile);
        let mut sets: Vec<&[usize]> = Vec::new();
        if !low.is_empty() {
            sets.push(&low);
        }
        sets.extend(high.chunks(GROUP));
        for (i, set) in sets.into_iter().enumerate() {
            let count = set.len();
            let mask: usize = set.iter().map(|q| 1usize << q).sum();
            // exp(-i t/2 Z) on each qubit of the set: e^{i t/2 (2k - count)} for popcount k.
            let table = |t: f64, extra: C64| -> Vec<C64> {
                (0..=count)
                    .map(|k| {
                        extra * C64::from_polar(1.0, t / 2.0 * (2.0 * k as f64 - count as f64))
                    })
                    .collect()
            };
            let global = if i == 0 {
                C64::from_polar(1.0, alpha * qubits.len() as f64)
            } else {
                C64::new(1.0, 0.0)
            };
            let (sx, cx) = (x / 2.0).sin_cos();
            let post = if z1.abs() > 1e-15 || global != C64::new(1.0, 0.0) {
                Some(table(z1, global))
            } else {
                None
            };
            let tables = Diagonals {
                pre: (z0.abs() > 1e-15).then(|| table(z0, C64::new(1.0, 0.0))),
                rx: (cx, sx),
                post,
                mask,
            };
            if set.first().is_some_and(|&q| q < tile) {
                self.rotate_low_set(set, &tables);
            } else {
                self.rotate_high_set(set, &tables);
            }
        }
    }

    /// `D(z1) Rx D(z0)` on the qubits of `set`, all below TILE_BITS, one tile at a time.
    fn rotate_low_set(&mut self, set: &[usize], d: &Diagonals) {
        let tile_len = 1usize << TILE_BITS.min(self.n);
        // The set lies inside a tile, so the diagonals depend on the index within the
        // tile only: expand them once into factors shared by every tile.
        let expand = |table: &Vec<C64>| -> Vec<C64> {
            (0..tile_len)
                .map(|k| table[(k & d.mask).count_ones() as usize])
                .collect()
        };
        let (pre, post) = (d.pre.as_ref().map(expand), d.post.as_ref().map(expand));
        let body = |t: &mut [C64]| {
            let diag = |t: &mut [C64], factors: &[C64]| scale(t, factors);
            if let Some(pre) = &pre {
                diag(t, pre);
            }
            rx_levels(t, set, d.rx.0, d.rx.1);
            if let Some(post) = &post {
                diag(t, post);
            }
        };
        if self.amps.len() < PAR_LEN {
            self.amps.chunks_mut(tile_len).for_each(body);
        } else {
            self.amps.par_chunks_mut(tile_len).for_each(body);
        }
    }

    /// `D(z1) Rx D(z0)` on `set` (ascending, at most GROUP qubits, all at or
    /// above TILE_BITS). The `2^k` rows of a block are runs of [`ROW`] amplitudes that
    /// lie powers of two apart; in place they would compete for the same cache sets,
    /// so each block is copied into a contiguous buffer, transformed there and copied
    /// back, which reads and writes every row in one burst.
    fn rotate_high_set(&mut self, set: &[usize], d: &Diagonals) {
        let k = set.len();
        let rows = 1usize << k;
        let offsets: Vec<usize> = (0..rows)
            .map(|s| {
                (0..k)
                    .filter(|&j| s >> j & 1 == 1)
                    .map(|j| 1usize << set[j])
                    .sum()
            })
            .collect();
        let run = ROW.min(1usize << set[0]);
        let buffer_bits: Vec<usize> = (0..k).map(|j| run.trailing_zeros() as usize + j).collect();
        let buffer_bits = &buffer_bits;
        let blocks = (self.amps.len() >> k) / run;
        let offsets = &offsets;
        let ptr = SharedPtr(self.amps.as_mut_ptr());
        let body = move |buf: &mut Vec<C64>, t: usize| {
            let p = ptr;
            let base = insert_zeros(t * run, set);
            // SAFETY: the runs `base + offsets[s] .. + run` of distinct `t` and `s` are
            // disjoint and in range: `run` divides `2^set[0]`, so a run never crosses a
            // bit of the set.
            for s in 0..rows {
                let src = unsafe { std::slice::from_raw_parts(p.0.add(base + offsets[s]), run) };
                buf[s * run..(s + 1) * run].copy_from_slice(src);
            }
            // A run starts on a multiple of `run`, so `start + i = start | i` inside it.
            // The set's bits are all above the run, so a row has one factor.
            let diag = |buf: &mut [C64], table: &[C64]| {
                for s in 0..rows {
                    let f = table[((base + offsets[s]) & d.mask).count_ones() as usize];
                    scale(&mut buf[s * run..(s + 1) * run], &[f]);
                }
            };
            if let Some(pre) = &d.pre {
                diag(buf, pre);
            }
            // In the buffer, row `s` starts at `s * run`: the set's qubits sit at bits
            // `log2(run) + j`, so the tile routine applies.
            rx_levels(buf, buffer_bits, d.rx.0, d.rx.1);
            if let Some(post) = &d.post {
                diag(buf, post);
            }
            for s in 0..rows {
                let dst =
                    unsafe { std::slice::from_raw_parts_mut(p.0.add(base + offsets[s]), run) };
                dst.copy_from_slice(&buf[s * run..(s + 1) * run]);
            }
        };
        // One buffer per job, and a few jobs per thread: rayon's per-split init would
        // allocate (and the kernel zero) a fresh buffer far too often.
        let jobs = if self.amps.len() < PAR_LEN {
            1
        } else {
            (rayon::current_num_threads() * 4).min(blocks).max(1)
        };
        let per_job = blocks.div_ceil(jobs);
        (0..jobs).into_par_iter().for_each(|j| {
            let mut buf = vec![C64::new(0.0, 0.0); rows * run];
            for t in j * per_job..((j + 1) * per_job).min(blocks) {
                body(&mut buf, t);
            }
        });
    }

    /// The same 2x2 on every qubit of `qubits`, one pass per qubit: the reference for
    /// [`StateVector::apply_same_to_all`] and its method for fewer than four qubits.
    pub fn apply_same_to_all_direct(&mut self, qubits: &[usize], m: &Mat2) {
        self.check_qubits("apply_same_to_all_direct", qubits);
        for &q in qubits {
            self.apply_mat2(q, m);
        }
    }

    /// Any `2^k x 2^k` matrix (row-major, argument 0 = bit 0) on `qubits`. One pass.
    pub fn apply_dense(&mut self, qubits: &[usize], m: &nalgebra::DMatrix<C64>) {
        self.check_qubits("apply_dense", qubits);
        let k = qubits.len();
        assert!(k <= 6, "apply_dense: at most 6 qubits, not {k}");
        let dim = 1usize << k;
        assert!(
            m.nrows() == dim && m.ncols() == dim,
            "apply_dense: a {}x{} matrix on {k} qubits",
            m.nrows(),
            m.ncols()
        );
        let mut sorted = qubits.to_vec();
        sorted.sort_unstable();
        let offsets: Vec<usize> = (0..dim)
            .map(|s| {
                (0..k)
                    .filter(|&j| s >> j & 1 == 1)
                    .map(|j| 1usize << qubits[j])
                    .sum()
            })
            .collect();
        let outer = self.amps.len() >> k;
        let ptr = SharedPtr(self.amps.as_mut_ptr());
        let sorted = &sorted;
        let offsets = &offsets;
        let body = move |c: usize| {
            let p = ptr;
            let base = insert_zeros(c, sorted);
            let mut buf = [C64::new(0.0, 0.0); 64];
            let mut out = [C64::new(0.0, 0.0); 64];
            // SAFETY: as in apply_product_pass.
            unsafe {
                for s in 0..dim {
                    buf[s] = *p.0.add(base + offsets[s]);
                }
            }
            for (r, o) in out.iter_mut().enumerate().take(dim) {
                *o = (0..dim).map(|col| m[(r, col)] * buf[col]).sum();
            }
            unsafe {
                for s in 0..dim {
                    *p.0.add(base + offsets[s]) = out[s];
                }
            }
        };
        if self.amps.len() < PAR_LEN {
            (0..outer).for_each(body);
        } else {
            (0..outer)
                .into_par_iter()
                .with_min_len(CHUNK / dim.max(1))
                .for_each(body);
        }
    }

    /// A plain copy of the amplitudes into `dst`, the bandwidth reference of the
    /// benchmarks.
    pub fn copy_into(&self, dst: &mut [C64]) {
        assert_eq!(
            dst.len(),
            self.amps.len(),
            "copy_into: buffers of different sizes"
        );
        if self.amps.len() < PAR_LEN {
            dst.copy_from_slice(&self.amps);
        } else {
            dst.par_chunks_mut(CHUNK)
                .zip(self.amps.par_chunks(CHUNK))
                .for_each(|(d, s)| d.copy_from_slice(s));
        }
    }
}
