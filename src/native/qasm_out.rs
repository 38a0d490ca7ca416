//! Writes a native sequence as OpenQASM 2, and reads such a file back.
//!
//! Every native operation is a gate defined in the header from the 2017 standard
//! library only, so any reader of the standard can simulate the file (global phases
//! are dropped). Each kind of operation has its own gate name, so tutti recovers the
//! sequence exactly from the calls ([`read_qasm_sequence`]):
//! the one names of [`super::names`]: `chain_rotate_K` / `chain_ms_K` (a collective
//! rotation / global MS on the K ions not hidden, listed as arguments; K is the
//! arity, which an OpenQASM gate must fix), `ion_rotate`, `light_shift`, `pair_ms`,
//! `frame_z` (on the whole register), `hide` / `unhide` (empty bodies: hiding is not
//! a unitary; the ions listed in later chain calls show it). No other gate is
//! defined: the global MS is written as `pair_ms` on every pair.

use super::{NativeOp, Sequence, Step};
use crate::circuit::{format_real, Condition, Register};
use crate::qasm::ast::{Arg, QOp, Stmt};
use crate::qasm::diag::FileId;
use crate::qasm::elaborate::eval;
use std::collections::BTreeSet;
use std::fmt::Write;

/// The first line of every file this module writes.
pub const MARKER: &str = "// tutti native sequence";

const HEADER: &str = "\
// Each native operation is a gate below, defined from the 2017 standard library.
// ion_rotate(theta,phi) = exp(-i theta/2 (cos(phi) X + sin(phi) Y)), up to global phase.
gate ion_rotate(theta,phi) a { u3(theta,phi-pi/2,pi/2-phi) a; }
// light_shift(theta) = exp(-i theta/2 Z).
gate light_shift(theta) a { rz(theta) a; }
// frame_z(theta): exp(-i theta/2 Z) on every ion, a change of phase reference.
gate frame_z(theta) a { rz(theta) a; }
// pair_ms(theta,phi) = exp(-i theta/4 (s_a + s_b)^2) with s = cos(phi) X + sin(phi) Y,
// which is exp(-i theta/2 s_a s_b) up to global phase.
gate pair_ms(theta,phi) a,b { rz(-phi) a; rz(-phi) b; h a; h b; cx a,b; rz(theta) b; cx a,b; h a; h b; rz(phi) a; rz(phi) b; }
// hide / unhide: the ion takes no part in chain operations in between.
gate hide a { }
gate unhide a { }
";

/// Everything [`write_qasm`] writes before the `qreg` line, for `n` ions and the
/// given sizes of chain gates. A file whose text starts with exactly this is read
/// back as a sequence without expanding any gate.
fn header(n: u32, rot_sizes: &BTreeSet<usize>, ms_sizes: &BTreeSet<usize>) -> String {
    let mut out =
        format!("{MARKER} for {n} ions\nOPENQASM 2.0;\ninclude \"qelib1.inc\";\n{HEADER}");
    for &k in rot_sizes {
        let args: Vec<String> = (0..k).map(|i| format!("i{i}")).collect();
        let body: String = args
            .iter()
            .map(|a| format!(" ion_rotate(theta,phi) {a};"))
            .collect();
        let _ = writeln!(
            out,
            "// chain_rotate_{k}: exp(-i theta/2 S_phi) on {k} ions."
        );
        let _ = writeln!(
            out,
            "gate chain_rotate_{k}(theta,phi) {} {{{body} }}",
            args.join(",")
        );
    }
    for &k in ms_sizes {
        let args: Vec<String> = (0..k).map(|i| format!("i{i}")).collect();
        let mut body = String::new();
        for a in 0..k {
            for b in a + 1..k {
                let _ = write!(body, " pair_ms(theta,phi) i{a},i{b};");
            }
        }
        let _ = writeln!(
            out,
            "// chain_ms_{k}: exp(-i theta/4 S_phi^2) on {k} ions, up to global phase."
        );
        let _ = writeln!(
            out,
            "gate chain_ms_{k}(theta,phi) {} {{{body} }}",
            args.join(",")
        );
    }
    out
}

/// The OpenQASM 2 text of a sequence.
pub fn write_qasm(seq: &Sequence) -> String {
    let mut out = String::new();
    write_qasm_to(seq, &mut out).expect("a String takes any text");
    out
}

/// [`write_qasm`], written as it is made.
pub fn write_qasm_to(seq: &Sequence, out: &mut dyn std::fmt::Write) -> std::fmt::Result {
    let n = seq.n_ions;
    // The chain gates for every number of visible ions the sequence uses.
    let mut hidden = vec![false; n as usize];
    let (mut rot_sizes, mut ms_sizes) = (BTreeSet::new(), BTreeSet::new());
    for step in &seq.steps {
        let k = hidden.iter().filter(|h| !**h).count();
        match step.op {
            NativeOp::Collective { .. } => {
                rot_sizes.insert(k);
            }
            NativeOp::Ms { .. } => {
                ms_sizes.insert(k);
            }
            NativeOp::Hide { ion } => hidden[ion as usize] = true,
            NativeOp::Unhide { ion } => hidden[ion as usize] = false,
            _ => {}
        }
    }
    out.write_str(&header(n, &rot_sizes, &ms_sizes))?;
    writeln!(out, "qreg q[{n}];")?;
    for r in &seq.cregs {
        writeln!(out, "creg {}[{}];", r.name, r.size)?;
    }
    let mut hidden = vec![false; n as usize];
    let r = format_real;
    let mut checkpoints = seq.checkpoints.iter().peekable();
    for (k, step) in seq.steps.iter().enumerate() {
        while checkpoints.next_if(|&&c| c <= k).is_some() {
            writeln!(out, "barrier q;")?;
        }
        if let Some(c) = &step.condition {
            write!(out, "if({}=={}) ", seq.cregs[c.creg as usize].name, c.value)?;
        }
        let visible: Vec<String> = (0..n)
            .filter(|&i| !hidden[i as usize])
            .map(|i| format!("q[{i}]"))
            .collect();
        let k = visible.len();
        match step.op {
            NativeOp::Collective { theta, phi } => {
                writeln!(
                    out,
                    "chain_rotate_{k}({},{}) {};",
                    r(theta),
                    r(phi),
                    visible.join(",")
                )
            }
            NativeOp::Ms { theta, phi } => writeln!(
                out,
                "chain_ms_{k}({},{}) {};",
                r(theta),
                r(phi),
                visible.join(",")
            ),
            NativeOp::LightShift { ion, theta } => {
                writeln!(out, "light_shift({}) q[{ion}];", r(theta))
            }
            NativeOp::VirtualZ { theta } => writeln!(out, "frame_z({}) q;", r(theta)),
            NativeOp::PairMs { a, b, theta, phi } => {
                writeln!(out, "pair_ms({},{}) q[{a}],q[{b}];", r(theta), r(phi))
            }
            NativeOp::Addressed { ion, theta, phi } => {
                writeln!(out, "ion_rotate({},{}) q[{ion}];", r(theta), r(phi))
            }
            NativeOp::Hide { ion } => {
                hidden[ion as usize] = true;
                writeln!(out, "hide q[{ion}];")
            }
            NativeOp::Unhide { ion } => {
                hidden[ion as usize] = false;
                writeln!(out, "unhide q[{ion}];")
            }
            NativeOp::Measure { ion, clbit } => {
                let reg = seq
                    .cregs
                    .iter()
                    .find(|g| clbit >= g.offset && clbit < g.offset + g.size);
                let name = reg.map_or(format!("c[{clbit}]"), |g| {
                    format!("{}[{}]", g.name, clbit - g.offset)
                });
                writeln!(out, "measure q[{ion}] -> {name};")
            }
            NativeOp::Reset { ion } => writeln!(out, "reset q[{ion}];"),
        }?;
    }
    for _ in checkpoints {
        writeln!(out, "barrier q;")?;
    }
    if let Some(p) = &seq.provenance {
        for (key, value) in p.fields() {
            writeln!(
                out,
                "{PROVENANCE_PREFIX}{key}: {}",
                super::text::one_line(value)
            )?;
        }
    }
    Ok(())
}

/// Provenance lines of the QASM output start with this (comments to any reader).
pub const PROVENANCE_PREFIX: &str = "// provenance ";

/// Recovers the sequence from a file [`write_qasm`] wrote, without expanding any
/// gate. Returns `None` when the text is not exactly such a file: the header (every
/// line before `qreg`) must be byte for byte what [`write_qasm`] writes for the
/// chain gates it defines, no other gate, include or barrier may follow, and every
/// statement after it must be a call of a header gate on ions of the one register
/// (chain gates on exactly the ions not hidden), a measurement into a declared bit,
/// a reset, or such an operation under `if` on a declared register. A file that
/// passes is therefore valid OpenQASM 2 whose meaning is the sequence returned; an
/// edited header makes it an ordinary circuit, which callers read with the full
/// front end.
pub fn read_qasm_sequence(text: &str) -> Option<Sequence> {
    if !text.starts_with(MARKER) {
        return None;
    }
    let (program, diags) = crate::qasm::parser::parse(FileId(0), text, true);
    if diags.iter().any(|d| d.is_error()) {
        return None;
    }
    let (mut rot_sizes, mut ms_sizes) = (BTreeSet::new(), BTreeSet::new());
    let (mut gates, mut n_ions) = (0usize, None);
    for stmt in &program.stmts {
        match stmt {
            Stmt::Gate(g) => {
                gates += 1;
                let name = g.name.name;
                if let Some(k) = name.strip_prefix("chain_rotate_") {
                    rot_sizes.insert(k.parse::<usize>().ok()?);
                } else if let Some(k) = name.strip_prefix("chain_ms_") {
                    ms_sizes.insert(k.parse::<usize>().ok()?);
                }
            }
            Stmt::Qreg { size, .. } if n_ions.is_none() => n_ions = Some(size.0),
            Stmt::Qreg { .. } => return None,
            _ => {}
        }
    }
    let n = u32::try_from(n_ions?).ok()?;
    let expected = header(n, &rot_sizes, &ms_sizes);
    const FIXED_GATES: usize = 6;
    if gates != FIXED_GATES + rot_sizes.len() + ms_sizes.len()
        || !text.starts_with(&expected)
        || !text[expected.len()..].starts_with(&format!("qreg q[{n}];"))
    {
        return None;
    }
    let mut seq = Sequence {
        n_ions: n,
        provenance: super::Provenance::from_comment_lines(text, PROVENANCE_PREFIX),
        ..Sequence::default()
    };
    let mut hidden = vec![false; n as usize];
    let mut versions = 0;
    for stmt in &program.stmts {
        let (op, condition) = match stmt {
            Stmt::Qreg { .. } | Stmt::Gate(_) => continue,
            Stmt::Version { .. } | Stmt::Include { .. } => {
                // Both are in the header; any more is an edit.
                versions += 1;
                if versions > 2 {
                    return None;
                }
                continue;
            }
            Stmt::Creg { name, size, .. } => {
                if seq.cregs.iter().any(|r| r.name == name.name) {
                    return None;
                }
                let (offset, size) = (seq.n_clbits(), u32::try_from(size.0).ok()?);
                offset.checked_add(size)?;
                seq.cregs.push(Register {
                    name: name.name.to_string(),
                    offset,
                    size,
                });
                continue;
            }
            Stmt::QOp(op) => (op, None),
            Stmt::If {
                creg, value, op, ..
            } => {
                let i = seq.cregs.iter().position(|r| r.name == creg.name)?;
                if !value.0.fits(seq.cregs[i].size) {
                    return None;
                }
                (
                    &**op,
                    Some(Condition {
                        creg: i as u32,
                        value: value.0.clone(),
                    }),
                )
            }
            // A barrier on the whole register is a checkpoint; any other is an edit.
            Stmt::Barrier { args, .. } => {
                let whole =
                    matches!(args.as_slice(), [a] if a.reg.name == "q" && a.index.is_none());
                if !whole {
                    return None;
                }
                seq.checkpoints.push(seq.steps.len());
                continue;
            }
        };
        let ion = |a: &Arg| -> Option<u32> {
            let i = a.index?.0;
            (a.reg.name == "q" && i < n as u64).then_some(i as u32)
        };
        let native = match op {
            QOp::Measure { src, dst, .. } => {
                let reg = seq.cregs.iter().find(|r| r.name == dst.reg.name)?;
                let bit = dst.index?.0;
                if bit >= reg.size as u64 {
                    return None;
                }
                NativeOp::Measure {
                    ion: ion(src)?,
                    clbit: reg.offset + bit as u32,
                }
            }
            QOp::Reset { arg, .. } => NativeOp::Reset { ion: ion(arg)? },
            QOp::Call(call) => {
                let p: Vec<f64> = call.params.iter().map(|e| eval(e, &[], &[])).collect();
                if p.iter().any(|v| !v.is_finite()) {
                    return None;
                }
                let name = call.name.name;
                let args: Option<Vec<u32>> = call.args.iter().map(ion).collect();
                let chain_size = |prefix: &str| {
                    name.strip_prefix(prefix)
                        .and_then(|k| k.parse::<usize>().ok())
                };
                let (rot, ms) = (chain_size("chain_rotate_"), chain_size("chain_ms_"));
                let defined = rot.is_some_and(|k| rot_sizes.contains(&k))
                    || ms.is_some_and(|k| ms_sizes.contains(&k));
                if let Some(k) = rot.or(ms) {
                    let visible: Vec<u32> =
                        (0..seq.n_ions).filter(|&i| !hidden[i as usize]).collect();
                    if !defined || args? != visible || p.len() != 2 || k != visible.len() {
                        return None;
                    }
                    if name.starts_with("chain_rotate_") {
                        NativeOp::Collective {
                            theta: p[0],
                            phi: p[1],
                        }
                    } else {
                        NativeOp::Ms {
                            theta: p[0],
                            phi: p[1],
                        }
                    }
                } else {
                    match (name, p.as_slice(), call.args.as_slice()) {
                        ("frame_z", [t], [a]) if a.index.is_none() && a.reg.name == "q" => {
                            NativeOp::VirtualZ { theta: *t }
                        }
                        ("light_shift", [t], [a]) => NativeOp::LightShift {
                            ion: ion(a)?,
                            theta: *t,
                        },
                        ("ion_rotate", [t, f], [a]) => NativeOp::Addressed {
                            ion: ion(a)?,
                            theta: *t,
                            phi: *f,
                        },
                        ("pair_ms", [t, f], [a, b]) if ion(a)? != ion(b)? => NativeOp::PairMs {
                            a: ion(a)?,
                            b: ion(b)?,
                            theta: *t,
                            phi: *f,
                        },
                        ("hide", [], [a]) => {
                            let i = ion(a)?;
                            hidden[i as usize] = true;
                            NativeOp::Hide { ion: i }
                        }
                        ("unhide", [], [a]) => {
                            let i = ion(a)?;
                            hidden[i as usize] = false;
                            NativeOp::Unhide { ion: i }
                        }
                        _ => return None,
                    }
                }
            }
        };
        seq.steps.push(Step {
            op: native,
            condition: condition.map(Box::new),
        });
    }
    Some(seq)
}
