//! The command line as a user meets it: exit codes, JSON keys, files written.

use std::path::PathBuf;
use std::process::Command;

fn tutti(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_tutti"))
        .args(args)
        .output()
        .expect("run tutti");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// A path in this test process's own scratch folder: a fresh one, never a folder a
/// past run with the same process id left behind (the CLI refuses to replace files).
fn scratch(name: &str) -> PathBuf {
    static DIR: std::sync::OnceLock<tempfile::TempDir> = std::sync::OnceLock::new();
    DIR.get_or_init(|| {
        tempfile::Builder::new()
            .prefix("tutti-cli-")
            .tempdir()
            .unwrap()
    })
    .path()
    .join(name)
}

/// Runs `tutti compile SRC -o OUT --force EXTRA...`, which must succeed, and reads
/// OUT back as a sequence; also returns what the command printed.
fn compile_and_load(
    src: &str,
    out: &std::path::Path,
    extra: &[&str],
) -> (tutti::native::Sequence, String) {
    let mut args = vec!["compile", src, "-o", out.to_str().unwrap(), "--force"];
    args.extend_from_slice(extra);
    let (code, stdout, err) = tutti(&args);
    assert_eq!(code, 0, "{err}");
    let (loaded, _) = tutti::driver::load(out, &tutti::qasm::Limits::default()).unwrap();
    let tutti::driver::Loaded::Sequence(seq) = loaded else {
        panic!("{}: not a sequence", out.display())
    };
    (seq, format!("{stdout}{err}"))
}

#[test]
fn inspect_json_has_the_documented_keys() {
    let (code, out, _) = tutti(&["inspect", "circuits/ghz_5.qasm", "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["qubits"], 5);
    assert_eq!(v["bits"], 5);
    assert_eq!(v["ops"], 10);
    assert_eq!(v["two_qubit_ops"], 4);
}

#[test]
fn bad_input_exits_2_with_a_located_error() {
    let bad = scratch("bad.qasm");
    std::fs::write(
        &bad,
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\ncx q[0],q[7];\n",
    )
    .unwrap();
    let (code, _, err) = tutti(&["inspect", bad.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(
        err.contains("bad.qasm:4:11") && err.contains("out of range"),
        "{err}"
    );
}

#[test]
fn check_exit_codes_say_equivalent_or_not() {
    let a = scratch("a.qasm");
    let b = scratch("b.qasm");
    std::fs::write(
        &a,
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\ncx q[0],q[1];\n",
    )
    .unwrap();
    std::fs::write(
        &b,
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\nh q[1]; cz q[0],q[1]; h q[1];\n",
    )
    .unwrap();
    let (code, out, _) = tutti(&["check", a.to_str().unwrap(), b.to_str().unwrap(), "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["equivalent"], true);
    assert!(v["mode"].is_string() && v["fidelity"].is_number());
    std::fs::write(
        &b,
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\ncz q[0],q[1];\n",
    )
    .unwrap();
    let (code, out, _) = tutti(&["check", a.to_str().unwrap(), b.to_str().unwrap()]);
    assert_eq!(code, 1, "{out}");
    assert!(out.starts_with("NOT EQUIVALENT"));
}

#[test]
fn compile_writes_every_format_that_check_then_accepts() {
    for (format, ext) in [("pulses", "pulses"), ("json", "json"), ("qasm", "qasm")] {
        for target in ["collective", "addressed"] {
            let out = scratch(&format!("qft3-{target}.{ext}"));
            let (code, _, err) = tutti(&[
                "compile",
                "circuits/qft_3.qasm",
                "-o",
                out.to_str().unwrap(),
                "--format",
                format,
                "--target",
                target,
            ]);
            assert_eq!(code, 0, "{err}");
            assert!(
                err.contains("verified: EQUIVALENT") && err.contains("ms_pulses"),
                "{err}"
            );
            let (code, stdout, err) =
                tutti(&["check", "circuits/qft_3.qasm", out.to_str().unwrap()]);
            assert_eq!(code, 0, "{format} {target}: {stdout}{err}");
        }
    }
}

#[test]
fn compile_never_overwrites_its_input() {
    let input = scratch("keep.qasm");
    let text = "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\nh q[0];\n";
    std::fs::write(&input, text).unwrap();
    let (code, _, err) = tutti(&[
        "compile",
        input.to_str().unwrap(),
        "-o",
        input.to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("refusing to overwrite"), "{err}");
    assert_eq!(std::fs::read_to_string(&input).unwrap(), text);
}

#[test]
fn budget_json_has_the_design_figures() {
    let (code, out, err) = tutti(&["budget", "circuits/qft_3.qasm", "--json", "--baseline"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    for key in [
        "ms_pulses",
        "ms_area",
        "collective_pulses",
        "light_shifts",
        "duration_us",
        "est_error",
        "entangling_depth",
        "idle_us",
    ] {
        assert!(!v[key].is_null(), "missing {key}");
    }
    // qft_3 has three controlled phases and one swap: six ZZ interactions, each an
    // echo of 40 pulses on the 40-ion demo device (smallest Hadamard order >= 39).
    assert_eq!(v["ms_pulses"], 6 * 40);
    // The optimizer (the default) needs fewer.
    let (code, out, err) = tutti(&["budget", "circuits/qft_3.qasm", "--json"]);
    assert_eq!(code, 0, "{err}");
    let o: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(o["ms_pulses"].as_u64().unwrap() < 240, "{o}");
}

#[test]
fn the_budget_table_names_the_target_as_the_option_spells_it() {
    for target in ["collective", "addressed"] {
        let (code, out, err) = tutti(&["budget", "circuits/qft_3.qasm", "--target", target]);
        assert_eq!(code, 0, "{err}");
        assert!(out.contains(&format!("({target} target")), "{out}");
    }
}

#[test]
fn an_opaque_gate_is_a_clear_compile_error() {
    let f = scratch("opaque.qasm");
    std::fs::write(
        &f,
        "OPENQASM 2.0;\nopaque magic a;\nqreg q[1];\nmagic q[0];\n",
    )
    .unwrap();
    let (code, _, err) = tutti(&["compile", f.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(err.contains("opaque"), "{err}");
}

#[test]
fn compile_replaces_an_existing_output_only_with_force() {
    let out = scratch("existing.pulses");
    std::fs::write(&out, "precious").unwrap();
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("--force"), "{err}");
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "precious");
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        out.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(std::fs::read_to_string(&out)
        .unwrap()
        .starts_with("# tutti pulse list"));
}

#[test]
fn a_large_file_reads_the_same_on_one_thread_and_on_all_cores() {
    // About 6 MB, so that the default reading cuts it into chunks on a 2-core machine.
    let mut text = String::from("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[8];\ncreg c[8];\n");
    for i in 0..300_000 {
        match i % 3 {
            0 => text.push_str(&format!("h q[{}];\n", i % 8)),
            1 => text.push_str(&format!("cx q[{}],q[{}];\n", i % 8, (i + 3) % 8)),
            _ => text.push_str(&format!("rz({}*pi/7) q[{}];\n", i % 5, i % 8)),
        }
    }
    text.push_str("measure q -> c;\n");
    let path = scratch("large.qasm");
    std::fs::write(&path, &text).unwrap();
    let file = path.to_str().unwrap();
    let (code1, one, _) = tutti(&["inspect", file, "--json", "--read-threads", "1"]);
    let (code2, all, _) = tutti(&["inspect", file, "--json"]);
    assert_eq!((code1, code2), (0, 0));
    assert_eq!(one, all);
    let v: serde_json::Value = serde_json::from_str(&all).unwrap();
    assert_eq!(v["ops"], 300_008);
    assert_eq!(v["two_qubit_ops"], 100_000);
}

// Bug: `-o /dev/null --force` replaced the device with a regular file by the atomic
// rename (as root, a system file was replaced).
#[cfg(unix)]
#[test]
fn special_files_are_written_through_and_links_refused() {
    use std::os::unix::fs::{FileTypeExt, PermissionsExt};
    // A device: written through, still a device afterwards.
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        "/dev/null",
        "--force",
    ]);
    assert_eq!(code, 0, "{err}");
    let meta = std::fs::metadata("/dev/null").unwrap();
    assert!(meta.file_type().is_char_device());
    // A FIFO: a reader gets the whole sequence; the FIFO stays a FIFO.
    let fifo = scratch("out.fifo");
    let _ = std::fs::remove_file(&fifo);
    let made = Command::new("mkfifo").arg(&fifo).status();
    if made.is_ok_and(|s| s.success()) {
        let reader = {
            let fifo = fifo.clone();
            std::thread::spawn(move || std::fs::read_to_string(fifo).unwrap())
        };
        let (code, _, err) = tutti(&[
            "compile",
            "circuits/ghz_5.qasm",
            "-o",
            fifo.to_str().unwrap(),
        ]);
        assert_eq!(code, 0, "{err}");
        let got = reader.join().unwrap();
        assert!(
            got.starts_with("# tutti pulse list") && got.contains("ions 40"),
            "{got}"
        );
        assert!(std::fs::symlink_metadata(&fifo)
            .unwrap()
            .file_type()
            .is_fifo());
    }
    // A symbolic link: refused (exit 2), and its target untouched.
    let target = scratch("precious.txt");
    std::fs::write(&target, "precious").unwrap();
    let link = scratch("link.pulses");
    let _ = std::fs::remove_file(&link);
    std::os::unix::fs::symlink(&target, &link).unwrap();
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        link.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("symbolic link"), "{err}");
    assert_eq!(std::fs::read_to_string(&target).unwrap(), "precious");
    assert!(std::fs::symlink_metadata(&link)
        .unwrap()
        .file_type()
        .is_symlink());
    // `-` is standard output.
    let (code, out, _) = tutti(&["compile", "circuits/ghz_5.qasm", "-o", "-"]);
    assert_eq!(code, 0);
    assert!(out.contains("ions 40"));
    // A new file gets 0666 less the umask, not the 0600 of a temporary file.
    let fresh = scratch("fresh.pulses");
    let _ = std::fs::remove_file(&fresh);
    let (code, _, _) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        fresh.to_str().unwrap(),
    ]);
    assert_eq!(code, 0);
    let mode = std::fs::metadata(&fresh).unwrap().permissions().mode() & 0o777;
    let umask = Command::new("sh").args(["-c", "umask"]).output().unwrap();
    let umask = u32::from_str_radix(String::from_utf8_lossy(&umask.stdout).trim(), 8).unwrap();
    assert_eq!(mode, 0o666 & !umask, "{mode:o} under umask {umask:o}");
    // A replaced regular file keeps its permissions.
    let kept = scratch("kept.pulses");
    std::fs::write(&kept, "old").unwrap();
    std::fs::set_permissions(&kept, std::fs::Permissions::from_mode(0o640)).unwrap();
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        kept.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0, "{err}");
    let meta = std::fs::metadata(&kept).unwrap();
    assert_eq!(meta.permissions().mode() & 0o777, 0o640);
    assert!(std::fs::read_to_string(&kept).unwrap().contains("ions 40"));
}

// Bug: swapped bits of final measurements were judged EQUIVALENT (exit 0).
#[test]
fn check_exits_1_for_swapped_measurement_bits_in_every_mode() {
    let body =
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\ncreg c[2];\nh q[0]; cx q[0],q[1];\n";
    let a = scratch("wired.qasm");
    let b = scratch("swapped.qasm");
    std::fs::write(
        &a,
        format!("{body}measure q[0] -> c[0];\nmeasure q[1] -> c[1];\n"),
    )
    .unwrap();
    std::fs::write(
        &b,
        format!("{body}measure q[0] -> c[1];\nmeasure q[1] -> c[0];\n"),
    )
    .unwrap();
    for mode in ["auto", "unitary", "random", "tableau"] {
        let (code, out, err) = tutti(&[
            "check",
            a.to_str().unwrap(),
            b.to_str().unwrap(),
            "--mode",
            mode,
            "--json",
        ]);
        assert_eq!(code, 1, "{mode}: {out}{err}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        assert_eq!(v["equivalent"], false);
        assert!(v["detail"].as_str().unwrap().contains("final measurements"));
        let (code, _, _) = tutti(&[
            "check",
            a.to_str().unwrap(),
            a.to_str().unwrap(),
            "--mode",
            mode,
        ]);
        assert_eq!(code, 0, "{mode}");
    }
}

#[test]
fn the_output_format_follows_the_extension_unless_told_and_never_contradicts_it() {
    let json = scratch("by_extension.json");
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        json.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(&json).unwrap();
    assert!(
        serde_json::from_str::<serde_json::Value>(&text).is_ok(),
        "-o x.json writes JSON"
    );
    let qasm = scratch("by_extension.qasm");
    let (code, _, _) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        qasm.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0);
    assert!(std::fs::read_to_string(&qasm)
        .unwrap()
        .contains("OPENQASM 2.0;"));
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        json.to_str().unwrap(),
        "--force",
        "--format",
        "pulses",
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("contradicts"), "{err}");
    // An unknown extension takes the pulse list, or what --format says.
    let other = scratch("by_extension.txt");
    let (code, _, _) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        other.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0);
    assert!(std::fs::read_to_string(&other).unwrap().contains("ions 40"));
}

#[test]
fn budget_and_inspect_describe_a_sequence_as_written() {
    // A hand-written two-pulse list (example numbers): a fully entangling MS pulse
    // on 3 ions, an echo of it, and light shifts around.
    let list = scratch("two_pulses.pulses");
    std::fs::write(
        &list,
        "ions 3\ncreg c[2]\nlight_shift 0 pi/2\nchain_ms pi/2 0\nlight_shift 1 pi\nchain_ms pi/2 0\nlight_shift 1 -pi\nmeasure 0 -> c[0]\n",
    )
    .unwrap();
    let path = list.to_str().unwrap();
    let (code, out, err) = tutti(&["budget", path, "--json"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["ms_pulses"], 2);
    assert_eq!(v["light_shifts"], 3);
    assert_eq!(v["ms_area"], 2.0);
    let (code, out, _) = tutti(&["inspect", path, "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["ions"], 3);
    assert_eq!(v["steps"], 6);
    assert_eq!(v["entangling_pulses"], 2);
    assert_eq!(v["by_op"]["light_shift"], 3);
    // tutti's own QASM output is a sequence too: its budget is the compile's count.
    let qasm = scratch("ghz_out.qasm");
    let (code, _, compile_err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "-o",
        qasm.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0);
    let (code, out, _) = tutti(&["budget", qasm.to_str().unwrap(), "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let compiled_ms = compile_err
        .lines()
        .find(|l| l.trim_start().starts_with("ms_pulses"))
        .and_then(|l| l.split_whitespace().nth(1))
        .unwrap()
        .to_string();
    assert_eq!(v["ms_pulses"].to_string(), compiled_ms);
    // compile refuses a sequence, saying what it is.
    let (code, _, err) = tutti(&["compile", path]);
    assert_eq!(code, 2);
    assert!(err.contains("pulse sequence already"), "{err}");
}

#[test]
fn check_says_which_side_was_padded_with_idle_qubits() {
    let small = scratch("one_qubit.qasm");
    let big = scratch("three_qubits.qasm");
    std::fs::write(
        &small,
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[1];\nh q[0];\n",
    )
    .unwrap();
    std::fs::write(
        &big,
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[3];\nh q[0];\n",
    )
    .unwrap();
    let (code, out, _) = tutti(&[
        "check",
        small.to_str().unwrap(),
        big.to_str().unwrap(),
        "--json",
    ]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["qubits_a"], 1);
    assert_eq!(v["qubits_b"], 3);
    assert!(
        v["padding"].as_str().unwrap().contains("2 idle qubit(s)"),
        "{v}"
    );
    let (_, out, _) = tutti(&["check", small.to_str().unwrap(), big.to_str().unwrap()]);
    assert!(
        out.contains("1 and 3") && out.contains("2 idle qubit(s) were added"),
        "{out}"
    );
    let (_, out, _) = tutti(&[
        "check",
        big.to_str().unwrap(),
        big.to_str().unwrap(),
        "--json",
    ]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(v["padding"].is_null());
}

/// The long options a subcommand's `--help` lists.
fn help_options(command: &str) -> Vec<String> {
    let (code, out, _) = tutti(&[command, "--help"]);
    assert_eq!(code, 0);
    let mut opts: Vec<String> = out
        .lines()
        .filter_map(|l| {
            let l = l.trim_start();
            let l = l.strip_prefix("-o, ").unwrap_or(l);
            l.strip_prefix("--").map(|rest| {
                let name: String = rest
                    .chars()
                    .take_while(|c| c.is_ascii_lowercase() || *c == '-')
                    .collect();
                format!("--{name}")
            })
        })
        .filter(|o| o != "--help")
        .collect();
    opts.sort();
    opts.dedup();
    opts
}

/// Whether `text` names `opt` as a whole option (not as the prefix of a longer one).
fn names_option(text: &str, opt: &str) -> bool {
    text.match_indices(opt).any(|(i, _)| {
        !text[i + opt.len()..]
            .chars()
            .next()
            .is_some_and(|c| c.is_ascii_lowercase() || c == '-')
    })
}

#[test]
fn the_readme_and_help_name_the_same_options() {
    let readme = std::fs::read_to_string("README.md").unwrap();
    let table: Vec<&str> = readme
        .lines()
        .filter(|l| l.starts_with("| `tutti "))
        .collect();
    let shared_row = readme
        .lines()
        .find(|l| l.starts_with("| every command:"))
        .expect("a README row for the options of every command");
    for command in ["inspect", "compile", "budget", "check"] {
        let row = table
            .iter()
            .find(|l| l.starts_with(&format!("| `tutti {command} ")))
            .unwrap_or_else(|| panic!("no README row for {command}"));
        let opts = help_options(command);
        assert!(opts.len() >= 3, "{command}: {opts:?}");
        for opt in &opts {
            // Reading limits are shared by every command and have a row of their own.
            let shared = opt.starts_with("--max-") && opt != "--max-pulses"
                || opt == "--read-threads"
                || opt == "--errors-shown";
            let place = if shared { shared_row } else { *row };
            assert!(
                names_option(place, opt),
                "README does not name {command} {opt}"
            );
        }
        // And nothing in the row that the command does not take.
        for (i, _) in row.match_indices("--") {
            let name: String = row[i + 2..]
                .chars()
                .take_while(|c| c.is_ascii_lowercase() || *c == '-')
                .collect();
            let opt = format!("--{name}");
            assert!(
                opts.contains(&opt),
                "README row of {command} names {opt}, which it does not take"
            );
        }
    }
}

#[test]
fn with_json_errors_are_json_on_standard_output_too() {
    let bad = scratch("json_error.qasm");
    std::fs::write(
        &bad,
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\nfoo q[0];\n",
    )
    .unwrap();
    for args in [
        vec!["inspect", bad.to_str().unwrap(), "--json"],
        vec!["budget", bad.to_str().unwrap(), "--json"],
        vec![
            "check",
            bad.to_str().unwrap(),
            "circuits/ghz_5.qasm",
            "--json",
        ],
    ] {
        let (code, out, _) = tutti(&args);
        assert_eq!(code, 2, "{args:?}");
        let v: serde_json::Value =
            serde_json::from_str(&out).unwrap_or_else(|e| panic!("{args:?}: {e}\n{out}"));
        assert_eq!(v["error"], true);
        assert_eq!(v["exit_code"], 2);
        let e = &v["errors"][0];
        assert_eq!(e["code"], "undefined-gate");
        assert_eq!(e["line"], 4);
        assert_eq!(e["column"], 1);
        assert!(e["hint"].as_str().unwrap().contains("define it"));
    }
    // A missing file and a missing profile are JSON errors as well.
    let (code, out, _) = tutti(&["budget", "no/such/file.qasm", "--json"]);
    assert_eq!(code, 2);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["errors"][0]["code"], "cannot-read");
    let (code, out, _) = tutti(&[
        "budget",
        "circuits/ghz_5.qasm",
        "--device",
        "no/such.toml",
        "--json",
    ]);
    assert_eq!(code, 2);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert!(
        v["errors"][0]["message"]
            .as_str()
            .unwrap()
            .contains("no/such.toml"),
        "{v}"
    );
}

#[test]
fn ions_loads_part_of_the_chain_and_never_more_than_the_device_has() {
    let out = scratch("five_ions.pulses");
    let (code, _, err) = tutti(&[
        "compile",
        "circuits/ghz_5.qasm",
        "--ions",
        "5",
        "-o",
        out.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(text.lines().any(|l| l == "ions 5"), "{text}");
    // The CNOT ladder is three coupling blocks (docs/optimizer.md), each a pair or
    // a star of equal couplings: four signed pulses each (gate-set fact 10, derived
    // in docs/gate-set.md), far fewer than the 40 per gate of an echo on 40 ions.
    let (code, json, _) = tutti(&["budget", "circuits/ghz_5.qasm", "--ions", "5", "--json"]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert_eq!(v["ms_pulses"], 12);
    let (code, _, err) = tutti(&["budget", "circuits/ghz_5.qasm", "--ions", "41"]);
    assert_eq!(code, 2);
    assert!(err.contains("more than the 40 ions"), "{err}");
    let (code, _, err) = tutti(&["budget", "circuits/ghz_5.qasm", "--ions", "4"]);
    assert_eq!(code, 2, "a 5-qubit circuit does not fit 4 ions: {err}");
}

#[test]
fn provenance_is_in_every_format_round_trips_and_never_changes_a_verdict() {
    // SHA-256 of "abc": the FIPS 180-4 example (ba7816bf...15ad).
    assert_eq!(
        tutti::driver::sha256_hex(b"abc"),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    let source = std::fs::read("circuits/ghz_5.qasm").unwrap();
    let want_hash = tutti::driver::sha256_hex(&source);
    for ext in ["pulses", "json", "qasm"] {
        let out = scratch(&format!("provenance.{ext}"));
        let (seq, _) = compile_and_load("circuits/ghz_5.qasm", &out, &[]);
        let p = seq
            .provenance
            .clone()
            .unwrap_or_else(|| panic!("{ext}: no provenance"));
        assert_eq!(p.source, "circuits/ghz_5.qasm");
        assert_eq!(p.source_sha256, want_hash, "{ext}");
        assert_eq!(p.target, "collective");
        assert_eq!(p.verified, "whole");
        assert!(p.tool.starts_with("tutti "));
        assert_eq!(
            p.device_sha256,
            tutti::driver::sha256_hex(tutti::native::profile::DEMO_TOML.as_bytes())
        );
        // Written again, it reads back the same.
        let again = tutti::driver::Format::from_extension(&out)
            .unwrap()
            .render(&seq);
        let copy = scratch(&format!("provenance_copy.{ext}"));
        std::fs::write(&copy, &again).unwrap();
        let (loaded, _) = tutti::driver::load(&copy, &tutti::qasm::Limits::default()).unwrap();
        let tutti::driver::Loaded::Sequence(back) = loaded else {
            panic!()
        };
        assert_eq!(back.provenance, seq.provenance, "{ext}");
        // An edited provenance changes no verdict.
        let edited = again.replace(&want_hash, &"0".repeat(64));
        assert_ne!(edited, again);
        std::fs::write(&copy, &edited).unwrap();
        let (code, out, _) = tutti(&["check", "circuits/ghz_5.qasm", copy.to_str().unwrap()]);
        assert_eq!(code, 0, "{ext}: {out}");
    }
}

// Progress is drawn only on a terminal: through a pipe, a long window-by-window
// verification prints its verdict and no bar.
#[test]
fn no_progress_bar_on_a_pipe() {
    let out = scratch("adder28.pulses");
    let (code, _, err) = tutti(&[
        "compile",
        "tests/data/qasmbench/large/adder_n28/adder_n28.qasm",
        "--target",
        "addressed",
        "-o",
        out.to_str().unwrap(),
        "--force",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("window by window"), "{err}");
    assert!(
        !err.contains('%') && !err.contains('\r') && !err.contains('\u{1b}'),
        "{err}"
    );
}

#[test]
fn the_objective_and_the_compiler_show_in_the_output_and_change_the_budget() {
    // The objective is named in the provenance of what compile writes.
    let (code, out, err) = tutti(&[
        "compile",
        "circuits/qaoa_ring_6.qasm",
        "--objective",
        "area",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains("# provenance compiler: optimizer (objective area)"),
        "{out}"
    );
    let (code, out, err) = tutti(&["compile", "circuits/qaoa_ring_6.qasm", "--baseline"]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("# provenance compiler: baseline"), "{out}");
    // Minimising area never gives more area than minimising pulses, and the
    // optimizer's area on this ring (two layers of disjoint pairs, gate-set fact 7)
    // is a third of the baseline's six separate couplings.
    let area = |args: &[&str]| {
        let mut all = vec!["budget", "circuits/qaoa_ring_6.qasm", "--json"];
        all.extend_from_slice(args);
        let (code, out, err) = tutti(&all);
        assert_eq!(code, 0, "{err}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        v["ms_area"].as_f64().unwrap()
    };
    let (by_area, by_pulses, base) = (
        area(&["--objective", "area"]),
        area(&["--objective", "pulses"]),
        area(&["--baseline"]),
    );
    assert!(by_area <= by_pulses + 1e-9, "{by_area} {by_pulses}");
    assert!((by_area * 3.0 - base).abs() < 1e-6, "{by_area} vs {base}");
    let (code, _, err) = tutti(&[
        "budget",
        "circuits/qaoa_ring_6.qasm",
        "--objective",
        "speed",
    ]);
    assert_eq!(code, 2, "{err}");
}

/// Outputs are written as they are made (never held whole as text): a device that
/// refuses the bytes (`/dev/full`) is an error with exit 2 naming the path, in every
/// format.
#[cfg(target_os = "linux")]
#[test]
fn a_failed_write_is_an_error_in_every_format() {
    if !std::path::Path::new("/dev/full").exists() {
        return;
    }
    for format in ["pulses", "json", "qasm"] {
        let (code, _, err) = tutti(&[
            "compile",
            "circuits/qft_5.qasm",
            "--format",
            format,
            "-o",
            "/dev/full",
        ]);
        assert_eq!(code, 2, "{format}: {err}");
        assert!(err.contains("cannot write /dev/full"), "{format}: {err}");
    }
}

// `--drop-final-z` leaves out the Z rotations before the final measurements only
// with a proof up to a final diagonal; a plain check of that output then says NOT
// EQUIVALENT (it is not the circuit's unitary) with a note naming the check that
// accepts it, and the provenance says how it was verified.
#[test]
fn drop_final_z_outputs_need_the_final_diagonal_check() {
    let out = scratch("grover_dropped.pulses");
    let (seq, said) = compile_and_load("circuits/grover_3.qasm", &out, &["--drop-final-z"]);
    assert!(
        said.contains("EQUIVALENT up to Z rotations before the final measurements"),
        "{said}"
    );
    let (code, _, err) = tutti(&["check", "circuits/grover_3.qasm", out.to_str().unwrap()]);
    assert_eq!(code, 1, "a plain check must not accept it");
    assert!(err.contains("--up-to-final-diagonal accepts that"), "{err}");
    let (code, stdout, _) = tutti(&[
        "check",
        "circuits/grover_3.qasm",
        out.to_str().unwrap(),
        "--up-to-final-diagonal",
    ]);
    assert_eq!(code, 0, "{stdout}");
    assert_eq!(
        seq.provenance.unwrap().verified,
        "whole, up to a diagonal before the final measurements"
    );
    // Without the option the output is the circuit's unitary: the plain check passes.
    compile_and_load("circuits/grover_3.qasm", &out, &[]);
    let (code, _, _) = tutti(&["check", "circuits/grover_3.qasm", out.to_str().unwrap()]);
    assert_eq!(code, 0);
}

// The optimizer gathers terminal measurements into one readout slot at the end
// (qaoa_n3 measures q[2] before the last gate on q[1]); the output's compile trace
// keeps only points valid for the circuit as written, so a window-by-window proof
// along it (what `check` falls back to) still holds.
#[test]
fn terminal_measurements_end_in_one_run_and_the_trace_stays_valid() {
    let src = "tests/data/qasmbench/small/qaoa_n3/qaoa_n3.qasm";
    let text = std::fs::read_to_string(src).unwrap();
    let circuit = tutti::qasm::read_str(src, &text).circuit.unwrap();
    let (_, shared) = tutti::circuit::defer::measurements_last(&circuit)
        .expect("qaoa_n3 has a measurement to move");
    let out = scratch("qaoa_n3.pulses");
    let (seq, _) = compile_and_load(src, &out, &["--trace-every", "1"]);
    let first = seq
        .steps
        .iter()
        .position(|s| matches!(s.op, tutti::native::NativeOp::Measure { .. }))
        .unwrap();
    assert_eq!(
        seq.steps.len() - first,
        3,
        "three measurements, all at the end"
    );
    assert!(!seq.trace.is_empty() && seq.trace.iter().all(|p| p.instrs <= shared));
    let proof = tutti::driver::equal_by_trace(
        src.as_ref(),
        &out,
        &tutti::qasm::Limits::default(),
        &tutti::sim::CheckConfig::default(),
    )
    .expect("a proof along the trace");
    assert!(proof.equivalent, "{proof:?}");
    // Near miss: the same output with the trace of the reordered circuit (points
    // past the moved measurement, counted in the other order) proves nothing.
    let (moved, _) = tutti::circuit::defer::measurements_last(&circuit).unwrap();
    let o = tutti::compile::optimize::compile_optimized(
        &moved,
        &tutti::native::profile::Profile::demo(),
        &tutti::compile::optimize::OptConfig {
            max_range_instrs: 1,
            ..Default::default()
        },
    )
    .unwrap();
    // The same compile (the file's angles are rounded in their last digit).
    let kinds = |s: &tutti::native::Sequence| -> Vec<&'static str> {
        s.steps.iter().map(|s| s.op.name()).collect()
    };
    assert!(kinds(&o.sequence) == kinds(&seq), "not the same compile");
    let mut wrong = seq.clone();
    wrong.trace = o
        .sync
        .iter()
        .copied()
        .filter(|p| p.instrs < moved.instrs.len())
        .collect();
    assert!(wrong.trace.iter().any(|p| p.instrs > shared));
    let bad = scratch("qaoa_n3_wrong_trace.pulses");
    std::fs::write(&bad, tutti::driver::Format::Pulses.render(&wrong)).unwrap();
    let verdict = tutti::driver::equal_by_trace(
        src.as_ref(),
        &bad,
        &tutti::qasm::Limits::default(),
        &tutti::sim::CheckConfig::default(),
    );
    assert!(
        verdict.as_ref().is_none_or(|v| !v.equivalent),
        "{verdict:?}"
    );
}
