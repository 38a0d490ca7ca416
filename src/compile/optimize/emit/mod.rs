//! Per-target synthesis of a schedule into native operations, and the peephole
//! rewrites that follow (docs/optimizer.md).
//!
//! - Local layers: each qubit's unitary as ZYZ Euler angles `Rz(b) Ry(g) Rz(d)`; the
//!   first Z is a light shift, the Y parts of all qubits share one collective
//!   sandwich `R(pi/2, 0) L(g) R(-pi/2, 0)` (gate-set fact 4), or addressed rotations
//!   where the profile makes those cheaper; the last Z commutes with the following
//!   ZZ blocks and is carried into the qubit's next layer.
//! - Blocks: Z to X by collective `R(pi/2, pi/2)` and back; the coupling by sign
//!   vectors (module `couple`), with idle ions decoupled by gate-set fact 9, or by
//!   the layer construction of fact 7; on the addressed target also by pair MS
//!   pulses, or by hiding the idle ions around global pulses. The candidate the
//!   objective prefers, costed by the budget model, is taken.
//! - Peephole: adjacent collective rotations become one (with a free frame change),
//!   and each run of light shifts and frame changes is rewritten with the common
//!   frame phase that leaves the fewest light shifts.
//!
//! Invariant: the emitted operations equal the schedule's product up to global
//! phase, with every ion the schedule does not use left as it was.

use super::schedule::Schedule;
use super::Objective;
use crate::circuit::{Condition, Mat2};
use crate::compile::couple::{
    components, hadamard_each, matching, order_pulses, pad_idle, side_by_side, synthesize,
    Budget as SynthBudget, Coupling, Method, Pulse, Synthesis,
};
use crate::compile::hadamard::smallest_hadamard;
use crate::compile::lower::zyz;
use crate::compile::Target;
use crate::native::budget::budget;
use crate::native::profile::Profile;
use crate::native::{NativeOp, Sequence, Step};
use rustc_hash::FxHashMap;
use std::f64::consts::{FRAC_PI_2, PI};
use std::sync::Arc;

mod peephole;
mod quiet;

pub use peephole::peephole;
use quiet::{push_shift, quiet_groups, resolve_quiet, Group};
/// Angles this close to zero (mod 2 pi where that is a global phase) are left out.
const EPS: f64 = 1e-14;

use crate::compile::baseline::wrap;

/// What one block cost, for the compile report.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BlockReport {
    /// Ions the block couples.
    pub ions: usize,
    pub couplings: usize,
    /// The area the chosen pulses spend, in units of pi/2.
    pub area: f64,
    /// The smallest area the coupling program allows (its certified lower bound), in
    /// units of pi/2; 0 when unknown.
    pub lower_bound: f64,
    pub method: Method,
    pub pulses: usize,
}

/// Settings and caches shared by every segment of one compile.
pub struct Emitter<'a> {
    pub profile: &'a Profile,
    pub target: Target,
    pub objective: Objective,
    pub synth: SynthBudget,
    cache: FxHashMap<Vec<u64>, Arc<Synthesis>>,
    pub reports: Vec<BlockReport>,
    /// Solver time left for the whole compile; once spent, blocks the cache does
    /// not know are made by the constructions alone.
    pub solver_left: std::time::Duration,
    /// Solver time spent.
    pub solver_spent: std::time::Duration,
    /// When set, every block's coupling (on its own ions) and the synthesis it was
    /// offered, for checking the certificates.
    pub certificates: Option<Vec<(Coupling, Arc<Synthesis>)>>,
}

impl<'a> Emitter<'a> {
    pub fn new(profile: &'a Profile, target: Target, objective: Objective) -> Emitter<'a> {
        Emitter {
            profile,
            target,
            objective,
            synth: SynthBudget::default(),
            cache: FxHashMap::default(),
            reports: Vec::new(),
            solver_left: std::time::Duration::from_secs(3),
            solver_spent: std::time::Duration::ZERO,
            certificates: None,
        }
    }

    fn n(&self) -> u32 {
        self.profile.device.ions
    }

    /// Ions that no block of `s` couples and no layer rotates off the Z axis: their
    /// evolution over the segment is ZZ couplings only (the collective pulses around
    /// blocks and layers cancel on them), so the couplings among them need to vanish
    /// over the segment as a whole, not block by block.
    fn quiet_ions(&self, s: &Schedule) -> Vec<bool> {
        let mut quiet = vec![true; self.n() as usize];
        for block in &s.blocks {
            for &(a, b, _) in block {
                quiet[a as usize] = false;
                quiet[b as usize] = false;
            }
        }
        for layer in &s.layers {
            for &(q, m) in layer {
                if !super::dag::is_diagonal(&m) {
                    quiet[q as usize] = false;
                }
            }
        }
        quiet
    }

    /// The native operations of one segment's schedule, with `condition` on each.
    /// Where sharing an echo column among the quiet ions helps some block, the
    /// segment is also made without it, and the one the objective prefers is kept
    /// (the shared column needs the segment's weight split evenly over a Hadamard
    /// matrix's rows, which a short segment may not repay).
    ///
    /// Qubits marked in `drop_z` are measured right after the segment: the Z
    /// rotation each would carry out of it is left out (it cannot change what the
    /// measurement reads; the caller must verify up to a final diagonal).
    pub fn segment(
        &mut self,
        s: &Schedule,
        condition: Option<&Condition>,
        drop_z: &[bool],
    ) -> Vec<Step> {
        let quiet = self.quiet_ions(s);
        let (ops, reports, used_quiet) = self.plan(s, &quiet, drop_z);
        let (ops, reports) = if used_quiet {
            let none = vec![false; quiet.len()];
            let (other, other_reports, _) = self.plan(s, &none, drop_z);
            if self.key(&other) < self.key(&ops) {
                (other, other_reports)
            } else {
                (ops, reports)
            }
        } else {
            (ops, reports)
        };
        self.reports.extend(reports);
        ops.into_iter()
            .map(|op| Step {
                op,
                condition: condition.map(|c| Box::new(c.clone())),
            })
            .collect()
    }

    /// One way to make the segment: its operations (after the peephole), block
    /// reports, and whether a block shares the quiet ions' column.
    fn plan(
        &mut self,
        s: &Schedule,
        quiet: &[bool],
        drop_z: &[bool],
    ) -> (Vec<NativeOp>, Vec<BlockReport>, bool) {
        let mut parts: Vec<Part> = Vec::new();
        let mut ops = Vec::new();
        let mut reports = Vec::new();
        let mut used_quiet = false;
        let mut carry: FxHashMap<u32, f64> = FxHashMap::default();
        for (k, layer) in s.layers.iter().enumerate() {
            self.layer(layer, &mut carry, &mut ops);
            if let Some(block) = s.blocks.get(k) {
                let (part, report) = self.block(block, &mut carry, quiet);
                reports.extend(report);
                match part {
                    Part::Ops(v) => ops.extend(v),
                    groups => {
                        used_quiet = true;
                        parts.push(Part::Ops(std::mem::take(&mut ops)));
                        parts.push(groups);
                    }
                }
            }
        }
        let mut rest: Vec<(u32, f64)> = carry.into_iter().collect();
        rest.sort_by_key(|(q, _)| *q);
        for (q, t) in rest {
            if !drop_z.get(q as usize).copied().unwrap_or(false) {
                push_shift(&mut ops, q, t);
            }
        }
        parts.push(Part::Ops(ops));
        (
            peephole(resolve_quiet(parts, quiet), self.n()),
            reports,
            used_quiet,
        )
    }

    /// The objective's figures of a list of operations (smaller is better).
    fn key(&self, ops: &[NativeOp]) -> (f64, f64) {
        let mut seq = Sequence::new(self.n(), Vec::new());
        seq.steps = ops
            .iter()
            .map(|&op| Step {
                op,
                condition: None,
            })
            .collect();
        let b = budget(&seq, self.profile, self.n());
        match self.objective {
            Objective::Pulses => (b.ms_pulses as f64, b.ms_area),
            Objective::Area => (b.ms_area, b.ms_pulses as f64),
            Objective::Duration => (b.duration_us, b.ms_area),
            Objective::Error => (b.est_error, b.duration_us),
        }
    }

    fn layer(
        &self,
        layer: &[(u32, Mat2)],
        carry: &mut FxHashMap<u32, f64>,
        ops: &mut Vec<NativeOp>,
    ) {
        let mut ys: Vec<(u32, f64)> = Vec::new();
        let mut after: Vec<(u32, f64)> = Vec::new();
        for &(q, m) in layer {
            let c = carry.remove(&q).unwrap_or(0.0);
            // U Rz(c): Rz(c) first, then U.
            let (_, beta, gamma, delta) = zyz(&m);
            if gamma.abs() <= EPS {
                carry.insert(q, beta + delta + c);
                continue;
            }
            push_shift(ops, q, delta + c);
            ys.push((q, gamma));
            after.push((q, beta));
        }
        if !ys.is_empty() {
            // One collective sandwich for the whole layer (gate-set fact 4), or, where
            // the target and device allow, addressed rotations: whichever the
            // objective prefers under the budget model.
            let mut sandwich = vec![NativeOp::Collective {
                theta: FRAC_PI_2,
                phi: 0.0,
            }];
            for &(q, g) in &ys {
                push_shift(&mut sandwich, q, g);
            }
            sandwich.push(NativeOp::Collective {
                theta: -FRAC_PI_2,
                phi: 0.0,
            });
            let chosen = if self.target == Target::Addressed
                && self.profile.capabilities.addressed_rotation
            {
                let addressed: Vec<NativeOp> = ys
                    .iter()
                    .map(|&(q, g)| NativeOp::Addressed {
                        ion: q,
                        theta: g,
                        phi: FRAC_PI_2,
                    })
                    .collect();
                if self.key(&addressed) < self.key(&sandwich) {
                    addressed
                } else {
                    sandwich
                }
            } else {
                sandwich
            };
            ops.extend(chosen);
        }
        for (q, b) in after {
            *carry.entry(q).or_insert(0.0) += b;
        }
    }

    fn block(
        &mut self,
        block: &[(u32, u32, f64)],
        carry: &mut FxHashMap<u32, f64>,
        quiet: &[bool],
    ) -> (Part, Option<BlockReport>) {
        // exp(-i w ZZ): w mod pi is a global phase; w beyond pi/4 is -i Z Z (two
        // light shifts, carried) times a coupling of at most pi/4.
        let mut terms = Vec::new();
        for &(a, b, w) in block {
            let mut w = w - PI * (w / PI).round();
            // At exactly pi/4 either sign serves; on the collective target positive
            // couplings share sign vectors (a uniform block is one pulse) where
            // negative ones frustrate (pair pulses do not care, and the carry costs
            // light shifts).
            let flip = self.target == Target::Collective && w < -PI / 4.0 + EPS;
            if w.abs() > PI / 4.0 + EPS || flip {
                w -= FRAC_PI_2 * w.signum();
                *carry.entry(a).or_insert(0.0) += PI;
                *carry.entry(b).or_insert(0.0) += PI;
            }
            if w.abs() > EPS {
                terms.push((a, b, w));
            }
        }
        if terms.is_empty() {
            return (Part::Ops(Vec::new()), None);
        }
        let mut active: Vec<u32> = terms.iter().flat_map(|&(a, b, _)| [a, b]).collect();
        active.sort_unstable();
        active.dedup();
        let pos = |q: u32| active.binary_search(&q).expect("active");
        let mut local = Coupling::zero(active.len());
        for &(a, b, w) in &terms {
            local.set(pos(a), pos(b), w);
        }
        let n = self.n() as usize;
        let mut device = Coupling::zero(n);
        for &(a, b, w) in &terms {
            device.set(a as usize, b as usize, w);
        }
        let best = self.synthesis(&local);
        if let Some(certs) = &mut self.certificates {
            certs.push((local.clone(), Arc::clone(&best)));
        }
        let mut candidates: Vec<Candidate> = Vec::new();
        let active_idx: Vec<usize> = active.iter().map(|&q| q as usize).collect();
        candidates.push((
            Made::Pulses(pad_idle(&best, &active_idx, n)),
            best.method,
            best.weight,
        ));
        // The same pulses, decoupled from the quiet ions by one shared column.
        let n_quiet = quiet.iter().filter(|&&q| q).count();
        let groups = (n_quiet > 0).then(|| quiet_groups(&best, &active_idx, quiet));
        if let Some(groups) = &groups {
            let flat: Vec<Pulse> = groups.iter().flat_map(|g| g.pulses.clone()).collect();
            candidates.push((Made::Pulses(flat), best.method, best.weight));
        }
        let quiet_candidate = if n_quiet > 0 { 1 } else { usize::MAX };
        if let Some(m) = matching(&device) {
            candidates.push((Made::Pulses(m.pulses), Method::Matching, m.weight));
        }
        // Components side by side over the whole device, every other ion a column of
        // its own: one Hadamard matrix for both, where padding each component's
        // pulses for the idle ions would multiply the pulse count again.
        let parts = components(&local);
        if parts.len() > 1 {
            let mut on_device: Vec<(Vec<usize>, Synthesis)> = Vec::new();
            let mut used = vec![false; n];
            for (part, sub) in parts {
                let s = self.synthesis(&sub);
                let ions: Vec<usize> = part.iter().map(|&i| active_idx[i]).collect();
                ions.iter().for_each(|&i| used[i] = true);
                on_device.push((ions, (*s).clone()));
            }
            for ion in (0..n).filter(|&i| !used[i]) {
                on_device.push((vec![ion], Synthesis::empty()));
            }
            let joined = side_by_side(n, &on_device);
            if joined.certifies(&device) {
                candidates.push((Made::Pulses(joined.pulses), joined.method, joined.weight));
            }
        }
        let h = hadamard_each(&device);
        candidates.push((Made::Pulses(h.pulses), Method::Hadamard, h.weight));
        if self.target == Target::Addressed {
            let caps = self.profile.capabilities;
            if caps.pair_ms {
                let pair: Vec<NativeOp> = terms
                    .iter()
                    .map(|&(a, b, w)| NativeOp::PairMs {
                        a,
                        b,
                        theta: 2.0 * w,
                        phi: 0.0,
                    })
                    .collect();
                let weight = terms.iter().map(|t| t.2.abs()).sum();
                candidates.push((Made::Ops(pair), Method::Single, weight));
            }
            if caps.hiding && active.len() < n {
                let on_active: Vec<Pulse> = best
                    .pulses
                    .iter()
                    .map(|p| {
                        let mut signs = vec![1i8; n];
                        for (k, &q) in active.iter().enumerate() {
                            signs[q as usize] = p.signs[k];
                        }
                        Pulse {
                            signs,
                            weight: p.weight,
                        }
                    })
                    .collect();
                let mut hidden = Vec::new();
                for ion in 0..n as u32 {
                    if active.binary_search(&ion).is_err() {
                        hidden.push(NativeOp::Hide { ion });
                    }
                }
                let mut body = hidden.clone();
                body.extend(pulse_ops(on_active));
                body.extend(hidden.iter().map(|h| match *h {
                    NativeOp::Hide { ion } => NativeOp::Unhide { ion },
                    other => other,
                }));
                candidates.push((Made::Ops(body), best.method, best.weight));
            }
        }
        let (index, (chosen, method, weight)) = self.choose(candidates);
        let report = Some(BlockReport {
            ions: active.len(),
            couplings: terms.len(),
            area: 2.0 * weight / FRAC_PI_2,
            lower_bound: 2.0 * best.lower_bound / FRAC_PI_2,
            method,
            pulses: chosen.iter().filter(|op| op.is_entangling()).count(),
        });
        if index == quiet_candidate {
            return (Part::Quiet(groups.expect("the quiet candidate")), report);
        }
        // Z to X: R(pi/2, pi/2) maps X to Z (Ry(-pi/2) X Ry(pi/2) = Z).
        let mut ops = vec![NativeOp::Collective {
            theta: FRAC_PI_2,
            phi: FRAC_PI_2,
        }];
        ops.extend(chosen);
        ops.push(NativeOp::Collective {
            theta: -FRAC_PI_2,
            phi: FRAC_PI_2,
        });
        (Part::Ops(ops), report)
    }

    fn synthesis(&mut self, c: &Coupling) -> Arc<Synthesis> {
        let mut key: Vec<u64> = vec![c.n as u64];
        key.extend(c.w.iter().map(|w| w.to_bits()));
        if let Some(s) = self.cache.get(&key) {
            return Arc::clone(s);
        }
        let s = if c.n <= 2 || self.solver_left.is_zero() {
            // Two ions need no solver; without solver time, the construction.
            let mut cheap = SynthBudget {
                time_limit: std::time::Duration::ZERO,
                ..self.synth
            };
            if c.n <= 2 {
                cheap.time_limit = self.synth.time_limit;
            }
            Arc::new(synthesize(c, cheap))
        } else {
            let start = std::time::Instant::now();
            let budget = SynthBudget {
                time_limit: self.synth.time_limit.min(self.solver_left),
                ..self.synth
            };
            let s = synthesize(c, budget);
            let spent = start.elapsed();
            self.solver_spent += spent;
            self.solver_left = self.solver_left.saturating_sub(spent);
            Arc::new(s)
        };
        self.cache.insert(key, Arc::clone(&s));
        s
    }

    /// The candidate the objective prefers, costed by the budget model.
    /// A lower bound on a candidate's key from its entangling pulses alone (the
    /// other operations only add time and error).
    fn lower_key(&self, made: &Made) -> (f64, f64) {
        let d = &self.profile.durations_us;
        let e = &self.profile.errors;
        let (mut count, mut area, mut time, mut keep) = (0.0, 0.0, 0.0, 1.0f64);
        let mut add = |theta: f64, pair: bool| {
            let (dc, ec) = if pair {
                (d.pair_ms.unwrap_or(d.ms), e.pair_ms.unwrap_or(e.ms))
            } else {
                (d.ms, e.ms)
            };
            count += 1.0;
            area += theta.abs() / FRAC_PI_2;
            time += dc.at(theta);
            keep *= (1.0 - ec.at(theta)).max(0.0);
        };
        match made {
            Made::Pulses(p) => p.iter().for_each(|p| add(2.0 * p.weight, false)),
            Made::Ops(ops) => ops.iter().for_each(|op| match *op {
                NativeOp::Ms { theta, .. } => add(theta, false),
                NativeOp::PairMs { theta, .. } => add(theta, true),
                _ => {}
            }),
        }
        match self.objective {
            Objective::Pulses => (count, area),
            Objective::Area => (area, count),
            Objective::Duration => (time, area),
            Objective::Error => (1.0 - keep, time),
        }
    }

    /// The candidate the objective prefers, costed by the budget model; candidates
    /// whose entangling pulses alone cost more than the best found are not built.
    fn choose(&self, candidates: Vec<Candidate>) -> (usize, Built) {
        let mut order: Vec<(usize, (f64, f64))> = candidates
            .iter()
            .enumerate()
            .map(|(i, c)| (i, self.lower_key(&c.0)))
            .collect();
        order.sort_by(|a, b| a.1 .0.total_cmp(&b.1 .0));
        let mut slots: Vec<Option<Candidate>> = candidates.into_iter().map(Some).collect();
        let mut best: Option<((f64, f64), (usize, Built))> = None;
        for (index, lower) in order {
            if let Some((k, _)) = &best {
                if lower.0 > k.0 + 1e-12 * k.0.abs() {
                    break;
                }
            }
            let (made, method, weight) = slots[index].take().expect("each once");
            let ops = match made {
                Made::Pulses(p) => pulse_ops(p),
                Made::Ops(ops) => ops,
            };
            let key = self.key(&ops);
            let better = match &best {
                None => true,
                Some((k, _)) => {
                    key.0 < k.0 - 1e-12 * k.0.abs()
                        || (key.0 <= k.0 + 1e-12 * k.0.abs() && key.1 < k.1)
                }
            };
            if better {
                best = Some((key, (index, (ops, method, weight))));
            }
        }
        best.expect("at least one candidate").1
    }
}

/// A chosen candidate: its operations, method and total weight.
type Built = (Vec<NativeOp>, Method, f64);

/// A candidate's pulses: sign vectors still to be ordered, or operations.
enum Made {
    Pulses(Vec<Pulse>),
    Ops(Vec<NativeOp>),
}

/// One way to make a block: its pulses, how its couplings were found, and its
/// total weight.
type Candidate = (Made, Method, f64);

/// Part of a segment's output: operations, or a block whose quiet ions still need
/// their signs (see [`resolve_quiet`]).
enum Part {
    Ops(Vec<NativeOp>),
    Quiet(Vec<Group>),
}

/// Sign-vector pulses as native operations: ordered for few flips, each pulse
/// `F_s MS(2t) F_s` with the flips between pulses merged.
fn pulse_ops(pulses: Vec<Pulse>) -> Vec<NativeOp> {
    let pulses = order_pulses(pulses);
    let n = pulses.first().map_or(0, |p| p.signs.len());
    let mut frame = vec![1i8; n];
    let mut ops = Vec::new();
    for p in pulses {
        for (i, (f, s)) in frame.iter_mut().zip(&p.signs).enumerate() {
            if f != s {
                ops.push(NativeOp::LightShift {
                    ion: i as u32,
                    theta: PI,
                });
                *f = *s;
            }
        }
        ops.push(NativeOp::Ms {
            theta: 2.0 * p.weight,
            phi: 0.0,
        });
    }
    for (i, f) in frame.iter().enumerate() {
        if *f < 0 {
            ops.push(NativeOp::LightShift {
                ion: i as u32,
                theta: PI,
            });
        }
    }
    ops
}
