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
use crate::circuit::Mat2;
use crate::sim::program::Kernel;
use crate::sim::tableau::{as_pauli, CLIFFORD_EPS};
use rustc_hash::FxHashMap;

/// The couplings gathered so far, to be applied after everything emitted.
struct Gathered {
    weights: FxHashMap<(usize, usize), f64>,
    partners: Vec<Vec<usize>>,
}

impl Gathered {
    fn add(&mut self, a: usize, b: usize, w: f64) {
        use std::collections::hash_map::Entry;
        let key = (a.min(b), a.max(b));
        match self.weights.entry(key) {
            Entry::Occupied(mut e) => *e.get_mut() += w,
            Entry::Vacant(e) => {
                e.insert(w);
                self.partners[a].push(b);
                self.partners[b].push(a);
            }
        }
    }

    /// Emits (and forgets) every coupling on `q`.
    fn flush(&mut self, q: usize, out: &mut Vec<Kernel>) {
        let mut terms = Vec::new();
        for p in std::mem::take(&mut self.partners[q]) {
            self.partners[p].retain(|&x| x != q);
            let key = (q.min(p), q.max(p));
            if let Some(w) = self.weights.remove(&key) {
                terms.push((key.0, key.1, w));
            }
        }
        if !terms.is_empty() {
            terms.sort_by_key(|t| (t.0, t.1));
            out.push(Kernel::Ising { axis: None, terms });
        }
    }

    fn negate(&mut self, q: usize) {
        for &p in &self.partners[q] {
            if let Some(w) = self.weights.get_mut(&(q.min(p), q.max(p))) {
                *w = -*w;
            }
        }
    }

    fn flush_all(&mut self, out: &mut Vec<Kernel>) {
        let mut terms: Vec<(usize, usize, f64)> =
            self.weights.drain().map(|((a, b), w)| (a, b, w)).collect();
        if !terms.is_empty() {
            terms.sort_by_key(|t| (t.0, t.1));
            out.push(Kernel::Ising { axis: None, terms });
        }
        self.partners.iter_mut().for_each(Vec::clear);
    }
}

/// The rewritten kernels and their slack, or `None` when the list has no
/// collective rotation, or holds a kernel other than collective rotations on all
/// `n` qubits, single-qubit operations and MS pulses, or an MS pulse whose axis in
/// the interaction picture is not Z.
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
    let mut out = Vec::with_capacity(ks.len());
    let mut g = Gathered {
        weights: FxHashMap::default(),
        partners: vec![Vec::new(); n],
    };
    let mut slack = 0.0;
    for k in ks {
        match k {
            Kernel::Collective { m, qubits } if qubits.len() == n => {
                c = mul2(m, &c);
            }
            Kernel::One { q, m } => {
                let m = mul2(&adjoint2(&c), &mul2(m, &c));
                let off = m[0][1].norm() + m[1][0].norm();
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
                let (s, co) = phi.sin_cos();
                let sigma: Mat2 = [
                    [
                        num_complex::Complex64::new(0.0, 0.0),
                        num_complex::Complex64::new(co, -s),
                    ],
                    [
                        num_complex::Complex64::new(co, s),
                        num_complex::Complex64::new(0.0, 0.0),
                    ],
                ];
                let a = mul2(&adjoint2(&c), &mul2(&sigma, &c));
                // a = n . sigma: n_z = a00, n_x = Re a10, n_y = Im a10.
                let off = a[1][0].norm();
                if off > CLIFFORD_EPS {
                    return None;
                }
                let m = qubits.len() as f64;
                // ||S_n - S_z|| <= m off, so the exponents differ by at most
                // |theta| / 4 * 2 m * m off.
                slack += theta.abs() / 2.0 * m * m * off;
                for (i, &x) in qubits.iter().enumerate() {
                    for &y in &qubits[i + 1..] {
                        g.add(x, y, theta / 2.0);
                    }
                }
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
        let n = 4;
        let all: Vec<usize> = (0..n).collect();
        for _ in 0..40 {
            let mut ks = vec![Kernel::Collective {
                m: rotation(std::f64::consts::FRAC_PI_2, std::f64::consts::FRAC_PI_2),
                qubits: all.clone(),
            }];
            for _ in 0..30 {
                let q = rng.gen_range(0..n);
                ks.push(match rng.gen_range(0..5) {
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
            let (a, b) = (unitary_of(&ks, n), unitary_of(&out, n));
            // Align the global phase on the largest entry.
            let (i, _) = a
                .iter()
                .enumerate()
                .max_by(|x, y| x.1.norm().total_cmp(&y.1.norm()))
                .unwrap();
            let ph = b[i] / a[i];
            let d = (a * ph - b).iter().fold(0.0f64, |m, z| m.max(z.norm()));
            assert!(d < 1e-10 + slack, "distance {d}");
        }
    }
}
