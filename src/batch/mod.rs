//! Compiling a whole suite: every circuit under some paths, for every setting (a
//! device, a target and a compiler with its objective), in parallel, with one
//! memory budget for all jobs, records that let a re-run skip finished work, a
//! deterministic part of the suite per part, and summaries (`summary`, `chart`).
//! Finding the circuits is `discover`; the records, their checks and `merge` are
//! `records`; this module holds the settings and the run itself.
//!
//! Layout of an output folder `DIR`:
//! - `DIR/batch.json`: the manifest (settings in order, options, part);
//! - `DIR/<setting>/<input path>.pulses` (or `.json`, `.qasm`): each compiled
//!   sequence, in folders that mirror the inputs;
//! - `DIR/records/<setting>/<input path>.json`: each job's row and what it was
//!   computed from (digests of every file read, the options), written after its
//!   output, so a job with a record is finished;
//! - `DIR/summary.{csv,json,md}` and, with several settings, `DIR/summary.svg`.
//!
//! Every file is written atomically (a temporary file, then a rename): a run stopped
//! at any point leaves finished jobs whole and nothing half-written.
//!
//! Threads: jobs run on `jobs` threads of their own, which wait for memory when the
//! budget is in use; the parallel kernels of the checker and the front end's reading
//! ahead of large files run as tasks of rayon's global pool (the command line sizes
//! it to `jobs`), the one pool of the run.

mod discover;
mod records;

pub use discover::{discover, Input};
pub use records::merge;
use records::{
    current_record, options_digest, record_path, remove_stale_temporaries, write_record, Record,
};
pub mod chart;
pub mod summary;

use crate::compile::optimize::Objective;
use crate::compile::Target;
use crate::driver::{self, CompileConfig, Format, SourceDigest, Stage, Verification};
use crate::memory::{Pool, SharedPool};
use crate::qasm::Limits;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Instant;

pub use summary::{Figure, Row, Status};

/// Which compiler a setting runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Compiler {
    Baseline,
    Optimizer(#[serde(with = "objective_name")] Objective),
}

mod objective_name {
    use crate::compile::optimize::Objective;
    pub fn serialize<S: serde::Serializer>(o: &Objective, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(o.name())
    }
    pub fn deserialize<'de, D: serde::Deserializer<'de>>(d: D) -> Result<Objective, D::Error> {
        let name: String = serde::Deserialize::deserialize(d)?;
        Objective::ALL
            .into_iter()
            .find(|o| o.name() == name)
            .ok_or_else(|| serde::de::Error::custom(format!("unknown objective `{name}`")))
    }
}

/// One combination of the swept options.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Setting {
    /// `demo`, or the path of a profile's TOML file.
    pub device: String,
    #[serde(with = "target_name")]
    pub target: Target,
    pub compiler: Compiler,
}

mod target_name {
    use crate::compile::Target;
    pub fn serialize<S: serde::Serializer>(t: &Target, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(t.name())
    }
    pub fn deserialize<'de, D: serde::Deserializer<'de>>(d: D) -> Result<Target, D::Error> {
        let name: String = serde::Deserialize::deserialize(d)?;
        [Target::Collective, Target::Addressed]
            .into_iter()
            .find(|t| t.name() == name)
            .ok_or_else(|| serde::de::Error::custom(format!("unknown target `{name}`")))
    }
}

impl Setting {
    /// The folder name of the setting: `DEVICE-TARGET-COMPILER`, where DEVICE is
    /// `demo` or the profile file's stem, and COMPILER `baseline` or the objective.
    pub fn name(&self) -> String {
        let device = if self.device == "demo" {
            "demo".to_string()
        } else {
            Path::new(&self.device)
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "device".into())
        };
        let device: String = device
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '_' || c == '.' {
                    c
                } else {
                    '_'
                }
            })
            .collect();
        let compiler = match self.compiler {
            Compiler::Baseline => "baseline",
            Compiler::Optimizer(o) => o.name(),
        };
        format!("{device}-{}-{compiler}", self.target.name())
    }

    /// Every combination, devices outermost, then targets, then compilers.
    pub fn sweep(devices: &[String], targets: &[Target], compilers: &[Compiler]) -> Vec<Setting> {
        let mut out = Vec::new();
        for d in devices {
            for &target in targets {
                for &compiler in compilers {
                    out.push(Setting {
                        device: d.clone(),
                        target,
                        compiler,
                    });
                }
            }
        }
        out
    }
}

/// A part of a suite: part `index` (1-based) of `count`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Part {
    pub index: usize,
    pub count: usize,
}

impl Part {
    /// Reads `K/N` with 1 <= K <= N.
    pub fn parse(text: &str) -> Result<Part, String> {
        let (k, n) = text.split_once('/').ok_or_else(|| {
            format!("`{text}` is not K/N (say 2/8 for the second of eight parts)")
        })?;
        let k: usize = k
            .trim()
            .parse()
            .map_err(|_| format!("`{k}` in `{text}` is not a number"))?;
        let n: usize = n
            .trim()
            .parse()
            .map_err(|_| format!("`{n}` in `{text}` is not a number"))?;
        if n == 0 || k == 0 || k > n {
            return Err(format!("part {k}/{n}: K must be between 1 and N"));
        }
        Ok(Part { index: k, count: n })
    }

    /// Whether the circuit at position `i` of the sorted suite is in this part:
    /// circuits are dealt round-robin, every setting of a circuit in one part.
    pub fn holds(&self, i: usize) -> bool {
        i % self.count == self.index - 1
    }
}

/// Everything a batch run needs.
#[derive(Debug, Clone)]
pub struct BatchConfig {
    pub inputs: Vec<PathBuf>,
    pub out: PathBuf,
    pub settings: Vec<Setting>,
    /// Jobs at once (at least 1).
    pub jobs: usize,
    pub verify: bool,
    pub part: Option<Part>,
    pub limits: Limits,
    pub max_steps: usize,
    /// The one memory budget of all jobs together, in bytes.
    pub memory: usize,
    /// Whether `memory` was given (then it is part of what a record was computed
    /// from; the default depends on the machine and is not).
    pub memory_given: bool,
    pub format: Format,
    /// The figure `summary.svg` charts.
    pub chart: Figure,
    /// What identifies the tool (version and a digest of its executable); a change
    /// re-runs every job.
    pub tool: String,
}

/// What identifies this build of tutti: its version and the SHA-256 of its
/// executable (so a rebuilt tool re-runs every job).
pub fn tool_identity() -> String {
    let exe = std::env::current_exe()
        .and_then(std::fs::read)
        .map(|b| driver::sha256_hex(&b)[..16].to_string())
        .unwrap_or_else(|_| "unknown build".into());
    format!("tutti {} ({exe})", env!("CARGO_PKG_VERSION"))
}

/// What a run reports as it goes (to draw progress).
#[derive(Debug, Clone)]
pub enum Event<'a> {
    /// The run knows its jobs: `total` to do, `skipped` of them finished before.
    Planned {
        total: usize,
        skipped: usize,
    },
    Started {
        key: &'a str,
        setting: &'a str,
    },
    Finished {
        row: &'a Row,
    },
}

/// The outcome of a run.
#[derive(Debug)]
pub struct BatchOutcome {
    /// Every row of the run (skipped jobs included), in summary order.
    pub rows: Vec<Row>,
    /// Jobs skipped because their record was current.
    pub skipped: usize,
    /// Notes about inputs left out (links out of the tree).
    pub notes: Vec<String>,
    /// Files written by the summary.
    pub written: Vec<PathBuf>,
}

impl BatchOutcome {
    /// Whether every job succeeded.
    pub fn all_ok(&self) -> bool {
        self.rows.iter().all(|r| r.status != Status::Failed)
    }
}

/// The manifest `DIR/batch.json`.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Manifest {
    pub tool: String,
    pub settings: Vec<Setting>,
    pub part: Option<Part>,
    pub chart: Figure,
}

fn extension(format: Format) -> &'static str {
    match format {
        Format::Qasm => "qasm",
        Format::Pulses => "pulses",
        Format::Json => "json",
    }
}

/// `DIR/<setting>/<key>` with the output format's extension in place of `.qasm`.
pub fn output_path(out: &Path, setting: &str, key: &str, format: Format) -> PathBuf {
    let mut p = out.join(setting).join(key);
    p.set_extension(extension(format));
    p
}

/// Writes `text` to `path` atomically, making its folders.
pub(crate) fn write_atomic(path: &Path, text: &str) -> Result<(), String> {
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir)
            .map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    }
    let input = Path::new("");
    driver::write_output(path, text, input, true).map_err(|e| e.trim_end().to_string())
}

/// Runs the suite. Failed jobs are rows with their diagnostics, not errors; an
/// error is returned only when the run itself cannot go on (the output folder cannot
/// be written, a profile cannot be read).
pub fn run(cfg: &BatchConfig, on_event: &(dyn Fn(Event) + Sync)) -> Result<BatchOutcome, String> {
    if cfg.settings.is_empty() {
        return Err("no setting to run".into());
    }
    for s in &cfg.settings {
        driver::load_profile(&s.device).map_err(|e| e.trim_end().to_string())?;
    }
    let names: Vec<String> = cfg.settings.iter().map(Setting::name).collect();
    for (i, n) in names.iter().enumerate() {
        if names[..i].contains(n) {
            return Err(format!(
                "two settings are both named {n}; give each device once"
            ));
        }
    }
    let (inputs, notes) = discover(&cfg.inputs)?;
    let inputs: Vec<Input> = inputs
        .into_iter()
        .enumerate()
        .filter(|(i, _)| cfg.part.map_or(true, |s| s.holds(*i)))
        .map(|(_, x)| x)
        .collect();
    std::fs::create_dir_all(&cfg.out)
        .map_err(|e| format!("cannot create {}: {e}", cfg.out.display()))?;
    remove_stale_temporaries(&cfg.out);
    let manifest = Manifest {
        tool: cfg.tool.clone(),
        settings: cfg.settings.clone(),
        part: cfg.part,
        chart: cfg.chart,
    };
    let manifest_text = serde_json::to_string_pretty(&manifest).map_err(|e| e.to_string())?;
    write_atomic(&cfg.out.join("batch.json"), &(manifest_text + "\n"))?;

    let options: Vec<String> = cfg
        .settings
        .iter()
        .map(|s| options_digest(cfg, s))
        .collect();
    // Jobs in summary order: by circuit, then setting.
    let mut rows: Vec<Option<Row>> = Vec::new();
    let mut todo = Vec::new();
    for input in &inputs {
        for (s, name) in names.iter().enumerate() {
            let rec = current_record(
                &record_path(&cfg.out, name, &input.key),
                &options[s],
                &cfg.out,
            );
            match rec {
                Some(r) => rows.push(Some(r.row)),
                None => {
                    todo.push((rows.len(), input, s));
                    rows.push(None);
                }
            }
        }
    }
    // Largest files first, so that a long job does not start last and run alone.
    todo.sort_by_key(|&(_, input, _)| {
        std::cmp::Reverse(std::fs::metadata(&input.path).map_or(0, |m| m.len()))
    });
    let skipped = rows.len() - todo.len();
    on_event(Event::Planned {
        total: rows.len(),
        skipped,
    });
    let pool = SharedPool(Arc::new(Pool::new(cfg.memory)));
    let next = AtomicUsize::new(0);
    let results: Mutex<Vec<(usize, Row)>> = Mutex::new(Vec::new());
    let fatal: Mutex<Option<String>> = Mutex::new(None);
    std::thread::scope(|scope| {
        for k in 0..cfg.jobs.max(1).min(todo.len().max(1)) {
            // A thread the system will not give is one job slot fewer, not a crash
            // (the first one is required).
            let spawned = std::thread::Builder::new().spawn_scoped(scope, || loop {
                let i = next.fetch_add(1, Ordering::Relaxed);
                let Some(&(slot, input, s)) = todo.get(i) else {
                    break;
                };
                if fatal.lock().map(|f| f.is_some()).unwrap_or(true) {
                    break;
                }
                on_event(Event::Started {
                    key: &input.key,
                    setting: &names[s],
                });
                let (row, record) =
                    run_job(cfg, input, &cfg.settings[s], &names[s], &options[s], &pool);
                let written = write_record(cfg, &names[s], &input.key, &record);
                on_event(Event::Finished { row: &row });
                if let Err(e) = written {
                    if let Ok(mut f) = fatal.lock() {
                        f.get_or_insert(e);
                    }
                }
                if let Ok(mut r) = results.lock() {
                    r.push((slot, row));
                }
            });
            if let Err(e) = spawned {
                if k == 0 {
                    if let Ok(mut f) = fatal.lock() {
                        f.get_or_insert(format!("cannot start a job thread: {e}"));
                    }
                }
                break;
            }
        }
    });
    if let Some(e) = fatal.into_inner().unwrap_or_else(|e| e.into_inner()) {
        return Err(e);
    }
    for (slot, row) in results.into_inner().unwrap_or_else(|e| e.into_inner()) {
        rows[slot] = Some(row);
    }
    let rows: Vec<Row> = rows.into_iter().flatten().collect();
    let written = summary::write_all(&cfg.out, &manifest, &rows)?;
    Ok(BatchOutcome {
        rows,
        skipped,
        notes,
        written,
    })
}

/// One job: read, compile, verify, budget, write the output. Never panics out: a
/// panic in the library is caught and reported as the job's failure.
fn run_job(
    cfg: &BatchConfig,
    input: &Input,
    setting: &Setting,
    name: &str,
    options: &str,
    pool: &SharedPool,
) -> (Row, Record) {
    let mut row = Row::new(&input.key, name);
    let mut sources = Vec::new();
    let mut output = None;
    let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        job_body(
            cfg,
            input,
            setting,
            name,
            pool,
            &mut row,
            &mut sources,
            &mut output,
        )
    }));
    match outcome {
        Ok(Ok(())) => {}
        Ok(Err(e)) => row.fail(e),
        Err(_) => row.fail(summary::Failure::plain(
            "internal error (a panic); please report it with this file",
        )),
    }
    let record = Record {
        options: options.to_string(),
        sources,
        output,
        row: row.clone(),
    };
    (row, record)
}

#[allow(clippy::too_many_arguments)]
fn job_body(
    cfg: &BatchConfig,
    input: &Input,
    setting: &Setting,
    name: &str,
    pool: &SharedPool,
    row: &mut Row,
    sources: &mut Vec<SourceDigest>,
    output: &mut Option<String>,
) -> Result<(), summary::Failure> {
    // A large file is read ahead in chunks as tasks of the same rayon pool as
    // everything else (its size is the number of jobs): no threads of its own.
    let limits = cfg.limits;
    let started = Instant::now();
    let (loaded, _warnings, digests) =
        driver::load_traced(&input.path, &limits).map_err(summary::Failure::from_load)?;
    // Absolute paths, so that a re-run from another folder finds them.
    *sources = digests
        .into_iter()
        .map(|d| SourceDigest {
            path: std::fs::canonicalize(&d.path)
                .map_or(d.path, |p| p.to_string_lossy().into_owned()),
            ..d
        })
        .collect();
    let circuit = match loaded {
        driver::Loaded::Circuit(c) => c,
        driver::Loaded::Sequence(_) => {
            return Err(summary::Failure::plain(
                "a pulse sequence already, not an OpenQASM 2 circuit",
            ))
        }
    };
    row.qubits = Some(circuit.n_qubits());
    let profile =
        driver::load_profile(&setting.device).map_err(|e| summary::Failure::plain(e.trim_end()))?;
    let (baseline, objective) = match setting.compiler {
        Compiler::Baseline => (true, Objective::default()),
        Compiler::Optimizer(o) => (false, o),
    };
    let defaults = CompileConfig::default();
    let compile_cfg = CompileConfig {
        target: setting.target,
        baseline,
        objective,
        verify: cfg.verify,
        max_steps: cfg.max_steps,
        compensate_crosstalk: false,
        trace_every: None,
        drop_final_z: false,
        check: crate::sim::CheckConfig {
            memory_budget: cfg.memory,
            pool: Some(pool.clone()),
            ..defaults.check
        },
    };
    // Time spent in each stage: compiling (and recompiling for windows) or verifying.
    let mut compile_s = 0.0;
    let mut verify_s = 0.0;
    let mut stage = Stage::Compile;
    let mut since = started;
    let mut on_stage = |next: Stage| {
        let now = Instant::now();
        let spent = now.duration_since(since).as_secs_f64();
        match stage {
            Stage::Verify | Stage::VerifyWindows => verify_s += spent,
            _ => compile_s += spent,
        }
        stage = next;
        since = now;
    };
    let counter = crate::sim::WorkCounter::default();
    let compiled =
        driver::compile_counted(&circuit, &profile, &compile_cfg, &mut on_stage, &counter);
    on_stage(Stage::Budget);
    row.compile_s = compile_s;
    row.verify_s = verify_s;
    let mut compiled = compiled.map_err(|e| summary::Failure::plain(&e.to_string()))?;
    compiled.sequence.provenance = Some(driver::provenance(
        &input.path,
        &setting.device,
        setting.target,
        &driver::compiler_name(&compile_cfg),
        compiled.verification.as_ref(),
    ));
    // The source in the provenance is the key: the same whatever folder the suite
    // was run from.
    if let Some(p) = compiled.sequence.provenance.as_mut() {
        p.source = input.key.clone();
    }
    let path = output_path(&cfg.out, name, &input.key, cfg.format);
    write_atomic(&path, &cfg.format.render(&compiled.sequence))
        .map_err(|e| summary::Failure::plain(&e))?;
    *output = path
        .strip_prefix(&cfg.out)
        .ok()
        .map(|p| p.to_string_lossy().into_owned());
    row.set_budget(&compiled.budget);
    match &compiled.verification {
        Some(Verification::Whole(v)) => {
            row.status = Status::Verified;
            row.mode = format!("whole, {}", v.mode.name());
            row.distance = v.distance.map(summary::two_digits);
        }
        Some(Verification::Windowed(w)) => {
            row.status = Status::Verified;
            row.mode = format!("{} windows, {}", w.windows, w.mode.name());
            row.distance = w.distance.map(summary::two_digits);
        }
        None => {
            row.status = Status::Unverified;
            row.mode = "not verified".into();
        }
    }
    Ok(())
}
