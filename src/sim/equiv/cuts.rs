//! Cutting programs at measurements, resets and conditioned blocks, and matching the
//! cuts of two programs exactly.
//!
//! Invariant: two programs pass [`match_cuts`] only when every cut before the final
//! run of measurements is the same operation on the same qubit, bit and condition,
//! and the final runs measure the same set of (qubit, bit) pairs with the same last
//! writer of every bit. Only inside a final run may measurements be reordered: they
//! commute, and nothing after them can observe their order.

use crate::circuit::Condition;
use crate::sim::program::{Item, Kernel, Program};

#[derive(Debug, Clone, PartialEq)]
pub(super) enum Seg {
    Unitary(Vec<Kernel>),
    Measure {
        q: usize,
        clbit: u32,
    },
    Reset {
        q: usize,
    },
    Conditioned {
        condition: Condition,
        body: Vec<Kernel>,
    },
}

/// Cuts a program into alternating unitary segments and cuts: `U B U B ... U`.
pub(super) fn segments(p: &Program) -> Vec<Seg> {
    segments_of(p.items.iter())
}

/// [`segments`] of `p` with its terminal measurements moved last
/// ([`crate::circuit::defer`]), or `None` when they are last already. A compile may
/// gather them so (one readout slot), and a sequence cannot always show that it
/// could: its collective pulses touch every ion.
pub(super) fn segments_measured_last(p: &Program) -> Option<Vec<Seg>> {
    use crate::circuit::defer::{order, Access};
    let ops: Vec<Access> = p
        .items
        .iter()
        .map(|item| match item {
            Item::Unitary(k) => Access::Touch(k.qubits()),
            Item::Conditioned { kernel, .. } => Access::Conditioned(kernel.qubits()),
            Item::Measure { q, clbit } => Access::Measure {
                qubit: *q,
                clbit: *clbit,
            },
            Item::Reset { q } => Access::Touch(vec![*q]),
        })
        .collect();
    let idx = order(&ops)?;
    Some(segments_of(idx.into_iter().map(|i| &p.items[i])))
}

fn segments_of<'a>(items: impl Iterator<Item = &'a Item>) -> Vec<Seg> {
    let mut out = vec![Seg::Unitary(Vec::new())];
    let open_unitary = |out: &mut Vec<Seg>| {
        if !matches!(out.last(), Some(Seg::Unitary(_))) {
            out.push(Seg::Unitary(Vec::new()));
        }
    };
    for item in items {
        match item {
            Item::Unitary(k) => match out.last_mut() {
                Some(Seg::Unitary(v)) => v.push(k.clone()),
                _ => out.push(Seg::Unitary(vec![k.clone()])),
            },
            Item::Conditioned { condition, kernel } => {
                if let Some(Seg::Conditioned { condition: c, body }) = out.last_mut() {
                    if c == condition {
                        body.push(kernel.clone());
                        continue;
                    }
                }
                open_unitary(&mut out);
                out.push(Seg::Conditioned {
                    condition: condition.clone(),
                    body: vec![kernel.clone()],
                });
            }
            Item::Measure { q, clbit } => {
                open_unitary(&mut out);
                out.push(Seg::Measure {
                    q: *q,
                    clbit: *clbit,
                });
            }
            Item::Reset { q } => {
                open_unitary(&mut out);
                out.push(Seg::Reset { q: *q });
            }
        }
    }
    open_unitary(&mut out);
    out
}

/// The index of the first measurement of the final run: the longest tail of
/// measurements with no operation between them. `segs.len()` when there is none.
/// The segment before it is always a unitary one (possibly empty).
pub(super) fn final_run_start(segs: &[Seg]) -> usize {
    let mut start = segs.len();
    for (i, s) in segs.iter().enumerate().rev() {
        match s {
            Seg::Measure { .. } => start = i,
            Seg::Unitary(v) if v.is_empty() => {}
            _ => break,
        }
    }
    start
}

/// The (qubit, bit) pairs of a final run, in program order.
pub(super) fn final_pairs(run: &[Seg]) -> Vec<(usize, u32)> {
    run.iter()
        .filter_map(|s| match s {
            Seg::Measure { q, clbit } => Some((*q, *clbit)),
            _ => None,
        })
        .collect()
}

/// How two programs' cuts line up: the unitary segments to compare, in order, with
/// the index of the one just before the final measurements; or why they differ.
pub(super) struct Matched<'a> {
    /// Pairs of bodies, each with the cut number (1-based) it follows.
    pub bodies: Vec<(usize, &'a [Kernel], &'a [Kernel])>,
    /// The position in `bodies` of the unitary just before the final measurements,
    /// when there are final measurements.
    pub before_final: Option<usize>,
    /// The qubits the final run measures.
    pub measured: Vec<usize>,
}

/// Matches the cuts of two cut programs. `Err` says how they differ.
pub(super) fn match_cuts<'a>(sa: &'a [Seg], sb: &'a [Seg]) -> Result<Matched<'a>, String> {
    let (fa, fb) = (final_run_start(sa), final_run_start(sb));
    if fa != fb {
        let cuts = |f: usize| f / 2;
        return Err(format!(
            "the first program has {} measurement(s), reset(s) or conditioned block(s) before its final measurements, the second {}",
            cuts(fa),
            cuts(fb)
        ));
    }
    let mut bodies = Vec::new();
    for (i, (x, y)) in sa[..fa].iter().zip(&sb[..fb]).enumerate() {
        match (x, y) {
            (Seg::Unitary(p), Seg::Unitary(q)) => bodies.push((i / 2, p.as_slice(), q.as_slice())),
            (
                Seg::Conditioned {
                    condition: c1,
                    body: p,
                },
                Seg::Conditioned {
                    condition: c2,
                    body: q,
                },
            ) if c1 == c2 => bodies.push((i / 2 + 1, p.as_slice(), q.as_slice())),
            (Seg::Measure { q: q1, clbit: c1 }, Seg::Measure { q: q2, clbit: c2 })
                if q1 == q2 && c1 == c2 => {}
            (Seg::Reset { q: q1 }, Seg::Reset { q: q2 }) if q1 == q2 => {}
            _ => {
                return Err(format!(
                    "cut {} differs: {} against {}",
                    i / 2 + 1,
                    describe(x),
                    describe(y)
                ))
            }
        }
    }
    let (pa, pb) = (final_pairs(&sa[fa..]), final_pairs(&sb[fb..]));
    if let Some(why) = final_runs_differ(&pa, &pb) {
        return Err(why);
    }
    let mut measured: Vec<usize> = pa.iter().map(|p| p.0).collect();
    measured.sort_unstable();
    measured.dedup();
    Ok(Matched {
        before_final: (fa < sa.len()).then(|| bodies.len() - 1),
        bodies,
        measured,
    })
}

/// Why two final runs of measurements differ, if they do.
fn final_runs_differ(pa: &[(usize, u32)], pb: &[(usize, u32)]) -> Option<String> {
    let set = |p: &[(usize, u32)]| {
        let mut v = p.to_vec();
        v.sort_unstable();
        v.dedup();
        v
    };
    let (sa, sb) = (set(pa), set(pb));
    if sa != sb {
        let only = |x: &[(usize, u32)], y: &[(usize, u32)]| {
            x.iter()
                .find(|p| y.binary_search(p).is_err())
                .map(|(q, c)| format!("qubit {q} into bit {c}"))
        };
        let detail = only(&sa, &sb)
            .map(|m| format!("the first program measures {m}, the second does not"))
            .or_else(|| {
                only(&sb, &sa)
                    .map(|m| format!("the second program measures {m}, the first does not"))
            })
            .unwrap_or_default();
        return Some(format!("the final measurements differ: {detail}"));
    }
    // A bit written twice keeps the last outcome: its last writer must agree.
    let last = |p: &[(usize, u32)]| {
        let mut m = std::collections::BTreeMap::new();
        for &(q, c) in p {
            m.insert(c, q);
        }
        m
    };
    let (la, lb) = (last(pa), last(pb));
    la.iter().find(|(c, q)| lb.get(c) != Some(q)).map(|(c, q)| {
        format!(
            "the final measurements differ: bit {c} last holds qubit {q} in the first program, qubit {} in the second",
            lb[c]
        )
    })
}

fn describe(s: &Seg) -> String {
    match s {
        Seg::Unitary(_) => "gates".into(),
        Seg::Measure { q, clbit } => format!("measure of qubit {q} into bit {clbit}"),
        Seg::Reset { q } => format!("reset of qubit {q}"),
        Seg::Conditioned { condition, .. } => {
            format!(
                "operations conditioned on register #{} == {}",
                condition.creg, condition.value
            )
        }
    }
}
