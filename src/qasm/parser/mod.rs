//! Recursive-descent parser from tokens to [`Program`]. This module holds the token
//! stream, the statement reader the elaborator pulls batches from, and the parser's
//! primitives (expecting tokens, identifiers, integers, recovery); `statements` the
//! statement grammar and `expr` the expression grammar.
//!
//! Invariant: the parser never gives up on the first mistake. It returns the tree of
//! everything it could read plus every diagnostic, recovering at the next `;` or `}`.
//! Recursion is bounded by [`MAX_EXPR_DEPTH`], so no input overflows the stack.

use super::ast::*;
use super::diag::{Diagnostic, FileId, Span};
use super::lexer::Token;
use logos::Logos;

mod expr;
mod statements;

pub use expr::{MAX_EXPR_DEPTH, MAX_EXPR_OPS};

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
}
