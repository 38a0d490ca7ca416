//! Runs of operations on one pair of qubits, resynthesised by the canonical (KAK)
//! decomposition.
//!
//! Every two-qubit unitary is `(A1 x B1) exp(i (c1 XX + c2 YY + c3 ZZ)) (A2 x B2)`
//! (Khaneja and Glaser, Chem. Phys. 267, 11, 2001; Kraus and Cirac, PRA 63, 062309,
//! 2001), and with free single-qubit gates the least total interaction an Ising
//! coupling needs for it is `|c1| + |c2| + |c3|` once each `c` is reduced to
//! `[-pi/4, pi/4]` (Khaneja, Brockett and Glaser, PRA 63, 032308, 2001). All three
//! citations are from memory; the decomposition itself is checked numerically here
//! (tests below: random runs rebuilt, CNOT, SWAP and SWAP-then-CNOT at their known
//! coordinates, common practice).
//! A run of ZZ interactions on the same pair with single-qubit gates between them (a
//! SWAP next to a CNOT, a CNOT-Ry-CNOT) may spend more: the run is replaced by its
//! canonical form when that spends less interaction and no more interactions.
//!
//! The decomposition: in the magic basis `M` local unitaries are real orthogonal and
//! the canonical factor is diagonal; `U' = M^dagger U M = O1 D O2`, where `O2^T`
//! diagonalises the symmetric unitary `U'^T U'` (its real and imaginary parts commute,
//! so one real eigenbasis serves both) and `D^2` holds its eigenvalues.
//!
//! Invariant: the output is the input's unitary up to global phase (the pass checks
//! each replacement against the run before using it).

use super::dag::Dag;
use crate::circuit::mat2::{adjoint, identity, mul};
use crate::circuit::{Gate, GateKind, Mat2};
use crate::compile::lower::Canon;
use nalgebra::{Matrix2, Matrix4};
use num_complex::Complex64 as C64;
use std::f64::consts::{FRAC_1_SQRT_2, FRAC_PI_2};

type M4 = Matrix4<C64>;

fn c(re: f64, im: f64) -> C64 {
    C64::new(re, im)
}

/// The magic basis, columns `(|00>+|11>)/r2, i(|00>-|11>)/r2, i(|01>+|10>)/r2,
/// (|01>-|10>)/r2` (qubit `a` the high bit).
fn magic() -> M4 {
    let r = FRAC_1_SQRT_2;
    let (o, z, i) = (c(r, 0.0), c(0.0, 0.0), c(0.0, r));
    M4::new(o, i, z, z, z, z, i, o, z, z, i, -o, o, -i, z, z)
}

fn kron(a: &Mat2, b: &Mat2) -> M4 {
    M4::from_fn(|r, col| a[r / 2][col / 2] * b[r % 2][col % 2])
}

/// `exp(-i theta/2 Z_a Z_b)`.
fn zz(theta: f64) -> M4 {
    let p = C64::from_polar(1.0, -theta / 2.0);
    let m = C64::from_polar(1.0, theta / 2.0);
    M4::from_diagonal(&nalgebra::Vector4::new(p, m, m, p))
}

/// A canonical decomposition `((A1, B1), [c1, c2, c3], (A2, B2))`: the unitary
/// `(A1 x B1) exp(i (c1 XX + c2 YY + c3 ZZ)) (A2 x B2)`.
pub type Canonical = ((Mat2, Mat2), [f64; 3], (Mat2, Mat2));

/// X, Y and Z.
fn paulis() -> [Mat2; 3] {
    [GateKind::X, GateKind::Y, GateKind::Z].map(|k| Gate::new(k, &[]).matrix2().expect("a 2x2"))
}

/// A run's unitary, qubit `a` the high bit.
fn unitary(ops: &[Canon], a: u32) -> M4 {
    let mut u = M4::identity();
    for op in ops {
        let m = match *op {
            Canon::Local { q, m } if q == a => kron(&m, &identity()),
            Canon::Local { m, .. } => kron(&identity(), &m),
            Canon::Zz { theta, .. } => zz(theta),
            _ => unreachable!("runs hold gates only"),
        };
        u = m * u;
    }
    u
}

/// `|<u, v>| / 4`: 1 when `u` and `v` are equal up to global phase.
pub fn overlap(u: &M4, v: &M4) -> f64 {
    (u.adjoint() * v).trace().norm() / 4.0
}

/// Factors `k = A x B` (up to phase) into unitary 2x2 factors.
fn split(k: &M4) -> (Mat2, Mat2) {
    let block = |i: usize, j: usize| Matrix2::from_fn(|r, s| k[(2 * i + r, 2 * j + s)]);
    let (mut bi, mut bj, mut best) = (0, 0, -1.0);
    for i in 0..2 {
        for j in 0..2 {
            let n = block(i, j).norm();
            if n > best {
                (bi, bj, best) = (i, j, n);
            }
        }
    }
    let b = block(bi, bj);
    let bb = (b.adjoint() * b).trace();
    let mut a = Matrix2::from_fn(|i, j| (b.adjoint() * block(i, j)).trace() / bb);
    let mut b = b;
    let scale = a.determinant().norm().sqrt();
    a /= C64::from(scale);
    b *= C64::from(scale);
    let bs = b.determinant().norm().sqrt();
    b /= C64::from(bs);
    let to = |m: &Matrix2<C64>| [[m[(0, 0)], m[(0, 1)]], [m[(1, 0)], m[(1, 1)]]];
    (to(&a), to(&b))
}

/// The canonical decomposition of `u` (up to phase), each `c` in `[-pi/4, pi/4]`.
/// `None` if the numerics fail their own check.
pub fn canonical(u: &M4) -> Option<Canonical> {
    let m = magic();
    let det = u.determinant();
    let su = u * C64::from_polar(1.0, -det.arg() / 4.0);
    let up = m.adjoint() * su * m;
    let sym = up.transpose() * up;
    let re = sym.map(|z| z.re);
    let im = sym.map(|z| z.im);
    for r in [0.5731, 1.3179, -0.8123, 2.2713] {
        let eig = nalgebra::SymmetricEigen::new(re + im * r);
        let mut p = eig.eigenvectors;
        if p.determinant() < 0.0 {
            p.column_mut(0).neg_mut();
        }
        let pc = p.map(|x| c(x, 0.0));
        let d2 = pc.transpose() * sym * pc;
        let off: f64 = (0..4)
            .flat_map(|i| (0..4).filter(move |&j| j != i).map(move |j| (i, j)))
            .map(|(i, j)| d2[(i, j)].norm())
            .fold(0.0, f64::max);
        if off > 1e-9 {
            continue;
        }
        let mut theta: Vec<f64> = (0..4).map(|k| d2[(k, k)].arg() / 2.0).collect();
        let total: f64 = theta.iter().sum();
        // det D must be 1 for O1 to be a rotation: the sum of phases a multiple of 2 pi.
        let turns = (total / std::f64::consts::PI).round();
        if (turns as i64) % 2 != 0 {
            theta[0] += std::f64::consts::PI;
        }
        let d_inv = M4::from_diagonal(&nalgebra::Vector4::from_fn(|k, _| {
            C64::from_polar(1.0, -theta[k])
        }));
        let o1 = up * pc * d_inv;
        let k1 = m * o1 * m.adjoint();
        let k2 = m * pc.transpose() * m.adjoint();
        // Read c from theta: in the magic basis XX, YY, ZZ are diagonal (+-1).
        let [dx, dy, dz] = paulis().map(|p| (m.adjoint() * kron(&p, &p) * m).diagonal());
        let mut a = nalgebra::Matrix4::<f64>::zeros();
        for k in 0..4 {
            a[(k, 0)] = 1.0;
            a[(k, 1)] = dx[k].re;
            a[(k, 2)] = dy[k].re;
            a[(k, 3)] = dz[k].re;
        }
        let x = a.try_inverse()? * nalgebra::Vector4::from_fn(|k, _| theta[k]);
        let mut coeffs = [x[1], x[2], x[3]];
        let (mut a1, b1) = split(&k1);
        let (a2, b2) = split(&k2);
        // exp(i (c + n pi/2) PP) = exp(i c PP) (i PP)^n: for odd n a Pauli on each
        // qubit (and a phase), folded into A1 and B1.
        let mut b1 = b1;
        for (ck, p) in coeffs.iter_mut().zip(paulis()) {
            let n = (*ck / FRAC_PI_2).round();
            *ck -= n * FRAC_PI_2;
            if (n as i64) % 2 != 0 {
                a1 = mul(&a1, &p);
                b1 = mul(&b1, &p);
            }
        }
        let out = ((a1, b1), coeffs, (a2, b2));
        if overlap(u, &rebuild(&out)) > 1.0 - 1e-10 {
            return Some(out);
        }
    }
    None
}

/// The unitary a decomposition stands for.
fn rebuild(d: &Canonical) -> M4 {
    let ((a1, b1), cs, (a2, b2)) = d;
    let mut mid = M4::identity();
    for (p, &ck) in paulis().iter().zip(cs) {
        // exp(i c PP) = cos c + i sin c PP, as PP squares to one.
        mid *= M4::identity() * C64::from(ck.cos()) + kron(p, p) * c(0.0, ck.sin());
    }
    kron(a1, b1) * mid * kron(a2, b2)
}

/// The canonical operations for a decomposition on qubits `a` (high) and `b`.
fn emit(d: &Canonical, a: u32, b: u32) -> Vec<Canon> {
    let ((a1, b1), cs, (a2, b2)) = d;
    let h = Gate::new(GateKind::H, &[]).matrix2().expect("a 2x2");
    let s = Gate::new(GateKind::S, &[]).matrix2().expect("a 2x2");
    // W with W Z W^dagger = X, Y, Z: H, S H, the identity.
    let frames: [Mat2; 3] = [h, mul(&s, &h), identity()];
    let mut out = vec![Canon::Local { q: a, m: *a2 }, Canon::Local { q: b, m: *b2 }];
    for (w, &ck) in frames.iter().zip(cs) {
        if ck.abs() < 1e-12 {
            continue;
        }
        for q in [a, b] {
            out.push(Canon::Local { q, m: adjoint(w) });
        }
        out.push(Canon::Zz {
            a,
            b,
            theta: -2.0 * ck,
        });
        for q in [a, b] {
            out.push(Canon::Local { q, m: *w });
        }
    }
    out.push(Canon::Local { q: a, m: *a1 });
    out.push(Canon::Local { q: b, m: *b1 });
    out
}

/// The interaction a ZZ angle spends: `|theta/2|` reduced to at most pi/4.
fn spend(theta: f64) -> f64 {
    let w = theta / 2.0;
    (w - FRAC_PI_2 * (w / FRAC_PI_2).round()).abs()
}

/// Resynthesises one run (its ZZ interactions and the gates between them).
fn resynthesise(run: &[Canon], a: u32, b: u32) -> Option<Vec<Canon>> {
    let zzs: Vec<f64> = run
        .iter()
        .filter_map(|op| match *op {
            Canon::Zz { theta, .. } => Some(theta),
            _ => None,
        })
        .collect();
    if zzs.len() < 2 {
        return None;
    }
    let before: f64 = zzs.iter().map(|&t| spend(t)).sum();
    let u = unitary(run, a);
    let d = canonical(&u)?;
    let after: f64 = d.1.iter().map(|x| x.abs()).sum();
    let count = d.1.iter().filter(|x| x.abs() >= 1e-12).count();
    if after >= before - 1e-9 || count > zzs.len() {
        return None;
    }
    let new = emit(&d, a, b);
    // The operations themselves, not only the decomposition, must be the run.
    (overlap(&u, &unitary(&new, a)) > 1.0 - 1e-10).then_some(new)
}

/// A run of interactions on the pair `a < b`: its first and last operation (indices
/// into the pass's list), its last interaction and how many it holds.
struct Run {
    a: u32,
    b: u32,
    first: usize,
    tail: usize,
    last_zz: usize,
    zzs: usize,
}

/// Pass: each run of interactions on one pair, with only that pair's single-qubit
/// gates between them, is replaced by its canonical form when that spends less.
pub fn pair_runs(dag: &mut Dag) {
    // Runs are replaced where their last node stands: a built node.
    dag.settle();
    let nodes = dag.nodes();
    let op = |k: usize| dag.graph[nodes[k]];
    let n = nodes
        .iter()
        .flat_map(|&x| super::dag::qubits(&dag.graph[x]))
        .max()
        .map_or(0, |m| m as usize + 1);
    // Runs, each a list threaded through `next` (no list of its own: most runs
    // hold one interaction and are never resynthesised); each qubit's open run.
    // Every run is looked at once it can grow no more, in the order it began.
    let mut runs: Vec<Run> = Vec::new();
    let mut next = vec![usize::MAX; nodes.len()];
    let mut open: Vec<Option<usize>> = vec![None; n];
    let mut push = |run: &mut Run, k: usize, zz: bool| {
        next[run.tail] = k;
        run.tail = k;
        if zz {
            run.last_zz = k;
            run.zzs += 1;
        }
    };
    for k in 0..nodes.len() {
        match op(k) {
            Canon::Local { q, .. } => {
                if let Some(r) = open[q as usize] {
                    push(&mut runs[r], k, false);
                }
            }
            Canon::Zz { a, b, .. } => {
                match (open[a as usize], open[b as usize]) {
                    (Some(r), Some(s)) if r == s => {
                        push(&mut runs[r], k, true);
                        continue;
                    }
                    _ => {}
                }
                for q in [a, b] {
                    if let Some(r) = open[q as usize] {
                        open[runs[r].a as usize] = None;
                        open[runs[r].b as usize] = None;
                    }
                }
                open[a as usize] = Some(runs.len());
                open[b as usize] = Some(runs.len());
                runs.push(Run {
                    a: a.min(b),
                    b: a.max(b),
                    first: k,
                    tail: k,
                    last_zz: k,
                    zzs: 1,
                });
            }
            _ => unreachable!("segments hold gates only"),
        }
    }
    // A run of one interaction has nothing to resynthesise (`resynthesise` says
    // so too); the others up to their last interaction (the single-qubit gates
    // after it stay where they are). Runs share no node: replacing one leaves
    // the others' nodes as they were.
    let mut replaced = Vec::new();
    for run in runs.iter().filter(|run| run.zzs >= 2) {
        let mut idx = vec![run.first];
        while *idx.last().expect("a first") != run.last_zz {
            idx.push(next[*idx.last().expect("a first")]);
        }
        let body: Vec<Canon> = idx.iter().map(|&k| op(k)).collect();
        if let Some(new) = resynthesise(&body, run.a, run.b) {
            replaced.push((idx, new));
        }
    }
    for (idx, new) in replaced {
        let run: Vec<_> = idx.into_iter().map(|k| nodes[k]).collect();
        dag.replace(&run, &new);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use std::f64::consts::FRAC_PI_4;

    fn random_local(rng: &mut impl Rng) -> Mat2 {
        let (t, p, l) = (
            rng.gen_range(0.0..3.1),
            rng.gen_range(-3.1..3.1),
            rng.gen_range(-3.1..3.1),
        );
        crate::circuit::gates::zyz_matrix(t, p, l)
    }

    /// Random products of locals and interactions decompose, and the emitted
    /// operations rebuild the same unitary (up to phase), with each c in [-pi/4, pi/4].
    #[test]
    fn canonical_form_rebuilds_random_unitaries() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for trial in 0..200 {
            let mut ops = Vec::new();
            for _ in 0..rng.gen_range(1..5) {
                ops.push(Canon::Local {
                    q: 0,
                    m: random_local(&mut rng),
                });
                ops.push(Canon::Local {
                    q: 1,
                    m: random_local(&mut rng),
                });
                let theta = match trial % 3 {
                    0 => std::f64::consts::FRAC_PI_2 * rng.gen_range(-2..=2) as f64,
                    _ => rng.gen_range(-3.0..3.0),
                };
                ops.push(Canon::Zz { a: 0, b: 1, theta });
            }
            let u = unitary(&ops, 0);
            let d = canonical(&u).unwrap_or_else(|| panic!("trial {trial}"));
            assert!(d
                .1
                .iter()
                .all(|x| x.abs() <= std::f64::consts::FRAC_PI_4 + 1e-12));
            let v = unitary(&emit(&d, 0, 1), 0);
            assert!(overlap(&u, &v) > 1.0 - 1e-10, "trial {trial}");
        }
    }

    /// Known points (common practice): CNOT is (pi/4, 0, 0), SWAP is (pi/4, pi/4,
    /// pi/4) up to signs, and a SWAP followed by a CNOT on the same pair is (pi/4, pi/4, 0),
    /// iSWAP's class: two units of area instead of four.
    #[test]
    fn known_gates_have_their_coordinates() {
        let h = {
            let r = FRAC_1_SQRT_2;
            [[c(r, 0.0), c(r, 0.0)], [c(r, 0.0), c(-r, 0.0)]]
        };
        // CZ = ZZ(-pi/2) Rz(pi/2) Rz(pi/2) up to phase; CNOT = H_t CZ H_t.
        let rz = [
            [C64::from_polar(1.0, -FRAC_PI_4), c(0.0, 0.0)],
            [c(0.0, 0.0), C64::from_polar(1.0, FRAC_PI_4)],
        ];
        let cnot = |ops: &mut Vec<Canon>, t: u32| {
            ops.push(Canon::Local { q: t, m: h });
            ops.push(Canon::Zz {
                a: 0,
                b: 1,
                theta: -FRAC_PI_2,
            });
            ops.push(Canon::Local { q: 0, m: rz });
            ops.push(Canon::Local { q: 1, m: rz });
            ops.push(Canon::Local { q: t, m: h });
        };
        let cx = |ops: &mut Vec<Canon>| cnot(ops, 1);
        let cx_rev = |ops: &mut Vec<Canon>| cnot(ops, 0);
        let sorted = |ops: &[Canon]| {
            let d = canonical(&unitary(ops, 0)).unwrap();
            let mut v: Vec<f64> = d.1.iter().map(|x| x.abs()).collect();
            v.sort_by(|a, b| b.total_cmp(a));
            v
        };
        let q = std::f64::consts::FRAC_PI_4;
        let mut one = Vec::new();
        cx(&mut one);
        let v = sorted(&one);
        assert!(
            (v[0] - q).abs() < 1e-9 && v[1] < 1e-9 && v[2] < 1e-9,
            "{v:?}"
        );
        let mut swap = Vec::new();
        cx(&mut swap);
        cx_rev(&mut swap);
        cx(&mut swap);
        let v = sorted(&swap);
        assert!(v.iter().all(|x| (x - q).abs() < 1e-9), "{v:?}");
        cx(&mut swap);
        let v = sorted(&swap);
        assert!(
            (v[0] - q).abs() < 1e-9 && (v[1] - q).abs() < 1e-9 && v[2] < 1e-9,
            "{v:?}"
        );
    }
}
