//! `if` compares a whole classical register with a whole number (OpenQASM 2,
//! arXiv:1707.03429, section 3), and registers may be far wider than 64 bits: public
//! benchmark files compare 151- and 301-bit registers. Values of any width are read,
//! kept exactly through every output format, and compared exactly by the checker.

use tutti::compile::{compile_baseline, Target};
use tutti::driver::Format;
use tutti::native::profile::Profile;
use tutti::native::qasm_out::read_qasm_sequence;
use tutti::native::text::{read_json, read_pulses};
use tutti::sim::{check, CheckConfig, Program};

fn circuit(bits: u32, value: &str) -> String {
    format!(
        "OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[3];\ncreg c[{bits}];\nh q[0];\nmeasure q[0] -> c[{}];\nif(c=={value}) x q[1];\nmeasure q[1] -> c[0];\n",
        bits - 1
    )
}

/// 2^(bits-1) in decimal, computed here by doubling a decimal string.
fn power_of_two(exp: u32) -> String {
    let mut digits = vec![1u8];
    for _ in 0..exp {
        let mut carry = 0;
        for d in digits.iter_mut() {
            let v = *d * 2 + carry;
            *d = v % 10;
            carry = v / 10;
        }
        if carry > 0 {
            digits.push(carry);
        }
    }
    digits.iter().rev().map(|d| char::from(b'0' + d)).collect()
}

fn program(text: &str) -> Program {
    let out = tutti::qasm::read_str("wide.qasm", text);
    let rendered = out.render();
    Program::from_circuit(&out.circuit.unwrap_or_else(|| panic!("{rendered}"))).unwrap()
}

#[test]
fn wide_register_values_survive_every_format_and_are_compared_exactly() {
    for bits in [151u32, 301] {
        let value = power_of_two(bits - 1);
        assert!(value.len() > 20, "wider than 64 bits");
        let text = circuit(bits, &value);
        let c = tutti::qasm::read_str("wide.qasm", &text)
            .circuit
            .expect("reads");
        let seq = compile_baseline(&c, &Profile::demo(), Target::Collective).unwrap();
        let a = Program::from_circuit(&c).unwrap();
        for format in [Format::Pulses, Format::Json, Format::Qasm] {
            let out = format.render(&seq);
            assert!(out.contains(&value), "{format:?} keeps the value");
            let back = match format {
                Format::Pulses => read_pulses("x", &out).sequence.unwrap(),
                Format::Json => read_json("x", &out).sequence.unwrap(),
                Format::Qasm => read_qasm_sequence(&out).unwrap(),
            };
            assert_eq!(back, seq, "{format:?} reads back exactly");
            let v = check(&a, &Program::from_sequence(&back), &CheckConfig::default()).unwrap();
            assert!(v.equivalent, "{format:?}: {v:?}");
        }
        // One more than the value: a different condition, never equal.
        let mut bumped: Vec<u8> = value.bytes().collect();
        *bumped.last_mut().unwrap() += 1; // 2^k ends in 2, 4, 6 or 8: no carry
        let bumped = String::from_utf8(bumped).unwrap();
        let b = program(&circuit(bits, &bumped));
        let v = check(&a, &b, &CheckConfig::default()).unwrap();
        assert!(!v.equivalent, "{v:?}");
        // 2^bits does not fit the register: a located error that says so.
        let too_big = power_of_two(bits);
        let out = tutti::qasm::read_str("wide.qasm", &circuit(bits, &too_big));
        let errors: Vec<_> = out.errors().collect();
        assert_eq!(errors.len(), 1, "{}", out.render());
        assert_eq!(errors[0].code, "condition-out-of-range");
        assert!(
            errors[0].hint.contains(&format!("2^{bits}")),
            "{}",
            errors[0].hint
        );
    }
}

#[test]
fn a_json_value_too_wide_for_its_register_is_refused() {
    let text = circuit(70, &power_of_two(69));
    let c = tutti::qasm::read_str("wide.qasm", &text).circuit.unwrap();
    let seq = compile_baseline(&c, &Profile::demo(), Target::Collective).unwrap();
    let json = Format::Json.render(&seq);
    let widened = json.replace(
        &format!("\"{}\"", power_of_two(69)),
        &format!("\"{}\"", power_of_two(70)),
    );
    assert_ne!(widened, json);
    let out = read_json("x.json", &widened);
    assert!(out.sequence.is_none());
    assert!(out.render().contains("cannot hold"), "{}", out.render());
}
