//! Moving terminal measurements last (`tutti::circuit::defer`) keeps the outcome
//! distribution of every classical bit, checked against an independent branching
//! simulation: each measurement splits the state into its two projections (the
//! Born rule and the projective measurement postulate, Nielsen and Chuang, section
//! 2.2.3), gate matrices written out from Nielsen and Chuang's definitions with
//! nalgebra, conditions read from the bits measured so far.

mod common;

use nalgebra::DVector;
use num_complex::Complex64 as C;
use rand::{Rng, SeedableRng};
use std::collections::BTreeMap;
use tutti::circuit::defer::measurements_last;

const N: usize = 3;

/// One operation of the small language the random programs use.
#[derive(Clone, Debug)]
enum Step {
    H(usize),
    Ry(usize, f64),
    Rz(usize, f64),
    Cx(usize, usize),
    Measure(usize, usize),
    Reset(usize),
    /// `if(c==v) x q;` on the whole 3-bit register.
    IfX(u64, usize),
}

fn text(steps: &[Step]) -> String {
    let body: String = steps
        .iter()
        .map(|s| match s {
            Step::H(q) => format!("h q[{q}];\n"),
            Step::Ry(q, t) => format!("ry({t}) q[{q}];\n"),
            Step::Rz(q, t) => format!("rz({t}) q[{q}];\n"),
            Step::Cx(a, b) => format!("cx q[{a}],q[{b}];\n"),
            Step::Measure(q, b) => format!("measure q[{q}] -> c[{b}];\n"),
            Step::Reset(q) => format!("reset q[{q}];\n"),
            Step::IfX(v, q) => format!("if(c=={v}) x q[{q}];\n"),
        })
        .collect();
    common::qasm(N, &body)
}

/// The circuit read back as steps (after `measurements_last` reordered it).
fn steps_of(c: &tutti::circuit::Circuit) -> Vec<String> {
    c.instrs.iter().map(|i| format!("{i:?}")).collect()
}

fn one_qubit(state: &mut DVector<C>, q: usize, m: [[C; 2]; 2]) {
    let bit = 1 << q;
    for i in 0..state.len() {
        if i & bit == 0 {
            let (a, b) = (state[i], state[i | bit]);
            state[i] = m[0][0] * a + m[0][1] * b;
            state[i | bit] = m[1][0] * a + m[1][1] * b;
        }
    }
}

/// The two projections of `st` on qubit `q` (unnormalised), with their outcomes;
/// a projection of zero norm is left out.
fn projections(st: &DVector<C>, q: usize) -> Vec<(DVector<C>, usize)> {
    (0..2usize)
        .map(|outcome| {
            let mut part = st.clone();
            for i in 0..part.len() {
                if (i >> q) & 1 != outcome {
                    part[i] = C::new(0.0, 0.0);
                }
            }
            (part, outcome)
        })
        .filter(|(part, _)| part.norm_squared() > 1e-30)
        .collect()
}

/// The distribution of the final 3-bit register.
fn distribution(steps: &[Step]) -> BTreeMap<u64, f64> {
    let mut zero = DVector::from_element(1 << N, C::new(0.0, 0.0));
    zero[0] = C::new(1.0, 0.0);
    // Branches: unnormalised state and the register so far.
    let mut branches = vec![(zero, 0u64)];
    let (o, l) = (C::new(0.0, 0.0), C::new(1.0, 0.0));
    let s = std::f64::consts::FRAC_1_SQRT_2;
    for step in steps {
        let mut next = Vec::new();
        for (mut st, reg) in branches {
            match *step {
                Step::H(q) => one_qubit(&mut st, q, [[l * s, l * s], [l * s, -l * s]]),
                Step::Ry(q, t) => {
                    let (c, sn) = ((t / 2.0).cos(), (t / 2.0).sin());
                    one_qubit(&mut st, q, [[l * c, -l * sn], [l * sn, l * c]])
                }
                Step::Rz(q, t) => one_qubit(
                    &mut st,
                    q,
                    [
                        [C::from_polar(1.0, -t / 2.0), o],
                        [o, C::from_polar(1.0, t / 2.0)],
                    ],
                ),
                Step::Cx(a, b) => {
                    let mut out = st.clone();
                    for i in 0..st.len() {
                        if i & (1 << a) != 0 {
                            out[i] = st[i ^ (1 << b)];
                        }
                    }
                    st = out;
                }
                Step::IfX(v, q) => {
                    if reg == v {
                        one_qubit(&mut st, q, [[o, l], [l, o]]);
                    }
                }
                Step::Measure(q, b) => {
                    for (part, outcome) in projections(&st, q) {
                        next.push((part, (reg & !(1 << b)) | ((outcome as u64) << b)));
                    }
                    continue;
                }
                Step::Reset(q) => {
                    for (mut part, outcome) in projections(&st, q) {
                        if outcome == 1 {
                            one_qubit(&mut part, q, [[o, l], [l, o]]);
                        }
                        next.push((part, reg));
                    }
                    continue;
                }
            }
            next.push((st, reg));
        }
        branches = next;
    }
    let mut dist = BTreeMap::new();
    for (st, reg) in branches {
        *dist.entry(reg).or_insert(0.0) += st.norm_squared();
    }
    dist
}

/// The steps of a circuit in the order `measurements_last` gives, matched back by
/// their printed form to the random program's steps.
fn reordered(steps: &[Step]) -> Option<Vec<Step>> {
    let c = common::read_ok_str(&text(steps));
    let printed = steps_of(&c);
    let (moved, _) = measurements_last(&c)?;
    let mut used = vec![false; steps.len()];
    let out = steps_of(&moved)
        .iter()
        .map(|p| {
            let k = (0..steps.len())
                .find(|&k| !used[k] && printed[k] == *p)
                .expect("every instruction once");
            used[k] = true;
            steps[k].clone()
        })
        .collect();
    Some(out)
}

fn random_program(rng: &mut impl Rng) -> Vec<Step> {
    let len = rng.gen_range(4..14);
    (0..len)
        .map(|_| {
            let q = rng.gen_range(0..N);
            match rng.gen_range(0..10) {
                0 | 1 => Step::H(q),
                2 => Step::Ry(q, rng.gen_range(-3.0..3.0)),
                3 => Step::Rz(q, rng.gen_range(-3.0..3.0)),
                4 => Step::Cx(q, (q + rng.gen_range(1..N)) % N),
                5..=7 => Step::Measure(q, rng.gen_range(0..N)),
                8 => Step::Reset(q),
                _ => Step::IfX(rng.gen_range(0..4), q),
            }
        })
        .collect()
}

fn same(a: &BTreeMap<u64, f64>, b: &BTreeMap<u64, f64>) -> bool {
    let keys: std::collections::BTreeSet<_> = a.keys().chain(b.keys()).collect();
    keys.into_iter().all(|k| {
        (a.get(k).copied().unwrap_or(0.0) - b.get(k).copied().unwrap_or(0.0)).abs() < 1e-12
    })
}

#[test]
fn moving_terminal_measurements_last_keeps_every_outcome_distribution() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(0x5EED_2026);
    let mut moved = 0;
    for _ in 0..3000 {
        let steps = random_program(&mut rng);
        let Some(r) = reordered(&steps) else {
            continue;
        };
        moved += 1;
        let (a, b) = (distribution(&steps), distribution(&r));
        assert!(same(&a, &b), "{steps:?}\n{r:?}\n{a:?}\n{b:?}");
    }
    assert!(
        moved > 300,
        "only {moved} programs had a measurement to move"
    );
}

/// The simulation above tells apart the moves the rule refuses: past a gate on the
/// measured qubit, and past a condition on the register.
#[test]
fn the_branching_simulation_sees_the_moves_the_rule_refuses() {
    let gate = [
        Step::H(0),
        Step::Measure(0, 0),
        Step::H(0),
        Step::Measure(0, 1),
    ];
    let bad = [
        Step::H(0),
        Step::H(0),
        Step::Measure(0, 1),
        Step::Measure(0, 0),
    ];
    assert!(!same(&distribution(&gate), &distribution(&bad)));
    assert!(reordered(&gate).is_none());
    let cond = [
        Step::H(0),
        Step::Measure(0, 0),
        Step::IfX(1, 1),
        Step::Measure(1, 1),
    ];
    let bad = [
        Step::H(0),
        Step::IfX(1, 1),
        Step::Measure(0, 0),
        Step::Measure(1, 1),
    ];
    assert!(!same(&distribution(&cond), &distribution(&bad)));
    assert!(reordered(&cond).is_none());
}

/// The checker's new freedom (matching cuts with terminal measurements moved last)
/// never calls two programs equal whose outcome distributions differ: random
/// programs against copies with one measurement moved to a random later place,
/// judged by the checker and by the branching simulation above.
#[test]
fn the_checker_never_accepts_a_move_that_changes_the_outcomes() {
    use tutti::sim::{check, CheckConfig};
    let mut rng = rand::rngs::StdRng::seed_from_u64(0xC0FF_EE26);
    let (mut accepted, mut refused) = (0, 0);
    for _ in 0..1500 {
        let steps = random_program(&mut rng);
        let measures: Vec<usize> = (0..steps.len())
            .filter(|&k| matches!(steps[k], Step::Measure(..)))
            .collect();
        if measures.is_empty() {
            continue;
        }
        let from = measures[rng.gen_range(0..measures.len())];
        let to = rng.gen_range(from..steps.len());
        if to == from {
            continue;
        }
        let mut moved = steps.clone();
        let m = moved.remove(from);
        moved.insert(to, m);
        let program =
            |s: &[Step]| tutti::sim::Program::from_circuit(&common::read_ok_str(&text(s))).unwrap();
        let v = check(&program(&steps), &program(&moved), &CheckConfig::default()).unwrap();
        let same = same(&distribution(&steps), &distribution(&moved));
        if v.equivalent {
            assert!(
                same,
                "accepted, yet the outcomes differ:\n{steps:?}\n{moved:?}"
            );
            accepted += 1;
        } else {
            refused += 1;
        }
    }
    assert!(
        accepted > 100 && refused > 100,
        "{accepted} accepted, {refused} refused"
    );
}
