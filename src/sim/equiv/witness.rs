//! An exact proof of difference without a statevector: a qubit that one program
//! leaves alone and the other leaves coupled.
//!
//! Suppose that after the pre-passes program `P` has no operation on qubit `t`, and
//! in program `Q` every operation on `t` is diagonal on it: single-qubit diagonals,
//! and Z-Z couplings that can all be moved to one place (Ising kernels separated only
//! by operations that do not act non-diagonally on a partner; the interaction
//! picture gathers an echo's couplings into such kernels). Then `Q = A (sum_b |b><b|_t (x) D_b) B`
//! with `A`, `B` not acting on `t` and `D_b = e^{i g_b} prod_j exp(-i s_b w_j Z_j)`
//! (`s_0 = 1`, `s_1 = -1`, `w_j` the net coupling of `t` with `j`), while
//! `P = I_t (x) P'`. For any phase `f`,
//! `||Q - e^{if} P|| >= ||Q_0 - Q_1|| / 2 = ||I - D_0 D_1^dagger|| / 2`, and the
//! diagonal `D_0 D_1^dagger` has entries `e^{i(G - 2 sum_j z_j w_j)}`, `z_j = +-1`:
//! two of them differ in phase by `4 w_j`, so the norm is at least `|sin(2 w_j)|`.
//! Hence every `Q` equal to `P` has each `w_j` a multiple of pi/2, and a coupling
//! `w_j = k pi/2 + d` proves `||Q - e^{if} P|| >= |sin(2d)| / 2` (operator norm)
//! for the programs as pre-passed; the originals differ by at least that less the
//! pre-passes' slack. (Derived for this project.)
//!
//! The proof is used only where the comparison is otherwise refused as too large,
//! and only when that bound exceeds the tolerance: it never says "equal".

use crate::sim::program::Kernel;

/// A proof that two pre-passed programs differ.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Witness {
    /// The qubit left coupled, and the partner whose coupling proves it.
    pub qubit: usize,
    pub partner: usize,
    /// The net coupling angle `w` of `exp(-i w Z_qubit Z_partner)`.
    pub weight: f64,
    /// The proven lower bound on the distance (operator norm, before slack).
    pub bound: f64,
    /// Which program couples it: "first" or "second".
    pub side: &'static str,
}

/// The strongest witness, if any qubit gives one above `threshold`.
pub(super) fn coupled_idle_qubit(
    p: &[Kernel],
    q: &[Kernel],
    n: usize,
    threshold: f64,
) -> Option<Witness> {
    let touched = |ks: &[Kernel]| {
        let mut t = vec![false; n];
        for k in ks {
            for x in k.qubits() {
                if x < n {
                    t[x] = true;
                }
            }
        }
        t
    };
    let (tp, tq) = (touched(p), touched(q));
    let mut best: Option<Witness> = None;
    for t in 0..n {
        let found = match (tp[t], tq[t]) {
            (false, true) => witness_on(q, t, "second"),
            (true, false) => witness_on(p, t, "first"),
            _ => None,
        };
        if let Some(w) = found {
            if w.bound > threshold && best.as_ref().map_or(true, |b| w.bound > b.bound) {
                best = Some(w);
            }
        }
    }
    best
}

/// Whether a kernel is diagonal in the computational basis.
fn is_diagonal(k: &Kernel) -> bool {
    let diag2 = |m: &crate::circuit::Mat2| m[0][1].norm() == 0.0 && m[1][0].norm() == 0.0;
    match k {
        Kernel::One { m, .. } | Kernel::Controlled { m, .. } | Kernel::Collective { m, .. } => {
            diag2(m)
        }
        Kernel::Ising { axis, .. } => axis.is_none(),
        Kernel::Dense { m, .. } => {
            (0..m.nrows()).all(|i| (0..m.ncols()).all(|j| i == j || m[(i, j)].norm() == 0.0))
        }
        Kernel::Swap { .. } | Kernel::Ms { .. } => false,
    }
}

/// The witness on qubit `t` of `ks`, when every operation on `t` is a diagonal
/// single-qubit one or a Z-Z coupling, and all its couplings form one group: Ising
/// kernels separated only by operations that commute with the couplings gathered so
/// far (no non-diagonal operation on a partner), so that they can all be moved to
/// the last of them.
fn witness_on(ks: &[Kernel], t: usize, side: &'static str) -> Option<Witness> {
    let mut groups = 0;
    let mut open = false;
    let mut net: Vec<(usize, f64)> = Vec::new();
    for k in ks {
        let on_t = k.qubits().contains(&t);
        match k {
            // Exactly diagonal single-qubit operations (light shifts, frame changes,
            // a collective rotation that is diagonal): phases on `t` that commute
            // with everything else.
            Kernel::One { m, .. } | Kernel::Collective { m, .. } if on_t => {
                if m[0][1].norm() != 0.0 || m[1][0].norm() != 0.0 {
                    return None;
                }
            }
            Kernel::Ising { axis: None, terms } if on_t => {
                if !open {
                    groups += 1;
                    open = true;
                }
                for &(a, b, w) in terms {
                    let partner = match (a == t, b == t) {
                        (true, false) => b,
                        (false, true) => a,
                        _ => continue,
                    };
                    match net.iter_mut().find(|(j, _)| *j == partner) {
                        Some((_, s)) => *s += w,
                        None => net.push((partner, w)),
                    }
                }
            }
            // Any other operation on `t` (a controlled phase, a rotation): no proof.
            _ if on_t => return None,
            _ => {
                if open
                    && !is_diagonal(k)
                    && k.qubits().iter().any(|x| net.iter().any(|(j, _)| j == x))
                {
                    open = false;
                }
            }
        }
    }
    if groups != 1 {
        return None;
    }
    net.into_iter()
        .map(|(partner, w)| {
            let half_pi = std::f64::consts::FRAC_PI_2;
            let d = w - (w / half_pi).round() * half_pi;
            Witness {
                qubit: t,
                partner,
                weight: w,
                bound: (2.0 * d).sin().abs() / 2.0,
                side,
            }
        })
        .max_by(|a, b| a.bound.total_cmp(&b.bound))
}

#[cfg(test)]
mod tests {
    use super::*;
    use num_complex::Complex64 as C64;

    fn z(q: usize, theta: f64) -> Kernel {
        let e = |s: f64| C64::from_polar(1.0, s * theta / 2.0);
        Kernel::One {
            q,
            m: [[e(-1.0), C64::new(0.0, 0.0)], [C64::new(0.0, 0.0), e(1.0)]],
        }
    }

    /// The bound against a brute-force distance: for `Q = exp(-i w Z_0 Z_1)` and `P`
    /// the identity on qubit 0 times the best single-qubit `P'` (a grid of phases on
    /// qubit 1), the true operator-norm distance is at least the bound.
    #[test]
    fn the_bound_holds_against_a_brute_force_distance() {
        for w in [0.01, 0.3, 0.7, 1.2, 1.56, 2.0] {
            let q = vec![Kernel::Ising {
                axis: None,
                terms: vec![(0, 1, w)],
            }];
            let p = vec![z(1, 0.4)];
            let found = coupled_idle_qubit(&p, &q, 2, 0.0).expect("a witness");
            // Q is diagonal: diag over (z0, z1) of e^{-i w z0 z1}; the closest
            // I (x) P' up to phase is diagonal too: e^{i(f + c z1)}.
            let mut best = f64::INFINITY;
            for a in 0..360 {
                for c in 0..360 {
                    let (f, c) = ((a as f64).to_radians(), (c as f64).to_radians());
                    let mut worst: f64 = 0.0;
                    for z0 in [1.0, -1.0] {
                        for z1 in [1.0, -1.0] {
                            let qv = C64::from_polar(1.0, -w * z0 * z1);
                            let pv = C64::from_polar(1.0, f + c * z1);
                            worst = worst.max((qv - pv).norm());
                        }
                    }
                    best = best.min(worst);
                }
            }
            // The grid is 1 degree: allow its resolution.
            assert!(
                found.bound <= best + 0.02,
                "w {w}: bound {} above the distance {best}",
                found.bound
            );
            assert!(found.bound > 0.0);
        }
    }

    #[test]
    fn multiples_of_half_pi_and_non_diagonal_operations_give_no_witness() {
        let coupled = |w: f64| Kernel::Ising {
            axis: None,
            terms: vec![(0, 1, w)],
        };
        // A coupling of pi/2 is a product of local Zs: no proof.
        assert!(
            coupled_idle_qubit(&[], &[coupled(std::f64::consts::FRAC_PI_2)], 2, 1e-9).is_none()
        );
        // Two coupling kernels next to each other are one group (net 0.6)...
        let two = coupled_idle_qubit(&[], &[coupled(0.3), coupled(0.3)], 2, 1e-9).unwrap();
        assert!((two.weight - 0.6).abs() < 1e-15);
        // ... but not across a rotation of the partner: no proof.
        let rx = Kernel::One {
            q: 1,
            m: [
                [C64::new(0.0, 0.0), C64::new(1.0, 0.0)],
                [C64::new(1.0, 0.0), C64::new(0.0, 0.0)],
            ],
        };
        assert!(coupled_idle_qubit(&[], &[coupled(0.3), rx, coupled(0.3)], 2, 1e-9).is_none());
        // A non-diagonal operation on qubit 0: no proof on it, but qubit 1 (all
        // diagonal) still gives one (H_0 exp(-i w Z_0 Z_1) is not I_1 (x) anything).
        let h = Kernel::One {
            q: 0,
            m: [
                [C64::new(1.0, 0.0), C64::new(1.0, 0.0)],
                [C64::new(1.0, 0.0), C64::new(-1.0, 0.0)],
            ],
        };
        let w = coupled_idle_qubit(&[], &[coupled(0.3), h], 2, 1e-9).unwrap();
        assert_eq!((w.qubit, w.partner), (1, 0));
        // Both programs touch it: nothing to prove here.
        assert!(coupled_idle_qubit(&[z(0, 0.1)], &[coupled(0.3)], 2, 1e-9)
            .is_some_and(|w| w.qubit == 1));
    }

    /// The dense unitary of a list of `One` and Z-Z `Ising` kernels on `n` qubits
    /// (qubit 0 the least significant bit), built here independently of the
    /// simulator.
    fn dense(ks: &[Kernel], n: usize) -> nalgebra::DMatrix<C64> {
        let dim = 1 << n;
        let mut u = nalgebra::DMatrix::<C64>::identity(dim, dim);
        for k in ks {
            let mut g = nalgebra::DMatrix::<C64>::zeros(dim, dim);
            match k {
                Kernel::One { q, m } => {
                    for col in 0..dim {
                        let b = (col >> q) & 1;
                        for a in 0..2 {
                            let row = (col & !(1 << q)) | (a << q);
                            g[(row, col)] += m[a][b];
                        }
                    }
                }
                Kernel::Ising { axis: None, terms } => {
                    for i in 0..dim {
                        let z = |x: usize| if (i >> x) & 1 == 0 { 1.0 } else { -1.0 };
                        let phase: f64 = terms.iter().map(|&(a, b, w)| -w * z(a) * z(b)).sum();
                        g[(i, i)] = C64::from_polar(1.0, phase);
                    }
                }
                _ => unreachable!("only One and Ising here"),
            }
            u = g * u;
        }
        u
    }

    /// On random programs where `Q` couples qubit 2 and `P` never touches it, every
    /// witness's bound is at most the true distance `min_f ||Q - e^{if} P||` (on a
    /// grid of phases, operator norm by singular values).
    #[test]
    fn every_bound_is_at_most_the_true_distance_on_random_programs() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2026);
        let random_one = |rng: &mut rand_chacha::ChaCha8Rng, q: usize| {
            let (a, b, c) = (
                rng.gen::<f64>() * 6.0,
                rng.gen::<f64>() * 6.0,
                rng.gen::<f64>() * 6.0,
            );
            let rz = |t: f64| {
                [
                    [C64::from_polar(1.0, -t / 2.0), C64::new(0.0, 0.0)],
                    [C64::new(0.0, 0.0), C64::from_polar(1.0, t / 2.0)],
                ]
            };
            let ry = |t: f64| {
                let (c, s) = ((t / 2.0).cos(), (t / 2.0).sin());
                [
                    [C64::new(c, 0.0), C64::new(-s, 0.0)],
                    [C64::new(s, 0.0), C64::new(c, 0.0)],
                ]
            };
            Kernel::One {
                q,
                m: crate::circuit::mat2::mul(&rz(a), &crate::circuit::mat2::mul(&ry(b), &rz(c))),
            }
        };
        let mut fired = 0;
        for _ in 0..200 {
            let p: Vec<Kernel> = (0..4).map(|k| random_one(&mut rng, k % 2)).collect();
            let mut q: Vec<Kernel> = (0..2).map(|k| random_one(&mut rng, k % 2)).collect();
            q.push(Kernel::Ising {
                axis: None,
                terms: vec![
                    (2, 0, rng.gen::<f64>() * 3.0),
                    (1, 2, rng.gen::<f64>() * 3.0),
                    (0, 1, rng.gen::<f64>()),
                ],
            });
            q.push(z(2, rng.gen::<f64>() * 6.0));
            q.push(random_one(&mut rng, 0));
            let Some(w) = coupled_idle_qubit(&p, &q, 3, 0.0) else {
                continue;
            };
            fired += 1;
            let (up, uq) = (dense(&p, 3), dense(&q, 3));
            let mut least = f64::INFINITY;
            for k in 0..720 {
                let f = (k as f64 / 2.0).to_radians();
                let d = &uq - &up * C64::from_polar(1.0, f);
                let norm = d.singular_values().max();
                least = least.min(norm);
            }
            assert!(
                w.bound <= least + 1e-9,
                "bound {} above the distance {least}",
                w.bound
            );
        }
        assert!(fired > 150, "the witness fired on only {fired} of 200");
    }
}
