//! An exact proof of difference on registers too large to simulate: ions held as
//! fixed fields.
//!
//! An ion `t` that, in both programs, is in an eigenstate of every interaction it
//! takes part in at the moment it takes part acts on its partners as a fixed sign:
//! on `|psi> (x) |e_t>` with `O_t |e_t> = l |e_t>` (`l = +-1`), a coupling
//! `exp(-i w O_t (x) P)` is `exp(-i w l P)` on the partners and leaves `t` as it was;
//! an MS pulse `exp(-i theta/4 (S + l)^2)` is, on the others, the same pulse, a
//! collective rotation by `theta l` about its axis and the phase `e^{-i theta l^2/4}`;
//! a control in a Z eigenstate is on or off. Whether `t` qualifies depends only on
//! its own single-qubit operations and on which operator each interaction puts on it
//! (module-level pass [`roles`]): so the eigenstate `e_t` it must start in is fixed
//! by its first interaction, pulled back through the operations before it, and
//! checked at every later one. The ions that do not qualify are simulated as a
//! statevector; the held ones cost two complex numbers each.
//!
//! A proof: for any input the outputs of two equal programs (up to a global phase
//! `c`) are equal, so `min_c ||(Q - cP) Psi||`, computed for a few inputs `Psi`, is a
//! lower bound on the distance `min_c ||Q - cP||` (operator norm). The inputs are a
//! Haar-random state of the simulated ions times the held ions' reference
//! eigenstates, and, for each held ion, the equal superposition (with eight relative
//! phases) of that input and the one with the ion in its other eigenstate: the
//! second finds couplings that cancel on the reference input (a spare ion's stray
//! coupling with another spare ion is a phase that only a superposition sees). The
//! difference vectors are formed amplitude by amplitude, never through a fidelity
//! (`sqrt(2 - 2|F|)` would turn rounding of 1e-16 into 1e-8). Where the state of a
//! held ion is an eigenstate only within rounding, the part left out (at most twice
//! its amplitude per interaction) is added to a slack that the bound must exceed.
//! (Derived for this project.)
//!
//! Like module `witness`, this is tried only where the comparison is refused, and
//! only ever proves "not equal".

use crate::circuit::mat2;
use crate::circuit::Mat2;
use crate::sim::apply::run_kernels;
use crate::sim::program::Kernel;
use crate::sim::state::StateVector;
use num_complex::Complex64 as C64;
use rand::SeedableRng;

/// A held ion's state.
type Spinor = [C64; 2];

/// Relative phases tried for each superposition of two inputs.
const PHASES: usize = 8;
/// A held ion must be an eigenstate of each of its interactions within this
/// amplitude; the part left out goes into the slack.
const EIGEN_EPS: f64 = 1e-9;

/// What one program does with one qubit.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Role {
    Untouched,
    /// Held: the state it must start in (the +1 eigenstate of its first
    /// interaction, pulled back), or `None` when it takes part in no interaction.
    Held(Option<Spinor>),
    Simulated,
}

/// The operator an interaction puts on one of its qubits: `sigma_phi` or `Z`.
#[derive(Debug, Clone, Copy)]
enum Axis {
    Sigma(f64),
    Z,
}

impl Axis {
    /// The eigenvectors for +1 and -1.
    fn eigenvectors(self) -> (Spinor, Spinor) {
        let one = C64::new(1.0, 0.0);
        let zero = C64::new(0.0, 0.0);
        match self {
            Axis::Z => ([one, zero], [zero, one]),
            Axis::Sigma(phi) => {
                let r = std::f64::consts::FRAC_1_SQRT_2;
                let e = C64::from_polar(r, phi);
                ([C64::new(r, 0.0), e], [C64::new(r, 0.0), -e])
            }
        }
    }
}

fn apply2(m: &Mat2, s: &Spinor) -> Spinor {
    [
        m[0][0] * s[0] + m[0][1] * s[1],
        m[1][0] * s[0] + m[1][1] * s[1],
    ]
}

fn inner2(a: &Spinor, b: &Spinor) -> C64 {
    a[0].conj() * b[0] + a[1].conj() * b[1]
}

/// The state orthogonal to `s` (same norm).
fn perp(s: &Spinor) -> Spinor {
    [-s[1].conj(), s[0].conj()]
}

/// Projects `s` on the eigenvector of `axis` it is closest to: the eigenvalue, the
/// amplitude left out, and `s` replaced by the projection (normalised, its phase
/// kept).
fn project(s: &mut Spinor, axis: Axis) -> (f64, f64) {
    let (vp, vm) = axis.eigenvectors();
    let (ap, am) = (inner2(&vp, s), inner2(&vm, s));
    let (l, keep, v, leak) = if ap.norm() >= am.norm() {
        (1.0, ap, vp, am.norm())
    } else {
        (-1.0, am, vm, ap.norm())
    };
    let u = if keep.norm() > 0.0 {
        keep / keep.norm()
    } else {
        C64::new(1.0, 0.0)
    };
    *s = [u * v[0], u * v[1]];
    (l, leak)
}

/// The operators a kernel puts on each of its qubits that interact, or `None` for a
/// qubit it acts on in a way no field can stand for (the qubit must be simulated).
/// Single-qubit parts are not listed here: [`local_part`] gives them.
fn interaction_axes(k: &Kernel, t: usize) -> Option<Option<Axis>> {
    match k {
        Kernel::One { .. } | Kernel::Collective { .. } => Some(None),
        Kernel::Ms { phi, qubits, .. } => {
            Some((qubits.contains(&t) && qubits.len() > 1).then_some(Axis::Sigma(*phi)))
        }
        Kernel::Ising { axis, terms } => {
            let on = terms.iter().any(|&(a, b, _)| (a == t) != (b == t));
            Some(on.then_some(axis.map_or(Axis::Z, Axis::Sigma)))
        }
        Kernel::Controlled {
            controls,
            target,
            m,
        } => {
            if controls.contains(&t) {
                Some(Some(Axis::Z))
            } else if *target == t {
                let diagonal = m[0][1].norm() == 0.0 && m[1][0].norm() == 0.0;
                diagonal.then_some(Some(Axis::Z))
            } else {
                Some(None)
            }
        }
        Kernel::Swap { .. } | Kernel::Dense { .. } => None,
    }
}

/// The single-qubit operation a kernel does on `t`, if it is one.
fn local_part(k: &Kernel, t: usize) -> Option<Mat2> {
    match k {
        Kernel::One { q, m } if *q == t => Some(*m),
        Kernel::Collective { m, qubits } if qubits.contains(&t) => Some(*m),
        _ => None,
    }
}

/// Each qubit's role in one program.
fn roles(ks: &[Kernel], n: usize) -> Vec<Role> {
    let mut role = vec![Role::Untouched; n];
    let mut frame: Vec<Mat2> = vec![mat2::identity(); n];
    for k in ks {
        for t in k.qubits() {
            if t >= n || role[t] == Role::Simulated {
                continue;
            }
            if let Some(m) = local_part(k, t) {
                frame[t] = mat2::mul(&m, &frame[t]);
                if role[t] == Role::Untouched {
                    role[t] = Role::Held(None);
                }
                continue;
            }
            match interaction_axes(k, t) {
                None => role[t] = Role::Simulated,
                Some(None) => {
                    if role[t] == Role::Untouched {
                        role[t] = Role::Held(None);
                    }
                }
                Some(Some(axis)) => {
                    let start = match role[t] {
                        Role::Held(Some(e)) => e,
                        _ => {
                            // The +1 eigenvector, pulled back to the start.
                            let e = apply2(&mat2::adjoint(&frame[t]), &axis.eigenvectors().0);
                            role[t] = Role::Held(Some(e));
                            e
                        }
                    };
                    let mut now = apply2(&frame[t], &start);
                    let (_, leak) = project(&mut now, axis);
                    if leak > EIGEN_EPS {
                        role[t] = Role::Simulated;
                    }
                }
            }
        }
    }
    role
}

/// The result of one program on one input.
struct Run {
    /// The simulated qubits' state, its global phase included.
    state: StateVector,
    /// Each held qubit's final state (indexed like `Plan::held`).
    held: Vec<Spinor>,
    /// Bound on how far the modelled output is from the exact one.
    slack: f64,
}

/// Which qubits are simulated, which held, and where each held one starts.
struct Plan {
    /// Simulated qubits, in order; a qubit's index in the simulated state is its
    /// position here.
    simulated: Vec<usize>,
    local: Vec<Option<usize>>,
    /// Held qubits and their +1 start states.
    held: Vec<(usize, Spinor)>,
    slot: Vec<Option<usize>>,
}

impl Plan {
    fn new(p: &[Kernel], q: &[Kernel], n: usize) -> Option<Plan> {
        let (rp, rq) = (roles(p, n), roles(q, n));
        let mut simulated = Vec::new();
        let mut held = Vec::new();
        for t in 0..n {
            let start = match (rp[t], rq[t]) {
                (Role::Untouched, Role::Untouched) => continue,
                (Role::Simulated, _) | (_, Role::Simulated) => None,
                (a, b) => match (a.start(), b.start()) {
                    (Some(x), Some(y)) => {
                        // Both interact: the same start state, up to a phase (the
                        // amplitude of one orthogonal to the other, as for `project`).
                        (inner2(&perp(&x), &y).norm() <= EIGEN_EPS).then_some(x)
                    }
                    (Some(x), None) | (None, Some(x)) => Some(x),
                    (None, None) => Some([C64::new(1.0, 0.0), C64::new(0.0, 0.0)]),
                },
            };
            match start {
                Some(e) => held.push((t, e)),
                None => simulated.push(t),
            }
        }
        if held.is_empty() {
            return None;
        }
        let mut local = vec![None; n];
        for (i, &t) in simulated.iter().enumerate() {
            local[t] = Some(i);
        }
        let mut slot = vec![None; n];
        for (i, &(t, _)) in held.iter().enumerate() {
            slot[t] = Some(i);
        }
        Some(Plan {
            simulated,
            local,
            held,
            slot,
        })
    }

    /// Runs `ks` on `input` (the simulated qubits) with each held qubit starting in
    /// its +1 state, or its -1 state where `flipped` names it.
    fn run(&self, ks: &[Kernel], input: &StateVector, flipped: Option<usize>) -> Option<Run> {
        let mut held: Vec<Spinor> = self
            .held
            .iter()
            .enumerate()
            .map(|(i, (_, e))| if Some(i) == flipped { perp(e) } else { *e })
            .collect();
        let mut state = input.try_clone().ok()?;
        let mut phase = C64::new(1.0, 0.0);
        let mut slack = 0.0;
        let mut out: Vec<Kernel> = Vec::with_capacity(4);
        for k in ks {
            out.clear();
            self.lower(k, &mut held, &mut phase, &mut slack, &mut out)?;
            run_kernels(out.iter(), &mut state);
        }
        state.amps.iter_mut().for_each(|a| *a *= phase);
        Some(Run { state, held, slack })
    }

    /// The kernels `k` does on the simulated qubits, given the held ones' states;
    /// updates those states, the global phase and the slack.
    fn lower(
        &self,
        k: &Kernel,
        held: &mut [Spinor],
        phase: &mut C64,
        slack: &mut f64,
        out: &mut Vec<Kernel>,
    ) -> Option<()> {
        let local = |q: usize| self.local[q];
        let mut sign = |q: usize, axis: Axis, held: &mut [Spinor]| -> f64 {
            let s = &mut held[self.slot[q].expect("a held qubit")];
            let (l, leak) = project(s, axis);
            *slack += 2.0 * leak;
            l
        };
        match k {
            Kernel::One { q, m } => match local(*q) {
                Some(i) => out.push(Kernel::One { q: i, m: *m }),
                None => {
                    let s = &mut held[self.slot[*q]?];
                    *s = apply2(m, s);
                }
            },
            Kernel::Collective { m, qubits } => {
                let mut sim = Vec::new();
                for &q in qubits {
                    match local(q) {
                        Some(i) => sim.push(i),
                        None => {
                            let s = &mut held[self.slot[q]?];
                            *s = apply2(m, s);
                        }
                    }
                }
                if !sim.is_empty() {
                    out.push(Kernel::Collective { m: *m, qubits: sim });
                }
            }
            Kernel::Ms { theta, phi, qubits } => {
                let mut sim = Vec::new();
                let mut l = 0.0;
                for &q in qubits {
                    match local(q) {
                        Some(i) => sim.push(i),
                        None if qubits.len() > 1 => l += sign(q, Axis::Sigma(*phi), held),
                        None => {}
                    }
                }
                if qubits.len() == 1 && sim.is_empty() {
                    // exp(-i theta/4 sigma^2) on one ion: a phase.
                    *phase *= C64::from_polar(1.0, -theta / 4.0);
                    return Some(());
                }
                *phase *= C64::from_polar(1.0, -theta / 4.0 * l * l);
                if !sim.is_empty() {
                    if l != 0.0 {
                        out.push(Kernel::Collective {
                            m: crate::native::rotation(theta * l, *phi),
                            qubits: sim.clone(),
                        });
                    }
                    out.push(Kernel::Ms {
                        theta: *theta,
                        phi: *phi,
                        qubits: sim,
                    });
                }
            }
            Kernel::Ising { axis, terms } => {
                let ax = axis.map_or(Axis::Z, Axis::Sigma);
                // One projection per held qubit (every term puts the same operator
                // on it).
                let mut signs: Vec<(usize, f64)> = Vec::new();
                let mut kept = Vec::new();
                for &(a, b, w) in terms {
                    let mut get =
                        |q: usize, held: &mut [Spinor]| match signs.iter().find(|(x, _)| *x == q) {
                            Some(&(_, l)) => l,
                            None => {
                                let l = sign(q, ax, held);
                                signs.push((q, l));
                                l
                            }
                        };
                    match (local(a), local(b)) {
                        (Some(i), Some(j)) => kept.push((i, j, w)),
                        (Some(i), None) | (None, Some(i)) => {
                            let other = if local(a).is_some() { b } else { a };
                            let l = get(other, held);
                            out.push(field(ax, i, 2.0 * w * l));
                        }
                        (None, None) => {
                            let (la, lb) = (get(a, held), get(b, held));
                            *phase *= C64::from_polar(1.0, -w * la * lb);
                        }
                    }
                }
                if !kept.is_empty() {
                    out.push(Kernel::Ising {
                        axis: *axis,
                        terms: kept,
                    });
                }
            }
            Kernel::Controlled {
                controls,
                target,
                m,
            } => {
                let mut sim_controls = Vec::new();
                for &c in controls {
                    match local(c) {
                        Some(i) => sim_controls.push(i),
                        None => {
                            // +1 is |0>: the control is off.
                            if sign(c, Axis::Z, held) > 0.0 {
                                return Some(());
                            }
                        }
                    }
                }
                match local(*target) {
                    Some(t) => out.push(if sim_controls.is_empty() {
                        Kernel::One { q: t, m: *m }
                    } else {
                        Kernel::Controlled {
                            controls: sim_controls,
                            target: t,
                            m: *m,
                        }
                    }),
                    None => {
                        // A diagonal on a held target (the plan admits no other).
                        let bit = usize::from(sign(*target, Axis::Z, held) < 0.0);
                        let d = m[bit][bit];
                        match sim_controls.split_last() {
                            None => *phase *= d,
                            Some((&last, rest)) => {
                                let one = C64::new(1.0, 0.0);
                                let zero = C64::new(0.0, 0.0);
                                out.push(Kernel::Controlled {
                                    controls: rest.to_vec(),
                                    target: last,
                                    m: [[one, zero], [zero, d]],
                                });
                            }
                        }
                    }
                }
            }
            Kernel::Swap { a, b } => out.push(Kernel::Swap {
                a: local(*a)?,
                b: local(*b)?,
            }),
            Kernel::Dense { qubits, m } => out.push(Kernel::Dense {
                qubits: qubits.iter().map(|&q| local(q)).collect::<Option<_>>()?,
                m: m.clone(),
            }),
        }
        Some(())
    }
}

/// `exp(-i (angle/2) P)` on simulated qubit `q`.
fn field(axis: Axis, q: usize, angle: f64) -> Kernel {
    Kernel::One {
        q,
        m: match axis {
            Axis::Z => crate::native::z_rotation(angle),
            Axis::Sigma(phi) => crate::native::rotation(angle, phi),
        },
    }
}

impl Role {
    fn start(self) -> Option<Spinor> {
        match self {
            Role::Held(s) => s,
            _ => None,
        }
    }
}

/// A proof that two programs differ, found with some ions held as fields.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct FieldWitness {
    /// The proven lower bound on `min_c ||Q - cP||` (operator norm), slack taken off.
    pub bound: f64,
    /// How many qubits were simulated and how many held.
    pub simulated: usize,
    pub held: usize,
    /// Whether the reference input (every held ion in its +1 state) shows it.
    pub reference: bool,
    /// Held ions left rotated on the reference input.
    pub rotated: Vec<usize>,
    /// Held ions whose superposition input shows it: left coupled, or their
    /// couplings no longer cancel.
    pub coupled: Vec<usize>,
}

/// What the search found: a proof, or what it tried (for the refusal).
pub(super) enum Search {
    Proven(FieldWitness),
    Tried(String),
}

/// Amplitude updates the search may spend when the comparison has no work budget of
/// its own (about a minute on one core).
const DEFAULT_WORK: f64 = 3e10;

/// Looks for a proof that `p` and `q` (on `n` qubits) differ by more than
/// `threshold`, holding every qubit that qualifies as a field.
pub(super) fn held_fields(
    p: &[Kernel],
    q: &[Kernel],
    n: usize,
    cfg: &super::CheckConfig,
    threshold: f64,
) -> Search {
    let Some(plan) = Plan::new(p, q, n) else {
        return Search::Tried(
            "no ion stays in an eigenstate of its interactions, so none could be held as a fixed field".into(),
        );
    };
    let (k, h) = (plan.simulated.len(), plan.held.len());
    let tried = |why: String| {
        Search::Tried(format!(
            "holding {h} ion(s) as fixed fields leaves {k} to simulate, {why}"
        ))
    };
    let needed = super::modes::state_bytes(k).saturating_mul(5);
    if k >= 40 || needed > cfg.memory_budget {
        return tried(format!(
            "which needs {needed} bytes, more than the budget of {} bytes",
            cfg.memory_budget
        ));
    }
    let _grant = match &cfg.pool {
        Some(pool) => match pool.0.reserve(needed) {
            Ok(g) => Some(g),
            Err(_) => {
                return tried(format!(
                    "but the shared memory pool could not lend {needed} bytes"
                ))
            }
        },
        None => None,
    };
    let run_cost = |ks: &[Kernel]| ks.len().max(1) as f64 * (k as f64).exp2();
    let budget = if cfg.max_work.is_finite() {
        cfg.max_work
    } else {
        DEFAULT_WORK
    };
    let reference_cost = run_cost(p) + run_cost(q);
    if reference_cost > budget {
        return tried(format!(
            "which needs about {reference_cost:.1e} amplitude updates, more than the budget of {budget:.1e}"
        ));
    }
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(cfg.seed ^ 0xf1e1d5);
    let failed = |what: &str| tried(format!("but {what}"));
    let Ok(input) = StateVector::try_haar_random(k, &mut rng) else {
        return failed("its state could not be allocated");
    };
    let (Some(p0), Some(q0)) = (plan.run(p, &input, None), plan.run(q, &input, None)) else {
        return failed("an operation could not be lowered onto the simulated ions");
    };
    let (reference_d, residues) = single(&q0, &p0);
    let reference_bound = reference_d - (q0.slack + p0.slack);
    let mut best = reference_bound;
    let rotated: Vec<usize> = residues
        .iter()
        .enumerate()
        .filter(|(_, &r)| r > threshold)
        .map(|(i, _)| plan.held[i].0)
        .collect();
    // Flip each held ion in turn, while the budget lasts; a program in which the ion
    // takes no part in an interaction runs the same on the simulated qubits.
    let interacts = |ks: &[Kernel]| {
        let r = roles(ks, n);
        plan.held
            .iter()
            .map(|&(t, _)| matches!(r[t], Role::Held(Some(_))))
            .collect::<Vec<bool>>()
    };
    let (ip, iq) = (interacts(p), interacts(q));
    let mut spent = reference_cost;
    let mut coupled = Vec::new();
    let mut flipped_all = true;
    for (slot, &(t, _)) in plan.held.iter().enumerate() {
        let cost =
            if ip[slot] { run_cost(p) } else { 0.0 } + if iq[slot] { run_cost(q) } else { 0.0 };
        if spent + cost > budget {
            flipped_all = false;
            break;
        }
        spent += cost;
        let flip = |ks: &[Kernel], interacts: bool, base: &Run| -> Option<Run> {
            if interacts {
                plan.run(ks, &input, Some(slot))
            } else {
                // Only the held ion's own operations act on it.
                let mut s = perp(&plan.held[slot].1);
                for k in ks {
                    if let Some(m) = local_part(k, t) {
                        s = apply2(&m, &s);
                    }
                }
                let mut held = base.held.clone();
                held[slot] = s;
                Some(Run {
                    state: base.state.try_clone().ok()?,
                    held,
                    slack: base.slack,
                })
            }
        };
        let (Some(p1), Some(q1)) = (flip(p, ip[slot], &p0), flip(q, iq[slot], &q0)) else {
            return failed("a flipped input could not be simulated");
        };
        let d = pair(slot, [&q0, &q1], [&p0, &p1]) - (q0.slack + q1.slack + p0.slack + p1.slack);
        if d > threshold {
            coupled.push(t);
        }
        best = best.max(d);
    }
    if best > threshold {
        return Search::Proven(FieldWitness {
            bound: best,
            simulated: k,
            held: h,
            reference: reference_bound > threshold,
            rotated,
            coupled,
        });
    }
    let flips = if flipped_all {
        format!("each of the {h} held ions in both of its states")
    } else {
        "some of the held ions in both states (the work budget ran out)".to_string()
    };
    tried(format!(
        "and a random input with {flips} found no difference above the tolerance {threshold:.1e} (largest {best:.1e}); that proves nothing either way"
    ))
}

fn unit(z: C64) -> C64 {
    if z.norm() > 0.0 {
        z / z.norm()
    } else {
        C64::new(1.0, 0.0)
    }
}

/// `sum_{i != skip} ln(1 - r_i^2)` as `1 - prod`, without cancellation.
fn outside(residues: impl Iterator<Item = f64>) -> f64 {
    -residues.map(|r| (-r * r).ln_1p()).sum::<f64>().exp_m1()
}

/// The overlap `prod <v_t|u_t>` of the held qubits, and each one's residue: the
/// amplitude of `u_t` orthogonal to `v_t`.
fn held_overlap(u: &[Spinor], v: &[Spinor], skip: Option<usize>) -> (C64, Vec<f64>) {
    let mut mu = C64::new(1.0, 0.0);
    let mut residues = Vec::with_capacity(u.len());
    for (i, (a, b)) in u.iter().zip(v).enumerate() {
        if Some(i) == skip {
            residues.push(0.0);
            continue;
        }
        mu *= inner2(b, a);
        residues.push(inner2(&perp(b), a).norm());
    }
    (mu, residues)
}

/// `min_c ||Q Psi - c P Psi||` for the reference input, and each held qubit's residue.
/// With `u = prod u_t = mu v + rest` (`rest` orthogonal to `v`), the difference is
/// `(mu a - c b) (x) v + a (x) rest`, of squared norm `||mu a - c b||^2 + ||rest||^2`.
fn single(q: &Run, p: &Run) -> (f64, Vec<f64>) {
    use rayon::prelude::*;
    let (mu, residues) = held_overlap(&q.held, &p.held, None);
    let (a, b) = (&q.state.amps, &p.state.amps);
    let c = unit(mu * p.state.inner(&q.state));
    let near: f64 = a
        .par_iter()
        .zip(b.par_iter())
        .map(|(x, y)| (mu * x - c * y).norm_sqr())
        .sum();
    ((near + outside(residues.iter().copied())).sqrt(), residues)
}

/// The largest `min_c ||Q Psi - c P Psi||` over the equal superpositions (relative
/// phases `2 pi j / 8`) of the reference input and the one with held qubit `slot`
/// flipped. In the basis `v_j` of `P`'s final states of that qubit, `Q`'s are
/// `u_i = sum_j M_ji v_j`; the other held qubits give `mu' v' + rest'` as in
/// [`single`]. The difference is `sum_j (X_j - c Y_j) (x) v_j (x) v' + (...) (x) rest'`
/// with `X_j = mu' sum_i M_ji alpha_i a_i`, `Y_j = alpha_j b_j`.
fn pair(slot: usize, q: [&Run; 2], p: [&Run; 2]) -> f64 {
    use rayon::prelude::*;
    let (mu, residues) = held_overlap(&q[0].held, &p[0].held, Some(slot));
    let rest = outside(residues.iter().copied());
    let m = |j: usize, i: usize| inner2(&p[j].held[slot], &q[i].held[slot]);
    let mm = [[m(0, 0), m(0, 1)], [m(1, 0), m(1, 1)]];
    let ba = [
        [p[0].state.inner(&q[0].state), p[0].state.inner(&q[1].state)],
        [p[1].state.inner(&q[0].state), p[1].state.inner(&q[1].state)],
    ];
    let (a0, a1) = (&q[0].state.amps, &q[1].state.amps);
    let (b0, b1) = (&p[0].state.amps, &p[1].state.amps);
    let r = std::f64::consts::FRAC_1_SQRT_2;
    let mut best: f64 = 0.0;
    for j in 0..PHASES {
        let alpha = [
            C64::new(r, 0.0),
            C64::from_polar(r, std::f64::consts::TAU * j as f64 / PHASES as f64),
        ];
        // X_j = mu (x0j a0 + x1j a1), Y_j = alpha_j b_j.
        let coef = |jj: usize, i: usize| mu * mm[jj][i] * alpha[i];
        let k = [[coef(0, 0), coef(0, 1)], [coef(1, 0), coef(1, 1)]];
        let s: C64 = (0..2)
            .map(|jj| alpha[jj].conj() * (k[jj][0] * ba[jj][0] + k[jj][1] * ba[jj][1]))
            .sum();
        let c = unit(s);
        let near: f64 = (a0.par_iter().zip(a1.par_iter()))
            .zip(b0.par_iter().zip(b1.par_iter()))
            .map(|((x0, x1), (y0, y1))| {
                let e0 = k[0][0] * x0 + k[0][1] * x1 - c * alpha[0] * y0;
                let e1 = k[1][0] * x0 + k[1][1] * x1 - c * alpha[1] * y1;
                e0.norm_sqr() + e1.norm_sqr()
            })
            .sum();
        best = best.max((near + rest).sqrt());
    }
    best
}

/// At most this many ions are named in a list.
const NAMED: usize = 12;

fn ion_list(ions: &[usize]) -> String {
    let mut s: Vec<String> = ions.iter().take(NAMED).map(|i| i.to_string()).collect();
    if ions.len() > NAMED {
        s.push(format!("and {} more", ions.len() - NAMED));
    }
    s.join(", ")
}

impl FieldWitness {
    /// What the proof shows, naming the ions involved.
    pub fn describe(&self) -> String {
        let mut parts = Vec::new();
        if !self.rotated.is_empty() {
            parts.push(format!(
                "qubit(s) {} are left rotated though the other program leaves them alone",
                ion_list(&self.rotated)
            ));
        }
        if !self.coupled.is_empty() {
            parts.push(format!(
                "qubit(s) {} are left coupled (their couplings do not cancel)",
                ion_list(&self.coupled)
            ));
        }
        if self.reference && self.rotated.is_empty() {
            parts.push("the simulated qubits end in a different state".to_string());
        }
        if parts.is_empty() {
            parts.push("the outputs differ".to_string());
        }
        parts.join("; ")
    }
}
