//! Compile throughput of the optimizer on generated circuits of 100k and 1M gates on
//! 50 qubits, for a 50-ion variant of the demo profile (invented example numbers):
//! operations per second, the time spent in the coupling program's solver apart,
//! the reading time apart, and the ratio of the two compile times (linear growth
//! gives about 10). Addressed target: its output grows like the circuit; on the
//! collective target every block on 50 ions is tens of pulses, so the 100k circuit
//! is also compiled there (the 1M one would pass the default step limit).
//! Figures are printed, not asserted. Run with `cargo bench --bench compile`.

mod common;

use common::{generated, Kind};
use std::time::Instant;
use tutti::compile::optimize::{compile_optimized, OptConfig};
use tutti::compile::Target;
use tutti::native::profile::Profile;

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
            let text = generated(
                50,
                gates,
                0x50,
                &[Kind::Rz, Kind::Ry, Kind::H, Kind::Cx, Kind::Cu1],
            );
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
