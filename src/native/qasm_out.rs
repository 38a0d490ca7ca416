//! Writes a native sequence as OpenQASM 2: each native operation is a gate defined
//! in the header from the 2017 standard library only, so any reader of the
//! standard can simulate the file. Global phases are dropped.
//!
//! Hidden ions are written as comments; collective and MS pulses then list the ions
//! that take part.

use super::{NativeOp, Sequence};
use crate::circuit::format_real;
use std::fmt::Write;

/// The gate definitions shared by every file (single-ion and ion-pair gates).
const HEADER: &str = "\
// Native operations of a collective-gate ion processor, written by tutti.
// ion_rot(theta,phi) = exp(-i theta/2 (cos(phi) X + sin(phi) Y)), up to global phase.
gate ion_rot(theta,phi) a { u3(theta,phi-pi/2,pi/2-phi) a; }
// ion_shift(theta) = exp(-i theta/2 Z): a light shift.
gate ion_shift(theta) a { rz(theta) a; }
// ion_xx(theta,phi) = exp(-i theta/2 s_a s_b) with s = cos(phi) X + sin(phi) Y.
gate ion_xx(theta,phi) a,b { rz(-phi) a; rz(-phi) b; h a; h b; cx a,b; rz(theta) b; cx a,b; h a; h b; rz(phi) a; rz(phi) b; }
";

fn ion_list(ions: &[u32]) -> String {
    ions.iter()
        .map(|i| format!("q[{i}]"))
        .collect::<Vec<_>>()
        .join(",")
}

/// The OpenQASM 2 text of a sequence.
pub fn write_qasm(seq: &Sequence) -> String {
    let n = seq.n_ions;
    let mut out = String::new();
    out.push_str("OPENQASM 2.0;\ninclude \"qelib1.inc\";\n");
    out.push_str(HEADER);
    // Whole-chain gates for this ion count: one call per collective or MS pulse.
    let args: Vec<String> = (0..n).map(|i| format!("i{i}")).collect();
    let _ = writeln!(
        out,
        "// chain_ms(theta,phi) = exp(-i theta/4 S^2) on all {n} ions, up to global phase."
    );
    let mut body = String::new();
    for a in 0..n {
        for b in a + 1..n {
            let _ = write!(body, " ion_xx(theta,phi) i{a},i{b};");
        }
    }
    let _ = writeln!(
        out,
        "gate chain_ms(theta,phi) {} {{{body} }}",
        args.join(",")
    );
    let _ = writeln!(out, "qreg q[{n}];");
    for r in &seq.cregs {
        let _ = writeln!(out, "creg {}[{}];", r.name, r.size);
    }
    let mut hidden = vec![false; n as usize];
    let r = format_real;
    for step in &seq.steps {
        let cond = step
            .condition
            .map(|c| format!("if({}=={}) ", seq.cregs[c.creg as usize].name, c.value))
            .unwrap_or_default();
        let visible: Vec<u32> = (0..n).filter(|&i| !hidden[i as usize]).collect();
        match step.op {
            NativeOp::Collective { theta, phi } => {
                if visible.len() == n as usize {
                    let _ = writeln!(out, "{cond}ion_rot({},{}) q;", r(theta), r(phi));
                } else {
                    for i in visible {
                        let _ = writeln!(out, "{cond}ion_rot({},{}) q[{i}];", r(theta), r(phi));
                    }
                }
            }
            NativeOp::LightShift { ion, theta } => {
                let _ = writeln!(out, "{cond}ion_shift({}) q[{ion}];", r(theta));
            }
            NativeOp::VirtualZ { theta } => {
                let _ = writeln!(out, "{cond}ion_shift({}) q;", r(theta));
            }
            NativeOp::Ms { theta, phi } => {
                if visible.len() == n as usize {
                    let _ = writeln!(
                        out,
                        "{cond}chain_ms({},{}) {};",
                        r(theta),
                        r(phi),
                        ion_list(&visible)
                    );
                } else {
                    for (k, &a) in visible.iter().enumerate() {
                        for &b in &visible[k + 1..] {
                            let _ = writeln!(
                                out,
                                "{cond}ion_xx({},{}) q[{a}],q[{b}];",
                                r(theta),
                                r(phi)
                            );
                        }
                    }
                }
            }
            NativeOp::PairMs { a, b, theta, phi } => {
                let _ = writeln!(out, "{cond}ion_xx({},{}) q[{a}],q[{b}];", r(theta), r(phi));
            }
            NativeOp::Addressed { ion, theta, phi } => {
                let _ = writeln!(out, "{cond}ion_rot({},{}) q[{ion}];", r(theta), r(phi));
            }
            NativeOp::Hide { ion } => {
                hidden[ion as usize] = true;
                let _ = writeln!(out, "// hide q[{ion}]");
            }
            NativeOp::Unhide { ion } => {
                hidden[ion as usize] = false;
                let _ = writeln!(out, "// unhide q[{ion}]");
            }
            NativeOp::Measure { ion, clbit } => {
                let reg = seq
                    .cregs
                    .iter()
                    .find(|g| clbit >= g.offset && clbit < g.offset + g.size);
                let name = reg.map_or(format!("c[{clbit}]"), |g| {
                    format!("{}[{}]", g.name, clbit - g.offset)
                });
                let _ = writeln!(out, "{cond}measure q[{ion}] -> {name};");
            }
            NativeOp::Reset { ion } => {
                let _ = writeln!(out, "{cond}reset q[{ion}];");
            }
        }
    }
    out
}
