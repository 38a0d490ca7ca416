//! The pulse list, tutti's own text format for native sequences (grammar in
//! grammar/pulses.ebnf), here, and the JSON form for control software (schema in
//! docs/formats.md) in `json`. Both read back to the same [`Sequence`].
//!
//! Invariant: `read_pulses(&write_pulses(s))` equals `s` up to angle rounding of at
//! most one unit in the last place; JSON round-trips exactly.

use super::{names, NativeOp, Sequence, Step};
use crate::circuit::{format_real, Condition, Register};
use crate::qasm::diag::{Diagnostic, SourceMap, Span};
use std::f64::consts::PI;

mod json;

pub use json::{read_json, write_json, write_json_to, JSON_VERSION};
/// Writes an angle as a multiple of pi when it is one with a small denominator (to
/// within a few units in the last place), otherwise as radians with full precision.
/// A tiny angle is never written as a multiple of pi: `1e-13` is not `0*pi`.
pub fn format_angle(theta: f64) -> String {
    if theta == 0.0 {
        return "0".into();
    }
    for den in 1..=64u32 {
        let k = theta / PI * den as f64;
        let kr = k.round();
        if kr != 0.0 && (k - kr).abs() <= 1e-14 * kr.abs() && kr.abs() < 1e6 {
            let k = kr as i64;
            let num = match k {
                1 => "pi".to_string(),
                -1 => "-pi".to_string(),
                _ => format!("{k}*pi"),
            };
            return if den == 1 {
                num
            } else {
                format!("{num}/{den}")
            };
        }
    }
    format_real(theta)
}

/// Parses `[-] real` or `[-] [real "*"] "pi" ["/" real]`.
pub fn parse_angle(s: &str) -> Option<f64> {
    let (neg, body) = match s.strip_prefix('-') {
        Some(rest) => (true, rest),
        None => (false, s),
    };
    let v = if let Some(at) = body.find("pi") {
        let (before, after) = (&body[..at], &body[at + 2..]);
        let factor = if before.is_empty() {
            1.0
        } else {
            before.strip_suffix('*')?.parse::<f64>().ok()?
        };
        let divisor = if after.is_empty() {
            1.0
        } else {
            after.strip_prefix('/')?.parse::<f64>().ok()?
        };
        factor * PI / divisor
    } else {
        body.parse::<f64>().ok()?
    };
    let v = if neg { -v } else { v };
    v.is_finite().then_some(v)
}

fn condition_text(seq: &Sequence, c: &Condition) -> String {
    format!("if {}=={} ", seq.cregs[c.creg as usize].name, c.value)
}

/// Provenance lines of the pulse list start with this (comments to any reader).
pub const PROVENANCE_PREFIX: &str = "# provenance ";

/// A value on one line: line breaks become spaces.
pub fn one_line(value: &str) -> String {
    value.replace(['\n', '\r'], " ")
}

/// The pulse list of a sequence.
pub fn write_pulses(seq: &Sequence) -> String {
    let mut out = String::new();
    write_pulses_to(seq, &mut out).expect("a String takes any text");
    out
}

/// The pulse list of a sequence, written as it is made (an output of millions of
/// steps is never held twice).
pub fn write_pulses_to(seq: &Sequence, out: &mut dyn std::fmt::Write) -> std::fmt::Result {
    writeln!(
        out,
        "# tutti pulse list: one native operation per line, angles in radians"
    )?;
    if let Some(p) = &seq.provenance {
        for (key, value) in p.fields() {
            writeln!(out, "{PROVENANCE_PREFIX}{key}: {}", one_line(value))?;
        }
    }
    writeln!(out, "ions {}", seq.n_ions)?;
    for r in &seq.cregs {
        writeln!(out, "creg {}[{}]", r.name, r.size)?;
    }
    let mut checkpoints = seq.checkpoints.iter().peekable();
    let mut trace = seq.trace.iter().peekable();
    for (k, step) in seq.steps.iter().enumerate() {
        while checkpoints.next_if(|&&c| c <= k).is_some() {
            writeln!(out, "{CHECKPOINT}")?;
        }
        while let Some(t) = trace.next_if(|t| t.steps <= k) {
            writeln!(out, "{TRACE} {}", t.instrs)?;
        }
        if let Some(c) = &step.condition {
            out.write_str(&condition_text(seq, c))?;
        }
        let a = format_angle;
        let line = match step.op {
            NativeOp::Collective { theta, phi } => {
                format!("{} {} {}", step.op.name(), a(theta), a(phi))
            }
            NativeOp::LightShift { ion, theta } => format!("{} {ion} {}", step.op.name(), a(theta)),
            NativeOp::Ms { theta, phi } => format!("{} {} {}", step.op.name(), a(theta), a(phi)),
            NativeOp::PairMs {
                a: i,
                b,
                theta,
                phi,
            } => format!("{} {i} {b} {} {}", step.op.name(), a(theta), a(phi)),
            NativeOp::Addressed { ion, theta, phi } => {
                format!("{} {ion} {} {}", step.op.name(), a(theta), a(phi))
            }
            NativeOp::VirtualZ { theta } => format!("{} {}", step.op.name(), a(theta)),
            NativeOp::Hide { ion } => format!("{} {ion}", step.op.name()),
            NativeOp::Unhide { ion } => format!("{} {ion}", step.op.name()),
            NativeOp::Measure { ion, clbit } => {
                format!(
                    "{} {ion} -> {}",
                    step.op.name(),
                    clbit_name(&seq.cregs, clbit)
                )
            }
            NativeOp::Reset { ion } => format!("{} {ion}", step.op.name()),
        };
        writeln!(out, "{line}")?;
    }
    for _ in checkpoints {
        writeln!(out, "{CHECKPOINT}")?;
    }
    for t in trace {
        writeln!(out, "{TRACE} {}", t.instrs)?;
    }
    Ok(())
}

fn clbit_name(regs: &[Register], bit: u32) -> String {
    regs.iter()
        .find(|r| bit >= r.offset && bit < r.offset + r.size)
        .map_or(format!("?[{bit}]"), |r| {
            format!("{}[{}]", r.name, bit - r.offset)
        })
}

/// The outcome of reading a pulse list or JSON sequence.
pub struct SeqOutcome {
    pub sequence: Option<Sequence>,
    pub diagnostics: Vec<Diagnostic>,
    pub sources: SourceMap,
}

impl SeqOutcome {
    pub fn render(&self) -> String {
        crate::qasm::diag::render_all(&self.diagnostics, &self.sources)
    }
}

/// Reads a pulse list; every malformed line gives a located error.
pub fn read_pulses(name: &str, text: &str) -> SeqOutcome {
    let mut sources = SourceMap::default();
    let file = sources.add(name, text);
    let mut diags = Vec::new();
    let mut seq = Sequence::default();
    let mut have_ions = false;
    let mut offset = 0usize;
    for raw in text.split_inclusive('\n') {
        let line_start = offset;
        offset += raw.len();
        let content = raw.split('#').next().unwrap_or("").trim_end();
        let lead = content.len() - content.trim_start().len();
        let content = content.trim_start();
        if content.is_empty() {
            continue;
        }
        let span = Span::new(file, line_start + lead..line_start + lead + content.len());
        match parse_line(content, &mut seq, &mut have_ions) {
            Ok(()) => {}
            Err((msg, hint)) => diags.push(Diagnostic::error("bad-pulse", span, msg).hint(hint)),
        }
    }
    if !have_ions && diags.is_empty() {
        diags.push(
            Diagnostic::error(
                "missing-ions",
                Span::new(file, 0..0),
                "the pulse list does not say how many ions it drives",
            )
            .hint("start the list with a line `ions N`"),
        );
    }
    let ok = diags.is_empty();
    seq.provenance = super::Provenance::from_comment_lines(text, PROVENANCE_PREFIX);
    SeqOutcome {
        sequence: ok.then_some(seq),
        diagnostics: diags,
        sources,
    }
}

type LineError = (String, &'static str);

/// The 1-based line of each step of a pulse list (as [`read_pulses`] reads it;
/// lines that do not parse are skipped, so the list is meant for a file that reads).
pub fn pulse_step_lines(text: &str) -> Vec<usize> {
    let mut seq = Sequence::default();
    let mut have_ions = false;
    let mut out = Vec::new();
    for (n, raw) in text.lines().enumerate() {
        let content = raw.split('#').next().unwrap_or("").trim();
        if content.is_empty() {
            continue;
        }
        let before = seq.steps.len();
        if parse_line(content, &mut seq, &mut have_ions).is_ok() && seq.steps.len() > before {
            out.push(n + 1);
        }
    }
    out
}

/// The line of a pulse list that marks a checkpoint (numbered by its order).
pub const CHECKPOINT: &str = "checkpoint";

/// The line of a pulse list that records the compile trace: `trace N` says the
/// circuit's first `N` instructions are done at this point.
pub const TRACE: &str = "trace";

fn parse_line(content: &str, seq: &mut Sequence, have_ions: &mut bool) -> Result<(), LineError> {
    if content == CHECKPOINT {
        seq.checkpoints.push(seq.steps.len());
        return Ok(());
    }
    if let Some(rest) = content
        .strip_prefix(TRACE)
        .filter(|r| r.starts_with([' ', '\t']))
    {
        let hint =
            "`trace N`: the circuit's first N instructions are done here; N grows along the list";
        let instrs: usize = rest.trim().parse().map_err(|_| {
            (
                format!("`{}` is not an instruction count", rest.trim()),
                hint,
            )
        })?;
        if seq.trace.last().is_some_and(|t| t.instrs >= instrs) {
            return Err((
                format!("trace point {instrs} does not come after the one before it"),
                hint,
            ));
        }
        seq.trace.push(crate::native::SyncPoint {
            instrs,
            steps: seq.steps.len(),
        });
        return Ok(());
    }
    let mut words: Vec<&str> = content.split_whitespace().collect();
    let mut condition = None;
    if words[0] == "if" {
        let cond = words.get(1).ok_or((
            "`if` needs a condition".to_string(),
            "write `if c==1 light_shift 0 pi`",
        ))?;
        let (reg, value) = cond.split_once("==").ok_or((
            "expected `register==value`".to_string(),
            "write `if c==1 light_shift 0 pi`",
        ))?;
        let creg = seq.cregs.iter().position(|r| r.name == reg).ok_or((
            format!("classical register `{reg}` is not declared"),
            "declare it with `creg name[size]` first",
        ))?;
        let value = crate::circuit::RegValue::parse_decimal(value)
            .filter(|v| v.fits(seq.cregs[creg].size))
            .ok_or((
                format!(
                    "`{value}` is not a value register `{reg}` of {} bits can hold",
                    seq.cregs[creg].size
                ),
                "use a whole number below 2^size",
            ))?;
        condition = Some(Condition {
            creg: creg as u32,
            value,
        });
        words.drain(..2);
        if words.is_empty() {
            return Err((
                "`if` needs an operation".into(),
                "write `if c==1 light_shift 0 pi`",
            ));
        }
    }
    let n_ions = seq.n_ions;
    let ion = |w: Option<&&str>| -> Result<u32, LineError> {
        let w = w.ok_or(("missing ion number".to_string(), "ions are numbered from 0"))?;
        let i: u32 = w.parse().map_err(|_| {
            (
                format!("`{w}` is not an ion number"),
                "ions are numbered from 0",
            )
        })?;
        if i >= n_ions {
            return Err((
                format!("ion {i} does not exist: the list drives {n_ions} ions"),
                "ions are numbered from 0",
            ));
        }
        Ok(i)
    };
    let angle = |w: Option<&&str>| -> Result<f64, LineError> {
        let w = w.ok_or((
            "missing angle".to_string(),
            "angles are radians, e.g. `0.25`, `pi/2`, `-3*pi/4`",
        ))?;
        parse_angle(w).ok_or((
            format!("`{w}` is not an angle"),
            "angles are radians, e.g. `0.25`, `pi/2`, `-3*pi/4`",
        ))
    };
    let arity = |n: usize| -> Result<(), LineError> {
        if words.len() != n + 1 {
            return Err((
                format!(
                    "`{}` takes {n} argument(s), found {}",
                    words[0],
                    words.len() - 1
                ),
                "see grammar/pulses.ebnf",
            ));
        }
        Ok(())
    };
    if words[0] != "ions" && !*have_ions {
        return Err((
            "the first line must be `ions N`".into(),
            "say how many ions the list drives before any pulse",
        ));
    }
    let op = match words[0] {
        "ions" => {
            arity(1)?;
            if *have_ions {
                return Err((
                    "`ions` is given twice".into(),
                    "keep one `ions N` line at the top",
                ));
            }
            let n: u32 = words[1].parse().map_err(|_| {
                (
                    format!("`{}` is not an ion count", words[1]),
                    "write `ions 40`",
                )
            })?;
            if n == 0 || n > 4096 {
                return Err((
                    format!("{n} ions is out of range"),
                    "an ion count is between 1 and 4096",
                ));
            }
            seq.n_ions = n;
            *have_ions = true;
            return Ok(());
        }
        "creg" => {
            arity(1)?;
            let (name, size) = words[1]
                .strip_suffix(']')
                .and_then(|w| w.split_once('['))
                .ok_or((
                    "expected `creg name[size]`".to_string(),
                    "write `creg c[4]`",
                ))?;
            let size: u32 = size
                .parse()
                .map_err(|_| (format!("`{size}` is not a size"), "write `creg c[4]`"))?;
            if size == 0 || seq.cregs.iter().any(|r| r.name == name) {
                return Err((
                    format!("register `{name}` is empty or declared twice"),
                    "each register has its own name and size > 0",
                ));
            }
            let offset = seq.n_clbits();
            seq.cregs.push(Register {
                name: name.to_string(),
                offset,
                size,
            });
            return Ok(());
        }
        names::CHAIN_ROTATE => {
            arity(2)?;
            NativeOp::Collective {
                theta: angle(words.get(1))?,
                phi: angle(words.get(2))?,
            }
        }
        names::LIGHT_SHIFT => {
            arity(2)?;
            NativeOp::LightShift {
                ion: ion(words.get(1))?,
                theta: angle(words.get(2))?,
            }
        }
        names::CHAIN_MS => {
            arity(2)?;
            NativeOp::Ms {
                theta: angle(words.get(1))?,
                phi: angle(words.get(2))?,
            }
        }
        names::PAIR_MS => {
            arity(4)?;
            let (a, b) = (ion(words.get(1))?, ion(words.get(2))?);
            if a == b {
                return Err((
                    "a pair MS needs two different ions".into(),
                    "write `pair_ms 0 1 pi/2 0`",
                ));
            }
            NativeOp::PairMs {
                a,
                b,
                theta: angle(words.get(3))?,
                phi: angle(words.get(4))?,
            }
        }
        names::ION_ROTATE => {
            arity(3)?;
            NativeOp::Addressed {
                ion: ion(words.get(1))?,
                theta: angle(words.get(2))?,
                phi: angle(words.get(3))?,
            }
        }
        names::FRAME_Z => {
            arity(1)?;
            NativeOp::VirtualZ {
                theta: angle(words.get(1))?,
            }
        }
        names::HIDE => {
            arity(1)?;
            NativeOp::Hide {
                ion: ion(words.get(1))?,
            }
        }
        names::UNHIDE => {
            arity(1)?;
            NativeOp::Unhide {
                ion: ion(words.get(1))?,
            }
        }
        names::RESET => {
            arity(1)?;
            NativeOp::Reset {
                ion: ion(words.get(1))?,
            }
        }
        names::MEASURE => {
            arity(3)?;
            if words[2] != "->" {
                return Err(("expected `->`".into(), "write `measure 0 -> c[0]`"));
            }
            let target = words[3];
            let (name, idx) = target
                .strip_suffix(']')
                .and_then(|w| w.split_once('['))
                .ok_or((
                    format!("`{target}` is not a classical bit"),
                    "write `measure 0 -> c[0]`",
                ))?;
            let reg = seq.cregs.iter().find(|r| r.name == name).ok_or((
                format!("classical register `{name}` is not declared"),
                "declare it with `creg name[size]` first",
            ))?;
            let idx: u32 = idx.parse().map_err(|_| {
                (
                    format!("`{idx}` is not an index"),
                    "write `measure 0 -> c[0]`",
                )
            })?;
            if idx >= reg.size {
                return Err((
                    format!("bit {idx} is out of range for `{name}[{}]`", reg.size),
                    "indices start at 0",
                ));
            }
            NativeOp::Measure {
                ion: ion(words.get(1))?,
                clbit: reg.offset + idx,
            }
        }
        other => return Err((
            format!("unknown pulse `{other}`"),
            "operations are chain_rotate, light_shift, chain_ms, pair_ms, ion_rotate, frame_z, hide, unhide, measure, reset (docs/formats.md)",
        )),
    };
    seq.steps.push(Step {
        op,
        condition: condition.map(Box::new),
    });
    Ok(())
}
