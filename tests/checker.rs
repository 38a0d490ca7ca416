//! The equivalence checker: it catches small changes in every mode, accepts equal
//! programs written differently, and its modes agree with each other.

mod common;

use common::{program, qasm};
use rand::{Rng, SeedableRng};
use std::f64::consts::PI;
use tutti::native::{NativeOp, Sequence};
use tutti::sim::{check, CheckConfig, CheckError, Mode, Program};

fn verdict(a: &str, b: &str, mode: Mode) -> Result<bool, CheckError> {
    let cfg = CheckConfig {
        mode,
        ..CheckConfig::default()
    };
    check(&program(a), &program(b), &cfg).map(|v| v.equivalent)
}

const BASE: &str =
    "h q[0]; cx q[0],q[1]; t q[1]; rz(0.7) q[2]; cx q[1],q[2]; ry(0.3) q[3]; cz q[3],q[4]; s q[4];";

#[test]
fn every_mode_catches_small_changes_and_accepts_equal_rewrites() {
    let base = qasm(5, BASE);
    let angle_off = qasm(5, &BASE.replace("rz(0.7)", "rz(0.701)"));
    let dropped = qasm(5, &BASE.replace("t q[1];", ""));
    let exchanged = qasm(
        5,
        &BASE.replace("cz q[3],q[4]; s q[4];", "cz q[3],q[4]; s q[3];"),
    );
    let reordered = qasm(5, "rz(0.7) q[2]; ry(0.3) q[3]; h q[0]; cx q[0],q[1]; t q[1]; cx q[1],q[2]; cz q[3],q[4]; s q[4];");
    let cnot_as_hczh = qasm(
        5,
        &BASE.replace("cx q[0],q[1];", "h q[1]; cz q[0],q[1]; h q[1];"),
    );
    for mode in [Mode::Auto, Mode::Unitary, Mode::Random] {
        assert_eq!(verdict(&base, &base, mode), Ok(true), "{mode:?}: itself");
        assert_eq!(
            verdict(&base, &reordered, mode),
            Ok(true),
            "{mode:?}: commuting gates swapped"
        );
        assert_eq!(
            verdict(&base, &cnot_as_hczh, mode),
            Ok(true),
            "{mode:?}: CNOT as H CZ H"
        );
        assert_eq!(
            verdict(&base, &angle_off, mode),
            Ok(false),
            "{mode:?}: angle off by 1e-3"
        );
        assert_eq!(
            verdict(&base, &dropped, mode),
            Ok(false),
            "{mode:?}: gate dropped"
        );
        assert_eq!(
            verdict(&base, &exchanged, mode),
            Ok(false),
            "{mode:?}: qubits exchanged"
        );
    }
    // Tableau mode: the 1e-3 change makes the program non-Clifford, which tableau mode
    // does not read as a Clifford (it is then proven different with qubits held as
    // fields, module `fields`); the Clifford changes are decided.
    let cliff =
        "h q[0]; cx q[0],q[1]; s q[1]; cx q[1],q[2]; cz q[3],q[4]; sdg q[4]; swap q[2],q[3];";
    let base = qasm(5, cliff);
    assert_eq!(
        verdict(
            &base,
            &qasm(5, &cliff.replace("s q[1];", "rz(0.001) q[1]; s q[1];")),
            Mode::Tableau
        ),
        Ok(false)
    );
    assert_eq!(
        verdict(
            &base,
            &qasm(5, &cliff.replace("s q[1];", "")),
            Mode::Tableau
        ),
        Ok(false)
    );
    assert_eq!(
        verdict(
            &base,
            &qasm(5, &cliff.replace("sdg q[4];", "sdg q[3];")),
            Mode::Tableau
        ),
        Ok(false)
    );
    assert_eq!(
        verdict(
            &base,
            &qasm(
                5,
                &cliff.replace("cx q[0],q[1];", "h q[1]; cz q[0],q[1]; h q[1];")
            ),
            Mode::Tableau
        ),
        Ok(true)
    );
    assert_eq!(
        verdict(&base, &qasm(5, "h q[0]; cz q[3],q[4]; cx q[0],q[1]; s q[1]; sdg q[4]; cx q[1],q[2]; swap q[2],q[3];"), Mode::Tableau),
        Ok(true)
    );
}

fn random_clifford(n: usize, len: usize, rng: &mut impl Rng) -> Vec<String> {
    let one = ["h", "s", "sdg", "x", "y", "z", "sx"];
    let two = ["cx", "cz", "cy", "swap"];
    (0..len)
        .map(|_| {
            if n > 1 && rng.gen_bool(0.4) {
                let a = rng.gen_range(0..n);
                let b = (a + rng.gen_range(1..n)) % n;
                format!("{} q[{a}],q[{b}];", two[rng.gen_range(0..two.len())])
            } else {
                format!(
                    "{} q[{}];",
                    one[rng.gen_range(0..one.len())],
                    rng.gen_range(0..n)
                )
            }
        })
        .collect()
}

#[test]
fn tableau_agrees_with_statevector_modes_on_random_clifford_circuits() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2004);
    let mut decided = [0usize; 2];
    for n in 1..=12usize {
        for _ in 0..6 {
            let gates = random_clifford(n, 4 * n + 4, &mut rng);
            let mut other = gates.clone();
            if rng.gen_bool(0.5) {
                // An equal rewrite: every cx as h cz h.
                for g in other.iter_mut() {
                    if let Some(rest) = g.strip_prefix("cx ") {
                        let t = rest
                            .split(',')
                            .nth(1)
                            .unwrap()
                            .trim_end_matches(';')
                            .to_string();
                        *g = format!("h {t}; cz {}; h {t};", rest.trim_end_matches(';'));
                    }
                }
            } else {
                let i = rng.gen_range(0..other.len());
                other[i] = random_clifford(n, 1, &mut rng).remove(0);
            }
            let (a, b) = (qasm(n, &gates.join("\n")), qasm(n, &other.join("\n")));
            let t = verdict(&a, &b, Mode::Tableau).unwrap();
            let s = verdict(&a, &b, if n <= 8 { Mode::Unitary } else { Mode::Random }).unwrap();
            assert_eq!(t, s, "n = {n}\n{a}\n{b}");
            decided[t as usize] += 1;
        }
    }
    assert!(
        decided[0] > 5 && decided[1] > 5,
        "both outcomes occur: {decided:?}"
    );
}

#[test]
fn tableau_decides_a_200_qubit_ghz_preparation_pair() {
    let n = 200;
    let chain: String = (0..n - 1)
        .map(|i| format!("cx q[{i}],q[{}];\n", i + 1))
        .collect();
    // The same state by doubling: qubit i copies to i + span.
    let mut tree = String::new();
    let mut span = 1;
    while span < n {
        for i in 0..span.min(n - span) {
            tree.push_str(&format!("cx q[{i}],q[{}];\n", i + span));
        }
        span *= 2;
    }
    let prep_chain = qasm(n, &format!("h q[0];\n{chain}"));
    let prep_tree = qasm(n, &format!("h q[0];\n{tree}"));
    // As unitaries these differ; as preparations from |0...0> they agree. The checker
    // compares unitaries, so compare each against itself rewritten and against the other.
    let cfg = CheckConfig::default();
    let v = check(
        &program(&prep_chain),
        &program(&prep_chain.replace("cx q[7],q[8];", "h q[8]; cz q[7],q[8]; h q[8];")),
        &cfg,
    )
    .unwrap();
    assert!(v.equivalent && v.mode == Mode::Tableau && v.qubits == 200);
    let v = check(&program(&prep_chain), &program(&prep_tree), &cfg).unwrap();
    assert!(!v.equivalent, "chain and tree differ as unitaries");
    // Undoing the tree after the chain leaves a circuit that maps |0...0> to itself; the
    // full unitaries of "tree, then chain reversed" and "identity" still differ, so the
    // useful pair is the tree against its own reversal-and-redo.
    let mut reversed: Vec<&str> = tree.lines().collect();
    reversed.reverse();
    let redo = format!("h q[0];\n{}\n{}\n{}", tree, reversed.join("\n"), tree);
    let v = check(&program(&prep_tree), &program(&qasm(n, &redo)), &cfg).unwrap();
    assert!(v.equivalent && v.mode == Mode::Tableau);
}

/// The sign-vector echo of gate-set fact 6 on `n` ions for the pair (a, b).
fn echo_sequence(n: usize, a: usize, b: usize, theta: f64) -> Sequence {
    let h = tutti::compile::hadamard::smallest_hadamard(n - 1);
    let m = h.len();
    let mut column = vec![0usize; n];
    let mut next = 1;
    for (ion, col) in column.iter_mut().enumerate() {
        if ion != a && ion != b {
            *col = next;
            next += 1;
        }
    }
    let mut s = Sequence::new(n as u32, vec![]);
    for row in h.iter() {
        let flipped: Vec<u32> = (0..n)
            .filter(|&i| row[column[i]] < 0)
            .map(|i| i as u32)
            .collect();
        for &i in &flipped {
            s.push(NativeOp::LightShift { ion: i, theta: PI });
        }
        s.push(NativeOp::Ms {
            theta: theta / m as f64,
            phi: 0.0,
        });
        for &i in &flipped {
            s.push(NativeOp::LightShift { ion: i, theta: PI });
        }
    }
    s
}

#[test]
fn tableau_decides_a_40_ion_sign_vector_echo_against_its_two_qubit_gate() {
    let n = 40;
    let seq = echo_sequence(n, 3, 31, PI / 2.0);
    let target = program(&qasm(n, "rxx(pi/2) q[3],q[31];"));
    let cfg = CheckConfig {
        mode: Mode::Tableau,
        ..CheckConfig::default()
    };
    let v = check(&Program::from_sequence(&seq), &target, &cfg).unwrap();
    assert!(v.equivalent, "{v:?}");
    let wrong = program(&qasm(n, "rxx(pi/2) q[3],q[30];"));
    assert!(
        !check(&Program::from_sequence(&seq), &wrong, &cfg)
            .unwrap()
            .equivalent
    );
    // One pulse too few leaves non-Clifford couplings: not read as a Clifford, and
    // proven different with the ions held as fields (module `fields`).
    let mut short = seq.clone();
    let last_ms = short
        .steps
        .iter()
        .rposition(|s| matches!(s.op, NativeOp::Ms { .. }))
        .unwrap();
    short.steps.remove(last_ms);
    let v = check(&Program::from_sequence(&short), &target, &cfg).unwrap();
    assert!(!v.equivalent && v.mode == Mode::Bound, "{v:?}");
    eprintln!("{}", v.detail);
}

#[test]
fn programs_with_measurement_reset_and_conditions_compare_segment_by_segment() {
    let path = std::path::Path::new("tests/data/qasmbench/small/ipea_n2/ipea_n2.qasm");
    let text = std::fs::read_to_string(path).unwrap();
    let a = program(&text);
    let same = program(&text.replace(
        "h q[0];\nmeasure q[0] -> c[1];",
        "h q[0];\nx q[1];\nx q[1];\nmeasure q[0] -> c[1];",
    ));
    let v = check(&a, &same, &CheckConfig::default()).unwrap();
    assert!(v.equivalent && v.segments > 5, "{v:?}");
    let changed = program(&text.replace("if(c==2) u1(-pi/2) q[0];", "if(c==2) u1(-pi/3) q[0];"));
    assert!(
        !check(&a, &changed, &CheckConfig::default())
            .unwrap()
            .equivalent
    );
    // A reset dropped: the cuts no longer match, which is a difference (exit 1).
    let no_reset = program(&text.replacen("reset q[0];", "", 1));
    let v = check(&a, &no_reset, &CheckConfig::default()).unwrap();
    assert!(!v.equivalent && v.distance.is_none(), "{v:?}");
}

#[test]
fn registers_beyond_the_memory_budget_are_refused_with_the_memory_they_need() {
    let chain: String = (0..29)
        .map(|i| format!("cx q[{i}],q[{}]; t q[{}];", i + 1, i + 1))
        .collect();
    let a = program(&qasm(30, &format!("t q[0]; h q[0]; {chain}")));
    let cfg = CheckConfig {
        memory_budget: 1 << 30,
        ..CheckConfig::default()
    };
    match check(&a, &a, &cfg).map_err(|e| e.refusal().clone()) {
        Err(CheckError::TooLarge {
            qubits: 30, needed, ..
        }) => assert_eq!(needed, (2 * 16) << 30),
        other => panic!("{other:?}"),
    }
}

#[test]
fn comparisons_beyond_the_work_budget_are_refused_with_the_work_they_need() {
    // 12 qubits entangled by a chain, not Clifford: random mode, 3 trials.
    let chain: String = (0..11)
        .map(|i| format!("cx q[{i}],q[{}]; t q[{}];", i + 1, i + 1))
        .collect();
    let a = program(&qasm(12, &format!("t q[0]; h q[0]; {chain}")));
    let bounded = CheckConfig {
        max_work: 1e5,
        ..CheckConfig::default()
    };
    match check(&a, &a, &bounded).map_err(|e| e.refusal().clone()) {
        Err(CheckError::TooSlow {
            qubits: 12,
            operations,
            work,
            ..
        }) => assert_eq!(work, operations as f64 * 4096.0 * 3.0),
        other => panic!("{other:?}"),
    }
    // The same comparison within the default (unbounded) work runs and agrees.
    assert!(check(&a, &a, &CheckConfig::default()).unwrap().equivalent);
}

#[test]
fn a_final_diagonal_before_measurement_is_accepted_only_when_asked() {
    let a = qasm(
        3,
        "h q[0]; cx q[0],q[1]; ry(0.4) q[2]; rz(0.3) q[1]; t q[2];\nmeasure q -> c;",
    );
    let b = qasm(3, "h q[0]; cx q[0],q[1]; ry(0.4) q[2];\nmeasure q -> c;");
    for mode in [Mode::Unitary, Mode::Random] {
        let plain = CheckConfig {
            mode,
            ..CheckConfig::default()
        };
        assert!(
            !check(&program(&a), &program(&b), &plain)
                .unwrap()
                .equivalent
        );
        let relaxed = CheckConfig {
            up_to_final_diagonal: true,
            ..plain
        };
        assert!(
            check(&program(&a), &program(&b), &relaxed)
                .unwrap()
                .equivalent,
            "{mode:?}"
        );
        // A non-diagonal difference is still caught.
        let c = qasm(3, "h q[0]; cx q[0],q[1]; ry(0.5) q[2];\nmeasure q -> c;");
        assert!(
            !check(&program(&a), &program(&c), &relaxed)
                .unwrap()
                .equivalent,
            "{mode:?}"
        );
    }
}

/// Up to a final diagonal, qubits that take part in no interaction are split off and
/// compared alone: a measured one up to a Z rotation, an unmeasured one exactly. A
/// final diagonal changes no outcome statistics of a measurement in the Z basis
/// (Nielsen and Chuang, section 2.2.5: `|<x|D|psi>|^2 = |<x|psi>|^2` for diagonal
/// unitary `D`); a Z rotation on a qubit that is not measured is a real difference.
#[test]
fn split_off_qubits_follow_the_final_diagonal_rules() {
    let measure = "measure q[0] -> c[0]; measure q[1] -> c[1]; measure q[2] -> c[2];";
    let a = qasm(
        4,
        &format!("h q[0]; cx q[0],q[1]; ry(0.4) q[2]; rz(0.3) q[2]; ry(0.2) q[3];\n{measure}"),
    );
    let relaxed = CheckConfig {
        up_to_final_diagonal: true,
        ..CheckConfig::default()
    };
    let judge = |b: &str| check(&program(&a), &program(&qasm(4, b)), &relaxed).unwrap();
    // The Z rotation on the idle, measured q[2] left out: equal, compared on the
    // two coupled qubits only, and the verdict says it relied on the diagonal.
    let v = judge(&format!(
        "h q[0]; cx q[0],q[1]; ry(0.4) q[2]; ry(0.2) q[3];\n{measure}"
    ));
    assert!(v.equivalent && v.final_diagonal, "{v:?}");
    assert_eq!(v.compared_qubits, 2);
    // Near misses: a Z rotation on the unmeasured q[3]; q[2]'s Y angle changed by
    // 1e-8 (above the tolerance of about 1e-10); the X-basis angle on the wrong wire.
    for b in [
        format!("h q[0]; cx q[0],q[1]; ry(0.4) q[2]; ry(0.2) q[3]; rz(0.3) q[3];\n{measure}"),
        format!("h q[0]; cx q[0],q[1]; ry(0.40000001) q[2]; ry(0.2) q[3];\n{measure}"),
        format!("h q[0]; cx q[0],q[1]; ry(0.2) q[2]; ry(0.4) q[3];\n{measure}"),
        // The Z rotation before the Y rotation instead of after it: not a final
        // diagonal (the measured qubit's side of the split compares B = D A, D last).
        format!("h q[0]; cx q[0],q[1]; rz(0.3) q[2]; ry(0.4) q[2]; ry(0.2) q[3];\n{measure}"),
    ] {
        let v = judge(&b);
        assert!(!v.equivalent, "{b}: {v:?}");
    }
    // Without the relaxation the dropped Z is a difference.
    let strict = check(
        &program(&a),
        &program(&qasm(
            4,
            &format!("h q[0]; cx q[0],q[1]; ry(0.4) q[2]; ry(0.2) q[3];\n{measure}"),
        )),
        &CheckConfig::default(),
    )
    .unwrap();
    assert!(!strict.equivalent && !strict.final_diagonal);
}

/// A device-sized program whose other ions are idle is compared up to a final
/// diagonal on the qubits that interact, not on the whole register (it used to keep
/// every qubit and be refused as too large).
#[test]
fn a_final_diagonal_on_a_wide_register_compares_the_coupled_qubits() {
    let tail: String = (0..3)
        .map(|i| format!("measure q[{i}] -> c[{i}];"))
        .collect();
    let a = qasm(
        40,
        &format!("h q[0]; cx q[0],q[1]; cx q[1],q[2]; t q[2];\n{tail}"),
    );
    let b = qasm(40, &format!("h q[0]; cx q[0],q[1]; cx q[1],q[2];\n{tail}"));
    let relaxed = CheckConfig {
        up_to_final_diagonal: true,
        ..CheckConfig::default()
    };
    let v = check(&program(&a), &program(&b), &relaxed).unwrap();
    assert!(v.equivalent && v.compared_qubits == 3, "{v:?}");
    // A rotation off the Z axis just above the rounding floor is not diagonal.
    let c = qasm(
        40,
        &format!("h q[0]; cx q[0],q[1]; cx q[1],q[2]; t q[2]; rx(1e-8) q[2];\n{tail}"),
    );
    let v = check(&program(&a), &program(&c), &relaxed).unwrap();
    assert!(!v.equivalent, "{v:?}");
}

/// Terminal measurements may sit anywhere after their qubit's last gate; the checker
/// accepts a program that measures them last (a compile gathers them into one
/// readout slot), and nothing else: a measurement moved past a gate on its own
/// qubit, past a condition that reads it, or past another write of its bit is a
/// different program. (A measurement on one qubit commutes with a unitary on
/// others: Nielsen and Chuang, section 2.2.3.)
#[test]
fn terminal_measurements_may_move_last_and_nowhere_else() {
    let same = |a: &str, b: &str| {
        check(
            &program(&qasm(2, a)),
            &program(&qasm(2, b)),
            &CheckConfig::default(),
        )
        .unwrap()
        .equivalent
    };
    assert!(same(
        "h q[0]; measure q[0] -> c[0]; ry(0.3) q[1]; measure q[1] -> c[1];",
        "h q[0]; ry(0.3) q[1]; measure q[0] -> c[0]; measure q[1] -> c[1];"
    ));
    // Either side may be the one that moved them.
    assert!(same(
        "h q[0]; ry(0.3) q[1]; measure q[0] -> c[0]; measure q[1] -> c[1];",
        "h q[0]; measure q[0] -> c[0]; ry(0.3) q[1]; measure q[1] -> c[1];"
    ));
    // Near misses.
    for (a, b) in [
        // Past a gate on its own qubit.
        (
            "h q[0]; measure q[0] -> c[0]; h q[0]; ry(0.3) q[1];",
            "h q[0]; h q[0]; ry(0.3) q[1]; measure q[0] -> c[0];",
        ),
        // Past a condition that reads its bit.
        (
            "h q[0]; measure q[0] -> c[0]; if(c==1) x q[1]; measure q[1] -> c[1];",
            "h q[0]; if(c==1) x q[1]; measure q[0] -> c[0]; measure q[1] -> c[1];",
        ),
        // Past a later write of the same bit that stays (the last writer changes).
        (
            "h q[0]; measure q[0] -> c[0]; x q[1]; measure q[1] -> c[0]; h q[1];",
            "h q[0]; x q[1]; measure q[1] -> c[0]; h q[1]; measure q[0] -> c[0];",
        ),
        // Moved last, but the gate it moved past changed by 1e-8.
        (
            "h q[0]; measure q[0] -> c[0]; ry(0.3) q[1]; measure q[1] -> c[1];",
            "h q[0]; ry(0.30000001) q[1]; measure q[0] -> c[0]; measure q[1] -> c[1];",
        ),
    ] {
        assert!(!same(a, b), "{a}\n{b}");
    }
}
