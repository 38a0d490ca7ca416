//! Equivalence of two programs up to a global phase.
//!
//! Programs are cut into segments at measurements, resets and conditioned
//! operations (module `cuts`); the cuts must match exactly (qubit, bit and
//! condition), except that a final run of measurements may come in another order.
//! Each pair of unitary segments goes through exact pre-passes (module `prepass`)
//! and is compared by a distance against a tolerance in one of three modes (module
//! `modes`): stabilizer tableaux, full unitaries, or random states. Long sequences
//! can also be verified window by window ([`check_windows`]).
//!
//! A program with fewer qubits is padded with idle qubits, so extra ions of a device
//! must be left as they were. docs/checker.md states what each mode can and cannot
//! detect.
//!
//! Invariant: the verdict is "equivalent" only when every cut matched and every
//! segment pair's distance (plus the pre-pass slack) was at most its tolerance; the
//! verdict reports the worst distance and the tolerance it was held against.

mod cuts;
mod fields;
mod frame;
mod modes;
mod prepass;
mod spin;
mod windowed;
mod witness;

pub use modes::{derived_tolerance, random_tolerance, ROUNDING_PER_TOUCH, TOLERANCE_FLOOR};
pub use windowed::{
    check_sequence_windows, check_windows, check_windows_counted, sync_points_from_origin,
    SyncPoint, WindowVerdict, WorkCounter,
};

use crate::sim::program::{LowerError, Program};
use cuts::{match_cuts, segments, segments_measured_last};
use modes::compare;

/// How segments are compared.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Mode {
    /// Tableau when both are Clifford, else unitary up to `max_unitary_qubits`, else
    /// random states.
    Auto,
    Unitary,
    Random,
    Tableau,
    /// Not chosen: what a verdict reports when a difference was proven by an exact
    /// bound without simulating (module `witness`: a qubit one program leaves alone
    /// and the other leaves coupled).
    Bound,
    /// Not chosen: what a verdict reports when both programs act on the whole
    /// register alike (collective rotations, global MS pulses) and were compared in
    /// the spaces of the collective spin (module `spin`), exactly, in operator norm.
    Spin,
}

impl Mode {
    pub fn name(self) -> &'static str {
        match self {
            Mode::Auto => "auto",
            Mode::Unitary => "unitary",
            Mode::Random => "random",
            Mode::Tableau => "tableau",
            Mode::Bound => "bound",
            Mode::Spin => "spin",
        }
    }

    fn rank(self) -> u8 {
        match self {
            Mode::Auto | Mode::Tableau => 0,
            Mode::Unitary | Mode::Spin => 1,
            Mode::Random => 2,
            Mode::Bound => 3,
        }
    }
}

/// Settings of the checker; `Default` gives the documented defaults.
#[derive(Debug, Clone, PartialEq)]
pub struct CheckConfig {
    pub mode: Mode,
    /// Random states per segment in random mode.
    pub trials: usize,
    pub seed: u64,
    /// The largest distance accepted as equal. `None` (the default) derives it for
    /// each comparison from the operation counts: [`derived_tolerance`].
    pub tolerance: Option<f64>,
    /// Auto mode builds full unitaries up to this many qubits.
    pub max_unitary_qubits: usize,
    /// Largest memory the checker may use for states and unitaries, in bytes. The
    /// default is what the process may really use: see
    /// [`crate::memory::default_budget`].
    pub memory_budget: usize,
    /// Accept a final diagonal on the qubits measured at the end.
    pub up_to_final_diagonal: bool,
    /// Most work one comparison may take, in amplitude updates (operations of both
    /// programs times 2^qubits times trials; 4^qubits per operation for unitaries).
    /// Infinite by default; the compile driver sets a bound and then verifies window
    /// by window instead of waiting for hours.
    pub max_work: f64,
    /// A memory budget shared with other comparisons running at the same time
    /// (`tutti batch`): each state or unitary is also reserved there, waiting while
    /// the others hold too much. `memory_budget` still bounds one comparison.
    pub pool: Option<crate::memory::SharedPool>,
    /// When a comparison is refused (too large, too slow, not Clifford), look for an
    /// exact proof that the programs differ (modules `witness` and `fields`). On by
    /// default; a caller that falls back to smaller comparisons anyway (the compile
    /// driver, window by window) turns it off rather than spend the work twice.
    pub seek_difference: bool,
}

impl Default for CheckConfig {
    fn default() -> CheckConfig {
        CheckConfig {
            mode: Mode::Auto,
            trials: 3,
            seed: 0x7u64 << 40 | 0x2026,
            tolerance: None,
            max_unitary_qubits: 10,
            memory_budget: crate::memory::default_budget(),
            up_to_final_diagonal: false,
            max_work: f64::INFINITY,
            pool: None,
            seek_difference: true,
        }
    }
}

/// The checker's answer.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Verdict {
    pub equivalent: bool,
    /// The mode used; with several segments, the most expensive one used.
    pub mode: Mode,
    /// The distance of the segment pair closest to failing (largest distance over
    /// tolerance), in the units of its mode (docs/checker.md). `None` when the
    /// programs differ in a way no distance measures: cuts or wiring, tableaux,
    /// faults of a sequence.
    pub distance: Option<f64>,
    /// The tolerance that distance was held against.
    pub tolerance: f64,
    /// The worst fidelity over segments: `|tr(A^dagger B)|^2 / 4^n` in unitary mode,
    /// `|<a|b>|^2` in random mode, 1 or 0 for tableaux. Informative only; the
    /// verdict rests on the distance.
    pub fidelity: f64,
    /// The global phase `g` with `B = e^{ig} A` of the first unitary segment, where
    /// the mode measures it.
    pub global_phase: Option<f64>,
    pub segments: usize,
    /// The larger of the two programs' qubit (or ion) counts: the space compared.
    pub qubits: usize,
    /// Each program's own qubit (or ion) count.
    pub qubits_a: usize,
    pub qubits_b: usize,
    /// Set when one program had fewer qubits and was padded with idle ones, which
    /// the other must then leave as they were.
    pub padding: Option<String>,
    /// The most qubits one segment comparison needed after untouched qubits were
    /// split off.
    pub compared_qubits: usize,
    /// What differed, when the programs are not equivalent.
    pub detail: String,
    /// Set when the unitary before the final measurements was compared only up to
    /// a diagonal on the measured qubits (`CheckConfig::up_to_final_diagonal` and a
    /// final run of measurements): equal outcome statistics, not equal unitaries.
    pub final_diagonal: bool,
}

impl Verdict {
    fn start(a: usize, b: usize, segments: usize) -> Verdict {
        let n = a.max(b);
        let padding = (a != b).then(|| {
            let (which, fewer) = if a < b { ("first", a) } else { ("second", b) };
            format!(
                "the {which} program has {fewer} qubit(s); {} idle qubit(s) were added to it, and the other program must leave them as they were",
                n - fewer
            )
        });
        Verdict {
            equivalent: true,
            mode: Mode::Tableau,
            distance: Some(0.0),
            tolerance: TOLERANCE_FLOOR,
            fidelity: 1.0,
            global_phase: None,
            segments,
            qubits: n,
            qubits_a: a,
            qubits_b: b,
            padding,
            compared_qubits: 0,
            detail: String::new(),
            final_diagonal: false,
        }
    }

    fn differ(mut self, detail: String) -> Verdict {
        self.equivalent = false;
        self.distance = None;
        self.fidelity = 0.0;
        self.detail = detail;
        self
    }
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CheckError {
    #[error(transparent)]
    Lower(#[from] LowerError),
    #[error("comparing {qubits} qubits needs {needed} bytes of memory, more than the budget of {budget} bytes; raise --memory (MiB) if the machine has it, or make both programs Clifford for tableau mode")]
    TooLarge {
        qubits: usize,
        needed: usize,
        budget: usize,
    },
    /// The memory that several jobs share was taken by others when a comparison
    /// running on a worker thread (which may not wait for it) asked for its part.
    #[error("the memory shared by the jobs running at once was busy: this check asked for {needed} bytes when {free} of {total} were free; run fewer jobs at once, or raise --memory (MiB) if the machine has it")]
    Busy {
        needed: usize,
        free: usize,
        total: usize,
    },
    #[error("{qubits} qubits with {operations} operations need about {work:.1e} amplitude updates, more than the budget of {budget:.1e}")]
    TooSlow {
        qubits: usize,
        operations: usize,
        work: f64,
        budget: f64,
    },
    #[error("tableau mode needs Clifford programs, but {0}")]
    NotClifford(String),
    #[error("the programs cannot be compared window by window: {0}")]
    Windows(String),
    #[error("{0}")]
    Unsupported(String),
    /// A refusal after which a proof of difference was looked for and not found:
    /// what was tried, and what is too large.
    #[error("{refusal}; {tried}")]
    Undecided {
        refusal: Box<CheckError>,
        tried: String,
    },
}

impl CheckError {
    /// Whether the comparison was refused for its size (memory or work), so that
    /// smaller comparisons (window by window) may still decide it.
    pub fn beyond_budget(&self) -> bool {
        match self {
            CheckError::TooLarge { .. } | CheckError::TooSlow { .. } | CheckError::Busy { .. } => {
                true
            }
            CheckError::Undecided { refusal, .. } => refusal.beyond_budget(),
            _ => false,
        }
    }

    /// The refusal itself, without what was tried after it.
    pub fn refusal(&self) -> &CheckError {
        match self {
            CheckError::Undecided { refusal, .. } => refusal.refusal(),
            e => e,
        }
    }
}

/// Compares two programs. See the module documentation for the modes.
pub fn check(a: &Program, b: &Program, cfg: &CheckConfig) -> Result<Verdict, CheckError> {
    check_counted(a, b, cfg, &WorkCounter::default())
}

/// [`check`], counting in `counter` the operations simulated (state and unitary
/// comparisons; `total` grows as each segment starts), for a progress display.
pub fn check_counted(
    a: &Program,
    b: &Program,
    cfg: &CheckConfig,
    counter: &WorkCounter,
) -> Result<Verdict, CheckError> {
    let n = a.n_qubits.max(b.n_qubits);
    let (sa, sb) = (segments(a), segments(b));
    let mut verdict = Verdict::start(a.n_qubits, b.n_qubits, sa.len().div_ceil(2));
    for (which, p) in [("first", a), ("second", b)] {
        if let Some(f) = p.faults.first() {
            return Ok(verdict.differ(format!("the {which} program is faulty: {f}")));
        }
    }
    // Cuts as written; else with terminal measurements moved last in either or both
    // (each is the same program: module `crate::circuit::defer`).
    // The second program is moved only when moving the first does not suffice (a
    // sequence's measurements rarely can move, and it is the larger one).
    let (ma, mb);
    let matched = match match_cuts(&sa, &sb) {
        Ok(m) => m,
        Err(why) => {
            ma = segments_measured_last(a);
            match ma.as_ref().and_then(|x| match_cuts(x, &sb).ok()) {
                Some(m) => m,
                None => {
                    mb = segments_measured_last(b);
                    let tries = [(Some(&sa), mb.as_ref()), (ma.as_ref(), mb.as_ref())];
                    match tries.into_iter().find_map(|(x, y)| match_cuts(x?, y?).ok()) {
                        Some(m) => m,
                        None => return Ok(verdict.differ(why)),
                    }
                }
            }
        }
    };
    let mut rank = 0;
    let mut worst_ratio = -1.0;
    let mut any = false;
    for (k, &(cut, p, q)) in matched.bodies.iter().enumerate() {
        let diagonal = (cfg.up_to_final_diagonal && matched.before_final == Some(k))
            .then_some(matched.measured.as_slice());
        verdict.final_diagonal |= diagonal.is_some();
        let r = compare(p, q, n, cfg, diagonal, counter)?;
        any |= !p.is_empty() || !q.is_empty();
        if r.mode.rank() >= rank {
            rank = r.mode.rank();
            verdict.mode = r.mode;
        }
        if verdict.global_phase.is_none() && !p.is_empty() {
            verdict.global_phase = r.phase;
        }
        verdict.fidelity = verdict.fidelity.min(r.fidelity);
        verdict.compared_qubits = verdict.compared_qubits.max(r.compared);
        if verdict.equivalent {
            let ratio = r.distance.map_or(f64::INFINITY, |d| d / r.tolerance);
            if ratio > worst_ratio {
                worst_ratio = ratio;
                verdict.distance = r.distance;
                verdict.tolerance = r.tolerance;
            }
        }
        if !r.equal && verdict.equivalent {
            verdict.equivalent = false;
            verdict.distance = r.distance;
            verdict.tolerance = r.tolerance;
            let place = if cut == 0 {
                "the gates before the first cut".to_string()
            } else {
                format!("the gates after cut {cut}")
            };
            verdict.detail = match &r.reason {
                Some(reason) => format!("{place} differ: {reason}"),
                None => format!(
                    "{place} differ: distance {:.3e} is above the tolerance {:.3e}",
                    r.distance.unwrap_or(f64::NAN),
                    r.tolerance
                ),
            };
        }
    }
    if !any {
        verdict.mode = if cfg.mode == Mode::Auto {
            Mode::Tableau
        } else {
            cfg.mode
        };
    }
    Ok(verdict)
}
