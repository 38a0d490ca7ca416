//! Tokens of OpenQASM 2 (arXiv:1707.03429, appendix grammar), lexed with logos.
//!
//! Invariant: lexing never fails as a whole; a character that starts no token
//! becomes [`Token::Error`] with its span, and the parser reports it.

use logos::Logos;

#[derive(Logos, Debug, Clone, Copy, PartialEq)]
#[logos(skip r"[ \t\r\n\f]+")]
#[logos(skip r"//[^\n]*")]
pub enum Token {
    /// A `/* ... */` comment (not in the standard, but harmless); never returned.
    #[token("/*", skip_block_comment)]
    BlockComment,
    #[token("OPENQASM")]
    OpenQasm,
    #[token("include")]
    Include,
    #[token("qreg")]
    Qreg,
    #[token("creg")]
    Creg,
    #[token("gate")]
    Gate,
    #[token("opaque")]
    Opaque,
    #[token("barrier")]
    Barrier,
    #[token("measure")]
    Measure,
    #[token("reset")]
    Reset,
    #[token("if")]
    If,
    #[token("pi")]
    Pi,
    #[token("sin")]
    Sin,
    #[token("cos")]
    Cos,
    #[token("tan")]
    Tan,
    #[token("exp")]
    Exp,
    #[token("ln")]
    Ln,
    #[token("sqrt")]
    Sqrt,
    /// Identifiers; `U` and `CX` are identifiers with a built-in meaning.
    #[regex(r"[A-Za-z_][A-Za-z0-9_]*")]
    Ident,
    #[regex(r"([0-9]+\.[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?|[0-9]+[eE][+-]?[0-9]+")]
    Real,
    #[regex(r"[0-9]+")]
    Int,
    #[regex(r#""[^"\n]*""#)]
    Str,
    #[token(";")]
    Semi,
    #[token(",")]
    Comma,
    #[token("(")]
    LParen,
    #[token(")")]
    RParen,
    #[token("[")]
    LBracket,
    #[token("]")]
    RBracket,
    #[token("{")]
    LBrace,
    #[token("}")]
    RBrace,
    #[token("->")]
    Arrow,
    #[token("==")]
    EqEq,
    #[token("+")]
    Plus,
    #[token("-")]
    Minus,
    #[token("*")]
    Star,
    #[token("/")]
    Slash,
    #[token("^")]
    Caret,
    /// A character that starts no token (or an unterminated string or comment).
    Error,
    /// End of input.
    Eof,
}

impl Token {
    /// How the token is named in "expected ..." messages.
    pub fn describe(self) -> &'static str {
        use Token::*;
        match self {
            OpenQasm => "`OPENQASM`",
            Include => "`include`",
            Qreg => "`qreg`",
            Creg => "`creg`",
            Gate => "`gate`",
            Opaque => "`opaque`",
            Barrier => "`barrier`",
            Measure => "`measure`",
            Reset => "`reset`",
            If => "`if`",
            Pi => "`pi`",
            Sin | Cos | Tan | Exp | Ln | Sqrt => "a function name",
            Ident => "an identifier",
            Real => "a real number",
            Int => "an integer",
            Str => "a string",
            Semi => "`;`",
            Comma => "`,`",
            LParen => "`(`",
            RParen => "`)`",
            LBracket => "`[`",
            RBracket => "`]`",
            LBrace => "`{`",
            RBrace => "`}`",
            Arrow => "`->`",
            EqEq => "`==`",
            Plus => "`+`",
            Minus => "`-`",
            Star => "`*`",
            Slash => "`/`",
            Caret => "`^`",
            Error => "an unknown character",
            BlockComment => "a comment",
            Eof => "the end of the file",
        }
    }
}

fn skip_block_comment(lex: &mut logos::Lexer<Token>) -> logos::FilterResult<(), ()> {
    match lex.remainder().find("*/") {
        Some(end) => {
            lex.bump(end + 2);
            logos::FilterResult::Skip
        }
        None => {
            lex.bump(lex.remainder().len());
            logos::FilterResult::Error(())
        }
    }
}
