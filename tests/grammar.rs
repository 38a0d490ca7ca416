//! Every example program in grammar/qasm2.ebnf reads without error.

#[test]
fn every_example_in_the_grammar_reads() {
    let text = std::fs::read_to_string("grammar/qasm2.ebnf").unwrap();
    let mut count = 0;
    for block in text.split("\n(* example\n").skip(1) {
        let program = block.split("*)").next().unwrap();
        let out = tutti::qasm::read_str("grammar-example.qasm", program);
        assert!(
            out.circuit.is_some(),
            "example {count} fails:\n{}",
            out.render()
        );
        assert!(
            out.diagnostics.is_empty(),
            "example {count} warns:\n{}",
            out.render()
        );
        count += 1;
    }
    assert!(count >= 3);
}

#[test]
fn every_example_in_the_pulse_grammar_reads() {
    let text = std::fs::read_to_string("grammar/pulses.ebnf").unwrap();
    let mut count = 0;
    for block in text.split("\n(* example\n").skip(1) {
        let list = block.split("*)").next().unwrap();
        let out = tutti::native::text::read_pulses("grammar-example.pulses", list);
        assert!(
            out.sequence.is_some(),
            "example {count} fails:\n{}",
            out.render()
        );
        count += 1;
    }
    assert!(count >= 2);
}
