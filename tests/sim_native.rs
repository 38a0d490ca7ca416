//! The native operations' unitaries and the facts of the native gate set that the
//! compiler rests on (docs/gate-set.md), checked against independent constructions.

use nalgebra::DMatrix;
use num_complex::Complex64 as C;
use rand::{Rng, SeedableRng};
use std::f64::consts::{FRAC_PI_2, FRAC_PI_4, PI};
use tutti::circuit::gates::embed;
use tutti::compile::hadamard::{is_hadamard, smallest_hadamard};
use tutti::native::{NativeOp, Sequence};
use tutti::sim::apply::{run_kernels, unitary_of};
use tutti::sim::{Kernel, Program, StateVector};

fn unitary(ops: &[NativeOp], n: usize) -> DMatrix<C> {
    let mut s = Sequence::new(n as u32, vec![]);
    for op in ops {
        s.push(*op);
    }
    let p = Program::from_sequence(&s);
    let kernels: Vec<Kernel> = p.kernels().cloned().collect();
    unitary_of(&kernels, n)
}

fn pauli(which: char) -> DMatrix<C> {
    let (z, o, i) = (C::new(0.0, 0.0), C::new(1.0, 0.0), C::new(0.0, 1.0));
    match which {
        'x' => DMatrix::from_row_slice(2, 2, &[z, o, o, z]),
        'y' => DMatrix::from_row_slice(2, 2, &[z, -i, i, z]),
        'z' => DMatrix::from_row_slice(2, 2, &[o, z, z, -o]),
        _ => DMatrix::identity(2, 2),
    }
}

/// `sigma_phi` on ion `j` of `n`, as a dense matrix.
fn sigma(phi: f64, j: usize, n: usize) -> DMatrix<C> {
    let s = pauli('x') * C::new(phi.cos(), 0.0) + pauli('y') * C::new(phi.sin(), 0.0);
    embed(&s, &[j], n)
}

/// `exp(-i h)` with nalgebra's general matrix exponential.
fn expm_minus_i(h: &DMatrix<C>) -> DMatrix<C> {
    (h * C::new(0.0, -1.0)).exp()
}

fn assert_close(a: &DMatrix<C>, b: &DMatrix<C>, what: &str) {
    let d = (a - b).norm();
    assert!(d < 1e-9, "{what}: distance {d}");
}

fn assert_equal_up_to_phase(a: &DMatrix<C>, b: &DMatrix<C>, what: &str) {
    let overlap = (a.adjoint() * b).trace().norm() / a.nrows() as f64;
    assert!((overlap - 1.0).abs() < 1e-9, "{what}: overlap {overlap}");
}

#[test]
fn native_unitaries_match_matrix_exponentials_of_their_hamiltonians() {
    // docs/gate-set.md definitions, exponentiated by nalgebra (a general-purpose
    // library), for 1 to 6 ions and random angles; phases included.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    for n in 1..=6usize {
        for _ in 0..3 {
            let (theta, phi) = (rng.gen_range(-PI..PI), rng.gen_range(-PI..PI));
            let ion = rng.gen_range(0..n);
            let s_phi = (0..n).fold(DMatrix::<C>::zeros(1 << n, 1 << n), |acc, j| {
                acc + sigma(phi, j, n)
            });
            let s_z = (0..n).fold(DMatrix::<C>::zeros(1 << n, 1 << n), |acc, j| {
                acc + embed(&pauli('z'), &[j], n)
            });
            let half = C::new(theta / 2.0, 0.0);
            let quarter = C::new(theta / 4.0, 0.0);
            let cases = [
                (
                    NativeOp::Collective { theta, phi },
                    expm_minus_i(&(&s_phi * half)),
                    "collective",
                ),
                (
                    NativeOp::LightShift {
                        ion: ion as u32,
                        theta,
                    },
                    expm_minus_i(&(embed(&pauli('z'), &[ion], n) * half)),
                    "light shift",
                ),
                (
                    NativeOp::Ms { theta, phi },
                    expm_minus_i(&(&s_phi * &s_phi * quarter)),
                    "global MS",
                ),
                (
                    NativeOp::Addressed {
                        ion: ion as u32,
                        theta,
                        phi,
                    },
                    expm_minus_i(&(sigma(phi, ion, n) * half)),
                    "addressed",
                ),
                (
                    NativeOp::VirtualZ { theta },
                    expm_minus_i(&(&s_z * half)),
                    "virtual Z",
                ),
            ];
            for (op, expected, what) in cases {
                assert_close(&unitary(&[op], n), &expected, &format!("{what}, n = {n}"));
            }
            if n >= 2 {
                let b = (ion + 1) % n;
                let pair = sigma(phi, ion, n) + sigma(phi, b, n);
                let op = NativeOp::PairMs {
                    a: ion as u32,
                    b: b as u32,
                    theta,
                    phi,
                };
                assert_close(
                    &unitary(&[op], n),
                    &expm_minus_i(&(&pair * &pair * quarter)),
                    "pair MS",
                );
            }
        }
    }
}

#[test]
fn hidden_ions_take_no_part_in_collective_and_ms_pulses() {
    let (theta, phi) = (0.7, 0.4);
    let n = 3;
    let with_hiding = unitary(
        &[
            NativeOp::Hide { ion: 1 },
            NativeOp::Ms { theta, phi },
            NativeOp::Collective { theta, phi },
            NativeOp::Unhide { ion: 1 },
        ],
        n,
    );
    let pair = sigma(phi, 0, n) + sigma(phi, 2, n);
    let expected =
        expm_minus_i(&((sigma(phi, 0, n) + sigma(phi, 2, n)) * C::new(theta / 2.0, 0.0)))
            * expm_minus_i(&(&pair * &pair * C::new(theta / 4.0, 0.0)));
    assert_close(&with_hiding, &expected, "hidden ion 1");
}

#[test]
fn fact_1_ms_is_a_pairwise_interaction_times_a_phase() {
    // Derived from S_phi^2 = n + 2 sum_{i<j} sigma_i sigma_j (sigma^2 = 1).
    for n in 2..=6usize {
        let (theta, phi) = (0.83, -1.1);
        let ms = unitary(&[NativeOp::Ms { theta, phi }], n);
        let mut h = DMatrix::<C>::zeros(1 << n, 1 << n);
        for i in 0..n {
            for j in i + 1..n {
                h += sigma(phi, i, n) * sigma(phi, j, n);
            }
        }
        let expected = expm_minus_i(&(h * C::new(theta / 2.0, 0.0)))
            * C::from_polar(1.0, -theta * n as f64 / 4.0);
        assert_close(&ms, &expected, &format!("fact 1, n = {n}"));
    }
}

#[test]
fn fact_2_one_pulse_makes_a_ghz_state_for_every_even_n_up_to_24() {
    // Molmer and Sorensen, PRL 82, 1835 (1999): MS(pi/2, 0)|0...0> is a GHZ state.
    // The phase e^{-i pi/4} (|0...0> + i (-1)^{n/2} |1...1>)/sqrt 2 is recomputed here
    // from the spectrum: S_x^2 on the Dicke components (derivation in the test body).
    for n in (2..=24usize).step_by(2) {
        let mut s = StateVector::zero(n);
        let k = Kernel::Ms {
            theta: FRAC_PI_2,
            phi: 0.0,
            qubits: (0..n).collect(),
        };
        run_kernels([&k], &mut s);
        let sign = if (n / 2) % 2 == 0 { 1.0 } else { -1.0 };
        let r = std::f64::consts::FRAC_1_SQRT_2;
        let front = C::from_polar(1.0, -FRAC_PI_4);
        let want0 = front * r;
        let want1 = front * C::new(0.0, sign * r);
        let last = (1usize << n) - 1;
        assert!(
            (s.amps[0] - want0).norm() < 1e-9,
            "n = {n}: |0...0> amplitude {}",
            s.amps[0]
        );
        assert!(
            (s.amps[last] - want1).norm() < 1e-9,
            "n = {n}: |1...1> amplitude {}",
            s.amps[last]
        );
        let rest: f64 = s
            .amps
            .iter()
            .enumerate()
            .filter(|(i, _)| *i != 0 && *i != last)
            .map(|(_, a)| a.norm_sqr())
            .sum();
        assert!(rest < 1e-18, "n = {n}: weight outside the GHZ pair {rest}");
    }
}

#[test]
fn fact_2_phase_independently_from_a_dense_exponential_for_small_n() {
    // Independent of the fast kernel: nalgebra's expm of -i pi/8 S_x^2 on |0...0>.
    for n in [2usize, 4, 6] {
        let s_x = (0..n).fold(DMatrix::<C>::zeros(1 << n, 1 << n), |acc, j| {
            acc + sigma(0.0, j, n)
        });
        let u = expm_minus_i(&(&s_x * &s_x * C::new(FRAC_PI_2 / 4.0, 0.0)));
        let sign = if (n / 2) % 2 == 0 { 1.0 } else { -1.0 };
        let front = C::from_polar(1.0, -FRAC_PI_4) * std::f64::consts::FRAC_1_SQRT_2;
        assert!((u[(0, 0)] - front).norm() < 1e-9);
        assert!((u[((1 << n) - 1, 0)] - front * C::new(0.0, sign)).norm() < 1e-9);
    }
}

#[test]
fn fact_3_cnot_from_one_xx_interaction() {
    // Maslov, New J. Phys. 19, 023035 (2017), from memory: in time order Ry_c(pi/2),
    // exp(-i pi/4 X_c X_t), Rx_c(-pi/2) and Rx_t(-pi/2), Ry_c(-pi/2) is e^{i pi/4} CNOT.
    let (c, t) = (0usize, 1usize);
    let ry = |a: f64| NativeOp::Addressed {
        ion: c as u32,
        theta: a,
        phi: FRAC_PI_2,
    };
    let ops = [
        ry(FRAC_PI_2),
        NativeOp::PairMs {
            a: 0,
            b: 1,
            theta: FRAC_PI_2,
            phi: 0.0,
        },
        NativeOp::Addressed {
            ion: c as u32,
            theta: -FRAC_PI_2,
            phi: 0.0,
        },
        NativeOp::Addressed {
            ion: t as u32,
            theta: -FRAC_PI_2,
            phi: 0.0,
        },
        ry(-FRAC_PI_2),
    ];
    // PairMs(pi/2) = e^{-i pi/4} exp(-i pi/4 X X) by fact 1 with n = 2.
    let u = unitary(&ops, 2) * C::from_polar(1.0, FRAC_PI_4);
    let cnot = tutti::circuit::Gate::new(tutti::circuit::GateKind::Cx, &[]).matrix();
    assert_close(&u, &(cnot * C::from_polar(1.0, FRAC_PI_4)), "fact 3");
}

#[test]
fn fact_4_an_addressed_y_rotation_from_two_collective_pulses_and_a_light_shift() {
    for n in 1..=5usize {
        for k in 0..n {
            let a = 0.37 + k as f64;
            let ops = [
                NativeOp::Collective {
                    theta: FRAC_PI_2,
                    phi: 0.0,
                },
                NativeOp::LightShift {
                    ion: k as u32,
                    theta: a,
                },
                NativeOp::Collective {
                    theta: -FRAC_PI_2,
                    phi: 0.0,
                },
            ];
            let expected = expm_minus_i(&(embed(&pauli('y'), &[k], n) * C::new(a / 2.0, 0.0)));
            assert_close(
                &unitary(&ops, n),
                &expected,
                &format!("fact 4, n = {n}, k = {k}"),
            );
        }
    }
}

#[test]
fn fact_5_light_shift_flips_change_the_signs_of_the_couplings() {
    let n = 4;
    let w = 0.41;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
    for _ in 0..6 {
        let s: Vec<f64> = (0..n)
            .map(|_| if rng.gen_bool(0.5) { 1.0 } else { -1.0 })
            .collect();
        let flips: Vec<NativeOp> = (0..n)
            .filter(|&k| s[k] < 0.0)
            .map(|k| NativeOp::LightShift {
                ion: k as u32,
                theta: PI,
            })
            .collect();
        let unflips: Vec<NativeOp> = (0..n)
            .filter(|&k| s[k] < 0.0)
            .map(|k| NativeOp::LightShift {
                ion: k as u32,
                theta: -PI,
            })
            .collect();
        // F_s^dagger, then the interaction, then F_s, in time order; MS(2w) has pair weight w.
        let mut ops = unflips.clone();
        ops.push(NativeOp::Ms {
            theta: 2.0 * w,
            phi: 0.0,
        });
        ops.extend(flips);
        let mut h = DMatrix::<C>::zeros(1 << n, 1 << n);
        for i in 0..n {
            for j in i + 1..n {
                h += sigma(0.0, i, n) * sigma(0.0, j, n) * C::new(s[i] * s[j], 0.0);
            }
        }
        assert_equal_up_to_phase(
            &unitary(&ops, n),
            &expm_minus_i(&(h * C::new(w, 0.0))),
            "fact 5",
        );
    }
}

/// The sign-vector echo of gate-set fact 6: isolates the pair (a, b) with couplings
/// exp(-i theta/2 X_a X_b) among n ions using the rows of a Hadamard matrix.
fn echo(n: usize, a: usize, b: usize, theta: f64) -> Vec<NativeOp> {
    let h = smallest_hadamard(n - 1);
    let m = h.len();
    let mut column = vec![0usize; n];
    let mut next = 1;
    for (ion, col) in column.iter_mut().enumerate() {
        if ion == a || ion == b {
            *col = 0;
        } else {
            *col = next;
            next += 1;
        }
    }
    let mut ops = Vec::new();
    for row in h.iter() {
        let flipped: Vec<usize> = (0..n).filter(|&i| row[column[i]] < 0).collect();
        ops.extend(flipped.iter().map(|&i| NativeOp::LightShift {
            ion: i as u32,
            theta: PI,
        }));
        ops.push(NativeOp::Ms {
            theta: theta / m as f64,
            phi: 0.0,
        });
        ops.extend(flipped.iter().map(|&i| NativeOp::LightShift {
            ion: i as u32,
            theta: -PI,
        }));
    }
    ops
}

#[test]
fn fact_6_sign_vector_echo_isolates_one_pair() {
    for (n, a, b) in [(3usize, 0usize, 2usize), (5, 1, 3), (5, 4, 0)] {
        let theta = 0.9;
        let u = unitary(&echo(n, a, b, theta), n);
        let xx = sigma(0.0, a, n) * sigma(0.0, b, n);
        assert_equal_up_to_phase(
            &u,
            &expm_minus_i(&(xx * C::new(theta / 2.0, 0.0))),
            &format!("fact 6, n = {n}"),
        );
    }
}

#[test]
fn hadamard_constructions_are_hadamard() {
    for k in 1..=48 {
        let h = smallest_hadamard(k);
        assert!(h.len() >= k && is_hadamard(&h), "order {}", h.len());
    }
    assert_eq!(smallest_hadamard(39).len(), 40);
    assert_eq!(smallest_hadamard(11).len(), 12);
}
