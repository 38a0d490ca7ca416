//! Property tests of the front end: printing and reading back is the identity on
//! the IR, and no input makes it panic or reads differently in chunks.

mod common;

use proptest::prelude::*;
use tutti::circuit::*;
use tutti::qasm::{elaborate, Limits, MemoryLoader};

fn arb_circuit() -> impl Strategy<Value = Circuit> {
    let regs = (
        prop::collection::vec(1u32..4, 1..4),
        prop::collection::vec(1u32..4, 0..3),
    );
    regs.prop_flat_map(|(qsizes, csizes)| {
        let nq: u32 = qsizes.iter().sum();
        let nc: u32 = csizes.iter().sum();
        let n_cregs = csizes.len() as u32;
        let instr = (
            0..GateKind::ALL.len(),
            prop::collection::vec(-10.0f64..10.0, 3),
            Just((0..nq).collect::<Vec<u32>>()).prop_shuffle(),
            0u8..10,
            0u32..8,
            0u64..4,
        )
            .prop_map(move |(k, params, perm, which, cb, value)| {
                let kind = GateKind::ALL[k];
                let op = if which == 0 && nc > 0 {
                    Op::Measure {
                        qubit: Qubit(perm[0]),
                        clbit: Clbit(cb % nc),
                    }
                } else if which == 1 {
                    Op::Reset {
                        qubit: Qubit(perm[0]),
                    }
                } else if which == 2 {
                    let mut qs: Vec<Qubit> = perm.iter().take(2).map(|&q| Qubit(q)).collect();
                    qs.sort();
                    Op::Barrier { qubits: qs.into() }
                } else if kind.n_qubits() as u32 <= nq {
                    let gate = Gate::new(kind, &params[..kind.n_params()]);
                    Op::Gate {
                        gate,
                        qubits: perm
                            .iter()
                            .take(kind.n_qubits())
                            .map(|&q| Qubit(q))
                            .collect(),
                    }
                } else {
                    Op::Gate {
                        gate: Gate::new(GateKind::H, &[]),
                        qubits: vec![Qubit(perm[0])].into(),
                    }
                };
                let condition = (which == 3 && n_cregs > 0 && !matches!(op, Op::Barrier { .. }))
                    .then(|| Condition {
                        creg: cb % n_cregs,
                        value: (value % 2).into(),
                    });
                Instr { op, condition }
            });
        prop::collection::vec(instr, 0..30).prop_map(move |instrs| {
            let mut c = Circuit::default();
            let mut off = 0;
            for (i, s) in qsizes.iter().enumerate() {
                c.qregs.push(Register {
                    name: format!("q{i}"),
                    offset: off,
                    size: *s,
                });
                off += s;
            }
            off = 0;
            for (i, s) in csizes.iter().enumerate() {
                c.cregs.push(Register {
                    name: format!("c{i}"),
                    offset: off,
                    size: *s,
                });
                off += s;
            }
            c.instrs = instrs;
            c
        })
    })
}

/// Reading must never panic; a failure must carry a located error inside the file.
/// Read again in small chunks on several threads, the outcome must be the same.
fn read_never_panics(text: &str) {
    let limits = Limits {
        max_ops: 100_000,
        max_threads: 1,
        ..Limits::default()
    };
    let out = elaborate::read_with("fuzz.qasm", text, &limits, &MemoryLoader::default());
    let chunked = Limits {
        max_threads: 3,
        min_chunk_bytes: 40,
        ..limits
    };
    let again = elaborate::read_with("fuzz.qasm", text, &chunked, &MemoryLoader::default());
    assert_eq!(out.circuit, again.circuit, "chunks change the circuit");
    assert_eq!(
        out.render(),
        again.render(),
        "chunks change the diagnostics"
    );
    if out.circuit.is_none() {
        let first = out
            .errors()
            .next()
            .expect("a failed read names at least one error");
        assert!(first.span.start as usize <= text.len() + 1);
        assert!(!first.hint.is_empty());
        let rendered = out.render();
        assert!(rendered.contains("fuzz.qasm:"));
    }
}

/// A constant parameter without parentheses: terms joined by `+`/`-`, each a chain
/// of signed atoms joined by `*`/`/`. Returned as text and as the value the grammar
/// of arXiv:1707.03429 gives it (left-associative, unary minus binding tightest),
/// computed here by a plain fold that shares no code with the front end.
/// (kind: 0 is `pi`, else the digits) of one atom.
type Atom = (usize, &'static str);
/// (number of `-` signs, atom).
type Factor = (usize, Atom);
/// First factor, then (`*` if true else `/`, factor) pairs.
type Term = (Factor, Vec<(bool, Factor)>);

fn arb_plain_constant() -> impl Strategy<Value = (String, f64)> {
    let atom = (
        0usize..4,
        prop::sample::select(vec![
            "0", "1", "2", "3", "8", "16", "0.5", "1e-3", "2.5e2", ".25",
        ]),
    );
    let factor = (0usize..3, atom);
    let term = (
        factor.clone(),
        prop::collection::vec((any::<bool>(), factor), 0..3),
    );
    (
        term.clone(),
        prop::collection::vec((any::<bool>(), term), 0..3),
    )
        .prop_map(|(first, rest)| {
            let atom_value = |(kind, digits): &Atom| -> (String, f64) {
                if *kind == 0 {
                    ("pi".to_string(), std::f64::consts::PI)
                } else {
                    (digits.to_string(), digits.parse().unwrap())
                }
            };
            let factor_value = |(signs, atom): &Factor| -> (String, f64) {
                let (t, v) = atom_value(atom);
                let v = if signs % 2 == 1 { -v } else { v };
                ("-".repeat(*signs) + &t, v)
            };
            let term_value = |(f0, fs): &Term| {
                let (mut text, mut v) = factor_value(f0);
                for (mul, f) in fs {
                    let (t, x) = factor_value(f);
                    text.push_str(if *mul { "*" } else { "/" });
                    text.push_str(&t);
                    v = if *mul { v * x } else { v / x };
                }
                (text, v)
            };
            let (mut text, mut v) = term_value(&first);
            for (add, t) in &rest {
                let (tt, x) = term_value(t);
                text.push_str(if *add { "+" } else { "-" });
                text.push_str(&tt);
                v = if *add { v + x } else { v - x };
            }
            (text, v)
        })
}

/// The first parameter of the only gate of `rz(<param>) q[0];` as read.
fn read_param(param: &str) -> Result<f64, String> {
    let text = format!("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[1];\nrz({param}) q[0];\n");
    let out = tutti::qasm::read_str("param.qasm", &text);
    match out.circuit.as_ref().map(|c| &c.instrs[..]) {
        Some(
            [Instr {
                op: Op::Gate { gate, .. },
                ..
            }],
        ) => Ok(gate.params[0]),
        _ => Err(out.render()),
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 500, ..ProptestConfig::default() })]

    #[test]
    fn constant_parameters_have_the_grammar_value_to_the_bit((text, value) in arb_plain_constant()) {
        // Division by zero gives a non-finite value, which is a located error.
        prop_assume!(value.is_finite());
        let direct = read_param(&text).map_err(TestCaseError::fail)?;
        prop_assert_eq!(direct.to_bits(), value.to_bits(), "{}", text);
        // In parentheses, and behind a `+` sign, the general rules read it: same bits.
        let cases = [
            (format!("({text})"), value),
            (format!("+{text}"), value),
            (format!("0+({text})"), 0.0 + value),
        ];
        for (wrapped, expected) in cases {
            let general = read_param(&wrapped).map_err(TestCaseError::fail)?;
            prop_assert_eq!(general.to_bits(), expected.to_bits(), "{}", wrapped);
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn printed_circuits_read_back_to_the_same_ir(c in arb_circuit()) {
        let text = c.to_string();
        let out = tutti::qasm::read_str("printed.qasm", &text);
        let back = out.circuit.clone();
        prop_assert!(back.is_some(), "{}\n{}", text, out.render());
        prop_assert_eq!(back.unwrap(), c);
    }

    #[test]
    fn random_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        read_never_panics(&String::from_utf8_lossy(&bytes));
    }

    #[test]
    fn random_token_soup_never_panics(words in prop::collection::vec(prop::sample::select(vec![
        "OPENQASM", "2.0", "include", "\"qelib1.inc\"", "qreg", "creg", "q", "c", "[", "]", "3", ";",
        "gate", "g", "(", ")", "{", "}", "a", ",", "h", "cx", "measure", "->", "if", "==", "pi", "-",
        "*", "/", "^", "sin", "barrier", "reset", "opaque", "U", "CX", "1e9", "\n", "//",
    ]), 0..80)) {
        read_never_panics(&words.join(" "));
    }

    #[test]
    fn mutated_outside_files_never_panic(
        file in 0usize..30,
        edits in prop::collection::vec((any::<prop::sample::Index>(), 0u8..3, any::<u8>()), 1..6),
    ) {
        let path = &common::qasmbench_files()[file];
        let mut bytes = std::fs::read(path).unwrap();
        for (at, kind, byte) in edits {
            let i = at.index(bytes.len().max(1));
            match kind {
                0 if !bytes.is_empty() => { bytes.remove(i.min(bytes.len() - 1)); }
                1 => bytes.insert(i.min(bytes.len()), byte),
                _ if !bytes.is_empty() => { let j = i.min(bytes.len() - 1); bytes[j] = byte; }
                _ => {}
            }
        }
        read_never_panics(&String::from_utf8_lossy(&bytes));
    }
}
