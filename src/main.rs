//! The `tutti` command line: parses arguments, calls the library, prints, and exits
//! with 0 on success, 1 when a check finds programs not equivalent (or some files
//! failed), 2 on usage or input errors.

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use tutti::compile::optimize::Objective;
use tutti::compile::Target;
use tutti::driver::{self, CompileConfig, Format};
use tutti::qasm::Limits;
use tutti::sim::{CheckConfig, Mode};

#[derive(Parser)]
#[command(
    name = "tutti",
    version,
    about = "Compile OpenQASM 2 for collective-gate trapped-ion processors, prove the result equal, and budget it"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Args, Clone, Copy)]
struct LimitArgs {
    /// Most operations after expanding gate definitions and broadcasts.
    #[arg(long, default_value_t = Limits::default().max_ops)]
    max_ops: usize,
    /// Most qubits in all quantum registers together.
    #[arg(long, default_value_t = Limits::default().max_qubits)]
    max_qubits: u64,
    /// Largest input file, in bytes.
    #[arg(long, default_value_t = Limits::default().max_file_bytes)]
    max_file_bytes: usize,
    /// Deepest nesting of include files.
    #[arg(long, default_value_t = Limits::default().max_include_depth)]
    max_include_depth: usize,
    /// Deepest nesting of gate definitions (a gate calling a gate calling ...), at
    /// most 4096 (deeper expansion would overflow the stack).
    #[arg(long, default_value_t = Limits::default().max_gate_nesting as u64,
          value_parser = clap::value_parser!(u64).range(1..=tutti::qasm::elaborate::MAX_GATE_NESTING as u64))]
    max_gate_nesting: u64,
    /// Most diagnostics printed; the rest are counted in one line.
    #[arg(long, default_value_t = Limits::default().errors_shown)]
    errors_shown: usize,
    /// Threads that read one large file together (0: one per core). The result is
    /// the same with any number.
    #[arg(long, default_value_t = Limits::default().max_threads)]
    read_threads: usize,
}

impl LimitArgs {
    fn limits(self) -> Limits {
        Limits {
            max_ops: self.max_ops,
            max_qubits: self.max_qubits,
            max_clbits: self.max_qubits,
            max_register_size: self.max_qubits,
            max_file_bytes: self.max_file_bytes,
            max_include_depth: self.max_include_depth,
            max_gate_nesting: self.max_gate_nesting as usize,
            errors_shown: self.errors_shown,
            max_threads: self.read_threads,
            ..Limits::default()
        }
    }
}

/// `--mode` of `check`, mapped onto the library's [`Mode`].
#[derive(Clone, Copy, clap::ValueEnum)]
enum ModeArg {
    Auto,
    Unitary,
    Random,
    Tableau,
}

impl From<ModeArg> for Mode {
    fn from(m: ModeArg) -> Mode {
        match m {
            ModeArg::Auto => Mode::Auto,
            ModeArg::Unitary => Mode::Unitary,
            ModeArg::Random => Mode::Random,
            ModeArg::Tableau => Mode::Tableau,
        }
    }
}

#[derive(Subcommand)]
enum Command {
    /// Show what a file holds: a circuit's qubits, bits, operations by gate,
    /// two-qubit gates and depth, or a sequence's ions, bits and steps by operation.
    Inspect {
        /// An OpenQASM 2 circuit, or a sequence tutti wrote (pulse list, JSON, QASM).
        file: PathBuf,
        /// Print one JSON object instead of a table.
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Compile an OpenQASM 2 circuit to a pulse sequence, verify it against the
    /// input and print its budget.
    Compile {
        /// The OpenQASM 2 circuit to compile.
        file: PathBuf,
        /// Where to write the sequence: a new file, an existing one with --force
        /// (replaced atomically), a device or FIFO (written through), or `-` for
        /// standard output (also the default). Symbolic links and the input are refused.
        #[arg(short, long)]
        output: Option<PathBuf>,
        /// Device profile: `demo` (embedded, invented example numbers) or a TOML file.
        #[arg(long, default_value = "demo")]
        device: String,
        /// Native operations to use: collective (collective rotations, light shifts,
        /// global MS pulses) or addressed (also pair MS pulses, addressed rotations and
        /// hiding, where the device has them).
        #[arg(long, value_enum, default_value_t = TargetArg::Collective)]
        target: TargetArg,
        /// Output format; by default the one `-o`'s extension names (.pulses, .json,
        /// .qasm), else the pulse list. A format that contradicts the extension is an
        /// error.
        #[arg(long, value_enum)]
        format: Option<FormatArg>,
        /// Compile every two-qubit gate on its own (the reference compiler).
        #[arg(long)]
        baseline: bool,
        /// What the optimizer minimises when it chooses how to make each block:
        /// MS pulses, MS area, duration or expected error (from the profile).
        #[arg(long, value_enum, default_value_t = ObjectiveArg::Duration)]
        objective: ObjectiveArg,
        /// Skip the check of the output against the input.
        #[arg(long)]
        no_verify: bool,
        /// Replace OUT if it exists (the input is never replaced).
        #[arg(long)]
        force: bool,
        /// Most steps (pulses and other operations) the compiled sequence may have;
        /// a larger one stops the compile with an error instead of exhausting memory.
        #[arg(long, default_value_t = tutti::compile::DEFAULT_MAX_STEPS)]
        max_pulses: usize,
        /// Ions loaded for this run, at most the profile's count (default: all of
        /// them): a 5-qubit circuit on a 5-ion chain of a 40-ion machine.
        #[arg(long)]
        ions: Option<u32>,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Print what a circuit (as compiled) or a sequence (as written) will cost on a
    /// device, without running anything.
    Budget {
        /// An OpenQASM 2 circuit, or a sequence tutti wrote (pulse list, JSON, QASM).
        file: PathBuf,
        /// Device profile: `demo` (embedded, invented example numbers) or a TOML file.
        #[arg(long, default_value = "demo")]
        device: String,
        /// Native operations to use: collective (collective rotations, light shifts,
        /// global MS pulses) or addressed (also pair MS pulses, addressed rotations and
        /// hiding, where the device has them).
        #[arg(long, value_enum, default_value_t = TargetArg::Collective)]
        target: TargetArg,
        /// Budget what the reference compiler makes (every two-qubit gate on its own).
        #[arg(long)]
        baseline: bool,
        /// What the optimizer minimises when it chooses how to make each block:
        /// MS pulses, MS area, duration or expected error (from the profile).
        #[arg(long, value_enum, default_value_t = ObjectiveArg::Duration)]
        objective: ObjectiveArg,
        /// Print one JSON object.
        #[arg(long)]
        json: bool,
        /// Most steps (pulses and other operations) the compiled sequence may have;
        /// a larger one stops the compile with an error instead of exhausting memory.
        #[arg(long, default_value_t = tutti::compile::DEFAULT_MAX_STEPS)]
        max_pulses: usize,
        /// Ions loaded for this run, at most the profile's count (default: all of
        /// them): a 5-qubit circuit on a 5-ion chain of a 40-ion machine.
        #[arg(long)]
        ions: Option<u32>,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Compile every circuit under some paths for every combination of devices,
    /// targets and compilers, in parallel, with summaries (exit 0 when every job
    /// succeeded, 1 when some failed, 2 on usage errors).
    Batch {
        /// Circuits, and folders searched recursively for .qasm files.
        #[arg(required = true)]
        paths: Vec<PathBuf>,
        /// Folder for the outputs, records and summaries (made if missing). A re-run
        /// into the same folder skips the jobs whose inputs and options are unchanged.
        #[arg(long)]
        out: PathBuf,
        /// Device profiles (repeat for a sweep): `demo` or TOML files.
        #[arg(long = "device", default_value = "demo")]
        devices: Vec<String>,
        /// Targets (repeat for a sweep).
        #[arg(long = "target", value_enum, default_values_t = [TargetArg::Collective])]
        targets: Vec<TargetArg>,
        /// Compilers (repeat for a sweep): the optimizer (once per objective) or the
        /// baseline. The first setting is the reference of the comparison.
        #[arg(long = "compiler", value_enum, default_values_t = [CompilerArg::Optimizer])]
        compilers: Vec<CompilerArg>,
        /// Objectives of the optimizer (repeat for a sweep).
        #[arg(long = "objective", value_enum, default_values_t = [ObjectiveArg::Duration])]
        objectives: Vec<ObjectiveArg>,
        /// Jobs at once (default: the number of cores). Parallel kernels share one
        /// pool of this many threads.
        #[arg(long)]
        jobs: Option<usize>,
        /// Skip the checks of the outputs against their circuits.
        #[arg(long)]
        no_verify: bool,
        /// Run only part K of N of the suite (circuits dealt round-robin in path
        /// order), for a job array on a cluster; join the parts with `tutti merge`.
        #[arg(long, value_name = "K/N")]
        shard: Option<String>,
        /// Format of the compiled sequences.
        #[arg(long, value_enum, default_value_t = FormatArg::Pulses)]
        format: FormatArg,
        /// The figure summary.svg charts across settings.
        #[arg(long, default_value = "duration_us")]
        chart: String,
        /// Memory for states and unitaries of all jobs together, in MiB. Default:
        /// three quarters of what the process may use.
        #[arg(long)]
        memory: Option<usize>,
        /// Most steps one compiled sequence may have.
        #[arg(long, default_value_t = tutti::compile::DEFAULT_MAX_STEPS)]
        max_pulses: usize,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Join the output folders of several `tutti batch --shard` runs into one, with
    /// one summary.
    Merge {
        /// Output folders of the shards.
        #[arg(required = true)]
        dirs: Vec<PathBuf>,
        /// Folder for the joined outputs and summary.
        #[arg(long)]
        out: PathBuf,
    },
    /// Decide whether two programs are the same unitary up to global phase (exit 0
    /// equivalent, 1 not equivalent, 2 error).
    Check {
        /// First program: OpenQASM 2, or a sequence tutti wrote (pulse list, JSON, QASM).
        a: PathBuf,
        /// Second program, in any of the same formats.
        b: PathBuf,
        /// How to compare: exact unitaries, random states, stabilizer tableaux, or
        /// chosen by size and Clifford-ness (docs/checker.md).
        #[arg(long, value_enum, default_value_t = ModeArg::Auto)]
        mode: ModeArg,
        /// Random states per segment in random mode.
        #[arg(long, default_value_t = CheckConfig::default().trials)]
        trials: usize,
        /// Seed of the random states.
        #[arg(long, default_value_t = CheckConfig::default().seed)]
        seed: u64,
        /// Largest distance accepted as equal (docs/checker.md). Default: derived
        /// for each comparison from its operation counts and rounding.
        #[arg(long)]
        tolerance: Option<f64>,
        /// Memory for states and unitaries, in MiB. Default: three quarters of what
        /// the process may use (address-space limit and available memory).
        #[arg(long)]
        memory: Option<usize>,
        /// Accept a difference by a diagonal on the qubits measured at the end.
        #[arg(long)]
        up_to_final_diagonal: bool,
        /// Print one JSON object.
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        limits: LimitArgs,
    },
}

fn main() -> ExitCode {
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
            let text = format.render(&compiled.sequence);
            match &output {
                Some(path) => driver::write_output(path, &text, &file, force)?,
                None => print!("{text}"),
            }
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
            shard,
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
            let shard = shard
                .map(|s| batch::Shard::parse(&s))
                .transpose()
                .map_err(|e| format!("error: --shard: {e}\n"))?;
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
                shard,
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
            json,
            limits,
        } => {
            let limits = limits.limits();
            let progress = Progress::start(&a);
            progress.stage("reading both sides");
            let defaults = CheckConfig::default();
            let memory_budget =
                memory.map_or(defaults.memory_budget, |m| m.saturating_mul(1 << 20));
            let loaded = driver::load_program(&a, &limits, memory_budget)
                .and_then(|pa| Ok((pa, driver::load_program(&b, &limits, memory_budget)?)));
            let ((pa, wa), (pb, wb)) = loaded.map_err(|e| progress.cleared(e))?;
            progress.0.suspend(|| eprint!("{wa}{wb}"));
            let cfg = CheckConfig {
                mode: mode.into(),
                trials,
                seed,
                tolerance,
                memory_budget,
                up_to_final_diagonal,
                ..defaults
            };
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
            let verdict = verdict.map_err(|e| format!("error: {e}"))?;
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

/// Which native operations the compiler may use (the CLI's own names for the
/// library's [`Target`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum TargetArg {
    /// Collective rotations, light shifts and global MS pulses only.
    Collective,
    /// Also pair MS pulses, addressed rotations and hiding, where the device has them.
    Addressed,
}

impl From<TargetArg> for Target {
    fn from(t: TargetArg) -> Target {
        match t {
            TargetArg::Collective => Target::Collective,
            TargetArg::Addressed => Target::Addressed,
        }
    }
}

/// What the optimizer minimises (the CLI's own names for the library's
/// [`Objective`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum ObjectiveArg {
    /// MS pulses, then MS area.
    Pulses,
    /// MS area, then MS pulses.
    Area,
    /// Duration from the profile's timings.
    Duration,
    /// The budget's expected error.
    Error,
}

impl From<ObjectiveArg> for Objective {
    fn from(o: ObjectiveArg) -> Objective {
        match o {
            ObjectiveArg::Pulses => Objective::Pulses,
            ObjectiveArg::Area => Objective::Area,
            ObjectiveArg::Duration => Objective::Duration,
            ObjectiveArg::Error => Objective::Error,
        }
    }
}

/// `--compiler` of `batch`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum CompilerArg {
    /// The optimizer, once per `--objective`.
    Optimizer,
    /// Every two-qubit gate on its own (the reference compiler).
    Baseline,
}

/// Output formats (the CLI's own names for the library's [`Format`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum FormatArg {
    /// OpenQASM 2 with the native operations defined as gates in a header.
    Qasm,
    /// tutti's pulse list.
    Pulses,
    /// JSON for control software.
    Json,
}

impl From<FormatArg> for Format {
    fn from(f: FormatArg) -> Format {
        match f {
            FormatArg::Qasm => Format::Qasm,
            FormatArg::Pulses => Format::Pulses,
            FormatArg::Json => Format::Json,
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

/// Progress of a batch run: a bar on a terminal (jobs done, rate, time left, the
/// file being worked on), one plain line per finished job otherwise.
struct BatchProgress {
    bar: indicatif::ProgressBar,
    done: std::sync::atomic::AtomicUsize,
    total: std::sync::atomic::AtomicUsize,
}

impl BatchProgress {
    fn new() -> BatchProgress {
        let bar = indicatif::ProgressBar::new(0);
        let style = indicatif::ProgressStyle::with_template(
            "[{bar:30}] {pos}/{len} jobs, {per_sec}, {eta} left  {wide_msg}",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
        bar.set_style(style);
        bar.enable_steady_tick(std::time::Duration::from_millis(200));
        BatchProgress {
            bar,
            done: Default::default(),
            total: Default::default(),
        }
    }

    fn event(&self, e: tutti::batch::Event) {
        use std::sync::atomic::Ordering;
        use tutti::batch::Event;
        match e {
            Event::Planned { total, skipped } => {
                self.total.store(total - skipped, Ordering::Relaxed);
                self.bar.set_length((total - skipped) as u64);
                if skipped > 0 {
                    self.bar.suspend(|| {
                        eprintln!("{skipped} of {total} job(s) finished before with the same inputs and options: skipped")
                    });
                }
            }
            Event::Started { key, setting } => {
                self.bar.set_message(format!("{key} ({setting})"));
            }
            Event::Finished { row } => {
                let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
                self.bar.inc(1);
                if self.bar.is_hidden() {
                    let what = match &row.error {
                        Some(e) => format!("FAILED: {e}"),
                        None => format!(
                            "{} in {:.2} s",
                            row.status.name(),
                            row.compile_s + row.verify_s
                        ),
                    };
                    eprintln!(
                        "[{done}/{}] {} ({}): {what}",
                        self.total.load(Ordering::Relaxed),
                        row.path,
                        row.setting
                    );
                }
            }
        }
    }

    fn finish(&self) {
        self.bar.finish_and_clear();
    }
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

/// A spinner on stderr with the stage and the time so far; drawn only when stderr is
/// a terminal (indicatif hides it otherwise, so logs and pipes stay clean).
struct Progress(indicatif::ProgressBar);

impl Progress {
    fn start(file: &Path) -> Progress {
        let bar = indicatif::ProgressBar::new_spinner();
        let style =
            indicatif::ProgressStyle::with_template("{spinner} {prefix}: {msg} ({elapsed})")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner());
        bar.set_style(style);
        bar.set_prefix(file.display().to_string());
        bar.enable_steady_tick(std::time::Duration::from_millis(120));
        Progress(bar)
    }

    fn stage(&self, what: &str) {
        self.0.set_message(what.to_string());
    }

    /// Until `finished`, shows the work `counter` reports done (in `unit`s) as a bar
    /// with the fraction and the time left, once there is work to count.
    fn follow(
        &self,
        counter: &tutti::sim::WorkCounter,
        finished: &std::sync::atomic::AtomicBool,
        unit: &str,
    ) {
        use std::sync::atomic::Ordering;
        let mut shown_total = 0;
        while !finished.load(Ordering::Relaxed) {
            std::thread::sleep(std::time::Duration::from_millis(100));
            let total = counter.total.load(Ordering::Relaxed);
            if total == 0 {
                continue;
            }
            if total != shown_total {
                let template = format!(
                    "{{prefix}}: {{msg}} [{{bar:30}}] {{pos}}/{{len}} {unit}, {{percent}}%, {{eta}} left"
                );
                let style = indicatif::ProgressStyle::with_template(&template)
                    .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
                self.0.set_style(style);
                self.0.set_length(total as u64);
                shown_total = total;
            }
            self.0
                .set_position(counter.done.load(Ordering::Relaxed) as u64);
        }
    }

    fn clear(&self) {
        self.0.finish_and_clear();
    }

    /// Clears the spinner and passes an error on.
    fn cleared<E>(&self, e: E) -> E {
        self.clear();
        e
    }
}
