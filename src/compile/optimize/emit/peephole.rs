//! The peephole after emission: adjacent collective rotations merged into one (with
//! a free frame change), and each run of light shifts and frame changes rewritten
//! with the common frame phase that leaves the fewest light shifts.

use super::*;

/// Peephole rewrites (see the module header), repeated while a pass can enable
/// another: merging leaves no two collective rotations side by side, and only a run
/// of light shifts and frame changes rewritten to nothing can bring two together
/// again (a merged rotation that vanishes leaves a frame change, which the rephasing
/// after it joins to the runs around it).
pub fn peephole(ops: Vec<NativeOp>, n: u32) -> Vec<NativeOp> {
    peephole_passes(ops, n).0
}

/// [`peephole`], and how many passes it made (for tests of its stopping rule).
pub fn peephole_passes(mut ops: Vec<NativeOp>, n: u32) -> (Vec<NativeOp>, usize) {
    let mut passes = 0;
    loop {
        let before = ops.len();
        ops = merge_collective(ops);
        let emptied;
        (ops, emptied) = rephase_z_runs(ops, n);
        passes += 1;
        if !emptied || ops.len() >= before {
            return (ops, passes);
        }
    }
}

/// Adjacent collective rotations become one rotation after a frame change:
/// `M = Rz(b) Ry(g) Rz(d) = R(g, b + pi/2) Rz(b + d)` (up to phase).
pub(super) fn merge_collective(mut ops: Vec<NativeOp>) -> Vec<NativeOp> {
    // Rewritten in place: a run of rotations becomes at most two operations, so the
    // write cursor `w` never passes the read cursor.
    let mut w = 0;
    let flush = |ops: &mut Vec<NativeOp>, w: &mut usize, m: Mat2| {
        let (_, b, g, d) = zyz(&m);
        let z = wrap(b + d);
        if z.abs() > EPS {
            ops[*w] = NativeOp::VirtualZ { theta: z };
            *w += 1;
        }
        if g.abs() > EPS {
            ops[*w] = NativeOp::Collective {
                theta: g,
                phi: wrap(b + FRAC_PI_2),
            };
            *w += 1;
        }
    };
    let mut run: Option<Mat2> = None;
    let mut count = 0;
    let mut first = None;
    for r in 0..ops.len() {
        let op = ops[r];
        if let NativeOp::Collective { theta, phi } = op {
            let rot = crate::native::rotation(theta, phi);
            run = Some(match run {
                Some(m) => crate::compile::optimize::dag::mul(&rot, &m),
                None => rot,
            });
            count += 1;
            first = Some(op);
            continue;
        }
        if let Some(m) = run.take() {
            if count == 1 {
                ops[w] = first.expect("one rotation");
                w += 1;
            } else {
                flush(&mut ops, &mut w, m);
            }
            count = 0;
        }
        ops[w] = op;
        w += 1;
    }
    if let Some(m) = run {
        if count == 1 {
            ops[w] = first.expect("one rotation");
            w += 1;
        } else {
            flush(&mut ops, &mut w, m);
        }
    }
    ops.truncate(w);
    ops
}

/// Each run of light shifts and frame changes (they commute) becomes the frame
/// change that the most ions share and a light shift on each other ion. Runs while
/// an ion is hidden are left alone. Cost linear in the run, plus the ion count only
/// when the chosen frame differs from the run's own. Also says whether a run of
/// several operations was rewritten to none.
pub(super) fn rephase_z_runs(ops: Vec<NativeOp>, n: u32) -> (Vec<NativeOp>, bool) {
    rephase(ops, n, true)
}

/// [`rephase_z_runs`], with runs that [`keeps_its_frame`] copied without the
/// rewrite's work when `shortcut` (its tests compare both).
fn rephase(mut ops: Vec<NativeOp>, n: u32, shortcut: bool) -> (Vec<NativeOp>, bool) {
    let n = n as usize;
    // Rewritten in place: a run is rewritten only to as many operations or fewer,
    // so the write cursor `w` never passes the run being read.
    let mut w = 0;
    let mut hidden = 0usize;
    let mut angle = vec![0.0f64; n];
    let mut seen = vec![false; n];
    let mut touched: Vec<usize> = Vec::new();
    let mut values: Vec<f64> = Vec::new();
    let mut rewritten: Vec<NativeOp> = Vec::new();
    let mut emptied = false;
    let is_z =
        |op: &NativeOp| matches!(op, NativeOp::LightShift { .. } | NativeOp::VirtualZ { .. });
    let mut i = 0;
    while i < ops.len() {
        if hidden > 0 || !is_z(&ops[i]) {
            match ops[i] {
                NativeOp::Hide { .. } => hidden += 1,
                NativeOp::Unhide { .. } => hidden = hidden.saturating_sub(1),
                _ => {}
            }
            ops[w] = ops[i];
            w += 1;
            i += 1;
            continue;
        }
        let start = i;
        while i < ops.len() && is_z(&ops[i]) {
            i += 1;
        }
        let run = &ops[start..i];
        if run.len() == 1 || (shortcut && keeps_its_frame(run, n)) {
            ops.copy_within(start..i, w);
            w += i - start;
            continue;
        }
        let mut frame = 0.0;
        touched.clear();
        for op in run {
            match *op {
                NativeOp::LightShift { ion, theta } => {
                    let q = ion as usize;
                    if !seen[q] {
                        seen[q] = true;
                        angle[q] = 0.0;
                        touched.push(q);
                    }
                    angle[q] += theta;
                }
                NativeOp::VirtualZ { theta } => frame += theta,
                _ => unreachable!("z run"),
            }
        }
        touched.sort_unstable();
        let untouched = n - touched.len();
        // Candidate frames: the run's own (untouched ions need nothing), or the total
        // of some touched ion; counted exactly.
        let same = |x: f64, y: f64| wrap(x - y).abs() <= 1e-12;
        values.clear();
        values.push(wrap(frame));
        for &q in &touched {
            let v = wrap(angle[q] + frame);
            if !values.iter().any(|&x| same(x, v)) {
                values.push(v);
            }
        }
        let count = |g: f64| {
            touched
                .iter()
                .filter(|&&q| same(angle[q] + frame, g))
                .count()
                + if same(frame, g) { untouched } else { 0 }
        };
        let mut g = values[0];
        let mut best = count(g);
        for &v in &values[1..] {
            let c = count(v);
            if c > best || (c == best && v.abs() < g.abs()) {
                g = v;
                best = c;
            }
        }
        rewritten.clear();
        if wrap(g).abs() > EPS {
            rewritten.push(NativeOp::VirtualZ { theta: wrap(g) });
        }
        if same(frame, g) {
            for &q in &touched {
                push_shift(&mut rewritten, q as u32, angle[q] + frame - g);
            }
        } else {
            for ion in 0..n {
                let total = if seen[ion] { angle[ion] } else { 0.0 };
                push_shift(&mut rewritten, ion as u32, total + frame - g);
            }
        }
        for &q in &touched {
            seen[q] = false;
        }
        if rewritten.len() <= run.len() {
            emptied |= rewritten.is_empty();
            ops[w..w + rewritten.len()].copy_from_slice(&rewritten);
            w += rewritten.len();
        } else {
            ops.copy_within(start..i, w);
            w += i - start;
        }
    }
    ops.truncate(w);
    (ops, emptied)
}

/// Whether the rewrite leaves `run` as it is, seen without the rewrite's work: light
/// shifts only (no frame change), on ions in increasing order (each once, in the
/// order the rewrite writes them), on fewer than half of the `n` ions. The run's own
/// frame (0) is then shared by every untouched ion, more than any other frame can
/// gather, so the rewrite keeps it and writes each shift back as it was (shifts are
/// already wrapped into (-pi, pi] when made).
fn keeps_its_frame(run: &[NativeOp], n: usize) -> bool {
    if 2 * run.len() >= n {
        return false;
    }
    let mut last: Option<u32> = None;
    run.iter().all(|op| match *op {
        NativeOp::LightShift { ion, theta } => {
            let ok = last.map_or(true, |l| ion > l) && theta == wrap(theta) && theta.abs() > EPS;
            last = Some(ion);
            ok
        }
        _ => false,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    #[test]
    fn the_shortcut_writes_what_the_rewrite_writes() {
        // Random lists of light shifts (flips of pi and other angles, ions in order
        // or not, repeated or not), frame changes and MS pulses between runs, on 3
        // to 40 ions: the rewrite with and without the shortcut agree exactly.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5e7);
        let mut short = 0;
        for round in 0..3000 {
            let n = rng.gen_range(3..=40u32);
            let mut ops = Vec::new();
            for _ in 0..rng.gen_range(1..6) {
                let len = rng.gen_range(1..=n as usize);
                let mut ions: Vec<u32> = (0..len).map(|_| rng.gen_range(0..n)).collect();
                if rng.gen_bool(0.7) {
                    ions.sort_unstable();
                    ions.dedup();
                }
                for ion in ions {
                    let theta = match rng.gen_range(0..4) {
                        0 => wrap(rng.gen_range(-7.0..7.0)),
                        1 => -PI,
                        _ => PI,
                    };
                    ops.push(NativeOp::LightShift { ion, theta });
                }
                if rng.gen_bool(0.1) {
                    ops.push(NativeOp::VirtualZ { theta: 0.4 });
                }
                ops.push(NativeOp::Ms {
                    theta: 0.3,
                    phi: 0.0,
                });
            }
            let runs_kept = ops
                .split(|op| matches!(op, NativeOp::Ms { .. }))
                .filter(|run| run.len() > 1 && keeps_its_frame(run, n as usize))
                .count();
            short += runs_kept;
            let fast = rephase(ops.clone(), n, true);
            let slow = rephase(ops, n, false);
            assert_eq!(fast, slow, "round {round}");
        }
        assert!(short > 500, "{short} runs took the shortcut");
    }
}
