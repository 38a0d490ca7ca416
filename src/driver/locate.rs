//! `check --locate`: where a sequence first parts from its circuit. Checkpoints are
//! the circuit's barriers and the sequence's checkpoint lines (pulse list
//! `checkpoint`, QASM output `barrier q;`, JSON `checkpoints`), matched in order:
//! the k-th of each side correspond. The sections between them are compared one by
//! one (window by window, so a section equal on both sides is proven equal), and
//! the first that differs is named with its lines on both sides.

use super::*;
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

/// Compares circuit `a` with sequence `b` section by section. Either order of the
/// two files is accepted; both must have the same number of checkpoints.
pub fn locate(a: &Path, b: &Path, limits: &Limits, cfg: &CheckConfig) -> Result<Located, String> {
    let read = |p: &Path| -> Result<(Loaded, String), String> {
        let (loaded, _) = load(p, limits).map_err(|e| e.rendered)?;
        let text =
            std::fs::read_to_string(p).map_err(|e| format!("error: {}: {e}\n", p.display()))?;
        Ok((loaded, text))
    };
    let (la, ta) = read(a)?;
    let (lb, tb) = read(b)?;
    let (circuit, ctext, seq, spath, stext, swapped) = match (la, lb) {
        (Loaded::Circuit(c), Loaded::Sequence(s)) => (c, ta, s, b, tb, false),
        (Loaded::Sequence(s), Loaded::Circuit(c)) => (c, tb, s, a, ta, true),
        _ => {
            return Err(
                "error: --locate compares a circuit with a sequence (one of each); two circuits or two sequences are not supported yet\n"
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
    let verdict = crate::sim::check_windows(&circuit, &seq, &sync, cfg)
        .map_err(|e| format!("error: {e}\n"))?;
    let section = verdict.first_difference.map(|k| {
        let c_lines = span(&lines_of(&ctext, "barrier", true), k, ctext.lines().count());
        let s_lines = match Format::sniff(spath, &stext) {
            Format::Json => None,
            Format::Qasm => Some(span(
                &lines_of(&stext, "barrier", true),
                k,
                stext.lines().count(),
            )),
            Format::Pulses => Some(span(
                &lines_of(&stext, crate::native::text::CHECKPOINT, false),
                k,
                stext.lines().count(),
            )),
        };
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
        let _ = writeln!(
            out,
            "EQUIVALENT section by section ({} sections between checkpoints, mode {}, worst distance {})",
            l.sections,
            v.mode.name(),
            fmt_distance(v.distance)
        );
        return out;
    }
    let _ = writeln!(
        out,
        "NOT EQUIVALENT: they part in section {}",
        l.section.map_or(0, |s| s.index)
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
    let _ = writeln!(out, "  detail       {}", v.detail);
    out
}
