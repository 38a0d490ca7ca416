//! Parse + elaborate throughput on a generated file of 1M gates on 50 qubits.
//! Prints MB/s and operations/s; figures are reported, not asserted.
//! Run with `cargo bench --bench frontend`.

use std::time::Instant;

fn generate(n_gates: usize, n_qubits: usize) -> String {
    let mut s = String::with_capacity(n_gates * 24);
    s.push_str("OPENQASM 2.0;\ninclude \"qelib1.inc\";\n");
    s.push_str(&format!("qreg q[{n_qubits}];\ncreg c[{n_qubits}];\n"));
    let mut x: u64 = 0x9E3779B97F4A7C15;
    for i in 0..n_gates {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        let a = (x % n_qubits as u64) as usize;
        let b = (a + 1 + (x >> 20) as usize % (n_qubits - 1)) % n_qubits;
        match i % 5 {
            0 => s.push_str(&format!("h q[{a}];\n")),
            1 => s.push_str(&format!("cx q[{a}],q[{b}];\n")),
            2 => s.push_str(&format!(
                "rz({:.6}) q[{a}];\n",
                (x >> 11) as f64 / (1u64 << 53) as f64 * std::f64::consts::TAU
            )),
            3 => s.push_str(&format!("u3(pi/2,-pi/4,{}*pi/8) q[{a}];\n", x % 8)),
            _ => s.push_str(&format!("cu1(pi/{}) q[{a}],q[{b}];\n", 1 + x % 16)),
        }
    }
    s
}

fn main() {
    let text = generate(1_000_000, 50);
    let mb = text.len() as f64 / 1e6;
    let mut best = f64::INFINITY;
    let mut ops = 0;
    for _ in 0..5 {
        let t = Instant::now();
        let out = tutti::qasm::read_str("generated.qasm", &text);
        let dt = t.elapsed().as_secs_f64();
        ops = out.circuit.expect("generated file reads").instrs.len();
        best = best.min(dt);
    }
    println!("frontend: {:.1} MB file, {ops} operations", mb);
    println!(
        "frontend: best of 5 = {:.3} s -> {:.1} MB/s, {:.2} M operations/s",
        best,
        mb / best,
        ops as f64 / best / 1e6
    );
}
