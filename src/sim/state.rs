//! Statevector kernels. Amplitudes are complex f64; qubit 0 is the least significant
//! bit of the basis index.
//!
//! Every kernel makes one pass over memory per call, except
//! [`StateVector::apply_same_to_all`], which applies one 2x2 to many qubits in
//! `1 + ceil(high / GROUP)` passes: all qubits below [`TILE_BITS`] in one pass over
//! cache-sized tiles, then the others [`GROUP`] at a time. Large states run in
//! parallel with rayon.

use crate::circuit::Mat2;
use num_complex::Complex64 as C64;
use rayon::prelude::*;

/// Qubits below this index are handled inside tiles of `2^TILE_BITS` amplitudes.
pub const TILE_BITS: usize = 12;
/// High qubits handled together in one pass of a collective operation.
pub const GROUP: usize = 4;
/// States at least this long run in parallel.
const PAR_LEN: usize = 1 << 14;
/// Work unit of a parallel pass, in amplitudes.
const CHUNK: usize = 1 << 12;

/// A pure state of `n` qubits.
#[derive(Debug, Clone, PartialEq)]
pub struct StateVector {
    pub n: usize,
    pub amps: Vec<C64>,
}

#[derive(Clone, Copy)]
struct SharedPtr(*mut C64);
// SAFETY: the passes that use it write disjoint index sets from different threads.
unsafe impl Send for SharedPtr {}
unsafe impl Sync for SharedPtr {}

#[inline(always)]
fn butterfly(lo: &mut [C64], hi: &mut [C64], m: &Mat2) {
    for (a, b) in lo.iter_mut().zip(hi.iter_mut()) {
        let (x, y) = (*a, *b);
        *a = m[0][0] * x + m[0][1] * y;
        *b = m[1][0] * x + m[1][1] * y;
    }
}

/// Applies `m` to qubit `q` of a block whose length is a multiple of `2^(q+1)`.
fn mat2_serial(block: &mut [C64], q: usize, m: &Mat2) {
    let half = 1usize << q;
    for pair in block.chunks_mut(2 * half) {
        let (lo, hi) = pair.split_at_mut(half);
        butterfly(lo, hi, m);
    }
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
    /// The state `|0...0>`.
    pub fn zero(n: usize) -> StateVector {
        let mut amps = vec![C64::new(0.0, 0.0); 1usize << n];
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

    /// A Haar-random state: normalised independent complex Gaussians (Box-Muller).
    pub fn haar_random(n: usize, rng: &mut impl rand::Rng) -> StateVector {
        let mut amps = Vec::with_capacity(1usize << n);
        for _ in 0..1usize << n {
            let u1: f64 = rng.gen::<f64>().max(f64::MIN_POSITIVE);
            let u2: f64 = rng.gen();
            let r = (-2.0 * u1.ln()).sqrt();
            amps.push(C64::from_polar(r, std::f64::consts::TAU * u2));
        }
        let norm = amps.iter().map(|a| a.norm_sqr()).sum::<f64>().sqrt();
        amps.iter_mut().for_each(|a| *a /= norm);
        StateVector { n, amps }
    }

    /// `<self|other>`.
    pub fn inner(&self, other: &StateVector) -> C64 {
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

    pub fn norm_sqr(&self) -> f64 {
        self.amps.iter().map(|a| a.norm_sqr()).sum()
    }

    /// Any 2x2 on one qubit. One pass.
    pub fn apply_mat2(&mut self, q: usize, m: &Mat2) {
        let half = 1usize << q;
        if self.amps.len() < PAR_LEN {
            mat2_serial(&mut self.amps, q, m);
        } else if half >= CHUNK {
            self.amps.par_chunks_mut(2 * half).for_each(|pair| {
                let (lo, hi) = pair.split_at_mut(half);
                lo.par_chunks_mut(CHUNK)
                    .zip(hi.par_chunks_mut(CHUNK))
                    .for_each(|(l, h)| butterfly(l, h, m));
            });
        } else {
            self.amps
                .par_chunks_mut(CHUNK.max(2 * half))
                .for_each(|c| mat2_serial(c, q, m));
        }
    }

    /// A 2x2 on `target` where every qubit of `controls` is 1. One pass.
    pub fn apply_controlled(&mut self, controls: &[usize], target: usize, m: &Mat2) {
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

    /// The same 2x2 on every qubit of `qubits` (a collective rotation), in
    /// `1 + ceil(h / GROUP)` passes where `h` counts the qubits at or above TILE_BITS.
    pub fn apply_same_to_all(&mut self, qubits: &[usize], m: &Mat2) {
        let mut sorted = qubits.to_vec();
        sorted.sort_unstable();
        let tile = TILE_BITS.min(self.n);
        let (low, high): (Vec<usize>, Vec<usize>) = sorted.iter().partition(|&&q| q < tile);
        if !low.is_empty() {
            let tile_len = 1usize << tile;
            let body = |t: &mut [C64]| {
                for &q in &low {
                    mat2_serial(t, q, m);
                }
            };
            if self.amps.len() < PAR_LEN {
                self.amps.chunks_mut(tile_len).for_each(body);
            } else {
                self.amps.par_chunks_mut(tile_len).for_each(body);
            }
        }
        for group in high.chunks(GROUP) {
            self.apply_product_pass(group, m);
        }
    }

    /// One pass applying `m` to each qubit of `group` (ascending, at most GROUP).
    fn apply_product_pass(&mut self, group: &[usize], m: &Mat2) {
        let k = group.len();
        let offsets: Vec<usize> = (0..1usize << k)
            .map(|s| {
                (0..k)
                    .filter(|&j| s >> j & 1 == 1)
                    .map(|j| 1usize << group[j])
                    .sum()
            })
            .collect();
        let outer = self.amps.len() >> k;
        let ptr = SharedPtr(self.amps.as_mut_ptr());
        let body = move |c: usize| {
            let p = ptr;
            let base = insert_zeros(c, group);
            let mut buf = [C64::new(0.0, 0.0); 1 << GROUP];
            // SAFETY: distinct `c` give disjoint index sets `base + offsets[s]`, all in range.
            unsafe {
                for s in 0..1usize << k {
                    buf[s] = *p.0.add(base + offsets[s]);
                }
            }
            for j in 0..k {
                let half = 1usize << j;
                for s in 0..1usize << k {
                    if s & half == 0 {
                        let (x, y) = (buf[s], buf[s | half]);
                        buf[s] = m[0][0] * x + m[0][1] * y;
                        buf[s | half] = m[1][0] * x + m[1][1] * y;
                    }
                }
            }
            unsafe {
                for s in 0..1usize << k {
                    *p.0.add(base + offsets[s]) = buf[s];
                }
            }
        };
        if self.amps.len() < PAR_LEN {
            (0..outer).for_each(body);
        } else {
            (0..outer)
                .into_par_iter()
                .with_min_len(CHUNK)
                .for_each(body);
        }
    }

    /// Any `2^k x 2^k` matrix (row-major, argument 0 = bit 0) on `qubits`. One pass.
    pub fn apply_dense(&mut self, qubits: &[usize], m: &nalgebra::DMatrix<C64>) {
        let k = qubits.len();
        let dim = 1usize << k;
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
        assert!(k <= 6, "dense kernels take at most 6 qubits");
        if self.amps.len() < PAR_LEN {
            (0..outer).for_each(body);
        } else {
            (0..outer)
                .into_par_iter()
                .with_min_len(CHUNK / dim.max(1))
                .for_each(body);
        }
    }

    /// Projects qubit `q` onto `|outcome>` without normalising; returns the probability.
    pub fn project(&mut self, q: usize, outcome: bool) -> f64 {
        let bit = 1usize << q;
        let mut p = 0.0;
        for (i, a) in self.amps.iter_mut().enumerate() {
            if ((i & bit) != 0) == outcome {
                p += a.norm_sqr();
            } else {
                *a = C64::new(0.0, 0.0);
            }
        }
        p
    }

    /// A plain copy of the amplitudes into `dst`, the bandwidth reference of the
    /// benchmarks.
    pub fn copy_into(&self, dst: &mut [C64]) {
        if self.amps.len() < PAR_LEN {
            dst.copy_from_slice(&self.amps);
        } else {
            dst.par_chunks_mut(CHUNK)
                .zip(self.amps.par_chunks(CHUNK))
                .for_each(|(d, s)| d.copy_from_slice(s));
        }
    }
}
