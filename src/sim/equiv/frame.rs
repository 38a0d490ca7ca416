//! The interaction picture with respect to collective rotations, and ZZ couplings
//! gathered across the operations they commute with.
//!
//! A pulse sequence for a collective-gate device interleaves collective rotations
//! (the same 2x2 `m` on every ion), addressed operations and MS pulses. With `C` the
//! product of the collective rotations so far, the sequence equals (exactly) the
//! list in which each collective rotation is left out, every other operation `K` is
//! replaced by `C^dagger K C`, and `C` is applied once at the end. An MS pulse along
//! `sigma_phi` becomes an Ising coupling along the axis `C^dagger sigma_phi C`; where
//! that axis is Z (within [`CLIFFORD_EPS`], the offset going into the slack), the
//! couplings of all pulses commute with each other and with diagonal operations,
//! and pass Pauli X or Y operations with a sign change. They are gathered, and
//! emitted only before an operation they do not commute with, on the qubits that
//! operation touches. Couplings that cancel over a whole segment (an echo spread
//! over several blocks) then sum to zero and are dropped by the next pre-pass.
//!
//! Invariant: the rewritten list's product differs from the original's by at most
//! the returned slack in operator norm, up to global phase.

use super::prepass::{adjoint2, mul2};
use crate::circuit::mat2::pauli;
use crate::circuit::Mat2;
use crate::sim::program::Kernel;
use crate::sim::tableau::{as_pauli, CLIFFORD_EPS};
use num_complex::Complex64 as C64;

/// The couplings gathered so far, to be applied after everything emitted. Dense:
/// the weight of the pair `a < b` is `sign[a] sign[b] w[a][b]`, so a Pauli moved
/// through (a sign change of every coupling on one qubit) flips one sign, and an
/// MS pulse on every ion adds to a contiguous triangle without hashing.
struct Gathered {
    n: usize,
    /// Row-major `n x n`; only `a < b` is used.
    w: Vec<f64>,
    sign: Vec<f64>,
    /// Whether a row may hold a nonzero weight (as row or column).
    touched: Vec<bool>,
}

impl Gathered {
    /// Most qubits gathered densely (an `n x n` table of 8-byte weights: 32 MiB).
    const MAX_QUBITS: usize = 2048;

    /// `None` when the table cannot be allocated (the caller then goes the plain
    /// way rather than abort).
    fn new(n: usize) -> Option<Gathered> {
        let mut w = Vec::new();
        w.try_reserve_exact(n * n).ok()?;
        w.resize(n * n, 0.0);
        Some(Gathered {
            n,
            w,
            sign: vec![1.0; n],
            touched: vec![false; n],
        })
    }

    /// Adds weight `t` to every pair of `qubits` (distinct).
    fn add_all_pairs(&mut self, qubits: &[usize], t: f64) {
        let n = self.n;
        if qubits.len() == n && qubits.iter().enumerate().all(|(i, &q)| i == q) {
            // Every qubit in order (a pulse on the whole chain): row by row over
            // contiguous slices.
            self.touched.iter_mut().for_each(|x| *x = true);
            for a in 0..n {
                let ta = t * self.sign[a];
                let row = &mut self.w[a * n + a + 1..(a + 1) * n];
                for (x, &sb) in row.iter_mut().zip(&self.sign[a + 1..]) {
                    *x += ta * sb;
                }
            }
            return;
        }
        for (i, &x) in qubits.iter().enumerate() {
            self.touched[x] = true;
            let sx = t * self.sign[x];
            for &y in &qubits[i + 1..] {
                let (a, b) = (x.min(y), x.max(y));
                self.w[a * self.n + b] += sx * self.sign[y];
            }
        }
    }

    /// Emits (and forgets) every coupling on `q`.
    fn flush(&mut self, q: usize, out: &mut Vec<Kernel>) {
        if !std::mem::take(&mut self.touched[q]) {
            return;
        }
        let n = self.n;
        let mut terms = Vec::new();
        for y in (0..n).filter(|&y| y != q) {
            let (a, b) = (q.min(y), q.max(y));
            let w = std::mem::take(&mut self.w[a * n + b]);
            if w != 0.0 {
                terms.push((a, b, self.sign[a] * self.sign[b] * w));
            }
        }
        if !terms.is_empty() {
            out.push(Kernel::Ising { axis: None, terms });
        }
    }

    fn negate(&mut self, q: usize) {
        self.sign[q] = -self.sign[q];
    }

    fn flush_all(&mut self, out: &mut Vec<Kernel>) {
        let n = self.n;
        let mut terms = Vec::new();
        for a in (0..n).filter(|&a| self.touched[a]) {
            for b in a + 1..n {
                let w = std::mem::take(&mut self.w[a * n + b]);
                if w != 0.0 {
                    terms.push((a, b, self.sign[a] * self.sign[b] * w));
                }
            }
        }
        self.touched.iter_mut().for_each(|t| *t = false);
        if !terms.is_empty() {
            out.push(Kernel::Ising { axis: None, terms });
        }
    }
}

/// `|z|` without `hypot`'s care for overflow (entries here are at most about 1).
fn modulus(z: C64) -> f64 {
    z.norm_sqr().sqrt()
}

/// The frame as an exact phase times a monomial matrix of entries `0, +-1, +-i` (a
/// Pauli, possibly times a quarter turn about Z; the identity among them) when
/// within `CLIFFORD_EPS` of one, with the
/// Frobenius distance moved. The frame is a product of every collective rotation so
/// far, so its rounding grows along a long sequence; each MS pulse pays for that
/// rounding (`theta / 2 m^2 off`, below), while a snap pays once: taking frame `c'`
/// for `c` from here on changes the product by `G^(x n) - I` with `G = c^dagger c'`,
/// at most `n ||c' - c||` in operator norm (derivation in docs/checker.md).
fn snapped(c: &Mat2) -> Option<(Mat2, f64)> {
    // The phase of the largest entry.
    let big = c
        .iter()
        .flatten()
        .copied()
        .max_by(|a, b| a.norm_sqr().total_cmp(&b.norm_sqr()))?;
    let phase = big / modulus(big);
    let unit = |z: C64| -> Option<C64> {
        let w = z / phase;
        [
            C64::new(0.0, 0.0),
            C64::new(1.0, 0.0),
            C64::new(-1.0, 0.0),
            C64::new(0.0, 1.0),
            C64::new(0.0, -1.0),
        ]
        .into_iter()
        .find(|u| modulus(w - u) <= CLIFFORD_EPS)
    };
    let mut exact = [[C64::new(0.0, 0.0); 2]; 2];
    for (row, out) in c.iter().zip(exact.iter_mut()) {
        for (z, o) in row.iter().zip(out.iter_mut()) {
            *o = unit(*z)?;
        }
    }
    // A monomial matrix: one unit entry per row and per column.
    let zero = |z: C64| z == C64::new(0.0, 0.0);
    let diagonal =
        zero(exact[0][1]) && zero(exact[1][0]) && !zero(exact[0][0]) && !zero(exact[1][1]);
    let anti = zero(exact[0][0]) && zero(exact[1][1]) && !zero(exact[0][1]) && !zero(exact[1][0]);
    if !(diagonal || anti) {
        return None;
    }
    let exact = exact.map(|row| row.map(|u| u * phase));
    let d = c
        .iter()
        .flatten()
        .zip(exact.iter().flatten())
        .map(|(a, b)| (a - b).norm_sqr())
        .sum::<f64>()
        .sqrt();
    Some((exact, d))
}

/// `C^dagger Z C`.
fn z_in_frame(c: &Mat2) -> Mat2 {
    mul2(&adjoint2(c), &mul2(&pauli(None), c))
}

/// The rewritten kernels and their slack, or `None` when the list has no
/// collective rotation, or holds a kernel other than collective rotations on all
/// `n` qubits, single-qubit operations and MS pulses, or an MS pulse whose axis in
/// the interaction picture is not Z; also `None` for more than
/// `Gathered::MAX_QUBITS` qubits, or when the table of couplings cannot be
/// allocated (the checker then compares the programs as given).
pub(super) fn interaction_picture(ks: &[Kernel], n: usize) -> Option<(Vec<Kernel>, f64)> {
    // Most segments (every circuit, most addressed sequences) have no collective
    // rotation: say so before building anything.
    if !ks
        .iter()
        .any(|k| matches!(k, Kernel::Collective { qubits, .. } if qubits.len() == n))
    {
        return None;
    }
    let mut c: Mat2 = super::prepass::identity2();
    // C^dagger Z C, for diagonal kernels: C^dagger (a I + b Z) C = a I + b C^dagger Z C
    // (one product per collective rotation instead of two per light shift).
    let mut cz = z_in_frame(&c);
    let mut out = Vec::with_capacity(ks.len());
    if n > Gathered::MAX_QUBITS {
        return None;
    }
    let mut g = Gathered::new(n)?;
    let mut slack = 0.0;
    for k in ks {
        match k {
            Kernel::Collective { m, qubits } if qubits.len() == n => {
                c = mul2(m, &c);
                if let Some((exact, d)) = snapped(&c) {
                    c = exact;
                    slack += n as f64 * d;
                }
                cz = z_in_frame(&c);
            }
            Kernel::One { q, m } => {
                let m = if m[0][1] == C64::ZERO && m[1][0] == C64::ZERO {
                    let (a, b) = ((m[0][0] + m[1][1]) * 0.5, (m[0][0] - m[1][1]) * 0.5);
                    [
                        [a + b * cz[0][0], b * cz[0][1]],
                        [b * cz[1][0], a + b * cz[1][1]],
                    ]
                } else {
                    mul2(&adjoint2(&c), &mul2(m, &c))
                };
                let off = modulus(m[0][1]) + modulus(m[1][0]);
                if off <= CLIFFORD_EPS {
                    // Diagonal: commutes with every ZZ coupling (moving D + E
                    // instead of D costs at most 2 ||E||).
                    slack += 2.0 * off;
                } else if let Some((1 | 2, _, d)) = as_pauli(&m) {
                    slack += 2.0 * d;
                    g.negate(*q);
                } else {
                    g.flush(*q, &mut out);
                }
                out.push(Kernel::One { q: *q, m });
            }
            Kernel::Ms { theta, phi, qubits } => {
                // sigma_phi in the interaction picture.
                let a = mul2(&adjoint2(&c), &mul2(&pauli(Some(*phi)), &c));
                // a = n . sigma: n_z = a00, n_x = Re a10, n_y = Im a10.
                let off = modulus(a[1][0]);
                if off > CLIFFORD_EPS {
                    return None;
                }
                let m = qubits.len() as f64;
                // ||S_n - S_z|| <= m off, so the exponents differ by at most
                // |theta| / 4 * 2 m * m off.
                slack += theta.abs() / 2.0 * m * m * off;
                g.add_all_pairs(qubits, theta / 2.0);
            }
            _ => return None,
        }
    }
    g.flush_all(&mut out);
    out.push(Kernel::Collective {
        m: c,
        qubits: (0..n).collect(),
    });
    Some((out, slack))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::apply::unitary_of;
    use crate::sim::program::{rotation, z_rotation};
    use rand::{Rng, SeedableRng};

    /// The rewrite against the dense unitaries of both lists (nalgebra), on random
    /// lists of the kernels it accepts whose MS axes stay on Z in the picture.
    #[test]
    fn the_interaction_picture_keeps_the_unitary() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let n = 5;
        let all: Vec<usize> = (0..n).collect();
        let mut gathered = 0;
        for _ in 0..60 {
            let mut ks = vec![Kernel::Collective {
                m: rotation(std::f64::consts::FRAC_PI_2, std::f64::consts::FRAC_PI_2),
                qubits: all.clone(),
            }];
            for _ in 0..30 {
                let q = rng.gen_range(0..n);
                ks.push(match rng.gen_range(0..6) {
                    5 => Kernel::Ms {
                        theta: rng.gen_range(-1.0..1.0),
                        phi: 0.0,
                        qubits: vec![q, (q + rng.gen_range(1..n)) % n],
                    },
                    0 => Kernel::Ms {
                        theta: rng.gen_range(-1.0..1.0),
                        phi: 0.0,
                        qubits: all.clone(),
                    },
                    1 => Kernel::One {
                        q,
                        m: z_rotation(std::f64::consts::PI),
                    },
                    2 => Kernel::One {
                        q,
                        m: z_rotation(rng.gen_range(-3.0..3.0)),
                    },
                    3 => Kernel::Collective {
                        m: z_rotation(std::f64::consts::PI),
                        qubits: all.clone(),
                    },
                    _ => Kernel::One {
                        q,
                        m: rotation(rng.gen_range(-3.0..3.0), rng.gen_range(-3.0..3.0)),
                    },
                });
            }
            let (out, slack) = interaction_picture(&ks, n).expect("applies");
            // Couplings gathered across pulses: fewer coupling kernels than pulses.
            let count = |ks: &[Kernel]| ks.iter().filter(|k| k.qubits().len() > 1).count();
            gathered += usize::from(count(&out) < count(&ks));
            let d =
                crate::sim::apply::distance_up_to_phase(&unitary_of(&ks, n), &unitary_of(&out, n));
            assert!(d < 1e-10 + slack, "distance {d}");
        }
        assert!(gathered > 30, "{gathered}");
    }

    /// A frame that returns within rounding of the identity is snapped to it, and
    /// the snap's cost (`n` times the distance) covers what it moved: a rotation
    /// back by `-pi/2 + delta`, `delta` below `CLIFFORD_EPS`, then MS pulses; the
    /// output differs from the input by no more than the slack (no extra allowance).
    /// Frames of `1/sqrt 2` entries, or off by more than `CLIFFORD_EPS`, are not
    /// snapped.
    #[test]
    fn a_frame_back_near_the_identity_is_snapped_within_its_slack() {
        use std::f64::consts::FRAC_PI_2;
        let n = 4;
        let all: Vec<usize> = (0..n).collect();
        for delta in [0.0, 3e-13, -4e-13] {
            let turn = |theta: f64| Kernel::Collective {
                m: rotation(theta, FRAC_PI_2),
                qubits: all.clone(),
            };
            let ms = |theta: f64| Kernel::Ms {
                theta,
                phi: 0.0,
                qubits: all.clone(),
            };
            // Two blocks, each MS between rotations taking Z to X and back; the
            // first one's way back is off by delta.
            let ks = vec![
                turn(FRAC_PI_2),
                ms(0.7),
                turn(-FRAC_PI_2 + delta),
                Kernel::One {
                    q: 1,
                    m: z_rotation(0.4),
                },
                turn(FRAC_PI_2),
                ms(-0.3),
                turn(-FRAC_PI_2),
            ];
            let (out, slack) = interaction_picture(&ks, n).expect("applies");
            let d =
                crate::sim::apply::distance_up_to_phase(&unitary_of(&ks, n), &unitary_of(&out, n));
            assert!(
                d <= slack + 1e-14,
                "delta {delta}: distance {d}, slack {slack}"
            );
            if delta != 0.0 {
                // The snap's cost, about n |delta| / 2 per entry moved.
                assert!(
                    slack >= n as f64 * delta.abs() / 4.0,
                    "delta {delta}: slack {slack}"
                );
            }
        }
        let (exact, d) = snapped(&rotation(1e-14, 0.3)).expect("near the identity");
        assert!(d > 0.0 && d < 1e-13 && exact[0][1] == C64::new(0.0, 0.0));
        assert!(
            snapped(&rotation(FRAC_PI_2, 0.0)).is_none(),
            "a Hadamard-like frame"
        );
        assert!(
            snapped(&rotation(1e-9, 0.0)).is_none(),
            "off by more than CLIFFORD_EPS"
        );
        let (flip, _) = snapped(&rotation(std::f64::consts::PI, 0.0)).expect("X up to phase");
        assert_eq!(flip[0][0], C64::new(0.0, 0.0));
    }
}
