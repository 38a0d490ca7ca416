//! Recursive-descent parser from tokens to [`Program`].
//!
//! Invariant: the parser never gives up on the first mistake. It returns the tree of
//! everything it could read plus every diagnostic, recovering at the next `;` or `}`.
//! Recursion is bounded by [`MAX_EXPR_DEPTH`], so no input overflows the stack.

use super::ast::*;
use super::diag::{Diagnostic, FileId, Span};
use super::lexer::Token;
use logos::Logos;

/// Deepest nesting of parentheses and unary operators in one expression.
pub const MAX_EXPR_DEPTH: usize = 128;

/// Most binary operators in one expression (left-deep chains would otherwise make
/// evaluation recurse without bound).
pub const MAX_EXPR_OPS: usize = 1024;

/// One token and its byte range, packed (offsets fit in `u32`, as in [`Span`]).
#[derive(Clone, Copy)]
struct Tok {
    kind: Token,
    start: u32,
    end: u32,
}

/// Tokens are lexed ahead in batches of this many: the lexer then runs in a tight
/// loop of its own and the parser reads plain values from a small buffer.
const BATCH: usize = 512;

/// The lexer behind a buffer of tokens read ahead.
struct TokenStream<'a> {
    lexer: logos::Lexer<'a, Token>,
    buf: Vec<Tok>,
    at: usize,
    len: u32,
}

impl<'a> TokenStream<'a> {
    /// Lexes `text` from byte `offset`, which must be a character boundary.
    fn new(text: &'a str, offset: usize) -> TokenStream<'a> {
        let mut lexer = Token::lexer(text);
        lexer.bump(offset);
        TokenStream {
            lexer,
            buf: Vec::with_capacity(BATCH),
            at: 0,
            len: text.len() as u32,
        }
    }

    /// The tokens lexed but not yet taken.
    fn ahead(&self) -> &[Tok] {
        &self.buf[self.at..]
    }

    #[inline]
    fn next(&mut self) -> Tok {
        if self.at == self.buf.len() {
            self.refill();
        }
        let t = self.buf[self.at];
        self.at += 1;
        t
    }

    /// Lexes the next batch; at the end of the text the batch ends with `Eof`.
    #[inline(never)]
    fn refill(&mut self) {
        self.buf.clear();
        self.at = 0;
        while self.buf.len() < BATCH {
            match self.lexer.next() {
                Some(tok) => {
                    let r = self.lexer.span();
                    self.buf.push(Tok {
                        kind: tok.unwrap_or(Token::Error),
                        start: r.start as u32,
                        end: r.end as u32,
                    });
                }
                None => {
                    self.buf.push(Tok {
                        kind: Token::Eof,
                        start: self.len,
                        end: self.len,
                    });
                    return;
                }
            }
        }
    }
}

struct Parser<'a> {
    tokens: TokenStream<'a>,
    /// The current token and the one before it.
    cur: Tok,
    prev: Tok,
    /// Tokens consumed so far; tells whether a rule made progress.
    pos: usize,
    text: &'a str,
    file: FileId,
    diags: Vec<Diagnostic>,
    depth: usize,
    /// Binary operators in the expression being read; bounds left-deep chains.
    expr_ops: usize,
    /// Set when a `;` was missing before a token on a new line: parsing resumes at
    /// that token instead of skipping the next statement.
    resume_here: bool,
    /// Boxes of gate calls handed back after their statements were used. Kept boxed:
    /// the point is to reuse the allocations the statements carry.
    #[allow(clippy::vec_box)]
    spares: Vec<Box<GateCall<'a>>>,
    /// Statements read so far.
    n_stmts: usize,
    /// Whether the last statement read without error.
    last_ok: bool,
}

type PResult<T> = Result<T, ()>;

/// Parses one file. `is_main` asks for the `OPENQASM 2.0;` header (its absence is a
/// warning, since real files often omit it).
pub fn parse(file: FileId, text: &str, is_main: bool) -> (Program<'_>, Vec<Diagnostic>) {
    let mut reader = StmtReader::new(file, text, is_main);
    let mut stmts = Vec::new();
    reader.fill(&mut stmts, usize::MAX, u32::MAX);
    (Program { stmts }, reader.finish())
}

/// How a call of [`StmtReader::fill`] ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Fill {
    /// The batch is full; more statements may follow.
    More,
    /// The end of the file was reached.
    End,
    /// The next statement starts at or after the stop offset.
    Stop,
}

/// Reads the statements of one file in batches, for callers that consume them
/// elsewhere (another thread, say) and hand the used batches back for reuse.
pub struct StmtReader<'a> {
    p: Parser<'a>,
}

impl<'a> StmtReader<'a> {
    /// Starts reading `text`. `is_main` asks for the `OPENQASM 2.0;` header.
    pub fn new(file: FileId, text: &'a str, is_main: bool) -> StmtReader<'a> {
        let mut r = StmtReader::starting_at(file, text, 0);
        r.p.n_stmts = 0;
        if is_main {
            r.p.check_header();
        }
        r
    }

    /// Starts reading `text` at byte `offset`, a character boundary, as if a
    /// statement had been read before it (so a header there is misplaced).
    pub fn starting_at(file: FileId, text: &'a str, offset: usize) -> StmtReader<'a> {
        let mut tokens = TokenStream::new(text, offset);
        let first = tokens.next();
        let p = Parser {
            tokens,
            cur: first,
            prev: Tok {
                kind: Token::Eof,
                start: 0,
                end: 0,
            },
            pos: 0,
            text,
            file,
            diags: Vec::new(),
            depth: 0,
            expr_ops: 0,
            resume_here: false,
            spares: Vec::new(),
            n_stmts: 1,
            last_ok: true,
        };
        StmtReader { p }
    }

    /// Appends the next statements to `batch` until it holds `max`, the file ends,
    /// or the next statement would start at or after byte `stop` (`u32::MAX`: never).
    pub fn fill(&mut self, batch: &mut Vec<Stmt<'a>>, max: usize, stop: u32) -> Fill {
        self.p.fill(batch, max, stop)
    }

    /// Where the next token starts (the length of the text at its end).
    pub fn next_start(&self) -> u32 {
        self.p.cur.start
    }

    /// Whether the last statement read without error: the reader then stands at the
    /// start of a statement exactly as a fresh reader started there would.
    pub fn last_ok(&self) -> bool {
        self.p.last_ok
    }

    /// Whether anything read so far gave a diagnostic.
    pub fn has_diagnostics(&self) -> bool {
        !self.p.diags.is_empty()
    }

    /// Empties a used batch, keeping the boxes of its gate calls for the next ones.
    pub fn recycle(&mut self, batch: &mut Vec<Stmt<'a>>) {
        for s in batch.drain(..) {
            if let Stmt::QOp(QOp::Call(call)) = s {
                self.p.spares.push(call);
            }
        }
    }

    /// The diagnostics of everything read.
    pub fn finish(self) -> Vec<Diagnostic> {
        self.p.diags
    }
}

impl<'a> Parser<'a> {
    #[inline(always)]
    fn peek(&self) -> Token {
        self.cur.kind
    }

    #[inline(always)]
    fn span(&self) -> Span {
        Span {
            file: self.file,
            start: self.cur.start,
            end: self.cur.end,
        }
    }

    fn prev_span(&self) -> Span {
        Span {
            file: self.file,
            start: self.prev.start,
            end: self.prev.end,
        }
    }

    #[inline(always)]
    fn slice(&self) -> &'a str {
        &self.text[self.cur.start as usize..self.cur.end as usize]
    }

    #[inline(always)]
    fn bump(&mut self) -> Span {
        let s = self.span();
        if self.cur.kind != Token::Eof {
            self.prev = self.cur;
            self.cur = self.tokens.next();
            self.pos += 1;
        }
        s
    }

    fn found(&self) -> String {
        match self.peek() {
            Token::Eof => "the end of the file".to_string(),
            Token::Error => format!("the unknown character `{}`", self.slice()),
            _ => format!("`{}`", self.slice()),
        }
    }

    fn error_here(&mut self, code: &'static str, message: String, hint: &str) {
        let d = if self.peek() == Token::Error {
            Diagnostic::error("unknown-character", self.span(), message)
                .label("no OpenQASM 2 token starts here")
                .hint("remove the character; OpenQASM 2 comments start with `//`")
        } else {
            Diagnostic::error(code, self.span(), message).hint(hint)
        };
        self.diags.push(d);
    }

    #[inline(always)]
    fn expect(&mut self, tok: Token, hint: &str) -> PResult<Span> {
        if self.peek() == tok {
            return Ok(self.bump());
        }
        self.expect_failed(tok, hint)
    }

    /// The error path of [`Parser::expect`], kept out of line.
    #[cold]
    fn expect_failed(&mut self, tok: Token, hint: &str) -> PResult<Span> {
        let code = if tok == Token::Semi {
            "missing-semicolon"
        } else {
            "unexpected-token"
        };
        if tok == Token::Semi && self.pos > 0 {
            // Point just after the previous token: that is where the `;` belongs.
            let prev = self.prev_span();
            let at = Span {
                file: prev.file,
                start: prev.end,
                end: prev.end,
            };
            let gap = &self.text[prev.end as usize..self.cur.start as usize];
            self.resume_here = gap.contains('\n');
            // A name right after an argument on the same line is most often a missing comma.
            let hint = if !self.resume_here
                && self.peek() == Token::Ident
                && self.prev.kind == Token::RBracket
            {
                "separate arguments with `,`, or end the statement with `;`"
            } else {
                hint
            };
            self.diags.push(
                Diagnostic::error(code, at, format!("expected `;`, found {}", self.found()))
                    .label("`;` expected here")
                    .hint(hint),
            );
            return Err(());
        }
        let msg = format!("expected {}, found {}", tok.describe(), self.found());
        self.error_here(code, msg, hint);
        Err(())
    }

    #[inline(always)]
    fn ident(&mut self, what: &str) -> PResult<Ident<'a>> {
        if self.peek() == Token::Ident {
            let name = self.slice();
            let span = self.bump();
            return Ok(Ident { name, span });
        }
        self.ident_failed(what)
    }

    /// The error path of [`Parser::ident`], kept out of line.
    #[cold]
    fn ident_failed(&mut self, what: &str) -> PResult<Ident<'a>> {
        let keyword = !matches!(
            self.peek(),
            Token::Eof | Token::Error | Token::Int | Token::Real | Token::Str
        ) && self.slice().chars().all(|c| c.is_ascii_alphabetic());
        let msg = format!("expected {what}, found {}", self.found());
        let hint = if keyword {
            "this word is reserved in OpenQASM 2; choose another name"
        } else {
            "names start with a letter and continue with letters, digits or `_`"
        };
        let code = if keyword {
            "reserved-word"
        } else {
            "expected-name"
        };
        self.error_here(code, msg, hint);
        Err(())
    }

    #[inline(always)]
    fn integer(&mut self, what: &str) -> PResult<(u64, Span)> {
        if self.peek() == Token::Int && self.cur.end - self.cur.start <= 19 {
            // At most 19 digits always fit in 64 bits; the lexer guarantees digits.
            let value = self.slice().bytes().fold(0u64, |acc, d| {
                acc.wrapping_mul(10)
                    .wrapping_add(u64::from(d.wrapping_sub(b'0')))
            });
            return Ok((value, self.bump()));
        }
        self.integer_slow(what)
    }

    /// The value an `if` compares a register with: a whole number of any width up to
    /// that of the widest register (65,536 bits is 19,729 digits).
    fn register_value(&mut self) -> PResult<(crate::circuit::RegValue, Span)> {
        const MAX_DIGITS: usize = 20_000;
        if self.peek() == Token::Int {
            let (text, span) = (self.slice(), self.span());
            if text.len() <= MAX_DIGITS {
                if let Some(v) = crate::circuit::RegValue::parse_decimal(text) {
                    self.bump();
                    return Ok((v, span));
                }
            }
            self.diags.push(
                Diagnostic::error(
                    "integer-too-large",
                    span,
                    format!("a register value of {} digits is too long", text.len()),
                )
                .hint(format!(
                    "a register value has at most {MAX_DIGITS} digits (registers hold at most 65,536 bits)"
                )),
            );
            self.bump();
            return Err(());
        }
        self.integer("a register value")
            .map(|(v, s)| (crate::circuit::RegValue::Small(v), s))
    }

    /// Integers of 20 digits and more (which may overflow) and the error paths.
    #[cold]
    fn integer_slow(&mut self, what: &str) -> PResult<(u64, Span)> {
        if self.peek() == Token::Int {
            let text = self.slice();
            let span = self.span();
            // The lexer guarantees ASCII digits; only overflow can fail.
            let value = text.bytes().try_fold(0u64, |acc, d| {
                acc.checked_mul(10)?.checked_add(u64::from(d - b'0'))
            });
            self.bump();
            return match value {
                Some(v) => Ok((v, span)),
                None => {
                    self.diags.push(
                        Diagnostic::error(
                            "integer-too-large",
                            span,
                            format!("{what} `{text}` is too large"),
                        )
                        .hint("write a smaller number: register sizes and indices are bounded by --max-qubits (65,536 by default), parameters are real numbers"),
                    );
                    Err(())
                }
            };
        }
        let msg = format!(
            "expected {what} (a non-negative integer), found {}",
            self.found()
        );
        self.error_here("expected-integer", msg, "write a whole number such as `3`");
        Err(())
    }

    /// Skips to just after the next `;` or `}` so that parsing can go on.
    fn recover(&mut self) {
        loop {
            match self.peek() {
                Token::Eof => return,
                Token::Semi | Token::RBrace => {
                    self.bump();
                    return;
                }
                _ => {
                    self.bump();
                }
            }
        }
    }

    fn check_header(&mut self) {
        if self.peek() != Token::OpenQasm {
            let at = Span::new(self.file, 0..0);
            self.diags.push(
                Diagnostic::warning(
                    "missing-header",
                    at,
                    "the file does not start with `OPENQASM 2.0;`",
                )
                .label("header expected here")
                .hint("add `OPENQASM 2.0;` as the first statement; read as OpenQASM 2.0"),
            );
        }
    }

    fn fill(&mut self, batch: &mut Vec<Stmt<'a>>, max: usize, stop: u32) -> Fill {
        while batch.len() < max {
            if self.peek() == Token::Eof {
                return Fill::End;
            }
            if self.cur.start >= stop {
                return Fill::Stop;
            }
            let start = self.pos;
            let result = self.statement(self.n_stmts == 0);
            self.last_ok = result.is_ok();
            match result {
                Ok(s) => {
                    self.n_stmts += 1;
                    batch.push(s);
                }
                Err(()) => {
                    let resume = std::mem::take(&mut self.resume_here) && self.pos > start;
                    if !resume && (self.pos == start || self.prev.kind != Token::Semi) {
                        self.recover();
                    }
                }
            }
        }
        if self.peek() == Token::Eof {
            Fill::End
        } else {
            Fill::More
        }
    }

    fn statement(&mut self, first: bool) -> PResult<Stmt<'a>> {
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

    fn qop(&mut self) -> PResult<QOp<'a>> {
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
    fn gate_call(&mut self) -> PResult<Box<GateCall<'a>>> {
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
    fn arg(&mut self) -> PResult<Arg<'a>> {
        let reg = self.ident("a register or argument name")?;
        let mut index = None;
        if self.peek() == Token::LBracket {
            self.bump();
            index = Some(self.integer("an index")?);
            self.expect(Token::RBracket, "close the index with `]`")?;
        }
        Ok(Arg { reg, index })
    }

    fn arg_list(&mut self) -> PResult<ArgList<'a>> {
        let mut args = smallvec::smallvec![self.arg()?];
        while self.peek() == Token::Comma {
            self.bump();
            args.push(self.arg()?);
        }
        Ok(args)
    }

    fn gate_def(&mut self) -> PResult<GateDef<'a>> {
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
    fn recover_in_body(&mut self, start: usize) {
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

    fn count_op(&mut self) -> PResult<()> {
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

    fn expr(&mut self) -> PResult<Expr<'a>> {
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
    fn plain_constant(&mut self) -> Option<Expr<'a>> {
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

    fn bump_tok(&mut self) -> Token {
        let t = self.peek();
        self.bump();
        t
    }

    fn term(&mut self) -> PResult<Expr<'a>> {
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

    fn enter(&mut self) -> PResult<()> {
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

    fn unary(&mut self) -> PResult<Expr<'a>> {
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

    fn power(&mut self) -> PResult<Expr<'a>> {
        let base = self.atom()?;
        if self.peek() == Token::Caret {
            self.count_op()?;
            self.bump();
            let exponent = self.unary()?;
            return Ok(binary(BinOp::Pow, base, exponent));
        }
        Ok(base)
    }

    fn atom(&mut self) -> PResult<Expr<'a>> {
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
