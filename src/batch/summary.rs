//! The rows of a batch run and their summaries: `summary.csv`, `summary.json`,
//! `summary.md`, the terminal table, and the comparison of settings.
//!
//! Invariant: the summaries depend only on the rows and the manifest, rows come in a
//! fixed order (circuit key, then setting as given), and numbers are printed with a
//! fixed number of places, so everything but the timing columns (`compile_s`,
//! `verify_s`) is byte-identical whatever the number of jobs or parts.

use super::{chart, Manifest};
use crate::native::budget::Budget;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// How a job ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Compiled and proven equal to its circuit.
    Verified,
    /// Compiled with verification switched off.
    Unverified,
    /// Not compiled, or not proven equal: see the row's error.
    Failed,
}

impl Status {
    pub fn name(self) -> &'static str {
        match self {
            Status::Verified => "verified",
            Status::Unverified => "unverified",
            Status::Failed => "failed",
        }
    }
}

/// The budget figures of a compiled sequence (those of [`Budget`] but the idle
/// times).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Figures {
    pub ms_pulses: usize,
    pub ms_area: f64,
    pub entangling_depth: usize,
    pub collective_pulses: usize,
    pub light_shifts: usize,
    pub ion_rotations: usize,
    pub hide_operations: usize,
    pub measurements: usize,
    pub duration_us: f64,
    pub est_error: f64,
}

/// One figure, to chart or compare.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Figure {
    MsPulses,
    MsArea,
    EntanglingDepth,
    CollectivePulses,
    LightShifts,
    IonRotations,
    HideOperations,
    Measurements,
    DurationUs,
    EstError,
}

impl Figure {
    pub const ALL: [Figure; 10] = [
        Figure::MsPulses,
        Figure::MsArea,
        Figure::EntanglingDepth,
        Figure::CollectivePulses,
        Figure::LightShifts,
        Figure::IonRotations,
        Figure::HideOperations,
        Figure::Measurements,
        Figure::DurationUs,
        Figure::EstError,
    ];

    /// The figures the comparison table shows.
    pub const COMPARED: [Figure; 5] = [
        Figure::MsPulses,
        Figure::MsArea,
        Figure::LightShifts,
        Figure::DurationUs,
        Figure::EstError,
    ];

    /// The column name (the budget's field name).
    pub fn name(self) -> &'static str {
        match self {
            Figure::MsPulses => "ms_pulses",
            Figure::MsArea => "ms_area",
            Figure::EntanglingDepth => "entangling_depth",
            Figure::CollectivePulses => "collective_pulses",
            Figure::LightShifts => "light_shifts",
            Figure::IonRotations => "ion_rotations",
            Figure::HideOperations => "hide_operations",
            Figure::Measurements => "measurements",
            Figure::DurationUs => "duration_us",
            Figure::EstError => "est_error",
        }
    }

    pub fn from_name(name: &str) -> Option<Figure> {
        Figure::ALL.into_iter().find(|f| f.name() == name)
    }

    pub fn value(self, f: &Figures) -> f64 {
        match self {
            Figure::MsPulses => f.ms_pulses as f64,
            Figure::MsArea => f.ms_area,
            Figure::EntanglingDepth => f.entangling_depth as f64,
            Figure::CollectivePulses => f.collective_pulses as f64,
            Figure::LightShifts => f.light_shifts as f64,
            Figure::IonRotations => f.ion_rotations as f64,
            Figure::HideOperations => f.hide_operations as f64,
            Figure::Measurements => f.measurements as f64,
            Figure::DurationUs => f.duration_us,
            Figure::EstError => f.est_error,
        }
    }

    /// The value as the summaries print it (fixed places).
    pub fn format(self, v: f64) -> String {
        match self {
            Figure::MsArea => format!("{v:.4}"),
            Figure::DurationUs => format!("{v:.3}"),
            Figure::EstError => format!("{v:.6}"),
            _ => format!("{v:.0}"),
        }
    }
}

/// Why a job failed: a message and, for input errors, where.
#[derive(Debug, Clone, PartialEq)]
pub struct Failure {
    pub message: String,
}

impl Failure {
    pub fn plain(message: &str) -> Failure {
        Failure {
            message: message.trim_start_matches("error: ").trim_end().to_string(),
        }
    }

    /// The located diagnostics of a file that could not be read: `file:line:column:
    /// message` for each error, joined by `; `.
    pub fn from_load(f: crate::driver::LoadFailure) -> Failure {
        let parts: Vec<String> = f
            .errors
            .iter()
            .map(|e| {
                let place = match (&e.file, e.line, e.column) {
                    (Some(file), Some(l), Some(c)) => format!("{file}:{l}:{c}: "),
                    (Some(file), _, _) => format!("{file}: "),
                    _ => String::new(),
                };
                format!("{place}{} [{}]", e.message, e.code)
            })
            .collect();
        Failure {
            message: if parts.is_empty() {
                f.rendered.trim_end().to_string()
            } else {
                parts.join("; ")
            },
        }
    }
}

/// One job's line in the summaries.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Row {
    /// The circuit's key (its path below the folder searched).
    pub path: String,
    pub setting: String,
    pub status: Status,
    pub qubits: Option<u32>,
    pub figures: Option<Figures>,
    /// How it was verified: `whole, MODE` or `N windows, MODE`.
    pub mode: String,
    /// The largest distance found (against the tolerance of its mode).
    pub distance: Option<f64>,
    pub error: Option<String>,
    pub compile_s: f64,
    pub verify_s: f64,
}

impl Row {
    pub fn new(path: &str, setting: &str) -> Row {
        Row {
            path: path.into(),
            setting: setting.into(),
            status: Status::Failed,
            qubits: None,
            figures: None,
            mode: String::new(),
            distance: None,
            error: None,
            compile_s: 0.0,
            verify_s: 0.0,
        }
    }

    pub fn fail(&mut self, f: Failure) {
        self.status = Status::Failed;
        self.figures = None;
        self.error = Some(f.message);
    }

    pub fn set_budget(&mut self, b: &Budget) {
        self.figures = Some(Figures {
            ms_pulses: b.ms_pulses,
            ms_area: b.ms_area,
            entangling_depth: b.entangling_depth,
            collective_pulses: b.collective_pulses,
            light_shifts: b.light_shifts,
            ion_rotations: b.addressed_rotations,
            hide_operations: b.hide_operations,
            measurements: b.measurements,
            duration_us: b.duration_us,
            est_error: b.est_error,
        });
    }

    /// Equal in everything but the timing.
    pub fn same_result(&self, other: &Row) -> bool {
        Row {
            compile_s: 0.0,
            verify_s: 0.0,
            ..self.clone()
        } == Row {
            compile_s: 0.0,
            verify_s: 0.0,
            ..other.clone()
        }
    }

    fn distance_text(&self) -> String {
        self.distance
            .map_or_else(String::new, |d| format!("{d:.1e}"))
    }
}

/// `x` to two significant digits, as the summaries print it. Distances are kept so:
/// their last digits depend on the order of parallel sums, which depends on the
/// number of threads, and the summaries must not.
pub fn two_digits(x: f64) -> f64 {
    format!("{x:.1e}").parse().unwrap_or(x)
}

/// The CSV header; the timing columns are the last two.
pub fn csv_header() -> String {
    let mut h = vec!["path", "setting", "status", "qubits"];
    h.extend(Figure::ALL.iter().map(|f| f.name()));
    h.extend(["mode", "distance", "error", "compile_s", "verify_s"]);
    h.join(",")
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

pub fn csv(rows: &[Row]) -> String {
    let mut out = csv_header();
    out.push('\n');
    for r in rows {
        let mut cells = vec![
            csv_field(&r.path),
            csv_field(&r.setting),
            r.status.name().to_string(),
            r.qubits.map_or_else(String::new, |q| q.to_string()),
        ];
        for f in Figure::ALL {
            cells.push(
                r.figures
                    .map_or_else(String::new, |x| f.format(f.value(&x))),
            );
        }
        cells.push(csv_field(&r.mode));
        cells.push(r.distance_text());
        cells.push(csv_field(r.error.as_deref().unwrap_or("")));
        cells.push(format!("{:.3}", r.compile_s));
        cells.push(format!("{:.3}", r.verify_s));
        out.push_str(&cells.join(","));
        out.push('\n');
    }
    out
}

/// Per setting: its name, jobs that succeeded and failed, and for each compared
/// figure the geometric mean over the circuits every setting compiled with a
/// positive value, and its ratio to the first setting's.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Comparison {
    pub setting: String,
    pub succeeded: usize,
    pub failed: usize,
    /// `(figure, geometric mean, ratio to the first setting)`.
    pub means: Vec<(String, Option<f64>, Option<f64>)>,
    /// Circuits the means are taken over, per figure.
    pub circuits: Vec<usize>,
}

/// The figures of each circuit under each setting, in row order (rows come grouped
/// by circuit): one entry per circuit, the figures of setting `k` at index `k`
/// (`None` where the job failed or is not in the rows).
pub(super) type Grid<'r> = Vec<(&'r str, Vec<Option<Figures>>)>;

pub(super) fn grid<'r>(settings: &[String], rows: &'r [Row]) -> Grid<'r> {
    let index: std::collections::HashMap<&str, usize> = settings
        .iter()
        .enumerate()
        .map(|(k, s)| (s.as_str(), k))
        .collect();
    let mut out: Grid<'r> = Vec::new();
    for r in rows {
        if out.last().map_or(true, |(p, _)| *p != r.path) {
            out.push((r.path.as_str(), vec![None; settings.len()]));
        }
        if let (Some(&k), Some(last)) = (index.get(r.setting.as_str()), out.last_mut()) {
            last.1[k] = r.figures;
        }
    }
    out
}

pub fn compare(settings: &[String], rows: &[Row]) -> Vec<Comparison> {
    let table = grid(settings, rows);
    let mut out: Vec<Comparison> = settings
        .iter()
        .map(|s| Comparison {
            setting: s.clone(),
            succeeded: rows
                .iter()
                .filter(|r| &r.setting == s && r.status != Status::Failed)
                .count(),
            failed: rows
                .iter()
                .filter(|r| &r.setting == s && r.status == Status::Failed)
                .count(),
            means: Vec::new(),
            circuits: Vec::new(),
        })
        .collect();
    for f in Figure::COMPARED {
        // The circuits with a positive value of f in every setting.
        let mut logs = vec![0.0; settings.len()];
        let mut count = 0;
        for (_, figures) in &table {
            let values: Option<Vec<f64>> = figures
                .iter()
                .map(|x| x.map(|x| f.value(&x)).filter(|v| *v > 0.0))
                .collect();
            if let Some(v) = values {
                for (l, x) in logs.iter_mut().zip(v) {
                    *l += x.ln();
                }
                count += 1;
            }
        }
        let means: Vec<Option<f64>> = logs
            .iter()
            .map(|l| (count > 0).then(|| (l / count as f64).exp()))
            .collect();
        for (s, c) in out.iter_mut().enumerate() {
            let ratio = match (means[s], means[0]) {
                (Some(m), Some(m0)) => Some(m / m0),
                _ => None,
            };
            c.means.push((f.name().into(), means[s], ratio));
            c.circuits.push(count);
        }
    }
    out
}

fn opt(v: Option<f64>, f: impl Fn(f64) -> String) -> String {
    v.map_or_else(|| "-".into(), f)
}

/// The comparison as a Markdown table: geometric mean (ratio to the first setting).
pub fn comparison_markdown(cmp: &[Comparison]) -> String {
    let mut out = String::from("| setting | succeeded | failed |");
    for f in Figure::COMPARED {
        let _ = write!(out, " {} |", f.name());
    }
    out.push_str("\n|---|---:|---:|");
    for _ in Figure::COMPARED {
        out.push_str("---:|");
    }
    out.push('\n');
    for c in cmp {
        let _ = write!(out, "| {} | {} | {} |", c.setting, c.succeeded, c.failed);
        for (f, (_, m, r)) in Figure::COMPARED.iter().zip(&c.means) {
            let _ = write!(
                out,
                " {} ({}) |",
                opt(*m, |v| f.format(v)),
                opt(*r, |v| format!("{v:.3}"))
            );
        }
        out.push('\n');
    }
    if let Some(c) = cmp.first() {
        let counts: Vec<String> = Figure::COMPARED
            .iter()
            .zip(&c.circuits)
            .map(|(f, n)| format!("{} over {n}", f.name()))
            .collect();
        let _ = writeln!(
            out,
            "\nGeometric means over the circuits every setting compiled with a positive value ({}); in brackets, the ratio to the first setting.",
            counts.join(", ")
        );
    }
    out
}

/// The rows as a Markdown table, then the failures with their diagnostics, then the
/// comparison when there are several settings.
pub fn markdown(manifest: &Manifest, rows: &[Row]) -> String {
    let mut out = String::from("# Batch summary\n\n");
    let _ = writeln!(out, "Tool: {}\n", manifest.tool);
    out.push_str("Settings, in order (the first is the reference):\n\n");
    for s in &manifest.settings {
        let _ = writeln!(out, "- {}", s.name());
    }
    if let Some(sh) = manifest.part {
        let _ = writeln!(out, "\nPart {} of {}.", sh.index, sh.count);
    }
    let failed = rows.iter().filter(|r| r.status == Status::Failed).count();
    let _ = writeln!(out, "\n{} job(s), {} failed.\n", rows.len(), failed);
    out.push_str("| path | setting | status | qubits |");
    for f in Figure::COMPARED {
        let _ = write!(out, " {} |", f.name());
    }
    out.push_str(" mode | compile_s | verify_s |\n|---|---|---|---:|");
    for _ in Figure::COMPARED {
        out.push_str("---:|");
    }
    out.push_str("---|---:|---:|\n");
    for r in rows {
        let _ = write!(
            out,
            "| {} | {} | {} | {} |",
            md_cell(&r.path),
            r.setting,
            r.status.name(),
            r.qubits.map_or_else(String::new, |q| q.to_string())
        );
        for f in Figure::COMPARED {
            let _ = write!(
                out,
                " {} |",
                r.figures
                    .map_or_else(String::new, |x| f.format(f.value(&x)))
            );
        }
        let _ = writeln!(
            out,
            " {} | {:.3} | {:.3} |",
            r.mode, r.compile_s, r.verify_s
        );
    }
    if failed > 0 {
        out.push_str("\n## Failures\n\n");
        for r in rows.iter().filter(|r| r.status == Status::Failed) {
            let _ = writeln!(
                out,
                "- `{}` ({}): {}",
                r.path,
                r.setting,
                md_cell(r.error.as_deref().unwrap_or(""))
            );
        }
    }
    if manifest.settings.len() > 1 {
        let names: Vec<String> = manifest.settings.iter().map(|s| s.name()).collect();
        out.push_str("\n## Comparison\n\n");
        out.push_str(&comparison_markdown(&compare(&names, rows)));
        let _ = writeln!(out, "\nChart of {}: summary.svg", manifest.chart.name());
    }
    out
}

fn md_cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

/// A plain-text table of the rows for the terminal, and the comparison.
pub fn terminal(manifest: &Manifest, rows: &[Row]) -> String {
    let mut table: Vec<Vec<String>> = vec![{
        let mut h = vec![
            "path".to_string(),
            "setting".into(),
            "status".into(),
            "qubits".into(),
        ];
        h.extend(Figure::COMPARED.iter().map(|f| f.name().to_string()));
        h
    }];
    for r in rows {
        let mut line = vec![
            r.path.clone(),
            r.setting.clone(),
            r.status.name().into(),
            r.qubits.map_or_else(String::new, |q| q.to_string()),
        ];
        line.extend(Figure::COMPARED.iter().map(|f| {
            r.figures
                .map_or_else(|| "-".into(), |x| f.format(f.value(&x)))
        }));
        table.push(line);
    }
    let mut out = align(&table);
    if manifest.settings.len() > 1 {
        let names: Vec<String> = manifest.settings.iter().map(|s| s.name()).collect();
        let cmp = compare(&names, rows);
        let mut t: Vec<Vec<String>> = vec![{
            let mut h = vec!["setting".to_string(), "ok".into(), "failed".into()];
            h.extend(
                Figure::COMPARED
                    .iter()
                    .map(|f| format!("{} (ratio)", f.name())),
            );
            h
        }];
        for c in &cmp {
            let mut line = vec![
                c.setting.clone(),
                c.succeeded.to_string(),
                c.failed.to_string(),
            ];
            for (f, (_, m, r)) in Figure::COMPARED.iter().zip(&c.means) {
                line.push(format!(
                    "{} ({})",
                    opt(*m, |v| f.format(v)),
                    opt(*r, |v| format!("{v:.3}"))
                ));
            }
            t.push(line);
        }
        out.push_str(
            "\ngeometric means over circuits every setting compiled; ratio to the first setting\n",
        );
        out.push_str(&align(&t));
    }
    out
}

/// Columns padded to their widest cell; text left, numbers right.
fn align(table: &[Vec<String>]) -> String {
    let cols = table.iter().map(Vec::len).max().unwrap_or(0);
    let widths: Vec<usize> = (0..cols)
        .map(|c| {
            table
                .iter()
                .filter_map(|r| r.get(c))
                .map(|s| s.chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut out = String::new();
    for row in table {
        let cells: Vec<String> = row
            .iter()
            .enumerate()
            .map(|(c, s)| {
                if c >= 3 {
                    format!("{s:>w$}", w = widths[c])
                } else {
                    format!("{s:<w$}", w = widths[c])
                }
            })
            .collect();
        out.push_str(cells.join("  ").trim_end());
        out.push('\n');
    }
    out
}

/// The JSON summary: manifest, rows, and the comparison.
pub fn json(manifest: &Manifest, rows: &[Row]) -> Result<String, String> {
    let names: Vec<String> = manifest.settings.iter().map(|s| s.name()).collect();
    let value = serde_json::json!({
        "tool": manifest.tool,
        "settings": names,
        "part": manifest.part,
        "rows": rows,
        "comparison": compare(&names, rows),
    });
    serde_json::to_string_pretty(&value)
        .map(|s| s + "\n")
        .map_err(|e| e.to_string())
}

/// Writes every summary into `dir` (atomically) and returns their paths.
pub fn write_all(dir: &Path, manifest: &Manifest, rows: &[Row]) -> Result<Vec<PathBuf>, String> {
    let mut files = vec![
        ("summary.csv", csv(rows)),
        ("summary.json", json(manifest, rows)?),
        ("summary.md", markdown(manifest, rows)),
    ];
    if manifest.settings.len() > 1 {
        let names: Vec<String> = manifest.settings.iter().map(|s| s.name()).collect();
        files.push(("summary.svg", chart::svg(&names, rows, manifest.chart)));
    }
    let mut written = Vec::new();
    for (name, text) in files {
        let path = dir.join(name);
        super::write_atomic(&path, &text)?;
        written.push(path);
    }
    Ok(written)
}
