//! The pulse list, tutti's own text format for native sequences (grammar in
//! grammar/pulses.ebnf), and the JSON form for control software (schema in
//! docs/formats.md). Both read back to the same [`Sequence`].
//!
//! Invariant: `read_pulses(&write_pulses(s))` equals `s` up to angle rounding of at
//! most one unit in the last place; JSON round-trips exactly.

use super::{names, NativeOp, Sequence, Step};
use crate::circuit::{format_real, Condition, Register};
use crate::qasm::diag::{Diagnostic, SourceMap, Span};
use std::f64::consts::PI;
use std::fmt::Write;

/// Writes an angle as a multiple of pi when it is one with a small denominator,
/// otherwise as radians with full precision.
pub fn format_angle(theta: f64) -> String {
    if theta == 0.0 {
        return "0".into();
    }
    for den in 1..=64u32 {
        let k = theta / PI * den as f64;
        let kr = k.round();
        if (k - kr).abs() < 1e-12 && kr.abs() < 1e6 {
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
    let _ = writeln!(
        out,
        "# tutti pulse list: one native operation per line, angles in radians"
    );
    if let Some(p) = &seq.provenance {
        for (key, value) in p.fields() {
            let _ = writeln!(out, "{PROVENANCE_PREFIX}{key}: {}", one_line(value));
        }
    }
    let _ = writeln!(out, "ions {}", seq.n_ions);
    for r in &seq.cregs {
        let _ = writeln!(out, "creg {}[{}]", r.name, r.size);
    }
    for step in &seq.steps {
        if let Some(c) = &step.condition {
            out.push_str(&condition_text(seq, c));
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
        let _ = writeln!(out, "{line}");
    }
    out
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

fn parse_line(content: &str, seq: &mut Sequence, have_ions: &mut bool) -> Result<(), LineError> {
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

/// `"when": {"register": "c", "equals": 1}` on a conditioned step.
#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct JsonWhen {
    register: String,
    /// A number, or a decimal string when it does not fit 64 bits.
    equals: crate::circuit::RegValue,
}

/// One step of the `program` list: the operation's one name under `op` (the
/// names of [`names`]; each `rename` must equal its constant, which
/// tests/native_formats.rs checks on the written JSON), its ions, angles and bit.
#[derive(serde::Serialize, serde::Deserialize)]
#[serde(tag = "op")]
enum JsonOp {
    #[serde(rename = "chain_rotate")]
    ChainRotate { theta: f64, phi: f64 },
    #[serde(rename = "light_shift")]
    LightShift { ion: u32, theta: f64 },
    #[serde(rename = "chain_ms")]
    ChainMs { theta: f64, phi: f64 },
    #[serde(rename = "pair_ms")]
    PairMs {
        ions: [u32; 2],
        theta: f64,
        phi: f64,
    },
    #[serde(rename = "ion_rotate")]
    IonRotate { ion: u32, theta: f64, phi: f64 },
    #[serde(rename = "frame_z")]
    FrameZ { theta: f64 },
    #[serde(rename = "hide")]
    Hide { ion: u32 },
    #[serde(rename = "unhide")]
    Unhide { ion: u32 },
    #[serde(rename = "measure")]
    Measure { ion: u32, bit: u32 },
    #[serde(rename = "reset")]
    Reset { ion: u32 },
}

impl From<NativeOp> for JsonOp {
    fn from(op: NativeOp) -> JsonOp {
        match op {
            NativeOp::Collective { theta, phi } => JsonOp::ChainRotate { theta, phi },
            NativeOp::LightShift { ion, theta } => JsonOp::LightShift { ion, theta },
            NativeOp::Ms { theta, phi } => JsonOp::ChainMs { theta, phi },
            NativeOp::PairMs { a, b, theta, phi } => JsonOp::PairMs {
                ions: [a, b],
                theta,
                phi,
            },
            NativeOp::Addressed { ion, theta, phi } => JsonOp::IonRotate { ion, theta, phi },
            NativeOp::VirtualZ { theta } => JsonOp::FrameZ { theta },
            NativeOp::Hide { ion } => JsonOp::Hide { ion },
            NativeOp::Unhide { ion } => JsonOp::Unhide { ion },
            NativeOp::Measure { ion, clbit } => JsonOp::Measure { ion, bit: clbit },
            NativeOp::Reset { ion } => JsonOp::Reset { ion },
        }
    }
}

impl From<JsonOp> for NativeOp {
    fn from(op: JsonOp) -> NativeOp {
        match op {
            JsonOp::ChainRotate { theta, phi } => NativeOp::Collective { theta, phi },
            JsonOp::LightShift { ion, theta } => NativeOp::LightShift { ion, theta },
            JsonOp::ChainMs { theta, phi } => NativeOp::Ms { theta, phi },
            JsonOp::PairMs {
                ions: [a, b],
                theta,
                phi,
            } => NativeOp::PairMs { a, b, theta, phi },
            JsonOp::IonRotate { ion, theta, phi } => NativeOp::Addressed { ion, theta, phi },
            JsonOp::FrameZ { theta } => NativeOp::VirtualZ { theta },
            JsonOp::Hide { ion } => NativeOp::Hide { ion },
            JsonOp::Unhide { ion } => NativeOp::Unhide { ion },
            JsonOp::Measure { ion, bit } => NativeOp::Measure { ion, clbit: bit },
            JsonOp::Reset { ion } => NativeOp::Reset { ion },
        }
    }
}

/// A step. Its keys beyond the operation's and `when` are ignored (serde cannot
/// refuse them through `flatten`); the top level refuses unknown keys.
#[derive(serde::Serialize, serde::Deserialize)]
struct JsonStep {
    #[serde(flatten)]
    op: JsonOp,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    when: Option<JsonWhen>,
}

/// A classical register: `bits` lists them in order, and bit `k` of the program
/// counts across them.
#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct JsonBits {
    register: String,
    size: u32,
}

#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct JsonSequence {
    /// The version of this shape; its presence marks a tutti sequence.
    tutti_sequence: u32,
    /// Where the sequence came from (docs/formats.md); ignored by every check.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    provenance: Option<super::Provenance>,
    ions: u32,
    #[serde(default)]
    bits: Vec<JsonBits>,
    program: Vec<JsonStep>,
}

/// The version of the JSON shape this tutti writes and reads.
pub const JSON_VERSION: u32 = 2;

/// The JSON form of a sequence (docs/formats.md).
pub fn write_json(seq: &Sequence) -> String {
    let j = JsonSequence {
        tutti_sequence: JSON_VERSION,
        provenance: seq.provenance.clone(),
        ions: seq.n_ions,
        bits: seq
            .cregs
            .iter()
            .map(|r| JsonBits {
                register: r.name.clone(),
                size: r.size,
            })
            .collect(),
        program: seq
            .steps
            .iter()
            .map(|s| JsonStep {
                op: s.op.into(),
                when: s.condition.as_ref().map(|c| JsonWhen {
                    register: seq.cregs[c.creg as usize].name.clone(),
                    equals: c.value.clone(),
                }),
            })
            .collect(),
    };
    serde_json::to_string_pretty(&j).expect("sequences serialise") + "\n"
}

/// Reads the JSON form, validating ion indices and registers.
pub fn read_json(name: &str, text: &str) -> SeqOutcome {
    let mut sources = SourceMap::default();
    let file = sources.add(name, text);
    let fail = |sources: SourceMap, at: usize, message: String, hint: &str| SeqOutcome {
        sequence: None,
        diagnostics: vec![
            Diagnostic::error("bad-json", Span::new(file, at..at + 1), message).hint(hint),
        ],
        sources,
    };
    let j: JsonSequence = match serde_json::from_str(text) {
        Ok(j) => j,
        Err(e) => {
            let at = line_offset(text, e.line(), e.column());
            return fail(
                sources,
                at,
                format!("not a tutti sequence: {e}"),
                "see docs/formats.md for the schema",
            );
        }
    };
    if j.tutti_sequence != JSON_VERSION {
        return fail(
            sources,
            0,
            format!(
                "this is a tutti sequence of version {}; this tutti reads version {JSON_VERSION}",
                j.tutti_sequence
            ),
            "see docs/formats.md",
        );
    }
    let mut seq = Sequence::new(j.ions, vec![]);
    seq.provenance = j.provenance;
    for r in j.bits {
        let offset = seq.n_clbits();
        seq.cregs.push(Register {
            name: r.register,
            offset,
            size: r.size,
        });
    }
    for (k, step) in j.program.into_iter().enumerate() {
        let op: NativeOp = step.op.into();
        let ions: Vec<u32> = match op {
            NativeOp::LightShift { ion, .. }
            | NativeOp::Addressed { ion, .. }
            | NativeOp::Hide { ion }
            | NativeOp::Unhide { ion }
            | NativeOp::Measure { ion, .. }
            | NativeOp::Reset { ion } => vec![ion],
            NativeOp::PairMs { a, b, .. } => vec![a, b],
            _ => vec![],
        };
        if ions.iter().any(|&i| i >= seq.n_ions) {
            return fail(
                sources,
                0,
                format!("step {k} names an ion beyond the {} ions", seq.n_ions),
                "ions are numbered from 0",
            );
        }
        if let NativeOp::PairMs { a, b, .. } = op {
            if a == b {
                return fail(
                    sources,
                    0,
                    format!("step {k} is a pair MS on ion {a} twice"),
                    "a pair MS needs two different ions",
                );
            }
        }
        if let NativeOp::Measure { clbit, .. } = op {
            if clbit >= seq.n_clbits() {
                return fail(
                    sources,
                    0,
                    format!("step {k} measures into bit {clbit}, which no register holds"),
                    "declare registers",
                );
            }
        }
        let condition = match step.when {
            None => None,
            Some(c) => match seq.cregs.iter().position(|r| r.name == c.register) {
                Some(i) if !c.equals.fits(seq.cregs[i].size) => {
                    return fail(
                        sources,
                        0,
                        format!(
                        "step {k} compares register `{}` of {} bits with {}, which it cannot hold",
                        c.register, seq.cregs[i].size, c.equals
                    ),
                        "use a value below 2^size",
                    )
                }
                Some(i) => Some(Condition {
                    creg: i as u32,
                    value: c.equals,
                }),
                None => {
                    return fail(
                        sources,
                        0,
                        format!("step {k} tests unknown register `{}`", c.register),
                        "declare registers",
                    )
                }
            },
        };
        seq.steps.push(Step {
            op,
            condition: condition.map(Box::new),
        });
    }
    SeqOutcome {
        sequence: Some(seq),
        diagnostics: vec![],
        sources,
    }
}

fn line_offset(text: &str, line: usize, column: usize) -> usize {
    let start: usize = text
        .split_inclusive('\n')
        .take(line.saturating_sub(1))
        .map(str::len)
        .sum();
    (start + column.saturating_sub(1)).min(text.len().saturating_sub(1))
}
