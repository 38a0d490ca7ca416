//! The budget of a native sequence: the figures of docs/budget.md, computed from
//! the device profile without running anything.
//!
//! Error model (a model, not a measurement; documented in docs/budget.md):
//! every operation fails independently with probability `fixed + per_rad * |theta|`
//! from the profile's `[errors]` table; every ion the circuit uses decoheres for the
//! whole duration `T` with `exp(-T/T2)` (dephasing) and `exp(-T/(2 T1))`
//! (amplitude damping, averaged over the qubit states); `est_error = 1 - F` with `F`
//! the product of all these factors.
//! Timing model: operations run one after another; when the profile says light shifts
//! of one layer run at once, consecutive light shifts on distinct ions share one
//! time slot as long as the longest of them. Consecutive measurements of distinct
//! ions are one readout (one time slot). Frame changes take no time.

use crate::native::profile::{Cost, PerOp, Profile};
use crate::native::{NativeOp, Sequence};
use std::f64::consts::FRAC_PI_2;

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Budget {
    pub ms_pulses: usize,
    /// Sum of |theta| over MS pulses, in units of pi/2.
    pub ms_area: f64,
    /// `chain_rotate` pulses (MS pulses act on the whole chain too, but are counted
    /// in `ms_pulses`, not here).
    pub collective_pulses: usize,
    /// `light_shift` pulses.
    pub light_shifts: usize,
    pub duration_us: f64,
    pub est_error: f64,
    /// The longest chain of entangling pulses through any one ion.
    pub entangling_depth: usize,
    /// `ion_rotate` pulses.
    #[serde(rename = "ion_rotations")]
    pub addressed_rotations: usize,
    /// `hide` and `unhide` operations.
    pub hide_operations: usize,
    pub measurements: usize,
    /// Idle time of each ion the circuit uses, in microseconds.
    pub idle_us: Vec<f64>,
    /// The error light-shift crosstalk leaves (`native::crosstalk::stray_error`:
    /// stray Z rotations of the other ions), when the profile has crosstalk; not
    /// part of `est_error`. Of the sequence as written, unless the compile
    /// compensated it (then what the compensation leaves).
    pub crosstalk_error: Option<f64>,
}

/// What `op` costs by the table `t` (durations or errors) of the profile.
#[inline(always)]
fn cost_of(t: &PerOp, op: &NativeOp) -> f64 {
    let opt = |c: Option<Cost>, theta: f64| c.map_or(0.0, |c| c.at(theta));
    match *op {
        NativeOp::Collective { theta, .. } => t.collective.at(theta),
        NativeOp::LightShift { theta, .. } => t.light_shift.at(theta),
        NativeOp::Ms { theta, .. } => t.ms.at(theta),
        NativeOp::PairMs { theta, .. } => opt(t.pair_ms, theta),
        NativeOp::Addressed { theta, .. } => opt(t.addressed, theta),
        NativeOp::VirtualZ { .. } => 0.0,
        NativeOp::Hide { .. } => opt(t.hide, 0.0),
        NativeOp::Unhide { .. } => opt(t.unhide, 0.0),
        NativeOp::Measure { .. } => t.measure.at(0.0),
        NativeOp::Reset { .. } => t.reset.at(0.0),
    }
}

/// `f`, or 0 where it has fallen below the normal numbers. A product of millions of
/// fidelities goes subnormal, and every multiplication by a subnormal number costs
/// the CPU a hundred cycles or more (on the 113k-gate stand-in the budget spent
/// most of its time there); the figure made from it is `1 - f`, which is exactly 1
/// in either case.
pub(crate) fn above_subnormal(f: f64) -> f64 {
    if f < f64::MIN_POSITIVE {
        0.0
    } else {
        f
    }
}

/// Computes the budget of `seq` on `profile`; `active` is the number of ions the
/// source circuit uses (ions `0..active`).
pub fn budget(seq: &Sequence, profile: &Profile, active: u32) -> Budget {
    tally(
        seq.steps.iter().map(|s| &s.op),
        seq.n_ions as usize,
        profile,
        active,
        true,
        true,
    )
}

/// The budget of `ops` on a chain of `n_ions` without the per-ion figures
/// (`entangling_depth` is 0 and `idle_us` empty): what the optimizer ranks candidates
/// by, at less cost. Every ion counts as used.
pub fn figures(ops: &[NativeOp], n_ions: u32, profile: &Profile) -> Budget {
    tally(ops.iter(), n_ions as usize, profile, n_ions, false, true)
}

/// The figures of [`figures`] an objective ranks by: pulses, area and duration
/// always, the expected error only when `with_error` (its per-operation terms and
/// the decoherence of every ion are most of the cost of [`figures`], and only the
/// objective `error` ranks by it). Each is computed as [`figures`] computes it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ranked {
    pub ms_pulses: usize,
    pub ms_area: f64,
    pub duration_us: f64,
    pub est_error: Option<f64>,
}

impl From<&Budget> for Ranked {
    fn from(b: &Budget) -> Ranked {
        Ranked {
            ms_pulses: b.ms_pulses,
            ms_area: b.ms_area,
            duration_us: b.duration_us,
            est_error: Some(b.est_error),
        }
    }
}

/// [`Ranked`] figures of `ops` on a chain of `n_ions` (every ion counts as used).
pub fn ranked(ops: &[NativeOp], n_ions: u32, profile: &Profile, with_error: bool) -> Ranked {
    let b = tally(
        ops.iter(),
        n_ions as usize,
        profile,
        n_ions,
        false,
        with_error,
    );
    Ranked {
        ms_pulses: b.ms_pulses,
        ms_area: b.ms_area,
        duration_us: b.duration_us,
        est_error: with_error.then_some(b.est_error),
    }
}

/// Per-ion bookkeeping of [`budget`]: entangling depth and busy time. A whole-chain
/// pulse is booked once, not per ion: the ions' depth is at least `floor` (the
/// depth of the last whole-chain entangling pulse with nothing hidden), and every
/// ion was busy for `chain` minus the whole-chain time it spent hidden.
struct PerIon {
    hidden: Vec<bool>,
    n_hidden: usize,
    depth: Vec<usize>,
    floor: usize,
    own: Vec<f64>,
    chain: f64,
    hidden_at: Vec<f64>,
    missed: Vec<f64>,
}

impl PerIon {
    fn new(n: usize) -> PerIon {
        PerIon {
            hidden: vec![false; n],
            n_hidden: 0,
            depth: vec![0; n],
            floor: 0,
            own: vec![0.0; n],
            chain: 0.0,
            hidden_at: vec![0.0; n],
            missed: vec![0.0; n],
        }
    }

    fn depth_of(&self, i: usize) -> usize {
        self.depth[i].max(self.floor)
    }

    /// Books `op` (taking `dt`); returns its entangling depth, if it entangles.
    fn book(&mut self, op: &NativeOp, dt: f64, deepest: usize) -> Option<usize> {
        let mut d = None;
        match *op {
            NativeOp::Ms { .. } => {
                if self.n_hidden == 0 {
                    // Every ion reaches one more than the deepest.
                    self.floor = deepest + 1;
                    d = Some(self.floor);
                } else {
                    let visible = (0..self.hidden.len()).filter(|&i| !self.hidden[i]);
                    let x = visible.clone().map(|i| self.depth_of(i)).max().unwrap_or(0) + 1;
                    visible.for_each(|i| self.depth[i] = x);
                    d = Some(x);
                }
                self.chain += dt;
            }
            NativeOp::Collective { .. } => self.chain += dt,
            NativeOp::PairMs { a, b, .. } => {
                let (a, b) = (a as usize, b as usize);
                let x = self.depth_of(a).max(self.depth_of(b)) + 1;
                self.depth[a] = x;
                self.depth[b] = x;
                d = Some(x);
                self.own[a] += dt;
                self.own[b] += dt;
            }
            NativeOp::LightShift { ion, .. }
            | NativeOp::Addressed { ion, .. }
            | NativeOp::Measure { ion, .. }
            | NativeOp::Reset { ion } => self.own[ion as usize] += dt,
            NativeOp::Hide { ion } => {
                let i = ion as usize;
                self.own[i] += dt;
                if !self.hidden[i] {
                    self.hidden[i] = true;
                    self.n_hidden += 1;
                    self.hidden_at[i] = self.chain;
                }
            }
            NativeOp::Unhide { ion } => {
                let i = ion as usize;
                self.own[i] += dt;
                if self.hidden[i] {
                    self.hidden[i] = false;
                    self.n_hidden -= 1;
                    self.missed[i] += self.chain - self.hidden_at[i];
                }
            }
            NativeOp::VirtualZ { .. } => {}
        }
        d
    }

    /// Ion `i`'s busy time.
    fn busy(&self, i: usize) -> f64 {
        let still_hidden = if self.hidden[i] {
            self.chain - self.hidden_at[i]
        } else {
            0.0
        };
        self.own[i] + (self.chain - self.missed[i] - still_hidden)
    }
}

fn tally<'a>(
    ops: impl Iterator<Item = &'a NativeOp>,
    n: usize,
    profile: &Profile,
    active: u32,
    per_ion: bool,
    errors: bool,
) -> Budget {
    let mut b = Budget {
        ms_pulses: 0,
        ms_area: 0.0,
        collective_pulses: 0,
        light_shifts: 0,
        duration_us: 0.0,
        est_error: 0.0,
        entangling_depth: 0,
        addressed_rotations: 0,
        hide_operations: 0,
        measurements: 0,
        idle_us: Vec::new(),
        // Filled by `with_crosstalk` where wanted: the optimizer costs candidates
        // with this function and does not need it.
        crosstalk_error: None,
    };
    let mut ions = per_ion.then(|| PerIon::new(n));
    let mut fidelity = 1.0f64;
    let mut clock = Clock::new(profile, n);
    for op in ops {
        let dt = cost_of(&profile.durations_us, op);
        if errors {
            let err = cost_of(&profile.errors, op);
            fidelity = above_subnormal(fidelity * (1.0 - err).max(0.0));
        }
        match *op {
            NativeOp::Ms { theta, .. } | NativeOp::PairMs { theta, .. } => {
                b.ms_pulses += 1;
                b.ms_area += theta.abs() / FRAC_PI_2;
            }
            NativeOp::Collective { .. } => b.collective_pulses += 1,
            NativeOp::LightShift { .. } => b.light_shifts += 1,
            NativeOp::Addressed { .. } => b.addressed_rotations += 1,
            NativeOp::Hide { .. } | NativeOp::Unhide { .. } => b.hide_operations += 1,
            NativeOp::Measure { .. } => b.measurements += 1,
            _ => {}
        }
        if let Some(ions) = ions.as_mut() {
            if let Some(d) = ions.book(op, dt, b.entangling_depth) {
                b.entangling_depth = b.entangling_depth.max(d);
            }
        }
        clock.place(op, dt);
    }
    b.duration_us = clock.now;
    let t = b.duration_us;
    if errors {
        let c = profile.coherence;
        // Each ion's factor, multiplied in one ion at a time.
        let each = (-t / c.t2_us).exp() * (-t / (2.0 * c.t1_us)).exp();
        for _ in 0..active {
            fidelity *= each;
        }
        b.est_error = 1.0 - fidelity;
    } else {
        b.est_error = f64::NAN;
    }
    if let Some(ions) = ions {
        b.idle_us = (0..active as usize)
            .map(|i| (t - ions.busy(i)).max(0.0))
            .collect();
    }
    b
}

/// `b` with its crosstalk error: that of `seq` as written, when the profile has
/// crosstalk.
pub fn with_crosstalk(mut b: Budget, seq: &Sequence, profile: &Profile) -> Budget {
    b.crosstalk_error = stray_error_of(seq, profile);
    b
}

/// The crosstalk error of `seq` as written, when the profile has crosstalk (the
/// figure [`with_crosstalk`] sets).
pub fn stray_error_of(seq: &Sequence, profile: &Profile) -> Option<f64> {
    crate::native::crosstalk::present(profile)
        .then(|| crate::native::crosstalk::stray_error(seq, profile))
}

/// When one step runs, by the timing model of [`budget`], in microseconds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Slot {
    pub start_us: f64,
    pub duration_us: f64,
}

/// The timing model (the module header): places each operation after the one
/// before, except that a layer of light shifts on distinct ions (where the profile
/// runs them at once) or of measurements shares one slot.
struct Clock {
    parallel_light_shifts: bool,
    /// The end of everything placed so far.
    now: f64,
    /// The open layer: measurements or light shifts, and its start.
    layer: Option<(bool, f64)>,
    /// The ions in the open layer, one bit each.
    in_layer: Vec<u64>,
    /// The words of `in_layer` set (cleared when a layer opens).
    set_words: Vec<usize>,
}

impl Clock {
    fn new(profile: &Profile, n_ions: usize) -> Clock {
        Clock {
            parallel_light_shifts: profile.capabilities.parallel_light_shifts,
            now: 0.0,
            layer: None,
            in_layer: vec![0; n_ions.div_ceil(64).max(1)],
            set_words: Vec::new(),
        }
    }

    /// Marks `ion` in the open layer; false if it was there already.
    #[inline(always)]
    fn mark(&mut self, ion: u32) -> bool {
        let (w, bit) = (ion as usize / 64, 1u64 << (ion % 64));
        if w >= self.in_layer.len() {
            self.in_layer.resize(w + 1, 0);
        }
        if self.in_layer[w] & bit != 0 {
            return false;
        }
        if self.in_layer[w] == 0 {
            self.set_words.push(w);
        }
        self.in_layer[w] |= bit;
        true
    }

    fn open(&mut self, kind: bool, ion: u32) {
        for w in self.set_words.drain(..) {
            self.in_layer[w] = 0;
        }
        self.layer = Some((kind, self.now));
        self.mark(ion);
    }

    /// Places `op`, taking `dt` microseconds; returns its slot.
    #[inline(always)]
    fn place(&mut self, op: &NativeOp, dt: f64) -> Slot {
        let layered = match *op {
            NativeOp::LightShift { ion, .. } if self.parallel_light_shifts => Some((false, ion)),
            NativeOp::Measure { ion, .. } => Some((true, ion)),
            _ => None,
        };
        match (layered, self.layer) {
            (Some((kind, ion)), Some((open, start))) if open == kind && self.mark(ion) => {
                self.now = self.now.max(start + dt);
                return Slot {
                    start_us: start,
                    duration_us: dt,
                };
            }
            (Some((kind, ion)), _) => self.open(kind, ion),
            (None, _) => self.layer = None,
        }
        let slot = Slot {
            start_us: self.now,
            duration_us: dt,
        };
        self.now += dt;
        slot
    }
}

/// The start and duration of every step of `seq` on `profile`, by the timing model
/// of [`budget`] (its `duration_us` is the largest end).
pub fn timeline(seq: &Sequence, profile: &Profile) -> Vec<Slot> {
    let mut clock = Clock::new(profile, seq.n_ions as usize);
    seq.steps
        .iter()
        .map(|step| clock.place(&step.op, cost_of(&profile.durations_us, &step.op)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::native::Step;
    use rand::{Rng, SeedableRng};

    /// The error of a long sequence is the product of its operations' fidelities,
    /// kept exactly while that product is a normal number and 1 once it is not:
    /// 1 - 0.5^k by its definition for k light shifts of error 0.5 (an invented
    /// profile), with k = 1000 (product 2^-1000, normal: the error rounds to 1) and
    /// k = 30 (the error 1 - 2^-30, exactly representable).
    #[test]
    fn a_long_product_of_fidelities_keeps_its_normal_values() {
        assert_eq!(above_subnormal(f64::MIN_POSITIVE), f64::MIN_POSITIVE);
        assert_eq!(above_subnormal(f64::MIN_POSITIVE / 2.0), 0.0);
        assert_eq!(above_subnormal(0.75), 0.75);
        let mut profile = Profile::demo();
        profile.coherence.t1_us = f64::INFINITY;
        profile.coherence.t2_us = f64::INFINITY;
        profile.errors.light_shift = Cost {
            fixed: 0.5,
            per_rad: 0.0,
        };
        for (k, want) in [(30, 1.0 - 0.5f64.powi(30)), (1000, 1.0), (1100, 1.0)] {
            let ops: Vec<NativeOp> = (0..k)
                .map(|_| NativeOp::LightShift { ion: 0, theta: 1.0 })
                .collect();
            assert_eq!(
                figures(&ops, 1, &profile).est_error,
                want,
                "{k} light shifts"
            );
        }
    }

    /// Depth and busy time by their definitions, ion by ion (the bookkeeping of
    /// [`PerIon`] books whole-chain pulses once instead).
    fn by_definition(ops: &[NativeOp], n: usize, profile: &Profile) -> (usize, Vec<f64>) {
        let mut hidden = vec![false; n];
        let mut depth = vec![0usize; n];
        let mut busy = vec![0.0f64; n];
        let mut deepest = 0;
        for op in ops {
            let ions: Vec<usize> = match *op {
                NativeOp::Collective { .. } | NativeOp::Ms { .. } => {
                    (0..n).filter(|&i| !hidden[i]).collect()
                }
                NativeOp::PairMs { a, b, .. } => vec![a as usize, b as usize],
                NativeOp::VirtualZ { .. } => vec![],
                NativeOp::LightShift { ion, .. }
                | NativeOp::Addressed { ion, .. }
                | NativeOp::Hide { ion }
                | NativeOp::Unhide { ion }
                | NativeOp::Measure { ion, .. }
                | NativeOp::Reset { ion } => vec![ion as usize],
            };
            if op.is_entangling() {
                let d = ions.iter().map(|&i| depth[i]).max().unwrap_or(0) + 1;
                ions.iter().for_each(|&i| depth[i] = d);
                deepest = deepest.max(d);
            }
            let dt = cost_of(&profile.durations_us, op);
            ions.iter().for_each(|&i| busy[i] += dt);
            match *op {
                NativeOp::Hide { ion } => hidden[ion as usize] = true,
                NativeOp::Unhide { ion } => hidden[ion as usize] = false,
                _ => {}
            }
        }
        (deepest, busy)
    }

    #[test]
    fn whole_chain_pulses_booked_once_give_the_per_ion_figures() {
        let profile = Profile::demo();
        let n = 6;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        for _ in 0..200 {
            let ops: Vec<NativeOp> = (0..rng.gen_range(1..60))
                .map(|_| {
                    let ion = rng.gen_range(0..n as u32);
                    let theta = rng.gen_range(-2.0..2.0);
                    match rng.gen_range(0..8) {
                        0 => NativeOp::Ms { theta, phi: 0.0 },
                        1 => NativeOp::Collective { theta, phi: 0.0 },
                        2 => NativeOp::PairMs {
                            a: ion,
                            b: (ion + 1) % n as u32,
                            theta,
                            phi: 0.0,
                        },
                        3 => NativeOp::Hide { ion },
                        4 => NativeOp::Unhide { ion },
                        5 => NativeOp::Measure { ion, clbit: 0 },
                        6 => NativeOp::VirtualZ { theta },
                        _ => NativeOp::LightShift { ion, theta },
                    }
                })
                .collect();
            let seq = Sequence {
                n_ions: n as u32,
                steps: ops
                    .iter()
                    .map(|&op| Step {
                        op,
                        condition: None,
                    })
                    .collect(),
                ..Sequence::default()
            };
            let b = budget(&seq, &profile, n as u32);
            let (deepest, busy) = by_definition(&ops, n, &profile);
            assert_eq!(b.entangling_depth, deepest, "{ops:?}");
            for (i, idle) in b.idle_us.iter().enumerate() {
                let want = (b.duration_us - busy[i]).max(0.0);
                assert!((idle - want).abs() < 1e-9, "ion {i}: {idle} against {want}");
            }
            // The optimizer's figures are the budget's, without the per-ion ones.
            let f = figures(&ops, n as u32, &profile);
            assert_eq!(
                (f.ms_pulses, f.ms_area, f.duration_us, f.est_error),
                (b.ms_pulses, b.ms_area, b.duration_us, b.est_error)
            );
            // And the ranked ones are those, with the error or without it.
            for with_error in [true, false] {
                let r = ranked(&ops, n as u32, &profile, with_error);
                assert_eq!(
                    (r.ms_pulses, r.ms_area, r.duration_us, r.est_error),
                    (
                        b.ms_pulses,
                        b.ms_area,
                        b.duration_us,
                        with_error.then_some(b.est_error)
                    )
                );
            }
        }
    }
}
