//! Reading one file on several threads must give exactly what reading it on one
//! thread gives: the same circuit and the same diagnostics, character for character.
//! The reference here is the one-thread reader, which the other front-end tests check
//! against the standard and the outside files; this file checks that cutting a file
//! into chunks changes nothing, wherever the cuts fall.

mod common;

use proptest::prelude::*;
use std::path::PathBuf;
use tutti::qasm::{elaborate, FsLoader, Limits, Loader, MemoryLoader, ReadOutcome};

fn chunked(threads: usize, min_chunk_bytes: usize) -> Limits {
    Limits {
        max_threads: threads,
        min_chunk_bytes,
        ..Limits::default()
    }
}

fn read(text: &str, limits: &Limits, loader: &dyn Loader) -> ReadOutcome {
    elaborate::read_with("chunks.qasm", text, limits, loader)
}

/// Reads `text` both ways and says how they differ, if they do.
fn compare(text: &str, limits: Limits, loader: &dyn Loader) -> Result<ReadOutcome, String> {
    let serial = read(
        text,
        &Limits {
            max_threads: 1,
            ..limits
        },
        loader,
    );
    let parallel = read(text, &limits, loader);
    if serial.circuit != parallel.circuit {
        return Err(format!("circuits differ for\n{text}"));
    }
    if serial.render() != parallel.render() {
        return Err(format!(
            "diagnostics differ for\n{text}\n--- one thread\n{}\n--- chunks\n{}",
            serial.render(),
            parallel.render()
        ));
    }
    Ok(parallel)
}

const HEADER: &str = "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[4];\ncreg c[4];\n";

/// A long program of plain gate lines, with `insert` placed at `at` (a fraction of
/// the lines).
fn long_program(lines: usize, insert: &str, at: f64) -> String {
    let mut s = String::from(HEADER);
    let k = (lines as f64 * at) as usize;
    for i in 0..lines {
        if i == k {
            s.push_str(insert);
            s.push('\n');
        }
        match i % 4 {
            0 => s.push_str(&format!("h q[{}];\n", i % 4)),
            1 => s.push_str(&format!("cx q[{}],q[{}];\n", i % 4, (i + 1) % 4)),
            2 => s.push_str(&format!("rz({}*pi/16) q[{}];\n", i % 16, i % 4)),
            _ => s.push_str(&format!("if(c=={}) u3(0.1,-pi/4,2) q[{}];\n", i % 3, i % 4)),
        }
    }
    s
}

#[test]
fn a_long_file_is_read_in_all_its_chunks_and_equals_one_thread() {
    let text = long_program(12_000, "// nothing", 0.5);
    let out = compare(&text, chunked(4, 16 << 10), &MemoryLoader::default()).unwrap();
    assert!(out.circuit.is_some(), "{}", out.render());
    assert_eq!(out.chunks_ahead, 3, "every chunk after the first is used");
    assert_eq!(out.circuit.unwrap().instrs.len(), 12_000);
}

#[test]
fn changes_of_scope_or_mistakes_anywhere_give_the_one_thread_outcome() {
    let loader = MemoryLoader::default();
    // (what is inserted, where as a fraction of the lines, chunks ahead still used).
    // Four chunks: cuts near 25%, 50% and 75%; the prefix read first ends near 12%.
    let cases: &[(&str, f64, usize)] = &[
        // A declaration after the prefix: every chunk ahead assumed the old scope.
        ("qreg r[2];\nh r[1];", 0.2, 0),
        // A gate defined in chunk 2: that chunk stops and is reread, and chunk 3
        // assumed the old scope.
        ("gate late(t) a { rz(t) a; }\nlate(0.3) q[2];", 0.6, 1),
        // A mistake in chunk 2: that chunk is reread, chunks 1 and 3 are used.
        ("h q[9];", 0.6, 2),
        ("cx q[0] q[1];", 0.6, 2),
        ("h q[0]", 0.6, 2),
        ("OPENQASM 2.0;", 0.6, 2),
        // A comment left open in chunk 3 swallows the rest of the file.
        ("/* never closed ;\n", 0.9, 2),
    ];
    for &(insert, at, used) in cases {
        let text = long_program(12_000, insert, at);
        let out = compare(&text, chunked(4, 16 << 10), &loader).unwrap();
        assert_eq!(out.chunks_ahead, used, "{insert}");
    }
    // A block comment with `;` line ends around the middle cut: a chunk may start
    // inside it, and then must not be used.
    let comment = "/* a comment ;\n".repeat(40) + " */";
    for at in [0.49, 0.5, 0.51] {
        let text = long_program(12_000, &comment, at);
        let out = compare(&text, chunked(4, 16 << 10), &loader).unwrap();
        assert!(out.chunks_ahead >= 2, "{at}: {}", out.chunks_ahead);
    }
}

#[test]
fn the_operation_limit_stops_at_the_same_statement() {
    let text = long_program(12_000, "// nothing", 0.5);
    for max_ops in [100, 5_000, 9_000, 11_999, 12_000] {
        let limits = Limits {
            max_ops,
            ..chunked(4, 16 << 10)
        };
        let out = compare(&text, limits, &MemoryLoader::default()).unwrap();
        assert_eq!(out.circuit.is_some(), max_ops >= 12_000, "limit {max_ops}");
    }
}

#[test]
fn every_test_and_outside_file_reads_the_same_in_small_chunks() {
    let mut paths: Vec<PathBuf> = common::files("tests/cases", "qasm");
    paths.extend(common::qasmbench_files());
    assert!(paths.len() > 60, "found {} files", paths.len());
    for path in paths {
        let text = std::fs::read_to_string(&path).unwrap();
        let name = path.display().to_string();
        let limits_for = |threads| Limits {
            max_threads: threads,
            min_chunk_bytes: 48,
            ..common::limits_for(&text)
        };
        let serial = elaborate::read_with(&name, &text, &limits_for(1), &FsLoader);
        let parallel = elaborate::read_with(&name, &text, &limits_for(4), &FsLoader);
        assert_eq!(serial.circuit, parallel.circuit, "{name}");
        assert_eq!(serial.render(), parallel.render(), "{name}");
    }
}

/// Lines of real and broken OpenQASM, some spanning lines, to build programs from.
const LINES: &[&str] = &[
    "h q[0];",
    "cx q[0],q[1];",
    "rz(pi/4) q[1];",
    "measure q[0] -> c[0];",
    "measure q -> c;",
    "if(c==1) x q[1];",
    "barrier q;",
    "reset q[2];",
    "h q[0]; cx q[1],q[2];",
    "qreg r[2];",
    "creg d[1];",
    "gate g(t) a,b {\n  rz(t) a;\n  cx a,b;\n}",
    "g(0.5) q[0],q[1];",
    "x r[0];",
    "/* a comment ;\n  still ; */",
    "// a line comment ;",
    "include \"more.inc\";",
    "h q[7];",
    "cx q[0] q[1];",
    "u3(1,2) q[0];",
    "h q[0]",
    "@",
    "OPENQASM 2.0;",
    "opaque magic a;",
    "magic q[3];",
];

proptest! {
    #![proptest_config(ProptestConfig { cases: 300, ..ProptestConfig::default() })]

    #[test]
    fn random_programs_read_the_same_in_chunks(
        picks in prop::collection::vec(0..LINES.len(), 10..120),
        threads in 2usize..5,
        chunk in 16usize..200,
        max_ops in prop::sample::select(vec![20usize, 60, 1_000_000]),
    ) {
        let mut text = String::from(HEADER);
        for p in picks {
            text.push_str(LINES[p]);
            text.push('\n');
        }
        let mut loader = MemoryLoader::default();
        loader.0.insert(PathBuf::from("more.inc"), "gate twice a { x a; x a; }\n".into());
        let limits = Limits { max_ops, ..chunked(threads, chunk) };
        if let Err(why) = compare(&text, limits, &loader) {
            return Err(TestCaseError::fail(why));
        }
    }
}
