//! `check --locate`: where a sequence first parts from its circuit, or from another
//! sequence (a hand-edited one from the one compiled). Checkpoints are the circuit's
//! barriers and the sequence's checkpoint lines (pulse list `checkpoint`, QASM
//! output `barrier q;`, JSON `checkpoints`), matched in order: the k-th of each
//! side correspond. The sections between them are compared one by
//! one (window by window, so a section equal on both sides is proven equal), and
//! the first that differs is named with its lines on both sides.

use super::*;
use crate::native::NativeOp;
use std::fmt::Write as _;

/// Where two programs part, or that they do not.
#[derive(Debug, Clone, PartialEq)]
pub struct Located {
    /// Sections compared (checkpoints + 1).
    pub sections: usize,
    /// The section-by-section verdict.
    pub verdict: WindowVerdict,
    /// The first section that differs, when one does.
    pub section: Option<Section>,
    /// Between two sequences: the steps of that section that differ (what is left
    /// when the steps both sides share at its start and end are set aside).
    pub changed: Option<Changed>,
    /// Set when the sections are the windows of the compile trace (a sequence and
    /// its circuit without checkpoints): the first differing window's instructions
    /// (half-open, 0-based) and their text.
    pub traced: Option<Traced>,
    /// Whether the sections are the trace's windows, and whether the circuit was
    /// the first file given.
    pub by_trace: bool,
    pub circuit_first: bool,
    /// When a section differs: the verdict on the whole programs (equivalent, and
    /// what differs), or why they could not be compared.
    pub whole: Option<Result<(bool, String), String>>,
}

impl Located {
    /// 0 when the programs are equivalent (section by section, or as wholes), 1
    /// when the wholes are proven different, 2 when a section differs but the
    /// wholes could not be compared.
    pub fn exit_code(&self) -> u8 {
        if self.verdict.equivalent {
            return 0;
        }
        match &self.whole {
            Some(Ok((true, _))) => 0,
            Some(Ok((false, _))) => 1,
            _ => 2,
        }
    }
}

/// The window of the compile trace where a sequence first parts from its circuit.
#[derive(Debug, Clone, PartialEq)]
pub struct Traced {
    pub instrs: (usize, usize),
    /// The instructions as OpenQASM (at most a few; the count of the rest).
    pub text: String,
    /// The window's steps (half-open, 0-based) and their pulse-list lines.
    pub steps: (usize, usize),
    pub lines: Option<(usize, usize)>,
}

/// The steps of a section that differ between two sequences: half-open step ranges
/// on each side, their lines where the format has lines, and the ions they act on.
#[derive(Debug, Clone, PartialEq)]
pub struct Changed {
    pub first: (usize, usize),
    pub second: (usize, usize),
    pub first_lines: Option<(usize, usize)>,
    pub second_lines: Option<(usize, usize)>,
    /// Ions named by the differing steps; `every_ion` when one of them acts on the
    /// whole chain (a collective rotation, a frame change, a chain MS pulse).
    pub ions: Vec<u32>,
    pub every_ion: bool,
}

/// A section of both files: its number (0: before the first checkpoint), and the
/// lines it spans in the first and the second file (`None` where the format has no
/// lines, as in JSON).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Section {
    pub index: usize,
    pub first: Option<(usize, usize)>,
    pub second: Option<(usize, usize)>,
}

/// The 1-based lines of the top-level statements starting with `word` (a circuit's
/// barriers outside gate bodies, or a pulse list's checkpoints).
fn lines_of(text: &str, word: &str, qasm: bool) -> Vec<usize> {
    let mut depth = 0i32;
    let mut out = Vec::new();
    for (n, line) in text.lines().enumerate() {
        let code = line.split("//").next().unwrap_or("");
        let code = if qasm {
            code
        } else {
            code.split('#').next().unwrap_or("")
        };
        let t = code.trim_start();
        if depth == 0
            && t.starts_with(word)
            && t[word.len()..]
                .chars()
                .next()
                .map_or(true, |c| !(c.is_alphanumeric() || c == '_'))
        {
            out.push(n + 1);
        }
        if qasm {
            depth += code.matches('{').count() as i32 - code.matches('}').count() as i32;
        }
    }
    out
}

/// The lines a section spans: from the line after checkpoint `k - 1` (or the first
/// line) to the line before checkpoint `k` (or the last line).
fn span(lines: &[usize], k: usize, last: usize) -> (usize, usize) {
    let from = if k == 0 { 1 } else { lines[k - 1] + 1 };
    let to = lines.get(k).map_or(last, |l| l.saturating_sub(1));
    (from, to.max(from))
}

/// Compares `a` with `b` (a circuit and a sequence in either order, or two
/// sequences) section by section. When a section differs, the whole programs are
/// compared too: sections that differ do not prove that the wholes do (a pulse
/// moved across a checkpoint changes two sections and not the whole), so the
/// verdict on the wholes decides what is reported ([`Located::exit_code`]).
pub fn locate(a: &Path, b: &Path, limits: &Limits, cfg: &CheckConfig) -> Result<Located, String> {
    let read = |p: &Path| -> Result<(Loaded, String), String> {
        let (loaded, _) = load(p, limits).map_err(|e| e.rendered)?;
        let text =
            std::fs::read_to_string(p).map_err(|e| format!("error: {}: {e}\n", p.display()))?;
        Ok((loaded, text))
    };
    let (la, ta) = read(a)?;
    let (lb, tb) = read(b)?;
    let mut found = locate_sections((a, &la, &ta), (b, &lb, &tb), cfg)?;
    if !found.verdict.equivalent {
        found.whole = Some(match (&la, &lb) {
            // Two sequences: one window with the steps both share at the ends set
            // aside (exact), as the sections were compared.
            (Loaded::Sequence(sa), Loaded::Sequence(sb)) => {
                crate::sim::check_sequence_windows(sa, sb, &[(sa.steps.len(), sb.steps.len())], cfg)
                    .map(|w| (w.equivalent, w.detail))
                    .map_err(|e| e.to_string())
            }
            _ => {
                let lower = |l: &Loaded| match l {
                    Loaded::Circuit(c) => Program::from_circuit(c).map_err(|e| e.to_string()),
                    Loaded::Sequence(s) => Ok(Program::from_sequence(s)),
                };
                lower(&la).and_then(|pa| {
                    let pb = lower(&lb)?;
                    crate::sim::check(&pa, &pb, cfg)
                        .map(|v| (v.equivalent, v.detail))
                        .map_err(|e| e.to_string())
                })
            }
        });
    }
    Ok(found)
}

/// [`locate`]'s comparison section by section.
fn locate_sections(
    (a, la, ta): (&Path, &Loaded, &str),
    (b, lb, tb): (&Path, &Loaded, &str),
    cfg: &CheckConfig,
) -> Result<Located, String> {
    let (circuit, ctext, seq, spath, stext, swapped) = match (la, lb) {
        (Loaded::Circuit(c), Loaded::Sequence(s)) => (c, ta, s, b, tb, false),
        (Loaded::Sequence(s), Loaded::Circuit(c)) => (c, tb, s, a, ta, true),
        (Loaded::Sequence(sa), Loaded::Sequence(sb)) => {
            return locate_sequences((sa, a, ta), (sb, b, tb), cfg)
        }
        (Loaded::Circuit(_), Loaded::Circuit(_)) => {
            return Err(
                "error: --locate compares a sequence with its circuit or with another sequence; two circuits are not supported\n"
                    .into(),
            )
        }
    };
    let barriers: Vec<usize> = circuit
        .instrs
        .iter()
        .enumerate()
        .filter(|(_, i)| matches!(i.op, crate::circuit::Op::Barrier { .. }))
        .map(|(k, _)| k)
        .collect();
    if barriers.is_empty() && seq.checkpoints.is_empty() && !seq.trace.is_empty() {
        return locate_by_trace(circuit, ctext, seq, spath, stext, cfg).map(|l| Located {
            circuit_first: !swapped,
            ..l
        });
    }
    if barriers.len() != seq.checkpoints.len() {
        return Err(format!(
            "error: the circuit has {} barrier(s) and the sequence {} checkpoint(s); --locate matches the k-th of each, so they must be as many\n",
            barriers.len(),
            seq.checkpoints.len()
        ));
    }
    let mut sync: Vec<SyncPoint> = barriers
        .iter()
        .zip(&seq.checkpoints)
        .map(|(&i, &s)| SyncPoint {
            instrs: i + 1,
            steps: s,
        })
        .collect();
    sync.push(SyncPoint {
        instrs: circuit.instrs.len(),
        steps: seq.steps.len(),
    });
    // Barriers at the very end give sync points equal to the last: drop repeats.
    sync.dedup_by_key(|s| s.instrs);
    let verdict =
        crate::sim::check_windows(circuit, seq, &sync, cfg).map_err(|e| format!("error: {e}\n"))?;
    let section = verdict.first_difference.map(|k| {
        let c_lines = span(&lines_of(ctext, "barrier", true), k, ctext.lines().count());
        let s_lines = sequence_lines(spath, stext, k);
        let (first, second) = if swapped {
            (s_lines, Some(c_lines))
        } else {
            (Some(c_lines), s_lines)
        };
        Section {
            index: k,
            first,
            second,
        }
    });
    Ok(Located {
        sections: sync.len(),
        verdict,
        section,
        changed: None,
        traced: None,
        by_trace: false,
        circuit_first: !swapped,
        whole: None,
    })
}

/// The lines section `k` spans in a sequence file (`None` for JSON, which has no
/// lines to speak of).
fn sequence_lines(path: &Path, text: &str, k: usize) -> Option<(usize, usize)> {
    let word = match Format::sniff(path, text) {
        Format::Json => return None,
        Format::Qasm => "barrier",
        Format::Pulses => crate::native::text::CHECKPOINT,
    };
    let qasm = word == "barrier";
    Some(span(&lines_of(text, word, qasm), k, text.lines().count()))
}

/// Compares two sequences section by section, their k-th checkpoints matched.
fn locate_sequences(
    (sa, pa, ta): (&Sequence, &Path, &str),
    (sb, pb, tb): (&Sequence, &Path, &str),
    cfg: &CheckConfig,
) -> Result<Located, String> {
    if sa.checkpoints.len() != sb.checkpoints.len() {
        return Err(format!(
            "error: the first sequence has {} checkpoint(s) and the second {}; --locate matches the k-th of each, so they must be as many\n",
            sa.checkpoints.len(),
            sb.checkpoints.len()
        ));
    }
    let mut cuts: Vec<(usize, usize)> = sa
        .checkpoints
        .iter()
        .copied()
        .zip(sb.checkpoints.iter().copied())
        .collect();
    cuts.push((sa.steps.len(), sb.steps.len()));
    let verdict = crate::sim::check_sequence_windows(sa, sb, &cuts, cfg)
        .map_err(|e| format!("error: {e}\n"))?;
    let section = verdict.first_difference.map(|k| Section {
        index: k,
        first: sequence_lines(pa, ta, k),
        second: sequence_lines(pb, tb, k),
    });
    let changed = verdict.first_difference.map(|k| {
        let start = |c: &[usize], k: usize| if k == 0 { 0 } else { c[k - 1] };
        let ra = (start(&sa.checkpoints, k), cuts[k].0);
        let rb = (start(&sb.checkpoints, k), cuts[k].1);
        changed_steps((sa, pa, ta, ra), (sb, pb, tb, rb))
    });
    Ok(Located {
        sections: cuts.len(),
        verdict,
        section,
        changed,
        traced: None,
        by_trace: false,
        circuit_first: false,
        whole: None,
    })
}

/// The differing steps of two step ranges: the ranges less their common start and
/// common end.
fn changed_steps(
    (sa, pa, ta, ra): (&Sequence, &Path, &str, (usize, usize)),
    (sb, pb, tb, rb): (&Sequence, &Path, &str, (usize, usize)),
) -> Changed {
    let (xa, xb) = (&sa.steps[ra.0..ra.1], &sb.steps[rb.0..rb.1]);
    let head = xa.iter().zip(xb).take_while(|(x, y)| alike(x, y)).count();
    let tail = xa[head..]
        .iter()
        .rev()
        .zip(xb[head..].iter().rev())
        .take_while(|(x, y)| alike(x, y))
        .count();
    let first = (ra.0 + head, ra.1 - tail);
    let second = (rb.0 + head, rb.1 - tail);
    let mut ions = Vec::new();
    let mut every_ion = false;
    for step in sa.steps[first.0..first.1]
        .iter()
        .chain(&sb.steps[second.0..second.1])
    {
        match step.op {
            NativeOp::Collective { .. } | NativeOp::Ms { .. } | NativeOp::VirtualZ { .. } => {
                every_ion = true
            }
            NativeOp::PairMs { a, b, .. } => ions.extend([a, b]),
            NativeOp::LightShift { ion, .. }
            | NativeOp::Addressed { ion, .. }
            | NativeOp::Hide { ion }
            | NativeOp::Unhide { ion }
            | NativeOp::Measure { ion, .. }
            | NativeOp::Reset { ion } => ions.push(ion),
        }
    }
    ions.sort_unstable();
    ions.dedup();
    Changed {
        first,
        second,
        first_lines: step_lines(pa, ta, first),
        second_lines: step_lines(pb, tb, second),
        ions,
        every_ion,
    }
}

/// Whether two steps are the same operation, angles within 1e-12 rad (the formats
/// round-trip angles to about an ulp, so a file and its copy in another format may
/// differ in the last digit). Used only to point at what changed, never for a
/// verdict.
fn alike(x: &crate::native::Step, y: &crate::native::Step) -> bool {
    use NativeOp as N;
    let near = |a: f64, b: f64| (a - b).abs() <= 1e-12;
    let ops = match (x.op, y.op) {
        (N::Collective { theta: a, phi: p }, N::Collective { theta: b, phi: q })
        | (N::Ms { theta: a, phi: p }, N::Ms { theta: b, phi: q }) => near(a, b) && near(p, q),
        (N::LightShift { ion: i, theta: a }, N::LightShift { ion: j, theta: b }) => {
            i == j && near(a, b)
        }
        (N::VirtualZ { theta: a }, N::VirtualZ { theta: b }) => near(a, b),
        (
            N::PairMs {
                a: i,
                b: j,
                theta: a,
                phi: p,
            },
            N::PairMs {
                a: k,
                b: l,
                theta: b,
                phi: q,
            },
        ) => i == k && j == l && near(a, b) && near(p, q),
        (
            N::Addressed {
                ion: i,
                theta: a,
                phi: p,
            },
            N::Addressed {
                ion: j,
                theta: b,
                phi: q,
            },
        ) => i == j && near(a, b) && near(p, q),
        (a, b) => a == b,
    };
    ops && x.condition == y.condition
}

/// The lines of a half-open step range in a pulse list (`None` for other formats,
/// or for an empty range).
fn step_lines(path: &Path, text: &str, (from, to): (usize, usize)) -> Option<(usize, usize)> {
    if to <= from || Format::sniff(path, text) != Format::Pulses {
        return None;
    }
    let lines = crate::native::text::pulse_step_lines(text);
    Some((*lines.get(from)?, *lines.get(to - 1)?))
}

/// Compares a sequence with its circuit window by window along the compile trace
/// the sequence carries, when neither has checkpoints. The trace is the compiler's
/// claim; it is trusted only for the circuit it was made from (the SHA-256 the
/// sequence records), and every window is then proven like any other.
fn locate_by_trace(
    circuit: &Circuit,
    ctext: &str,
    seq: &Sequence,
    spath: &Path,
    stext: &str,
    cfg: &CheckConfig,
) -> Result<Located, String> {
    if let Some(p) = &seq.provenance {
        let digest = crate::driver::sha256_hex(ctext.as_bytes());
        if !p.source_sha256.is_empty() && p.source_sha256 != digest {
            return Err(format!(
                "error: the sequence's trace was made from a circuit with SHA-256 {}, not this file ({digest}); put barriers in the circuit and checkpoints in the sequence to locate against another circuit\n",
                p.source_sha256
            ));
        }
    }
    let mut sync = seq.trace.clone();
    let fits = sync
        .windows(2)
        .all(|w| w[0].instrs < w[1].instrs && w[0].steps <= w[1].steps)
        && sync
            .last()
            .is_some_and(|t| t.instrs < circuit.instrs.len() && t.steps <= seq.steps.len());
    if !fits {
        return Err(format!(
            "error: the sequence's trace does not fit this circuit of {} instruction(s) (it names instructions up to {})\n",
            circuit.instrs.len(),
            sync.last().map_or(0, |t| t.instrs)
        ));
    }
    sync.push(SyncPoint {
        instrs: circuit.instrs.len(),
        steps: seq.steps.len(),
    });
    let verdict =
        crate::sim::check_windows(circuit, seq, &sync, cfg).map_err(|e| format!("error: {e}\n"))?;
    let traced = verdict.first_difference.map(|k| {
        let from = if k == 0 {
            SyncPoint {
                instrs: 0,
                steps: 0,
            }
        } else {
            sync[k - 1]
        };
        let to = sync[k];
        Traced {
            instrs: (from.instrs, to.instrs),
            text: instructions_text(circuit, from.instrs..to.instrs),
            steps: (from.steps, to.steps),
            lines: step_lines(spath, stext, (from.steps, to.steps)),
        }
    });
    Ok(Located {
        sections: sync.len(),
        verdict,
        section: None,
        changed: None,
        traced,
        by_trace: true,
        circuit_first: true,
        whole: None,
    })
}

/// Instructions of a circuit as OpenQASM statements, at most six of them.
fn instructions_text(c: &Circuit, range: std::ops::Range<usize>) -> String {
    use crate::circuit::Op;
    let qubit = |q: crate::circuit::Qubit| register_name(&c.qregs, q.0);
    let bit = |b: crate::circuit::Clbit| register_name(&c.cregs, b.0);
    let mut parts = Vec::new();
    for instr in &c.instrs[range.clone()] {
        if parts.len() == 6 {
            parts.push(format!("and {} more", range.len() - 6));
            break;
        }
        let body = match &instr.op {
            Op::Gate { gate, qubits } => {
                let params = if gate.params().is_empty() {
                    String::new()
                } else {
                    let p: Vec<String> = gate.params().iter().map(|x| format!("{x}")).collect();
                    format!("({})", p.join(","))
                };
                let q: Vec<String> = qubits.iter().map(|&q| qubit(q)).collect();
                format!("{}{params} {}", gate.kind.name(), q.join(","))
            }
            Op::Opaque { decl, qubits, .. } => {
                let q: Vec<String> = qubits.iter().map(|&q| qubit(q)).collect();
                format!("{} {}", c.opaque[*decl as usize].name, q.join(","))
            }
            Op::Barrier { qubits } => {
                let q: Vec<String> = qubits.iter().map(|&q| qubit(q)).collect();
                format!("barrier {}", q.join(","))
            }
            Op::Measure { qubit: q, clbit } => format!("measure {} -> {}", qubit(*q), bit(*clbit)),
            Op::Reset { qubit: q } => format!("reset {}", qubit(*q)),
        };
        let cond = instr.condition.as_ref().map_or(String::new(), |k| {
            format!("if({}=={}) ", c.cregs[k.creg as usize].name, k.value)
        });
        parts.push(format!("{cond}{body};"))
    }
    parts.join(" ")
}

/// `name[index]` of a flat qubit or bit index.
fn register_name(regs: &[crate::circuit::Register], flat: u32) -> String {
    regs.iter()
        .find(|r| flat >= r.offset && flat < r.offset + r.size)
        .map_or(format!("?[{flat}]"), |r| {
            format!("{}[{}]", r.name, flat - r.offset)
        })
}

/// What `check --locate` prints: equal section by section, or the first section
/// that differs, with its lines in each file and what differs.
pub fn located_text(
    l: &crate::driver::Located,
    a: &std::path::Path,
    b: &std::path::Path,
) -> String {
    let mut out = String::new();
    let v = &l.verdict;
    if v.equivalent {
        let _ =
            writeln!(
            out,
            "EQUIVALENT section by section ({} section{} between {}, mode {}, worst distance {})",
            l.sections,
            if l.sections == 1 { "" } else { "s" },
            if l.by_trace { "trace points" } else { "checkpoints" },
            v.mode.name(),
            fmt_distance(v.distance)
        );
        return out;
    }
    if let Some(t) = &l.traced {
        let instrs = if t.instrs.1 == t.instrs.0 + 1 {
            format!("instruction {}", t.instrs.1)
        } else {
            format!("instructions {} to {}", t.instrs.0 + 1, t.instrs.1)
        };
        let steps = match t.steps.1 - t.steps.0 {
            0 => "no step".to_string(),
            1 => format!("step {}", t.steps.1),
            _ => format!("steps {} to {}", t.steps.0 + 1, t.steps.1),
        };
        let _ = writeln!(
            out,
            "{}",
            headline(
                l,
                &format!("at {instrs} of the circuit (aligned by the compile trace)")
            )
        );
        let (circuit, sequence) = if l.circuit_first { (a, b) } else { (b, a) };
        let _ = writeln!(
            out,
            "  circuit      {}: {instrs}: {}",
            circuit.display(),
            t.text
        );
        let _ = match t.lines {
            Some((x, y)) => writeln!(
                out,
                "  sequence     {}: lines {x} to {y} ({steps})",
                sequence.display()
            ),
            None => writeln!(out, "  sequence     {}: {steps}", sequence.display()),
        };
        let _ = writeln!(out, "  detail       {}", v.detail);
        whole_line(l, &mut out);
        return out;
    }
    let _ = writeln!(
        out,
        "{}",
        headline(
            l,
            &format!("in section {}", l.section.map_or(0, |s| s.index))
        )
    );
    if let Some(Section {
        index: k,
        first: la,
        second: lb,
    }) = &l.section
    {
        let place = |p: &std::path::Path, lines: &Option<(usize, usize)>| match lines {
            Some((x, y)) => format!("{}: lines {x} to {y}", p.display()),
            None => format!("{}: between checkpoints {k} and {}", p.display(), k + 1),
        };
        let what = if *k == 0 {
            "before the first checkpoint".to_string()
        } else if *k + 1 == l.sections {
            format!("after checkpoint {k} (the last)")
        } else {
            format!("between checkpoints {k} and {}", k + 1)
        };
        let _ = writeln!(out, "  section      {k}: {what}");
        let _ = writeln!(out, "  first        {}", place(a, la));
        let _ = writeln!(out, "  second       {}", place(b, lb));
    }
    if let Some(c) = &l.changed {
        let side =
            |p: &std::path::Path, (from, to): (usize, usize), lines: Option<(usize, usize)>| {
                let steps = match to - from {
                    0 => "no step".to_string(),
                    1 => format!("step {}", from + 1),
                    _ => format!("steps {} to {}", from + 1, to),
                };
                match lines {
                    Some((x, y)) if x == y => format!("{}: line {x} ({steps})", p.display()),
                    Some((x, y)) => format!("{}: lines {x} to {y} ({steps})", p.display()),
                    None => format!("{}: {steps}", p.display()),
                }
            };
        let _ = writeln!(out, "  changed      {}", side(a, c.first, c.first_lines));
        let _ = writeln!(out, "               {}", side(b, c.second, c.second_lines));
        let mut ions: Vec<String> = c.ions.iter().take(12).map(|i| i.to_string()).collect();
        if c.ions.len() > 12 {
            ions.push(format!("and {} more", c.ions.len() - 12));
        }
        if c.every_ion {
            ions.push("every ion (a whole-chain pulse)".into());
        }
        if !ions.is_empty() {
            let _ = writeln!(out, "  ions         {}", ions.join(", "));
        }
    }
    let _ = writeln!(out, "  detail       {}", v.detail);
    whole_line(l, &mut out);
    out
}

/// The first line of a report where a section differs: what is proven about the
/// whole programs decides it.
fn headline(l: &Located, place: &str) -> String {
    match &l.whole {
        Some(Ok((true, _))) => format!(
            "EQUIVALENT as a whole, though they part {place}: the sections do not correspond (a later one undoes the difference)"
        ),
        Some(Err(_)) => format!(
            "NOT PROVEN: they part {place}, but the whole programs could not be compared, so a later section may undo the difference"
        ),
        _ => format!("NOT EQUIVALENT: they part {place}"),
    }
}

/// Why the whole programs could not be compared, when they could not.
fn whole_line(l: &Located, out: &mut String) {
    if let Some(Err(e)) = &l.whole {
        let _ = writeln!(out, "  whole        {e}");
    }
}

/// A proof of equivalence along the compile trace, for a comparison refused as too
/// large or too slow: when one file is a circuit and the other a sequence whose
/// trace was made from it, and every window of the trace is proven equal, the
/// whole sequence is (the product of equal windows is equal). `None` when there is
/// no such trace, or a window is not proven equal (a window that differs proves
/// nothing about the whole: a later one may undo it).
pub fn equal_by_trace(
    a: &Path,
    b: &Path,
    limits: &Limits,
    cfg: &CheckConfig,
) -> Option<WindowVerdict> {
    let read = |p: &Path| -> Option<(Loaded, String)> {
        let (loaded, _) = load(p, limits).ok()?;
        Some((loaded, std::fs::read_to_string(p).ok()?))
    };
    let (la, ta) = read(a)?;
    let (lb, tb) = read(b)?;
    let (circuit, ctext, seq) = match (&la, &lb) {
        (Loaded::Circuit(c), Loaded::Sequence(s)) => (c, &ta, s),
        (Loaded::Sequence(s), Loaded::Circuit(c)) => (c, &tb, s),
        _ => return None,
    };
    let made_from = seq
        .provenance
        .as_ref()
        .is_some_and(|p| p.source_sha256 == crate::driver::sha256_hex(ctext.as_bytes()));
    if seq.trace.is_empty() || !made_from {
        return None;
    }
    let mut sync = seq.trace.clone();
    sync.push(SyncPoint {
        instrs: circuit.instrs.len(),
        steps: seq.steps.len(),
    });
    crate::sim::check_windows(circuit, seq, &sync, cfg)
        .ok()
        .filter(|v| v.equivalent)
}

/// What `check --locate --json` prints: one object with the same content as
/// [`located_text`] (line ranges 1-based and inclusive, step ranges 1-based and
/// inclusive, `null` where a format has no lines).
pub fn located_json(l: &Located, a: &Path, b: &Path) -> serde_json::Value {
    use serde_json::json;
    let range = |r: Option<(usize, usize)>| r.map(|(x, y)| json!([x, y]));
    let steps = |(from, to): (usize, usize)| {
        if to > from {
            json!([from + 1, to])
        } else {
            serde_json::Value::Null
        }
    };
    let verdict = match (l.verdict.equivalent, l.exit_code()) {
        (true, _) | (_, 0) => "equivalent",
        (_, 1) => "not equivalent",
        _ => "not proven",
    };
    json!({
        "first": a.display().to_string(),
        "second": b.display().to_string(),
        "verdict": verdict,
        "exit_code": l.exit_code(),
        "equal_section_by_section": l.verdict.equivalent,
        "sections": l.sections,
        "by": if l.by_trace { "trace" } else { "checkpoints" },
        "mode": l.verdict.mode.name(),
        "distance": l.verdict.distance,
        "tolerance": l.verdict.tolerance,
        "section": l.section.map(|s| json!({
            "index": s.index,
            "first_lines": range(s.first),
            "second_lines": range(s.second),
        })),
        "changed": l.changed.as_ref().map(|c| json!({
            "first_steps": steps(c.first),
            "second_steps": steps(c.second),
            "first_lines": range(c.first_lines),
            "second_lines": range(c.second_lines),
            "ions": c.ions,
            "every_ion": c.every_ion,
        })),
        "traced": l.traced.as_ref().map(|t| json!({
            "instructions": [t.instrs.0 + 1, t.instrs.1],
            "text": t.text,
            "steps": steps(t.steps),
            "lines": range(t.lines),
        })),
        "whole": l.whole.as_ref().map(|w| match w {
            Ok((equivalent, detail)) => json!({"equivalent": equivalent, "detail": detail}),
            Err(e) => json!({"refused": e}),
        }),
        "detail": l.verdict.detail,
    })
}
