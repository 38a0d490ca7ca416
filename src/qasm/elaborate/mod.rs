//! Elaboration: resolves names, checks arities, expands `gate` definitions and
//! broadcasts, and produces the flat [`Circuit`].
//!
//! The parts: this module holds the reading loop (statements in batches from the
//! streaming parser) and the dispatch of each statement; `loading` the includes,
//! `scope` declarations, lookup and argument resolution, `definitions` the `gate`
//! bodies and expression evaluation, `expansion` the calls expanded into operations,
//! and `chunks` the reading ahead of large files on other threads.
//!
//! Invariant: elaboration never panics and never allocates beyond the [`Limits`]:
//! include depth and cycles, expanded operations, register and qubit counts, input
//! size and gate nesting are all checked and reported as located errors.

mod chunks;
mod definitions;
mod expansion;
mod loading;
mod scope;

pub use definitions::eval;
use definitions::{BodyOp, Def};
pub use loading::{FsLoader, Loader, MemoryLoader};
use scope::{Bits, GateRef, RegKind};

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
}
