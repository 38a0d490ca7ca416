//! Gathering ZZ interactions into blocks (docs/optimizer.md).
//!
//! The segment is walked in a topological order. Each qubit keeps the single-qubit
//! unitary `pending` since it was last placed. A ZZ interaction commutes with a
//! diagonal `pending`, and passes an antidiagonal one (a Pauli X or Y times a
//! diagonal) with its sign flipped; any other `pending` is placed in the layer just
//! after the last block that holds the qubit, and the qubit's next interactions can
//! join no earlier block than that. An interaction joins the earliest block both its
//! qubits allow (ASAP), which gives the fewest blocks the non-diagonal gates allow,
//! unless an existing later block (also allowed) keeps the blocks cheaper: one where
//! it closes a cycle, or one where it meets neither qubit (see `schedule`).
//!
//! Invariant: the product `layer_0 block_0 layer_1 ... block_{B-1} layer_B` (time
//! order) equals the segment's unitary up to global phase.

use super::dag::{is_antidiagonal, is_diagonal, is_identity, mul};
use crate::circuit::Mat2;
use crate::compile::lower::Canon;
use num_complex::Complex64 as C64;

/// One block: `exp(-i sum w Z_a Z_b)` over its `(a, b, w)`, `a < b`, one entry per pair.
pub type Block = Vec<(u32, u32, f64)>;

/// Alternating layers of single-qubit unitaries and blocks of ZZ interactions.
#[derive(Debug, Clone, Default)]
pub struct Schedule {
    /// `layers[k]` runs before `blocks[k]`; there is one layer more than blocks.
    pub layers: Vec<Vec<(u32, Mat2)>>,
    pub blocks: Vec<Block>,
}

/// How many blocks past the earliest one an interaction may look for a block that
/// leaves it disjoint from the block's other pairs.
const LOOKAHEAD: usize = 8;

const IDENTITY: Mat2 = [
    [C64::new(1.0, 0.0), C64::new(0.0, 0.0)],
    [C64::new(0.0, 0.0), C64::new(1.0, 0.0)],
];

/// The room a new layer or block starts with (a handful of operations each, the
/// usual case, without growing).
const ROOM: usize = 8;

/// Schedules the `Local` and `Zz` operations of one segment on `n` qubits.
pub fn schedule(ops: &[Canon], n: usize) -> Schedule {
    let mut pending = vec![IDENTITY; n];
    let mut has_pending = vec![false; n];
    // The earliest block the qubit's next interaction may join.
    let mut ready = vec![0usize; n];
    // One more than the last block holding the qubit (0 if none).
    let mut last = vec![0usize; n];
    let mut layers: Vec<Vec<(u32, Mat2)>> = vec![Vec::new()];
    let mut blocks: Vec<Vec<(u32, u32, f64)>> = Vec::new();
    let place = |layers: &mut Vec<Vec<(u32, Mat2)>>, q: usize, m: Mat2, at: usize| {
        while layers.len() <= at {
            layers.push(Vec::with_capacity(ROOM));
        }
        match layers[at].iter_mut().find(|(p, _)| *p as usize == q) {
            Some((_, old)) => *old = mul(&m, old),
            None => layers[at].push((q as u32, m)),
        }
    };
    for op in ops {
        match *op {
            Canon::Local { q, m } => {
                let q = q as usize;
                pending[q] = mul(&m, &pending[q]);
                has_pending[q] = true;
            }
            Canon::Zz { a, b, theta } => {
                let mut w = theta / 2.0;
                for q in [a as usize, b as usize] {
                    if !has_pending[q] || is_diagonal(&pending[q]) {
                        continue;
                    }
                    if is_antidiagonal(&pending[q]) {
                        w = -w;
                        continue;
                    }
                    place(&mut layers, q, pending[q], last[q]);
                    ready[q] = last[q];
                    pending[q] = IDENTITY;
                    has_pending[q] = false;
                }
                let mut k = ready[a as usize].max(ready[b as usize]);
                let holds = |blk: &Block, q: u32| blk.iter().any(|&(x, y, _)| x == q || y == q);
                let busy = |blk: &Block| holds(blk, a) || holds(blk, b);
                // Any block from `ready` on is allowed (nothing on these qubits was
                // placed after it). A pair both of whose qubits the newest block
                // already couples closes a cycle there (a uniform block is one sign
                // vector, a star is not): it joins them. Otherwise, when the earliest
                // block already couples one of its qubits (it would make a star, which
                // costs more area than a matching), the first of the next few blocks
                // that couples neither takes it.
                if let Some(newest) = blocks.len().checked_sub(1) {
                    if newest > k && holds(&blocks[newest], a) && holds(&blocks[newest], b) {
                        k = newest;
                    }
                }
                if k < blocks.len() && busy(&blocks[k]) {
                    if let Some(j) =
                        (k + 1..blocks.len().min(k + 1 + LOOKAHEAD)).find(|&j| !busy(&blocks[j]))
                    {
                        k = j;
                    }
                }
                while blocks.len() <= k {
                    blocks.push(Vec::with_capacity(ROOM));
                }
                let (x, y) = if a < b { (a, b) } else { (b, a) };
                blocks[k].push((x, y, w));
                last[a as usize] = last[a as usize].max(k + 1);
                last[b as usize] = last[b as usize].max(k + 1);
            }
            Canon::Measure { .. } | Canon::Reset { .. } => {
                unreachable!("segments hold no measurement or reset")
            }
        }
    }
    for q in 0..n {
        if has_pending[q] && !is_identity(&pending[q]) {
            place(&mut layers, q, pending[q], last[q]);
        }
    }
    while layers.len() < blocks.len() + 1 {
        layers.push(Vec::new());
    }
    // One entry per pair in each block.
    for block in &mut blocks {
        block.sort_by_key(|p| (p.0, p.1));
        let mut merged: Block = Vec::with_capacity(block.len());
        for &(a, b, w) in block.iter() {
            match merged.last_mut() {
                Some(last) if last.0 == a && last.1 == b => last.2 += w,
                _ => merged.push((a, b, w)),
            }
        }
        *block = merged;
    }
    for layer in &mut layers {
        layer.sort_by_key(|(q, _)| *q);
    }
    Schedule { layers, blocks }
}
