//! Compile throughput of the optimizer on generated circuits of 100k and 1M gates on
//! 50 qubits, for a 50-ion variant of the demo profile (invented example numbers):
//! operations per second, the time spent in the coupling program's solver (summed
//! over the threads that compile ranges in parallel),
//! the reading time apart, and the ratio of the two compile times (linear growth
//! gives about 10). Addressed target: its output grows like the circuit; on the
//! collective target every block on 50 ions is tens of pulses, so the 100k circuit
//! is also compiled there (the 1M one would pass the default step limit).
//! Each compile runs three times, and the first and the best are printed (the very
//! first compile of the process runs in a fresh heap, its pages faulted in as it
//! writes; the ratio uses the best). Figures are printed, not asserted. Run with `cargo
//! bench --bench compile`.

mod common;

use common::{generated_circuit, Kind};
use std::time::Instant;
use tutti::compile::optimize::{compile_optimized, OptConfig};
use tutti::compile::Target;
use tutti::native::profile::Profile;

/// How often each compile runs (the best and the first are printed).
const RUNS: usize = 3;

/// The gates of the generated circuits.
const KINDS: [Kind; 5] = [Kind::Rz, Kind::Ry, Kind::H, Kind::Cx, Kind::Cu1];

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
            let t = Instant::now();
            let circuit = generated_circuit(50, gates, 0x50, &KINDS);
            let read = t.elapsed().as_secs_f64();
            let cfg = OptConfig {
                target,
                max_steps: 200_000_000,
                ..OptConfig::default()
            };
            // The same compile three times: the first after whatever ran before
            // (for the first of the process, a fresh heap), the others as in a
            // batch of compiles.
            let mut runs = Vec::new();
            let mut last = None;
            for _ in 0..RUNS {
                let t = Instant::now();
                let o = compile_optimized(&circuit, &profile, &cfg).expect("compiles");
                runs.push(t.elapsed().as_secs_f64());
                last = Some(o);
            }
            let o = last.expect("at least one run");
            let best = runs.iter().copied().fold(f64::INFINITY, f64::min);
            let solver = o.solver_time.as_secs_f64();
            println!(
                "{:>10} target, 50 qubits, {gates:>9} gates: compile {} s (first, then again); best {best:.3} s = {:>10.0} ops/s, first {:>10.0} ops/s, on {} thread(s) (solver {solver:.2} s of time summed over threads, at most {:.0} s); {} steps, {} blocks; generating and reading {read:.2} s",
                target.name(),
                runs.iter().map(|r| format!("{r:.3}")).collect::<Vec<_>>().join(", "),
                gates as f64 / best,
                gates as f64 / runs[0],
                rayon::current_num_threads(),
                cfg.solver_time.as_secs_f64(),
                o.sequence.steps.len(),
                o.blocks.len()
            );
            if target == Target::Addressed {
                times.push(best);
            }
        }
    }
    println!(
        "ratio 1M / 100k (addressed, best runs): {:.2} (linear: 10)",
        times[1] / times[0]
    );
    // Reference in the same run: the 100k addressed compile building every
    // candidate of every block (no bounds), on one thread and on all.
    let circuit = generated_circuit(50, 100_000, 0x50, &KINDS);
    let run = |build_all: bool| {
        let cfg = OptConfig {
            target: Target::Addressed,
            max_steps: 200_000_000,
            build_all,
            ..OptConfig::default()
        };
        let t = Instant::now();
        compile_optimized(&circuit, &profile, &cfg).expect("compiles");
        t.elapsed().as_secs_f64()
    };
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("a pool");
    let (all_one, bounded_one) = one.install(|| (run(true), run(false)));
    println!(
        "addressed 100k, one thread: every candidate built {all_one:.2} s, bounded {bounded_one:.2} s (ratio {:.1}); bounded on {} threads {:.2} s (parallel ranges: ratio {:.1})",
        all_one / bounded_one,
        rayon::current_num_threads(),
        times[0],
        bounded_one / times[0]
    );
}
