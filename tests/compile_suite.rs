//! Every circuit of circuits/ and every vendored outside circuit (QASMBench subset,
//! tests/data/qasmbench/PROVENANCE.md) compiles on both targets and the statevector
//! or tableau checker proves the output equal to the input.

mod common;

use rayon::prelude::*;
use std::path::PathBuf;
use tutti::compile::Target;
use tutti::driver::{compile, CompileConfig, Verification};
use tutti::native::profile::Profile;
use tutti::sim::CheckConfig;

/// Files too large for one whole-program comparison within the tests' memory budget
/// (a 28-qubit adder of Toffoli gates): these must be verified gate by gate.
const GATE_BY_GATE: &[&str] = &["adder_n28.qasm"];

fn all_circuits() -> Vec<PathBuf> {
    let mut files = common::files("circuits", "qasm");
    assert!(
        files.len() >= 25,
        "circuits/ holds {} circuits",
        files.len()
    );
    files.extend(common::qasmbench_files());
    files
}

#[test]
fn every_circuit_compiles_and_verifies_on_both_targets() {
    let profile = Profile::demo();
    let failures: Vec<String> = all_circuits()
        .par_iter()
        .flat_map(|path| {
            let circuit = common::read_ok(path);
            let name = path.file_name().unwrap().to_string_lossy().into_owned();
            [
                (Target::Collective, false),
                (Target::Addressed, false),
                (Target::Collective, true),
                (Target::Addressed, true),
            ]
            .into_iter()
                .filter_map(|(target, baseline)| {
                    let cfg = CompileConfig {
                        target,
                        baseline,
                        check: CheckConfig {
                            memory_budget: 1 << 30,
                            ..CheckConfig::default()
                        },
                        ..CompileConfig::default()
                    };
                    match compile(&circuit, &profile, &cfg) {
                        Ok(c) => match c.verification.expect("verification ran") {
                            Verification::Whole(v)
                                if v.equivalent && !GATE_BY_GATE.contains(&name.as_str()) =>
                            {
                                None
                            }
                            Verification::Windowed(b)
                                if b.equivalent && GATE_BY_GATE.contains(&name.as_str()) =>
                            {
                                None
                            }
                            other => Some(format!(
                                "{name} {target:?} baseline {baseline}: unexpected verification {other:?}"
                            )),
                        },
                        Err(e) => Some(format!("{name} {target:?} baseline {baseline}: {e}")),
                    }
                })
                .collect::<Vec<_>>()
        })
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn windowed_verification_catches_a_corrupted_block_and_a_bad_trace() {
    use tutti::compile::compile_baseline_traced;
    use tutti::native::NativeOp;
    use tutti::native::Sequence;
    use tutti::sim::{check_windows, sync_points_from_origin, CheckError};
    fn windowed(
        circuit: &tutti::circuit::Circuit,
        seq: &Sequence,
        origin: &[u32],
        cfg: &CheckConfig,
    ) -> Result<tutti::sim::WindowVerdict, CheckError> {
        let sync = sync_points_from_origin(origin, circuit.instrs.len())?;
        check_windows(circuit, seq, &sync, cfg)
    }
    let circuit = common::read_ok("tests/data/qasmbench/large/adder_n28/adder_n28.qasm".as_ref());
    let profile = Profile::demo();
    let (seq, origin) = compile_baseline_traced(&circuit, &profile, Target::Addressed).unwrap();
    let cfg = CheckConfig::default();
    assert!(windowed(&circuit, &seq, &origin, &cfg).unwrap().equivalent);
    // One light shift off by 1e-3 somewhere in the middle.
    let mut bad = seq.clone();
    let k = bad
        .steps
        .iter()
        .enumerate()
        .filter(|(_, s)| matches!(s.op, NativeOp::LightShift { .. }))
        .nth(40)
        .unwrap()
        .0;
    if let NativeOp::LightShift { theta, .. } = &mut bad.steps[k].op {
        *theta += 1e-3;
    }
    let v = windowed(&circuit, &bad, &origin, &cfg).unwrap();
    assert!(
        !v.equivalent && v.detail.contains("instruction 16"),
        "{v:?}"
    );
    // A pulse moved to another gate's block: the blocks no longer match.
    let mut shifted = origin.clone();
    let first_change = (1..shifted.len())
        .find(|&i| shifted[i] != shifted[i - 1])
        .unwrap();
    shifted[first_change] = shifted[first_change - 1];
    assert!(!windowed(&circuit, &seq, &shifted, &cfg).unwrap().equivalent);
    // A trace out of order is refused.
    let mut disordered = origin.clone();
    disordered.swap(0, origin.len() - 1);
    assert!(windowed(&circuit, &seq, &disordered, &cfg).is_err());
}

#[test]
fn the_default_compile_verifies_a_large_circuit_gate_by_gate_within_bounded_work() {
    // With the default 8 GiB budget a 28-qubit state pair fits in memory, but the whole
    // comparison would take hours; the default work bound sends it gate by gate.
    let cfg = CompileConfig::default();
    assert!(cfg.check.max_work.is_finite() && cfg.check.max_work <= 1e12);
    let circuit = common::read_ok("tests/data/qasmbench/large/adder_n28/adder_n28.qasm".as_ref());
    // Sure to be refused whole (not Clifford, 28 qubits): compiled once, for windows.
    let mut compiles = 0;
    let out = tutti::driver::compile_with(&circuit, &Profile::demo(), &cfg, &mut |s| {
        compiles += usize::from(s == tutti::driver::Stage::Compile)
    })
    .unwrap();
    assert_eq!(compiles, 1);
    match out.verification {
        Some(Verification::Windowed(b)) => assert!(b.equivalent, "{b:?}"),
        other => panic!("expected gate-by-gate verification, got {other:?}"),
    }
    // A small circuit still gets the whole comparison under the same default.
    let small = common::read_ok("circuits/qft_5.qasm".as_ref());
    let out = compile(&small, &Profile::demo(), &cfg).unwrap();
    assert!(matches!(out.verification, Some(Verification::Whole(v)) if v.equivalent));
    // So does a large Clifford circuit (the tableau), though it has 40 qubits.
    let ghz = common::read_ok("circuits/ghz_40.qasm".as_ref());
    let out = compile(&ghz, &Profile::demo(), &cfg).unwrap();
    assert!(matches!(out.verification, Some(Verification::Whole(v)) if v.equivalent));
}

#[test]
fn every_output_format_reads_back_to_a_sequence_equal_to_the_circuit() {
    // Each compiled sequence is written in all three formats, read back as a user's
    // file would be (driver::load), and verified window by window against the
    // circuit with the compile's trace: the formats lose nothing the checker sees.
    use tutti::compile::compile_baseline_traced;
    use tutti::compile::optimize::{compile_optimized, OptConfig};
    use tutti::driver::{load, Format, Loaded};
    use tutti::sim::{check_windows, sync_points_from_origin};
    let profile = Profile::demo();
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    let failures: Vec<String> = all_circuits()
        .par_iter()
        .flat_map_iter(|path| {
            let circuit = common::read_ok(path);
            let name = path.file_stem().unwrap().to_string_lossy().into_owned();
            let mut bad = Vec::new();
            for (target, baseline) in [
                (Target::Collective, true),
                (Target::Addressed, true),
                (Target::Collective, false),
                (Target::Addressed, false),
            ] {
                let (seq, sync) = if baseline {
                    let (seq, origin) =
                        compile_baseline_traced(&circuit, &profile, target).unwrap();
                    (
                        seq,
                        sync_points_from_origin(&origin, circuit.instrs.len()).unwrap(),
                    )
                } else {
                    // Ranges of few qubits, so that every window is small.
                    let cfg = OptConfig {
                        target,
                        window_qubits: Some(tutti::driver::WINDOW_QUBITS),
                        ..OptConfig::default()
                    };
                    let o = compile_optimized(&circuit, &profile, &cfg).unwrap();
                    (o.sequence, o.sync)
                };
                for (format, ext) in [
                    (Format::Pulses, "pulses"),
                    (Format::Json, "json"),
                    (Format::Qasm, "qasm"),
                ] {
                    let file = dir.join(format!("{name}.{}.{baseline}.{ext}", target.name()));
                    std::fs::write(&file, format.render(&seq)).unwrap();
                    let back = match load(&file, &tutti::qasm::Limits::default()) {
                        Ok((Loaded::Sequence(s), _)) => s,
                        Ok((Loaded::Circuit(_), _)) => {
                            bad.push(format!("{name} {ext}: read back as a circuit"));
                            continue;
                        }
                        Err(e) => {
                            bad.push(format!("{name} {ext}: {e}"));
                            continue;
                        }
                    };
                    match check_windows(&circuit, &back, &sync, &CheckConfig::default()) {
                        Ok(v) if v.equivalent => {}
                        other => bad.push(format!(
                            "{name} {target:?} baseline {baseline} {ext}: {other:?}"
                        )),
                    }
                }
            }
            bad
        })
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

// Bug: gate-by-gate verification started every block with every ion visible, so a
// block that left an ion hidden was not seen. Windows now carry the hidden ions.
#[test]
fn windowed_verification_sees_an_ion_left_hidden_between_windows() {
    use tutti::compile::compile_baseline_traced;
    use tutti::native::NativeOp;
    use tutti::sim::{check_windows, sync_points_from_origin};
    let circuit = common::read_ok("circuits/ghz_5.qasm".as_ref());
    // A device that entangles by hiding the other ions around a global MS pulse.
    let mut profile = Profile::demo().with_ions(8);
    profile.capabilities.pair_ms = false;
    profile.capabilities.hiding = true;
    let (seq, origin) = compile_baseline_traced(&circuit, &profile, Target::Addressed).unwrap();
    let sync = sync_points_from_origin(&origin, circuit.instrs.len()).unwrap();
    let cfg = CheckConfig::default();
    assert!(
        check_windows(&circuit, &seq, &sync, &cfg)
            .unwrap()
            .equivalent
    );
    let unhides: Vec<usize> = (0..seq.steps.len())
        .filter(|&k| matches!(seq.steps[k].op, NativeOp::Unhide { .. }))
        .collect();
    assert!(unhides.len() > 8, "the compile hides ions");
    // An unhide whose ion takes part in the next MS pulse (no hide of it before),
    // so leaving it hidden changes a later window; and the last unhide of all, so
    // the ion stays hidden to the end.
    let feeds_next_pulse = |k: usize| {
        let NativeOp::Unhide { ion } = seq.steps[k].op else {
            return false;
        };
        for step in &seq.steps[k + 1..] {
            match step.op {
                NativeOp::Hide { ion: h } if h == ion => return false,
                NativeOp::Ms { .. } => return true,
                _ => {}
            }
        }
        false
    };
    let mid = *unhides
        .iter()
        .find(|&&k| feeds_next_pulse(k))
        .expect("an ion unhidden before a pulse it takes part in");
    for (k, expect) in [(mid, "differ"), (*unhides.last().unwrap(), "still hidden")] {
        let mut bad = seq.clone();
        bad.steps.remove(k);
        let mut origin = origin.clone();
        origin.remove(k);
        let sync = sync_points_from_origin(&origin, circuit.instrs.len()).unwrap();
        let v = check_windows(&circuit, &bad, &sync, &cfg).unwrap();
        assert!(
            !v.equivalent && v.detail.contains(expect),
            "step {k}: {v:?}"
        );
    }
}

// Windows may span several instructions (as an optimizer that merges pulses across
// gates will need): sync points every few instructions prove the same, and a
// corrupted pulse is still found, in the window that holds it.
#[test]
fn windows_spanning_several_instructions_verify_and_locate_a_fault() {
    use tutti::compile::compile_baseline_traced;
    use tutti::native::NativeOp;
    use tutti::sim::{check_windows, sync_points_from_origin};
    let circuit = common::read_ok("circuits/qft_8.qasm".as_ref());
    let (seq, origin) =
        compile_baseline_traced(&circuit, &Profile::demo(), Target::Collective).unwrap();
    let every = sync_points_from_origin(&origin, circuit.instrs.len()).unwrap();
    let coarse: Vec<_> = every
        .iter()
        .enumerate()
        .filter(|(i, _)| i % 7 == 6 || *i + 1 == every.len())
        .map(|(_, s)| *s)
        .collect();
    assert!(coarse.len() < every.len() / 5);
    let cfg = CheckConfig::default();
    let v = check_windows(&circuit, &seq, &coarse, &cfg).unwrap();
    assert!(v.equivalent && v.windows == coarse.len(), "{v:?}");
    let mut bad = seq.clone();
    let k = (0..bad.steps.len())
        .rev()
        .find(|&k| matches!(bad.steps[k].op, NativeOp::Ms { .. }))
        .unwrap();
    if let NativeOp::Ms { theta, .. } = &mut bad.steps[k].op {
        *theta *= 1.0 + 1e-9;
    }
    let v = check_windows(&circuit, &bad, &coarse, &cfg).unwrap();
    assert!(!v.equivalent, "{v:?}");
    assert!(v.detail.contains("instructions"), "{}", v.detail);
    // Sync points out of order are refused.
    let mut shuffled = coarse.clone();
    shuffled.swap(0, 1);
    assert!(check_windows(&circuit, &seq, &shuffled, &cfg).is_err());
}

/// Z rotations that end on qubits just before the final measurements are left out
/// only where the whole comparison, up to a final diagonal on the measured qubits,
/// proves the output (a diagonal before a Z-basis measurement changes no outcome
/// probability: Nielsen and Chuang, section 2.2.5). The output, in every format,
/// then passes that comparison (and, where a rotation was left out, fails the strict
/// one); without `drop_final_z` the strict proof stays; nothing costs more for it.
#[test]
fn final_z_rotations_are_left_out_only_with_a_final_diagonal_proof() {
    use tutti::driver::{load, Format, Loaded};
    use tutti::sim::{check, Program};
    let profile = Profile::demo();
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    let relaxed = CheckConfig {
        up_to_final_diagonal: true,
        ..CheckConfig::default()
    };
    let results: Vec<Result<bool, String>> = common::files("circuits", "qasm")
        .par_iter()
        .flat_map_iter(|path| {
            let circuit = common::read_ok(path);
            let name = path.file_stem().unwrap().to_string_lossy().into_owned();
            let a = Program::from_circuit(&circuit).unwrap();
            let mut out = Vec::new();
            for target in [Target::Collective, Target::Addressed] {
                let cfg = CompileConfig {
                    target,
                    ..CompileConfig::default()
                };
                let kept = compile(&circuit, &profile, &cfg).unwrap();
                let dropped = compile(
                    &circuit,
                    &profile,
                    &CompileConfig {
                        drop_final_z: true,
                        ..cfg.clone()
                    },
                )
                .unwrap();
                let tag = format!("{name} {target:?}");
                let diagonal = match &dropped.verification {
                    Some(Verification::Whole(v)) => v.final_diagonal,
                    _ => false,
                };
                if let Some(Verification::Whole(v)) = &kept.verification {
                    if v.final_diagonal {
                        out.push(Err(format!("{tag}: kept, yet proven up to a diagonal")));
                    }
                }
                if dropped.budget.light_shifts > kept.budget.light_shifts
                    || dropped.budget.duration_us > kept.budget.duration_us + 1e-9
                {
                    out.push(Err(format!("{tag}: leaving Z out cost more")));
                }
                if !diagonal {
                    continue;
                }
                for (format, ext) in [
                    (Format::Pulses, "pulses"),
                    (Format::Json, "json"),
                    (Format::Qasm, "qasm"),
                ] {
                    let file = dir.join(format!("{name}.{}.{ext}", target.name()));
                    std::fs::write(&file, format.render(&dropped.sequence)).unwrap();
                    let Ok((Loaded::Sequence(back), _)) =
                        load(&file, &tutti::qasm::Limits::default())
                    else {
                        out.push(Err(format!("{tag} {ext}: does not read back")));
                        continue;
                    };
                    let b = Program::from_sequence(&back);
                    let loose = check(&a, &b, &relaxed).unwrap();
                    let strict = check(&a, &b, &CheckConfig::default()).unwrap();
                    if loose.equivalent {
                        out.push(Ok(!strict.equivalent));
                    } else {
                        out.push(Err(format!("{tag} {ext}: {}", loose.detail)));
                    }
                }
            }
            out
        })
        .collect();
    let failures: Vec<&String> = results.iter().filter_map(|r| r.as_ref().err()).collect();
    assert!(failures.is_empty(), "{failures:#?}");
    let left_out = results.iter().filter(|r| matches!(r, Ok(true))).count();
    assert!(left_out >= 10, "Z left out in only {left_out} outputs");
}
