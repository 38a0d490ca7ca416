//! Shared helpers for the data-driven tests.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

/// Compares `actual` with the expectation stored at `expect_path`. With
/// `TUTTI_BLESS=1` in the environment the expectation is rewritten instead.
/// Returns a description of the mismatch, or `None` when they agree.
pub fn check(expect_path: &Path, actual: &str) -> Option<String> {
    if std::env::var("TUTTI_BLESS").as_deref() == Ok("1") {
        std::fs::write(expect_path, actual).expect("write expectation");
        return None;
    }
    let expected = std::fs::read_to_string(expect_path).unwrap_or_default();
    if expected == actual {
        return None;
    }
    let mut diff = format!("--- {} (expected)\n+++ actual\n", expect_path.display());
    let (e, a): (Vec<&str>, Vec<&str>) = (expected.lines().collect(), actual.lines().collect());
    for i in 0..e.len().max(a.len()) {
        match (e.get(i), a.get(i)) {
            (Some(x), Some(y)) if x == y => {}
            (x, y) => {
                if let Some(x) = x {
                    diff.push_str(&format!("-{x}\n"));
                }
                if let Some(y) = y {
                    diff.push_str(&format!("+{y}\n"));
                }
            }
        }
    }
    diff.push_str("re-bless with TUTTI_BLESS=1 cargo test if the change is intended\n");
    Some(diff)
}

/// Every file with the extension `ext` under `dir`, sorted, recursively.
pub fn files(dir: &str, ext: &str) -> Vec<PathBuf> {
    fn walk(dir: &Path, ext: &str, out: &mut Vec<PathBuf>) {
        let Ok(entries) = std::fs::read_dir(dir) else {
            return;
        };
        for e in entries.flatten() {
            let p = e.path();
            if p.is_dir() {
                walk(&p, ext, out);
            } else if p.extension().and_then(|x| x.to_str()) == Some(ext) {
                out.push(p);
            }
        }
    }
    let mut out = Vec::new();
    walk(Path::new(dir), ext, &mut out);
    out.sort();
    out
}

/// The vendored outside circuits (QASMBench subset; see tests/data/qasmbench/PROVENANCE.md).
pub fn qasmbench_files() -> Vec<PathBuf> {
    files("tests/data/qasmbench", "qasm")
}

/// Reads a circuit that must be valid.
pub fn read_ok(path: &Path) -> tutti::circuit::Circuit {
    let outcome = tutti::qasm::read_file(path, &Default::default());
    match outcome.circuit {
        Some(c) => c,
        None => panic!("{} did not read:\n{}", path.display(), outcome.render()),
    }
}

/// The limits a case file asks for in a first line `// limits: key=value ...`.
pub fn limits_for(text: &str) -> tutti::qasm::Limits {
    let mut limits = tutti::qasm::Limits::default();
    if let Some(rest) = text
        .lines()
        .next()
        .and_then(|l| l.strip_prefix("// limits:"))
    {
        for kv in rest.split_whitespace() {
            let (k, v) = kv.split_once('=').expect("key=value");
            let v: usize = v.parse().expect("number");
            match k {
                "max_ops" => limits.max_ops = v,
                "max_file_bytes" => limits.max_file_bytes = v,
                "max_qubits" => limits.max_qubits = v as u64,
                "max_include_depth" => limits.max_include_depth = v,
                "max_gate_nesting" => limits.max_gate_nesting = v,
                other => panic!("unknown limit {other}"),
            }
        }
    }
    limits
}

/// The checker's program of an OpenQASM 2 text that must read without error.
pub fn program(text: &str) -> tutti::sim::Program {
    let out = tutti::qasm::read_str("test.qasm", text);
    let rendered = out.render();
    tutti::sim::Program::from_circuit(&out.circuit.unwrap_or_else(|| panic!("{rendered}"))).unwrap()
}

/// A program text on `n` qubits and `n` bits with the standard library included.
pub fn qasm(n: usize, body: &str) -> String {
    format!("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[{n}];\ncreg c[{n}];\n{body}")
}

/// A circuit from OpenQASM 2 text that must read without error.
pub fn read_ok_str(text: &str) -> tutti::circuit::Circuit {
    let outcome = tutti::qasm::read_str("test.qasm", text);
    match outcome.circuit {
        Some(c) => c,
        None => panic!("did not read:\n{}", outcome.render()),
    }
}

/// Runs the tutti binary with `args`.
pub fn run_tutti(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_tutti"))
        .args(args)
        .output()
        .expect("the binary runs")
}

/// Bytes of a process's output as text.
pub fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// Every file below `dir` (none when it does not exist).
pub fn walk(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(entries) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in entries.flatten() {
            if e.file_type().is_ok_and(|t| t.is_dir()) {
                stack.push(e.path());
            } else {
                out.push(e.path());
            }
        }
    }
    out
}

/// Renders an SVG with resvg (a well-kept pure-Rust renderer) into RGBA pixels.
/// With `TUTTI_PNG_DIR` set, the picture is also saved there as `LABEL.png`, to
/// look at.
pub fn render_svg(svg: &str, label: &str) -> resvg::tiny_skia::Pixmap {
    let tree =
        resvg::usvg::Tree::from_str(svg, &resvg::usvg::Options::default()).expect("a valid SVG");
    let size = tree.size().to_int_size();
    let mut pixmap = resvg::tiny_skia::Pixmap::new(size.width(), size.height()).unwrap();
    resvg::render(
        &tree,
        resvg::tiny_skia::Transform::default(),
        &mut pixmap.as_mut(),
    );
    if let Ok(dir) = std::env::var("TUTTI_PNG_DIR") {
        pixmap
            .save_png(Path::new(&dir).join(format!("{label}.png")))
            .unwrap();
    }
    pixmap
}
