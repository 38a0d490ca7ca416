//! The statement grammar: the header, declarations, quantum operations, gate
//! calls and arguments, `gate` and `opaque` definitions, with recovery inside a
//! definition's body.

use super::*;

impl<'a> Parser<'a> {
    pub(super) fn statement(&mut self, first: bool) -> PResult<Stmt<'a>> {
        let start = self.span();
        match self.peek() {
            Token::OpenQasm => {
                self.bump();
                let version = self.slice();
                if !matches!(self.peek(), Token::Real | Token::Int) {
                    let msg = format!("expected a version number, found {}", self.found());
                    self.error_here("bad-version", msg, "write `OPENQASM 2.0;`");
                    return Err(());
                }
                let vspan = self.bump();
                if !(version == "2" || version.starts_with("2.")) {
                    self.diags.push(
                        Diagnostic::error(
                            "unsupported-version",
                            vspan,
                            format!("OpenQASM version {version} is not supported"),
                        )
                        .hint("tutti reads OpenQASM 2; write `OPENQASM 2.0;`"),
                    );
                }
                if !first {
                    self.diags.push(
                        Diagnostic::error(
                            "misplaced-header",
                            start,
                            "`OPENQASM` must be the first statement",
                        )
                        .hint(
                            "move the header to the top of the file, before every other statement",
                        ),
                    );
                }
                let end = self.expect(Token::Semi, "end the header with `;`")?;
                Ok(Stmt::Version {
                    version,
                    span: start.to(end),
                })
            }
            Token::Include => {
                self.bump();
                if self.peek() != Token::Str {
                    let msg = format!(
                        "expected a file name in double quotes, found {}",
                        self.found()
                    );
                    self.error_here("bad-include", msg, "write e.g. `include \"qelib1.inc\";`");
                    return Err(());
                }
                let raw = self.slice();
                let path = &raw[1..raw.len() - 1];
                self.bump();
                let end = self.expect(Token::Semi, "end the include with `;`")?;
                Ok(Stmt::Include {
                    path,
                    span: start.to(end),
                })
            }
            Token::Qreg | Token::Creg => {
                let quantum = self.peek() == Token::Qreg;
                self.bump();
                let name = self.ident("a register name")?;
                self.expect(Token::LBracket, "declare a register as `qreg name[size];`")?;
                let size = self.integer("a register size")?;
                self.expect(Token::RBracket, "close the size with `]`")?;
                let end = self.expect(Token::Semi, "end the declaration with `;`")?;
                let span = start.to(end);
                Ok(if quantum {
                    Stmt::Qreg { name, size, span }
                } else {
                    Stmt::Creg { name, size, span }
                })
            }
            Token::Gate | Token::Opaque => self.gate_def().map(Stmt::Gate),
            Token::Barrier => {
                self.bump();
                let args = self.arg_list()?;
                let end = self.expect(Token::Semi, "end the barrier with `;`")?;
                Ok(Stmt::Barrier {
                    args: args.into_vec(),
                    span: start.to(end),
                })
            }
            Token::If => {
                self.bump();
                self.expect(Token::LParen, "write a condition as `if(creg==value)`")?;
                let creg = self.ident("a classical register name")?;
                if self.peek() != Token::EqEq {
                    let msg = format!("expected `==`, found {}", self.found());
                    self.error_here(
                        "bad-condition",
                        msg,
                        "OpenQASM 2 conditions compare a whole register with `==`",
                    );
                    return Err(());
                }
                self.bump();
                let value = self.register_value()?;
                self.expect(Token::RParen, "close the condition with `)`")?;
                if self.peek() == Token::If {
                    self.error_here(
                        "nested-if",
                        "`if` cannot be nested".into(),
                        "OpenQASM 2 allows one condition per operation",
                    );
                    return Err(());
                }
                let op = self.qop()?;
                let span = start.to(self.prev_span());
                Ok(Stmt::If {
                    creg,
                    value,
                    op: Box::new(op),
                    span,
                })
            }
            Token::Measure | Token::Reset | Token::Ident => self.qop().map(Stmt::QOp),
            _ => {
                let msg = format!("expected a statement, found {}", self.found());
                self.error_here(
                    "expected-statement",
                    msg,
                    "statements are declarations, gate definitions, gate calls, measure, reset, barrier or if",
                );
                Err(())
            }
        }
    }

    pub(super) fn qop(&mut self) -> PResult<QOp<'a>> {
        let start = self.span();
        match self.peek() {
            Token::Measure => {
                self.bump();
                let src = self.arg()?;
                self.expect(
                    Token::Arrow,
                    "write a measurement as `measure q[0] -> c[0];`",
                )?;
                let dst = self.arg()?;
                let end = self.expect(Token::Semi, "end the measurement with `;`")?;
                Ok(QOp::Measure {
                    src: Box::new(src),
                    dst: Box::new(dst),
                    span: start.to(end),
                })
            }
            Token::Reset => {
                self.bump();
                let arg = self.arg()?;
                let end = self.expect(Token::Semi, "end the reset with `;`")?;
                Ok(QOp::Reset {
                    arg,
                    span: start.to(end),
                })
            }
            Token::Ident => self.gate_call().map(QOp::Call),
            _ => {
                let msg = format!(
                    "expected a gate call, `measure` or `reset`, found {}",
                    self.found()
                );
                self.error_here(
                    "expected-operation",
                    msg,
                    "a condition applies to one quantum operation",
                );
                Err(())
            }
        }
    }

    /// Reads a gate call straight into a box, so the large call is never moved.
    pub(super) fn gate_call(&mut self) -> PResult<Box<GateCall<'a>>> {
        let name = self.ident("a gate name")?;
        let span = name.span;
        // The box of the previous call is reused: one allocation per file, not per call.
        let mut call = match self.spares.pop() {
            Some(mut b) => {
                b.name = name;
                b.params.clear();
                b.args.clear();
                b.span = span;
                b
            }
            None => Box::new(GateCall {
                name,
                params: smallvec::SmallVec::new(),
                args: ArgList::new(),
                span,
            }),
        };
        if self.peek() == Token::LParen {
            self.bump();
            if self.peek() != Token::RParen {
                loop {
                    call.params.push(self.expr()?);
                    if self.peek() == Token::Comma {
                        self.bump();
                    } else {
                        break;
                    }
                }
            }
            self.expect(Token::RParen, "close the parameter list with `)`")?;
        }
        call.args.push(self.arg()?);
        while self.peek() == Token::Comma {
            self.bump();
            call.args.push(self.arg()?);
        }
        let end = self.expect(Token::Semi, "end the gate call with `;`")?;
        call.span = span.to(end);
        Ok(call)
    }

    #[inline(always)]
    pub(super) fn arg(&mut self) -> PResult<Arg<'a>> {
        let reg = self.ident("a register or argument name")?;
        let mut index = None;
        if self.peek() == Token::LBracket {
            self.bump();
            index = Some(self.integer("an index")?);
            self.expect(Token::RBracket, "close the index with `]`")?;
        }
        Ok(Arg { reg, index })
    }

    pub(super) fn arg_list(&mut self) -> PResult<ArgList<'a>> {
        let mut args = smallvec::smallvec![self.arg()?];
        while self.peek() == Token::Comma {
            self.bump();
            args.push(self.arg()?);
        }
        Ok(args)
    }

    pub(super) fn gate_def(&mut self) -> PResult<GateDef<'a>> {
        let start = self.span();
        let opaque = self.peek() == Token::Opaque;
        self.bump();
        let name = self.ident("a gate name")?;
        let mut params = Vec::new();
        if self.peek() == Token::LParen {
            self.bump();
            if self.peek() != Token::RParen {
                params.push(self.ident("a parameter name")?);
                while self.peek() == Token::Comma {
                    self.bump();
                    params.push(self.ident("a parameter name")?);
                }
            }
            self.expect(Token::RParen, "close the parameter list with `)`")?;
        }
        let mut qargs = vec![self.ident("a qubit argument name")?];
        while self.peek() == Token::Comma {
            self.bump();
            qargs.push(self.ident("a qubit argument name")?);
        }
        if opaque {
            let end = self.expect(Token::Semi, "end the opaque declaration with `;`")?;
            return Ok(GateDef {
                name,
                params,
                qargs,
                body: None,
                span: start.to(end),
            });
        }
        self.expect(Token::LBrace, "a gate body starts with `{`")?;
        let mut body = Vec::new();
        loop {
            let stmt_start = self.pos;
            match self.peek() {
                Token::RBrace => break,
                Token::Eof => {
                    self.diags.push(
                        Diagnostic::error(
                            "unclosed-gate",
                            start,
                            format!("the body of gate `{}` is not closed", name.name),
                        )
                        .label("gate starts here")
                        .hint("end the gate body with `}`"),
                    );
                    return Err(());
                }
                Token::Barrier => {
                    let s = self.bump();
                    match self.arg_list().and_then(|a| {
                        Ok((a, self.expect(Token::Semi, "end the barrier with `;`")?))
                    }) {
                        Ok((args, end)) => body.push(BodyStmt::Barrier {
                            args,
                            span: s.to(end),
                        }),
                        Err(()) => self.recover_in_body(stmt_start),
                    }
                }
                Token::Ident => match self.gate_call() {
                    Ok(call) => body.push(BodyStmt::Call(*call)),
                    Err(()) => self.recover_in_body(stmt_start),
                },
                _ => {
                    let msg = format!(
                        "expected a gate call or `barrier` in a gate body, found {}",
                        self.found()
                    );
                    self.error_here(
                        "bad-gate-body",
                        msg,
                        "a gate body holds only gate calls and barriers; measure, reset, if and declarations are not allowed",
                    );
                    self.recover_in_body(stmt_start);
                }
            }
        }
        let end = self.bump();
        Ok(GateDef {
            name,
            params,
            qargs,
            body: Some(body),
            span: start.to(end),
        })
    }

    /// Like [`Parser::recover`] but stops before a `}` so the body can be closed.
    pub(super) fn recover_in_body(&mut self, start: usize) {
        if self.pos > start && self.prev.kind == Token::Semi {
            return;
        }
        loop {
            match self.peek() {
                Token::Eof | Token::RBrace => return,
                Token::Semi => {
                    self.bump();
                    return;
                }
                _ => {
                    self.bump();
                }
            }
        }
    }
}
