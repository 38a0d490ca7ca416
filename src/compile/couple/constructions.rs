//! Constructions with a closed form: the Hadamard construction that isolates each
//! coupling (gate-set fact 6, the fallback), disjoint pairs in one layer (fact 7,
//! generalised to unequal weights), and idle ions decoupled at no extra area (fact 9).

use super::*;

/// The Hadamard construction (gate-set fact 6) for every non-zero coupling on its own:
/// `m` pulses of weight `|w|/m`, `m` the smallest Hadamard order `>= n - 1`.
pub fn hadamard_each(c: &Coupling) -> Synthesis {
    let n = c.n;
    let h = smallest_hadamard(n.saturating_sub(1).max(1));
    let m = h.len();
    let mut pulses = Vec::new();
    for i in 0..n {
        for j in i + 1..n {
            let w = c.get(i, j);
            if w == 0.0 {
                continue;
            }
            // i and j share column 0 (j with the coupling's sign); the others
            // take columns 1, 2, ... in turn.
            let mut col = vec![0usize; n];
            let mut next = 1;
            for (k, slot) in col.iter_mut().enumerate() {
                if k != i && k != j {
                    *slot = next;
                    next += 1;
                }
            }
            for row in h.iter() {
                let signs: Signs = (0..n)
                    .map(|k| {
                        let s = row[col[k]];
                        if k == j && w < 0.0 {
                            -s
                        } else {
                            s
                        }
                    })
                    .collect();
                pulses.push(Pulse {
                    signs,
                    weight: w.abs() / m as f64,
                });
            }
        }
    }
    let weight = c.w.iter().map(|w| w.abs()).sum();
    Synthesis {
        pulses,
        weight,
        lower_bound: c.max_abs(),
        method: Method::Hadamard,
    }
}

/// gate-set fact 7: when the coupled pairs are disjoint and all of weight `|w|`, one
/// Hadamard matrix of order `m >= pairs + others` gives every pair column `c_i`
/// (the second ion with the coupling's sign) and every other ion its own column;
/// its rows, each of weight `|w|/m`, realise the layer with total weight `|w|`.
/// `None` unless the coupling is such a layer.
pub fn matching(c: &Coupling) -> Option<Synthesis> {
    let n = c.n;
    let mut partner = vec![usize::MAX; n];
    let mut weight: Option<f64> = None;
    for i in 0..n {
        for j in i + 1..n {
            let w = c.get(i, j);
            if w == 0.0 {
                continue;
            }
            if partner[i] != usize::MAX || partner[j] != usize::MAX {
                return None;
            }
            match weight {
                Some(x) if (x - w.abs()).abs() > 1e-12 * x.max(1.0) => return None,
                _ => weight = Some(w.abs()),
            }
            partner[i] = j;
            partner[j] = i;
        }
    }
    let weight = weight?;
    // Columns: each pair one, each uncoupled ion one.
    let mut col = vec![usize::MAX; n];
    let mut sign = vec![1i8; n];
    let mut next = 0;
    for i in 0..n {
        if col[i] != usize::MAX {
            continue;
        }
        col[i] = next;
        if partner[i] != usize::MAX {
            let j = partner[i];
            col[j] = next;
            sign[j] = if c.get(i, j) < 0.0 { -1 } else { 1 };
        }
        next += 1;
    }
    let h = smallest_hadamard(next);
    let m = h.len();
    let pulses = h
        .iter()
        .map(|row| Pulse {
            signs: (0..n).map(|k| row[col[k]] * sign[k]).collect(),
            weight: weight / m as f64,
        })
        .collect();
    Some(Synthesis {
        pulses,
        weight,
        lower_bound: weight,
        method: Method::Matching,
    })
}

/// gate-set fact 7 generalised to disjoint pairs of different weights: with the
/// weights sorted, `|w_1| >= |w_2| >= ...`, level `l` couples pairs 1 to l equally
/// with weight `|w_l| - |w_{l+1}|` by fact 7 (the other ions idle); the total weight
/// is `|w_1|`, the largest coupling, which is also a lower bound (no pulse adds more
/// than its weight to one coupling): optimal. `None` unless the pairs are disjoint.
pub fn matching_layers(c: &Coupling) -> Option<Synthesis> {
    let n = c.n;
    let mut pairs: Vec<(usize, usize, f64)> = Vec::new();
    let mut used = vec![false; n];
    for i in 0..n {
        for j in i + 1..n {
            let w = c.get(i, j);
            if w == 0.0 {
                continue;
            }
            if used[i] || used[j] {
                return None;
            }
            used[i] = true;
            used[j] = true;
            pairs.push((i, j, w));
        }
    }
    if pairs.is_empty() {
        return None;
    }
    pairs.sort_by(|a, b| b.2.abs().total_cmp(&a.2.abs()));
    let mut pulses = Vec::new();
    for level in 0..pairs.len() {
        let here = pairs[level].2.abs();
        let next = pairs.get(level + 1).map_or(0.0, |p| p.2.abs());
        let step = here - next;
        if step <= 0.0 {
            continue;
        }
        let mut layer = Coupling::zero(n);
        for &(i, j, w) in &pairs[..=level] {
            layer.set(i, j, step * w.signum());
        }
        pulses.extend(matching(&layer).expect("equal disjoint pairs").pulses);
    }
    let weight = pairs[0].2.abs();
    Some(Synthesis {
        pulses,
        weight,
        lower_bound: weight,
        method: Method::Matching,
    })
}

/// gate-set fact 9: the pulses of `s` (on the ions `active`, in that order) extended to
/// `n` ions so that every coupling touching another ion is zero, at unchanged total
/// weight: each pulse becomes `m` pulses of a `m`-row Hadamard matrix (`m >= r + 1`
/// for the `r` other ions), active ions on column 0 times the pulse's signs, the
/// others on columns 1 to r.
pub fn pad_idle(s: &Synthesis, active: &[usize], n: usize) -> Vec<Pulse> {
    let r = n - active.len();
    let mut is_active = vec![usize::MAX; n];
    for (k, &ion) in active.iter().enumerate() {
        is_active[ion] = k;
    }
    let mut other_col = vec![0usize; n];
    let mut next = 1;
    for ion in 0..n {
        if is_active[ion] == usize::MAX {
            other_col[ion] = next;
            next += 1;
        }
    }
    if r == 0 {
        return s
            .pulses
            .iter()
            .map(|p| Pulse {
                signs: (0..n).map(|ion| p.signs[is_active[ion]]).collect(),
                weight: p.weight,
            })
            .collect();
    }
    let h = smallest_hadamard(r + 1);
    let m = h.len();
    let mut out = Vec::with_capacity(s.pulses.len() * m);
    for p in &s.pulses {
        for row in h.iter() {
            let signs = (0..n)
                .map(|ion| match is_active[ion] {
                    usize::MAX => row[other_col[ion]],
                    k => row[0] * p.signs[k],
                })
                .collect();
            out.push(Pulse {
                signs,
                weight: p.weight / m as f64,
            });
        }
    }
    out
}
