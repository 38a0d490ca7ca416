//! Prints the README's comparison of the baseline and the optimizer for every circuit
//! in circuits/ on the embedded demo device (invented example numbers), both
//! targets: `ms_pulses`, `ms_area`, `light_shifts`, `duration_us`, `est_error`, with
//! geometric-mean ratios (optimized / baseline) per target.
//! Run with `cargo run --release --example budget_table [-- --objective NAME]`.

use tutti::compile::optimize::Objective;
use tutti::compile::Target;
use tutti::driver::{compile, CompileConfig};
use tutti::native::profile::Profile;
use tutti::report::budget::Budget;

fn figures(b: &Budget) -> [f64; 5] {
    [
        b.ms_pulses as f64,
        b.ms_area,
        b.light_shifts as f64,
        b.duration_us,
        b.est_error,
    ]
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let objective = match args.iter().position(|a| a == "--objective") {
        Some(i) => {
            let name = args.get(i + 1).map(String::as_str).unwrap_or("");
            *Objective::ALL
                .iter()
                .find(|o| o.name() == name)
                .unwrap_or_else(|| panic!("--objective takes pulses, area, duration or error"))
        }
        None => Objective::default(),
    };
    let profile = Profile::demo();
    let mut files: Vec<_> = std::fs::read_dir("circuits")
        .expect("run from the repository root")
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|e| e == "qasm"))
        .collect();
    files.sort();
    println!(
        "Objective `{}`. Each cell: baseline → optimized.\n",
        objective.name()
    );
    println!("| circuit | qubits | target | ms_pulses | ms_area | light_shifts | duration_us | est_error |");
    println!("|---|---:|---|---:|---:|---:|---:|---:|");
    let names = [
        "ms_pulses",
        "ms_area",
        "light_shifts",
        "duration_us",
        "est_error",
    ];
    for target in [Target::Collective, Target::Addressed] {
        let mut log_ratio = [0.0f64; 5];
        let mut counted = [0usize; 5];
        let mut worse = [0usize; 5];
        for path in &files {
            let out = tutti::qasm::read_file(path, &Default::default());
            let Some(circuit) = out.circuit else {
                eprintln!("{}", out.render());
                continue;
            };
            let run = |baseline: bool| {
                let cfg = CompileConfig {
                    target,
                    baseline,
                    objective,
                    verify: false,
                    ..CompileConfig::default()
                };
                compile(&circuit, &profile, &cfg).map(|c| c.budget)
            };
            let (Ok(base), Ok(opt)) = (run(true), run(false)) else {
                eprintln!("{}: does not compile", path.display());
                continue;
            };
            let (fb, fo) = (figures(&base), figures(&opt));
            for k in 0..5 {
                if fb[k] > 0.0 && fo[k] > 0.0 {
                    log_ratio[k] += (fo[k] / fb[k]).ln();
                    counted[k] += 1;
                }
                if fo[k] > fb[k] * (1.0 + 1e-9) {
                    worse[k] += 1;
                }
            }
            println!(
                "| {} | {} | {} | {} → {} | {} → {} | {} → {} | {:.0} → {:.0} | {:.3} → {:.3} |",
                path.file_stem().unwrap().to_string_lossy(),
                circuit.n_qubits(),
                target.name(),
                base.ms_pulses,
                opt.ms_pulses,
                tutti::report::fixed(base.ms_area, 2),
                tutti::report::fixed(opt.ms_area, 2),
                base.light_shifts,
                opt.light_shifts,
                base.duration_us,
                opt.duration_us,
                base.est_error,
                opt.est_error
            );
        }
        let geo: Vec<String> = (0..5)
            .map(|k| {
                if counted[k] == 0 {
                    "-".into()
                } else {
                    format!("{:.3}", (log_ratio[k] / counted[k] as f64).exp())
                }
            })
            .collect();
        println!(
            "| **geometric mean, optimized / baseline** | | {} | {} | {} | {} | {} | {} |",
            target.name(),
            geo[0],
            geo[1],
            geo[2],
            geo[3],
            geo[4]
        );
        let w: Vec<String> = (0..5)
            .map(|k| format!("{} {}", names[k], worse[k]))
            .collect();
        eprintln!(
            "{}: circuits worse than baseline: {}",
            target.name(),
            w.join(", ")
        );
    }
}
