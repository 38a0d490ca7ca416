//! Terminal measurements moved last: the rule the compiler uses to gather them into
//! one readout slot, and the checker to compare a program with its reordered
//! compile.
//!
//! A measurement of qubit `q` into bit `b` may move to the end of the program
//! (keeping its order among the others moved) when nothing after it
//! - touches `q` (a gate, barrier, reset or another measurement of `q`),
//! - is conditioned on a classical register (conservatively, on any register), or
//! - writes `b` and stays where it is (that would change the bit's last writer).
//!
//! Then every operation it moves past acts on other qubits and reads no bit, so the
//! two commute: a measurement on one qubit and a unitary on others give the same
//! outcome distribution and post-measurement state in either order (Nielsen and
//! Chuang, section 2.2.3, measurement operators `M_m (x) I` commute with `I (x) U`).
//!
//! Invariant: moving the marked measurements last changes neither the outcome
//! distribution of any bit nor the final state.

use super::{Circuit, Instr, Op};

/// What one operation of a program does, for the rule above.
pub enum Access {
    /// A measurement of `qubit` into bit `clbit`, unconditioned.
    Measure { qubit: usize, clbit: u32 },
    /// Anything conditioned on a classical register, on these qubits.
    Conditioned(Vec<usize>),
    /// Any other operation on these qubits (gates, barriers, resets).
    Touch(Vec<usize>),
}

/// For each operation, whether it is a measurement that may move to the end.
pub fn movable(ops: &[Access]) -> Vec<bool> {
    let mut out = vec![false; ops.len()];
    let mut touched = rustc_hash::FxHashSet::default();
    let mut kept_writes = rustc_hash::FxHashSet::default();
    let mut conditioned_later = false;
    for (i, op) in ops.iter().enumerate().rev() {
        match op {
            Access::Measure { qubit, clbit } => {
                let free =
                    !conditioned_later && !touched.contains(qubit) && !kept_writes.contains(clbit);
                out[i] = free;
                if !free {
                    kept_writes.insert(*clbit);
                }
                touched.insert(*qubit);
            }
            Access::Conditioned(qs) => {
                conditioned_later = true;
                touched.extend(qs.iter().copied());
            }
            Access::Touch(qs) => touched.extend(qs.iter().copied()),
        }
    }
    out
}

/// The order that puts the movable measurements last: every other index in order,
/// then the movable ones in order. `None` when nothing moves (they are last already).
pub fn order(ops: &[Access]) -> Option<Vec<usize>> {
    let m = movable(ops);
    let first_moved = m.iter().position(|&x| x)?;
    if m[first_moved..].iter().all(|&x| x) {
        return None;
    }
    let mut idx: Vec<usize> = (0..ops.len()).filter(|&i| !m[i]).collect();
    idx.extend((0..ops.len()).filter(|&i| m[i]));
    Some(idx)
}

fn access(instr: &Instr) -> Access {
    let qubits = || instr.op.qubits().iter().map(|q| q.0 as usize).collect();
    match (&instr.op, &instr.condition) {
        (_, Some(_)) => Access::Conditioned(qubits()),
        (Op::Measure { qubit, clbit }, None) => Access::Measure {
            qubit: qubit.0 as usize,
            clbit: clbit.0,
        },
        _ => Access::Touch(qubits()),
    }
}

/// `c` with its terminal measurements moved last (module docs), and the number of
/// leading instructions the two share; `None` when they are last already.
pub fn measurements_last(c: &Circuit) -> Option<(Circuit, usize)> {
    let ops: Vec<Access> = c.instrs.iter().map(access).collect();
    let idx = order(&ops)?;
    let shared = idx.iter().enumerate().take_while(|(k, &i)| *k == i).count();
    let moved = Circuit {
        qregs: c.qregs.clone(),
        cregs: c.cregs.clone(),
        opaque: c.opaque.clone(),
        instrs: idx.into_iter().map(|i| c.instrs[i].clone()).collect(),
    };
    Some((moved, shared))
}
