//! The optimizer, pass by pass, against the statevector and tableau checker; block
//! certificates checked algebraically; and near misses of the checker's
//! interaction-picture path, which the optimizer's shared echo columns rely on.

mod common;
#[path = "../benches/common/mod.rs"]
mod generated;

use tutti::circuit::{Circuit, Gate, GateKind, Instr, Op, Qubit};
use tutti::compile::lower::{lower, zyz, Canon};
use tutti::compile::optimize::dag::{merge_interactions, Dag, PASSES};
use tutti::compile::optimize::pair_runs::pair_runs;
use tutti::compile::optimize::schedule::schedule;
use tutti::compile::optimize::{
    circuit_passes, compile_optimized, ladder, multi_control, phase_poly, OptConfig,
};
use tutti::compile::Target;
use tutti::native::profile::Profile;
use tutti::native::{NativeOp, Sequence};
use tutti::sim::{check, CheckConfig, Program};

/// The unitary part of a circuit: gates only (measurements, resets, barriers and
/// conditioned instructions left out).
fn gates_of(c: &Circuit) -> Circuit {
    let mut out = Circuit::with_registers(c.n_qubits(), 0);
    out.instrs = c
        .instrs
        .iter()
        .filter(|i| i.condition.is_none() && matches!(i.op, Op::Gate { .. }))
        .cloned()
        .collect();
    out
}

fn gate(kind: GateKind, params: &[f64], qs: &[u32]) -> Instr {
    Instr {
        op: Op::Gate {
            gate: Gate::new(kind, params),
            qubits: qs.iter().map(|&q| Qubit(q)).collect(),
        },
        condition: None,
    }
}

/// Canonical operations as a circuit: `u3` from the ZYZ angles (up to phase, as
/// OpenQASM 2 defines u3 = Rz Ry Rz, Cross et al., arXiv:1707.03429) and `rzz`.
fn canon_circuit(n: u32, ops: &[Canon]) -> Circuit {
    let mut c = Circuit::with_registers(n, 0);
    for op in ops {
        c.instrs.push(match *op {
            Canon::Local { q, m } => {
                let (_, b, g, d) = zyz(&m);
                gate(GateKind::U3, &[g, b, d], &[q])
            }
            Canon::Zz { a, b, theta } => gate(GateKind::Rzz, &[theta], &[a, b]),
            _ => unreachable!("gates only"),
        });
    }
    c
}

fn assert_same(a: &Circuit, b: &Circuit, what: &str) {
    let v = check(
        &Program::from_circuit(a).unwrap(),
        &Program::from_circuit(b).unwrap(),
        &CheckConfig::default(),
    )
    .unwrap_or_else(|e| panic!("{what}: {e}"));
    assert!(v.equivalent, "{what}: {}", v.detail);
}

/// Every pass keeps the unitary: the phase-polynomial rewrite, the lowering, each
/// DAG pass in the list, and the schedule's layers and blocks, each checked against
/// the circuit it started from, on every circuit of circuits/ up to 12 qubits.
#[test]
fn every_pass_keeps_the_unitary() {
    let mut checked = 0;
    for path in common::files("circuits", "qasm") {
        let full = common::read_ok(&path);
        if full.n_qubits() > 12 {
            continue;
        }
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        let c = gates_of(&full);
        let n = c.n_qubits();
        // The addressed target's circuit passes are a subset of the collective's.
        let mut rewritten = Circuit::with_registers(n, 0);
        rewritten.instrs = c.instrs.clone();
        for (pass_name, pass) in circuit_passes(Target::Collective) {
            rewritten.instrs = pass(std::mem::take(&mut rewritten.instrs));
            assert_same(&c, &rewritten, &format!("{name}: {pass_name}"));
        }
        let canon: Vec<Canon> = lower(&rewritten)
            .unwrap()
            .into_iter()
            .map(|s| s.op)
            .collect();
        assert_same(&c, &canon_circuit(n, &canon), &format!("{name}: lower"));
        let mut dag = Dag::new(canon);
        assert_same(&c, &canon_circuit(n, &dag.ops()), &format!("{name}: build"));
        for (pass_name, pass) in PASSES {
            pass(&mut dag);
            assert_same(
                &c,
                &canon_circuit(n, &dag.ops()),
                &format!("{name}: {pass_name}"),
            );
        }
        let s = schedule(&dag.ops(), n as usize);
        let mut scheduled = Circuit::with_registers(n, 0);
        for (k, layer) in s.layers.iter().enumerate() {
            for &(q, m) in layer {
                let (_, b, g, d) = zyz(&m);
                scheduled.instrs.push(gate(GateKind::U3, &[g, b, d], &[q]));
            }
            if let Some(block) = s.blocks.get(k) {
                for &(a, b, w) in block {
                    scheduled
                        .instrs
                        .push(gate(GateKind::Rzz, &[2.0 * w], &[a, b]));
                }
            }
        }
        assert_same(&c, &scheduled, &format!("{name}: schedule"));
        checked += 1;
    }
    assert!(checked >= 20, "{checked} circuits checked");
}

/// A second pair-runs pass over what the first one replaced. Two runs on qubits 0
/// and 1 (a SWAP as three CNOTs, then a CNOT: four interactions, two units of
/// area as iSWAP's class, common practice) are kept apart by an interaction of
/// angle 2 pi on qubits 1 and 2; the first pass replaces each, the merge drops the
/// 2 pi one, and the two replacements are then one run whose last node is a
/// replacement's. The second pass makes it a built node first (`Dag::settle`),
/// replaces the run (no two-qubit class needs the four interactions it holds), and
/// the checker finds the circuit's unitary after each step.
#[test]
fn pair_runs_again_over_its_own_replacements() {
    let cx = |c: u32, t: u32| gate(GateKind::Cx, &[], &[c, t]);
    let mut c = Circuit::with_registers(3, 0);
    for k in 0..2 {
        c.instrs.extend([cx(0, 1), cx(1, 0), cx(0, 1), cx(0, 1)]);
        if k == 0 {
            c.instrs
                .push(gate(GateKind::Rzz, &[std::f64::consts::TAU], &[1, 2]));
        }
    }
    let canon: Vec<Canon> = lower(&c).unwrap().into_iter().map(|s| s.op).collect();
    let zzs = |dag: &Dag| {
        dag.ops()
            .iter()
            .filter(|op| matches!(op, Canon::Zz { .. }))
            .count()
    };
    let mut dag = Dag::new(canon);
    assert_eq!(zzs(&dag), 9);
    pair_runs(&mut dag);
    assert_same(&c, &canon_circuit(3, &dag.ops()), "first pass");
    assert_eq!(zzs(&dag), 5, "each run replaced by two interactions");
    merge_interactions(&mut dag);
    assert_eq!(zzs(&dag), 4, "the 2 pi interaction dropped");
    pair_runs(&mut dag);
    assert_same(&c, &canon_circuit(3, &dag.ops()), "second pass");
    assert!(zzs(&dag) <= 3, "{} interactions", zzs(&dag));
}

/// The rewrite that makes Trotter and QAOA circuits cheap: CNOT, Rz, CNOT is one ZZ
/// interaction (common practice), and the rewritten circuit has one two-qubit
/// operation instead of two.
#[test]
fn cnot_rz_cnot_becomes_one_interaction() {
    let c = common::read_ok_str(
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[3];\nh q[2];\ncx q[0],q[1];\nrz(0.3) q[1];\ncx q[0],q[1];\nh q[2];\n",
    );
    let out = phase_poly::rewrite(c.instrs.clone());
    let two: Vec<&Instr> = out.iter().filter(|i| i.op.qubits().len() == 2).collect();
    assert_eq!(two.len(), 1, "{out:?}");
    assert!(matches!(&two[0].op, Op::Gate { gate, .. } if gate.kind == GateKind::Rzz));
    let mut r = Circuit::with_registers(3, 0);
    r.instrs = out;
    assert_same(&c, &r, "cx rz cx");
}

/// Each block's synthesis satisfies its certificate, recomputed here from the sign
/// vectors and weights: sum_k t_k s_k s_k^T = J off the diagonal (gate-set fact 5).
#[test]
fn block_certificates_hold() {
    let profile = Profile::demo();
    let mut blocks = 0;
    let mut signed_blocks = 0;
    for name in [
        "qaoa_graph_8",
        "trotter_heisenberg_6",
        "qft_8",
        "random_clifford_10",
        "ripple_adder_8",
    ] {
        let c = common::read_ok(std::path::Path::new(&format!("circuits/{name}.qasm")));
        let cfg = OptConfig {
            keep_certificates: true,
            ..OptConfig::default()
        };
        let o = compile_optimized(&c, &profile, &cfg).unwrap();
        assert!(!o.certificates.is_empty(), "{name}");
        for (coupling, s) in &o.certificates {
            let n = coupling.n;
            let mut sum = vec![vec![0.0f64; n]; n];
            // Signed plans (gate-set fact 10): weights of either sign, and the ions
            // uncoupled from spectators held at +1 (sum_k t_k s_k[i] = 0) and the
            // spectators from each other (sum_k t_k = 0).
            let signed = s.method == tutti::compile::couple::Method::Signed;
            signed_blocks += usize::from(signed);
            if signed {
                let total: f64 = s.pulses.iter().map(|p| p.weight).sum();
                assert!(total.abs() < 1e-9, "{name}: spectators coupled by {total}");
                for i in 0..n {
                    let to_spectator: f64 = s
                        .pulses
                        .iter()
                        .map(|p| p.weight * f64::from(p.signs[i]))
                        .sum();
                    assert!(to_spectator.abs() < 1e-9, "{name}: ion {i} and a spectator");
                }
            }
            for p in &s.pulses {
                assert!(signed || p.weight >= 0.0);
                for i in 0..n {
                    for j in 0..n {
                        sum[i][j] += p.weight * (p.signs[i] * p.signs[j]) as f64;
                    }
                }
            }
            for i in 0..n {
                for j in i + 1..n {
                    assert!(
                        (sum[i][j] - coupling.get(i, j)).abs() < 1e-9,
                        "{name}: ({i}, {j})"
                    );
                }
            }
            let total: f64 = s.pulses.iter().map(|p| p.weight.abs()).sum();
            assert!((total - s.weight).abs() < 1e-9);
            assert!(s.lower_bound <= s.weight + 1e-9);
            blocks += 1;
        }
    }
    assert!(blocks >= 10, "{blocks} blocks");
    assert!(signed_blocks >= 10, "{signed_blocks} signed plans");
}

/// The demo device with chain MS pulses of one sign only (`negative_chain_ms`
/// off): blocks must echo or fold the spare ions, the paths the tests calling
/// [`compiled`] and [`compiled_text`] exercise.
fn one_sign_demo() -> Profile {
    let mut p = Profile::demo();
    p.capabilities.negative_chain_ms = false;
    p
}

/// The optimizer's output on circuits/`name`.qasm for [`one_sign_demo`] (default
/// settings).
fn compiled(name: &str) -> (Circuit, Sequence) {
    let text = std::fs::read_to_string(format!("circuits/{name}.qasm")).unwrap();
    compiled_text(&text, Default::default())
}

/// The checker's verdict on `s` against `c`, default settings.
fn checked(c: &Circuit, s: &Sequence) -> tutti::sim::Verdict {
    check(
        &Program::from_circuit(c).unwrap(),
        &Program::from_sequence(s),
        &CheckConfig::default(),
    )
    .unwrap()
}

fn verdict(c: &Circuit, s: &Sequence) -> bool {
    checked(c, s).equivalent
}

/// Asserts that the checker proves `s` different from `c` (a near miss caught).
#[track_caller]
fn assert_caught(c: &Circuit, s: &Sequence, what: &str) {
    assert_eq!(verdict_or_refusal(c, s), Some(false), "{what}");
}

/// `Some(equivalent)`, or `None` when the checker refuses (never a guess).
fn verdict_or_refusal(c: &Circuit, s: &Sequence) -> Option<bool> {
    check(
        &Program::from_circuit(c).unwrap(),
        &Program::from_sequence(s),
        &CheckConfig::default(),
    )
    .ok()
    .map(|v| v.equivalent)
}

/// The optimizer's output on the 40-ion demo device, where spare ions share one
/// echo column across the segment, is proven equal only through the interaction
/// picture; each near miss there must be proven different: a flip left out on a
/// spare ion, one MS pulse changed by 1e-8 rad, a light shift moved to a neighbour
/// or changed by 1e-8. On a 6-qubit circuit the unitary is built in one block of
/// columns; on the 8-qubit one it is proven in unitary mode on at least 7 qubits,
/// whose columns are built in several blocks (`sim::apply::unitary_into`).
#[test]
fn near_misses_of_shared_echo_columns_are_caught() {
    for (name, n) in [("qaoa_ring_6", 6u32), ("qaoa_graph_8", 8)] {
        near_misses_caught(name, n);
    }
}

fn near_misses_caught(name: &str, n: u32) {
    let (c, seq) = compiled(name);
    let v = checked(&c, &seq);
    assert!(v.equivalent, "the compiled {name} verifies");
    if n == 8 {
        assert!(
            v.mode == tutti::sim::Mode::Unitary && v.compared_qubits >= 7,
            "{name}: {:?} on {} qubits",
            v.mode,
            v.compared_qubits
        );
    }
    // The shared column is in use: fewer pulses than one echo of 40 per coupling.
    let ms = ms_steps(&seq).len();
    let couplings = c
        .instrs
        .iter()
        .filter(|i| matches!(&i.op, Op::Gate { qubits, .. } if qubits.len() == 2))
        .count();
    assert!(ms < couplings * 40, "{name}: {ms} MS pulses");
    let spare_flip = seq
        .steps
        .iter()
        .position(|s| matches!(s.op, NativeOp::LightShift { ion, theta } if ion >= n && (theta.abs() - std::f64::consts::PI).abs() < 1e-12))
        .expect("a flip on a spare ion");
    assert_caught(
        &c,
        &without_step(&seq, spare_flip),
        &format!("{name}: a missing flip on a spare ion"),
    );
    assert_caught(
        &c,
        &ms_off_by_a_hair(&seq, ms_steps(&seq)[0]),
        &format!("{name}: an MS pulse off by 1e-8"),
    );
    let shift = seq
        .steps
        .iter()
        .position(|s| matches!(s.op, NativeOp::LightShift { ion, .. } if ion < n - 1))
        .expect("a light shift on a circuit ion");
    let mut d = seq.clone();
    if let NativeOp::LightShift { ion, .. } = &mut d.steps[shift].op {
        *ion += 1;
    }
    assert_caught(&c, &d, &format!("{name}: a light shift on the wrong ion"));
    // A light shift's angle off by 1e-8: the couplings are unchanged, so the
    // checker compares in the picture alone (the programs as given, which could
    // keep no fewer qubits, are not prepared) and must still see it.
    let mut e = seq.clone();
    if let NativeOp::LightShift { theta, .. } = &mut e.steps[shift].op {
        *theta += 1e-8;
    }
    assert_caught(&c, &e, &format!("{name}: a light shift off by 1e-8"));
}

/// Both targets and every objective verify on a circuit with a mid-circuit
/// measurement and conditions (the ranges between fences are compiled apart).
#[test]
fn every_objective_verifies_with_fences() {
    use tutti::compile::optimize::Objective;
    for name in ["teleport_3", "repetition_5", "qft_5"] {
        let c = common::read_ok(std::path::Path::new(&format!("circuits/{name}.qasm")));
        for target in [Target::Collective, Target::Addressed] {
            for objective in Objective::ALL {
                let cfg = OptConfig {
                    target,
                    objective,
                    ..OptConfig::default()
                };
                let o = compile_optimized(&c, &Profile::demo(), &cfg).unwrap();
                assert!(verdict(&c, &o.sequence), "{name} {target:?} {objective:?}");
            }
        }
    }
}

fn circuit_of(n: u32, instrs: Vec<Instr>) -> Circuit {
    let mut c = Circuit::with_registers(n, 0);
    c.instrs = instrs;
    c
}

fn same(a: &Circuit, b: &Circuit) -> bool {
    check(
        &Program::from_circuit(a).unwrap(),
        &Program::from_circuit(b).unwrap(),
        &CheckConfig::default(),
    )
    .unwrap()
    .equivalent
}

/// Multi-controlled gates as phase polynomials whose many-body terms are made by two
/// uniform interaction blocks around a pivot rotation (compile/optimize/multi_control.rs):
/// `ccx`, `c3x`, `c4x` and `cswap`, rewritten, equal the library gates as lowered by
/// the published decompositions (Nielsen and Chuang, Fig. 4.9, for the Toffoli;
/// Barenco et al., PRA 52, 3457, 1995, Lemma 7.1, above), in the statevector
/// checker, with qubits in a scrambled order amid other gates. Near misses: a pivot
/// rotation off by 1e-7 and one block's coupling off by 1e-7 are caught.
#[test]
fn multi_controlled_gates_become_phase_polynomials() {
    for (kind, qs) in [
        (GateKind::Ccx, vec![2, 0, 3]),
        (GateKind::C3x, vec![4, 1, 0, 2]),
        (GateKind::C4x, vec![3, 5, 0, 1, 4]),
        (GateKind::Cswap, vec![1, 3, 0]),
    ] {
        let n = 6;
        let mut instrs = vec![
            gate(GateKind::H, &[], &[0]),
            gate(GateKind::Ry, &[0.7], &[1]),
            gate(GateKind::Cx, &[], &[2, 5]),
        ];
        instrs.push(gate(kind, &[], &qs));
        instrs.push(gate(GateKind::Rx, &[0.4], &[qs[0]]));
        let c = circuit_of(n, instrs);
        let out = multi_control::rewrite(c.instrs.clone());
        assert!(
            !out.iter()
                .any(|i| matches!(&i.op, Op::Gate { gate, .. } if gate.kind == kind)),
            "{kind:?} rewritten"
        );
        let r = circuit_of(n, out.clone());
        assert!(same(&c, &r), "{kind:?}");
        let block = out
            .iter()
            .position(|i| matches!(&i.op, Op::Gate { gate, .. } if gate.kind == GateKind::Rzz && gate.params[0] > 1.0))
            .expect("an interaction block");
        let pivot = block
            + out[block..]
                .iter()
                .position(|i| matches!(&i.op, Op::Gate { gate, .. } if matches!(gate.kind, GateKind::Ry | GateKind::Rz)))
                .expect("a pivot rotation after the first block");
        let mut near = out.clone();
        if let Op::Gate { gate, .. } = &mut near[pivot].op {
            gate.params[0] += 1e-7;
        }
        assert!(
            !same(&c, &circuit_of(n, near)),
            "{kind:?}: rotation off by 1e-7"
        );
        let mut near = out;
        if let Op::Gate { gate, .. } = &mut near[block].op {
            gate.params[0] += 1e-7;
        }
        assert!(
            !same(&c, &circuit_of(n, near)),
            "{kind:?}: coupling off by 1e-7"
        );
    }
}

/// The Toffoli on the collective target: 3.5 units of MS area (pi/2 each) in three
/// blocks, against the 6 of its six CNOTs (Nielsen and Chuang, Fig. 4.9) that the
/// baseline spends; the output verifies.
#[test]
fn a_toffoli_costs_less_than_its_six_cnots() {
    let (c, seq) = compiled("toffoli_3");
    assert!(verdict(&c, &seq));
    let c = common::read_ok(std::path::Path::new("circuits/toffoli_3.qasm"));
    let o = compile_optimized(&c, &Profile::demo(), &OptConfig::default()).unwrap();
    let area: f64 = o.blocks.iter().map(|b| b.area).sum();
    assert!(area <= 3.5 + 1e-9, "area {area}");
    assert!(o.blocks.len() <= 3, "{} blocks", o.blocks.len());
}

/// CNOT ladders (forward and backward, 40 CNOTs on 41 qubits, amid other gates)
/// become Brent-Kung prefix networks (IEEE Trans. Computers C-31, 260, 1982) with at
/// most 2 ceil(log2 41) = 12 levels; the tableau checker proves them equal, and a
/// network with one CNOT's control and target swapped is caught. On the collective
/// target the GHZ ladder of circuits/ghz_40.qasm then needs at most 12 blocks instead
/// of 39, and its output verifies.
#[test]
fn cnot_ladders_become_prefix_networks() {
    let n = 41u32;
    for backward in [false, true] {
        let mut instrs = vec![gate(GateKind::H, &[], &[0]), gate(GateKind::S, &[], &[7])];
        let mut ladder: Vec<Instr> = (0..n - 1)
            .map(|i| gate(GateKind::Cx, &[], &[i, i + 1]))
            .collect();
        if backward {
            ladder.reverse();
        }
        instrs.extend(ladder);
        instrs.push(gate(GateKind::H, &[], &[3]));
        let c = circuit_of(n, instrs);
        let out = ladder::rewrite(c.instrs.clone());
        assert!(same(&c, &circuit_of(n, out.clone())), "backward {backward}");
        let cx: Vec<usize> = out
            .iter()
            .enumerate()
            .filter(|(_, i)| i.op.qubits().len() == 2)
            .map(|(k, _)| k)
            .collect();
        assert!(cx.len() > 40, "the network replaced the ladder");
        let mut near = out.clone();
        if let Op::Gate { qubits, .. } = &mut near[cx[cx.len() / 2]].op {
            qubits.swap(0, 1);
        }
        assert!(
            !same(&c, &circuit_of(n, near)),
            "swapped CNOT, backward {backward}"
        );
    }
    assert!(ladder::prefix_levels(41).len() <= 12);
    let c = common::read_ok(std::path::Path::new("circuits/ghz_40.qasm"));
    let o = compile_optimized(&c, &Profile::demo(), &OptConfig::default()).unwrap();
    assert!(o.blocks.len() <= 12, "{} blocks", o.blocks.len());
    assert!(verdict(&c, &o.sequence));
}

/// Singly controlled gates as one interaction of angle theta/4 in a rotated frame
/// (compile/optimize/controlled.rs; the identity C-U = u1(alpha)_c exp(-i theta/4
/// n.sigma_t) exp(i theta/4 Z_c n.sigma_t) is common practice): `cy`, `ch`, `crx`,
/// `cry` and `cu3` with angles across (0, 2 pi), rewritten, equal the library gates
/// as lowered by Barenco et al. (PRA 52, 3457, 1995), in the statevector checker; the
/// interaction off by 1e-7 is caught; and a `cry(theta)` costs theta/pi units of MS
/// area on the collective target instead of the two CNOTs of the lowering.
#[test]
fn controlled_rotations_become_one_interaction() {
    use tutti::compile::optimize::controlled;
    let cases: Vec<(GateKind, Vec<f64>)> = vec![
        (GateKind::Cy, vec![]),
        (GateKind::Ch, vec![]),
        (GateKind::Crx, vec![0.3]),
        (GateKind::Crx, vec![5.9]),
        (GateKind::Cry, vec![1.91]),
        (GateKind::Cry, vec![-2.5]),
        (GateKind::Cry, vec![std::f64::consts::PI]),
        (GateKind::Cu3, vec![0.4, 1.3, -2.2]),
        (GateKind::Cu3, vec![3.0, -0.7, 2.9]),
    ];
    for (kind, params) in cases {
        let c = circuit_of(
            3,
            vec![
                gate(GateKind::H, &[], &[1]),
                gate(GateKind::Ry, &[0.8], &[2]),
                gate(kind, &params, &[2, 1]),
                gate(GateKind::Rx, &[0.5], &[2]),
            ],
        );
        let out = controlled::rewrite(c.instrs.clone());
        let zz = out
            .iter()
            .position(|i| matches!(&i.op, Op::Gate { gate, .. } if gate.kind == GateKind::Rzz))
            .expect("one interaction");
        assert!(same(&c, &circuit_of(3, out.clone())), "{kind:?} {params:?}");
        let mut near = out;
        if let Op::Gate { gate, .. } = &mut near[zz].op {
            gate.params[0] += 1e-7;
        }
        assert!(
            !same(&c, &circuit_of(3, near)),
            "{kind:?} {params:?}: off by 1e-7"
        );
    }
    let theta = 1.91f64;
    let c = common::read_ok_str(&format!(
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\nh q[0];\ncry({theta}) q[0],q[1];\n"
    ));
    let o = compile_optimized(&c, &Profile::demo(), &OptConfig::default()).unwrap();
    let area: f64 = o.blocks.iter().map(|b| b.area).sum();
    assert!(
        (area - theta / std::f64::consts::PI).abs() < 1e-9,
        "area {area}"
    );
    assert!(verdict(&c, &o.sequence));
}

/// A run of interactions on one pair is resynthesised by its canonical (KAK) form
/// (compile/optimize/pair_runs.rs): a SWAP followed by a CNOT on the same pair is
/// locally an iSWAP, (pi/4, pi/4, 0) (common practice), so two units of MS area
/// instead of the four of its CNOTs; the output verifies, and the same circuit with
/// the CNOT's target moved to a third qubit still verifies at its own cost (four
/// units with pulses of one sign; three with signed pulses, which make the SWAP's
/// three couplings on one pair plus the CNOT's on another in less area than the
/// program over one sign allows: measured).
#[test]
fn a_swap_next_to_a_cnot_costs_two_units() {
    for (profile, text, want) in [
        (one_sign_demo(), "swap q[0],q[1];\ncx q[0],q[1];\n", 2.0),
        (one_sign_demo(), "swap q[0],q[1];\ncx q[0],q[2];\n", 4.0),
        (Profile::demo(), "swap q[0],q[1];\ncx q[0],q[1];\n", 2.0),
        (Profile::demo(), "swap q[0],q[1];\ncx q[0],q[2];\n", 3.0),
    ] {
        let c = common::read_ok_str(&format!(
            "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[3];\nh q[0];\nt q[1];\n{text}"
        ));
        let o = compile_optimized(&c, &profile, &OptConfig::default()).unwrap();
        let area: f64 = o.blocks.iter().map(|b| b.area).sum();
        assert!((area - want).abs() < 1e-9, "{text}: area {area}");
        assert!(verdict(&c, &o.sequence), "{text}");
    }
}

/// The bounds that let a block skip building a candidate, or skip the coupling
/// program, are lower bounds: the compile that builds every candidate and runs the
/// program for every block (`build_all`) chooses blocks of the same cost.
/// Duration objective, both targets, every circuit of circuits/; and the skip does
/// happen on the addressed target (blocks without a certified bound).
#[test]
fn skipping_candidates_by_their_bounds_loses_nothing() {
    use tutti::native::budget::budget;
    let profile = Profile::demo();
    let mut skipped = 0;
    for path in common::files("circuits", "qasm") {
        let c = common::read_ok(&path);
        for target in [Target::Collective, Target::Addressed] {
            // Solver time without limits, so that no block falls back to a
            // construction because the machine is busy (the build-all compile runs
            // the coupling program for every block).
            let cfg = OptConfig {
                target,
                block_time: std::time::Duration::from_secs(3600),
                solver_time: std::time::Duration::from_secs(3600),
                ..OptConfig::default()
            };
            let pruned = compile_optimized(&c, &profile, &cfg).unwrap();
            let full = compile_optimized(
                &c,
                &profile,
                &OptConfig {
                    build_all: true,
                    ..cfg
                },
            )
            .unwrap();
            let (a, b) = (
                budget(&pruned.sequence, &profile, c.n_qubits()).duration_us,
                budget(&full.sequence, &profile, c.n_qubits()).duration_us,
            );
            assert!(
                (a - b).abs() <= 1e-9 * b,
                "{} {target:?}: {a} us pruned, {b} us with every candidate",
                path.display()
            );
            // And directly: no built candidate fell below a bound it carried.
            assert_eq!(
                full.bound_violations,
                0,
                "{} {target:?}: candidates below their bounds",
                path.display()
            );
            skipped += pruned
                .blocks
                .iter()
                .filter(|r| r.lower_bound == 0.0)
                .count();
        }
    }
    assert!(skipped > 0, "no block skipped the coupling program");
}

/// The same on wide blocks, where the floors decide (the circuits above rarely
/// have blocks of many parts): generated circuits on 50 qubits, the kind the
/// compile benchmark times, for a 50-ion variant of the demo profile (with chain MS
/// of one sign, and of both), and one where hiding is cheap enough to win blocks
/// (invented example numbers), both targets.
/// Pruned and build-all compiles choose blocks of the same duration, no built
/// candidate has a key below a bound it carried, and most blocks skip the coupling
/// program.
#[test]
fn skipping_by_the_floors_loses_nothing_on_wide_blocks() {
    use generated::{generated_circuit, Kind};
    use tutti::native::budget::budget;
    use tutti::native::profile::Cost;
    let mut signed = Profile::demo();
    signed.device.ions = 50;
    // Pulses of one sign, so that the echo, fold and hiding candidates are the ones
    // in play (with signed pulses hiding wins no block here).
    let mut profile = signed.clone();
    profile.capabilities.negative_chain_ms = false;
    let mut cheap_hiding = profile.clone();
    let quick = Some(Cost {
        fixed: 2.0,
        per_rad: 0.0,
    });
    cheap_hiding.durations_us.hide = quick;
    cheap_hiding.durations_us.unhide = quick;
    let kinds = [Kind::Rz, Kind::Ry, Kind::H, Kind::Cx, Kind::Cu1];
    let mut hides = 0;
    for (k, (profile, target, gates)) in [
        (&profile, Target::Addressed, 3000),
        (&cheap_hiding, Target::Addressed, 3000),
        (&profile, Target::Collective, 600),
        (&signed, Target::Collective, 600),
        (&signed, Target::Addressed, 1000),
    ]
    .into_iter()
    .enumerate()
    {
        let c = generated_circuit(50, gates, 0x51, &kinds);
        let cfg = OptConfig {
            target,
            block_time: std::time::Duration::from_secs(3600),
            solver_time: std::time::Duration::from_secs(3600),
            max_steps: 100_000_000,
            ..OptConfig::default()
        };
        let pruned = compile_optimized(&c, profile, &cfg).unwrap();
        let full = compile_optimized(
            &c,
            profile,
            &OptConfig {
                build_all: true,
                ..cfg
            },
        )
        .unwrap();
        let (a, b) = (
            budget(&pruned.sequence, profile, 50).duration_us,
            budget(&full.sequence, profile, 50).duration_us,
        );
        assert!(
            (a - b).abs() <= 1e-9 * b,
            "{target:?}: {a} us pruned, {b} us with every candidate"
        );
        // Directly: every candidate built had a key at or above each bound it was
        // given (its own, and its kind's from the floors).
        assert_eq!(
            full.bound_violations, 0,
            "{target:?}: candidates below their bounds"
        );
        hides += pruned
            .sequence
            .steps
            .iter()
            .filter(|s| matches!(s.op, NativeOp::Hide { .. }))
            .count();
        let skipped = pruned
            .blocks
            .iter()
            .filter(|r| r.lower_bound == 0.0)
            .count();
        if k == 0 {
            assert!(
                skipped * 2 > pruned.blocks.len(),
                "{skipped} of {} blocks skipped the program",
                pruned.blocks.len()
            );
        }
    }
    assert!(hides > 0, "hiding won no block");
}

/// The step limit stops the compile at the first range whose steps would pass it,
/// in range order, although each batch of ranges joins while the next one is
/// compiled: for limits at, just below and just above several sync points of the
/// full output (ranges of 10 instructions, so dozens of ranges in many batches),
/// the error names the instruction where that range ends, and a limit of the whole
/// output's size compiles. The full output's own sync points are the reference.
#[test]
fn the_step_limit_stops_at_the_first_range_past_it() {
    use generated::{generated_circuit, Kind};
    use tutti::compile::CompileError;
    let profile = Profile::demo();
    let c = generated_circuit(6, 1200, 0x57, &[Kind::Rz, Kind::H, Kind::Cx, Kind::Cu1]);
    let cfg = OptConfig {
        max_range_instrs: 10,
        ..OptConfig::default()
    };
    let full = compile_optimized(&c, &profile, &cfg).unwrap();
    let sync = &full.sync;
    assert!(sync.len() > 60, "{} ranges", sync.len());
    let total = full.sequence.steps.len();
    let exact = compile_optimized(
        &c,
        &profile,
        &OptConfig {
            max_steps: total,
            ..cfg
        },
    )
    .unwrap();
    assert_eq!(exact.sequence, full.sequence);
    let mut checked = 0;
    for k in [0, 1, 17, 18, 40, sync.len() / 2, sync.len() - 2] {
        for limit in [
            sync[k].steps.saturating_sub(1),
            sync[k].steps,
            sync[k].steps + 1,
        ] {
            // The first range whose end passes the limit.
            let Some(first) = sync.iter().find(|s| s.steps > limit) else {
                continue;
            };
            match compile_optimized(
                &c,
                &profile,
                &OptConfig {
                    max_steps: limit,
                    ..cfg
                },
            ) {
                Err(CompileError::TooManySteps {
                    limit: l,
                    instruction,
                    ..
                }) => {
                    assert_eq!(l, limit);
                    assert_eq!(instruction, first.instrs, "limit {limit}");
                    checked += 1;
                }
                other => panic!("limit {limit}: {:?}", other.map(|o| o.sequence.steps.len())),
            }
        }
    }
    assert!(checked >= 18, "{checked} limits checked");
}

/// The peephole on random lists of collective rotations (some undoing the one
/// before), light shifts (some undoing the one before, many of angle pi), frame
/// changes and MS pulses on 3 ions: it keeps the unitary (the statevector checker),
/// a near miss of its output (one angle off by 1e-8) is proven different, and it
/// stops at its fixed point (applied again, the same operations with angles equal
/// up to rounding), which is what its rule for stopping after one pass unless a
/// run was rewritten to nothing claims; lists needing a second pass occur.
#[test]
fn the_peephole_keeps_the_unitary_and_stops_at_its_fixed_point() {
    use rand::{Rng, SeedableRng};
    use std::f64::consts::PI;
    use tutti::compile::optimize::emit::peephole_passes;
    let program = |ops: &[NativeOp]| {
        let mut s = Sequence::new(3, Vec::new());
        s.steps = ops
            .iter()
            .map(|&op| tutti::native::Step {
                op,
                condition: None,
            })
            .collect();
        Program::from_sequence(&s)
    };
    let equal = |a: &[NativeOp], b: &[NativeOp]| {
        check(&program(a), &program(b), &CheckConfig::default())
            .expect("three ions compare")
            .equivalent
    };
    let wrap = |x: f64| x - 2.0 * PI * (x / (2.0 * PI)).round();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(29);
    let mut second_passes = 0;
    for _ in 0..200 {
        let mut ops: Vec<NativeOp> = Vec::new();
        for _ in 0..rng.gen_range(2..24) {
            let op = match rng.gen_range(0..6) {
                0 => NativeOp::Collective {
                    theta: rng.gen_range(-3.0..3.0),
                    phi: rng.gen_range(-3.0..3.0),
                },
                1 => NativeOp::LightShift {
                    ion: rng.gen_range(0..3),
                    theta: if rng.gen_bool(0.5) {
                        PI
                    } else {
                        rng.gen_range(-3.0..3.0)
                    },
                },
                2 => NativeOp::VirtualZ {
                    theta: rng.gen_range(-3.0..3.0),
                },
                3 => NativeOp::Ms {
                    theta: rng.gen_range(-2.0..2.0),
                    phi: 0.0,
                },
                // The one before, undone.
                _ => match ops.last() {
                    Some(&NativeOp::Collective { theta, phi }) => {
                        NativeOp::Collective { theta: -theta, phi }
                    }
                    Some(&NativeOp::LightShift { ion, theta }) => {
                        NativeOp::LightShift { ion, theta: -theta }
                    }
                    _ => NativeOp::VirtualZ { theta: 0.4 },
                },
            };
            ops.push(op);
        }
        let (once, passes) = peephole_passes(ops.clone(), 3);
        second_passes += usize::from(passes > 1);
        assert!(equal(&ops, &once), "{ops:?}\n -> {once:?}");
        let (twice, _) = peephole_passes(once.clone(), 3);
        let same = once.len() == twice.len()
            && once.iter().zip(&twice).all(|(a, b)| match (*a, *b) {
                (
                    NativeOp::LightShift { ion: i, theta: x },
                    NativeOp::LightShift { ion: j, theta: y },
                ) => i == j && wrap(x - y).abs() < 1e-12,
                (NativeOp::VirtualZ { theta: x }, NativeOp::VirtualZ { theta: y }) => {
                    wrap(x - y).abs() < 1e-12
                }
                (a, b) => a == b,
            });
        assert!(
            same,
            "not a fixed point: {ops:?}\n -> {once:?}\n -> {twice:?}"
        );
        if let Some(k) = once.iter().position(|op| {
            matches!(
                op,
                NativeOp::Collective { .. } | NativeOp::LightShift { .. } | NativeOp::Ms { .. }
            )
        }) {
            let mut near = once.clone();
            match &mut near[k] {
                NativeOp::Collective { theta, .. }
                | NativeOp::LightShift { theta, .. }
                | NativeOp::Ms { theta, .. } => *theta += 1e-8,
                _ => unreachable!(),
            }
            assert!(!equal(&ops, &near), "a near miss passed: {near:?}");
        }
    }
    assert!(
        second_passes > 5,
        "{second_passes} lists needed a second pass"
    );
}

/// The optimizer's output on `text` (a circuit read from OpenQASM) for the 40-ion
/// [`one_sign_demo`] device on the collective target, with `objective`.
fn compiled_text(
    text: &str,
    objective: tutti::compile::optimize::Objective,
) -> (Circuit, Sequence) {
    compiled_on(text, objective, &one_sign_demo())
}

/// [`compiled_text`] on `profile`.
fn compiled_on(
    text: &str,
    objective: tutti::compile::optimize::Objective,
    profile: &Profile,
) -> (Circuit, Sequence) {
    let c = tutti::qasm::read_str("t.qasm", text)
        .circuit
        .expect("the circuit reads");
    let cfg = OptConfig {
        objective,
        ..OptConfig::default()
    };
    let o = compile_optimized(&c, profile, &cfg).unwrap();
    (c, o.sequence)
}

fn count(s: &Sequence, f: impl Fn(&NativeOp) -> bool) -> usize {
    s.steps.iter().filter(|st| f(&st.op)).count()
}

/// The steps of `s` that are MS pulses, in order.
fn ms_steps(s: &Sequence) -> Vec<usize> {
    (0..s.steps.len())
        .filter(|&k| matches!(s.steps[k].op, NativeOp::Ms { .. }))
        .collect()
}

/// The same sequence without step `at`.
fn without_step(s: &Sequence, at: usize) -> Sequence {
    let mut out = s.clone();
    out.steps.remove(at);
    out
}

/// The same sequence with `ion` flipped (a light shift of pi) just before step `at`
/// and back just after it.
fn flipped_around(s: &Sequence, at: usize, ion: u32) -> Sequence {
    let shift = |theta: f64| tutti::native::Step {
        op: NativeOp::LightShift { ion, theta },
        condition: None,
    };
    let mut out = s.clone();
    out.steps.insert(at + 1, shift(-std::f64::consts::PI));
    out.steps.insert(at, shift(std::f64::consts::PI));
    out
}

/// The same sequence with the MS pulse at step `at` changed by 1e-8 rad.
fn ms_off_by_a_hair(s: &Sequence, at: usize) -> Sequence {
    let mut out = s.clone();
    match &mut out.steps[at].op {
        NativeOp::Ms { theta, .. } => *theta += 1e-8,
        other => panic!("step {at} is {other:?}, not an MS pulse"),
    }
    out
}

/// Spare ions that keep one sign over a segment (docs/optimizer.md, "folded"): every
/// pair of them is coupled by the segment's total weight, a multiple of pi/2 (ghz_5:
/// four CNOTs of pi/4 each, on 35 spare ions, an odd count, so the couplings are a
/// global phase; derivation in the docs, the checker folds them in its pre-pass).
/// The output is proven equal, no spare ion is ever flipped, and it takes far
/// fewer MS pulses than an echo over 40 ions per CNOT. Near misses proven different:
/// an MS pulse off by 1e-8, a flip added on a spare ion between two pulses (its
/// couplings to the other spare ions no longer a multiple of pi/2), and one MS pulse
/// left out.
#[test]
fn folded_spare_ions_are_proven_and_their_near_misses_caught() {
    use tutti::compile::optimize::Objective;
    let text = std::fs::read_to_string("circuits/ghz_5.qasm").unwrap();
    let (c, seq) = compiled_text(&text, Objective::default());
    assert!(verdict(&c, &seq), "the folded ghz_5 verifies");
    let ms = ms_steps(&seq).len();
    assert!(
        ms <= 40,
        "{ms} MS pulses (an echo over 40 ions per CNOT: 160)"
    );
    assert_eq!(
        count(
            &seq,
            |op| matches!(op, NativeOp::LightShift { ion, .. } if *ion >= 5)
        ),
        0,
        "a spare ion was flipped"
    );
    let pulses = ms_steps(&seq);
    let off = ms_off_by_a_hair(&seq, pulses[1]);
    assert_caught(&c, &off, "an MS pulse off by 1e-8");
    let flipped = flipped_around(&seq, pulses[1], 20);
    assert_caught(&c, &flipped, "a spare ion flipped for one pulse");
    let missing = without_step(&seq, pulses[pulses.len() / 2]);
    assert_caught(&c, &missing, "an MS pulse left out");
    // The same circuit under every objective verifies (the fold is taken, or not,
    // by each objective's figures).
    for objective in Objective::ALL {
        let (c, s) = compiled_text(&text, objective);
        assert!(verdict(&c, &s), "{objective:?}");
    }
}

/// A fold that needs padding (objective pulses, which may pay MS area for fewer
/// pulses): one CNOT (pi/4) brings the spare ions' couplings to pi/4, padded to
/// pi/2. With an even number of spare ions (38), couplings of pi/2 on all their
/// pairs are Z on each spare ion (up to phase: exp(-i pi/2 Z Z) = -i Z Z, each ion
/// in an odd number of pairs), undone by a frame change of pi and a light shift of
/// -pi on each other ion; with an odd number (37) nothing is undone. Near misses
/// proven different: the frame change left out, one undoing light shift left out,
/// a padding pulse off by 1e-8.
#[test]
fn a_padded_fold_is_proven_and_its_near_misses_caught() {
    use tutti::compile::optimize::Objective;
    let head = "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[3];\n";
    // Spare ions 38 (q[2] is never touched): even.
    let (c, seq) = compiled_text(
        &format!("{head}h q[0];\ncx q[0],q[1];\n"),
        Objective::Pulses,
    );
    assert!(verdict(&c, &seq), "the padded fold verifies");
    let ms = ms_steps(&seq).len();
    assert!(ms <= 12, "{ms} MS pulses (an echo over 40 ions: 40)");
    let last_ms = |seq: &Sequence| *ms_steps(seq).last().expect("MS pulses");
    let frame = (last_ms(&seq)..seq.steps.len())
        .find(|&k| matches!(seq.steps[k].op, NativeOp::VirtualZ { .. }))
        .expect("a frame change after the pulses undoes Z on the spare ions");
    assert_caught(&c, &without_step(&seq, frame), "the frame change left out");
    let undo = (frame + 1..seq.steps.len())
        .find(|&k| matches!(seq.steps[k].op, NativeOp::LightShift { .. }))
        .expect("light shifts after the frame change");
    assert_caught(
        &c,
        &without_step(&seq, undo),
        "an undoing light shift left out",
    );
    let off = ms_off_by_a_hair(&seq, last_ms(&seq));
    assert_caught(&c, &off, "a pulse off by 1e-8");
    // Spare ions 37 (q[2] is rotated off Z, so it is not spare): odd, nothing to
    // undo, and the same pulse count.
    let (c, seq) = compiled_text(
        &format!("{head}h q[0];\ncx q[0],q[1];\nh q[2];\n"),
        Objective::Pulses,
    );
    assert!(
        verdict(&c, &seq),
        "the padded fold on 37 spare ions verifies"
    );
    assert!(
        !seq.steps[last_ms(&seq)..]
            .iter()
            .any(|s| matches!(s.op, NativeOp::VirtualZ { .. })),
        "nothing to undo"
    );
    let ms = ms_steps(&seq).len();
    assert!(ms <= 12, "{ms} MS pulses");
}

/// Under the objective `area`, no circuit of circuits/ takes more MS pulses on the
/// collective target than under `duration` at the same area (within 1e-9): plans of
/// equal area made in different ways differ in their sums' last bits, and those bits
/// once decided (bv_8: 144 MS pulses under `area`, 8 under `duration`, both of area
/// 2.00).
#[test]
fn equal_areas_are_decided_by_the_pulses() {
    use tutti::compile::optimize::Objective;
    let mut compared = 0;
    for path in common::files("circuits", "qasm") {
        let c = common::read_ok(&path);
        let run = |objective| {
            let cfg = OptConfig {
                objective,
                ..OptConfig::default()
            };
            let o = compile_optimized(&c, &Profile::demo(), &cfg).unwrap();
            let b = tutti::native::budget::figures(
                &o.sequence.steps.iter().map(|s| s.op).collect::<Vec<_>>(),
                40,
                &Profile::demo(),
            );
            (b.ms_area, b.ms_pulses)
        };
        let ((area_a, pulses_a), (area_d, pulses_d)) =
            (run(Objective::Area), run(Objective::Duration));
        assert!(area_a <= area_d * (1.0 + 1e-9), "{}: area", path.display());
        if (area_a - area_d).abs() <= 1e-9 * area_d {
            compared += 1;
            assert!(
                pulses_a <= pulses_d,
                "{}: {pulses_a} MS pulses under area, {pulses_d} under duration",
                path.display()
            );
        }
    }
    assert!(compared >= 10, "{compared} circuits of equal area");
}

/// ghz_12 on the demo device: its blocks' weight on the shared column is 7 pi/4, so
/// one block of pi/4 is made without it (an echo over the spare ions too) and the
/// rest fold to 3 pi/2 (28 spare ions, an even count, k odd: Z on each undone at the
/// end). Measured: 232 MS pulses, against 272 when the couplings were split. The
/// output is proven equal; near misses proven different: a flip of a spare ion left
/// out (only the swapped block flips them), MS pulses off by 1e-8 at the start, middle
/// and end.
#[test]
fn a_fold_with_a_block_swapped_is_proven_and_its_near_misses_caught() {
    let (c, seq) = compiled("ghz_12");
    assert!(verdict(&c, &seq), "ghz_12 verifies");
    let ms = ms_steps(&seq);
    assert!(ms.len() < 272, "{} MS pulses", ms.len());
    let spare_flip = seq
        .steps
        .iter()
        .position(|s| matches!(s.op, NativeOp::LightShift { ion, .. } if ion >= 12))
        .expect("the swapped block flips spare ions");
    assert_caught(
        &c,
        &without_step(&seq, spare_flip),
        "a spare ion's flip left out",
    );
    for at in [ms[0], ms[ms.len() / 2], ms[ms.len() - 1]] {
        assert_caught(
            &c,
            &ms_off_by_a_hair(&seq, at),
            &format!("MS pulse at step {at} off by 1e-8"),
        );
    }
}

/// Signed pulses (docs/gate-set.md, fact 10; MS of negative area, the sign set by
/// the detuning: common practice): the spare ions keep sign +1 and are never
/// touched, each CNOT of ghz_5 is four pulses of a quarter of its area. The outputs
/// of ghz_5 (Clifford: tableaux) and qft_5 (not Clifford: the spare ions split off
/// in the interaction picture, its frames snapped between blocks) are proven equal;
/// near misses proven different: one negative pulse played positive, a pulse off by
/// 1e-8, a spare ion flipped for one pulse, a flip of a circuit ion left out.
#[test]
fn signed_pulses_leave_spare_ions_alone_and_their_near_misses_are_caught() {
    use std::f64::consts::PI;
    use tutti::compile::optimize::Objective;
    for name in ["ghz_5", "qft_5"] {
        let text = std::fs::read_to_string(format!("circuits/{name}.qasm")).unwrap();
        let (c, seq) = compiled_on(&text, Objective::default(), &Profile::demo());
        let v = checked(&c, &seq);
        assert!(v.equivalent, "the signed {name} verifies");
        assert!(
            v.compared_qubits <= 5,
            "{name}: {} qubits compared",
            v.compared_qubits
        );
        let negative: Vec<usize> = ms_steps(&seq)
            .into_iter()
            .filter(|&k| matches!(seq.steps[k].op, NativeOp::Ms { theta, .. } if theta < 0.0))
            .collect();
        assert!(!negative.is_empty(), "{name}: no MS pulse of negative area");
        assert_eq!(
            count(
                &seq,
                |op| matches!(op, NativeOp::LightShift { ion, .. } if *ion >= 5)
            ),
            0,
            "{name}: a spare ion was touched"
        );
        if name == "ghz_5" {
            let ms = ms_steps(&seq).len();
            assert!(ms <= 16, "{ms} MS pulses");
        }
        let mut positive = seq.clone();
        if let NativeOp::Ms { theta, .. } = &mut positive.steps[negative[0]].op {
            *theta = -*theta;
        }
        let at = |what: &str| format!("{name}: {what}");
        assert_caught(&c, &positive, &at("a negative pulse played positive"));
        assert_caught(
            &c,
            &ms_off_by_a_hair(&seq, negative[0]),
            &at("a pulse off by 1e-8"),
        );
        let flipped = flipped_around(&seq, negative[0], 20);
        assert_caught(&c, &flipped, &at("a spare ion flipped for one pulse"));
        let flip = (0..negative[0])
            .rev()
            .find(|&k| matches!(seq.steps[k].op, NativeOp::LightShift { theta, .. } if (theta.abs() - PI).abs() < 1e-12))
            .expect("a flip before the negative pulse");
        assert_caught(
            &c,
            &without_step(&seq, flip),
            &at("a flip of a circuit ion left out"),
        );
    }
}

/// A device without negative chain MS gets none, on any circuit of circuits/ and
/// either target, while the demo device, which has them, uses some (the capability
/// gates the construction).
#[test]
fn without_the_capability_no_chain_pulse_is_negative() {
    let mut negative_with = 0;
    for path in common::files("circuits", "qasm") {
        let c = common::read_ok(&path);
        for target in [
            tutti::compile::Target::Collective,
            tutti::compile::Target::Addressed,
        ] {
            let cfg = OptConfig {
                target,
                ..OptConfig::default()
            };
            let negatives = |p: &Profile| {
                let o = compile_optimized(&c, p, &cfg).unwrap();
                count(
                    &o.sequence,
                    |op| matches!(op, NativeOp::Ms { theta, .. } if *theta < 0.0),
                )
            };
            assert_eq!(negatives(&one_sign_demo()), 0, "{}", path.display());
            negative_with += negatives(&Profile::demo());
        }
    }
    assert!(
        negative_with > 0,
        "the demo device never used a negative pulse"
    );
}
