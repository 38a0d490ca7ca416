//! Issue 9's large case, reproducibly: a generated 113k-gate circuit on 21 qubits
//! (rz, ry, h, cx, cu1; the stand-in for an outside circuit of that size, which is
//! not vendored) compiled by the optimizer for the demo device's collective target
//! and verified window by window, as `tutti compile` does. Prints the wall time of
//! compile plus verification, the output's size and the process's peak resident
//! memory (VmHWM). Figures are printed, not asserted. Run with
//! `cargo bench --bench stand_in`.

mod common;

use common::{generated_circuit, Kind};
use std::time::Instant;
use tutti::driver::{compile_with, CompileConfig, Stage};
use tutti::native::profile::Profile;

fn peak_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn main() {
    // TUTTI_STAND_IN_GATES: a smaller case of the same kind, for profiling.
    let gates = std::env::var("TUTTI_STAND_IN_GATES")
        .ok()
        .and_then(|g| g.parse().ok())
        .unwrap_or(113_000);
    let circuit = generated_circuit(
        21,
        gates,
        0x113,
        &[Kind::Rz, Kind::Ry, Kind::H, Kind::Cx, Kind::Cu1],
    );
    let cfg = CompileConfig {
        max_steps: 200_000_000,
        ..CompileConfig::default()
    };
    let t = Instant::now();
    let mut stages: Vec<(Stage, Instant)> = Vec::new();
    let out = compile_with(&circuit, &Profile::demo(), &cfg, &mut |s| {
        stages.push((s, Instant::now()))
    })
    .expect("compiles and verifies");
    let end = Instant::now();
    let secs = (end - t).as_secs_f64();
    let ends = stages.iter().skip(1).map(|s| s.1).chain([end]);
    let spent: Vec<String> = stages
        .iter()
        .zip(ends)
        .map(|((s, from), to)| format!("{} {:.1} s", s.describe(), (to - *from).as_secs_f64()))
        .collect();
    println!(
        "{gates} gates on 21 qubits, demo device, collective target: compile and verify {secs:.1} s; {} steps ({} MS pulses, {} light shifts); peak memory {} MiB (goal: 10 s, 1024 MiB)",
        out.sequence.steps.len(),
        out.budget.ms_pulses,
        out.budget.light_shifts,
        peak_kib().map_or("unknown".into(), |k| (k / 1024).to_string())
    );
    println!("  by stage: {}", spent.join("; "));
    if let Some(v) = &out.verification {
        println!("  {}", v.describe());
    }
}
