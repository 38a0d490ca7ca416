//! Scope: the registers and gates in scope, declarations, name lookup with one
//! report per undefined name, and the resolution of arguments to qubits and bits
//! with broadcasting.

use super::*;

#[derive(Clone, Copy)]
pub(super) enum RegKind {
    Quantum(usize),
    Classical(usize),
}

#[derive(Clone, Copy)]
pub(super) enum GateRef {
    Library(GateKind),
    Defined(usize),
}

impl<'l> Elaborator<'l> {
    pub(super) fn declare(&mut self, name: &Ident, size: (u64, Span), quantum: bool) {
        if self.regs.contains_key(name.name) {
            self.diags.push(
                Diagnostic::error(
                    "duplicate-register",
                    name.span,
                    format!("register `{}` is already declared", name.name),
                )
                .hint("give each register its own name"),
            );
            return;
        }
        if size.0 == 0 {
            self.diags.push(
                Diagnostic::error(
                    "empty-register",
                    size.1,
                    format!("register `{}` has size 0", name.name),
                )
                .hint("a register holds at least one bit"),
            );
            return;
        }
        let (total, limit, kind) = if quantum {
            (
                self.circuit.n_qubits() as u64,
                self.limits.max_qubits,
                "qubits",
            )
        } else {
            (
                self.circuit.n_clbits() as u64,
                self.limits.max_clbits,
                "classical bits",
            )
        };
        if size.0 > self.limits.max_register_size || total + size.0 > limit {
            self.diags.push(
                Diagnostic::error(
                    "register-too-large",
                    size.1,
                    format!(
                        "register `{}` of {} {kind} exceeds the limit ({} per register, {} in all)",
                        name.name, size.0, self.limits.max_register_size, limit
                    ),
                )
                .hint("raise the register limits (--max-qubits, which also bounds bits) if the program really needs this many"),
            );
            return;
        }
        let reg = Register {
            name: name.name.to_string(),
            offset: total as u32,
            size: size.0 as u32,
        };
        let kind = if quantum {
            self.circuit.qregs.push(reg);
            RegKind::Quantum(self.circuit.qregs.len() - 1)
        } else {
            self.circuit.cregs.push(reg);
            RegKind::Classical(self.circuit.cregs.len() - 1)
        };
        self.regs.insert(name.name.into(), (kind, name.span));
    }

    pub(super) fn lookup_gate(&self, name: &str) -> Option<GateRef> {
        // Most files define no gates of their own: skip hashing the name then.
        if !self.gates.is_empty() {
            if let Some(&i) = self.gates.get(name) {
                return Some(GateRef::Defined(i));
            }
        }
        match GateKind::from_name(name) {
            Some(k @ (GateKind::BuiltinU | GateKind::BuiltinCx)) => Some(GateRef::Library(k)),
            Some(k) if self.library => Some(GateRef::Library(k)),
            _ => None,
        }
    }

    /// Parameter and qubit counts of a callable gate.
    pub(super) fn signature(&self, g: &GateRef) -> (usize, usize) {
        match g {
            GateRef::Library(k) => (k.n_params(), k.n_qubits()),
            GateRef::Defined(i) => (self.defs[*i].n_params, self.defs[*i].n_qubits),
        }
    }

    /// Reports `d` for the first use of `name` only; later uses of the same name
    /// with the same kind of error are counted, and the count is added to the
    /// first report, so one missing declaration does not flood the output.
    pub(super) fn push_once(&mut self, name: &str, d: Diagnostic) {
        match self.repeats.get_mut(&(d.code, CompactString::from(name))) {
            Some((_, more)) => *more += 1,
            None => {
                self.repeats
                    .insert((d.code, CompactString::from(name)), (self.diags.len(), 0));
                self.diags.push(d);
            }
        }
    }

    pub(super) fn undefined_gate(&self, name: &Ident) -> Diagnostic {
        let hint = if GateKind::from_name(name.name).is_some() {
            "this is a standard library gate: add `include \"qelib1.inc\";` at the top".to_string()
        } else {
            "define it with `gate` before its first use, or check the spelling".to_string()
        };
        Diagnostic::error(
            "undefined-gate",
            name.span,
            format!("gate `{}` is not defined", name.name),
        )
        .hint(hint)
    }

    pub(super) fn creg(&mut self, name: &Ident) -> Option<usize> {
        match self.regs.get(name.name) {
            Some((RegKind::Classical(i), _)) => Some(*i),
            Some((RegKind::Quantum(_), _)) => {
                self.diags.push(
                    Diagnostic::error(
                        "expected-creg",
                        name.span,
                        format!("`{}` is a quantum register", name.name),
                    )
                    .hint("conditions and measurement results use classical registers (`creg`)"),
                );
                None
            }
            None => {
                self.push_once(
                    name.name,
                    Diagnostic::error(
                        "undefined-register",
                        name.span,
                        format!("register `{}` is not declared", name.name),
                    )
                    .hint("declare it with `creg` before use"),
                );
                None
            }
        }
    }

    /// Resolves one argument to the global indices it names (one, or a whole register).
    pub(super) fn resolve_arg(&mut self, arg: &Arg, quantum: bool) -> Option<Bits> {
        // Consecutive operations mostly name the same register: try the last one first.
        let cached = match &self.last_reg {
            Some((name, kind)) if *name == arg.reg.name => Some(*kind),
            _ => None,
        };
        let found = match cached {
            Some(kind) => Some(kind),
            None => {
                let kind = self.regs.get(arg.reg.name).map(|(k, _)| *k);
                if let Some(k) = kind {
                    self.last_reg = Some((arg.reg.name.into(), k));
                }
                kind
            }
        };
        let reg = match found {
            Some(RegKind::Quantum(i)) if quantum => &self.circuit.qregs[i],
            Some(RegKind::Classical(i)) if !quantum => &self.circuit.cregs[i],
            Some(_) => {
                let (is, want, decl) = if quantum {
                    ("classical", "qubits", "qreg")
                } else {
                    ("quantum", "classical bits", "creg")
                };
                self.diags.push(
                    Diagnostic::error(
                        "wrong-register-kind",
                        arg.reg.span,
                        format!("`{}` is a {is} register", arg.reg.name),
                    )
                    .hint(format!(
                        "this place takes {want}: a register declared with `{decl}`"
                    )),
                );
                return None;
            }
            None => {
                self.push_once(
                    arg.reg.name,
                    Diagnostic::error(
                        "undefined-register",
                        arg.reg.span,
                        format!("register `{}` is not declared", arg.reg.name),
                    )
                    .hint(format!(
                        "declare it with `{}` before use",
                        if quantum { "qreg" } else { "creg" }
                    )),
                );
                return None;
            }
        };
        match arg.index {
            None => Some(Bits {
                start: reg.offset,
                len: reg.size,
            }),
            Some((i, _)) if i < reg.size as u64 => Some(Bits {
                start: reg.offset + i as u32,
                len: 1,
            }),
            Some((i, span)) => {
                let (name, size) = (reg.name.clone(), reg.size);
                self.diags.push(
                    Diagnostic::error(
                        "index-out-of-range",
                        span,
                        format!("index {i} is out of range for `{name}[{size}]`"),
                    )
                    .hint(format!("indices of `{name}` run from 0 to {}", size - 1)),
                );
                None
            }
        }
    }

    pub(super) fn resolve_qargs(&mut self, args: &[Arg]) -> Option<Vec<Vec<Qubit>>> {
        let mut out = Vec::with_capacity(args.len());
        let mut ok = true;
        for a in args {
            match self.resolve_arg(a, true) {
                Some(v) => out.push((0..v.len).map(|k| Qubit(v.start + k)).collect()),
                None => ok = false,
            }
        }
        ok.then_some(out)
    }

    /// The broadcast length of a list of arguments: registers must agree in size.
    pub(super) fn broadcast(&mut self, args: &[&Arg], lists: &[Bits]) -> Option<usize> {
        let mut len: Option<(usize, &Arg)> = None;
        for (a, l) in args.iter().zip(lists) {
            if a.index.is_some() {
                continue;
            }
            let l_len = l.len as usize;
            match len {
                None => len = Some((l_len, a)),
                Some((n, first)) if n != l_len => {
                    self.diags.push(
                        Diagnostic::error(
                            "register-size-mismatch",
                            a.span(),
                            format!(
                                "register `{}` has {} bits but `{}` has {n}",
                                a.reg.name, l_len, first.reg.name
                            ),
                        )
                        .hint("whole-register arguments of one operation must have the same size"),
                    );
                    return None;
                }
                _ => {}
            }
        }
        Some(len.map_or(1, |(n, _)| n))
    }
}

/// The bits an argument names: one, or a whole register.
#[derive(Clone, Copy)]
pub(super) struct Bits {
    pub(super) start: u32,
    pub(super) len: u32,
}

impl Bits {
    /// The `k`-th bit of a broadcast: a single bit repeats.
    pub(super) fn at(self, k: u32) -> u32 {
        if self.len == 1 {
            self.start
        } else {
            self.start + k
        }
    }
}
