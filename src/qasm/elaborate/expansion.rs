//! Expansion: gate calls checked against their signatures and expanded, through
//! nested definitions, into the flat operations of the circuit, within the limits.

use super::*;

impl<'l> Elaborator<'l> {
    /// Checks a call's name and counts; returns the gate it names.
    pub(super) fn check_call(&mut self, call: &GateCall) -> Option<GateRef> {
        let Some(g) = self.lookup_gate(call.name.name) else {
            if self.broken_gates.contains(call.name.name) {
                return None;
            }
            let d = self.undefined_gate(&call.name);
            self.push_once(call.name.name, d);
            return None;
        };
        let (n_params, n_qubits) = self.signature(&g);
        if call.params.len() != n_params {
            self.diags.push(
                Diagnostic::error(
                    "parameter-count",
                    call.name.span,
                    format!(
                        "gate `{}` takes {n_params} parameter(s), given {}",
                        call.name.name,
                        call.params.len()
                    ),
                )
                .hint(format!(
                    "write `{}` with {n_params} parameter(s) in parentheses",
                    call.name.name
                )),
            );
            return None;
        }
        if call.args.len() != n_qubits {
            self.diags.push(
                Diagnostic::error(
                    "qubit-count",
                    call.span,
                    format!(
                        "gate `{}` acts on {n_qubits} qubit(s), given {}",
                        call.name.name,
                        call.args.len()
                    ),
                )
                .hint("pass one qubit or register per gate argument, separated by commas"),
            );
            return None;
        }
        Some(g)
    }

    pub(super) fn qop(&mut self, op: &QOp, cond: Option<Condition>) {
        match op {
            QOp::Call(call) => self.top_call(call, cond),
            QOp::Measure { src, dst, span } => {
                let (Some(q), Some(c)) =
                    (self.resolve_arg(src, true), self.resolve_arg(dst, false))
                else {
                    return;
                };
                let Some(n) = self.broadcast(&[src, dst], &[q, c]) else {
                    return;
                };
                for k in 0..n as u32 {
                    let qubit = Qubit(q.at(k));
                    let clbit = Clbit(c.at(k));
                    if !self.emit(Op::Measure { qubit, clbit }, cond.clone(), *span) {
                        return;
                    }
                }
            }
            QOp::Reset { arg, span } => {
                let Some(q) = self.resolve_arg(arg, true) else {
                    return;
                };
                for k in 0..q.len {
                    if !self.emit(
                        Op::Reset {
                            qubit: Qubit(q.start + k),
                        },
                        cond.clone(),
                        *span,
                    ) {
                        return;
                    }
                }
            }
        }
    }

    pub(super) fn top_call(&mut self, call: &GateCall, cond: Option<Condition>) {
        let Some(g) = self.check_call(call) else {
            return;
        };
        let mut params: smallvec::SmallVec<[f64; 4]> = smallvec::SmallVec::new();
        let mut names_ok = true;
        for p in &call.params {
            // Constants were folded while parsing: most parameters are numbers.
            params.push(match p.kind {
                ExprKind::Number(v) => v,
                _ => {
                    names_ok &= self.check_expr_names(p, &[]);
                    eval(p, &[], &[])
                }
            });
        }
        if !names_ok {
            return;
        }
        if let Some((p, v)) = call
            .params
            .iter()
            .zip(&params)
            .find(|(_, v)| !v.is_finite())
        {
            self.diags.push(
                Diagnostic::error(
                    "non-finite-parameter",
                    p.span,
                    format!("this parameter evaluates to {v}"),
                )
                .hint("check for division by zero or ln/sqrt of a negative number"),
            );
            return;
        }
        let mut lists: smallvec::SmallVec<[Bits; 4]> = smallvec::SmallVec::new();
        let mut whole_registers = false;
        for a in &call.args {
            match self.resolve_arg(a, true) {
                Some(l) => lists.push(l),
                None => return,
            }
            whole_registers |= a.index.is_none();
        }
        let n = if whole_registers {
            let arg_refs: smallvec::SmallVec<[&Arg; 4]> = call.args.iter().collect();
            match self.broadcast(&arg_refs, &lists) {
                Some(n) => n,
                None => return,
            }
        } else {
            1
        };
        let mut qubits: smallvec::SmallVec<[Qubit; 4]> = smallvec::SmallVec::new();
        for k in 0..n as u32 {
            qubits.clear();
            qubits.extend(lists.iter().map(|l| Qubit(l.at(k))));
            let repeated = (1..qubits.len()).find(|&i| qubits[..i].contains(&qubits[i]));
            if let Some(i) = repeated {
                self.repeated_qubit(qubits[i], call.span);
                return;
            }
            if !self.expand(&g, &params, &qubits, cond.clone(), call.span) {
                return;
            }
        }
    }

    #[cold]
    pub(super) fn repeated_qubit(&mut self, q: Qubit, at: Span) {
        let name = self
            .circuit
            .qregs
            .iter()
            .find(|r| q.0 >= r.offset && q.0 < r.offset + r.size);
        let shown = name.map_or(String::new(), |r| format!("{}[{}]", r.name, q.0 - r.offset));
        self.diags.push(
            Diagnostic::error(
                "repeated-qubit",
                at,
                format!("qubit {shown} is used twice in one gate"),
            )
            .hint("a gate acts on distinct qubits"),
        );
    }

    /// Emits a gate with its arguments bound; returns false once a limit was hit.
    pub(super) fn expand(
        &mut self,
        g: &GateRef,
        params: &[f64],
        qubits: &[Qubit],
        cond: Option<Condition>,
        at: Span,
    ) -> bool {
        match *g {
            GateRef::Library(kind) => self.emit(
                Op::Gate {
                    gate: Gate::new(kind, params),
                    qubits: Qubits::from_slice(qubits),
                },
                cond,
                at,
            ),
            GateRef::Defined(i) => {
                let def = std::sync::Arc::clone(&self.defs[i]);
                if let Some(decl) = def.opaque_index {
                    return self.emit(
                        Op::Opaque {
                            decl,
                            params: params.to_vec(),
                            qubits: Qubits::from_slice(qubits),
                        },
                        cond,
                        at,
                    );
                }
                let bind = |k: &u32| qubits.get(*k as usize).copied().unwrap_or(Qubit(0));
                for op in &def.body {
                    match op {
                        BodyOp::Barrier { args } => {
                            let mut qs: Qubits = args.iter().map(bind).collect();
                            qs.sort();
                            qs.dedup();
                            if !self.emit(Op::Barrier { qubits: qs }, cond.clone(), at) {
                                return false;
                            }
                        }
                        BodyOp::Call {
                            gate,
                            params: exprs,
                            args,
                        } => {
                            let mut values: smallvec::SmallVec<[f64; 4]> =
                                smallvec::SmallVec::new();
                            for e in exprs {
                                let v = e.eval(params);
                                if !v.is_finite() {
                                    self.diags.push(
                                        Diagnostic::error(
                                            "non-finite-parameter",
                                            at,
                                            format!(
                                                "inside gate `{}`, a parameter evaluates to {v}",
                                                def.name
                                            ),
                                        )
                                        .hint("check the parameters passed to this gate"),
                                    );
                                    self.stopped = true;
                                    return false;
                                }
                                values.push(v);
                            }
                            let inner: Qubits = args.iter().map(bind).collect();
                            if !self.expand(gate, &values, &inner, cond.clone(), at) {
                                return false;
                            }
                        }
                    }
                }
                true
            }
        }
    }

    pub(super) fn emit(&mut self, op: Op, condition: Option<Condition>, at: Span) -> bool {
        if self.circuit.instrs.len() >= self.limits.max_ops {
            self.diags.push(
                Diagnostic::error(
                    "too-many-operations",
                    at,
                    format!("expanding the program exceeds the limit of {} operations", self.limits.max_ops),
                )
                .label("the limit was reached while expanding this statement")
                .hint("raise the operation limit (--max-ops) if the program is meant to be this large"),
            );
            self.stopped = true;
            return false;
        }
        let instrs = &mut self.circuit.instrs;
        if instrs.len() == instrs.capacity() {
            let more = instrs.len().max(1 << 12);
            if instrs.try_reserve(more).is_err() {
                let bytes = (instrs.len() + more) * std::mem::size_of::<Instr>();
                self.diags.push(
                    Diagnostic::error(
                        "out-of-memory",
                        at,
                        format!(
                            "out of memory after {} operations: the next {} need {bytes} bytes in all",
                            instrs.len(),
                            more
                        ),
                    )
                    .label("memory ran out while expanding this statement")
                    .hint("lower the operation limit (--max-ops) to be told sooner, or run where more memory is available (ulimit -v, free memory)"),
                );
                self.stopped = true;
                return false;
            }
        }
        instrs.push(Instr { op, condition });
        true
    }
}
