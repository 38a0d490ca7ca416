//! Parse + elaborate throughput on a generated file of 1M gates on 50 qubits.
//! Prints MB/s and operations/s; figures are reported, not asserted.
//! Run with `cargo bench --bench frontend`.

use logos::Logos;
use std::time::Instant;
use tutti::qasm::{elaborate, Limits, MemoryLoader};

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

/// Best time of `runs` reads with `limits`; the operation count and chunks used.
fn time_read(text: &str, limits: &Limits, runs: usize) -> (f64, usize, usize) {
    let mut best = f64::INFINITY;
    let (mut ops, mut chunks) = (0, 0);
    for _ in 0..runs {
        let t = Instant::now();
        let out = elaborate::read_with("generated.qasm", text, limits, &MemoryLoader::default());
        let dt = t.elapsed().as_secs_f64();
        chunks = out.chunks_ahead;
        ops = out.circuit.expect("generated file reads").instrs.len();
        best = best.min(dt);
    }
    (best, ops, chunks)
}

fn main() {
    let text = generate(1_000_000, 50);
    let mb = text.len() as f64 / 1e6;
    println!("frontend: {:.1} MB file", mb);
    // Reference in the same run: the logos lexer alone, one thread.
    let mut lex_best = f64::INFINITY;
    for _ in 0..5 {
        let t = Instant::now();
        let n = tutti::qasm::lexer::Token::lexer(&text).count();
        lex_best = lex_best.min(t.elapsed().as_secs_f64());
        assert!(n > 1_000_000);
    }
    println!(
        "frontend: lexer alone (reference), one thread: {:.1} MB/s",
        mb / lex_best
    );
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
    for (label, max_threads) in [("one thread", 1), ("all cores", 0)] {
        let limits = Limits {
            max_threads,
            ..Limits::default()
        };
        let (best, ops, chunks) = time_read(&text, &limits, 5);
        println!(
            "frontend: parse + elaborate, {label} ({} of {threads} threads, chunks read ahead: {chunks}): best of 5 = {:.3} s -> {:.1} MB/s, {:.2} M operations/s, {:.2} x lexer time",
            if max_threads == 0 { threads } else { 1 },
            best,
            mb / best,
            ops as f64 / best / 1e6,
            best / lex_best
        );
    }
}
