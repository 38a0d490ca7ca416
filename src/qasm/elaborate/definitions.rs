//! Definitions: `gate` bodies checked and stored with names resolved to positions
//! ([`Def`]), and the evaluation of parameter expressions ([`eval`]).

use super::*;

/// A gate definition as the elaborator keeps it, owned (the syntax tree borrows the
/// file's text) and with every name resolved: gates to [`GateRef`], parameters and
/// qubit arguments to positions, so expanding a call copies and looks up nothing.
pub(super) struct Def {
    pub(super) name: String,
    pub(super) n_params: usize,
    pub(super) n_qubits: usize,
    /// For `opaque`: the index of its declaration in [`Circuit::opaque`].
    pub(super) opaque_index: Option<u32>,
    pub(super) body: Vec<BodyOp>,
    pub(super) nesting: usize,
}

pub(super) enum BodyOp {
    Call {
        gate: GateRef,
        params: smallvec::SmallVec<[Value; 3]>,
        /// Positions in the definition's qubit arguments.
        args: smallvec::SmallVec<[u32; 4]>,
    },
    Barrier {
        args: smallvec::SmallVec<[u32; 4]>,
    },
}

/// A parameter expression of a gate body, its names bound to parameter positions.
pub(super) enum Value {
    Number(f64),
    Param(usize),
    Neg(Box<Value>),
    Binary(BinOp, Box<Value>, Box<Value>),
    Call(Func, Box<Value>),
}

impl Value {
    /// Binds the names of `e` to their positions in `params`. Names were checked when
    /// the definition was read; an unknown one would evaluate to NaN.
    pub(super) fn bind(e: &Expr, params: &[Ident]) -> Value {
        match &e.kind {
            ExprKind::Number(v) => Value::Number(*v),
            ExprKind::Pi => Value::Number(std::f64::consts::PI),
            ExprKind::Param(p) => Value::Param(
                params
                    .iter()
                    .position(|q| q.name == *p)
                    .unwrap_or(usize::MAX),
            ),
            ExprKind::Neg(a) => Value::Neg(Box::new(Value::bind(a, params))),
            ExprKind::Call(f, a) => Value::Call(*f, Box::new(Value::bind(a, params))),
            ExprKind::Binary(op, a, b) => Value::Binary(
                *op,
                Box::new(Value::bind(a, params)),
                Box::new(Value::bind(b, params)),
            ),
        }
    }

    /// The same arithmetic as [`eval`], so a value is identical either way.
    pub(super) fn eval(&self, values: &[f64]) -> f64 {
        match self {
            Value::Number(v) => *v,
            Value::Param(i) => values.get(*i).copied().unwrap_or(f64::NAN),
            Value::Neg(a) => -a.eval(values),
            Value::Call(f, a) => f.apply(a.eval(values)),
            Value::Binary(op, a, b) => op.apply(a.eval(values), b.eval(values)),
        }
    }
}

impl<'l> Elaborator<'l> {
    pub(super) fn define(&mut self, def: &GateDef) {
        let name = &def.name.name;
        let redefines_library =
            matches!(*name, "U" | "CX") || (self.library && QELIB1_2017.contains(name));
        if redefines_library || self.gates.contains_key(*name) {
            self.diags.push(
                Diagnostic::error(
                    "duplicate-gate",
                    def.name.span,
                    format!("gate `{name}` is already defined"),
                )
                .hint("rename this gate; standard library gates cannot be redefined"),
            );
            return;
        }
        let mut ok = self.distinct_names(&def.params, "duplicate-parameter", "parameter");
        ok &= self.distinct_names(&def.qargs, "duplicate-argument", "qubit argument");
        let mut nesting = 1;
        if let Some(body) = &def.body {
            for stmt in body {
                let (args, call) = match stmt {
                    BodyStmt::Call(call) => (&call.args, Some(call)),
                    BodyStmt::Barrier { args, .. } => (args, None),
                };
                for arg in args {
                    if let Some((_, span)) = arg.index {
                        self.diags.push(
                            Diagnostic::error(
                                "index-in-gate-body",
                                span,
                                "qubits inside a gate body cannot be indexed",
                            )
                            .hint("use the gate's argument names as they are"),
                        );
                        ok = false;
                    } else if !def.qargs.iter().any(|q| q.name == arg.reg.name) {
                        self.diags.push(
                            Diagnostic::error(
                                "unknown-gate-argument",
                                arg.reg.span,
                                format!("`{}` is not an argument of gate `{name}`", arg.reg.name),
                            )
                            .hint(format!(
                                "the arguments are: {}",
                                def.qargs
                                    .iter()
                                    .map(|q| q.name)
                                    .collect::<Vec<_>>()
                                    .join(", ")
                            )),
                        );
                        ok = false;
                    }
                }
                let Some(call) = call else { continue };
                if call.name.name == *name {
                    self.diags.push(
                        Diagnostic::error(
                            "recursive-gate",
                            call.name.span,
                            format!("gate `{name}` calls itself"),
                        )
                        .hint("OpenQASM 2 gates cannot be recursive"),
                    );
                    ok = false;
                    continue;
                }
                match self.check_call(call) {
                    Some(GateRef::Defined(i)) => nesting = nesting.max(self.defs[i].nesting + 1),
                    Some(GateRef::Library(_)) => {}
                    None => ok = false,
                }
                for (i, a) in call.args.iter().enumerate() {
                    if call.args[..i].iter().any(|b| b.reg.name == a.reg.name) {
                        self.diags.push(
                            Diagnostic::error(
                                "repeated-qubit",
                                a.span(),
                                format!("qubit `{}` is used twice in one gate", a.reg.name),
                            )
                            .hint("a gate acts on distinct qubits"),
                        );
                        ok = false;
                    }
                }
                for p in &call.params {
                    ok &= self.check_expr_names(p, &def.params);
                }
            }
        }
        if nesting > self.limits.max_gate_nesting.min(MAX_GATE_NESTING) {
            self.diags.push(
                Diagnostic::error(
                    "gate-nesting",
                    def.name.span,
                    format!("gate `{name}` nests gate definitions {nesting} deep, more than the limit {}", self.limits.max_gate_nesting.min(MAX_GATE_NESTING)),
                )
                .hint("flatten the definitions, or raise the nesting limit (--max-gate-nesting)"),
            );
            ok = false;
        }
        if !ok {
            self.broken_gates.insert(CompactString::from(*name));
            return;
        }
        let opaque_index = if def.body.is_none() {
            self.circuit.opaque.push(OpaqueDecl {
                name: name.to_string(),
                n_params: def.params.len(),
                n_qubits: def.qargs.len(),
            });
            Some(self.circuit.opaque.len() as u32 - 1)
        } else {
            None
        };
        let position = |arg: &Arg| {
            def.qargs
                .iter()
                .position(|q| q.name == arg.reg.name)
                .unwrap_or(0) as u32
        };
        let body = def.body.iter().flatten().filter_map(|stmt| match stmt {
            BodyStmt::Call(call) => Some(BodyOp::Call {
                gate: self.lookup_gate(call.name.name)?,
                params: call
                    .params
                    .iter()
                    .map(|e| Value::bind(e, &def.params))
                    .collect(),
                args: call.args.iter().map(position).collect(),
            }),
            BodyStmt::Barrier { args, .. } => Some(BodyOp::Barrier {
                args: args.iter().map(position).collect(),
            }),
        });
        let body = body.collect();
        self.gates.insert((*name).into(), self.defs.len());
        self.defs.push(std::sync::Arc::new(Def {
            name: name.to_string(),
            n_params: def.params.len(),
            n_qubits: def.qargs.len(),
            opaque_index,
            body,
            nesting,
        }));
    }

    /// Reports every name of `names` listed before; true when all are distinct.
    pub(super) fn distinct_names(
        &mut self,
        names: &[Ident],
        code: &'static str,
        what: &str,
    ) -> bool {
        let mut ok = true;
        for (i, n) in names.iter().enumerate() {
            if names[..i].iter().any(|m| m.name == n.name) {
                self.diags.push(
                    Diagnostic::error(code, n.span, format!("{what} `{}` is listed twice", n.name))
                        .hint(format!("give each {what} its own name")),
                );
                ok = false;
            }
        }
        ok
    }

    pub(super) fn check_expr_names(&mut self, e: &Expr, params: &[Ident]) -> bool {
        match &e.kind {
            ExprKind::Number(_) | ExprKind::Pi => true,
            ExprKind::Param(p) => {
                if params.iter().any(|q| q.name == *p) {
                    true
                } else {
                    let hint = if params.is_empty() {
                        "only numbers, `pi` and functions may appear here".to_string()
                    } else {
                        format!(
                            "the parameters in scope are: {}",
                            params.iter().map(|q| q.name).collect::<Vec<_>>().join(", ")
                        )
                    };
                    self.diags.push(
                        Diagnostic::error(
                            "unknown-parameter",
                            e.span,
                            format!("`{p}` is not a parameter in scope"),
                        )
                        .hint(hint),
                    );
                    false
                }
            }
            ExprKind::Neg(a) | ExprKind::Call(_, a) => self.check_expr_names(a, params),
            ExprKind::Binary(_, a, b) => {
                let left = self.check_expr_names(a, params);
                self.check_expr_names(b, params) && left
            }
        }
    }
}

/// Evaluates an expression with the named parameters bound to values.
pub fn eval(e: &Expr, names: &[&str], values: &[f64]) -> f64 {
    match &e.kind {
        ExprKind::Number(v) => *v,
        ExprKind::Pi => std::f64::consts::PI,
        ExprKind::Param(p) => names
            .iter()
            .position(|n| n == p)
            .map_or(f64::NAN, |i| values[i]),
        ExprKind::Neg(a) => -eval(a, names, values),
        ExprKind::Call(f, a) => f.apply(eval(a, names, values)),
        ExprKind::Binary(op, a, b) => op.apply(eval(a, names, values), eval(b, names, values)),
    }
}
