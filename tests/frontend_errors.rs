//! Many errors and many definitions: one root mistake gives one report, the printed
//! errors are capped with a count of the rest, and deep gate nesting is bounded so
//! that expansion never overflows the stack.

use tutti::qasm::{elaborate::read_with, Limits};

fn read(text: &str, limits: &Limits) -> tutti::qasm::elaborate::ReadOutcome {
    read_with("test.qasm", text, limits, &tutti::qasm::FsLoader)
}

const HEAD: &str = "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[2];\n";

// Bug: 16,000 lines calling undefined gates printed 16,000 errors, each rendering
// scanning the whole file (quadratic).
#[test]
fn an_undefined_name_is_reported_once_with_a_count_of_its_uses() {
    let mut text = HEAD.to_string();
    for i in 0..16_000 {
        text.push_str(&format!(
            "foo{} q[0];\nmeasure q[0] -> nowhere[0];\n",
            i % 3
        ));
    }
    let out = read(&text, &Limits::default());
    let errors: Vec<_> = out.errors().collect();
    assert_eq!(errors.len(), 4, "{}", out.render());
    let foo0 = errors
        .iter()
        .find(|d| d.message.contains("`foo0`"))
        .expect("foo0 reported");
    assert!(
        foo0.message.contains("5333 later use(s)"),
        "{}",
        foo0.message
    );
    let reg = errors
        .iter()
        .find(|d| d.code == "undefined-register")
        .expect("the register reported");
    assert!(
        reg.message.contains("15999 later use(s)"),
        "{}",
        reg.message
    );
}

// Distinct errors are all counted but only the first few printed.
#[test]
fn printed_errors_are_capped_with_a_count_of_the_rest() {
    let mut text = HEAD.to_string();
    for i in 0..5_000 {
        text.push_str(&format!("cx q[0],q[{}];\n", 2 + i));
    }
    let limits = Limits {
        errors_shown: 7,
        ..Limits::default()
    };
    let out = read(&text, &limits);
    assert_eq!(out.errors().count(), 5_000);
    let rendered = out.render();
    assert_eq!(rendered.matches("Error:").count(), 7, "{rendered}");
    assert!(
        rendered.contains("... and 4993 more error(s) and 0 more warning(s) not shown"),
        "{rendered}"
    );
    // Line and column survive the cached rendering, for a late error too.
    let last = out.errors().last().unwrap().render(&out.sources);
    assert!(last.contains("test.qasm:5003:11:"), "{last}");
}

// Bug: a chain of 100,000 gate definitions did not finish in 120 s; with the nesting
// limit hit at level 65, every later definition failed as "not defined".
#[test]
fn a_long_definition_chain_gives_one_root_error() {
    let mut text = format!("{HEAD}gate g0 a {{ h a; }}\n");
    for i in 1..100_000 {
        text.push_str(&format!("gate g{i} a {{ g{} a; }}\n", i - 1));
    }
    text.push_str("g99999 q[0];\n");
    let out = read(&text, &Limits::default());
    let errors: Vec<_> = out.errors().collect();
    assert_eq!(errors.len(), 1, "{}", out.render());
    assert_eq!(errors[0].code, "gate-nesting");
    assert!(errors[0].hint.contains("--max-gate-nesting"));
}

// Nesting up to the hard cap expands without overflowing the stack of a test
// thread (2 MiB), and a limit above the cap is held to the cap.
#[test]
fn nesting_is_bounded_by_a_cap_that_fits_the_stack() {
    let cap = tutti::qasm::elaborate::MAX_GATE_NESTING;
    let chain = |depth: usize| {
        let mut text = format!("{HEAD}gate g1 a,b {{ cx a,b; }}\n");
        for i in 2..=depth {
            text.push_str(&format!("gate g{i} a,b {{ g{} b,a; }}\n", i - 1));
        }
        text.push_str(&format!("g{depth} q[0],q[1];\n"));
        text
    };
    let limits = Limits {
        max_gate_nesting: usize::MAX,
        ..Limits::default()
    };
    let out = read(&chain(cap), &limits);
    let c = out.circuit.expect("nesting at the cap expands");
    assert_eq!(c.instrs.len(), 1);
    let out = read(&chain(cap + 1), &limits);
    let errors: Vec<_> = out.errors().collect();
    assert_eq!(errors.len(), 1);
    assert_eq!(errors[0].code, "gate-nesting");
}
