//! Reading one large file on several threads.
//!
//! The file is cut into chunks at line ends that follow a `;`. The first thread reads
//! the start of the file (where registers and gates are declared in practice), then
//! each other thread reads one chunk ahead with a copy of the names in scope, while
//! the first thread goes on with chunk 0.
//!
//! Invariant: the outcome never depends on the cut. A chunk read ahead is used only
//! when reading on serially would have given exactly the same: the serial reader
//! arrives at the chunk's first token at the start of a statement, no statement since
//! the copy could have changed the names in scope, the chunk itself declared nothing
//! and gave no diagnostic, and the operation limit still holds. Otherwise the first
//! thread reads that chunk itself and the work ahead is dropped.

use super::*;
use crate::qasm::parser::{Fill, StmtReader};
use std::sync::atomic::AtomicBool;
use std::sync::atomic::Ordering;

/// At most this much of the file is read before the names in scope are copied.
const PREFIX_BYTES: usize = 64 << 10;

/// How far to look past a chunk's nominal start for a line ending in `;`.
const CUT_SEARCH_BYTES: usize = 1 << 20;

/// A chunk read ahead: its reader (left where the chunk ends) and its operations.
struct Ahead<'a> {
    reader: StmtReader<'a>,
    instrs: Vec<Instr>,
    /// Whether the chunk was read to its end without diagnostics and without
    /// changing the scope.
    valid: bool,
}

impl<'l> Elaborator<'l> {
    /// How many chunks a file of `len` bytes is read in.
    pub(super) fn n_chunks(&self, len: usize) -> usize {
        let threads = match self.limits.max_threads {
            0 => std::thread::available_parallelism().map_or(1, |n| n.get()),
            n => n,
        };
        threads.min(len / self.limits.min_chunk_bytes.max(1)).max(1)
    }

    /// An elaborator for reading ahead: the names in scope of this one, no operations.
    fn fork(&self, capacity: usize) -> Elaborator<'l> {
        let mut instrs = Vec::with_capacity(capacity);
        crate::memory::advise_huge_pages(&mut instrs);
        Elaborator {
            limits: self.limits,
            loader: self.loader,
            diags: Vec::new(),
            circuit: Circuit {
                qregs: self.circuit.qregs.clone(),
                cregs: self.circuit.cregs.clone(),
                opaque: self.circuit.opaque.clone(),
                instrs,
            },
            regs: self.regs.clone(),
            gates: self.gates.clone(),
            defs: self.defs.clone(),
            library: self.library,
            include_stack: Vec::new(),
            last_reg: None,
            stopped: false,
            scope_changes: 0,
            ahead: true,
            chunks_ahead: 0,
            repeats: Default::default(),
            broken_gates: self.broken_gates.clone(),
        }
    }

    /// Reads one chunk ahead, on its own thread.
    fn read_ahead<'a>(
        mut self,
        reader: StmtReader<'a>,
        stop: u32,
        cancel: &AtomicBool,
    ) -> Ahead<'a> {
        // Never used: reading ahead stops at any include before loading it.
        let mut sources = SourceMap::default();
        let mut reading = Reading::new(reader);
        let fill = self.run(&mut reading, stop, &mut sources, Some(cancel));
        Ahead {
            valid: fill != Fill::More && !self.stopped,
            reader: reading.reader,
            instrs: self.circuit.instrs,
        }
    }

    /// Reads the main file from `reading` (at its start) in `n_chunks` chunks, the
    /// later ones ahead on other threads, as far as the chunks can be used; the caller
    /// reads on from where `reading` is left.
    pub(super) fn read_chunks_ahead<'a>(
        &mut self,
        reading: &mut Reading<'a>,
        file: FileId,
        text: &'a str,
        n_chunks: usize,
        sources: &mut SourceMap,
    ) {
        let cuts = cut_points(text, n_chunks);
        let prefix = cuts.first().map_or(0, |&c| (c / 2).min(PREFIX_BYTES));
        let fill = self.run(reading, prefix as u32, sources, None);
        if fill == Fill::End || self.stopped {
            return;
        }
        let snapshot = self.scope_changes;
        // Each chunk starts at the first token after its cut; they must increase.
        let mut aheads = Vec::new();
        let mut firsts: Vec<u32> = Vec::new();
        for &cut in &cuts {
            let r = StmtReader::starting_at(file, text, cut);
            let first = r.next_start();
            let after = firsts
                .last()
                .copied()
                .unwrap_or(reading.reader.next_start());
            if (first as usize) < text.len() && first > after {
                firsts.push(first);
                aheads.push(r);
            }
        }
        let cancel = AtomicBool::new(false);
        std::thread::scope(|scope| {
            let mut handles = Vec::new();
            for (i, r) in aheads.into_iter().enumerate() {
                let stop = firsts.get(i + 1).copied().unwrap_or(u32::MAX);
                let len = stop.min(text.len() as u32) - firsts[i];
                let worker = self.fork(len as usize / 16);
                let cancel = &cancel;
                handles.push(scope.spawn(move || worker.read_ahead(r, stop, cancel)));
            }
            let mut unused = Vec::new();
            let mut handles = handles.into_iter();
            for (handle, &first) in handles.by_ref().zip(&firsts) {
                let fill = self.run(reading, first, sources, None);
                if self.stopped || fill == Fill::End {
                    unused.push(handle);
                    break;
                }
                let usable = reading.reader.next_start() == first
                    && reading.reader.last_ok()
                    && self.scope_changes == snapshot;
                if !usable {
                    unused.push(handle);
                    continue;
                }
                // A reader that panicked (a bug) only costs its chunk being reread.
                let Ok(ahead) = handle.join() else { continue };
                let fits = self.circuit.instrs.len() + ahead.instrs.len() <= self.limits.max_ops
                    && self.circuit.instrs.try_reserve(ahead.instrs.len()).is_ok();
                // A chunk that does not fit in memory is reread, where the one-thread
                // reader reports the shortage with its location.
                if ahead.valid && fits {
                    self.circuit.instrs.extend(ahead.instrs);
                    self.chunks_ahead += 1;
                    reading.switch_to(ahead.reader);
                }
            }
            // Chunks not used by now are of no use any more.
            cancel.store(true, Ordering::Relaxed);
            for handle in unused.into_iter().chain(handles) {
                // Its outcome is not needed; a panic there only cost the work ahead.
                let _ = handle.join();
            }
        });
    }
}

/// Where chunks after the first start: just after a line end that follows a `;`,
/// near equal shares of the text. Fewer are returned when no such line end is found.
fn cut_points(text: &str, n_chunks: usize) -> Vec<usize> {
    let bytes = text.as_bytes();
    let mut cuts: Vec<usize> = Vec::new();
    for i in 1..n_chunks {
        let from = (text.len() / n_chunks * i).max(cuts.last().map_or(0, |&c| c + 1));
        let to = (from + CUT_SEARCH_BYTES).min(bytes.len());
        let found = (from..to).find(|&k| {
            bytes[k] == b'\n'
                && bytes[..k]
                    .iter()
                    .rev()
                    .find(|b| !matches!(b, b' ' | b'\t' | b'\r'))
                    .is_some_and(|&b| b == b';')
        });
        if let Some(k) = found {
            if k + 1 < bytes.len() {
                cuts.push(k + 1);
            }
        }
    }
    cuts
}
