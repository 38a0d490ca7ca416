//! CNOT ladders as logarithmic-depth prefix networks.
//!
//! A ladder `cx p0,p1; cx p1,p2; ...; cx p(m-1),pm` (the way GHZ states and parity
//! computations are written) maps `x_j` to the prefix parity `x_0 + ... + x_j`; the
//! same ladder written the other way round (`cx p(m-1),pm` first) maps `x_j` to
//! `x_j + x_(j-1)`, the inverse map. Each of its CNOTs waits for the one before, so
//! it needs `m` interaction blocks. The prefix parities are also computed by the
//! network of Brent and Kung (IEEE Trans. Computers C-31, 260, 1982): an up-sweep
//! and a down-sweep of about `log2(m+1)` levels each, every level a set of CNOTs on
//! disjoint pairs. On the collective target a level is one block whose area is that
//! of one CNOT (DESIGN fact 7), so a ladder of `m` CNOTs costs about `2 log2 m`
//! CNOTs' area instead of `m`. It has more CNOTs, so the addressed target, which
//! pays a pulse per pair, keeps the ladder.
//!
//! Invariant: the output is the input's unitary (a CNOT network is a permutation of
//! basis states: the same linear map over GF(2) is the same unitary).

use super::gate;
use crate::circuit::{GateKind, Instr, Op};

/// The levels of the Brent-Kung prefix network on positions `0..n`: each level a
/// list of `(control, target)` positions, disjoint within the level; applied in
/// order, position `i` ends holding the sum of positions `0..=i`.
pub fn prefix_levels(n: usize) -> Vec<Vec<(usize, usize)>> {
    let mut levels = Vec::new();
    let mut d = 1;
    while d < n {
        let level: Vec<(usize, usize)> =
            (2 * d - 1..n).step_by(2 * d).map(|i| (i - d, i)).collect();
        if !level.is_empty() {
            levels.push(level);
        }
        d *= 2;
    }
    while d > 1 {
        d /= 2;
        let level: Vec<(usize, usize)> =
            (3 * d - 1..n).step_by(2 * d).map(|i| (i - d, i)).collect();
        if !level.is_empty() {
            levels.push(level);
        }
    }
    levels
}

/// The fewest CNOTs of a ladder whose network has fewer levels than it has gates.
const SHORTEST_GAIN: usize = 4;

/// The unconditioned CNOT `(control, target)` of an instruction, if it is one.
fn as_cx(instr: &Instr) -> Option<(u32, u32)> {
    match &instr.op {
        Op::Gate { gate, qubits }
            if instr.condition.is_none()
                && matches!(gate.kind, GateKind::Cx | GateKind::BuiltinCx) =>
        {
            Some((qubits[0].0, qubits[1].0))
        }
        _ => None,
    }
}

/// A ladder being read: its path and which way it was written.
#[derive(Default)]
struct Ladder {
    path: Vec<u32>,
    /// Written from the far end back (`cx p(m-1),pm` first).
    backward: bool,
    gates: Vec<Instr>,
}

impl Ladder {
    fn holds(&self, q: u32) -> bool {
        self.path.contains(&q)
    }

    /// Takes the CNOT if it continues the ladder, else hands it back.
    fn extend(&mut self, c: u32, t: u32, instr: Instr) -> Result<(), Instr> {
        let ok = match self.path.len() {
            0 => {
                self.path = vec![c, t];
                true
            }
            2 if !self.holds(t) && c == self.path[1] => {
                self.backward = false;
                self.path.push(t);
                true
            }
            2 if !self.holds(c) && t == self.path[0] => {
                self.backward = true;
                self.path.insert(0, c);
                true
            }
            _ if !self.backward && c == *self.path.last().unwrap() && !self.holds(t) => {
                self.path.push(t);
                true
            }
            _ if self.backward && t == self.path[0] && !self.holds(c) => {
                self.path.insert(0, c);
                true
            }
            _ => false,
        };
        if !ok {
            return Err(instr);
        }
        self.gates.push(instr);
        Ok(())
    }

    fn flush(&mut self, out: &mut Vec<Instr>) {
        let ladder = std::mem::take(self);
        // The network where it has fewer levels than the ladder has gates; up to
        // three CNOTs it never has (tested with `prefix_levels`), so it is not
        // built for them.
        let levels = (ladder.gates.len() >= SHORTEST_GAIN)
            .then(|| prefix_levels(ladder.path.len()))
            .filter(|levels| levels.len() < ladder.gates.len());
        let Some(levels) = levels else {
            out.extend(ladder.gates);
            return;
        };
        let mut gates: Vec<Instr> = levels
            .iter()
            .flatten()
            .map(|&(c, t)| gate(GateKind::Cx, &[], &[ladder.path[c], ladder.path[t]]))
            .collect();
        if ladder.backward {
            // The inverse map: the same self-inverse CNOTs in reverse order.
            gates.reverse();
        }
        out.extend(gates);
    }
}

/// Rewrites CNOT ladders of `instrs`. Instructions on qubits the open ladder does not
/// hold are moved before it (they commute with it); anything else closes it.
pub fn rewrite(instrs: Vec<Instr>) -> Vec<Instr> {
    let mut out = Vec::with_capacity(instrs.len());
    let mut ladder = Ladder::default();
    for instr in instrs {
        if let Some((c, t)) = as_cx(&instr) {
            if let Err(instr) = ladder.extend(c, t, instr) {
                ladder.flush(&mut out);
                let started = ladder.extend(c, t, instr);
                debug_assert!(started.is_ok());
            }
            continue;
        }
        let touches = instr.op.qubits().iter().any(|q| ladder.holds(q.0));
        if touches
            || matches!(instr.op, Op::Measure { .. } | Op::Reset { .. })
            || instr.condition.is_some()
        {
            ladder.flush(&mut out);
        }
        out.push(instr);
    }
    ladder.flush(&mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The network computes prefix parities (checked over GF(2) on unit vectors)
    /// with disjoint pairs in each level and at most `2 ceil(log2 n)` levels.
    #[test]
    fn prefix_levels_compute_prefix_parities() {
        for n in 1..=70usize {
            let levels = prefix_levels(n);
            let mut rows: Vec<u128> = (0..n).map(|i| 1u128 << i).collect();
            for level in &levels {
                let mut seen = std::collections::HashSet::new();
                for &(c, t) in level {
                    assert!(c < t && t < n);
                    assert!(seen.insert(c) && seen.insert(t), "n={n}: pairs overlap");
                    rows[t] ^= rows[c];
                }
            }
            for (i, r) in rows.iter().enumerate() {
                assert_eq!(*r, (1u128 << (i + 1)) - 1, "n={n}, position {i}");
            }
            let log = (usize::BITS - (n.max(1) - 1).leading_zeros()) as usize;
            assert!(levels.len() <= 2 * log, "n={n}: {} levels", levels.len());
            // What `flush` takes for granted without building the levels.
            let gates = n.saturating_sub(1);
            assert_eq!(
                levels.len() < gates,
                gates >= SHORTEST_GAIN,
                "n={n}: {} levels for {gates} gates",
                levels.len()
            );
        }
    }
}
