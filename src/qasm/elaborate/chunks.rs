//! Reading one large file on several threads.
//!
//! The file is cut into chunks at line ends that follow a `;`. The first thread reads
//! the start of the file (where registers and gates are declared in practice), then
//! the other chunks are read ahead, as tasks of rayon's pool (the one pool every
//! parallel part of tutti shares), each with a copy of the names in scope, while the
//! first thread goes on with chunk 0. A chunk whose task has not started when the
//! first thread reaches it is read ahead by that thread itself, in the same way, so
//! which chunks are used does not depend on how the pool schedules the tasks.
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
            0 => rayon::current_num_threads(),
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
        let slots: Vec<Slot<'a, 'l>> = aheads
            .into_iter()
            .enumerate()
            .map(|(i, r)| {
                let stop = firsts.get(i + 1).copied().unwrap_or(u32::MAX);
                let len = stop.min(text.len() as u32) - firsts[i];
                Slot::new(Work {
                    worker: self.fork(len as usize / 16),
                    reader: r,
                    stop,
                })
            })
            .collect();
        // The chunks are read ahead as tasks of rayon's pool, the one every parallel
        // part of tutti shares. When the serial reader reaches a chunk whose task has
        // not started, it reads that chunk ahead itself, the same way; it waits only
        // for a task that is running on another thread. So the outcome, and which
        // chunks are used, do not depend on the scheduling.
        rayon::in_place_scope(|scope| {
            for slot in &slots {
                let cancel = &cancel;
                scope.spawn(move |_| slot.run_task(cancel));
            }
            for (i, &first) in firsts.iter().enumerate() {
                let fill = self.run(reading, first, sources, None);
                if self.stopped || fill == Fill::End {
                    break;
                }
                let usable = reading.reader.next_start() == first
                    && reading.reader.last_ok()
                    && self.scope_changes == snapshot;
                if !usable {
                    slots[i].claim();
                    continue;
                }
                let Some(ahead) = slots[i].result(&cancel) else {
                    continue;
                };
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
            for slot in &slots {
                slot.claim();
            }
        });
    }
}

/// What reading a chunk ahead needs: an elaborator with the names in scope, the
/// reader at the chunk's start, and where the chunk ends.
struct Work<'a, 'l> {
    worker: Elaborator<'l>,
    reader: StmtReader<'a>,
    stop: u32,
}

impl<'a> Work<'a, '_> {
    /// Reads the chunk; a reader that panics (a bug) gives nothing, and the chunk
    /// is then reread serially.
    fn run(self, cancel: &AtomicBool) -> Option<Ahead<'a>> {
        std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            self.worker.read_ahead(self.reader, self.stop, cancel)
        }))
        .ok()
    }
}

/// A chunk's place between its task and the serial reader.
struct Slot<'a, 'l> {
    state: std::sync::Mutex<SlotState<'a, 'l>>,
    done: std::sync::Condvar,
}

enum SlotState<'a, 'l> {
    /// Not started: whoever comes first (the task or the reader) reads it.
    Pending(Box<Work<'a, 'l>>),
    Running,
    /// Finished (`None`: the reading panicked).
    Done(Option<Box<Ahead<'a>>>),
    /// Taken or given up: nothing more to do.
    Claimed,
}

impl<'a, 'l> Slot<'a, 'l> {
    fn new(work: Work<'a, 'l>) -> Self {
        Slot {
            state: std::sync::Mutex::new(SlotState::Pending(Box::new(work))),
            done: std::sync::Condvar::new(),
        }
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, SlotState<'a, 'l>> {
        self.state.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// The task: reads the chunk unless the reader has taken or given it up.
    fn run_task(&self, cancel: &AtomicBool) {
        let work = {
            let mut s = self.lock();
            match std::mem::replace(&mut *s, SlotState::Running) {
                SlotState::Pending(work) => work,
                other => {
                    *s = other;
                    return;
                }
            }
        };
        let ahead = work.run(cancel);
        *self.lock() = SlotState::Done(ahead.map(Box::new));
        self.done.notify_all();
    }

    /// The reader: the chunk read ahead, by its task (waiting while that runs) or,
    /// when the task has not started, by the reader itself now.
    fn result(&self, cancel: &AtomicBool) -> Option<Ahead<'a>> {
        let mut s = self.lock();
        loop {
            match std::mem::replace(&mut *s, SlotState::Claimed) {
                SlotState::Pending(work) => {
                    drop(s);
                    return work.run(cancel);
                }
                SlotState::Done(ahead) => return ahead.map(|a| *a),
                SlotState::Claimed => return None,
                SlotState::Running => {
                    *s = SlotState::Running;
                    s = self.done.wait(s).unwrap_or_else(|e| e.into_inner());
                }
            }
        }
    }

    /// Gives up a chunk that has not started.
    fn claim(&self) {
        let mut s = self.lock();
        if matches!(*s, SlotState::Pending(_)) {
            *s = SlotState::Claimed;
        }
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
