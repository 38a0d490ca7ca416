//! Statevector kernel bandwidth against a plain copy of the same state, measured in
//! the same run, at 24 and 26 qubits; and the time of a 200-qubit tableau check.
//! Figures are printed, not asserted. Run with `cargo bench --bench sim`.

use std::time::Instant;
use tutti::sim::apply::apply_kernel;
use tutti::sim::program::rotation;
use tutti::sim::{check, CheckConfig, Kernel, Program, StateVector};

fn best_of<F: FnMut()>(reps: usize, mut f: F) -> f64 {
    let mut best = f64::INFINITY;
    for _ in 0..reps {
        let t = Instant::now();
        f();
        best = best.min(t.elapsed().as_secs_f64());
    }
    best
}

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let sizes: &[usize] = if quick { &[20] } else { &[24, 26] };
    for &n in sizes {
        let mut s = StateVector::zero(n);
        let mut dst = tutti::sim::state::zeroed_amps(1 << n);
        let gb = (2 * 16 * (1usize << n)) as f64 / 1e9;
        let copy = best_of(5, || s.copy_into(&mut dst));
        let m = rotation(0.3, 0.2);
        let mut worst_ratio: f64 = f64::INFINITY;
        for q in [0, n / 2, n - 1] {
            let t = best_of(5, || s.apply_mat2(q, &m));
            worst_ratio = worst_ratio.min(copy / t);
            println!(
                "sim: n={n} single-qubit kernel on qubit {q}: {:.2} GB/s, {:.2} x copy bandwidth",
                gb / t,
                copy / t
            );
        }
        let all: Vec<usize> = (0..n).collect();
        let k = Kernel::Collective { m, qubits: all };
        let t = best_of(3, || apply_kernel(&mut s, &k));
        println!(
            "sim: n={n} collective rotation on all {n} qubits: {:.1} ms = {:.2} copy passes (goal at most n/4 + 2 = {:.1}); copy {:.1} ms",
            t * 1e3,
            t / copy,
            n as f64 / 4.0 + 2.0,
            copy * 1e3
        );
        println!("sim: n={n} plain copy {:.2} GB/s; worst single-qubit ratio {worst_ratio:.2} (goal at least 0.6)", gb / copy);
    }
    let n = 200;
    let mut text = format!("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[{n}];\nh q[0];\n");
    for i in 0..n - 1 {
        text.push_str(&format!("cx q[{i}],q[{}];\n", i + 1));
    }
    let c = tutti::qasm::read_str("ghz.qasm", &text).circuit.unwrap();
    let p = Program::from_circuit(&c).unwrap();
    let t = best_of(5, || {
        let v = check(&p, &p, &CheckConfig::default()).unwrap();
        assert!(v.equivalent);
    });
    println!("sim: 200-qubit GHZ tableau check {:.3} ms", t * 1e3);
}
