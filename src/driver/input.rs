//! The one reading path of every command: a file of any format (OpenQASM 2, or a
//! sequence tutti wrote as a pulse list, JSON or QASM) read with one set of limits,
//! its errors rendered with file, line and column and also given as data, and the
//! digests of every file read.

use super::*;

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
        let mut out = Vec::new();
        self.render_to(seq, &mut out)
            .expect("a Vec takes any bytes");
        String::from_utf8(out).expect("the writers write UTF-8")
    }

    /// [`Format::render`] into a writer, made while it is written: a sequence of
    /// millions of steps is never held twice, as text beside itself.
    pub fn render_to(self, seq: &Sequence, out: &mut dyn std::io::Write) -> std::io::Result<()> {
        match self {
            Format::Json => write_json_to(seq, out),
            Format::Qasm | Format::Pulses => {
                let mut text = IoText { out, error: None };
                let done = if self == Format::Qasm {
                    write_qasm_to(seq, &mut text)
                } else {
                    write_pulses_to(seq, &mut text)
                };
                match (done, text.error) {
                    (_, Some(e)) => Err(e),
                    (Err(_), None) => Err(std::io::Error::other("formatting failed")),
                    (Ok(()), None) => Ok(()),
                }
            }
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
    load_program_under(path, limits, memory_budget, None)
}

/// [`load_program`]; a sequence is taken as it runs under the light-shift crosstalk
/// of `crosstalk` (a device profile), when given. A circuit is taken as it is.
pub fn load_program_under(
    path: &Path,
    limits: &Limits,
    memory_budget: usize,
    crosstalk: Option<&crate::native::profile::Profile>,
) -> Result<(Program, String), LoadFailure> {
    let (mut loaded, warnings) = load(path, limits)?;
    if let (Loaded::Sequence(s), Some(profile)) = (&mut loaded, crosstalk) {
        if s.n_ions > profile.device.ions {
            return Err(LoadFailure::plain(
                path,
                "too-many-ions",
                format!(
                    "the sequence is for {} ions, but the device `{}` has {}",
                    s.n_ions, profile.device.name, profile.device.ions
                ),
                None,
            ));
        }
        *s = crate::native::crosstalk::apply(s, profile, &[]).0;
    }
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

/// Text formatting into a byte writer, keeping the first write error.
struct IoText<'a> {
    out: &'a mut dyn std::io::Write,
    error: Option<std::io::Error>,
}

impl std::fmt::Write for IoText<'_> {
    fn write_str(&mut self, s: &str) -> std::fmt::Result {
        self.out.write_all(s.as_bytes()).map_err(|e| {
            self.error.get_or_insert(e);
            std::fmt::Error
        })
    }
}
