//! The syntax tree of one OpenQASM 2 file: plain values with spans, no meaning
//! attached (names are not resolved here).

use super::diag::Span;
use compact_str::CompactString;
use smallvec::SmallVec;

/// Arguments of one call; most calls have at most three, kept without allocation.
pub type ArgList = SmallVec<[Arg; 3]>;

#[derive(Debug, Clone, PartialEq)]
pub struct Ident {
    pub name: CompactString,
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
pub enum ExprKind {
    Number(f64),
    Pi,
    Param(CompactString),
    Neg(Box<Expr>),
    Binary(BinOp, Box<Expr>, Box<Expr>),
    Call(Func, Box<Expr>),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Expr {
    pub kind: ExprKind,
    pub span: Span,
}

/// A quantum or classical argument: a whole register `q` or one bit `q[3]`.
#[derive(Debug, Clone, PartialEq)]
pub struct Arg {
    pub reg: Ident,
    pub index: Option<(u64, Span)>,
}

impl Arg {
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
pub struct GateCall {
    pub name: Ident,
    pub params: SmallVec<[Expr; 3]>,
    pub args: ArgList,
    pub span: Span,
}

/// Operations allowed after `if(...)` and at top level.
#[derive(Debug, Clone, PartialEq)]
pub enum QOp {
    Call(Box<GateCall>),
    /// Boxed: a measurement is rarer than a gate call and would double the size of
    /// every operation.
    Measure {
        src: Box<Arg>,
        dst: Box<Arg>,
        span: Span,
    },
    Reset {
        arg: Arg,
        span: Span,
    },
}

/// A statement inside a gate body.
#[derive(Debug, Clone, PartialEq)]
pub enum BodyStmt {
    Call(GateCall),
    Barrier { args: ArgList, span: Span },
}

#[derive(Debug, Clone, PartialEq)]
pub struct GateDef {
    pub name: Ident,
    pub params: Vec<Ident>,
    pub qargs: Vec<Ident>,
    /// `None` for `opaque`.
    pub body: Option<Vec<BodyStmt>>,
    pub span: Span,
}

#[derive(Debug, Clone, PartialEq)]
pub enum Stmt {
    Version {
        version: String,
        span: Span,
    },
    Include {
        path: String,
        span: Span,
    },
    Qreg {
        name: Ident,
        size: (u64, Span),
        span: Span,
    },
    Creg {
        name: Ident,
        size: (u64, Span),
        span: Span,
    },
    Gate(GateDef),
    QOp(QOp),
    Barrier {
        args: Vec<Arg>,
        span: Span,
    },
    If {
        creg: Ident,
        value: (u64, Span),
        op: Box<QOp>,
        span: Span,
    },
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Program {
    pub stmts: Vec<Stmt>,
}
