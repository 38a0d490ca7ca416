//! The whole job for one file: read, compile, verify, budget, write. With the front
//! end's file reading (`qasm::read_file`, includes) the only library code that
//! touches the file system.

use crate::circuit::Circuit;
use crate::compile::optimize::{compile_optimized, BlockReport, Objective, OptConfig};
use crate::compile::{compile_baseline_bounded, CompileError, Target, DEFAULT_MAX_STEPS};
use crate::native::profile::Profile;
use crate::native::qasm_out::{read_qasm_sequence, write_qasm};
use crate::native::text::{read_json, read_pulses, write_json, write_pulses};
use crate::native::Sequence;
use crate::qasm::{self, Limits};
use crate::report::budget::{budget, Budget};
use crate::sim::program::{circuit_check_bytes, sequence_check_bytes};
use crate::sim::SyncPoint;
use crate::sim::{
    check, check_windows_counted, sync_points_from_origin, CheckConfig, CheckError, Program,
    Verdict, WindowVerdict, WorkCounter,
};
use std::path::Path;

/// Output formats of a compiled sequence.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// OpenQASM 2 with the native operations defined as gates in a header.
    Qasm,
    /// tutti's pulse list (grammar/pulses.ebnf).
    Pulses,
    /// JSON for control software (docs/formats.md).
    Json,
}

impl Format {
    pub fn render(self, seq: &Sequence) -> String {
        match self {
            Format::Qasm => write_qasm(seq),
            Format::Pulses => write_pulses(seq),
            Format::Json => write_json(seq),
        }
    }

    /// The format an extension names: `.pulses`, `.json`, `.qasm`.
    pub fn from_extension(path: &Path) -> Option<Format> {
        match path.extension().and_then(|e| e.to_str()) {
            Some("json") => Some(Format::Json),
            Some("pulses") => Some(Format::Pulses),
            Some("qasm") => Some(Format::Qasm),
            _ => None,
        }
    }

    /// The format to write: the one asked for, else the one the output's extension
    /// names, else the pulse list. Asking for one format while the extension names
    /// another is an error.
    pub fn for_output(asked: Option<Format>, output: Option<&Path>) -> Result<Format, String> {
        let named = output.and_then(Format::from_extension);
        match (asked, named) {
            (Some(a), Some(n)) if a != n => Err(format!(
                "error: --format {} contradicts the extension of {}; drop --format or change the extension\n",
                a.name(),
                output.map(|p| p.display().to_string()).unwrap_or_default()
            )),
            (Some(a), _) => Ok(a),
            (None, Some(n)) => Ok(n),
            (None, None) => Ok(Format::Pulses),
        }
    }

    /// The name `--format` takes.
    pub fn name(self) -> &'static str {
        match self {
            Format::Qasm => "qasm",
            Format::Pulses => "pulses",
            Format::Json => "json",
        }
    }

    /// Guesses the format of a file from its extension, then its first words.
    pub fn sniff(path: &Path, text: &str) -> Format {
        if let Some(f) = Format::from_extension(path) {
            return f;
        }
        if path.extension().is_some_and(|e| e == "inc") {
            return Format::Qasm;
        }
        let first = text
            .lines()
            .map(|l| l.split('#').next().unwrap_or("").trim())
            .find(|l| !l.is_empty());
        match first {
            Some(l) if l.starts_with('{') => Format::Json,
            Some(l) if l.starts_with("ions") => Format::Pulses,
            _ => Format::Qasm,
        }
    }
}

/// What a file holds once read.
pub enum Loaded {
    Circuit(Circuit),
    Sequence(Sequence),
}

/// One error as data, for `--json` output: a diagnostic's code, message, place and
/// hint, or a plain error with only a code and a message.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ErrorRecord {
    pub code: String,
    pub message: String,
    pub file: Option<String>,
    pub line: Option<usize>,
    pub column: Option<usize>,
    pub hint: Option<String>,
}

impl ErrorRecord {
    /// An error without a place in a source.
    pub fn plain(code: &str, message: impl Into<String>) -> ErrorRecord {
        ErrorRecord {
            code: code.into(),
            message: message.into(),
            file: None,
            line: None,
            column: None,
            hint: None,
        }
    }

    /// The errors among `diags`, with their places.
    pub fn from_diagnostics(
        diags: &[crate::qasm::diag::Diagnostic],
        sources: &crate::qasm::diag::SourceMap,
    ) -> Vec<ErrorRecord> {
        diags
            .iter()
            .filter(|d| d.is_error())
            .map(|d| {
                let (line, column) = sources.line_col(d.span.file, d.span.start);
                ErrorRecord {
                    code: d.code.into(),
                    message: d.message.clone(),
                    file: Some(sources.name(d.span.file).to_string()),
                    line: Some(line),
                    column: Some(column),
                    hint: (!d.hint.is_empty()).then(|| d.hint.clone()),
                }
            })
            .collect()
    }
}

/// A file that could not be read: the rendered text for a terminal and the same
/// errors as data.
#[derive(Debug, Clone)]
pub struct LoadFailure {
    pub rendered: String,
    pub errors: Vec<ErrorRecord>,
}

impl LoadFailure {
    fn plain(path: &Path, code: &str, message: String, hint: Option<&str>) -> LoadFailure {
        let mut record = ErrorRecord::plain(code, message.clone());
        record.file = Some(path.display().to_string());
        record.hint = hint.map(str::to_string);
        let rendered = match hint {
            Some(h) => format!("error: {}: {message}\n  hint: {h}\n", path.display()),
            None => format!("error: {}: {message}\n", path.display()),
        };
        LoadFailure {
            rendered,
            errors: vec![record],
        }
    }
}

impl std::fmt::Display for LoadFailure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.rendered)
    }
}

/// Reads a circuit or a sequence in any format tutti writes. Errors come rendered,
/// with file, line and column, and as data.
pub fn load(path: &Path, limits: &Limits) -> Result<(Loaded, String), LoadFailure> {
    load_traced(path, limits).map(|(loaded, warnings, _)| (loaded, warnings))
}

/// A file read and the SHA-256 of its bytes.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct SourceDigest {
    pub path: String,
    pub sha256: String,
}

/// [`load`], also giving the digest of every file read: the file itself, then the
/// files it includes (the standard library is built in and not listed). A change in
/// any of them changes the result, so a batch run compares these to skip a job.
pub fn load_traced(
    path: &Path,
    limits: &Limits,
) -> Result<(Loaded, String, Vec<SourceDigest>), LoadFailure> {
    let text = match std::fs::read(path) {
        Ok(b) if b.len() > limits.max_file_bytes => {
            return Err(LoadFailure::plain(
                path,
                "file-too-large",
                format!(
                    "the file is {} bytes, more than the limit of {}",
                    b.len(),
                    limits.max_file_bytes
                ),
                Some("raise the input size limit (--max-file-bytes) if the file is meant to be this large"),
            ))
        }
        Ok(b) => b,
        Err(e) => {
            return Err(LoadFailure::plain(
                path,
                "cannot-read",
                format!("cannot read the file: {e}"),
                Some("check the path and the file's permissions"),
            ))
        }
    };
    let mut digests = vec![SourceDigest {
        path: path.display().to_string(),
        sha256: sha256_hex(&text),
    }];
    let text = String::from_utf8_lossy(&text).into_owned();
    let name = path.display().to_string();
    match Format::sniff(path, &text) {
        Format::Qasm => {
            // A file tutti wrote, with its header untouched, is read as the sequence
            // it is, without expanding the native gates (a 40-ion MS gate is 780
            // two-ion gates per pulse). An edited header makes it a circuit.
            if let Some(seq) = read_qasm_sequence(&text) {
                return Ok((Loaded::Sequence(seq), String::new(), digests));
            }
            // The text is read already: elaborate it, do not read the file again.
            let out = qasm::elaborate::read_with(&name, &text, limits, &qasm::FsLoader);
            let rendered = out.render();
            digests.extend(out.sources.files().skip(1).map(|(n, t)| SourceDigest {
                path: n.to_string(),
                sha256: sha256_hex(t.as_bytes()),
            }));
            match out.circuit {
                Some(c) => Ok((Loaded::Circuit(c), rendered, digests)),
                None => Err(LoadFailure {
                    rendered: format!("{rendered}{} error(s) in {name}\n", out.errors().count()),
                    errors: ErrorRecord::from_diagnostics(&out.diagnostics, &out.sources),
                }),
            }
        }
        f => {
            let out = if f == Format::Json {
                read_json(&name, &text)
            } else {
                read_pulses(&name, &text)
            };
            let rendered = out.render();
            match out.sequence {
                Some(s) => Ok((Loaded::Sequence(s), rendered, digests)),
                None => Err(LoadFailure {
                    rendered: format!("{rendered}{} error(s) in {name}\n", out.diagnostics.len()),
                    errors: ErrorRecord::from_diagnostics(&out.diagnostics, &out.sources),
                }),
            }
        }
    }
}

/// A program for the checker from a file of any format.
/// Refuses to lower a program whose whole comparison would hold more than
/// `memory_budget` bytes.
pub fn load_program(
    path: &Path,
    limits: &Limits,
    memory_budget: usize,
) -> Result<(Program, String), LoadFailure> {
    let (loaded, warnings) = load(path, limits)?;
    let needed = match &loaded {
        Loaded::Circuit(c) => circuit_check_bytes(c.instrs.len()),
        Loaded::Sequence(s) => sequence_check_bytes(s.steps.len(), s.n_ions as usize),
    };
    if needed > memory_budget {
        return Err(LoadFailure::plain(
            path,
            "out-of-memory",
            format!("comparing this program whole needs about {needed} bytes, more than the memory budget of {memory_budget} bytes"),
            Some("raise --memory (MiB) if the machine has it"),
        ));
    }
    let p = match loaded {
        Loaded::Circuit(c) => Program::from_circuit(&c)
            .map_err(|e| LoadFailure::plain(path, "opaque-gate", e.to_string(), None))?,
        Loaded::Sequence(s) => Program::from_sequence(&s),
    };
    Ok((p, warnings))
}

/// Settings of one compilation.
#[derive(Debug, Clone)]
pub struct CompileConfig {
    pub target: Target,
    /// Use the baseline compiler instead of the optimizer.
    pub baseline: bool,
    /// What the optimizer minimises.
    pub objective: Objective,
    /// Check the output against the input.
    pub verify: bool,
    pub check: CheckConfig,
    /// Most steps the compiled sequence may have (`--max-pulses`).
    pub max_steps: usize,
}

/// Most work of a whole-program verification in [`compile`], in amplitude updates
/// (2^30: a few seconds); above it the sequence is verified window by window, which
/// proves the same in linear time (measured: a 2,000-gate, 21-qubit circuit
/// compiled to 850k pulses took 53 s whole at 2^34 and 0.17 s window by window).
pub const VERIFY_WORK: f64 = (1u64 << 30) as f64;

impl Default for CompileConfig {
    fn default() -> CompileConfig {
        CompileConfig {
            target: Target::Collective,
            baseline: false,
            objective: Objective::default(),
            verify: true,
            max_steps: DEFAULT_MAX_STEPS,
            check: CheckConfig {
                max_work: VERIFY_WORK,
                ..CheckConfig::default()
            },
        }
    }
}

/// How a compiled sequence was proven equal to its circuit.
#[derive(Debug, Clone, PartialEq)]
pub enum Verification {
    /// The whole sequence against the whole circuit.
    Whole(Verdict),
    /// Window by window (each instruction against its pulses), when the whole
    /// comparison would need more memory or work than the budget (large circuits
    /// that are not Clifford).
    Windowed(WindowVerdict),
}

impl Verification {
    /// One line for the user.
    pub fn describe(&self) -> String {
        match self {
            Verification::Whole(v) => format!(
                "EQUIVALENT (mode {}, distance {} within tolerance {:.1e}, {} qubit(s) compared)",
                v.mode.name(),
                fmt_distance(v.distance),
                v.tolerance,
                v.compared_qubits
            ),
            Verification::Windowed(b) => format!(
                "EQUIVALENT window by window ({} windows, mode {}, worst distance {} within tolerance {:.1e}, at most {} qubit(s) per window)",
                b.windows,
                b.mode.name(),
                fmt_distance(b.distance),
                b.tolerance,
                b.compared_qubits
            ),
        }
    }
}

/// A distance for a verdict line.
pub fn fmt_distance(d: Option<f64>) -> String {
    d.map_or_else(|| "not measured".into(), |d| format!("{d:.1e}"))
}

pub struct Compiled {
    pub sequence: Sequence,
    /// What each block of the optimizer cost (empty for the baseline).
    pub blocks: Vec<BlockReport>,
    pub budget: Budget,
    /// `None` when verification was switched off.
    pub verification: Option<Verification>,
}

#[derive(Debug, thiserror::Error)]
pub enum DriverError {
    #[error(transparent)]
    Compile(#[from] CompileError),
    #[error("verification could not run: {0}")]
    Check(#[from] CheckError),
    #[error("verification failed: the compiled sequence is NOT the input circuit ({0})")]
    NotEquivalent(String),
}

impl DriverError {
    /// The exit code of the CLI: 1 when the output is not the input (a failed
    /// verification), 2 for every other error.
    pub fn exit_code(&self) -> u8 {
        match self {
            DriverError::NotEquivalent(_) => 1,
            _ => 2,
        }
    }
}

/// The stages of [`compile_with`], announced as each starts (for progress display).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    Compile,
    /// The whole sequence against the whole circuit.
    Verify,
    /// Window by window, after the whole comparison was found too large.
    VerifyWindows,
    Budget,
}

impl Stage {
    /// What the stage does, for a progress line.
    pub fn describe(self) -> &'static str {
        match self {
            Stage::Compile => "compiling",
            Stage::Verify => "verifying the sequence against the circuit",
            Stage::VerifyWindows => "verifying window by window (too large to compare whole)",
            Stage::Budget => "budgeting",
        }
    }
}

/// Most qubits one range of the optimizer may touch when the output is to be
/// verified window by window (each window is then compared on at most this many
/// qubits of the circuit).
pub const WINDOW_QUBITS: usize = 8;

/// The compiler a configuration runs, as provenance and messages name it:
/// `baseline`, or `optimizer (objective NAME)`.
pub fn compiler_name(cfg: &CompileConfig) -> String {
    if cfg.baseline {
        "baseline".into()
    } else {
        format!("optimizer (objective {})", cfg.objective.name())
    }
}

/// One compile with the chosen compiler: the sequence, its sync points, and the
/// optimizer's block reports.
fn compile_one(
    c: &Circuit,
    profile: &Profile,
    cfg: &CompileConfig,
    window_qubits: Option<usize>,
) -> Result<(Sequence, Vec<SyncPoint>, Vec<BlockReport>), DriverError> {
    if cfg.baseline {
        let (sequence, origin) = compile_baseline_bounded(c, profile, cfg.target, cfg.max_steps)?;
        let sync = sync_points_from_origin(&origin, c.instrs.len())?;
        return Ok((sequence, sync, Vec::new()));
    }
    let o = compile_optimized(
        c,
        profile,
        &OptConfig {
            target: cfg.target,
            objective: cfg.objective,
            max_steps: cfg.max_steps,
            window_qubits,
            ..OptConfig::default()
        },
    )?;
    Ok((o.sequence, o.sync, o.blocks))
}

/// Compiles, verifies (unless switched off) and budgets one circuit. A failed
/// verification is an error, never a silent success.
pub fn compile(
    c: &Circuit,
    profile: &Profile,
    cfg: &CompileConfig,
) -> Result<Compiled, DriverError> {
    compile_with(c, profile, cfg, &mut |_| {})
}

/// [`compile`], calling `on_stage` as each stage starts.
pub fn compile_with(
    c: &Circuit,
    profile: &Profile,
    cfg: &CompileConfig,
    on_stage: &mut dyn FnMut(Stage),
) -> Result<Compiled, DriverError> {
    compile_counted(c, profile, cfg, on_stage, &WorkCounter::default())
}

/// [`compile_with`], also counting the windows of a window-by-window verification
/// in `counter` (which another thread may read to show progress).
pub fn compile_counted(
    c: &Circuit,
    profile: &Profile,
    cfg: &CompileConfig,
    on_stage: &mut dyn FnMut(Stage),
    counter: &WorkCounter,
) -> Result<Compiled, DriverError> {
    on_stage(Stage::Compile);
    let (mut sequence, mut sync, mut blocks) = compile_one(c, profile, cfg, None)?;
    let verification = if cfg.verify {
        let whole_bytes = sequence_check_bytes(sequence.steps.len(), sequence.n_ions as usize)
            .saturating_add(circuit_check_bytes(c.instrs.len()));
        let whole = if whole_bytes > cfg.check.memory_budget {
            // Lowering the whole sequence would not fit: go window by window.
            Err(CheckError::TooLarge {
                qubits: c.n_qubits() as usize,
                needed: whole_bytes,
                budget: cfg.check.memory_budget,
            })
        } else {
            on_stage(Stage::Verify);
            let a = Program::from_circuit(c).map_err(CheckError::Lower)?;
            let b = Program::from_sequence(&sequence);
            check(&a, &b, &cfg.check)
        };
        match whole {
            Ok(v) if v.equivalent => Some(Verification::Whole(v)),
            Ok(v) => {
                return Err(DriverError::NotEquivalent(format!(
                    "mode {}, distance {} against tolerance {:.1e}: {}",
                    v.mode.name(),
                    fmt_distance(v.distance),
                    v.tolerance,
                    v.detail
                )))
            }
            Err(CheckError::TooLarge { .. } | CheckError::TooSlow { .. }) => {
                if !cfg.baseline {
                    // Recompile in ranges of few qubits, so that every window is small
                    // (the first output is freed first: it can be most of the memory).
                    on_stage(Stage::Compile);
                    drop(std::mem::take(&mut sequence.steps));
                    (sequence, sync, blocks) = compile_one(c, profile, cfg, Some(WINDOW_QUBITS))?;
                }
                on_stage(Stage::VerifyWindows);
                let b = check_windows_counted(c, &sequence, &sync, &cfg.check, counter)?;
                if !b.equivalent {
                    return Err(DriverError::NotEquivalent(b.detail));
                }
                Some(Verification::Windowed(b))
            }
            Err(e) => return Err(e.into()),
        }
    } else {
        None
    };
    on_stage(Stage::Budget);
    let budget = budget(&sequence, profile, c.n_qubits());
    Ok(Compiled {
        sequence,
        budget,
        verification,
        blocks,
    })
}

/// Writes `text` to `path`, never losing a file:
/// - `-` is standard output;
/// - a regular file is replaced atomically (a temporary file in the same folder,
///   then a rename), and an existing one only with `force`; its permissions are kept;
/// - an existing device or FIFO (such as `/dev/null`) is written through, never
///   replaced;
/// - a symbolic link, a directory or a socket is refused: give the real path;
/// - the input itself is never overwritten.
pub fn write_output(path: &Path, text: &str, input: &Path, force: bool) -> Result<(), String> {
    use std::io::Write;
    if path.as_os_str() == "-" {
        let mut out = std::io::stdout().lock();
        return out
            .write_all(text.as_bytes())
            .and_then(|_| out.flush())
            .map_err(|e| format!("error: cannot write to standard output: {e}\n"));
    }
    let same = match (std::fs::canonicalize(path), std::fs::canonicalize(input)) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    };
    if same {
        return Err(format!(
            "error: refusing to overwrite the input {}; choose another -o path\n",
            input.display()
        ));
    }
    let existing = match std::fs::symlink_metadata(path) {
        Ok(m) => Some(m),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
        Err(e) => return Err(format!("error: cannot write {}: {e}\n", path.display())),
    };
    if let Some(meta) = &existing {
        let kind = meta.file_type();
        if kind.is_symlink() {
            return Err(format!(
                "error: {} is a symbolic link; tutti does not write through links, give the path it points to\n",
                path.display()
            ));
        }
        if kind.is_dir() {
            return Err(format!(
                "error: {} is a directory; give a file path\n",
                path.display()
            ));
        }
        if !kind.is_file() {
            return write_through(path, text, &kind);
        }
        if !force {
            return Err(format!(
                "error: {} exists; pass --force to replace it, or choose another -o path\n",
                path.display()
            ));
        }
    }
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let fail = |e: std::io::Error| format!("error: cannot write {}: {e}\n", path.display());
    let mut builder = tempfile::Builder::new();
    builder.prefix(".tutti-").suffix(".tmp");
    #[cfg(unix)]
    {
        // A new file gets the usual 0666 less the umask, as any program's output
        // would (tempfile's own default is 0600).
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(std::fs::Permissions::from_mode(0o666));
    }
    let mut tmp = builder.tempfile_in(dir).map_err(fail)?;
    tmp.write_all(text.as_bytes())
        .and_then(|_| tmp.as_file().sync_all())
        .map_err(fail)?;
    if let Some(meta) = &existing {
        // Keep the replaced file's permissions (an unreadable temporary file is the
        // only other choice tempfile offers).
        std::fs::set_permissions(tmp.path(), meta.permissions()).map_err(fail)?;
    }
    tmp.persist(path).map_err(|e| fail(e.error))?;
    Ok(())
}

/// Writes into an existing special file (device, FIFO) without replacing it.
fn write_through(path: &Path, text: &str, kind: &std::fs::FileType) -> Result<(), String> {
    use std::io::Write;
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if kind.is_socket() {
            return Err(format!(
                "error: {} is a socket; give a file path\n",
                path.display()
            ));
        }
    }
    let _ = kind;
    std::fs::OpenOptions::new()
        .write(true)
        .open(path)
        .and_then(|mut f| f.write_all(text.as_bytes()))
        .map_err(|e| format!("error: cannot write {}: {e}\n", path.display()))
}

/// The budget of a sequence as it is written (a hand-built or compiled one), on
/// `profile`. The sequence may use fewer ions than the device has, never more.
pub fn budget_sequence(seq: &Sequence, profile: &Profile) -> Result<Budget, String> {
    if seq.n_ions > profile.device.ions {
        return Err(format!(
            "error: the sequence is for {} ions, but the device `{}` has {}\n",
            seq.n_ions, profile.device.name, profile.device.ions
        ));
    }
    Ok(budget(seq, profile, seq.addressed_ion_count()))
}

/// The profile with `ions` of its ions loaded (`None`: all of them); more than the
/// profile has is an error.
pub fn loaded_ions(profile: Profile, ions: Option<u32>) -> Result<Profile, String> {
    match ions {
        None => Ok(profile),
        Some(0) => Err("error: --ions must be at least 1\n".into()),
        Some(n) if n > profile.device.ions => Err(format!(
            "error: --ions {n} is more than the {} ions of the device `{}`\n",
            profile.device.ions, profile.device.name
        )),
        Some(n) => Ok(profile.with_ions(n)),
    }
}

/// The SHA-256 of `bytes`, in hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::Digest;
    sha2::Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// Where a compiled sequence came from: the source file (name and hash of its
/// bytes), the device profile (name and hash of its TOML text), target, compiler,
/// tool version and how it was verified.
pub fn provenance(
    source: &Path,
    device_spec: &str,
    target: Target,
    compiler: &str,
    verification: Option<&Verification>,
) -> crate::native::Provenance {
    let hash_of = |bytes: std::io::Result<Vec<u8>>| {
        bytes.map_or_else(|e| format!("unreadable ({e})"), |b| sha256_hex(&b))
    };
    let (device, device_sha256) = if device_spec == "demo" {
        (
            Profile::demo().device.name,
            sha256_hex(crate::native::profile::DEMO_TOML.as_bytes()),
        )
    } else {
        let name = load_profile(device_spec)
            .map(|p| p.device.name)
            .unwrap_or_else(|_| device_spec.to_string());
        (name, hash_of(std::fs::read(device_spec)))
    };
    crate::native::Provenance {
        source: source.display().to_string(),
        source_sha256: hash_of(std::fs::read(source)),
        device,
        device_sha256,
        target: target.name().into(),
        compiler: compiler.into(),
        tool: format!("tutti {}", env!("CARGO_PKG_VERSION")),
        verified: match verification {
            Some(Verification::Whole(_)) => "whole".into(),
            Some(Verification::Windowed(_)) => "window by window".into(),
            None => "no".into(),
        },
    }
}

/// Reads a device profile: `demo` is the embedded one, anything else a TOML file.
pub fn load_profile(spec: &str) -> Result<Profile, String> {
    if spec == "demo" {
        return Ok(Profile::demo());
    }
    let text = std::fs::read_to_string(spec)
        .map_err(|e| format!("error: cannot read profile {spec}: {e}\n"))?;
    Profile::from_toml(spec, &text).map_err(|e| format!("error: {e}\n"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_failed_verification_exits_with_1_and_other_errors_with_2() {
        assert_eq!(DriverError::NotEquivalent("x".into()).exit_code(), 1);
        let too_few = CompileError::TooFewIons {
            needed: 3,
            ions: 2,
            device: "d".into(),
        };
        assert_eq!(DriverError::Compile(too_few).exit_code(), 2);
    }
}
