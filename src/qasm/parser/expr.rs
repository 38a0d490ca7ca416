//! The expression grammar: parameters of gate calls and definitions, with
//! precedence (`+ -`, `* /`, unary minus, `^` right-associative, function calls),
//! constants folded as they are read, and bounds on nesting and length so that no
//! expression can exhaust the stack.

use super::*;

/// Deepest nesting of parentheses and unary operators in one expression.
pub const MAX_EXPR_DEPTH: usize = 128;

/// Most binary operators in one expression (left-deep chains would otherwise make
/// evaluation recurse without bound).
pub const MAX_EXPR_OPS: usize = 1024;

impl<'a> Parser<'a> {
    pub(super) fn count_op(&mut self) -> PResult<()> {
        self.expr_ops += 1;
        if self.expr_ops > MAX_EXPR_OPS {
            self.error_here(
                "expression-too-long",
                format!("expression has more than {MAX_EXPR_OPS} operators"),
                "simplify the expression: the nesting bound is fixed, to keep the reader's stack safe on any input",
            );
            return Err(());
        }
        Ok(())
    }

    pub(super) fn expr(&mut self) -> PResult<Expr<'a>> {
        if self.depth == 0 {
            if let Some(e) = self.plain_constant() {
                return Ok(e);
            }
            self.expr_ops = 0;
        }
        let mut lhs = self.term()?;
        while matches!(self.peek(), Token::Plus | Token::Minus) {
            self.count_op()?;
            let op = if self.bump_tok() == Token::Plus {
                BinOp::Add
            } else {
                BinOp::Sub
            };
            let rhs = self.term()?;
            lhs = binary(op, lhs, rhs);
        }
        Ok(lhs)
    }

    /// The most common parameter, read without the general rules: numbers and `pi`
    /// joined by `+ - * /`, with `-` signs, up to a `,` or `)`, all in tokens already
    /// lexed. The value is computed with the same operations in the same order as the
    /// general rules fold them, so it is the same number to the bit. Anything else
    /// (names, functions, `^`, parentheses, `+` signs, long chains) gives `None` and
    /// consumes nothing.
    pub(super) fn plain_constant(&mut self) -> Option<Expr<'a>> {
        const MOST_TOKENS: usize = 32;
        let start = self.cur.start;
        let mut end = start;
        // The value of the terms so far and the `+` or `-` after them.
        let mut sum: Option<(f64, BinOp)> = None;
        // The value of the factors so far and the `*` or `/` after them.
        let mut product: Option<(f64, BinOp)> = None;
        let mut value = 0.0;
        let mut negate = false;
        let mut expect_atom = true;
        let tokens = std::iter::once(self.cur).chain(self.tokens.ahead().iter().copied());
        for (n, tok) in tokens.take(MOST_TOKENS).enumerate() {
            if expect_atom {
                let v = match tok.kind {
                    Token::Minus => {
                        negate = !negate;
                        continue;
                    }
                    Token::Int | Token::Real => {
                        number(tok.kind, &self.text[tok.start as usize..tok.end as usize])
                    }
                    Token::Pi => std::f64::consts::PI,
                    _ => return None,
                };
                let v = if negate { -v } else { v };
                negate = false;
                value = match product.take() {
                    Some((p, op)) => op.apply(p, v),
                    None => v,
                };
                expect_atom = false;
                end = tok.end;
                continue;
            }
            match tok.kind {
                Token::Star => product = Some((value, BinOp::Mul)),
                Token::Slash => product = Some((value, BinOp::Div)),
                Token::Plus | Token::Minus | Token::Comma | Token::RParen => {
                    let total = match sum.take() {
                        Some((s, op)) => op.apply(s, value),
                        None => value,
                    };
                    if matches!(tok.kind, Token::Comma | Token::RParen) {
                        for _ in 0..n {
                            self.bump();
                        }
                        // A lone `pi` stays symbolic, as the general rules leave it.
                        let kind = if n == 1 && self.prev.kind == Token::Pi {
                            ExprKind::Pi
                        } else {
                            ExprKind::Number(total)
                        };
                        let span = Span {
                            file: self.file,
                            start,
                            end,
                        };
                        return Some(Expr { kind, span });
                    }
                    let op = if tok.kind == Token::Plus {
                        BinOp::Add
                    } else {
                        BinOp::Sub
                    };
                    sum = Some((total, op));
                }
                _ => return None,
            }
            expect_atom = true;
        }
        None
    }

    pub(super) fn bump_tok(&mut self) -> Token {
        let t = self.peek();
        self.bump();
        t
    }

    pub(super) fn term(&mut self) -> PResult<Expr<'a>> {
        let mut lhs = self.unary()?;
        while matches!(self.peek(), Token::Star | Token::Slash) {
            self.count_op()?;
            let op = if self.bump_tok() == Token::Star {
                BinOp::Mul
            } else {
                BinOp::Div
            };
            let rhs = self.unary()?;
            lhs = binary(op, lhs, rhs);
        }
        Ok(lhs)
    }

    pub(super) fn enter(&mut self) -> PResult<()> {
        self.depth += 1;
        if self.depth > MAX_EXPR_DEPTH {
            self.error_here(
                "expression-too-deep",
                format!("expression nested more than {MAX_EXPR_DEPTH} levels deep"),
                "simplify the expression: the nesting bound is fixed, to keep the reader's stack safe on any input",
            );
            return Err(());
        }
        Ok(())
    }

    pub(super) fn unary(&mut self) -> PResult<Expr<'a>> {
        self.enter()?;
        let result = match self.peek() {
            Token::Minus => {
                let s = self.bump();
                self.unary().map(|e| Expr {
                    span: s.to(e.span),
                    kind: match constant(&e) {
                        Some(v) => ExprKind::Number(-v),
                        None => ExprKind::Neg(Box::new(e)),
                    },
                })
            }
            Token::Plus => {
                self.bump();
                self.unary()
            }
            _ => self.power(),
        };
        self.depth -= 1;
        result
    }

    pub(super) fn power(&mut self) -> PResult<Expr<'a>> {
        let base = self.atom()?;
        if self.peek() == Token::Caret {
            self.count_op()?;
            self.bump();
            let exponent = self.unary()?;
            return Ok(binary(BinOp::Pow, base, exponent));
        }
        Ok(base)
    }

    pub(super) fn atom(&mut self) -> PResult<Expr<'a>> {
        let span = self.span();
        let func = match self.peek() {
            Token::Sin => Some(Func::Sin),
            Token::Cos => Some(Func::Cos),
            Token::Tan => Some(Func::Tan),
            Token::Exp => Some(Func::Exp),
            Token::Ln => Some(Func::Ln),
            Token::Sqrt => Some(Func::Sqrt),
            _ => None,
        };
        if let Some(func) = func {
            self.bump();
            self.expect(Token::LParen, "a function is applied as `sin(x)`")?;
            let arg = self.expr()?;
            let end = self.expect(Token::RParen, "close the function argument with `)`")?;
            return Ok(Expr {
                kind: match constant(&arg) {
                    Some(v) => ExprKind::Number(func.apply(v)),
                    None => ExprKind::Call(func, Box::new(arg)),
                },
                span: span.to(end),
            });
        }
        match self.peek() {
            Token::Int | Token::Real => {
                let v = number(self.peek(), self.slice());
                self.bump();
                Ok(Expr {
                    kind: ExprKind::Number(v),
                    span,
                })
            }
            Token::Pi => {
                self.bump();
                Ok(Expr {
                    kind: ExprKind::Pi,
                    span,
                })
            }
            Token::Ident => {
                let name = self.slice();
                self.bump();
                Ok(Expr {
                    kind: ExprKind::Param(name),
                    span,
                })
            }
            Token::LParen => {
                self.bump();
                self.enter()?;
                let inner = self.expr();
                self.depth -= 1;
                let mut inner = inner?;
                let end = self.expect(Token::RParen, "close the parenthesis with `)`")?;
                inner.span = span.to(end);
                Ok(inner)
            }
            _ => {
                let msg = format!("expected an expression, found {}", self.found());
                self.error_here(
                    "expected-expression",
                    msg,
                    "parameters are numbers, `pi`, parameter names, + - * / ^ and sin cos tan exp ln sqrt",
                );
                Err(())
            }
        }
    }
}

/// The value of an `Int` or `Real` token.
fn number(kind: Token, text: &str) -> f64 {
    if kind == Token::Int && text.len() <= 15 {
        // Below 10^15 every integer is exact in f64, so this equals `parse`.
        text.bytes()
            .fold(0u64, |acc, d| acc * 10 + u64::from(d.wrapping_sub(b'0'))) as f64
    } else {
        text.parse().unwrap_or(f64::NAN)
    }
}

/// The value of an expression without parameters that is already a number.
fn constant(e: &Expr) -> Option<f64> {
    match e.kind {
        ExprKind::Number(v) => Some(v),
        ExprKind::Pi => Some(std::f64::consts::PI),
        _ => None,
    }
}

/// Builds a binary node, folding it to a number when both sides are numbers (the
/// same arithmetic as evaluation, so the value is identical; it saves allocations).
fn binary<'a>(op: BinOp, lhs: Expr<'a>, rhs: Expr<'a>) -> Expr<'a> {
    let span = lhs.span.to(rhs.span);
    if let (Some(x), Some(y)) = (constant(&lhs), constant(&rhs)) {
        return Expr {
            span,
            kind: ExprKind::Number(op.apply(x, y)),
        };
    }
    Expr {
        span,
        kind: ExprKind::Binary(op, Box::new(lhs), Box::new(rhs)),
    }
}
