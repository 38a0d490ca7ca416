//! Window-by-window verification time for generated non-Clifford circuits on 20
//! qubits, 100k and 1M gates, compiled for the addressed target of the demo device;
//! and their ratio (linear cost gives about 10). Figures are printed, not asserted.
//! Run with `cargo bench --bench windows`.

use std::fmt::Write;
use std::time::Instant;
use tutti::compile::{compile_baseline_traced, Target};
use tutti::native::profile::Profile;
use tutti::sim::{check_windows, sync_points_from_origin, CheckConfig};

/// A layered circuit of `gates` gates on `n` qubits: rotations by irrational
/// angles, CNOTs and controlled phases, from a fixed linear congruential sequence.
fn generated(n: usize, gates: usize) -> String {
    let mut text = format!("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[{n}];\n");
    let mut x: u64 = 0x2026;
    for g in 0..gates {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let a = (x >> 33) as usize % n;
        let b = (a + 1 + (x >> 13) as usize % (n - 1)) % n;
        let angle = 0.1 + (g % 97) as f64 * 0.0137;
        let _ = match (x >> 60) % 4 {
            0 => writeln!(text, "rz({angle}) q[{a}];"),
            1 => writeln!(text, "ry({angle}) q[{a}];"),
            2 => writeln!(text, "cx q[{a}],q[{b}];"),
            _ => writeln!(text, "cu1({angle}) q[{a}],q[{b}];"),
        };
    }
    text
}

fn main() {
    let profile = Profile::demo();
    let mut times = Vec::new();
    for gates in [100_000usize, 1_000_000] {
        let out = tutti::qasm::read_str("generated.qasm", &generated(20, gates));
        let circuit = out.circuit.expect("the generated circuit reads");
        let (seq, origin) =
            compile_baseline_traced(&circuit, &profile, Target::Addressed).expect("compiles");
        let sync = sync_points_from_origin(&origin, circuit.instrs.len()).expect("trace");
        let t = Instant::now();
        let v = check_windows(&circuit, &seq, &sync, &CheckConfig::default()).expect("checks");
        let secs = t.elapsed().as_secs_f64();
        assert!(v.equivalent, "{v:?}");
        println!(
            "windowed verification, 20 qubits, {gates:>9} gates, {:>9} steps: {secs:8.2} s ({} windows, worst distance {:.1e} within {:.1e})",
            seq.steps.len(),
            v.windows,
            v.distance.unwrap_or(f64::NAN),
            v.tolerance
        );
        times.push(secs);
    }
    println!("ratio 1M / 100k: {:.2} (linear: 10)", times[1] / times[0]);
}
