//! Phase polynomials: a region of CNOT and diagonal gates is `|x> -> e^{i f(x)} |L x>`
//! with `f` a sum of rotations of parities of the inputs and `L` linear over GF(2)
//! (Amy, Maslov, Mosca, "Polynomial-time T-depth optimization of Clifford+T circuits
//! via matroid partitioning", IEEE TCAD 33, 1476, 2014, citation from memory; the
//! identity itself is common practice). So the
//! region equals the diagonal `prod_p exp(-i theta_p / 2 Z_p)` over input parities,
//! followed by the region's CNOTs alone. When every parity has one or two inputs, the
//! diagonal is Z rotations and ZZ interactions: `cx a,b; rz(t) b; cx a,b` (the way
//! Trotter and QAOA circuits are written) becomes `rzz(t) a,b`.
//!
//! Invariant: the output is the input's unitary up to global phase; a region is
//! rewritten only when that needs fewer two-qubit operations than it had.

use super::gate;
use crate::circuit::{Gate, GateKind, Instr, Op};
use rustc_hash::FxHashMap;
use smallvec::{smallvec, SmallVec};

/// A parity: the sorted input qubits it sums.
type Parity = SmallVec<[u32; 4]>;

fn xor(a: &Parity, b: &Parity) -> Parity {
    let mut out = Parity::new();
    let (mut i, mut j) = (0, 0);
    while i < a.len() || j < b.len() {
        match (a.get(i), b.get(j)) {
            (Some(x), Some(y)) if x == y => {
                i += 1;
                j += 1;
            }
            (Some(x), Some(y)) if x < y => {
                out.push(*x);
                i += 1;
            }
            (Some(x), None) => {
                out.push(*x);
                i += 1;
            }
            (_, Some(y)) => {
                out.push(*y);
                j += 1;
            }
            (None, None) => unreachable!("loop condition"),
        }
    }
    out
}

/// The Z-rotation angle of a single-qubit diagonal gate (up to global phase).
fn diagonal_angle(g: &Gate) -> Option<f64> {
    use std::f64::consts::{FRAC_PI_2, FRAC_PI_4, PI};
    use GateKind::*;
    Some(match g.kind {
        Id => 0.0,
        Z => PI,
        S => FRAC_PI_2,
        Sdg => -FRAC_PI_2,
        T => FRAC_PI_4,
        Tdg => -FRAC_PI_4,
        Rz | U1 | P => g.params[0],
        _ => return None,
    })
}

/// Whether an instruction can join a region: an unconditioned CNOT or diagonal gate.
fn joins(instr: &Instr) -> bool {
    use GateKind::*;
    match &instr.op {
        Op::Gate { gate, .. } if instr.condition.is_none() => {
            matches!(gate.kind, Cx | Cz | Cu1 | Cp | Crz | Rzz) || diagonal_angle(gate).is_some()
        }
        _ => false,
    }
}

#[derive(Default)]
struct Region {
    instrs: Vec<Instr>,
    parity: FxHashMap<u32, Parity>,
    /// Angles per parity, in order of first appearance.
    terms: Vec<(Parity, f64)>,
    index: FxHashMap<Parity, usize>,
    cx: Vec<(u32, u32)>,
    two_qubit: usize,
}

impl Region {
    fn parity(&mut self, q: u32) -> Parity {
        self.parity.entry(q).or_insert_with(|| smallvec![q]).clone()
    }

    fn add(&mut self, p: Parity, theta: f64) {
        match self.index.get(&p) {
            Some(&k) => self.terms[k].1 += theta,
            None => {
                self.index.insert(p.clone(), self.terms.len());
                self.terms.push((p, theta));
            }
        }
    }

    fn cphase(&mut self, a: u32, b: u32, l: f64) {
        let (pa, pb) = (self.parity(a), self.parity(b));
        self.add(xor(&pa, &pb), -l / 2.0);
        self.add(pa, l / 2.0);
        self.add(pb, l / 2.0);
    }

    fn push(&mut self, instr: Instr) {
        use std::f64::consts::PI;
        use GateKind::*;
        let Op::Gate { gate, qubits } = &instr.op else {
            unreachable!("only gates join")
        };
        let q: SmallVec<[u32; 2]> = qubits.iter().map(|q| q.0).collect();
        match gate.kind {
            Cx => {
                let pc = self.parity(q[0]);
                let pt = self.parity(q[1]);
                self.parity.insert(q[1], xor(&pc, &pt));
                self.cx.push((q[0], q[1]));
                self.two_qubit += 1;
            }
            Cz => {
                self.cphase(q[0], q[1], PI);
                self.two_qubit += 1;
            }
            Cu1 | Cp => {
                self.cphase(q[0], q[1], gate.params[0]);
                self.two_qubit += 1;
            }
            Crz => {
                let t = gate.params[0];
                let (pa, pb) = (self.parity(q[0]), self.parity(q[1]));
                self.add(xor(&pa, &pb), -t / 2.0);
                self.add(pb, t / 2.0);
                self.two_qubit += 1;
            }
            Rzz => {
                let (pa, pb) = (self.parity(q[0]), self.parity(q[1]));
                self.add(xor(&pa, &pb), gate.params[0]);
                self.two_qubit += 1;
            }
            _ => {
                let t = diagonal_angle(gate).expect("joins() admitted it");
                let p = self.parity(q[0]);
                self.add(p, t);
            }
        }
        self.instrs.push(instr);
    }

    /// The region's instructions, rewritten when that saves two-qubit operations.
    fn flush(&mut self, out: &mut Vec<Instr>) {
        let region = std::mem::take(self);
        let linear_identity = region
            .parity
            .iter()
            .all(|(q, p)| p.len() == 1 && p[0] == *q);
        let representable = region.terms.iter().all(|(p, _)| p.len() <= 2);
        let pairs = region
            .terms
            .iter()
            .filter(|(p, t)| p.len() == 2 && t.abs() > 0.0)
            .count();
        let cost = pairs + if linear_identity { 0 } else { region.cx.len() };
        if !representable || cost >= region.two_qubit {
            out.extend(region.instrs);
            return;
        }
        for (p, t) in &region.terms {
            if *t == 0.0 || p.is_empty() {
                continue;
            }
            if p.len() == 1 {
                out.push(gate(GateKind::Rz, &[*t], &[p[0]]));
            } else {
                out.push(gate(GateKind::Rzz, &[*t], &[p[0], p[1]]));
            }
        }
        if !linear_identity {
            for &(c, t) in &region.cx {
                out.push(gate(GateKind::Cx, &[], &[c, t]));
            }
        }
    }
}

/// Rewrites the regions of CNOT and diagonal gates of `instrs` (unconditioned
/// gates only; anything else closes the regions on its qubits). Gates on qubits
/// no region holds are moved before the open region, which they commute with.
pub fn rewrite(instrs: Vec<Instr>) -> Vec<Instr> {
    let mut out = Vec::with_capacity(instrs.len());
    let mut region = Region::default();
    for instr in instrs {
        if joins(&instr) {
            region.push(instr);
            continue;
        }
        let touches = instr
            .op
            .qubits()
            .iter()
            .any(|q| region.parity.contains_key(&q.0));
        if touches
            || matches!(instr.op, Op::Measure { .. } | Op::Reset { .. })
            || instr.condition.is_some()
        {
            region.flush(&mut out);
        }
        out.push(instr);
    }
    region.flush(&mut out);
    out
}
