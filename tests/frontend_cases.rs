//! Data-driven front-end tests. `tests/cases/parse/X.qasm` must read, and its
//! warnings plus IR dump must equal `X.ir`; `tests/cases/fail/X.qasm` must fail, and
//! its diagnostics must equal `X.err`. A first line `// limits: key=value ...` sets
//! limits for that case. Re-bless with `TUTTI_BLESS=1 cargo test`.

mod common;

use common::limits_for;
use std::path::Path;
use tutti::qasm::{elaborate, FsLoader};

fn run_case(path: &Path) -> (bool, String) {
    let text = std::fs::read_to_string(path).unwrap();
    let name = path.display().to_string();
    let outcome = elaborate::read_with(&name, &text, &limits_for(&text), &FsLoader);
    let mut out = outcome.render();
    if let Some(c) = &outcome.circuit {
        out.push_str(&c.to_string());
    }
    (outcome.circuit.is_some(), out)
}

#[test]
fn parse_cases_match_their_ir_dumps() {
    let cases = common::files("tests/cases/parse", "qasm");
    assert!(cases.len() >= 10, "parse cases missing");
    let mut failures = Vec::new();
    for case in &cases {
        let (ok, out) = run_case(case);
        if !ok {
            failures.push(format!("{} should read:\n{out}", case.display()));
            continue;
        }
        if let Some(diff) = common::check(&case.with_extension("ir"), &out) {
            failures.push(diff);
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn fail_cases_match_their_diagnostics() {
    let cases = common::files("tests/cases/fail", "qasm");
    let mut failures = Vec::new();
    let mut codes = std::collections::BTreeSet::new();
    for case in &cases {
        let (ok, out) = run_case(case);
        if ok {
            failures.push(format!("{} should fail but read", case.display()));
            continue;
        }
        for line in out.lines() {
            if let Some(code) = line.strip_prefix('[').and_then(|l| l.split(']').next()) {
                codes.insert(code.to_string());
            }
        }
        if let Some(diff) = common::check(&case.with_extension("err"), &out) {
            failures.push(diff);
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
    assert!(
        codes.len() >= 25,
        "only {} kinds of mistake covered: {codes:?}",
        codes.len()
    );
}

#[test]
fn every_diagnostic_names_file_line_and_column() {
    for case in common::files("tests/cases/fail", "qasm") {
        let (_, out) = run_case(&case);
        let name = case.display().to_string();
        let headline = out
            .lines()
            .find(|l| l.contains("Error:"))
            .expect("an error headline");
        let located = headline.split("Error: ").nth(1).unwrap_or("");
        let mut parts = located.splitn(3, ':');
        let file = parts.next().unwrap_or("");
        let line: Option<u32> = parts.next().and_then(|s| s.parse().ok());
        let col: Option<u32> = parts
            .next()
            .and_then(|s| s.split(':').next())
            .and_then(|s| s.parse().ok());
        assert!(
            file.ends_with(".qasm") || file.ends_with(".inc"),
            "{name}: {headline}"
        );
        assert!(
            line.is_some() && col.is_some(),
            "{name}: no line:column in {headline}"
        );
        assert!(out.contains("Help:"), "{name}: no hint");
        assert!(out.contains('^') || out.contains('|'), "{name}: no caret");
    }
}
