//! The gate library against outside definitions.
//!
//! 1. The standard library bodies of arXiv:1707.03429 (Cross, Bishop, Smolin,
//!    Gambetta, "Open Quantum Assembly Language", `qelib1.inc`), written down here
//!    from memory under `ref_` names and expanded by tutti down to the built-ins `U`
//!    and `CX`. `U(theta,phi,lambda)` is built in this file as `Rz(phi) Ry(theta)
//!    Rz(lambda)` exactly as the standard defines it, independently of the library.
//! 2. The matrices printed in Nielsen and Chuang, Quantum Computation and Quantum
//!    Information (Fig. 4.2 and section 4.3), typed in here.

mod common;

use approx::assert_abs_diff_eq;
use nalgebra::DMatrix;
use num_complex::Complex64 as C;
use std::f64::consts::PI;
use tutti::circuit::gates::embed;
use tutti::circuit::{Gate, GateKind, Op};

fn c(re: f64, im: f64) -> C {
    C::new(re, im)
}

/// `Rz(a) = diag(e^{-ia/2}, e^{ia/2})`, `Ry(a) = [[cos, -sin], [sin, cos]]` (half angles).
fn standard_u(theta: f64, phi: f64, lambda: f64) -> DMatrix<C> {
    let rz = |a: f64| {
        DMatrix::from_row_slice(
            2,
            2,
            &[
                C::from_polar(1.0, -a / 2.0),
                c(0.0, 0.0),
                c(0.0, 0.0),
                C::from_polar(1.0, a / 2.0),
            ],
        )
    };
    let (s, co) = (theta / 2.0).sin_cos();
    let ry = DMatrix::from_row_slice(2, 2, &[c(co, 0.0), c(-s, 0.0), c(s, 0.0), c(co, 0.0)]);
    rz(phi) * ry * rz(lambda)
}

/// CX with the control as argument 0 (bit 0), as tutti's convention says.
fn standard_cx() -> DMatrix<C> {
    DMatrix::from_fn(4, 4, |i, j| {
        let image = if j & 1 == 1 { j ^ 2 } else { j };
        if i == image {
            c(1.0, 0.0)
        } else {
            c(0.0, 0.0)
        }
    })
}

/// The unitary of a circuit that uses only `U` and `CX`, composed from the
/// definitions above.
fn reference_unitary(circuit: &tutti::circuit::Circuit) -> DMatrix<C> {
    let n = circuit.n_qubits() as usize;
    let mut u = DMatrix::<C>::identity(1 << n, 1 << n);
    for instr in &circuit.instrs {
        let Op::Gate { gate, qubits } = &instr.op else {
            continue;
        };
        let qs: Vec<usize> = qubits.iter().map(|q| q.0 as usize).collect();
        let m = match gate.kind {
            GateKind::BuiltinU => standard_u(gate.params[0], gate.params[1], gate.params[2]),
            GateKind::BuiltinCx => standard_cx(),
            other => panic!("reference expanded to {other:?}"),
        };
        u = embed(&m, &qs, n) * u;
    }
    u
}

/// `a = e^{i g} b` for some `g`: the overlap `|tr(a^dagger b)| / d` is one.
fn assert_equal_up_to_phase(a: &DMatrix<C>, b: &DMatrix<C>, what: &str) {
    assert_eq!(a.shape(), b.shape(), "{what}: shapes");
    let d = a.nrows() as f64;
    let overlap = (a.adjoint() * b).trace().norm() / d;
    assert!(
        (overlap - 1.0).abs() < 1e-10,
        "{what}: overlap {overlap}\nlibrary {a}\nreference {b}"
    );
}

const REFERENCE_LIBRARY: &str = r#"
OPENQASM 2.0;
gate ref_u3(theta,phi,lambda) q { U(theta,phi,lambda) q; }
gate ref_u2(phi,lambda) q { U(pi/2,phi,lambda) q; }
gate ref_u1(lambda) q { U(0,0,lambda) q; }
gate ref_cx c,t { CX c,t; }
gate ref_id a { U(0,0,0) a; }
gate ref_x a { ref_u3(pi,0,pi) a; }
gate ref_y a { ref_u3(pi,pi/2,pi/2) a; }
gate ref_z a { ref_u1(pi) a; }
gate ref_h a { ref_u2(0,pi) a; }
gate ref_s a { ref_u1(pi/2) a; }
gate ref_sdg a { ref_u1(-pi/2) a; }
gate ref_t a { ref_u1(pi/4) a; }
gate ref_tdg a { ref_u1(-pi/4) a; }
gate ref_rx(theta) a { ref_u3(theta,-pi/2,pi/2) a; }
gate ref_ry(theta) a { ref_u3(theta,0,0) a; }
gate ref_rz(phi) a { ref_u1(phi) a; }
gate ref_cz a,b { ref_h b; ref_cx a,b; ref_h b; }
gate ref_cy a,b { ref_sdg b; ref_cx a,b; ref_s b; }
gate ref_ch a,b { ref_h b; ref_sdg b; ref_cx a,b; ref_h b; ref_t b; ref_cx a,b; ref_t b; ref_h b; ref_s b; ref_x b; ref_s a; }
gate ref_ccx a,b,c { ref_h c; ref_cx b,c; ref_tdg c; ref_cx a,c; ref_t c; ref_cx b,c; ref_tdg c; ref_cx a,c; ref_t b; ref_t c; ref_h c; ref_cx a,b; ref_t a; ref_tdg b; ref_cx a,b; }
gate ref_crz(lambda) a,b { ref_u1(lambda/2) b; ref_cx a,b; ref_u1(-lambda/2) b; ref_cx a,b; }
gate ref_cu1(lambda) a,b { ref_u1(lambda/2) a; ref_cx a,b; ref_u1(-lambda/2) b; ref_cx a,b; ref_u1(lambda/2) b; }
gate ref_cu3(theta,phi,lambda) c,t { ref_u1((lambda-phi)/2) t; ref_cx c,t; ref_u3(-theta/2,0,-(phi+lambda)/2) t; ref_cx c,t; ref_u3(theta/2,phi,0) t; }
gate ref_sx a { ref_sdg a; ref_h a; ref_sdg a; }
gate ref_sxdg a { ref_s a; ref_h a; ref_s a; }
gate ref_p(lambda) q { U(0,0,lambda) q; }
gate ref_u(theta,phi,lambda) q { U(theta,phi,lambda) q; }
gate ref_cp(lambda) a,b { ref_p(lambda/2) a; ref_cx a,b; ref_p(-lambda/2) b; ref_cx a,b; ref_p(lambda/2) b; }
gate ref_swap a,b { ref_cx a,b; ref_cx b,a; ref_cx a,b; }
gate ref_cswap a,b,c { ref_cx c,b; ref_ccx a,b,c; ref_cx c,b; }
gate ref_crx(lambda) a,b { ref_u1(pi/2) b; ref_cx a,b; ref_u3(-lambda/2,0,0) b; ref_cx a,b; ref_u3(lambda/2,-pi/2,0) b; }
gate ref_cry(lambda) a,b { ref_ry(lambda/2) b; ref_cx a,b; ref_ry(-lambda/2) b; ref_cx a,b; }
gate ref_rzz(theta) a,b { ref_cx a,b; ref_u1(theta) b; ref_cx a,b; }
gate ref_rxx(theta) a,b { ref_h a; ref_h b; ref_rzz(theta) a,b; ref_h a; ref_h b; }
gate ref_ryy(theta) a,b { ref_sdg a; ref_sdg b; ref_rxx(theta) a,b; ref_s a; ref_s b; }
gate ref_rccx a,b,c { ref_u2(0,pi) c; ref_u1(pi/4) c; ref_cx b,c; ref_u1(-pi/4) c; ref_cx a,c; ref_u1(pi/4) c; ref_cx b,c; ref_u1(-pi/4) c; ref_u2(0,pi) c; }
"#;

#[test]
fn library_gates_match_the_standard_bodies() {
    // arXiv:1707.03429 qelib1.inc for the 2017 names; the later library file for the
    // rest (from memory). rxx and ryy use the identities XX = (H H) ZZ (H H) and
    // YY = (S S) XX (S^dagger S^dagger) (common practice).
    let params = [0.731, -1.234, 2.468];
    let mut checked = 0;
    for &kind in GateKind::ALL {
        if matches!(
            kind,
            GateKind::BuiltinU | GateKind::BuiltinCx | GateKind::C3x | GateKind::C4x
        ) {
            continue;
        }
        let n = kind.n_qubits();
        let args: Vec<String> = (0..n).map(|i| format!("q[{i}]")).collect();
        let ps: Vec<String> = params[..kind.n_params()]
            .iter()
            .map(|p| p.to_string())
            .collect();
        let call = |name: &str| {
            if ps.is_empty() {
                format!("{name} {};", args.join(","))
            } else {
                format!("{name}({}) {};", ps.join(","), args.join(","))
            }
        };
        let reference = format!(
            "{REFERENCE_LIBRARY}\nqreg q[{n}];\n{}\n",
            call(&format!("ref_{}", kind.name()))
        );
        let out = tutti::qasm::read_str("reference.qasm", &reference);
        let rendered = out.render();
        let circuit = out.circuit.unwrap_or_else(|| panic!("{rendered}"));
        let expected = reference_unitary(&circuit);
        let gate = Gate::new(kind, &params[..kind.n_params()]);
        let qubits: Vec<usize> = (0..n).collect();
        let actual = embed(&gate.matrix(), &qubits, n);
        assert_equal_up_to_phase(&actual, &expected, kind.name());
        checked += 1;
    }
    assert_eq!(checked, GateKind::ALL.len() - 4);
}

#[test]
fn cu3_is_controlled_zyz_as_the_2017_body_makes_it() {
    // The deliberate choice written in grammar/qasm2.ebnf: cu3 controls the
    // standard's Rz(phi) Ry(theta) Rz(lambda), so on the control's |1> block the
    // phase is e^{-i(phi+lambda)/2} relative to u3's matrix. This is a relative phase
    // between the control's |0> and |1> blocks, so it is visible up to global phase.
    let (t, p, l) = (0.4, 1.1, -0.3);
    let m = Gate::new(GateKind::Cu3, &[t, p, l]).matrix();
    let u3 = Gate::new(GateKind::U3, &[t, p, l]).matrix();
    let phase = C::from_polar(1.0, -(p + l) / 2.0);
    for (i, j) in [(0usize, 0usize), (0, 1), (1, 0), (1, 1)] {
        assert_abs_diff_eq!(
            m[(1 + 2 * i, 1 + 2 * j)].re,
            (phase * u3[(i, j)]).re,
            epsilon = 1e-12
        );
        assert_abs_diff_eq!(
            m[(1 + 2 * i, 1 + 2 * j)].im,
            (phase * u3[(i, j)]).im,
            epsilon = 1e-12
        );
    }
    assert_abs_diff_eq!(m[(0, 0)].re, 1.0, epsilon = 1e-12);
    assert_abs_diff_eq!(m[(2, 2)].re, 1.0, epsilon = 1e-12);
}

/// Converts Nielsen and Chuang's ordering (first qubit most significant) to ours.
fn from_big_endian(m: &DMatrix<C>, n: usize) -> DMatrix<C> {
    let rev = |x: usize| (0..n).fold(0, |acc, b| acc | (((x >> b) & 1) << (n - 1 - b)));
    DMatrix::from_fn(1 << n, 1 << n, |i, j| m[(rev(i), rev(j))])
}

fn real_matrix(n: usize, rows: &[f64]) -> DMatrix<C> {
    DMatrix::from_row_slice(n, n, &rows.iter().map(|&x| c(x, 0.0)).collect::<Vec<_>>())
}

#[test]
fn common_gates_match_nielsen_and_chuang() {
    // Nielsen and Chuang, Fig. 4.2 (single-qubit gates), Fig. 1.6 / section 4.3
    // (CNOT, controlled-Z, swap, Toffoli). Exact equality, not up to phase.
    let r = 1.0 / 2f64.sqrt();
    let cases: Vec<(GateKind, DMatrix<C>)> = vec![
        (GateKind::H, real_matrix(2, &[r, r, r, -r])),
        (GateKind::X, real_matrix(2, &[0.0, 1.0, 1.0, 0.0])),
        (
            GateKind::Y,
            DMatrix::from_row_slice(2, 2, &[c(0.0, 0.0), c(0.0, -1.0), c(0.0, 1.0), c(0.0, 0.0)]),
        ),
        (GateKind::Z, real_matrix(2, &[1.0, 0.0, 0.0, -1.0])),
        (
            GateKind::S,
            DMatrix::from_row_slice(2, 2, &[c(1.0, 0.0), c(0.0, 0.0), c(0.0, 0.0), c(0.0, 1.0)]),
        ),
        (
            GateKind::T,
            DMatrix::from_row_slice(
                2,
                2,
                &[
                    c(1.0, 0.0),
                    c(0.0, 0.0),
                    c(0.0, 0.0),
                    C::from_polar(1.0, PI / 4.0),
                ],
            ),
        ),
    ];
    for (kind, expected) in cases {
        let m = Gate::new(kind, &[]).matrix();
        assert!((m - &expected).norm() < 1e-12, "{}", kind.name());
    }
    let cnot = real_matrix(
        4,
        &[
            1., 0., 0., 0., 0., 1., 0., 0., 0., 0., 0., 1., 0., 0., 1., 0.,
        ],
    );
    let cz = real_matrix(
        4,
        &[
            1., 0., 0., 0., 0., 1., 0., 0., 0., 0., 1., 0., 0., 0., 0., -1.,
        ],
    );
    let swap = real_matrix(
        4,
        &[
            1., 0., 0., 0., 0., 0., 1., 0., 0., 1., 0., 0., 0., 0., 0., 1.,
        ],
    );
    let mut toffoli = DMatrix::<C>::identity(8, 8);
    toffoli[(6, 6)] = c(0.0, 0.0);
    toffoli[(7, 7)] = c(0.0, 0.0);
    toffoli[(6, 7)] = c(1.0, 0.0);
    toffoli[(7, 6)] = c(1.0, 0.0);
    for (kind, expected, n) in [
        (GateKind::Cx, cnot, 2),
        (GateKind::Cz, cz, 2),
        (GateKind::Swap, swap, 2),
        (GateKind::Ccx, toffoli, 3),
    ] {
        let m = Gate::new(kind, &[]).matrix();
        assert!(
            (m - from_big_endian(&expected, n)).norm() < 1e-12,
            "{}",
            kind.name()
        );
    }
}

#[test]
fn rotations_match_nielsen_and_chuang_exponentials() {
    // Nielsen and Chuang eq. 4.4-4.6: R_x(t) = exp(-i t X/2) etc., built here with
    // nalgebra's matrix exponential; rzz/rxx as exp(-i t/2 P P) (common practice).
    let t = 0.917;
    let pauli = |k: GateKind| Gate::new(k, &[]).matrix();
    let expm = |h: DMatrix<C>| (h * c(0.0, -t / 2.0)).exp();
    let kron = |a: &DMatrix<C>, b: &DMatrix<C>| b.kronecker(a); // a on bit 0
    let cases = [
        (GateKind::Rx, expm(pauli(GateKind::X))),
        (GateKind::Ry, expm(pauli(GateKind::Y))),
        (GateKind::Rz, expm(pauli(GateKind::Z))),
        (
            GateKind::Rxx,
            expm(kron(&pauli(GateKind::X), &pauli(GateKind::X))),
        ),
        (
            GateKind::Ryy,
            expm(kron(&pauli(GateKind::Y), &pauli(GateKind::Y))),
        ),
        (
            GateKind::Rzz,
            expm(kron(&pauli(GateKind::Z), &pauli(GateKind::Z))),
        ),
    ];
    for (kind, expected) in cases {
        let m = Gate::new(kind, &[t]).matrix();
        assert!((m - expected).norm() < 1e-10, "{}", kind.name());
    }
}

#[test]
fn multi_controlled_x_flips_the_last_argument_when_all_others_are_one() {
    // Definition of C^k X (Barenco et al., PRA 52, 3457, 1995, section 2).
    for (kind, n) in [(GateKind::Ccx, 3), (GateKind::C3x, 4), (GateKind::C4x, 5)] {
        let m = Gate::new(kind, &[]).matrix();
        let controls = (1usize << (n - 1)) - 1;
        for j in 0..1usize << n {
            let image = if j & controls == controls {
                j ^ (1 << (n - 1))
            } else {
                j
            };
            for i in 0..1usize << n {
                let want = if i == image { 1.0 } else { 0.0 };
                assert!(
                    (m[(i, j)] - c(want, 0.0)).norm() < 1e-12,
                    "{} at ({i},{j})",
                    kind.name()
                );
            }
        }
    }
}

#[test]
fn rccx_is_toffoli_up_to_a_relative_phase() {
    // The relative-phase Toffoli (Maslov, PRA 93, 022311, 2016, from memory) differs
    // from the Toffoli by a diagonal: rccx * ccx^dagger is diagonal with unit entries.
    let d =
        Gate::new(GateKind::Rccx, &[]).matrix() * Gate::new(GateKind::Ccx, &[]).matrix().adjoint();
    for i in 0..8 {
        for j in 0..8 {
            let want = if i == j { 1.0 } else { 0.0 };
            assert!((d[(i, j)].norm() - want).abs() < 1e-12);
        }
    }
}

#[test]
fn every_gate_is_unitary_and_diagonal_kinds_are_diagonal() {
    for &kind in GateKind::ALL {
        let g = Gate::new(kind, &[0.3, 0.7, -1.9]);
        let m = g.matrix();
        let dim = m.nrows();
        assert_eq!(dim, 1 << kind.n_qubits());
        assert!(
            (m.adjoint() * &m - DMatrix::<C>::identity(dim, dim)).norm() < 1e-12,
            "{}",
            kind.name()
        );
        if kind.is_diagonal() {
            for i in 0..dim {
                for j in 0..dim {
                    if i != j {
                        assert!(m[(i, j)].norm() < 1e-15, "{} not diagonal", kind.name());
                    }
                }
            }
        }
    }
}
