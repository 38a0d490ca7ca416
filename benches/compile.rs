//! Compile throughput of the optimizer on generated circuits of 100k and 1M gates on
//! 50 qubits, for a 50-ion variant of the demo profile (invented example numbers):
//! operations per second, the time spent in the coupling program's solver apart,
//! the reading time apart, and the ratio of the two compile times (linear growth
//! gives about 10). Addressed target: its output grows like the circuit; on the
//! collective target every block on 50 ions is tens of pulses, so the 100k circuit
//! is also compiled there (the 1M one would pass the default step limit).
//! Figures are printed, not asserted. Run with `cargo bench --bench compile`.

use std::fmt::Write;
use std::time::Instant;
use tutti::compile::optimize::{compile_optimized, OptConfig};
use tutti::compile::Target;
use tutti::native::profile::Profile;

/// A circuit of `gates` gates on `n` qubits: rotations, Hadamards, CNOTs and
/// controlled phases, from a fixed linear congruential sequence.
fn generated(n: usize, gates: usize) -> String {
    let mut text = format!("OPENQASM 2.0;\ninclude \"qelib1.inc\";\nqreg q[{n}];\n");
    let mut x: u64 = 0x50;
    for g in 0..gates {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let a = (x >> 33) as usize % n;
        let b = (a + 1 + (x >> 13) as usize % (n - 1)) % n;
        let angle = 0.1 + (g % 97) as f64 * 0.0137;
        let _ = match (x >> 60) % 5 {
            0 => writeln!(text, "rz({angle}) q[{a}];"),
            1 => writeln!(text, "ry({angle}) q[{a}];"),
            2 => writeln!(text, "h q[{a}];"),
            3 => writeln!(text, "cx q[{a}],q[{b}];"),
            _ => writeln!(text, "cu1({angle}) q[{a}],q[{b}];"),
        };
    }
    text
}

fn main() {
    let mut profile = Profile::demo();
    profile.device.ions = 50;
    profile.device.name = "demo profile with 50 ions (invented example numbers)".into();
    let mut times = Vec::new();
    for (target, sizes) in [
        (Target::Addressed, &[100_000usize, 1_000_000][..]),
        (Target::Collective, &[100_000usize][..]),
    ] {
        for &gates in sizes {
            let text = generated(50, gates);
            let t = Instant::now();
            let circuit = tutti::qasm::read_str("generated.qasm", &text)
                .circuit
                .expect("the generated circuit reads");
            let read = t.elapsed().as_secs_f64();
            let cfg = OptConfig {
                target,
                max_steps: 200_000_000,
                ..OptConfig::default()
            };
            let t = Instant::now();
            let o = compile_optimized(&circuit, &profile, &cfg).expect("compiles");
            let secs = t.elapsed().as_secs_f64();
            let solver = o.solver_time.as_secs_f64();
            println!(
                "{:>10} target, 50 qubits, {gates:>9} gates: compile {secs:7.2} s = {:>10.0} ops/s ({:>10.0} ops/s without the solver's {solver:.2} s); {} steps, {} blocks; reading {read:.2} s",
                target.name(),
                gates as f64 / secs,
                gates as f64 / (secs - solver).max(1e-9),
                o.sequence.steps.len(),
                o.blocks.len()
            );
            if target == Target::Addressed {
                times.push(secs);
            }
        }
    }
    println!(
        "ratio 1M / 100k (addressed): {:.2} (linear: 10)",
        times[1] / times[0]
    );
}
