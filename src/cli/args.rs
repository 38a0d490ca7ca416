//! The command line's arguments: the commands and their options, and the CLI's own
//! enums for the library's settings (mapped onto them with `From`; no library type
//! derives clap's traits).

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;
use tutti::compile::optimize::Objective;
use tutti::compile::Target;
use tutti::driver::Format;
use tutti::qasm::Limits;
use tutti::sim::{CheckConfig, Mode};

#[derive(Parser)]
#[command(
    name = "tutti",
    version,
    about = "Compile OpenQASM 2 for collective-gate trapped-ion processors, prove the result equal, and budget it"
)]
pub(super) struct Cli {
    #[command(subcommand)]
    pub(super) command: Command,
}

#[derive(Args, Clone, Copy)]
pub(super) struct LimitArgs {
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
    pub(super) fn limits(self) -> Limits {
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
pub(super) enum ModeArg {
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
pub(super) enum Command {
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
        /// Pre-compensate the profile's light-shift crosstalk: each layer of light
        /// shifts is commanded so that, under the crosstalk, it does what was meant.
        /// The output is verified as it runs under that crosstalk.
        #[arg(long)]
        compensate_crosstalk: bool,
        /// End the optimizer's ranges at least every N instructions, so that the
        /// output's compile trace (its `trace` lines) has a point that often and
        /// `check --locate` can name the instructions a hand edit belongs to; blocks
        /// cannot span the cuts, so the output may be longer. The baseline has a
        /// point after every instruction anyway.
        #[arg(long, value_name = "N", value_parser = clap::value_parser!(u32).range(1..))]
        trace_every: Option<u32>,
        /// Leave out the Z rotations that end on qubits just before the final
        /// measurements, where the check proves the output equal up to a final
        /// diagonal on the measured qubits (same outcome statistics, not the same
        /// unitary: check it again with `check --up-to-final-diagonal`). Only with
        /// verification, and only where the whole comparison runs.
        #[arg(long)]
        drop_final_z: bool,
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
        part: Option<String>,
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
    /// Draw a timeline of a pulse sequence (compiled or hand-written) as an SVG
    /// picture: one lane per ion, widths to scale with the profile's durations.
    Draw {
        /// A sequence: pulse list, JSON, or tutti's QASM output.
        file: PathBuf,
        /// Where to write the SVG: a new file, an existing one with --force, or `-`
        /// for standard output (also the default).
        #[arg(short, long)]
        output: Option<PathBuf>,
        /// Device profile whose durations set the widths: `demo` or a TOML file.
        #[arg(long, default_value = "demo")]
        device: String,
        /// Start of the range shown, in microseconds.
        #[arg(long, value_name = "US")]
        from: Option<f64>,
        /// End of the range shown, in microseconds.
        #[arg(long, value_name = "US")]
        to: Option<f64>,
        /// Width of the picture in pixels (300 to 20000).
        #[arg(long, default_value_t = 1200,
              value_parser = clap::value_parser!(u32).range(300..=20_000))]
        width: u32,
        /// Replace OUT if it exists.
        #[arg(long)]
        force: bool,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Join the output folders of several `tutti batch --part` runs into one, with
    /// one summary.
    Merge {
        /// Output folders of the parts.
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
        /// Name the first section where the two part: a circuit's barriers and a
        /// sequence's checkpoints (matched in order) cut both into sections, compared
        /// one by one; the first that differs is given with its lines on both sides.
        /// Two sequences (a hand-edited one against the one compiled) are matched
        /// checkpoint by checkpoint, and the steps that differ in that section are
        /// named too, with their lines and ions. Without checkpoints, a sequence and
        /// the circuit it was compiled from are aligned by its compile trace.
        /// Not with --crosstalk or --up-to-final-diagonal (sections are compared as
        /// written, and exactly).
        #[arg(long, conflicts_with_all = ["crosstalk", "up_to_final_diagonal"])]
        locate: bool,
        /// Take each sequence as it runs under the light-shift crosstalk of this
        /// device profile (`demo` or a TOML file); circuits are taken as they are.
        #[arg(long, value_name = "PROFILE")]
        crosstalk: Option<String>,
        /// Print one JSON object.
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        limits: LimitArgs,
    },
}

/// Which native operations the compiler may use (the CLI's own names for the
/// library's [`Target`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(super) enum TargetArg {
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
pub(super) enum ObjectiveArg {
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
pub(super) enum CompilerArg {
    /// The optimizer, once per `--objective`.
    Optimizer,
    /// Every two-qubit gate on its own (the reference compiler).
    Baseline,
}

/// Output formats (the CLI's own names for the library's [`Format`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(super) enum FormatArg {
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
