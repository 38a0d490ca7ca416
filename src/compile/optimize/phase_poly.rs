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
use smallvec::SmallVec;

/// A parity: the set of the region's inputs it sums, one bit per input (the
/// region's `inputs` give the qubit of each bit).
type Parity = u128;

/// The most inputs a region holds: a gate that would bring in one more closes the
/// region first (rewriting what it has), and starts the next.
const MOST_INPUTS: usize = Parity::BITS as usize;

/// No region bit: the qubit is not in the region.
const OUTSIDE: u8 = u8::MAX;

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

struct Region {
    instrs: Vec<Instr>,
    /// By qubit: its bit in the region's parities, or [`OUTSIDE`].
    bit: Vec<u8>,
    /// By bit: the qubit, and the parity its wire carries now.
    inputs: Vec<(u32, Parity)>,
    /// Angles per parity, in order of first appearance.
    terms: Vec<(Parity, f64)>,
    index: FxHashMap<Parity, usize>,
    cx: Vec<(u32, u32)>,
    two_qubit: usize,
}

impl Region {
    fn new() -> Region {
        Region {
            instrs: Vec::new(),
            bit: Vec::new(),
            inputs: Vec::new(),
            terms: Vec::new(),
            index: FxHashMap::default(),
            cx: Vec::new(),
            two_qubit: 0,
        }
    }

    /// Whether qubit `q` is in the region.
    fn holds(&self, q: u32) -> bool {
        self.bit.get(q as usize).is_some_and(|&b| b != OUTSIDE)
    }

    /// The bits `qubits` need that the region does not have yet.
    fn missing(&self, qubits: &[u32]) -> usize {
        qubits.iter().filter(|&&q| !self.holds(q)).count()
    }

    /// The bit of qubit `q`, which enters the region (with its own parity) if it
    /// was not in it; the caller has made room.
    fn bit_of(&mut self, q: u32) -> usize {
        let at = q as usize;
        if at >= self.bit.len() {
            self.bit.resize(at + 1, OUTSIDE);
        }
        if self.bit[at] == OUTSIDE {
            let b = self.inputs.len();
            self.bit[at] = b as u8;
            self.inputs.push((q, 1 << b));
        }
        self.bit[at] as usize
    }

    /// The parity on qubit `q`'s wire now.
    fn parity(&mut self, q: u32) -> Parity {
        let b = self.bit_of(q);
        self.inputs[b].1
    }

    fn add(&mut self, p: Parity, theta: f64) {
        match self.index.get(&p) {
            Some(&k) => self.terms[k].1 += theta,
            None => {
                self.index.insert(p, self.terms.len());
                self.terms.push((p, theta));
            }
        }
    }

    fn cphase(&mut self, a: u32, b: u32, l: f64) {
        let (pa, pb) = (self.parity(a), self.parity(b));
        self.add(pa ^ pb, -l / 2.0);
        self.add(pa, l / 2.0);
        self.add(pb, l / 2.0);
    }

    /// Takes `instr` (which [`joins`]) into the region; when its qubits would take
    /// the region past [`MOST_INPUTS`], the region is flushed to `out` first.
    fn push(&mut self, instr: Instr, out: &mut Vec<Instr>) {
        use std::f64::consts::PI;
        use GateKind::*;
        let Op::Gate { gate, qubits } = &instr.op else {
            unreachable!("only gates join")
        };
        let q: SmallVec<[u32; 2]> = qubits.iter().map(|q| q.0).collect();
        if self.inputs.len() + self.missing(&q) > MOST_INPUTS {
            self.flush(out);
        }
        match gate.kind {
            Cx => {
                let pc = self.parity(q[0]);
                let t = self.bit_of(q[1]);
                self.inputs[t].1 ^= pc;
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
                self.add(pa ^ pb, -t / 2.0);
                self.add(pb, t / 2.0);
                self.two_qubit += 1;
            }
            Rzz => {
                let (pa, pb) = (self.parity(q[0]), self.parity(q[1]));
                self.add(pa ^ pb, gate.params[0]);
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

    /// The qubits of parity `p`, in increasing order.
    fn qubits_of(&self, p: Parity) -> SmallVec<[u32; 2]> {
        let mut out: SmallVec<[u32; 2]> = (0..self.inputs.len())
            .filter(|&b| p >> b & 1 == 1)
            .map(|b| self.inputs[b].0)
            .collect();
        out.sort_unstable();
        out
    }

    /// The region's instructions, rewritten when that saves two-qubit operations;
    /// the region is empty after.
    fn flush(&mut self, out: &mut Vec<Instr>) {
        let linear_identity = self
            .inputs
            .iter()
            .enumerate()
            .all(|(b, &(_, p))| p == 1 << b);
        let representable = self.terms.iter().all(|(p, _)| p.count_ones() <= 2);
        let pairs = self
            .terms
            .iter()
            .filter(|(p, t)| p.count_ones() == 2 && t.abs() > 0.0)
            .count();
        let cost = pairs + if linear_identity { 0 } else { self.cx.len() };
        if !representable || cost >= self.two_qubit {
            out.append(&mut self.instrs);
        } else {
            for &(p, t) in &self.terms {
                if t == 0.0 || p == 0 {
                    continue;
                }
                let q = self.qubits_of(p);
                if q.len() == 1 {
                    out.push(gate(GateKind::Rz, &[t], &[q[0]]));
                } else {
                    out.push(gate(GateKind::Rzz, &[t], &[q[0], q[1]]));
                }
            }
            if !linear_identity {
                for &(c, t) in &self.cx {
                    out.push(gate(GateKind::Cx, &[], &[c, t]));
                }
            }
            self.instrs.clear();
        }
        for &(q, _) in &self.inputs {
            self.bit[q as usize] = OUTSIDE;
        }
        self.inputs.clear();
        self.terms.clear();
        self.index.clear();
        self.cx.clear();
        self.two_qubit = 0;
    }
}

/// Rewrites the regions of CNOT and diagonal gates of `instrs` (unconditioned
/// gates only; anything else closes the regions on its qubits). Gates on qubits
/// no region holds are moved before the open region, which they commute with.
pub fn rewrite(instrs: Vec<Instr>) -> Vec<Instr> {
    let mut out = Vec::with_capacity(instrs.len());
    let mut region = Region::new();
    for instr in instrs {
        if joins(&instr) {
            region.push(instr, &mut out);
            continue;
        }
        let touches = instr.op.qubits().iter().any(|q| region.holds(q.0));
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

#[cfg(test)]
mod tests {
    use super::*;

    /// A chain of CNOT-Rz-CNOT on 130 qubits: one region would hold every qubit, past
    /// the 128 bits of a parity. The region closes before the gate that would bring
    /// in the 129th; both regions still read each triple as one ZZ interaction
    /// (each triple lies within one region), so nothing is lost at the seam.
    #[test]
    fn a_region_past_the_parity_bits_closes_and_starts_again() {
        let n = 130u32;
        let mut instrs = Vec::new();
        for i in 0..n - 1 {
            let t = 0.01 * f64::from(i + 1);
            instrs.push(gate(GateKind::Cx, &[], &[i, i + 1]));
            instrs.push(gate(GateKind::Rz, &[t], &[i + 1]));
            instrs.push(gate(GateKind::Cx, &[], &[i, i + 1]));
        }
        let out = rewrite(instrs);
        assert_eq!(out.len(), (n - 1) as usize, "{out:?}");
        for (i, instr) in out.iter().enumerate() {
            let Op::Gate { gate, qubits } = &instr.op else {
                panic!("a gate");
            };
            assert_eq!(gate.kind, GateKind::Rzz, "{instr:?}");
            assert_eq!(gate.params[0], 0.01 * (i + 1) as f64);
            let q: Vec<u32> = qubits.iter().map(|q| q.0).collect();
            assert_eq!(q, [i as u32, i as u32 + 1]);
        }
    }
}
