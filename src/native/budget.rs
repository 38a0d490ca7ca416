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

/// The ions `op` acts on, given which are hidden: every visible ion for the
/// whole-chain pulses, none for a frame change. Calls `f` on each.
fn for_each_ion(op: &NativeOp, hidden: &[bool], mut f: impl FnMut(usize)) {
    match *op {
        NativeOp::Collective { .. } | NativeOp::Ms { .. } => {
            (0..hidden.len()).filter(|&i| !hidden[i]).for_each(f)
        }
        NativeOp::PairMs { a, b, .. } => {
            f(a as usize);
            f(b as usize);
        }
        NativeOp::LightShift { ion, .. }
        | NativeOp::Addressed { ion, .. }
        | NativeOp::Hide { ion }
        | NativeOp::Unhide { ion }
        | NativeOp::Measure { ion, .. }
        | NativeOp::Reset { ion } => f(ion as usize),
        NativeOp::VirtualZ { .. } => {}
    }
}

/// Computes the budget of `seq` on `profile`; `active` is the number of ions the
/// source circuit uses (ions `0..active`).
pub fn budget(seq: &Sequence, profile: &Profile, active: u32) -> Budget {
    let n = seq.n_ions as usize;
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
    let mut hidden = vec![false; n];
    let mut busy = vec![0.0f64; n];
    let mut depth = vec![0usize; n];
    let mut fidelity = 1.0f64;
    let mut clock = Clock::new(profile);
    for step in &seq.steps {
        let op = &step.op;
        let dt = cost_of(&profile.durations_us, op);
        let err = cost_of(&profile.errors, op);
        fidelity *= (1.0 - err).max(0.0);
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
        if op.is_entangling() {
            let mut d = 0;
            for_each_ion(op, &hidden, |i| d = d.max(depth[i]));
            d += 1;
            for_each_ion(op, &hidden, |i| depth[i] = d);
            b.entangling_depth = b.entangling_depth.max(d);
        }
        // Busy while acting (a hidden ion is busy being hidden or unhidden).
        for_each_ion(op, &hidden, |i| busy[i] += dt);
        match *op {
            NativeOp::Hide { ion } => hidden[ion as usize] = true,
            NativeOp::Unhide { ion } => hidden[ion as usize] = false,
            _ => {}
        }
        clock.place(op, dt);
    }
    b.duration_us = clock.now;
    let t = b.duration_us;
    let c = profile.coherence;
    for _ in 0..active {
        fidelity *= (-t / c.t2_us).exp() * (-t / (2.0 * c.t1_us)).exp();
    }
    b.est_error = 1.0 - fidelity;
    b.idle_us = (0..active as usize)
        .map(|i| (t - busy[i]).max(0.0))
        .collect();
    b
}

/// `b` with its crosstalk error: that of `seq` as written, when the profile has
/// crosstalk.
pub fn with_crosstalk(mut b: Budget, seq: &Sequence, profile: &Profile) -> Budget {
    b.crosstalk_error = crate::native::crosstalk::present(profile)
        .then(|| crate::native::crosstalk::stray_error(seq, profile));
    b
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
    /// The open layer: measurements or light shifts, its ions, its start.
    layer: Option<(bool, Vec<u32>, f64)>,
}

impl Clock {
    fn new(profile: &Profile) -> Clock {
        Clock {
            parallel_light_shifts: profile.capabilities.parallel_light_shifts,
            now: 0.0,
            layer: None,
        }
    }

    /// Places `op`, taking `dt` microseconds; returns its slot.
    fn place(&mut self, op: &NativeOp, dt: f64) -> Slot {
        let layered = match *op {
            NativeOp::LightShift { ion, .. } if self.parallel_light_shifts => Some((false, ion)),
            NativeOp::Measure { ion, .. } => Some((true, ion)),
            _ => None,
        };
        match (layered, &mut self.layer) {
            (Some((kind, ion)), Some((open, ions, start)))
                if *open == kind && !ions.contains(&ion) =>
            {
                ions.push(ion);
                self.now = self.now.max(*start + dt);
                return Slot {
                    start_us: *start,
                    duration_us: dt,
                };
            }
            (Some((kind, ion)), _) => self.layer = Some((kind, vec![ion], self.now)),
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
    let mut clock = Clock::new(profile);
    seq.steps
        .iter()
        .map(|step| clock.place(&step.op, cost_of(&profile.durations_us, &step.op)))
        .collect()
}
