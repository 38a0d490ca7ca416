//! Elaboration: resolves names, checks arities, expands `gate` definitions and
//! broadcasts, and produces the flat [`Circuit`].
//!
//! Invariant: elaboration never panics and never allocates beyond the [`Limits`]:
//! include depth and cycles, expanded operations, register and qubit counts, input
//! size and gate nesting are all checked and reported as located errors.

mod chunks;

use super::ast::*;
use super::diag::{Diagnostic, FileId, SourceMap, Span};
use super::parser::{Fill, StmtReader};
use crate::circuit::gates::QELIB1_2017;
use crate::circuit::*;
use compact_str::CompactString;
use rustc_hash::FxHashMap;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// The deepest gate nesting any limit allows: expansion recurses once per level,
/// and 4096 levels fit in the stack of every thread that reads (measured: 20,000
/// fit the main thread's 8 MiB, 50,000 did not).
pub const MAX_GATE_NESTING: usize = 4096;

/// Bounds that keep a hostile or mistaken input from exhausting the machine.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    pub max_include_depth: usize,
    pub max_ops: usize,
    pub max_register_size: u64,
    pub max_qubits: u64,
    pub max_clbits: u64,
    pub max_file_bytes: usize,
    pub max_gate_nesting: usize,
    /// Most diagnostics shown; the rest are counted.
    pub errors_shown: usize,
    /// Threads that read one large file together; 0 means one per core.
    pub max_threads: usize,
    /// A file is cut into chunks read in parallel only when each chunk gets at least
    /// this many bytes.
    pub min_chunk_bytes: usize,
}

impl Default for Limits {
    fn default() -> Limits {
        Limits {
            max_include_depth: 16,
            max_ops: 20_000_000,
            max_register_size: 1 << 16,
            max_qubits: 1 << 16,
            max_clbits: 1 << 16,
            max_file_bytes: 256 << 20,
            max_gate_nesting: 64,
            errors_shown: 20,
            max_threads: 0,
            min_chunk_bytes: 2 << 20,
        }
    }
}

/// Where included files come from. The standard library is built in and never loaded.
/// Shared by the threads that read one file (only the first of them loads).
pub trait Loader: Sync {
    /// Reads the file at `path`, or says why it cannot.
    fn load(&self, path: &Path) -> Result<String, String>;

    /// A name that is equal for every spelling of the same file; include cycles are
    /// found by comparing these.
    fn canonical(&self, path: &Path) -> PathBuf {
        path.to_path_buf()
    }
}

/// Reads included files from the file system.
pub struct FsLoader;

impl Loader for FsLoader {
    fn load(&self, path: &Path) -> Result<String, String> {
        std::fs::read_to_string(path).map_err(|e| e.to_string())
    }

    fn canonical(&self, path: &Path) -> PathBuf {
        std::fs::canonicalize(path).unwrap_or_else(|_| path.to_path_buf())
    }
}

/// Included files held in memory, for tests and embedding.
#[derive(Default)]
pub struct MemoryLoader(pub HashMap<PathBuf, String>);

impl Loader for MemoryLoader {
    fn load(&self, path: &Path) -> Result<String, String> {
        self.0
            .get(path)
            .cloned()
            .ok_or_else(|| "no such file".to_string())
    }
}

/// The outcome of reading a program: the circuit when there was no error, and every
/// diagnostic (errors and warnings) with the sources they point into.
pub struct ReadOutcome {
    pub circuit: Option<Circuit>,
    pub diagnostics: Vec<Diagnostic>,
    pub sources: SourceMap,
    /// Chunks of the main file that were read ahead on other threads and used (see
    /// [`Limits::max_threads`]); 0 when it was read on one thread.
    pub chunks_ahead: usize,
    /// Most diagnostics [`ReadOutcome::render`] shows ([`Limits::errors_shown`]).
    pub max_shown: usize,
}

impl ReadOutcome {
    pub fn errors(&self) -> impl Iterator<Item = &Diagnostic> {
        self.diagnostics.iter().filter(|d| d.is_error())
    }

    /// The diagnostics rendered as text, at most [`ReadOutcome::max_shown`] of them,
    /// then a count of the rest.
    pub fn render(&self) -> String {
        super::diag::render_limited(&self.diagnostics, &self.sources, self.max_shown)
    }
}

/// Reads and elaborates the program `text`, shown in messages as `name`; includes
/// resolve relative to the folder of `name`.
pub fn read_with(name: &str, text: &str, limits: &Limits, loader: &dyn Loader) -> ReadOutcome {
    let mut sources = SourceMap::default();
    let mut e = Elaborator {
        limits: *limits,
        loader,
        diags: Vec::new(),
        circuit: Circuit::default(),
        regs: FxHashMap::default(),
        gates: FxHashMap::default(),
        defs: Vec::new(),
        library: false,
        include_stack: Vec::new(),
        stopped: false,
        last_reg: None,
        scope_changes: 0,
        ahead: false,
        chunks_ahead: 0,
        repeats: FxHashMap::default(),
        broken_gates: Default::default(),
    };
    let file = sources.add(name, text);
    // About one operation per 16 bytes of program text; reserving up front saves
    // copying the whole list as it grows (untouched capacity costs no memory).
    // A failed reservation is not an error yet: growth below reports it with a place.
    let _ = e
        .circuit
        .instrs
        .try_reserve((text.len() / 16).min(limits.max_ops));
    crate::memory::advise_huge_pages(&mut e.circuit.instrs);
    e.include_stack
        .push((PathBuf::from(name), loader.canonical(Path::new(name))));
    e.file(file, &mut sources, true);
    let has_error = e.diags.iter().any(|d| d.is_error());
    let mut diagnostics = e.diags;
    for &(index, more) in e.repeats.values() {
        if more > 0 {
            diagnostics[index].message +=
                &format!(" ({more} later use(s) of this name not reported again)");
        }
    }
    diagnostics.sort_by_key(|d| (d.span.file.0, d.span.start));
    ReadOutcome {
        circuit: if has_error { None } else { Some(e.circuit) },
        diagnostics,
        sources,
        chunks_ahead: e.chunks_ahead,
        max_shown: limits.errors_shown,
    }
}

/// Statements handed from the reader to the elaborator at a time.
const BATCH: usize = 64;

/// Where the reading of one file stands: the reader, the batch in use, the parser's
/// diagnostics of readers already done with, and where a limit stopped elaboration.
struct Reading<'a> {
    reader: StmtReader<'a>,
    batch: Vec<Stmt<'a>>,
    diags: Vec<Diagnostic>,
    stopped_at: Option<u32>,
}

impl<'a> Reading<'a> {
    fn new(reader: StmtReader<'a>) -> Reading<'a> {
        Reading {
            reader,
            batch: Vec::with_capacity(BATCH),
            diags: Vec::new(),
            stopped_at: None,
        }
    }

    /// Goes on with `reader` (which read a chunk ahead and stands where it ends).
    fn switch_to(&mut self, reader: StmtReader<'a>) {
        let done = std::mem::replace(&mut self.reader, reader);
        self.diags.extend(done.finish());
    }

    /// The parser's diagnostics. When a limit stopped elaboration, only those before
    /// the statement that stopped it: readers read ahead in batches and chunks, and
    /// what they saw beyond the stop is dropped, so the outcome does not depend on it.
    fn finish(self) -> Vec<Diagnostic> {
        let mut diags = self.diags;
        diags.extend(self.reader.finish());
        if let Some(at) = self.stopped_at {
            diags.retain(|d| d.span.start < at);
        }
        diags
    }
}

#[derive(Clone, Copy)]
enum RegKind {
    Quantum(usize),
    Classical(usize),
}

#[derive(Clone, Copy)]
enum GateRef {
    Library(GateKind),
    Defined(usize),
}

struct Elaborator<'l> {
    limits: Limits,
    loader: &'l dyn Loader,
    diags: Vec<Diagnostic>,
    circuit: Circuit,
    regs: FxHashMap<CompactString, (RegKind, Span)>,
    gates: FxHashMap<CompactString, usize>,
    defs: Vec<std::sync::Arc<Def>>,
    library: bool,
    /// The files being read, outermost first: (name as shown, canonical name).
    include_stack: Vec<(PathBuf, PathBuf)>,
    /// The register named last, with its kind.
    last_reg: Option<(CompactString, RegKind)>,
    /// Set when a limit was hit: nothing more is elaborated.
    stopped: bool,
    /// Counts statements that may change the names in scope (declarations,
    /// definitions, includes); a chunk read ahead is valid only if none came between.
    scope_changes: u64,
    /// Set for an elaborator that reads a chunk ahead: it stops at any statement
    /// that would change the names in scope (as if a limit stopped it).
    ahead: bool,
    /// Chunks read ahead and used.
    chunks_ahead: usize,
    /// Errors reported once per name (an undefined gate or register): the index of
    /// the reported one and how many later uses were not reported again.
    repeats: FxHashMap<(&'static str, CompactString), (usize, usize)>,
    /// Gates whose definition had an error: calls of them are not errors of their
    /// own (the definition's error is the root), so one mistake does not cascade.
    broken_gates: rustc_hash::FxHashSet<CompactString>,
}

/// A gate definition as the elaborator keeps it, owned (the syntax tree borrows the
/// file's text) and with every name resolved: gates to [`GateRef`], parameters and
/// qubit arguments to positions, so expanding a call copies and looks up nothing.
struct Def {
    name: String,
    n_params: usize,
    n_qubits: usize,
    /// For `opaque`: the index of its declaration in [`Circuit::opaque`].
    opaque_index: Option<u32>,
    body: Vec<BodyOp>,
    nesting: usize,
}

enum BodyOp {
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
enum Value {
    Number(f64),
    Param(usize),
    Neg(Box<Value>),
    Binary(BinOp, Box<Value>, Box<Value>),
    Call(Func, Box<Value>),
}

impl Value {
    /// Binds the names of `e` to their positions in `params`. Names were checked when
    /// the definition was read; an unknown one would evaluate to NaN.
    fn bind(e: &Expr, params: &[Ident]) -> Value {
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
    fn eval(&self, values: &[f64]) -> f64 {
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
    fn file(&mut self, file: FileId, sources: &mut SourceMap, is_main: bool) {
        let text = sources.shared_text(file);
        if text.len() > self.limits.max_file_bytes {
            self.diags.push(
                Diagnostic::error(
                    "file-too-large",
                    Span::new(file, 0..0),
                    format!("the file is {} bytes, more than the limit of {}", text.len(), self.limits.max_file_bytes),
                )
                .hint("raise the input size limit (--max-file-bytes) if the file is meant to be this large"),
            );
            return;
        }
        let mut reading = Reading::new(StmtReader::new(file, &text, is_main));
        let n_chunks = if is_main {
            self.n_chunks(text.len())
        } else {
            1
        };
        if n_chunks > 1 {
            self.read_chunks_ahead(&mut reading, file, &text, n_chunks, sources);
        }
        if !self.stopped {
            self.run(&mut reading, u32::MAX, sources, None);
        }
        let diags = reading.finish();
        self.diags.extend(diags);
    }

    /// Elaborates what `reading` reads until the next statement would start at or
    /// after byte `stop`, the file ends, a limit stops elaboration, or `cancel` is
    /// set. An elaborator reading ahead also stops at its first diagnostic (the chunk
    /// is then of no use); such early ends return [`Fill::More`].
    fn run<'a>(
        &mut self,
        reading: &mut Reading<'a>,
        stop: u32,
        sources: &mut SourceMap,
        cancel: Option<&std::sync::atomic::AtomicBool>,
    ) -> Fill {
        loop {
            let fill = reading.reader.fill(&mut reading.batch, BATCH, stop);
            for s in &reading.batch {
                self.statement(s, sources);
                if self.stopped {
                    reading.stopped_at = Some(s.span().start);
                    break;
                }
            }
            reading.reader.recycle(&mut reading.batch);
            let spoiled =
                self.ahead && (!self.diags.is_empty() || reading.reader.has_diagnostics());
            let cancelled = cancel.is_some_and(|c| c.load(std::sync::atomic::Ordering::Relaxed));
            if self.stopped || spoiled || cancelled {
                return Fill::More;
            }
            if fill != Fill::More {
                return fill;
            }
        }
    }

    fn statement(&mut self, stmt: &Stmt, sources: &mut SourceMap) {
        if matches!(
            stmt,
            Stmt::Include { .. } | Stmt::Qreg { .. } | Stmt::Creg { .. } | Stmt::Gate(_)
        ) {
            self.scope_changes += 1;
            if self.ahead {
                self.stopped = true;
                return;
            }
        }
        match stmt {
            Stmt::Version { .. } => {}
            Stmt::Include { path, span } => self.include(path, *span, sources),
            Stmt::Qreg { name, size, .. } => self.declare(name, *size, true),
            Stmt::Creg { name, size, .. } => self.declare(name, *size, false),
            Stmt::Gate(def) => self.define(def),
            Stmt::QOp(op) => self.qop(op, None),
            Stmt::Barrier { args, .. } => {
                if let Some(lists) = self.resolve_qargs(args) {
                    let mut qubits: Vec<Qubit> = lists.into_iter().flatten().collect();
                    qubits.sort();
                    qubits.dedup();
                    self.emit(
                        Op::Barrier {
                            qubits: qubits.into(),
                        },
                        None,
                        stmt.span(),
                    );
                }
            }
            Stmt::If {
                creg, value, op, ..
            } => {
                let Some(index) = self.creg(creg) else { return };
                let size = self.circuit.cregs[index].size;
                if !value.0.fits(size) {
                    let below = if size < 64 {
                        format!("below {}", 1u64 << size)
                    } else {
                        format!("below 2^{size}")
                    };
                    self.diags.push(
                        Diagnostic::error(
                            "condition-out-of-range",
                            value.1,
                            format!(
                                "register `{}` has {size} bits and can never equal {}",
                                creg.name, value.0
                            ),
                        )
                        .hint(format!("the value must be {below}")),
                    );
                    return;
                }
                self.qop(
                    op,
                    Some(Condition {
                        creg: index as u32,
                        value: value.0.clone(),
                    }),
                );
            }
        }
    }

    fn include(&mut self, path: &str, span: Span, sources: &mut SourceMap) {
        if path == "qelib1.inc" {
            self.library = true;
            return;
        }
        let parent = self
            .include_stack
            .last()
            .and_then(|p| p.0.parent())
            .map(Path::to_path_buf);
        let resolved = parent.unwrap_or_default().join(path);
        let canonical = self.loader.canonical(&resolved);
        if self.include_stack.iter().any(|p| p.1 == canonical) {
            self.diags.push(
                Diagnostic::error(
                    "include-cycle",
                    span,
                    format!(
                        "`{path}` includes itself (through {})",
                        self.include_chain()
                    ),
                )
                .hint("remove the include that closes the cycle"),
            );
            return;
        }
        if self.include_stack.len() > self.limits.max_include_depth {
            self.diags.push(
                Diagnostic::error(
                    "include-too-deep",
                    span,
                    format!(
                        "includes are nested more than {} deep",
                        self.limits.max_include_depth
                    ),
                )
                .hint(
                    "flatten the includes, or raise the include depth limit (--max-include-depth)",
                ),
            );
            return;
        }
        match self.loader.load(&resolved) {
            Ok(text) => {
                let id = sources.add(resolved.display().to_string(), text);
                self.include_stack.push((resolved, canonical));
                self.file(id, sources, false);
                self.include_stack.pop();
            }
            Err(why) => self.diags.push(
                Diagnostic::error("include-not-found", span, format!("cannot read `{}`: {why}", resolved.display()))
                    .hint("paths resolve relative to the including file; the standard library is `qelib1.inc`"),
            ),
        }
    }

    fn include_chain(&self) -> String {
        self.include_stack
            .iter()
            .map(|p| p.0.display().to_string())
            .collect::<Vec<_>>()
            .join(" -> ")
    }

    fn declare(&mut self, name: &Ident, size: (u64, Span), quantum: bool) {
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

    fn lookup_gate(&self, name: &str) -> Option<GateRef> {
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
    fn signature(&self, g: &GateRef) -> (usize, usize) {
        match g {
            GateRef::Library(k) => (k.n_params(), k.n_qubits()),
            GateRef::Defined(i) => (self.defs[*i].n_params, self.defs[*i].n_qubits),
        }
    }

    /// Reports `d` for the first use of `name` only; later uses of the same name
    /// with the same kind of error are counted, and the count is added to the
    /// first report, so one missing declaration does not flood the output.
    fn push_once(&mut self, name: &str, d: Diagnostic) {
        match self.repeats.get_mut(&(d.code, CompactString::from(name))) {
            Some((_, more)) => *more += 1,
            None => {
                self.repeats
                    .insert((d.code, CompactString::from(name)), (self.diags.len(), 0));
                self.diags.push(d);
            }
        }
    }

    fn undefined_gate(&self, name: &Ident) -> Diagnostic {
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

    /// Checks a call's name and counts; returns the gate it names.
    fn check_call(&mut self, call: &GateCall) -> Option<GateRef> {
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

    fn define(&mut self, def: &GateDef) {
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
    fn distinct_names(&mut self, names: &[Ident], code: &'static str, what: &str) -> bool {
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

    fn check_expr_names(&mut self, e: &Expr, params: &[Ident]) -> bool {
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

    fn creg(&mut self, name: &Ident) -> Option<usize> {
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
    fn resolve_arg(&mut self, arg: &Arg, quantum: bool) -> Option<Bits> {
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

    fn resolve_qargs(&mut self, args: &[Arg]) -> Option<Vec<Vec<Qubit>>> {
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
    fn broadcast(&mut self, args: &[&Arg], lists: &[Bits]) -> Option<usize> {
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

    fn qop(&mut self, op: &QOp, cond: Option<Condition>) {
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

    fn top_call(&mut self, call: &GateCall, cond: Option<Condition>) {
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
    fn repeated_qubit(&mut self, q: Qubit, at: Span) {
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
    fn expand(
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

    fn emit(&mut self, op: Op, condition: Option<Condition>, at: Span) -> bool {
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

/// The bits an argument names: one, or a whole register.
#[derive(Clone, Copy)]
struct Bits {
    start: u32,
    len: u32,
}

impl Bits {
    /// The `k`-th bit of a broadcast: a single bit repeats.
    fn at(self, k: u32) -> u32 {
        if self.len == 1 {
            self.start
        } else {
            self.start + k
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
