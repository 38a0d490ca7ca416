//! Checkpoints and `check --locate`: compiled outputs carry a checkpoint where the
//! circuit has a barrier, in every format; a single wrong pulse in a hand-edited
//! sequence on the 40-ion demo device, on an active or a spare ion, is located to
//! the section that holds it, with lines on both sides.

mod common;

use common::{run_tutti as tutti, text};

use std::path::{Path, PathBuf};

/// Three sections: a Bell pair, a rotation and a CNOT, a Hadamard; the second
/// barrier names only part of the register (still a checkpoint).
const CIRCUIT: &str = "OPENQASM 2.0;
include \"qelib1.inc\";
qreg q[3];
h q[0];
cx q[0],q[1];
barrier q;
rz(0.3) q[1];
cx q[1],q[2];
barrier q[0],q[1];
h q[2];
";

/// `tutti check A B --locate`.
fn check_locate(a: impl AsRef<Path>, b: impl AsRef<Path>) -> std::process::Output {
    let (a, b) = (a.as_ref(), b.as_ref());
    tutti(&[
        "check",
        a.to_str().unwrap(),
        b.to_str().unwrap(),
        "--locate",
    ])
}

/// `tutti compile C --baseline -o OUT`.
fn compile_baseline(c: impl AsRef<Path>, out: impl AsRef<Path>) -> std::process::Output {
    let (c, out) = (c.as_ref(), out.as_ref());
    tutti(&[
        "compile",
        c.to_str().unwrap(),
        "--baseline",
        "-o",
        out.to_str().unwrap(),
    ])
}

/// [`CIRCUIT`] without its barriers, written as `plain.qasm`: its path and text.
fn plain_circuit(dir: &Path) -> (PathBuf, String) {
    let c = dir.join("plain.qasm");
    let body = CIRCUIT
        .replace("barrier q;\n", "")
        .replace("barrier q[0],q[1];\n", "");
    std::fs::write(&c, &body).unwrap();
    (c, body)
}

/// The demo profile with chain MS of one sign only, written as `one_sign.toml`: its
/// blocks echo the spare ions, whose flips these tests edit (with signed pulses a
/// spare ion is never touched: tests/optimizer.rs covers those).
fn one_sign_profile(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string("profiles/demo.toml").unwrap();
    let off = text.replace("negative_chain_ms = true", "negative_chain_ms = false");
    assert_ne!(off, text, "the demo profile sets negative_chain_ms");
    let p = dir.join("one_sign.toml");
    std::fs::write(&p, off).unwrap();
    p
}

/// `tutti compile C --device (one_sign_profile) EXTRA -o OUT`, which must succeed;
/// its output.
fn compile_one_sign(dir: &Path, c: &Path, out: &Path, extra: &[&str]) -> std::process::Output {
    let device = one_sign_profile(dir);
    let mut args = vec![
        "compile",
        c.to_str().unwrap(),
        "--device",
        device.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    args.extend(["-o", out.to_str().unwrap()]);
    let o = tutti(&args);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    o
}

fn setup(dir: &Path, format: &str) -> (PathBuf, PathBuf) {
    let c = dir.join("three.qasm");
    std::fs::write(&c, CIRCUIT).unwrap();
    let out = dir.join(format!("three-out.{format}"));
    compile_one_sign(dir, &c, &out, &[]);
    (c, out)
}

#[test]
fn compiled_outputs_carry_the_barriers_as_checkpoints_in_every_format() {
    let tmp = tempfile::tempdir().unwrap();
    let mut seen = Vec::new();
    for format in ["pulses", "json", "qasm"] {
        let (c, out) = setup(tmp.path(), format);
        let (loaded, _) = tutti::driver::load(&out, &Default::default()).unwrap();
        let tutti::driver::Loaded::Sequence(seq) = loaded else {
            panic!("{format}: read back as a circuit")
        };
        assert_eq!(seq.checkpoints.len(), 2, "{format}");
        assert!(seq.checkpoints[0] < seq.checkpoints[1]);
        seen.push(seq.checkpoints.clone());
        let o = check_locate(&c, &out);
        assert_eq!(o.status.code(), Some(0), "{format}: {}", text(&o.stdout));
        assert!(text(&o.stdout).contains("EQUIVALENT section by section (3 sections"));
    }
    // The same positions whatever the format.
    assert!(seen.windows(2).all(|w| w[0] == w[1]), "{seen:?}");
    // The baseline's output carries them too.
    let c = tmp.path().join("three.qasm");
    let b = tmp.path().join("base.pulses");
    let o = compile_baseline(&c, &b);
    assert_eq!(o.status.code(), Some(0));
    let o = check_locate(&c, &b);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stdout));
}

/// The lines of a text file.
fn lines_of(path: impl AsRef<Path>) -> Vec<String> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect()
}

/// Writes the pulse list `lines`, checks it against `reference` (the circuit, or the
/// sequence compiled from it) with `--locate`, and returns the section named and the
/// report.
fn located(dir: &Path, reference: &Path, lines: &[String]) -> (Option<usize>, String) {
    let f = dir.join("edited.pulses");
    std::fs::write(&f, lines.join("\n")).unwrap();
    let o = check_locate(reference, &f);
    let out = text(&o.stdout);
    assert_eq!(
        o.status.code(),
        Some(1),
        "not caught: {out}{}",
        text(&o.stderr)
    );
    let section = out
        .lines()
        .next()
        .and_then(|l| l.strip_prefix("NOT EQUIVALENT: they part in section "))
        .and_then(|k| k.trim().parse().ok());
    (section, out)
}

#[test]
fn a_single_wrong_pulse_is_located_to_its_section_on_active_and_spare_ions() {
    let tmp = tempfile::tempdir().unwrap();
    let (c, out) = setup(tmp.path(), "pulses");
    let lines: Vec<String> = lines_of(&out);
    let cps: Vec<usize> = (0..lines.len())
        .filter(|&i| lines[i] == "checkpoint")
        .collect();
    assert_eq!(cps.len(), 2);
    let section_of = |i: usize| cps.iter().filter(|&&c| c < i).count();
    let find = |from: usize, to: usize, pred: &dyn Fn(&str) -> bool| {
        (from..to)
            .find(|&i| pred(&lines[i]))
            .expect("a line to edit")
    };
    // Each case: what, the edited list, its section, where the changed pulse is when
    // the edited list is compared with the compiled one (which file, its line), and
    // the ions that pulse names.
    type Case<'a> = (&'a str, Vec<String>, usize, (&'a str, usize), String);
    let mut cases: Vec<Case> = Vec::new();
    let (compiled, edited) = ("three-out.pulses", "edited.pulses");
    // A wrong angle on an active ion, in section 0.
    let i = find(0, cps[0], &|l| l.starts_with("light_shift 0 "));
    let mut m = lines.clone();
    m[i] = "light_shift 0 0.123".into();
    cases.push((
        "wrong angle, active ion",
        m,
        section_of(i),
        (edited, i + 1),
        "0".into(),
    ));
    // A light shift moved from an active ion to a spare one, in section 1.
    let i = find(cps[0], cps[1], &|l| l.starts_with("light_shift 1 "));
    let mut m = lines.clone();
    m[i] = m[i].replace("light_shift 1 ", "light_shift 20 ");
    cases.push((
        "wrong ion, to a spare ion",
        m,
        section_of(i),
        (edited, i + 1),
        "1, 20".into(),
    ));
    // A missing echo flip, in section 1.
    let i = find(cps[0], cps[1], &|l| {
        l.starts_with("light_shift") && l.ends_with(" pi")
    });
    let mut m = lines.clone();
    let ion = lines[i].split_whitespace().nth(1).unwrap().to_string();
    m.remove(i);
    cases.push(("missing flip", m, section_of(i), (compiled, i + 1), ion));
    // A spare ion's echo flip with a wrong angle, in section 1.
    let spare_flip = |l: &str| {
        let w: Vec<&str> = l.split_whitespace().collect();
        w.len() == 3 && w[0] == "light_shift" && w[2] == "pi" && w[1].parse::<u32>().unwrap() >= 3
    };
    let i = find(cps[0], cps[1], &spare_flip);
    let mut m = lines.clone();
    let ion = lines[i].split_whitespace().nth(1).unwrap().to_string();
    m[i] = format!("light_shift {ion} 2.9");
    cases.push((
        "wrong angle, spare ion",
        m,
        section_of(i),
        (edited, i + 1),
        ion.clone(),
    ));
    // A spare ion's flip moved to an active ion, in section 1.
    let mut m = lines.clone();
    m[i] = "light_shift 2 pi".into();
    cases.push((
        "wrong ion, to an active ion",
        m,
        section_of(i),
        (edited, i + 1),
        format!("2, {ion}"),
    ));
    // A missing flip of a spare ion, and of an active one, in section 1.
    let mut m = lines.clone();
    m.remove(i);
    cases.push((
        "missing flip, spare ion",
        m,
        section_of(i),
        (compiled, i + 1),
        ion,
    ));
    let i = find(cps[0], cps[1], &|l| l == "light_shift 2 pi");
    let mut m = lines.clone();
    m.remove(i);
    cases.push((
        "missing flip, active ion",
        m,
        section_of(i),
        (compiled, i + 1),
        "2".into(),
    ));
    // An extra flip on an active ion, in section 2.
    let i = cps[1] + 3;
    let mut m = lines.clone();
    m.insert(i, "light_shift 1 pi".into());
    cases.push(("extra flip, active ion", m, 2, (edited, i + 1), "1".into()));
    // An extra flip on a spare ion, in section 2.
    let i = cps[1] + 3;
    let mut m = lines.clone();
    m.insert(i, "light_shift 25 pi".into());
    cases.push(("extra flip, spare ion", m, 2, (edited, i + 1), "25".into()));
    // A changed MS angle inside the echo of section 1: every ion's couplings stop
    // cancelling. Proven with the spare ions held as fields (no 2^40 statevector),
    // and the ions left coupled are named.
    let i = find(cps[0], cps[1], &|l| l.starts_with("chain_ms "));
    let mut m = lines.clone();
    let mut words: Vec<String> = m[i].split_whitespace().map(str::to_string).collect();
    let area: f64 = words[1].parse().expect("a plain number");
    words[1] = format!("{}", area + 1e-3);
    m[i] = words.join(" ");
    let every = "every ion (a whole-chain pulse)".to_string();
    cases.push((
        "changed MS angle",
        m,
        section_of(i),
        (edited, i + 1),
        every.clone(),
    ));
    // A wrong phase of a collective rotation, in section 2.
    let i = find(cps[1], lines.len(), &|l| l.starts_with("chain_rotate"));
    let mut m = lines.clone();
    let mut words: Vec<String> = m[i].split_whitespace().map(str::to_string).collect();
    words[2] = "0.2".into();
    m[i] = words.join(" ");
    cases.push(("wrong phase", m, section_of(i), (edited, i + 1), every));
    for (what, m, want, (file, line), ions) in cases {
        // Against the compiled sequence: the same section, the changed pulse's line
        // and its ions.
        let (section, report) = located(tmp.path(), &out, &m);
        assert_eq!(section, Some(want), "{what}: {report}");
        assert!(
            report.contains(&format!("{file}: line {line} (step")),
            "{what}: want {file} line {line}: {report}"
        );
        assert!(
            report.contains(&format!("  ions         {ions}\n")),
            "{what}: want ions {ions}: {report}"
        );
        // Against the circuit.
        let (section, report) = located(tmp.path(), &c, &m);
        assert_eq!(section, Some(want), "{what}: {report}");
        // Lines on both sides: the circuit's section and the pulse list's.
        assert!(report.contains("three.qasm: lines"), "{what}: {report}");
        assert!(report.contains("edited.pulses: lines"), "{what}: {report}");
        if what == "wrong angle, active ion" {
            assert!(
                report.contains("the difference acts on qubit(s) 0"),
                "{report}"
            );
        }
        if what == "changed MS angle" {
            assert!(report.contains("are left coupled"), "{report}");
            assert!(report.contains("held as fixed fields"), "{report}");
        }
    }
    // A wrong phase of an MS pulse turns the interaction axis of every ion at once:
    // against the circuit no ion stays an eigenstate of its interactions to be held
    // as a field, no tableau applies, and 2^40 amplitudes do not fit. The honest
    // answer is a refusal (exit 2) that says what was tried, never a guess (a known
    // limit: docs/checker.md). Against the compiled sequence the steps both share
    // are set aside, and the two MS pulses left are compared exactly in the spaces
    // of the collective spin: caught, and a phase off by pi (the same pulse:
    // `S_{phi+pi}^2 = S_phi^2`) is not.
    let i = find(cps[0], cps[1], &|l| l.starts_with("chain_ms "));
    let with_phase = |phase: &str| {
        let mut m = lines.clone();
        let mut words: Vec<String> = m[i].split_whitespace().map(str::to_string).collect();
        words.truncate(2);
        words.push(phase.into());
        m[i] = words.join(" ");
        m
    };
    let m = with_phase("0.2");
    let f = tmp.path().join("edited.pulses");
    std::fs::write(&f, m.join("\n")).unwrap();
    let o = check_locate(&c, &f);
    let err = text(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{}{err}", text(&o.stdout));
    assert!(err.contains("could be held as a fixed field"), "{err}");
    for (phase, equal) in [("0.2", false), ("1e-9", false), ("pi", true)] {
        let (code, report) = {
            std::fs::write(&f, with_phase(phase).join("\n")).unwrap();
            let o = check_locate(&out, &f);
            (
                o.status.code(),
                format!("{}{}", text(&o.stdout), text(&o.stderr)),
            )
        };
        if equal {
            assert_eq!(code, Some(0), "phase {phase}: {report}");
            assert!(report.contains("mode spin"), "{report}");
        } else {
            assert_eq!(code, Some(1), "phase {phase}: {report}");
            assert!(report.starts_with(&format!(
                "NOT EQUIVALENT: they part in section {}",
                section_of(i)
            )));
            assert!(
                report.contains(&format!("edited.pulses: line {} (step", i + 1)),
                "{report}"
            );
            assert!(report.contains("collective spin"), "{report}");
        }
    }
}

#[test]
fn checkpoint_counts_must_match_and_two_circuits_are_not_located() {
    let tmp = tempfile::tempdir().unwrap();
    let (c, out) = setup(tmp.path(), "pulses");
    let text_of = std::fs::read_to_string(&out).unwrap();
    let fewer = tmp.path().join("fewer.pulses");
    std::fs::write(&fewer, text_of.replacen("checkpoint\n", "", 1)).unwrap();
    let o = check_locate(&c, &fewer);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("2 barrier(s) and the sequence 1 checkpoint(s)"));
    let o = check_locate(&c, &c);
    assert_eq!(o.status.code(), Some(2));
    // Without --locate the same files compare whole (checkpoints are not part of
    // the unitary).
    let o = tutti(&["check", c.to_str().unwrap(), fewer.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stdout));
    // Options --locate does not honour are refused, not ignored (it once compared
    // without the crosstalk it was given).
    for extra in [
        &["--crosstalk", "demo"][..],
        &["--up-to-final-diagonal"][..],
    ] {
        let mut args = vec![
            "check",
            c.to_str().unwrap(),
            out.to_str().unwrap(),
            "--locate",
        ];
        args.extend_from_slice(extra);
        let o = tutti(&args);
        assert_eq!(o.status.code(), Some(2), "{extra:?}");
        assert!(
            text(&o.stderr).contains("cannot be used with"),
            "{}",
            text(&o.stderr)
        );
    }
    // Two sequences: their checkpoint counts must match too.
    let o = check_locate(&out, &fewer);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("the first sequence has 2 checkpoint(s) and the second 1"));
}

/// Two compilations of the same circuit (the optimizer's, in JSON, and the
/// baseline's pulse list) are equal section by section; the same sequence with one
/// flip removed is not, and the section, the step and the ion are named (JSON has
/// no lines: steps only).
#[test]
fn two_sequences_are_located_against_each_other() {
    let tmp = tempfile::tempdir().unwrap();
    let (c, json) = setup(tmp.path(), "json");
    let base = tmp.path().join("base.pulses");
    let o = compile_baseline(&c, &base);
    assert_eq!(o.status.code(), Some(0));
    let o = check_locate(&json, &base);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stdout));
    assert!(text(&o.stdout).contains("EQUIVALENT section by section (3 sections"));
    let (_, pulses) = setup(tmp.path(), "pulses");
    let lines: Vec<String> = lines_of(&pulses);
    let first_cp = lines.iter().position(|l| l == "checkpoint").unwrap();
    let i = (first_cp..lines.len())
        .find(|&i| lines[i].starts_with("light_shift") && lines[i].ends_with(" pi"))
        .unwrap();
    let ion = lines[i].split_whitespace().nth(1).unwrap().to_string();
    let mut m = lines.clone();
    m.remove(i);
    let (section, report) = located(tmp.path(), &json, &m);
    assert_eq!(section, Some(1), "{report}");
    assert!(report.contains("three-out.json: step "), "{report}");
    assert!(report.contains("edited.pulses: no step"), "{report}");
    assert!(
        report.contains(&format!("  ions         {ion}\n")),
        "{report}"
    );
    // The same as one JSON object.
    let f = tmp.path().join("edited.pulses");
    let o = tutti(&[
        "check",
        json.to_str().unwrap(),
        f.to_str().unwrap(),
        "--locate",
        "--json",
    ]);
    assert_eq!(o.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["verdict"], "not equivalent");
    assert_eq!(v["exit_code"], 1);
    assert_eq!(v["section"]["index"], 1);
    assert_eq!(
        v["section"]["first_lines"],
        serde_json::Value::Null,
        "JSON has no lines"
    );
    assert_eq!(v["changed"]["ions"][0].to_string(), ion);
    assert_eq!(
        v["changed"]["second_steps"],
        serde_json::Value::Null,
        "no step"
    );
    assert_eq!(v["whole"]["equivalent"], false);
}

#[test]
fn draw_marks_the_checkpoints() {
    let tmp = tempfile::tempdir().unwrap();
    let (_, out) = setup(tmp.path(), "json");
    let o = tutti(&["draw", out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0));
    assert_eq!(text(&o.stdout).matches("class=\"checkpoint\"").count(), 2);
}

/// Without barriers and checkpoints, a sequence is aligned with its circuit through
/// the compile trace it carries (`trace N` lines; JSON `trace`): the baseline has a
/// trace point after every instruction, so a wrong pulse is located to the
/// instruction it belongs to. The trace is trusted only for the circuit it was made
/// from.
#[test]
fn without_checkpoints_the_compile_trace_locates_the_instruction() {
    let tmp = tempfile::tempdir().unwrap();
    let (c, body) = plain_circuit(tmp.path());
    let mut outs = Vec::new();
    for format in ["pulses", "json"] {
        let out = tmp.path().join(format!("plain.{format}"));
        let o = compile_baseline(&c, &out);
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
        let (loaded, _) = tutti::driver::load(&out, &Default::default()).unwrap();
        let tutti::driver::Loaded::Sequence(seq) = loaded else {
            panic!("{format}: not a sequence")
        };
        // One point after each of the 5 instructions but the last.
        assert_eq!(
            seq.trace.iter().map(|t| t.instrs).collect::<Vec<_>>(),
            vec![1, 2, 3, 4],
            "{format}"
        );
        outs.push((out, seq.trace.clone()));
        let o = tutti(&[
            "check",
            c.to_str().unwrap(),
            outs.last().unwrap().0.to_str().unwrap(),
            "--locate",
        ]);
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stdout));
        assert!(text(&o.stdout).contains("5 sections between trace points"));
    }
    assert_eq!(outs[0].1, outs[1].1, "the same trace in both formats");
    // A wrong light shift on ion 1 within the pulses of instruction 4, cx q[1],q[2].
    let lines: Vec<String> = lines_of(&outs[0].0);
    let after3 = lines.iter().position(|l| l == "trace 3").unwrap();
    let i = (after3..lines.len())
        .find(|&i| lines[i].starts_with("light_shift 2 "))
        .unwrap();
    assert!(lines[i..].iter().any(|l| l == "trace 4"));
    let mut m = lines.clone();
    m[i] = "light_shift 2 0.77".into();
    let (_, report) = located(tmp.path(), &c, &m);
    assert!(
        report.starts_with("NOT EQUIVALENT: they part at instruction 4 of the circuit"),
        "{report}"
    );
    assert!(
        report.contains("plain.qasm: instruction 4: cx q[1],q[2];"),
        "{report}"
    );
    let from = after3 + 2;
    assert!(
        report.contains(&format!("edited.pulses: lines {from} to ")),
        "{report}"
    );
    // Against another circuit, the trace is not used: exit 2, saying why.
    let f = tmp.path().join("edited.pulses");
    let other = tmp.path().join("other.qasm");
    std::fs::write(&other, body.replace("rz(0.3)", "rz(0.4)")).unwrap();
    let o = check_locate(&other, &f);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("trace was made from a circuit with SHA-256"));
    // A trace that names more instructions than the circuit has: an error, and
    // the plain check (which does not use the trace) is unaffected.
    let mut m = lines.clone();
    let last = m.iter().rposition(|l| l == "trace 4").unwrap();
    m[last] = "trace 99".into();
    std::fs::write(&f, m.join("\n")).unwrap();
    let o = check_locate(&c, &f);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        text(&o.stderr).contains("does not fit this circuit"),
        "{}",
        text(&o.stderr)
    );
    let o = tutti(&["check", c.to_str().unwrap(), f.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stdout));
    // Malformed trace lines are located errors.
    for (bad, want) in [
        ("trace x", "is not an instruction count"),
        ("trace 1", "does not come after"),
    ] {
        let mut m = lines.clone();
        m.insert(after3 + 1, bad.to_string());
        std::fs::write(&f, m.join("\n")).unwrap();
        let o = tutti(&["check", c.to_str().unwrap(), f.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(2), "{bad}");
        let err = text(&o.stderr);
        assert!(
            err.contains(want) && err.contains(&format!("edited.pulses:{}", after3 + 2)),
            "{bad}: {err}"
        );
    }
}

/// Bug: a pulse moved across a checkpoint changes two sections but not the whole,
/// and `--locate` called that NOT EQUIVALENT (exit 1). Sections that differ do not
/// prove the wholes do: the whole programs are compared too, and decide.
#[test]
fn a_pulse_moved_across_a_checkpoint_is_not_called_a_difference() {
    let tmp = tempfile::tempdir().unwrap();
    let (c, out) = setup(tmp.path(), "pulses");
    let mut lines: Vec<String> = lines_of(&out);
    let cp = lines.iter().position(|l| l == "checkpoint").unwrap();
    assert!(!lines[cp - 1].starts_with('#') && !lines[cp - 1].starts_with("ions"));
    lines.swap(cp - 1, cp);
    for reference in [&c, &out] {
        let (code, report) = {
            let f = tmp.path().join("moved.pulses");
            std::fs::write(&f, lines.join("\n")).unwrap();
            let o = check_locate(reference, &f);
            (o.status.code(), text(&o.stdout))
        };
        assert_eq!(code, Some(0), "{report}");
        assert!(
            report.starts_with("EQUIVALENT as a whole, though they part in section 0"),
            "{report}"
        );
    }
}

/// `tutti check` of a sequence whose whole comparison does not fit the memory
/// budget: when the sequence carries the compile trace of this very circuit, every
/// window is proven equal and so is the whole. A wrong pulse, or another circuit,
/// gets no such proof (a differing window proves nothing about the whole).
#[test]
fn check_proves_a_large_sequence_equal_along_its_trace() {
    let tmp = tempfile::tempdir().unwrap();
    let n = 24;
    let mut body = String::from("h q[0];\n");
    for i in 1..n {
        body.push_str(&format!("cx q[{}],q[{i}];\nt q[{i}];\n", i - 1));
    }
    let c = tmp.path().join("chain.qasm");
    std::fs::write(&c, common::qasm(n, &body)).unwrap();
    let out = tmp.path().join("chain.pulses");
    let o = compile_baseline(&c, &out);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    // 24 qubits need 512 MiB for two states; 100 MiB is given.
    let check = |a: &Path, b: &Path| {
        let o = tutti(&[
            "check",
            a.to_str().unwrap(),
            b.to_str().unwrap(),
            "--memory",
            "100",
        ]);
        (
            o.status.code(),
            format!("{}{}", text(&o.stdout), text(&o.stderr)),
        )
    };
    let (code, report) = check(&c, &out);
    assert_eq!(code, Some(0), "{report}");
    assert!(
        report.starts_with("EQUIVALENT window by window along the compile trace"),
        "{report}"
    );
    assert!(report.contains("536870912 bytes"), "{report}");
    // Either order of the files.
    assert_eq!(check(&out, &c).0, Some(0));
    // A wrong light shift: not equal (proven different, or refused), never equal.
    let text_of = std::fs::read_to_string(&out).unwrap();
    let edited = tmp.path().join("edited.pulses");
    std::fs::write(
        &edited,
        text_of.replacen("light_shift 5 pi", "light_shift 5 3.1", 1),
    )
    .unwrap();
    let (code, report) = check(&c, &edited);
    assert_ne!(code, Some(0), "{report}");
    assert!(!report.starts_with("EQUIVALENT"), "{report}");
    // Another circuit: the trace is not its own, so it is not used.
    let other = tmp.path().join("other.qasm");
    std::fs::write(
        &other,
        common::qasm(n, &body.replacen("t q[3]", "tdg q[3]", 1)),
    )
    .unwrap();
    let (code, report) = check(&other, &out);
    assert_ne!(code, Some(0), "{report}");
    assert!(!report.contains("along the compile trace"), "{report}");
}

/// The optimizer's trace has points only where its ranges end; `compile
/// --trace-every 1` ends one after every instruction, so a hand edit in its output
/// is located to its instruction too (and the output still verifies: compile checks
/// it).
#[test]
fn the_optimizer_output_is_located_by_instruction_with_trace_every() {
    let tmp = tempfile::tempdir().unwrap();
    let (c, _) = plain_circuit(tmp.path());
    let out = tmp.path().join("plain.pulses");
    let o = compile_one_sign(tmp.path(), &c, &out, &["--trace-every", "1"]);
    assert!(text(&o.stderr).contains("optimizer"), "{}", text(&o.stderr));
    let lines: Vec<String> = lines_of(&out);
    let traces: Vec<&String> = lines.iter().filter(|l| l.starts_with("trace ")).collect();
    assert_eq!(traces, ["trace 1", "trace 2", "trace 3", "trace 4"]);
    // A changed MS angle after trace 3: instruction 4, cx q[1],q[2].
    let after3 = lines.iter().position(|l| l == "trace 3").unwrap();
    let i = (after3..lines.len())
        .find(|&i| lines[i].starts_with("chain_ms "))
        .unwrap();
    let mut m = lines.clone();
    let mut words: Vec<String> = m[i].split_whitespace().map(str::to_string).collect();
    words[1] = format!("{}", words[1].parse::<f64>().unwrap() + 1e-4);
    m[i] = words.join(" ");
    let (_, report) = located(tmp.path(), &c, &m);
    assert!(
        report.starts_with("NOT EQUIVALENT: they part at instruction 4 of the circuit"),
        "{report}"
    );
}
