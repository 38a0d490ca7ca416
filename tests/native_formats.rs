//! Compiled sequences: the three output formats read back to the same unitary, extra
//! ions are left untouched (and a disturbance of them is caught), and the pulse list
//! and JSON readers locate their errors.

mod common;

use proptest::prelude::*;
use std::f64::consts::PI;
use tutti::circuit::{Circuit, Gate, GateKind, Op, Qubit};
use tutti::compile::{compile_baseline, Target};
use tutti::driver::Format;
use tutti::native::profile::Profile;
use tutti::native::text::{
    format_angle, parse_angle, read_json, read_pulses, write_json, write_pulses,
};
use tutti::native::{NativeOp, Sequence};
use tutti::sim::{check, CheckConfig, Program};

fn read_back(format: Format, text: &str) -> Program {
    match format {
        Format::Qasm => {
            let out = tutti::qasm::read_str("out.qasm", text);
            let rendered = out.render();
            Program::from_circuit(&out.circuit.unwrap_or_else(|| panic!("{rendered}\n{text}")))
                .unwrap()
        }
        Format::Pulses => {
            let out = read_pulses("out.pulses", text);
            let rendered = out.render();
            Program::from_sequence(&out.sequence.unwrap_or_else(|| panic!("{rendered}")))
        }
        Format::Json => {
            let out = read_json("out.json", text);
            let rendered = out.render();
            Program::from_sequence(&out.sequence.unwrap_or_else(|| panic!("{rendered}")))
        }
    }
}

fn arb_unitary_circuit() -> impl Strategy<Value = Circuit> {
    (1u32..=6).prop_flat_map(|n| {
        let gate = (
            0..GateKind::ALL.len(),
            prop::collection::vec(-PI..PI, 3),
            Just((0..n).collect::<Vec<u32>>()).prop_shuffle(),
        )
            .prop_filter_map("fits", move |(k, params, perm)| {
                let kind = GateKind::ALL[k];
                (kind.n_qubits() as u32 <= n).then(|| Op::Gate {
                    gate: Gate::new(kind, &params[..kind.n_params()]),
                    qubits: perm
                        .iter()
                        .take(kind.n_qubits())
                        .map(|&q| Qubit(q))
                        .collect(),
                })
            });
        prop::collection::vec(gate, 1..8).prop_map(move |ops| {
            let mut c = Circuit::with_registers(n, 0);
            for op in ops {
                c.push(op);
            }
            c
        })
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    #[test]
    fn three_output_formats_round_trip_to_the_same_unitary(c in arb_unitary_circuit(), addressed in any::<bool>()) {
        let profile = Profile::demo().with_ions(c.n_qubits() + 1);
        let target = if addressed { Target::Addressed } else { Target::Collective };
        let seq = compile_baseline(&c, &profile, target).unwrap();
        let original = Program::from_circuit(&c).unwrap();
        for format in [Format::Qasm, Format::Pulses, Format::Json] {
            let text = format.render(&seq);
            let back = read_back(format, &text);
            let v = check(&original, &back, &CheckConfig::default()).unwrap();
            prop_assert!(v.equivalent, "{format:?}: {v:?}\n{c}");
        }
    }
}

#[test]
fn json_round_trips_exactly_and_pulses_within_rounding() {
    let c = common::read_ok("circuits/teleport_3.qasm".as_ref());
    let seq = compile_baseline(&c, &Profile::demo().with_ions(5), Target::Addressed).unwrap();
    let back = read_json("x.json", &write_json(&seq)).sequence.unwrap();
    assert_eq!(back, seq);
    let qasm = tutti::native::qasm_out::write_qasm(&seq);
    assert_eq!(
        tutti::native::qasm_out::read_qasm_sequence(&qasm),
        Some(seq.clone())
    );
    assert!(
        tutti::qasm::read_str("x.qasm", &qasm).circuit.is_some(),
        "the QASM output is valid OpenQASM 2"
    );
    let back = read_pulses("x.pulses", &write_pulses(&seq))
        .sequence
        .unwrap();
    assert_eq!(back.steps.len(), seq.steps.len());
    assert_eq!(back.cregs, seq.cregs);
    for (a, b) in back.steps.iter().zip(&seq.steps) {
        assert_eq!(a.condition, b.condition);
    }
}

#[test]
fn angles_print_as_multiples_of_pi_and_read_back() {
    for (v, text) in [
        (PI / 2.0, "pi/2"),
        (-3.0 * PI / 4.0, "-3*pi/4"),
        (PI, "pi"),
        (0.0, "0"),
        (-PI, "-pi"),
    ] {
        assert_eq!(format_angle(v), text);
        assert!((parse_angle(text).unwrap() - v).abs() < 1e-15);
    }
    let odd = 0.123456789012345;
    assert_eq!(parse_angle(&format_angle(odd)), Some(odd));
    // Tiny angles (a crosstalk compensation's far commands) and angles a little off
    // a multiple of pi read back to within a few units in the last place, not
    // snapped to `0*pi` or to the multiple (a bug found by the crosstalk tests).
    for v in [1e-12, -3.5e-13, PI + 3e-12, PI / 2.0 - 1e-13, 1e-300] {
        let back = parse_angle(&format_angle(v)).unwrap();
        assert!(
            (back - v).abs() <= 4.0 * f64::EPSILON * v.abs(),
            "{v} -> {}",
            format_angle(v)
        );
    }
    for bad in ["", "pie", "2*pi/", "x", "pi/0"] {
        assert!(parse_angle(bad).is_none(), "{bad}");
    }
}

/// A small circuit on a 40-ion device: the 37 extra ions must end as they started.
fn compiled_on_big_device() -> (Program, Sequence) {
    let c = common::read_ok("circuits/qft_3.qasm".as_ref());
    let seq = compile_baseline(&c, &Profile::demo(), Target::Collective).unwrap();
    assert_eq!(seq.n_ions, 40);
    (Program::from_circuit(&c).unwrap(), seq)
}

#[test]
fn extra_ions_of_the_device_are_left_untouched() {
    let (original, seq) = compiled_on_big_device();
    let v = check(
        &original,
        &Program::from_sequence(&seq),
        &CheckConfig::default(),
    )
    .unwrap();
    assert!(
        v.equivalent && v.qubits == 40 && v.compared_qubits == 3,
        "{v:?}"
    );
}

#[test]
fn a_compiler_bug_that_disturbs_an_extra_ion_is_caught() {
    let (original, seq) = compiled_on_big_device();
    // A stray light shift on an unused ion: caught, and the ion is named.
    let mut stray = seq.clone();
    stray.push(NativeOp::LightShift {
        ion: 37,
        theta: 0.01,
    });
    let v = check(
        &original,
        &Program::from_sequence(&stray),
        &CheckConfig::default(),
    )
    .unwrap();
    assert!(
        !v.equivalent && v.detail.contains("qubit 37"),
        "{}",
        v.detail
    );
    // A flip forgotten in one echo row: an unused ion stays coupled to the pair.
    let mut forgotten = seq.clone();
    let at = forgotten
        .steps
        .iter()
        .position(
            |s| matches!(s.op, NativeOp::LightShift { ion, theta } if ion > 3 && theta == -PI),
        )
        .expect("an echo un-flip on an unused ion");
    forgotten.steps.remove(at);
    let v = check(
        &original,
        &Program::from_sequence(&forgotten),
        &CheckConfig::default(),
    );
    assert!(!matches!(v, Ok(ref v) if v.equivalent), "{v:?}");
}

#[test]
fn the_pulse_list_reader_locates_its_errors() {
    let text = "# a hand-written list\nions 3\ncreg c[1]\nchain_rotate pi/2 0\nlight_shift 5 pi\nchain_ms pi/4\nwobble 1\nmeasure 0 -> d[0]\npair_ms 1 1 pi 0\n";
    let out = read_pulses("hand.pulses", text);
    assert!(out.sequence.is_none());
    let lines: Vec<usize> = out
        .diagnostics
        .iter()
        .map(|d| out.sources.line_col(d.span.file, d.span.start).0)
        .collect();
    assert_eq!(lines, vec![5, 6, 7, 8, 9]);
    let rendered = out.render();
    assert!(
        rendered.contains("hand.pulses:5:1") && rendered.contains("ion 5 does not exist"),
        "{rendered}"
    );
    let no_ions = read_pulses("x.pulses", "light_shift 0 pi\n");
    assert!(no_ions.sequence.is_none());
}

#[test]
fn the_json_reader_rejects_malformed_input_with_a_location() {
    let out = read_json("x.json", "{\"tutti_sequence\": 2, \"ions\": 2, \"program\": [ {\"op\": \"chain_ms\", \"theta\": 1.0 ]}");
    assert!(out.sequence.is_none());
    assert!(out.render().contains("x.json:1:"));
    let out = read_json(
        "y.json",
        "{\"tutti_sequence\": 2, \"ions\": 2, \"program\": [{\"op\": \"light_shift\", \"ion\": 9, \"theta\": 1.0}]}",
    );
    assert!(out.sequence.is_none() && out.render().contains("beyond the 2 ions"));
}

#[test]
fn device_profiles_are_validated_with_clear_errors() {
    let demo = tutti::native::profile::DEMO_TOML;
    let cases = [
        (
            demo.replace("[coherence]", "[coherence]\nbogus = 1"),
            "unknown field",
        ),
        (
            demo.replace("fixed = 30.0", "fixed = -30.0"),
            "durations_us.chain_ms.fixed is -30",
        ),
        (
            demo.replace("chain_ms = { fixed = 30.0, per_rad = 150.0 }", ""),
            "missing field `chain_ms`",
        ),
        (
            demo.replace("nearest = 0.008", "matrix = [[0.0, 0.1], [0.1, 0.0]]"),
            "crosstalk.matrix is 2x2",
        ),
        (
            demo.replace("t2_us = 2.0e5", "t2_us = 0.0"),
            "coherence times must be positive",
        ),
    ];
    for (text, want) in cases {
        let err = Profile::from_toml("bad.toml", &text)
            .unwrap_err()
            .to_string();
        assert!(err.contains(want), "wanted `{want}` in: {err}");
    }
    let small = Profile::demo().with_ions(2);
    let c = common::read_ok("circuits/qft_3.qasm".as_ref());
    let err = compile_baseline(&c, &small, Target::Collective)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("needs 3 qubits") && err.contains("has 2 ions"),
        "{err}"
    );
}

#[test]
fn the_demo_profile_labels_every_number_as_an_example() {
    for line in tutti::native::profile::DEMO_TOML.lines() {
        let code = line.split('#').next().unwrap_or("");
        if code.chars().any(|c| c.is_ascii_digit()) && code.contains('=') {
            assert!(line.contains("# example"), "unlabelled number: {line}");
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 300, ..ProptestConfig::default() })]

    #[test]
    fn the_sequence_readers_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..300), words in prop::collection::vec(prop::sample::select(vec![
        "ions", "3", "creg", "c[2]", "rotate", "shift", "ms", "pair-ms", "addressed", "frame", "hide", "unhide",
        "measure", "->", "reset", "if", "c==1", "pi/2", "-pi", "0", "1", "2", "9", "#", "\n", "x",
    ]), 0..60)) {
        let text = String::from_utf8_lossy(&bytes);
        for t in [text.to_string(), words.join(" ")] {
            let out = read_pulses("fuzz.pulses", &t);
            if out.sequence.is_none() {
                prop_assert!(!out.diagnostics.is_empty());
                prop_assert!(out.render().contains("fuzz.pulses:"));
            }
            let out = read_json("fuzz.json", &t);
            prop_assert!(out.sequence.is_some() || !out.diagnostics.is_empty());
            let _ = tutti::native::qasm_out::read_qasm_sequence(&t);
        }
    }
}

/// The QASM output of the 15-qubit multiplier (QASMBench, vendored) on the demo
/// device, and the sequence it came from.
fn multiplier_qasm() -> (Sequence, String) {
    let c =
        common::read_ok("tests/data/qasmbench/medium/multiplier_n15/multiplier_n15.qasm".as_ref());
    let seq = compile_baseline(&c, &Profile::demo(), Target::Collective).unwrap();
    let text = tutti::native::qasm_out::write_qasm(&seq);
    (seq, text)
}

fn load_text(name: &str, text: &str) -> tutti::driver::Loaded {
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join(name);
    std::fs::write(&path, text).unwrap();
    match tutti::driver::load(&path, &tutti::qasm::Limits::default()) {
        Ok((loaded, _)) => loaded,
        Err(e) => panic!("{e}"),
    }
}

// Bug: checking a compiled `--format qasm` output expanded the native header gates
// (780 two-ion gates per 40-ion MS pulse) and ran out of memory.
#[test]
fn tuttis_own_qasm_output_reads_back_as_its_sequence_without_expansion() {
    let (seq, text) = multiplier_qasm();
    match load_text("multiplier.qasm", &text) {
        tutti::driver::Loaded::Sequence(back) => assert_eq!(back, seq),
        tutti::driver::Loaded::Circuit(_) => panic!("read as a circuit"),
    }
}

// An edited header is no longer tutti's: the file is read as the circuit it says,
// and a changed gate body is then a different unitary.
#[test]
fn an_edited_qasm_header_is_read_as_a_circuit() {
    let c = common::read_ok("circuits/teleport_3.qasm".as_ref());
    let seq = compile_baseline(&c, &Profile::demo().with_ions(4), Target::Collective).unwrap();
    let text = tutti::native::qasm_out::write_qasm(&seq);
    assert!(matches!(
        load_text("same.qasm", &text),
        tutti::driver::Loaded::Sequence(_)
    ));
    let edited = text.replacen(
        "gate light_shift(theta) a { rz(theta) a; }",
        "gate light_shift(theta) a { rz(theta*1.000001) a; }",
        1,
    );
    assert_ne!(edited, text);
    let loaded = load_text("edited.qasm", &edited);
    let tutti::driver::Loaded::Circuit(circuit) = loaded else {
        panic!("an edited header was read as tutti's sequence");
    };
    let v = check(
        &Program::from_circuit(&c).unwrap(),
        &Program::from_circuit(&circuit).unwrap(),
        &CheckConfig::default(),
    )
    .unwrap();
    assert!(!v.equivalent, "{v:?}");
    // Other edits that a reader of OpenQASM 2 would see: an extra gate definition,
    // an ion outside the register, a chain gate the header does not define.
    let extra = format!("{text}gate extra a {{ x a; }}\n");
    let outside = text.replacen("light_shift(", "light_shift(0) q[9];\nlight_shift(", 1);
    let undefined = text.replacen("chain_rotate_4(", "chain_rotate_5(", 1);
    for (what, t) in [
        ("extra gate", extra),
        ("ion outside", outside),
        ("undefined chain", undefined),
    ] {
        assert_ne!(t, text, "{what}");
        assert!(
            tutti::native::qasm_out::read_qasm_sequence(&t).is_none(),
            "{what} read as tutti's sequence"
        );
    }
}

// One name per operation: every name of `names::ALL` is what each writer puts down
// for its operation, each reader takes it back, and docs/formats.md lists it.
#[test]
fn each_operation_has_one_name_in_every_format_and_the_docs() {
    use tutti::native::{names, Step};
    let ops = [
        NativeOp::Collective {
            theta: 0.1,
            phi: 0.2,
        },
        NativeOp::LightShift { ion: 0, theta: 0.3 },
        NativeOp::Ms {
            theta: 0.4,
            phi: 0.0,
        },
        NativeOp::PairMs {
            a: 0,
            b: 1,
            theta: 0.5,
            phi: 0.0,
        },
        NativeOp::Addressed {
            ion: 1,
            theta: 0.6,
            phi: 0.7,
        },
        NativeOp::VirtualZ { theta: 0.8 },
        NativeOp::Hide { ion: 2 },
        NativeOp::Unhide { ion: 2 },
        NativeOp::Measure { ion: 0, clbit: 0 },
        NativeOp::Reset { ion: 0 },
    ];
    let docs = std::fs::read_to_string("docs/formats.md").unwrap();
    let profile_docs = std::fs::read_to_string("docs/device-profile.md").unwrap();
    let demo = tutti::native::profile::DEMO_TOML;
    for (op, name) in ops.iter().zip(names::ALL) {
        assert_eq!(op.name(), name);
        let mut seq = Sequence::new(3, vec![]);
        seq.cregs.push(tutti::circuit::Register {
            name: "c".into(),
            offset: 0,
            size: 1,
        });
        seq.steps.push(Step {
            op: *op,
            condition: None,
        });
        let pulses = write_pulses(&seq);
        assert!(
            pulses.lines().any(|l| l.starts_with(&format!("{name} "))),
            "pulse list: {name}\n{pulses}"
        );
        let json = write_json(&seq);
        assert!(
            json.contains(&format!("\"op\": \"{name}\"")),
            "JSON: {name}"
        );
        let qasm = tutti::native::qasm_out::write_qasm(&seq);
        if !matches!(op, NativeOp::Measure { .. } | NativeOp::Reset { .. }) {
            assert!(
                qasm.lines().any(|l| l.starts_with(&format!("gate {name}"))),
                "QASM header: {name}"
            );
        }
        assert_eq!(
            read_pulses("x", &pulses).sequence.as_ref(),
            Some(&seq),
            "{name}"
        );
        assert_eq!(
            read_json("x", &json).sequence.as_ref(),
            Some(&seq),
            "{name}"
        );
        assert_eq!(
            tutti::native::qasm_out::read_qasm_sequence(&qasm).as_ref(),
            Some(&seq),
            "{name}"
        );
        assert!(
            docs.contains(&format!("| `{name}`")) || docs.contains(&format!("`{name}` /")),
            "docs/formats.md: {name}"
        );
        // Operations with a cost have it under the same name in the profile.
        if !matches!(op, NativeOp::VirtualZ { .. }) {
            assert!(
                demo.contains(&format!("\n{name} = {{")),
                "profile key: {name}"
            );
            assert!(
                profile_docs.contains(&format!("`{name}`")),
                "docs/device-profile.md: {name}"
            );
        }
    }
    // No second name for an interaction in the QASM header.
    let c = common::read_ok("circuits/ghz_5.qasm".as_ref());
    let seq = compile_baseline(&c, &Profile::demo(), Target::Collective).unwrap();
    let qasm = tutti::native::qasm_out::write_qasm(&seq);
    let gates: Vec<&str> = qasm
        .lines()
        .filter_map(|l| l.strip_prefix("gate "))
        .map(|l| l.split(['(', ' ']).next().unwrap())
        .collect();
    for g in gates {
        let base = g
            .trim_end_matches(|c: char| c.is_ascii_digit())
            .trim_end_matches('_');
        assert!(
            names::ALL.contains(&base),
            "QASM header gate `{g}` is not one of the names"
        );
    }
}
