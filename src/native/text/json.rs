//! The JSON form of a sequence for control software (schema in docs/formats.md):
//! steps with their operation, condition and provenance, written and read back
//! exactly; read errors are located by line and column.

use super::*;

/// `"when": {"register": "c", "equals": 1}` on a conditioned step.
#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct JsonWhen {
    register: String,
    /// A number, or a decimal string when it does not fit 64 bits.
    equals: crate::circuit::RegValue,
}

/// One step of the `program` list: the operation's one name under `op` (the
/// names of [`names`]; each `rename` must equal its constant, which
/// tests/native_formats.rs checks on the written JSON), its ions, angles and bit.
#[derive(serde::Serialize, serde::Deserialize)]
#[serde(tag = "op")]
pub(super) enum JsonOp {
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
pub(super) struct JsonStep {
    #[serde(flatten)]
    op: JsonOp,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    when: Option<JsonWhen>,
}

/// A classical register: `bits` lists them in order, and bit `k` of the program
/// counts across them.
#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct JsonBits {
    register: String,
    size: u32,
}

#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct JsonSequence {
    /// The version of this shape; its presence marks a tutti sequence.
    tutti_sequence: u32,
    /// Where the sequence came from (docs/formats.md); ignored by every check.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    provenance: Option<crate::native::Provenance>,
    ions: u32,
    #[serde(default)]
    bits: Vec<JsonBits>,
    program: Vec<JsonStep>,
    /// Checkpoint `k` lies before step `checkpoints[k]` (0-based).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    checkpoints: Vec<usize>,
    /// The compile trace: `[instructions, step]` pairs (docs/formats.md).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    trace: Vec<[usize; 2]>,
}

/// The version of the JSON shape this tutti writes and reads.
pub const JSON_VERSION: u32 = 2;

/// The JSON form of a sequence (docs/formats.md).
pub fn write_json(seq: &Sequence) -> String {
    let mut out = Vec::new();
    write_json_to(seq, &mut out).expect("a Vec takes any bytes");
    String::from_utf8(out).expect("serde_json writes UTF-8")
}

/// The steps of a sequence as JSON, made one by one while they are written.
struct Program<'a>(&'a Sequence);

impl serde::Serialize for Program<'_> {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let seq = self.0;
        s.collect_seq(seq.steps.iter().map(|st| JsonStep {
            op: st.op.into(),
            when: st.condition.as_ref().map(|c| JsonWhen {
                register: seq.cregs[c.creg as usize].name.clone(),
                equals: c.value.clone(),
            }),
        }))
    }
}

/// [`JsonSequence`] as written: the same fields in the same order, the program
/// made while it is written.
#[derive(serde::Serialize)]
struct JsonSequenceOut<'a> {
    tutti_sequence: u32,
    #[serde(skip_serializing_if = "Option::is_none")]
    provenance: Option<&'a crate::native::Provenance>,
    ions: u32,
    bits: Vec<JsonBits>,
    program: Program<'a>,
    #[serde(skip_serializing_if = "<[usize]>::is_empty")]
    checkpoints: &'a [usize],
    #[serde(skip_serializing_if = "Vec::is_empty")]
    trace: Vec<[usize; 2]>,
}

/// [`write_json`], written as it is made (an output of millions of steps is never
/// held twice).
pub fn write_json_to(seq: &Sequence, out: &mut dyn std::io::Write) -> std::io::Result<()> {
    let j = JsonSequenceOut {
        tutti_sequence: JSON_VERSION,
        provenance: seq.provenance.as_ref(),
        checkpoints: &seq.checkpoints,
        trace: seq.trace.iter().map(|t| [t.instrs, t.steps]).collect(),
        ions: seq.n_ions,
        bits: seq
            .cregs
            .iter()
            .map(|r| JsonBits {
                register: r.name.clone(),
                size: r.size,
            })
            .collect(),
        program: Program(seq),
    };
    serde_json::to_writer_pretty(&mut *out, &j).map_err(std::io::Error::from)?;
    out.write_all(b"\n")
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
    if j.checkpoints.windows(2).any(|w| w[0] > w[1])
        || j.checkpoints.last().is_some_and(|&c| c > j.program.len())
    {
        return fail(
            sources,
            0,
            format!(
                "the checkpoints {:?} are not in order within the {} steps",
                j.checkpoints,
                j.program.len()
            ),
            "checkpoint k lies before step checkpoints[k]: non-decreasing, at most the step count",
        );
    }
    seq.checkpoints = j.checkpoints;
    if j.trace
        .windows(2)
        .any(|w| w[0][0] >= w[1][0] || w[0][1] > w[1][1])
        || j.trace.last().is_some_and(|t| t[1] > j.program.len())
    {
        return fail(
            sources,
            0,
            format!(
                "the trace {:?} is not in order within the {} steps",
                j.trace,
                j.program.len()
            ),
            "trace points are [instructions, step]: instructions increasing, steps non-decreasing, at most the step count",
        );
    }
    seq.trace = j
        .trace
        .iter()
        .map(|t| crate::native::SyncPoint {
            instrs: t[0],
            steps: t[1],
        })
        .collect();
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

pub(super) fn line_offset(text: &str, line: usize, column: usize) -> usize {
    let start: usize = text
        .split_inclusive('\n')
        .take(line.saturating_sub(1))
        .map(str::len)
        .sum();
    (start + column.saturating_sub(1)).min(text.len().saturating_sub(1))
}
