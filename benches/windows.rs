//! Window-by-window verification time for generated non-Clifford circuits on 20
//! qubits, 100k and 1M gates, compiled for the addressed target of the demo device;
//! and their ratio (linear cost gives about 10). Figures are printed, not asserted.
//! Run with `cargo bench --bench windows`.

mod common;

use common::{generated_circuit, Kind};
use std::time::Instant;
use tutti::compile::{compile_baseline_traced, Target};
use tutti::native::profile::Profile;
use tutti::sim::{check_windows, sync_points_from_origin, CheckConfig};

fn main() {
    let profile = Profile::demo();
    let mut times = Vec::new();
    for gates in [100_000usize, 1_000_000] {
        let circuit = generated_circuit(
            20,
            gates,
            0x2026,
            &[Kind::Rz, Kind::Ry, Kind::Cx, Kind::Cu1],
        );
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
