//! The `tutti` command line: parses arguments, calls the library, prints, and exits
//! with 0 on success, 1 when a check finds programs not equivalent (or some files
//! failed), 2 on usage or input errors.

use clap::Parser;
use std::path::Path;
use std::process::ExitCode;
use tutti::compile::Target;
use tutti::driver::{self, CompileConfig, Format};
use tutti::qasm::Limits;
use tutti::sim::CheckConfig;

#[path = "cli/args.rs"]
mod args;
#[path = "cli/progress.rs"]
mod progress;

use args::*;
use progress::{BatchProgress, Progress};

fn main() -> ExitCode {
    tutti::memory::fit_allocator_to_limit();
    let cli = Cli::parse();
    let json = matches!(
        cli.command,
        Command::Inspect { json: true, .. }
            | Command::Budget { json: true, .. }
            | Command::Check { json: true, .. }
    );
    match run(cli) {
        Ok(code) => code,
        Err(failure) if json => {
            // With --json, errors are JSON on standard output too.
            println!("{}", failure.to_json());
            ExitCode::from(failure.code)
        }
        Err(Failure { message, code, .. }) => {
            eprint!("{message}");
            if !message.ends_with('\n') {
                eprintln!();
            }
            ExitCode::from(code)
        }
    }
}

/// A rendered error, the same as data where it has a place, and the exit code it
/// calls for.
struct Failure {
    message: String,
    code: u8,
    errors: Vec<driver::ErrorRecord>,
}

impl Failure {
    /// `{"error": true, "exit_code": .., "errors": [{code, message, file, line,
    /// column, hint}, ..]}`.
    fn to_json(&self) -> String {
        let errors = if self.errors.is_empty() {
            let message = self.message.trim_end();
            let message = message.strip_prefix("error: ").unwrap_or(message);
            vec![driver::ErrorRecord::plain("error", message)]
        } else {
            self.errors.clone()
        };
        let value = serde_json::json!({
            "error": true,
            "exit_code": self.code,
            "errors": errors,
        });
        serde_json::to_string_pretty(&value).unwrap_or_else(|_| "{\"error\": true}".into())
    }
}

impl From<String> for Failure {
    /// Plain errors are usage or input errors: exit code 2.
    fn from(message: String) -> Failure {
        Failure {
            message,
            code: 2,
            errors: Vec::new(),
        }
    }
}

impl From<driver::LoadFailure> for Failure {
    fn from(f: driver::LoadFailure) -> Failure {
        Failure {
            message: f.rendered,
            code: 2,
            errors: f.errors,
        }
    }
}

fn run(cli: Cli) -> Result<ExitCode, Failure> {
    match cli.command {
        Command::Inspect { file, json, limits } => {
            let (loaded, warnings) = driver::load(&file, &limits.limits())?;
            eprint!("{warnings}");
            let name = file.display().to_string();
            let (text, value) = match loaded {
                driver::Loaded::Circuit(c) => {
                    let summary = c.summary();
                    let text = tutti::report::inspect_table(&name, &summary);
                    (text, serde_json::to_value(&summary))
                }
                driver::Loaded::Sequence(seq) => {
                    let summary = seq.summary();
                    let text = tutti::report::sequence_table(&name, &summary);
                    (text, serde_json::to_value(&summary))
                }
            };
            if json {
                let value = value.map_err(|e| e.to_string())?;
                println!(
                    "{}",
                    serde_json::to_string_pretty(&value).map_err(|e| e.to_string())?
                );
            } else {
                print!("{text}");
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Compile {
            file,
            output,
            device,
            target,
            format,
            baseline,
            objective,
            no_verify,
            compensate_crosstalk,
            trace_every,
            drop_final_z,
            force,
            max_pulses,
            ions,
            limits,
        } => {
            let target: Target = target.into();
            let limits = limits.limits();
            let cfg = CompileConfig {
                target,
                baseline,
                objective: objective.into(),
                verify: !no_verify,
                max_steps: max_pulses,
                compensate_crosstalk,
                trace_every: trace_every.map(|n| n as usize),
                drop_final_z,
                ..CompileConfig::default()
            };
            let (_, mut compiled) = compile_one(&file, &device, ions, &cfg, &limits)?;
            let format = driver::Format::for_output(format.map(Format::from), output.as_deref())?;
            compiled.sequence.provenance = Some(driver::provenance(
                &file,
                &device,
                target,
                &driver::compiler_name(&cfg),
                compiled.verification.as_ref(),
            ));
            let stdout = std::path::PathBuf::from("-");
            let path = output.as_deref().unwrap_or(&stdout);
            driver::write_output_with(path, &file, force, &mut |w| {
                format.render_to(&compiled.sequence, w)
            })?;
            let compiler = driver::compiler_name(&cfg);
            eprintln!(
                "compiled {} for {device} ({} target, {compiler})",
                file.display(),
                target.name()
            );
            match &compiled.verification {
                Some(v) => eprintln!("verified: {}", v.describe()),
                None => eprintln!("not verified (--no-verify)"),
            }
            eprint!("{}", tutti::report::budget_table(&compiled.budget));
            if let Some(line) = tutti::report::blocks_line(&compiled.blocks) {
                eprintln!("{line}");
            }
            if let Some(c) = compiled.crosstalk {
                eprintln!(
                    "crosstalk compensated: error {:.2e} without compensation, {:.2e} with it (verified as the sequence runs under the profile's crosstalk)",
                    c.uncompensated, c.compensated
                );
            }
            if let Some(path) = &output {
                eprintln!("wrote {}", path.display());
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Budget {
            file,
            device,
            target,
            baseline,
            objective,
            json,
            max_pulses,
            ions,
            limits,
        } => {
            let target: Target = target.into();
            let limits = limits.limits();
            let (budget, how) = match driver::load(&file, &limits)? {
                (driver::Loaded::Sequence(seq), warnings) => {
                    eprint!("{warnings}");
                    let profile = driver::loaded_ions(driver::load_profile(&device)?, ions)?;
                    if ions.is_some_and(|n| n != seq.n_ions) {
                        return Err(format!(
                            "error: {} is a sequence for {} ions; --ions must match it or be left out\n",
                            file.display(),
                            seq.n_ions
                        )
                        .into());
                    }
                    let budget = driver::budget_sequence(&seq, &profile)?;
                    (budget, "the sequence as written".to_string())
                }
                (driver::Loaded::Circuit(_), _) => {
                    let cfg = CompileConfig {
                        target,
                        baseline,
                        objective: objective.into(),
                        verify: false,
                        max_steps: max_pulses,
                        ..CompileConfig::default()
                    };
                    let (_, compiled) = compile_one(&file, &device, ions, &cfg, &limits)?;
                    let how = format!("{} target, {}", target.name(), driver::compiler_name(&cfg));
                    (compiled.budget, how)
                }
            };
            if json {
                println!(
                    "{}",
                    serde_json::to_string_pretty(&budget).map_err(|e| e.to_string())?
                );
            } else {
                println!("{} on {device} ({how})", file.display());
                print!("{}", tutti::report::budget_table(&budget));
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Batch {
            paths,
            out,
            devices,
            targets,
            compilers,
            objectives,
            jobs,
            no_verify,
            part,
            format,
            chart,
            memory,
            max_pulses,
            limits,
        } => {
            use tutti::batch::{self, BatchConfig, Compiler, Figure, Setting};
            let jobs = jobs
                .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
                .max(1);
            // One pool for the parallel kernels of every job.
            let _ = rayon::ThreadPoolBuilder::new()
                .num_threads(jobs)
                .build_global();
            let part = part
                .map(|s| batch::Part::parse(&s))
                .transpose()
                .map_err(|e| format!("error: --part: {e}\n"))?;
            let chart = Figure::from_name(&chart).ok_or_else(|| {
                let names: Vec<&str> = Figure::ALL.iter().map(|f| f.name()).collect();
                format!(
                    "error: --chart {chart}: not a figure; one of {}\n",
                    names.join(", ")
                )
            })?;
            let mut compiler_list = Vec::new();
            for c in &compilers {
                match c {
                    CompilerArg::Baseline => compiler_list.push(Compiler::Baseline),
                    CompilerArg::Optimizer => compiler_list
                        .extend(objectives.iter().map(|&o| Compiler::Optimizer(o.into()))),
                }
            }
            compiler_list.dedup();
            let targets: Vec<Target> = targets.into_iter().map(Target::from).collect();
            let cfg = BatchConfig {
                inputs: paths,
                out,
                settings: Setting::sweep(&devices, &targets, &compiler_list),
                jobs,
                verify: !no_verify,
                part,
                limits: limits.limits(),
                max_steps: max_pulses,
                memory: memory
                    .map_or_else(tutti::memory::default_budget, |m| m.saturating_mul(1 << 20)),
                memory_given: memory.is_some(),
                format: format.into(),
                chart,
                tool: batch::tool_identity(),
            };
            let progress = BatchProgress::new();
            let outcome = batch::run(&cfg, &|e| progress.event(e));
            progress.finish();
            let outcome = outcome.map_err(|e| format!("error: {e}\n"))?;
            report_batch(&outcome, &cfg.out)
        }
        Command::Draw {
            file,
            output,
            device,
            from,
            to,
            width,
            force,
            limits,
        } => {
            let seq = match driver::load(&file, &limits.limits())? {
                (driver::Loaded::Sequence(seq), warnings) => {
                    eprint!("{warnings}");
                    seq
                }
                (driver::Loaded::Circuit(_), _) => {
                    return Err(format!(
                        "error: {} is a circuit; draw takes a pulse sequence (compile the circuit first)\n",
                        file.display()
                    )
                    .into())
                }
            };
            let profile = driver::load_profile(&device)?;
            driver::fits_device(&seq, &profile)?;
            let opts = tutti::report::draw::DrawOptions {
                from_us: from,
                to_us: to,
                width,
                ..Default::default()
            };
            let svg = tutti::report::draw::timeline_svg(&seq, &profile, &opts)
                .map_err(|e| format!("error: {e}\n"))?;
            match &output {
                Some(path) => {
                    driver::write_output(path, &svg, &file, force)?;
                    eprintln!("wrote {}", path.display());
                }
                None => print!("{svg}"),
            }
            Ok(ExitCode::SUCCESS)
        }
        Command::Merge { dirs, out } => {
            let outcome = tutti::batch::merge(&dirs, &out).map_err(|e| format!("error: {e}\n"))?;
            eprintln!("merged {} folder(s) into {}", dirs.len(), out.display());
            report_batch(&outcome, &out)
        }
        Command::Check {
            a,
            b,
            mode,
            trials,
            seed,
            tolerance,
            memory,
            up_to_final_diagonal,
            crosstalk,
            locate,
            json,
            limits,
        } => {
            let crosstalk = crosstalk.map(|d| driver::load_profile(&d)).transpose()?;
            let defaults = CheckConfig::default();
            let memory_budget =
                memory.map_or(defaults.memory_budget, |m| m.saturating_mul(1 << 20));
            let cfg = CheckConfig {
                mode: mode.into(),
                trials,
                seed,
                tolerance,
                memory_budget,
                up_to_final_diagonal,
                ..defaults
            };
            if locate {
                let found = driver::locate(&a, &b, &limits.limits(), &cfg)?;
                if json {
                    let value = driver::located_json(&found, &a, &b);
                    println!(
                        "{}",
                        serde_json::to_string_pretty(&value).map_err(|e| e.to_string())?
                    );
                } else {
                    print!("{}", driver::located_text(&found, &a, &b));
                }
                return Ok(ExitCode::from(found.exit_code()));
            }
            let limits = limits.limits();
            let progress = Progress::start(&a);
            progress.stage("reading both sides");
            let load = |p: &Path| {
                driver::load_program_under(p, &limits, memory_budget, crosstalk.as_ref())
            };
            let loaded = load(&a).and_then(|pa| Ok((pa, load(&b)?)));
            let ((pa, wa), (pb, wb)) = loaded.map_err(|e| progress.cleared(e))?;
            progress.0.suspend(|| eprint!("{wa}{wb}"));
            progress.stage("comparing");
            let counter = tutti::sim::WorkCounter::default();
            let finished = std::sync::atomic::AtomicBool::new(false);
            let verdict = std::thread::scope(|scope| {
                scope.spawn(|| progress.follow(&counter, &finished, "operations"));
                let verdict = tutti::sim::check_counted(&pa, &pb, &cfg, &counter);
                finished.store(true, std::sync::atomic::Ordering::Relaxed);
                verdict
            });
            progress.clear();
            // Refused as too large or too slow: a sequence that carries the trace of
            // this circuit may still be proven equal window by window.
            if let Err(e) = &verdict {
                if e.beyond_budget() && crosstalk.is_none() && !up_to_final_diagonal {
                    if let Some(w) = driver::equal_by_trace(&a, &b, &limits, &cfg) {
                        if json {
                            println!(
                                "{}",
                                serde_json::to_string_pretty(&w).map_err(|e| e.to_string())?
                            );
                        } else {
                            print!("{}", tutti::report::window_verdict_text(&w, &e.to_string()));
                        }
                        return Ok(ExitCode::SUCCESS);
                    }
                }
            }
            let verdict = verdict.map_err(|e| format!("error: {e}"))?;
            if !verdict.equivalent && crosstalk.is_none() {
                if let Some(note) = driver::final_diagonal_note(&pa, &pb, &cfg) {
                    eprintln!("note: {note}");
                }
            }
            if json {
                println!(
                    "{}",
                    serde_json::to_string_pretty(&verdict).map_err(|e| e.to_string())?
                );
            } else {
                print!("{}", tutti::report::verdict_text(&verdict));
            }
            Ok(if verdict.equivalent {
                ExitCode::SUCCESS
            } else {
                ExitCode::from(1)
            })
        }
    }
}

/// Prints a batch outcome: notes, the failures with their diagnostics, the table,
/// the files written; exit 0 when every job succeeded, else 1.
fn report_batch(outcome: &tutti::batch::BatchOutcome, out: &Path) -> Result<ExitCode, Failure> {
    for n in &outcome.notes {
        eprintln!("note: {n}");
    }
    let manifest_text =
        std::fs::read_to_string(out.join("batch.json")).map_err(|e| e.to_string())?;
    let manifest: tutti::batch::Manifest =
        serde_json::from_str(&manifest_text).map_err(|e| e.to_string())?;
    print!(
        "{}",
        tutti::batch::summary::terminal(&manifest, &outcome.rows)
    );
    let failed: Vec<_> = outcome
        .rows
        .iter()
        .filter(|r| r.status == tutti::batch::Status::Failed)
        .collect();
    if !failed.is_empty() {
        eprintln!("\n{} job(s) failed:", failed.len());
        for r in &failed {
            eprintln!(
                "  {} ({}): {}",
                r.path,
                r.setting,
                r.error.as_deref().unwrap_or("")
            );
        }
    }
    eprintln!(
        "\n{} job(s): {} run, {} skipped (finished before, inputs and options unchanged), {} failed",
        outcome.rows.len(),
        outcome.rows.len() - outcome.skipped,
        outcome.skipped,
        failed.len()
    );
    for p in &outcome.written {
        eprintln!("wrote {}", p.display());
    }
    Ok(if outcome.all_ok() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

fn compile_one(
    file: &Path,
    device: &str,
    ions: Option<u32>,
    cfg: &CompileConfig,
    limits: &Limits,
) -> Result<(tutti::circuit::Circuit, driver::Compiled), Failure> {
    let progress = Progress::start(file);
    progress.stage("reading");
    let circuit = match driver::load(file, limits).map_err(|e| progress.cleared(e))? {
        (driver::Loaded::Circuit(c), warnings) => {
            progress.0.suspend(|| eprint!("{warnings}"));
            c
        }
        (driver::Loaded::Sequence(_), _) => {
            progress.clear();
            return Err(format!(
                "error: {} is a pulse sequence already; compile takes an OpenQASM 2 circuit (budget, inspect and check take sequences too)\n",
                file.display()
            )
            .into());
        }
    };
    let profile = driver::load_profile(device)
        .and_then(|p| driver::loaded_ions(p, ions))
        .map_err(|e| progress.cleared(e))?;
    let counter = tutti::sim::WorkCounter::default();
    let finished = std::sync::atomic::AtomicBool::new(false);
    let compiled = std::thread::scope(|scope| {
        scope.spawn(|| progress.follow(&counter, &finished, "windows"));
        let compiled = driver::compile_counted(
            &circuit,
            &profile,
            cfg,
            &mut |stage| progress.stage(stage.describe()),
            &counter,
        );
        finished.store(true, std::sync::atomic::Ordering::Relaxed);
        compiled
    });
    progress.clear();
    let compiled = compiled.map_err(|e| Failure {
        message: format!("error: {}: {e}\n", file.display()),
        code: e.exit_code(),
        errors: Vec::new(),
    })?;
    Ok((circuit, compiled))
}
