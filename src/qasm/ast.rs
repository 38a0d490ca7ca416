//! The syntax tree of one OpenQASM 2 file: plain values with spans, no meaning
//! attached (names are not resolved here).
//!
//! Invariant: the tree borrows every name from the source text (`'a`), so reading a
//! statement copies no string; whoever keeps a part beyond the text owns a copy.

use super::diag::Span;
use smallvec::SmallVec;

/// Arguments of one call; most calls have at most three, kept without allocation.
pub type ArgList<'a> = SmallVec<[Arg<'a>; 3]>;

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ident<'a> {
    pub name: &'a str,
    pub span: Span,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BinOp {
    Add,
    Sub,
    Mul,
    Div,
    Pow,
}

impl BinOp {
    pub fn apply(self, x: f64, y: f64) -> f64 {
        match self {
            BinOp::Add => x + y,
            BinOp::Sub => x - y,
            BinOp::Mul => x * y,
            BinOp::Div => x / y,
            BinOp::Pow => x.powf(y),
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Func {
    Sin,
    Cos,
    Tan,
    Exp,
    Ln,
    Sqrt,
}

impl Func {
    pub fn apply(self, x: f64) -> f64 {
        match self {
            Func::Sin => x.sin(),
            Func::Cos => x.cos(),
            Func::Tan => x.tan(),
            Func::Exp => x.exp(),
            Func::Ln => x.ln(),
            Func::Sqrt => x.sqrt(),
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            Func::Sin => "sin",
            Func::Cos => "cos",
            Func::Tan => "tan",
            Func::Exp => "exp",
            Func::Ln => "ln",
            Func::Sqrt => "sqrt",
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
pub enum ExprKind<'a> {
    Number(f64),
    Pi,
    Param(&'a str),
    Neg(Box<Expr<'a>>),
    Binary(BinOp, Box<Expr<'a>>, Box<Expr<'a>>),
    Call(Func, Box<Expr<'a>>),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Expr<'a> {
    pub kind: ExprKind<'a>,
    pub span: Span,
}

/// A quantum or classical argument: a whole register `q` or one bit `q[3]`.
#[derive(Debug, Clone, PartialEq)]
pub struct Arg<'a> {
    pub reg: Ident<'a>,
    pub index: Option<(u64, Span)>,
}

impl Arg<'_> {
    /// From the register name to the closing `]` (taken to follow the index).
    pub fn span(&self) -> Span {
        match self.index {
            Some((_, s)) => self.reg.span.to(Span {
                end: s.end + 1,
                ..s
            }),
            None => self.reg.span,
        }
    }
}

/// A gate call: `name(params) args;` (also `U` and `CX`).
#[derive(Debug, Clone, PartialEq)]
pub struct GateCall<'a> {
    pub name: Ident<'a>,
    pub params: SmallVec<[Expr<'a>; 3]>,
    pub args: ArgList<'a>,
    pub span: Span,
}

/// Operations allowed after `if(...)` and at top level.
#[derive(Debug, Clone, PartialEq)]
pub enum QOp<'a> {
    Call(Box<GateCall<'a>>),
    /// Boxed: a measurement is rarer than a gate call and would double the size of
    /// every operation.
    Measure {
        src: Box<Arg<'a>>,
        dst: Box<Arg<'a>>,
        span: Span,
    },
    Reset {
        arg: Arg<'a>,
        span: Span,
    },
}

/// A statement inside a gate body.
#[derive(Debug, Clone, PartialEq)]
pub enum BodyStmt<'a> {
    Call(GateCall<'a>),
    Barrier { args: ArgList<'a>, span: Span },
}

#[derive(Debug, Clone, PartialEq)]
pub struct GateDef<'a> {
    pub name: Ident<'a>,
    pub params: Vec<Ident<'a>>,
    pub qargs: Vec<Ident<'a>>,
    /// `None` for `opaque`.
    pub body: Option<Vec<BodyStmt<'a>>>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub enum Stmt<'a> {
    Version {
        version: &'a str,
        span: Span,
    },
    Include {
        path: &'a str,
        span: Span,
    },
    Qreg {
        name: Ident<'a>,
        size: (u64, Span),
        span: Span,
    },
    Creg {
        name: Ident<'a>,
        size: (u64, Span),
        span: Span,
    },
    Gate(GateDef<'a>),
    QOp(QOp<'a>),
    Barrier {
        args: Vec<Arg<'a>>,
        span: Span,
    },
    If {
        creg: Ident<'a>,
        value: (crate::circuit::RegValue, Span),
        op: Box<QOp<'a>>,
        span: Span,
    },
}

impl Stmt<'_> {
    /// From the statement's first token to its last.
    pub fn span(&self) -> Span {
        match self {
            Stmt::Version { span, .. }
            | Stmt::Include { span, .. }
            | Stmt::Qreg { span, .. }
            | Stmt::Creg { span, .. }
            | Stmt::Barrier { span, .. }
            | Stmt::If { span, .. } => *span,
            Stmt::Gate(d) => d.span,
            Stmt::QOp(QOp::Call(c)) => c.span,
            Stmt::QOp(QOp::Measure { span, .. }) | Stmt::QOp(QOp::Reset { span, .. }) => *span,
        }
    }
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Program<'a> {
    pub stmts: Vec<Stmt<'a>>,
}
