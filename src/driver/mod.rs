//! The whole job for one file: read (`input`), compile, verify, budget, write
//! (`output`). With the front end's file reading (`qasm::read_file`, includes) and
//! `batch` (which runs this per circuit and keeps its records and summaries), the
//! only library code that touches the file system.

use crate::circuit::Circuit;
use crate::compile::optimize::{compile_optimized, BlockReport, Objective, OptConfig};
use crate::compile::{compile_baseline_bounded, CompileError, Target, DEFAULT_MAX_STEPS};
use crate::native::profile::Profile;
use crate::native::qasm_out::{read_qasm_sequence, write_qasm_to};
use crate::native::text::{read_json, read_pulses, write_json_to, write_pulses_to};
use crate::native::Sequence;
use crate::qasm::{self, Limits};
use crate::report::budget::{budget, stray_error_of, with_crosstalk, Budget};
use crate::sim::program::{circuit_check_bytes, sequence_check_bytes};
use crate::sim::SyncPoint;
use crate::sim::{
    check, check_windows_counted, sync_points_from_origin, CheckConfig, CheckError, Program,
    Verdict, WindowVerdict, WorkCounter,
};
use std::path::Path;

mod input;
mod locate;
mod output;

pub use input::{
    load, load_program, load_program_under, load_traced, ErrorRecord, Format, LoadFailure, Loaded,
    SourceDigest,
};
pub use locate::{equal_by_trace, locate, located_json, located_text, Located, Section};
pub use output::{write_output, write_output_with};
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
    /// Pre-compensate light-shift crosstalk of the profile (`--compensate-crosstalk`);
    /// the output is then verified as it runs under that crosstalk.
    pub compensate_crosstalk: bool,
    /// End an optimizer range at least every this many instructions
    /// (`--trace-every`), so that the output's compile trace has a point that often.
    pub trace_every: Option<usize>,
    /// Leave out the Z rotations that end on qubits just before the final
    /// measurements (`--drop-final-z`), where the whole comparison up to a final
    /// diagonal on the measured qubits proves the output; see [`compile_counted`].
    /// Off by default: the output is then the circuit's unitary, which a plain
    /// `check` confirms.
    pub drop_final_z: bool,
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
            compensate_crosstalk: false,
            trace_every: None,
            drop_final_z: false,
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
                "EQUIVALENT{} (mode {}, distance {} within tolerance {:.1e}, {} qubit(s) compared)",
                if v.final_diagonal {
                    " up to Z rotations before the final measurements"
                } else {
                    ""
                },
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
    /// With `compensate_crosstalk`: the crosstalk error without and with it.
    pub crosstalk: Option<Compensation>,
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
    #[error("crosstalk compensation failed: {0}")]
    Crosstalk(String),
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
            Stage::VerifyWindows => {
                "verifying window by window (too large to compare whole), budgeting alongside"
            }
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
    drop_final_z: bool,
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
            max_range_instrs: cfg
                .trace_every
                .unwrap_or(crate::compile::optimize::MAX_RANGE_INSTRS),
            drop_final_z,
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
///
/// With `drop_final_z`, the Z rotations that would end on qubits just before the
/// final measurements are left out only where a proof follows: verification on,
/// the optimizer, a final run of measurements, and the whole comparison expected to
/// run; it then compares up to a final diagonal on the measured qubits (what the
/// measurements cannot see). When that comparison is refused, the circuit is
/// compiled again with them kept, for the window-by-window proof (which compares
/// unitaries). A failed window names instructions of the circuit with its terminal
/// measurements moved last.
pub fn compile_counted(
    c: &Circuit,
    profile: &Profile,
    cfg: &CompileConfig,
    on_stage: &mut dyn FnMut(Stage),
    counter: &WorkCounter,
) -> Result<Compiled, DriverError> {
    on_stage(Stage::Compile);
    // The optimizer compiles the circuit with its terminal measurements moved last
    // (one readout slot; module `crate::circuit::defer`). Windows are checked against
    // that order, the whole comparison against the circuit as written (the checker
    // moves them too), and the output's trace keeps only the points both share.
    let moved = if cfg.baseline {
        None
    } else {
        crate::circuit::defer::measurements_last(c)
    };
    let (cc, shared) = match &moved {
        Some((m, k)) => (m, *k),
        None => (c, c.instrs.len()),
    };
    // When the whole comparison is sure to be refused, compile for windows at once
    // rather than compiling twice.
    let hopeless = cfg.verify && !cfg.baseline && whole_check_hopeless(c, &cfg.check);
    let drop_z = cfg.verify
        && !cfg.baseline
        && cfg.drop_final_z
        && !hopeless
        && crate::compile::optimize::final_measured(cc).1 < cc.instrs.len()
        && diagonal_check_may_run(c, &cfg.check);
    let mut out = compile_stage(
        cc,
        profile,
        cfg,
        hopeless.then_some(WINDOW_QUBITS),
        drop_z,
        shared,
    )?;
    // The budget and the crosstalk model each read the whole sequence: side by side.
    let figures_of = |out: &Stage1| {
        rayon::join(
            || budget(&out.sequence, profile, c.n_qubits()),
            || {
                out.compensation
                    .is_none()
                    .then(|| stray_error_of(&out.sequence, profile))
                    .flatten()
            },
        )
    };
    let mut budgeted = None;
    let verification = if cfg.verify {
        let whole = if hopeless {
            Err(CheckError::TooSlow {
                qubits: c.n_qubits() as usize,
                operations: c.instrs.len(),
                work: f64::INFINITY,
                budget: cfg.check.max_work,
            })
        } else {
            // What the machine runs: with compensation, the sequence under crosstalk
            // (the proof is then that the compensated program does the circuit on a
            // machine with this crosstalk).
            let applied = out.on_machine(profile, cfg);
            let seq = applied.as_ref().map_or(&out.sequence, |(s, _)| s);
            let whole_bytes = sequence_check_bytes(seq.steps.len(), seq.n_ions as usize)
                .saturating_add(circuit_check_bytes(c.instrs.len()));
            if whole_bytes > cfg.check.memory_budget {
                // Lowering the whole sequence would not fit: go window by window.
                Err(CheckError::TooLarge {
                    qubits: c.n_qubits() as usize,
                    needed: whole_bytes,
                    budget: cfg.check.memory_budget,
                })
            } else {
                on_stage(Stage::Verify);
                let a = Program::from_circuit(c).map_err(CheckError::Lower)?;
                let b = Program::from_sequence(seq);
                // A refusal here is followed by the window-by-window proof, which
                // also finds any difference: no separate search for one.
                let whole = CheckConfig {
                    seek_difference: false,
                    up_to_final_diagonal: cfg.check.up_to_final_diagonal || drop_z,
                    ..cfg.check.clone()
                };
                check(&a, &b, &whole)
            }
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
            Err(e) if e.beyond_budget() => {
                if !cfg.baseline && !hopeless {
                    // Recompile in ranges of few qubits, so that every window is small
                    // (the first output is freed first: it can be most of the memory).
                    on_stage(Stage::Compile);
                    drop(std::mem::take(&mut out.sequence.steps));
                    out = compile_stage(cc, profile, cfg, Some(WINDOW_QUBITS), false, shared)?;
                }
                on_stage(Stage::VerifyWindows);
                let applied = out.on_machine(profile, cfg);
                let (seq, sync) = applied
                    .as_ref()
                    .map_or((&out.sequence, &out.sync), |(s, y)| (s, y));
                // The sequence is final: its budget (sequential for the most part)
                // is taken alongside the windows' proof, on a thread of its own. The
                // proof stays on this thread: a batch job's thread is not one of
                // rayon's workers, so it may wait for a shared memory pool (a worker
                // would be refused instead).
                let (b, figures) = std::thread::scope(|scope| {
                    let side = std::thread::Builder::new()
                        .name("budget".into())
                        .spawn_scoped(scope, || figures_of(&out));
                    let b = check_windows_counted(cc, seq, sync, &cfg.check, counter);
                    let figures = match side {
                        Ok(handle) => handle
                            .join()
                            .unwrap_or_else(|e| std::panic::resume_unwind(e)),
                        // No thread to be had: one after the other.
                        Err(_) => figures_of(&out),
                    };
                    (b, figures)
                });
                budgeted = Some(figures);
                let b = b?;
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
    let (mut budget, stray) = match budgeted {
        Some(figures) => figures,
        None => {
            on_stage(Stage::Budget);
            figures_of(&out)
        }
    };
    let crosstalk = match out.compensation {
        Some(comp) => {
            budget.crosstalk_error = Some(comp.compensated);
            Some(comp)
        }
        None => {
            budget.crosstalk_error = stray;
            None
        }
    };
    Ok(Compiled {
        sequence: out.sequence,
        budget,
        verification,
        blocks: out.blocks,
        crosstalk,
    })
}

/// True when comparing `c` whole with any compile of it must exceed the checker's
/// work bound by far: `c` is not Clifford (so no tableau), and even the circuit's own
/// operations on the qubits its gates touch, over one random state each, cost more
/// than 16 times the bound (the sequence only adds operations). Then the driver
/// compiles in small ranges and verifies window by window straight away; when unsure
/// it compiles whole and falls back (both ways are verified).
fn whole_check_hopeless(c: &Circuit, check: &CheckConfig) -> bool {
    if !check.max_work.is_finite() {
        return false;
    }
    let n = touched_qubits(c);
    if n <= check.max_unitary_qubits || n >= 60 {
        return false;
    }
    let lower_bound = c.instrs.len() as f64 * 2f64.powi(n as i32) * check.trials.max(1) as f64;
    if lower_bound <= 16.0 * check.max_work {
        return false;
    }
    let Ok(program) = Program::from_circuit(c) else {
        return false;
    };
    let mut dev = 0.0;
    let mut scratch = Vec::new();
    program.items.iter().any(|item| match item {
        crate::sim::program::Item::Unitary(k) => {
            scratch.clear();
            crate::sim::tableau::kernel_to_clifford(k, &mut scratch, &mut dev).is_none()
        }
        _ => false,
    })
}

/// When `a` and `b` were found to differ without a final diagonal allowed: a note
/// saying whether they are equal up to one (what `compile --drop-final-z` makes), so
/// that the user knows which check to ask for. `None` when they are not, or when
/// that comparison cannot run.
pub fn final_diagonal_note(a: &Program, b: &Program, cfg: &CheckConfig) -> Option<String> {
    if cfg.up_to_final_diagonal {
        return None;
    }
    let relaxed = CheckConfig {
        up_to_final_diagonal: true,
        seek_difference: false,
        ..cfg.clone()
    };
    match check(a, b, &relaxed) {
        Ok(v) if v.equivalent && v.final_diagonal => Some(
            "the programs are equal up to a diagonal on the qubits measured at the end (same outcome statistics; `compile --drop-final-z` makes such outputs): --up-to-final-diagonal accepts that".into(),
        ),
        _ => None,
    }
}

/// How many qubits the circuit's operations touch.
fn touched_qubits(c: &Circuit) -> usize {
    let mut touched = vec![false; c.n_qubits() as usize];
    for instr in &c.instrs {
        for q in instr.op.qubits() {
            touched[q.0 as usize] = true;
        }
    }
    touched.iter().filter(|&&t| t).count()
}

/// Whether a whole comparison up to a final diagonal may run: it cannot use
/// tableaux, so it needs unitaries (few qubits) or random states within the work
/// bound (counted on the circuit's operations alone, so this is optimistic; a
/// refusal costs a second compile, never soundness). Where it cannot, the Z
/// rotations before the final measurements are kept and a Clifford circuit keeps
/// its exact tableau proof.
fn diagonal_check_may_run(c: &Circuit, check: &CheckConfig) -> bool {
    let n = touched_qubits(c);
    n <= check.max_unitary_qubits
        || (n < 48
            && c.instrs.len() as f64 * 2f64.powi(n as i32) * check.trials.max(1) as f64
                <= check.max_work)
}

/// The step before which each barrier of `c` falls, from the sync points (every
/// compile has one at each barrier: barriers are fences of the optimizer, and the
/// baseline has one at every instruction). A barrier with no sync point on either
/// side is left out.
fn checkpoints_at_barriers(c: &Circuit, sync: &[SyncPoint]) -> Vec<usize> {
    let at = |instrs: usize| {
        if instrs == 0 {
            return Some(0);
        }
        sync.binary_search_by_key(&instrs, |s| s.instrs)
            .ok()
            .map(|k| sync[k].steps)
    };
    c.instrs
        .iter()
        .enumerate()
        .filter(|(_, i)| matches!(i.op, crate::circuit::Op::Barrier { .. }))
        .filter_map(|(k, _)| at(k).or_else(|| at(k + 1)))
        .collect()
}

/// What compensating a sequence's light-shift crosstalk changed: the error the
/// crosstalk would leave without it, and what it leaves with it (pruned commands).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Compensation {
    pub uncompensated: f64,
    pub compensated: f64,
}

/// A compiled sequence with its sync points and block reports, compensated for
/// crosstalk when asked.
struct Stage1 {
    sequence: Sequence,
    sync: Vec<SyncPoint>,
    blocks: Vec<BlockReport>,
    compensation: Option<Compensation>,
}

impl Stage1 {
    /// The sequence as the machine runs it, when that differs from the sequence
    /// (compensated compiles).
    fn on_machine(
        &self,
        profile: &Profile,
        cfg: &CompileConfig,
    ) -> Option<(Sequence, Vec<SyncPoint>)> {
        cfg.compensate_crosstalk
            .then(|| crate::native::crosstalk::apply(&self.sequence, profile, &self.sync))
    }
}

fn compile_stage(
    c: &Circuit,
    profile: &Profile,
    cfg: &CompileConfig,
    window_qubits: Option<usize>,
    drop_final_z: bool,
    shared: usize,
) -> Result<Stage1, DriverError> {
    let (mut sequence, sync, blocks) = compile_one(c, profile, cfg, window_qubits, drop_final_z)?;
    sequence.checkpoints = checkpoints_at_barriers(c, &sync);
    // The trace, less the last point (the whole of both, implied), and only where
    // `c` (terminal measurements perhaps moved) and the circuit as written share
    // their first `shared` instructions.
    sequence.trace = sync
        .iter()
        .copied()
        .filter(|s| s.instrs < c.instrs.len() && s.instrs <= shared)
        .collect();
    if !cfg.compensate_crosstalk {
        return Ok(Stage1 {
            sequence,
            sync,
            blocks,
            compensation: None,
        });
    }
    let uncompensated = crate::native::crosstalk::stray_error(&sequence, profile);
    let (sequence, sync, compensated) =
        crate::native::crosstalk::compensate(&sequence, profile, &sync)
            .map_err(DriverError::Crosstalk)?;
    Ok(Stage1 {
        sequence,
        sync,
        blocks,
        compensation: Some(Compensation {
            uncompensated,
            compensated,
        }),
    })
}

/// Whether `seq` can run on `profile`'s device: it may use fewer ions than the
/// device has, never more.
pub fn fits_device(seq: &Sequence, profile: &Profile) -> Result<(), String> {
    if seq.n_ions > profile.device.ions {
        return Err(format!(
            "error: the sequence is for {} ions, but the device `{}` has {}\n",
            seq.n_ions, profile.device.name, profile.device.ions
        ));
    }
    Ok(())
}

/// The budget of a sequence as it is written (a hand-built or compiled one), on
/// `profile`. The sequence may use fewer ions than the device has, never more.
pub fn budget_sequence(seq: &Sequence, profile: &Profile) -> Result<Budget, String> {
    fits_device(seq, profile)?;
    Ok(with_crosstalk(
        budget(seq, profile, seq.addressed_ion_count()),
        seq,
        profile,
    ))
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
            Some(Verification::Whole(v)) if v.final_diagonal => {
                "whole, up to a diagonal before the final measurements".into()
            }
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
