//! Light-shift crosstalk: an addressed light shift of angle `theta` on ion `j` also
//! shifts ion `i` by `C_ij theta`, with `C = I + X` and `X` from the profile's
//! `[crosstalk]` section (nearest neighbours, all others, or a full matrix;
//! docs/device-profile.md). Light shifts are Z rotations and commute, so the effect
//! of a pulse is exact: `L_j(theta)` runs as `prod_i L_i(C_ij theta)`.
//!
//! - [`apply`]: the sequence as the machine runs it, to simulate and check.
//! - [`compensate`]: every layer of light shifts (a run of consecutive light shifts
//!   under one condition, or none, not crossing a sync point) commanded with `theta_cmd` solving
//!   `C theta_cmd = theta_target` (nalgebra's LU), so that under crosstalk the layer
//!   is what was meant.
//! - [`stray_error`]: the error model of what crosstalk leaves: each layer's
//!   residual `r = C theta_cmd - theta_meant` rotates ion `i` by `r_i` about Z, a
//!   gate fidelity of `cos^2(r_i / 2)`; the error is one minus the product.
//!
//! Invariant: `apply(compensate(s))` has, layer by layer, the light shifts of `s`
//! up to commands below [`PRUNE`] radians (checked by the statevector checker in
//! tests/crosstalk.rs).

use super::profile::Profile;
use super::{NativeOp, Sequence, Step, SyncPoint};
use nalgebra::{DMatrix, DVector};

/// Commands smaller than this (radians) are left out of a compensated layer.
pub const PRUNE: f64 = 1e-13;

/// Whether the profile has any crosstalk.
pub fn present(profile: &Profile) -> bool {
    let c = &profile.crosstalk;
    c.nearest.is_some_and(|x| x != 0.0)
        || c.far.is_some_and(|x| x != 0.0)
        || c.matrix
            .as_ref()
            .is_some_and(|m| m.iter().flatten().any(|x| *x != 0.0))
}

/// `C = I + X` on `n` ions.
pub fn matrix(profile: &Profile, n: usize) -> DMatrix<f64> {
    DMatrix::from_fn(
        n,
        n,
        |i, j| {
            if i == j {
                1.0
            } else {
                profile.crosstalk(i, j)
            }
        },
    )
}

/// Maps sync points through a rewrite that turned step `k` into the steps
/// `starts[k]..starts[k + 1]`.
fn remap(sync: &[SyncPoint], starts: &[usize]) -> Vec<SyncPoint> {
    sync.iter()
        .map(|s| SyncPoint {
            instrs: s.instrs,
            steps: starts[s.steps],
        })
        .collect()
}

/// The sequence as it runs under crosstalk, and the sync points moved with it.
/// Each layer of light shifts (they commute) becomes one light shift per ion with
/// its effective angle `(C theta)_i`; effective angles below [`PRUNE`] radians (what
/// floating-point cancellation leaves of a compensated layer) are left out, which
/// moves the unitary by less than `PRUNE / 2` per ion and layer, far below the
/// checker's rounding floor.
pub fn apply(seq: &Sequence, profile: &Profile, sync: &[SyncPoint]) -> (Sequence, Vec<SyncPoint>) {
    let c = matrix(profile, seq.n_ions as usize);
    match relayer(seq, sync, |theta| {
        Ok::<_, std::convert::Infallible>(&c * theta)
    }) {
        Ok(out) => out,
        Err(never) => match never {},
    }
}

/// `seq` with each layer of light shifts replaced by one light shift per ion of the
/// angles `angles(theta)` gives for the layer's angles `theta` (those below
/// [`PRUNE`] left out, the layer's condition kept), and the sync points and
/// checkpoints moved with it.
fn relayer<E>(
    seq: &Sequence,
    sync: &[SyncPoint],
    mut angles: impl FnMut(&DVector<f64>) -> Result<DVector<f64>, E>,
) -> Result<(Sequence, Vec<SyncPoint>), E> {
    let n = seq.n_ions as usize;
    let mut steps = Vec::with_capacity(seq.steps.len());
    // Step k of `seq` becomes the steps from starts[k] on.
    let mut starts = vec![0usize; seq.steps.len() + 1];
    let mut next = 0;
    let mut copy_to = |end: usize, next: &mut usize, steps: &mut Vec<Step>| {
        for k in *next..end {
            starts[k] = steps.len();
            steps.push(seq.steps[k].clone());
        }
        *next = end;
    };
    let mut layer_starts = Vec::new();
    for range in layers(seq, sync) {
        copy_to(range.start, &mut next, &mut steps);
        layer_starts.push((range.clone(), steps.len()));
        let theta = angles(&layer_angles(seq, range.clone(), n))?;
        let condition = &seq.steps[range.start].condition;
        for (ion, t) in theta.iter().enumerate() {
            if t.abs() >= PRUNE {
                steps.push(Step {
                    op: NativeOp::LightShift {
                        ion: ion as u32,
                        theta: *t,
                    },
                    condition: condition.clone(),
                });
            }
        }
        next = range.end;
    }
    copy_to(seq.steps.len(), &mut next, &mut steps);
    // Every step of a layer maps to where the layer's new shifts begin.
    for (range, at) in layer_starts {
        for k in range {
            starts[k] = at;
        }
    }
    starts[seq.steps.len()] = steps.len();
    let out = Sequence {
        steps,
        checkpoints: seq.checkpoints.iter().map(|&c| starts[c]).collect(),
        trace: remap(&seq.trace, &starts),
        ..seq.clone()
    };
    Ok((out, remap(sync, &starts)))
}

/// The layers of `seq`: maximal runs of consecutive light shifts under the same
/// condition (or none) that do not cross a sync point, as step ranges.
fn layers(seq: &Sequence, sync: &[SyncPoint]) -> Vec<std::ops::Range<usize>> {
    let cut: std::collections::HashSet<usize> = sync.iter().map(|s| s.steps).collect();
    let mut out = Vec::new();
    let mut start: Option<usize> = None;
    for (k, step) in seq.steps.iter().enumerate() {
        let shift = matches!(step.op, NativeOp::LightShift { .. });
        let joins = start.is_some_and(|s| {
            shift && !cut.contains(&k) && seq.steps[s].condition == step.condition
        });
        if !joins {
            if let Some(s) = start.take() {
                out.push(s..k);
            }
            if shift {
                start = Some(k);
            }
        }
    }
    if let Some(s) = start {
        out.push(s..seq.steps.len());
    }
    out
}

/// The angles a layer commands, per ion.
fn layer_angles(seq: &Sequence, range: std::ops::Range<usize>, n: usize) -> DVector<f64> {
    let mut v = DVector::zeros(n);
    add_layer_angles(seq, range, &mut v);
    v
}

/// [`layer_angles`] into `v` (its length the ion count), replacing what it held.
fn add_layer_angles(seq: &Sequence, range: std::ops::Range<usize>, v: &mut DVector<f64>) {
    v.fill(0.0);
    for step in &seq.steps[range] {
        if let NativeOp::LightShift { ion, theta } = step.op {
            if (ion as usize) < v.len() {
                v[ion as usize] += theta;
            }
        }
    }
}

/// `cos^2(x / 2) = (1 + cos x) / 2`. Residuals are mostly small: below 0.1 rad the
/// Taylor series of `cos` to `x^8` is used, whose remainder (at most
/// `x^10 / 10! < 3e-17`) is below the rounding of `1 + cos x`; `cos` otherwise.
fn cos_squared_half(x: f64) -> f64 {
    if x.abs() < 0.1 {
        let y = x * x;
        let cos = 1.0 - y / 2.0 * (1.0 - y / 12.0 * (1.0 - y / 30.0 * (1.0 - y / 56.0)));
        (1.0 + cos) / 2.0
    } else {
        (x / 2.0).cos().powi(2)
    }
}

/// `1 - prod_i cos^2(r_i / 2)` accumulated over residuals.
struct Fidelity(f64);

impl Fidelity {
    fn add(&mut self, r: &DVector<f64>) {
        // cos(0) is exactly 1: ions the residual misses are skipped.
        for &x in r.iter().filter(|x| **x != 0.0) {
            self.0 = crate::native::budget::above_subnormal(self.0 * cos_squared_half(x));
        }
    }
    fn error(&self) -> f64 {
        1.0 - self.0
    }
}

/// The error crosstalk leaves in `seq` when its light shifts are meant as written.
pub fn stray_error(seq: &Sequence, profile: &Profile) -> f64 {
    let n = seq.n_ions as usize;
    use rayon::prelude::*;
    let c = matrix(profile, n);
    // Layers in parallel, each thread with its own buffers; the product of the
    // factors is the same up to rounding in any grouping.
    let kept: f64 = layers(seq, &[])
        .into_par_iter()
        .with_min_len(1024)
        .map_init(
            || (DVector::zeros(n), DVector::zeros(n)),
            |(theta, r), range| {
                add_layer_angles(seq, range, theta);
                residual(profile, &c, theta, r);
                let mut f = Fidelity(1.0);
                f.add(r);
                f.0
            },
        )
        .reduce(|| 1.0, |a, b| crate::native::budget::above_subnormal(a * b));
    Fidelity(kept).error()
}

/// `r = C theta - theta = X theta`. Without a full matrix in the profile, `X` is
/// `nearest` next to the diagonal and `far` elsewhere: `r_i = nearest * s_i + far *
/// (sum theta - theta_i - s_i)`, with `s_i` the neighbours' angles (linear in the
/// ions, where the product is quadratic).
fn residual(profile: &Profile, c: &DMatrix<f64>, theta: &DVector<f64>, r: &mut DVector<f64>) {
    let x = &profile.crosstalk;
    if x.matrix.is_some() {
        r.copy_from(theta);
        r.gemv(1.0, c, theta, -1.0);
        return;
    }
    let (near, far) = (x.nearest.unwrap_or(0.0), x.far.unwrap_or(0.0));
    let n = theta.len();
    let total = theta.sum();
    for i in 0..n {
        let left = if i > 0 { theta[i - 1] } else { 0.0 };
        let right = if i + 1 < n { theta[i + 1] } else { 0.0 };
        let s = left + right;
        r[i] = near * s + far * (total - theta[i] - s);
    }
}

/// The compensated sequence (each layer commanded with `C^-1 theta_target`), its
/// sync points, and the error its pruned commands leave under crosstalk. Fails when
/// `C` is singular (a crosstalk of 100% or more).
pub fn compensate(
    seq: &Sequence,
    profile: &Profile,
    sync: &[SyncPoint],
) -> Result<(Sequence, Vec<SyncPoint>, f64), String> {
    let n = seq.n_ions as usize;
    let c = matrix(profile, n);
    let lu = c.clone().lu();
    if !lu.is_invertible() {
        return Err(
            "the crosstalk matrix is singular: no light-shift commands can compensate it".into(),
        );
    }
    let mut f = Fidelity(1.0);
    let (out, sync) = relayer(seq, sync, |target| {
        let cmd = lu
            .solve(target)
            .ok_or("the crosstalk matrix is singular")?
            .map(|x| if x.abs() < PRUNE { 0.0 } else { x });
        f.add(&(&c * &cmd - target));
        Ok::<_, String>(cmd)
    })?;
    Ok((out, sync, f.error()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    /// The linear-time residual of a nearest/far profile against the product
    /// `C theta - theta` with the full matrix (nalgebra), and with a full matrix in
    /// the profile, on random layers (some ions unshifted).
    #[test]
    fn the_residual_is_the_crosstalk_product() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        for n in [1, 2, 3, 7, 40] {
            let mut p = Profile::demo().with_ions(n as u32);
            p.crosstalk.nearest = Some(0.008);
            p.crosstalk.far = Some(0.001);
            let c = matrix(&p, n);
            let mut full = p.clone();
            full.crosstalk.matrix = Some(
                (0..n)
                    .map(|i| {
                        (0..n)
                            .map(|j| {
                                if i == j {
                                    0.0
                                } else {
                                    rng.gen_range(0.0..0.02)
                                }
                            })
                            .collect()
                    })
                    .collect(),
            );
            let c_full = matrix(&full, n);
            for _ in 0..20 {
                let theta = DVector::from_fn(n, |_, _| {
                    if rng.gen_bool(0.5) {
                        rng.gen_range(-3.2..3.2)
                    } else {
                        0.0
                    }
                });
                for (profile, c) in [(&p, &c), (&full, &c_full)] {
                    let mut r = DVector::zeros(n);
                    residual(profile, c, &theta, &mut r);
                    let want = c * &theta - &theta;
                    // The product rounds (theta_i + x) - theta_i: about 1e-15 per term.
                    assert!((r - want).amax() < 1e-13, "{n} ions");
                }
            }
        }
    }

    /// The series for small residuals against `cos` (libm), across its switch.
    #[test]
    fn the_cosine_series_agrees_with_cos() {
        for k in -2000..=2000 {
            let x = k as f64 * 1e-4 + 1e-7;
            let want = (x / 2.0).cos().powi(2);
            assert!((cos_squared_half(x) - want).abs() < 4e-16, "{x}");
        }
    }
}
