//! Generated circuits shared by the benchmarks.

use std::fmt::Write;

/// One gate kind of a generated circuit (each bench uses some of them).
#[derive(Clone, Copy)]
#[allow(dead_code)]
pub enum Kind {
    Rz,
    Ry,
    H,
    Cx,
    Cu1,
}

/// A circuit of `gates` gates on `n` qubits, each of a kind from `kinds` (picked in
/// turn by a fixed linear congruential sequence seeded with `seed`), rotations by
/// irrational angles, two-qubit gates on random distinct qubits.
pub fn generated(n: usize, gates: usize, seed: u64, kinds: &[Kind]) -> String {
    let mut text = format!("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[{n}];\n");
    let mut x = seed;
    for g in 0..gates {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let a = (x >> 33) as usize % n;
        let b = (a + 1 + (x >> 13) as usize % (n - 1)) % n;
        let angle = 0.1 + (g % 97) as f64 * 0.0137;
        let _ = match kinds[(x >> 60) as usize % kinds.len()] {
            Kind::Rz => writeln!(text, "rz({angle}) q[{a}];"),
            Kind::Ry => writeln!(text, "ry({angle}) q[{a}];"),
            Kind::H => writeln!(text, "h q[{a}];"),
            Kind::Cx => writeln!(text, "cx q[{a}],q[{b}];"),
            Kind::Cu1 => writeln!(text, "cu1({angle}) q[{a}],q[{b}];"),
        };
    }
    text
}

/// [`generated`] read as a circuit.
pub fn generated_circuit(
    n: usize,
    gates: usize,
    seed: u64,
    kinds: &[Kind],
) -> tutti::circuit::Circuit {
    tutti::qasm::read_str("generated.qasm", &generated(n, gates, seed, kinds))
        .circuit
        .expect("the generated circuit reads")
}
