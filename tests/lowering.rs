//! Lowering to the canonical form (single-qubit unitaries and ZZ interactions) keeps
//! the unitary of every library gate, checked by the statevector checker.

use rand::{Rng, SeedableRng};
use tutti::circuit::{Gate, GateKind};
use tutti::compile::lower::{lower, zyz, Canon};
use tutti::sim::apply::unitary_of;
use tutti::sim::program::z_rotation;
use tutti::sim::Kernel;

fn canon_kernels(c: &tutti::circuit::Circuit) -> Vec<Kernel> {
    lower(c)
        .unwrap()
        .into_iter()
        .map(|s| match s.op {
            Canon::Local { q, m } => Kernel::One { q: q as usize, m },
            Canon::Zz { a, b, theta } => Kernel::Ising {
                axis: None,
                terms: vec![(a as usize, b as usize, theta / 2.0)],
            },
            other => panic!("unitary gates lower to unitary operations, got {other:?}"),
        })
        .collect()
}

#[test]
fn every_library_gate_lowers_to_the_same_unitary() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1995);
    for &kind in GateKind::ALL {
        for _ in 0..4 {
            let params: Vec<f64> = (0..kind.n_params())
                .map(|_| rng.gen_range(-3.2..3.2))
                .collect();
            let n = kind.n_qubits();
            let mut c = tutti::circuit::Circuit::with_registers(n as u32, 0);
            let mut order: Vec<u32> = (0..n as u32).collect();
            order.reverse();
            c.push(tutti::circuit::Op::Gate {
                gate: Gate::new(kind, &params),
                qubits: order.iter().map(|&q| tutti::circuit::Qubit(q)).collect(),
            });
            let reference = unitary_of(
                &tutti::sim::Program::from_circuit(&c)
                    .unwrap()
                    .kernels()
                    .cloned()
                    .collect::<Vec<_>>(),
                n,
            );
            let lowered = unitary_of(&canon_kernels(&c), n);
            let overlap = (reference.adjoint() * lowered).trace().norm() / (1 << n) as f64;
            assert!(
                (overlap - 1.0).abs() < 1e-9,
                "{} {params:?}: overlap {overlap}",
                kind.name()
            );
        }
    }
}

#[test]
fn zyz_angles_rebuild_random_unitaries() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
    for _ in 0..200 {
        let (t, p, l, g) = (
            rng.gen_range(0.0..3.2),
            rng.gen_range(-3.2..3.2),
            rng.gen_range(-3.2..3.2),
            rng.gen_range(-3.2..3.2),
        );
        let mut m = Gate::new(GateKind::U3, &[t, p, l]).matrix2().unwrap();
        for row in m.iter_mut() {
            for x in row.iter_mut() {
                *x *= num_complex::Complex64::from_polar(1.0, g);
            }
        }
        let (alpha, beta, gamma, delta) = zyz(&m);
        let ry = Gate::new(GateKind::Ry, &[gamma]).matrix2().unwrap();
        let (rb, rd) = (z_rotation(beta), z_rotation(delta));
        let mul = |a: &[[num_complex::Complex64; 2]; 2], b: &[[num_complex::Complex64; 2]; 2]| {
            let mut o = [[num_complex::Complex64::new(0.0, 0.0); 2]; 2];
            for i in 0..2 {
                for j in 0..2 {
                    o[i][j] = a[i][0] * b[0][j] + a[i][1] * b[1][j];
                }
            }
            o
        };
        let rebuilt = mul(&mul(&rb, &ry), &rd);
        for i in 0..2 {
            for j in 0..2 {
                let want = m[i][j];
                let got = rebuilt[i][j] * num_complex::Complex64::from_polar(1.0, alpha);
                assert!((want - got).norm() < 1e-9, "{m:?} vs {rebuilt:?}");
            }
        }
    }
}
