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

fn timed<F: FnMut(&mut StateVector)>(s: &mut StateVector, mut f: F) -> f64 {
    let t = Instant::now();
    f(s);
    t.elapsed().as_secs_f64()
}

/// Times `kernel` against `reference` in pairs run back to back, so that both see the
/// same state of the shared machine. Returns the best times and the median of the
/// per-pair ratios kernel / reference.
fn paired<R, K>(
    reps: usize,
    s: &mut StateVector,
    mut reference: R,
    mut kernel: K,
) -> (f64, f64, f64)
where
    R: FnMut(&mut StateVector),
    K: FnMut(&mut StateVector),
{
    let (mut best_r, mut best_k) = (f64::INFINITY, f64::INFINITY);
    let mut ratios = Vec::with_capacity(reps);
    for _ in 0..reps {
        let r = timed(s, &mut reference);
        let k = timed(s, &mut kernel);
        best_r = best_r.min(r);
        best_k = best_k.min(k);
        ratios.push(k / r);
    }
    ratios.sort_by(f64::total_cmp);
    (best_r, best_k, ratios[reps / 2])
}

fn main() {
    let quick = std::env::args().any(|a| a == "--quick");
    let sizes: &[usize] = if quick { &[20] } else { &[24, 26] };
    for &n in sizes {
        let mut s = StateVector::zero(n);
        let mut dst = tutti::sim::state::zeroed_amps(1 << n);
        let gb = (2 * 16 * (1usize << n)) as f64 / 1e9;
        let m = rotation(0.3, 0.2);
        let mut worst_ratio: f64 = f64::INFINITY;
        let mut best_copy = f64::INFINITY;
        for q in [0, n / 2, n - 1] {
            let (copy, t, ratio) = paired(
                7,
                &mut s,
                |s| s.copy_into(&mut dst),
                |s| s.apply_mat2(q, &m),
            );
            best_copy = best_copy.min(copy);
            worst_ratio = worst_ratio.min(1.0 / ratio);
            println!(
                "sim: n={n} single-qubit kernel on qubit {q}: {:.2} GB/s, {:.2} x copy bandwidth (median of 7 pairs)",
                gb / t,
                1.0 / ratio
            );
        }
        let all: Vec<usize> = (0..n).collect();
        let k = Kernel::Collective { m, qubits: all };
        let (copy, t, passes) = paired(
            5,
            &mut s,
            |s| s.copy_into(&mut dst),
            |s| apply_kernel(s, &k),
        );
        best_copy = best_copy.min(copy);
        println!(
            "sim: n={n} collective rotation on all {n} qubits: {:.1} ms = {:.2} copy passes, median of 5 pairs (goal at most n/4 + 2 = {:.1}); best copy {:.1} ms",
            t * 1e3,
            passes,
            n as f64 / 4.0 + 2.0,
            copy * 1e3
        );
        println!("sim: n={n} plain copy {:.2} GB/s; worst single-qubit ratio {worst_ratio:.2} (goal at least 0.6)", gb / best_copy);
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
