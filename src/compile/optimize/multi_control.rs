//! Multi-controlled gates as phase polynomials with MS-made many-body terms.
//!
//! A multi-controlled Z on the qubit set `Q` (`k = |Q|`) is diagonal:
//! `C^{k-1}Z = exp(i pi/2^k prod_{q in Q} (1 - Z_q))`, that is one rotation
//! `exp(-i t_T/2 Z_T)` per non-empty subset `T` of `Q` with
//! `t_T = (-1)^{|T|+1} pi / 2^{k-1}` (expanding the product; common practice).
//! Terms on one or two qubits are `rz` and `rzz`. A term on `|T| >= 3` qubits is made
//! from two uniform interaction blocks around a rotation of one qubit, the pivot `a`:
//! with `N = exp(-i pi/4 (X_a sum_r Z_r + sum_{r<r'} Z_r Z_r'))` over the rest `r` of
//! `T`, `N^dagger Q_a N = sigma Z_T` for `Q_a = Z_a` (odd `|T|`) or `Y_a` (even
//! `|T|`), `sigma = (-1)^{floor(|T|/2)}` (derived here: `Q_a` anticommutes with each
//! `X_a Z_r` and commutes with the rest; the same conjugation makes many-body terms
//! from a global MS pulse, Mueller et al., New J. Phys. 13, 085007, 2011, from memory).
//! Each `N` couples every pair of `T` equally, which is one sign vector: one unit of
//! MS area (`rzz(pi/2)`, a CNOT's worth) whatever `|T|`.
//!
//! Measured on the demo device (units of pi/2, as `compile` reports): a Toffoli 3.5
//! instead of the 6 of Nielsen and Chuang's Fig. 4.9, a `c3x` 11.75 instead of 24
//! and a `c4x` 37.75 instead of 76 by Barenco's recursion. Only the collective
//! target gains: there a uniform block is one pulse, while on the addressed target it
//! is a pair pulse per pair.
//!
//! Invariant: the output is the input's unitary up to global phase.

use super::gate;
use crate::circuit::{GateKind, Instr};
use std::f64::consts::{FRAC_PI_2, PI};

/// `exp(-i t/2 Z_T)` for `|T| >= 3`, by the conjugation above. `N^dagger` is made as
/// `N` times `i Z_i Z_j` on every pair (`exp(i pi/4 ZZ) = exp(-i pi/4 ZZ) i ZZ`), that
/// is `N` and a `Z` on each qubit when `|T|` is even (nothing when odd): both blocks
/// then couple every pair of `T` with the same sign, one sign vector each. `fold`
/// adds two-qubit terms `(r, r', t)` on pairs without the pivot to the first block.
fn many_body(t: &[u32], angle: f64, fold: &[(u32, u32, f64)], out: &mut Vec<Instr>) {
    let k = t.len();
    debug_assert!(k >= 3);
    let a = t[0];
    let sigma = if (k / 2) % 2 == 0 { 1.0 } else { -1.0 };
    let block = |out: &mut Vec<Instr>, fold: &[(u32, u32, f64)]| {
        for i in 0..k {
            for j in i + 1..k {
                let extra: f64 = fold
                    .iter()
                    .filter(|f| (f.0, f.1) == (t[i], t[j]))
                    .map(|f| f.2)
                    .sum();
                out.push(gate(GateKind::Rzz, &[FRAC_PI_2 + extra], &[t[i], t[j]]));
            }
        }
    };
    out.push(gate(GateKind::H, &[], &[a]));
    block(out, fold);
    out.push(gate(GateKind::H, &[], &[a]));
    let pivot = if k % 2 == 1 {
        GateKind::Rz
    } else {
        GateKind::Ry
    };
    out.push(gate(pivot, &[sigma * angle], &[a]));
    out.push(gate(GateKind::H, &[], &[a]));
    if k % 2 == 0 {
        for &q in t {
            out.push(gate(GateKind::Z, &[], &[q]));
        }
    }
    block(out, &[]);
    out.push(gate(GateKind::H, &[], &[a]));
}

/// The multi-controlled Z on `qs` as its phase polynomial: the many-body terms take
/// the two-qubit terms on pairs without their pivot into their first block; the other
/// one- and two-qubit terms go first (they join the neighbouring diagonal regions).
pub fn controlled_z(qs: &[u32], out: &mut Vec<Instr>) {
    let k = qs.len();
    let unit = PI / f64::from(1u32 << (k - 1));
    let mut pairs: Vec<(u32, u32, f64)> = Vec::new();
    let mut many = Vec::new();
    for mask in 1u32..(1 << k) {
        let set: Vec<u32> = (0..k)
            .filter(|&i| mask & (1 << i) != 0)
            .map(|i| qs[i])
            .collect();
        let t = if set.len() % 2 == 1 { unit } else { -unit };
        match set.len() {
            1 => out.push(gate(GateKind::Rz, &[t], &set)),
            2 => pairs.push((set[0], set[1], t)),
            _ => many.push((set, t)),
        }
    }
    many.sort_by_key(|(s, _)| s.len());
    let mut folds: Vec<Vec<(u32, u32, f64)>> = vec![Vec::new(); many.len()];
    pairs.retain(|&(x, y, t)| {
        let host = many
            .iter()
            .position(|(set, _)| set[0] != x && set.contains(&x) && set.contains(&y));
        match host {
            Some(h) => {
                folds[h].push((x, y, t));
                false
            }
            None => true,
        }
    });
    for (x, y, t) in pairs {
        out.push(gate(GateKind::Rzz, &[t], &[x, y]));
    }
    for ((set, t), fold) in many.into_iter().zip(folds) {
        many_body(&set, t, &fold, out);
    }
}

/// Rewrites unconditioned `ccx`, `c3x`, `c4x` and `cswap` gates (the others, and
/// anything conditioned, pass unchanged).
pub fn rewrite(instrs: Vec<Instr>) -> Vec<Instr> {
    use GateKind::*;
    super::expand_gates(instrs, &[Ccx, C3x, C4x, Cswap], |g, q, out| {
        if g.kind == Cswap {
            // Fredkin = CNOT(c, b) Toffoli(a, b, c) CNOT(c, b) (common practice).
            out.push(gate(Cx, &[], &[q[2], q[1]]));
            out.push(gate(H, &[], &[q[2]]));
            controlled_z(q, out);
            out.push(gate(H, &[], &[q[2]]));
            out.push(gate(Cx, &[], &[q[2], q[1]]));
        } else {
            let t = *q.last().expect("a controlled gate has a target");
            out.push(gate(H, &[], &[t]));
            controlled_z(q, out);
            out.push(gate(H, &[], &[t]));
        }
    })
}
