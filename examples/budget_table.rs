//! Prints the README's table of budget figures for every circuit in circuits/ on the
//! embedded demo device (invented example numbers), both targets, baseline compiler.
//! Run with `cargo run --release --example budget_table`.

use tutti::compile::Target;
use tutti::driver::{compile, CompileConfig};
use tutti::native::profile::Profile;

fn main() {
    let profile = Profile::demo();
    let mut files: Vec<_> = std::fs::read_dir("circuits")
        .expect("run from the repository root")
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|e| e == "qasm"))
        .collect();
    files.sort();
    println!("| circuit | qubits | 2q gates | target | ms_pulses | ms_area | collective_pulses | light_shifts | duration_us | est_error |");
    println!("|---|---:|---:|---|---:|---:|---:|---:|---:|---:|");
    for path in files {
        let out = tutti::qasm::read_file(&path, &Default::default());
        let Some(circuit) = out.circuit else {
            eprintln!("{}", out.render());
            continue;
        };
        let s = circuit.summary();
        for target in [Target::Collective, Target::Addressed] {
            let cfg = CompileConfig {
                target,
                verify: false,
                ..CompileConfig::default()
            };
            match compile(&circuit, &profile, &cfg) {
                Ok(c) => {
                    let b = c.budget;
                    println!(
                        "| {} | {} | {} | {} | {} | {} | {} | {} | {:.0} | {:.3} |",
                        path.file_stem().unwrap().to_string_lossy(),
                        s.qubits,
                        s.two_qubit_ops + s.multi_qubit_ops,
                        target.name(),
                        b.ms_pulses,
                        tutti::report::fixed(b.ms_area, 2),
                        b.collective_pulses,
                        b.light_shifts,
                        b.duration_us,
                        b.est_error
                    );
                }
                Err(e) => eprintln!("{}: {e}", path.display()),
            }
        }
    }
}
