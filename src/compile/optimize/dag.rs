//! The canonical form of one segment as a DAG (petgraph): a node per single-qubit
//! unitary or ZZ interaction, an edge per qubit wire from an operation to the next
//! one on that wire. Passes are plain functions over it.
//!
//! Invariant: node indices increase along every edge (nodes are added in program
//! order and passes only remove nodes or rewire around removed ones), so walking the
//! live nodes by index is a topological order; and the product of the nodes in that
//! order is the segment's unitary up to global phase, after every pass.

use crate::circuit::Mat2;
use crate::compile::lower::Canon;
use petgraph::stable_graph::{NodeIndex, StableDiGraph};
use petgraph::Direction;

/// Entries this close to zero count as zero when classifying a 2x2 unitary.
pub const ZERO: f64 = 1e-13;

/// One segment's canonical operations (no measurement, reset or condition).
pub struct Dag {
    pub graph: StableDiGraph<Canon, u32>,
    /// Nodes removed so far, and how many had been when [`fuse_locals`] last
    /// finished: if none since, no local is next to another or the identity (it
    /// fused them all, and only a removal can bring two together again), so it
    /// has nothing to do.
    removed: u64,
    fused_at: Option<u64>,
}

impl Dag {
    /// Builds the DAG of `ops` (each a `Local` or `Zz`).
    pub fn new(ops: impl IntoIterator<Item = Canon>) -> Dag {
        let ops = ops.into_iter();
        // At most two wires per operation: two edges in.
        let hint = ops.size_hint().0;
        let mut graph = StableDiGraph::with_capacity(hint, 2 * hint);
        // The last node on each wire, by qubit index (grown as qubits appear).
        let mut last: Vec<Option<NodeIndex>> = Vec::new();
        for op in ops {
            let node = graph.add_node(op);
            for q in qubits(&op) {
                let q_at = q as usize;
                if q_at >= last.len() {
                    last.resize(q_at + 1, None);
                }
                if let Some(prev) = last[q_at].replace(node) {
                    graph.add_edge(prev, node, q);
                }
            }
        }
        Dag {
            graph,
            removed: 0,
            fused_at: None,
        }
    }

    /// The operations in a topological order (by node index).
    pub fn ops(&self) -> Vec<Canon> {
        let mut idx: Vec<NodeIndex> = self.graph.node_indices().collect();
        idx.sort_unstable();
        idx.into_iter().map(|i| self.graph[i]).collect()
    }

    /// The next node on wire `q` after `node`.
    fn next_on(&self, node: NodeIndex, q: u32) -> Option<NodeIndex> {
        self.graph
            .edges_directed(node, Direction::Outgoing)
            .find(|e| *e.weight() == q)
            .map(|e| petgraph::visit::EdgeRef::target(&e))
    }

    fn prev_on(&self, node: NodeIndex, q: u32) -> Option<NodeIndex> {
        self.graph
            .edges_directed(node, Direction::Incoming)
            .find(|e| *e.weight() == q)
            .map(|e| petgraph::visit::EdgeRef::source(&e))
    }

    /// Removes `node`, joining its predecessor and successor on each wire.
    fn remove(&mut self, node: NodeIndex) {
        let op = self.graph[node];
        for q in qubits(&op) {
            if let (Some(p), Some(n)) = (self.prev_on(node, q), self.next_on(node, q)) {
                self.graph.add_edge(p, n, q);
            }
        }
        self.graph.remove_node(node);
        self.removed += 1;
    }
}

pub fn qubits(op: &Canon) -> smallvec::SmallVec<[u32; 2]> {
    match *op {
        Canon::Local { q, .. } => smallvec::smallvec![q],
        Canon::Zz { a, b, .. } => smallvec::smallvec![a, b],
        Canon::Measure { q, .. } | Canon::Reset { q } => smallvec::smallvec![q],
    }
}

pub use crate::circuit::mat2::mul;

/// `|z| <= ZERO`, compared squared (`norm` is a call to `hypot`, guarded against
/// overflow that entries of a unitary cannot reach; these tests run on every
/// single-qubit unitary of a circuit).
fn negligible(z: num_complex::Complex64) -> bool {
    z.norm_sqr() <= ZERO * ZERO
}

pub fn is_diagonal(m: &Mat2) -> bool {
    negligible(m[0][1]) && negligible(m[1][0])
}

pub fn is_antidiagonal(m: &Mat2) -> bool {
    negligible(m[0][0]) && negligible(m[1][1])
}

/// A multiple of the identity (a global phase), within [`ZERO`].
pub fn is_identity(m: &Mat2) -> bool {
    is_diagonal(m) && negligible(m[0][0] - m[1][1])
}

/// Pass: each run of single-qubit unitaries on a wire becomes one, and a product
/// that is the identity (up to phase) disappears.
pub fn fuse_locals(dag: &mut Dag) {
    if dag.fused_at == Some(dag.removed) {
        return;
    }
    let mut idx: Vec<NodeIndex> = dag.graph.node_indices().collect();
    idx.sort_unstable();
    for node in idx {
        let Canon::Local { q, m } = dag.graph[node] else {
            continue;
        };
        let next = dag.next_on(node, q);
        match next.map(|n| dag.graph[n]) {
            Some(Canon::Local { q: q2, m: m2 }) => {
                debug_assert_eq!(q, q2);
                let n = next.expect("matched");
                dag.graph[n] = Canon::Local { q, m: mul(&m2, &m) };
                dag.remove(node);
            }
            _ if is_identity(&m) => dag.remove(node),
            _ => {}
        }
    }
    dag.fused_at = Some(dag.removed);
}

/// Pass: ZZ interactions of angle zero (mod 2 pi, a global phase) disappear, and one
/// that directly follows another on the same pair (on both wires) joins it.
pub fn merge_interactions(dag: &mut Dag) {
    use std::f64::consts::TAU;
    let mut idx: Vec<NodeIndex> = dag.graph.node_indices().collect();
    idx.sort_unstable();
    for node in idx {
        let Canon::Zz { a, b, theta } = dag.graph[node] else {
            continue;
        };
        let wrapped = theta - TAU * (theta / TAU).round();
        if wrapped.abs() <= ZERO {
            dag.remove(node);
            continue;
        }
        let (na, nb) = (dag.next_on(node, a), dag.next_on(node, b));
        if let (Some(x), Some(y)) = (na, nb) {
            if x == y {
                if let Canon::Zz {
                    a: a2,
                    b: b2,
                    theta: t2,
                } = dag.graph[x]
                {
                    dag.graph[x] = Canon::Zz {
                        a: a2,
                        b: b2,
                        theta: t2 + theta,
                    };
                    dag.remove(node);
                }
            }
        }
    }
}

/// A pass over the DAG.
pub type Pass = fn(&mut Dag);

/// Every pass, in the order the optimizer runs them (the one list to extend).
pub const PASSES: &[(&str, Pass)] = &[
    ("fuse_locals", fuse_locals),
    ("merge_interactions", merge_interactions),
    ("pair_runs", super::pair_runs::pair_runs),
    ("fuse_locals_between", fuse_locals),
    ("merge_interactions_again", merge_interactions),
    ("fuse_locals_again", fuse_locals),
];

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    /// Random lists of single-qubit unitaries (some the identity, some Z rotations
    /// that only the merge of interactions around them brings together) and ZZ
    /// interactions (some of angle 0 mod 2 pi, some repeated on one pair), through
    /// every pass. Afterwards no local is followed on its wire by another local and
    /// none is the identity, so fusion forced to run once more (its skip undone)
    /// removes nothing: the skip of the last fusion, taken when no node went since
    /// the one before, lost no fusion.
    #[test]
    fn after_the_passes_fusion_has_nothing_left() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xf05e);
        let identity = crate::native::rotation(0.0, 0.0);
        // Rounds whose last fusion ran, and whose last fusion was skipped.
        let mut skipped = [0; 2];
        for round in 0..400 {
            let n = rng.gen_range(2..=4u32);
            let ops: Vec<Canon> = (0..rng.gen_range(1..40))
                .map(|_| {
                    let q = rng.gen_range(0..n);
                    let p = (q + rng.gen_range(1..n)) % n;
                    match rng.gen_range(0..6) {
                        0 => Canon::Local { q, m: identity },
                        1 => Canon::Local {
                            q,
                            m: crate::native::rotation(rng.gen_range(-3.0..3.0), 0.3),
                        },
                        2 => Canon::Zz {
                            a: q,
                            b: p,
                            theta: std::f64::consts::TAU,
                        },
                        3 => Canon::Zz {
                            a: 0,
                            b: 1,
                            theta: rng.gen_range(-1.0..1.0),
                        },
                        _ => Canon::Zz {
                            a: q,
                            b: p,
                            theta: rng.gen_range(-1.0..1.0),
                        },
                    }
                })
                .collect();
            let mut dag = Dag::new(ops);
            for &(name, pass) in PASSES {
                if name == "fuse_locals_again" {
                    skipped[usize::from(dag.fused_at == Some(dag.removed))] += 1;
                }
                pass(&mut dag);
            }
            for node in dag.graph.node_indices() {
                if let Canon::Local { q, m } = dag.graph[node] {
                    assert!(!is_identity(&m), "round {round}: an identity is left");
                    let next = dag.next_on(node, q).map(|x| dag.graph[x]);
                    assert!(
                        !matches!(next, Some(Canon::Local { .. })),
                        "round {round}: two locals side by side on qubit {q}"
                    );
                }
            }
            let before = dag.graph.node_count();
            dag.fused_at = None;
            fuse_locals(&mut dag);
            assert_eq!(dag.graph.node_count(), before, "round {round}");
        }
        // Both happen (else the skip, or the case it must not take, went untested).
        assert!(skipped[0] > 20 && skipped[1] > 20, "{skipped:?}");
    }
}
