//! The canonical form of one segment as a DAG (petgraph): a node per single-qubit
//! unitary or ZZ interaction, an edge per qubit wire from an operation to the next
//! one on that wire. Passes are plain functions over it.
//!
//! Invariant: each node has a place in program order, and places increase along
//! every edge (nodes are added in program order; passes remove nodes, rewire around
//! removed ones, or put a run's replacement where the run's last node stood: see
//! [`Dag::replace`]), so walking the live nodes by place is a topological order; and
//! the product of the nodes in that order is the segment's unitary up to global
//! phase, after every pass.

use crate::circuit::Mat2;
use crate::compile::lower::Canon;
use petgraph::stable_graph::{NodeIndex, StableDiGraph};
use petgraph::Direction;

/// Entries this close to zero count as zero when classifying a 2x2 unitary.
pub const ZERO: f64 = 1e-13;

/// Places between two built nodes, for a replacement put after the first.
const SPACING: u64 = 1 << 16;

/// One segment's canonical operations (no measurement, reset or condition).
pub struct Dag {
    pub graph: StableDiGraph<Canon, u32>,
    /// Each node's place, by node index: a built node's index times [`SPACING`], a
    /// replacement's just after the place of the node it follows.
    place: Vec<u64>,
    /// Nodes removed so far, and how many had been when [`fuse_locals`] last
    /// finished: if none since, no local is next to another or the identity (it
    /// fused them all, and only a removal can bring two together again), so it
    /// has nothing to do.
    removed: u64,
    fused_at: Option<u64>,
}

impl Dag {
    /// Builds the DAG of `ops` (each a `Local` or `Zz`), with each run of
    /// single-qubit unitaries on a wire already one node: what [`fuse_locals`]
    /// makes of it, without making the nodes it would remove.
    pub fn new(ops: impl IntoIterator<Item = Canon>) -> Dag {
        let ops = fused(ops);
        Dag::build(ops.len(), ops.into_iter().flatten(), Some(0))
    }

    /// The DAG of `ops` as they are, for comparing with [`Dag::new`].
    #[cfg(test)]
    fn unfused(ops: Vec<Canon>) -> Dag {
        Dag::build(ops.len(), ops.into_iter(), None)
    }

    fn build(hint: usize, ops: impl Iterator<Item = Canon>, fused_at: Option<u64>) -> Dag {
        // At most two wires per operation: two edges in.
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
        let place = (0..graph.node_count() as u64)
            .map(|k| k * SPACING)
            .collect();
        Dag {
            graph,
            place,
            removed: 0,
            fused_at,
        }
    }

    /// Rebuilds the graph from its operations in order when it holds a
    /// replacement's nodes, so that every node is a built one again and a run may
    /// end anywhere (see [`Dag::replace`]). Fusion's state carries over: the
    /// operations are the same.
    pub fn settle(&mut self) {
        if self
            .graph
            .node_indices()
            .all(|i| self.place[i.index()] % SPACING == 0)
        {
            return;
        }
        let ops = self.ops();
        let (removed, fused_at) = (self.removed, self.fused_at);
        *self = Dag::build(ops.len(), ops.into_iter(), fused_at);
        self.removed = removed;
    }

    /// The live nodes in a topological order (by place). Built nodes come in
    /// order of index, which is their order of place; the few replacements' nodes
    /// (in slots of any index) are sorted apart and merged in.
    pub fn nodes(&self) -> Vec<NodeIndex> {
        let place = |i: &NodeIndex| self.place[i.index()];
        let mut built = Vec::with_capacity(self.graph.node_count());
        let mut put = Vec::new();
        for i in self.graph.node_indices() {
            if place(&i) % SPACING == 0 {
                built.push(i);
            } else {
                put.push(i);
            }
        }
        if put.is_empty() {
            return built;
        }
        put.sort_unstable_by_key(place);
        let mut out = Vec::with_capacity(built.len() + put.len());
        let mut put = put.into_iter().peekable();
        for b in built {
            while let Some(p) = put.next_if(|p| place(p) < place(&b)) {
                out.push(p);
            }
            out.push(b);
        }
        out.extend(put);
        out
    }

    /// The operations in a topological order (by place).
    pub fn ops(&self) -> Vec<Canon> {
        self.nodes().into_iter().map(|i| self.graph[i]).collect()
    }

    /// Replaces the nodes of `run` (in order) by `new`, put where the run's last
    /// node stood: the caller's promise is that `new` is the run's product and
    /// acts on the run's wires only, and that every node on those wires between
    /// the run's first and last is in it. Each wire's node before the run then
    /// leads into `new`, and `new` into the wire's node after the run.
    pub fn replace(&mut self, run: &[NodeIndex], new: &[Canon]) {
        let Some(&last) = run.last() else {
            return;
        };
        let at = self.place[last.index()];
        // Built nodes only: two replacements after one node would share places
        // ([`Dag::settle`] makes every node a built one).
        assert!(
            at % SPACING == 0 && (new.len() as u64) < SPACING,
            "a replacement after a replacement, or too long"
        );
        // Each wire's node before the run (then the last of `new` on it so far)
        // and after it.
        type End = (u32, Option<NodeIndex>, Option<NodeIndex>);
        let mut ends: smallvec::SmallVec<[End; 2]> = smallvec::SmallVec::new();
        for &node in run {
            for q in qubits(&self.graph[node]) {
                match ends.iter_mut().find(|e| e.0 == q) {
                    Some(e) => e.2 = self.next_on(node, q),
                    None => ends.push((q, self.prev_on(node, q), self.next_on(node, q))),
                }
            }
        }
        for &node in run {
            self.graph.remove_node(node);
        }
        self.removed += run.len() as u64;
        for (k, &op) in new.iter().enumerate() {
            let node = self.graph.add_node(op);
            let slot = node.index();
            if slot >= self.place.len() {
                self.place.resize(slot + 1, 0);
            }
            self.place[slot] = at + 1 + k as u64;
            for q in qubits(&op) {
                let e = ends
                    .iter_mut()
                    .find(|e| e.0 == q)
                    .expect("the replacement acts on the run's wires");
                if let Some(p) = e.1.replace(node) {
                    self.graph.add_edge(p, node, q);
                }
            }
        }
        for &(q, before, after) in &ends {
            if let (Some(p), Some(n)) = (before, after) {
                self.graph.add_edge(p, n, q);
            }
        }
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

/// `ops` with each run of single-qubit unitaries on a wire multiplied into its last
/// one (the others become `None`) and a run whose product is the identity dropped:
/// the list [`fuse_locals`] leaves of a DAG of `ops`, with the products in the same
/// places (the run's last) and multiplied in the same order, reached in one pass
/// over the list.
fn fused(ops: impl IntoIterator<Item = Canon>) -> Vec<Option<Canon>> {
    let ops = ops.into_iter();
    let mut out: Vec<Option<Canon>> = Vec::with_capacity(ops.size_hint().0);
    // The place in `out` of the product so far of each wire's open run.
    let mut open: Vec<Option<usize>> = Vec::new();
    let close = |out: &mut Vec<Option<Canon>>, at: Option<usize>| {
        if let Some(k) = at {
            if matches!(out[k], Some(Canon::Local { m, .. }) if is_identity(&m)) {
                out[k] = None;
            }
        }
    };
    for op in ops {
        if let Canon::Local { q, m } = op {
            let q_at = q as usize;
            if q_at >= open.len() {
                open.resize(q_at + 1, None);
            }
            let m = match open[q_at].and_then(|k| out[k].take()) {
                Some(Canon::Local { m: before, .. }) => mul(&m, &before),
                _ => m,
            };
            open[q_at] = Some(out.len());
            out.push(Some(Canon::Local { q, m }));
            continue;
        }
        for q in qubits(&op) {
            if let Some(at) = open.get_mut(q as usize) {
                close(&mut out, at.take());
            }
        }
        out.push(Some(op));
    }
    for at in open {
        close(&mut out, at);
    }
    out
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
    for node in dag.nodes() {
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
    for node in dag.nodes() {
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

    /// A random list of single-qubit unitaries (some the identity, some Z rotations
    /// that only the merge of interactions around them brings together) and ZZ
    /// interactions (some of angle 0 mod 2 pi, some repeated on one pair) on 2 to
    /// 4 qubits.
    fn random_ops(rng: &mut impl Rng) -> Vec<Canon> {
        let identity = crate::native::rotation(0.0, 0.0);
        let n = rng.gen_range(2..=4u32);
        (0..rng.gen_range(1..40))
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
            .collect()
    }

    /// Building the DAG fuses what [`fuse_locals`] fuses, to the bit: 400 random
    /// lists built fused and built as they are and then fused give the same
    /// operations in the same order (same products, same places, identities gone).
    #[test]
    fn building_fuses_as_the_pass_does() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xb17d);
        let mut fewer = 0;
        for round in 0..400 {
            let ops = random_ops(&mut rng);
            let built = Dag::new(ops.clone());
            let mut plain = Dag::unfused(ops.clone());
            fuse_locals(&mut plain);
            let (a, b) = (built.ops(), plain.ops());
            assert_eq!(a.len(), b.len(), "round {round}");
            for (x, y) in a.iter().zip(&b) {
                let same = match (x, y) {
                    (Canon::Local { q, m }, Canon::Local { q: q2, m: m2 }) => q == q2 && m == m2,
                    (
                        Canon::Zz { a, b, theta },
                        Canon::Zz {
                            a: a2,
                            b: b2,
                            theta: t2,
                        },
                    ) => (a, b) == (a2, b2) && theta.to_bits() == t2.to_bits(),
                    _ => false,
                };
                assert!(same, "round {round}: {x:?} vs {y:?}");
            }
            fewer += usize::from(a.len() < ops.len());
        }
        // Most rounds fuse something (else the comparison compared nothing).
        assert!(fewer > 300, "{fewer}");
    }

    /// Replacing runs keeps the order and the wires: on 300 random lists, up to
    /// three disjoint runs (from an interaction on a pair, every operation on the
    /// pair's wires until one that also touches another wire) are each replaced by
    /// a random list on the pair. The DAG's order is then the list with each run
    /// taken out and its replacement put where its last operation stood, and every
    /// node's predecessor on each of its wires is the operation before it on that
    /// wire in that order.
    #[test]
    fn replacing_runs_keeps_order_and_wires() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5e7);
        let on = |op: &Canon, q: u32| qubits(op).contains(&q);
        let mut replaced = 0;
        for round in 0..300 {
            let ops = random_ops(&mut rng);
            let mut dag = Dag::unfused(ops.clone());
            let built = dag.nodes();
            // The expected order: (original index or none, op), rebuilt per run.
            let mut want: Vec<(Option<usize>, Canon)> =
                ops.iter().enumerate().map(|(k, &o)| (Some(k), o)).collect();
            let mut taken = vec![false; ops.len()];
            for _ in 0..3 {
                let start = rng.gen_range(0..ops.len());
                let Canon::Zz { a, b, .. } = ops[start] else {
                    continue;
                };
                if taken[start] {
                    continue;
                }
                let mut run = vec![start];
                for (k, op) in ops.iter().enumerate().skip(start + 1) {
                    let ours = qubits(op).iter().all(|&q| q == a || q == b);
                    if !(on(op, a) || on(op, b)) {
                        continue;
                    }
                    if !ours || taken[k] {
                        break;
                    }
                    run.push(k);
                }
                let new: Vec<Canon> = (0..rng.gen_range(0..5))
                    .map(|_| match rng.gen_range(0..3) {
                        0 => Canon::Zz {
                            a,
                            b,
                            theta: rng.gen_range(-1.0..1.0),
                        },
                        1 => Canon::Local {
                            q: a,
                            m: crate::native::rotation(rng.gen_range(-3.0..3.0), 0.1),
                        },
                        _ => Canon::Local {
                            q: b,
                            m: crate::native::rotation(rng.gen_range(-3.0..3.0), 0.2),
                        },
                    })
                    .collect();
                let last = *run.last().expect("a start");
                let at = want
                    .iter()
                    .position(|w| w.0 == Some(last))
                    .expect("in the list");
                want.splice(at + 1..at + 1, new.iter().map(|&o| (None, o)));
                want.retain(|w| !w.0.is_some_and(|k| run.contains(&k)));
                for &k in &run {
                    taken[k] = true;
                }
                let nodes: Vec<NodeIndex> = run.iter().map(|&k| built[k]).collect();
                dag.replace(&nodes, &new);
                replaced += 1;
            }
            let order = dag.nodes();
            let got: Vec<Canon> = order.iter().map(|&x| dag.graph[x]).collect();
            let want: Vec<Canon> = want.into_iter().map(|w| w.1).collect();
            assert_eq!(got, want, "round {round}");
            for (k, &node) in order.iter().enumerate() {
                for q in qubits(&dag.graph[node]) {
                    let before = order[..k].iter().rev().find(|&&x| on(&dag.graph[x], q));
                    assert_eq!(dag.prev_on(node, q), before.copied(), "round {round}");
                }
            }
            assert_eq!(dag.graph.edge_count(), {
                let per_wire = |q: u32| order.iter().filter(|&&x| on(&dag.graph[x], q)).count();
                (0..4).map(|q| per_wire(q).saturating_sub(1)).sum::<usize>()
            });
        }
        assert!(replaced > 200, "{replaced}");
    }

    /// Random lists (as [`random_ops`]) through every pass. Afterwards no local is
    /// followed on its wire by another local and none is the identity, so fusion
    /// forced to run once more (its skip undone) removes nothing: the skip of the
    /// last fusion, taken when no node went since the one before, lost no fusion.
    #[test]
    fn after_the_passes_fusion_has_nothing_left() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xf05e);
        // Rounds whose last fusion ran, and whose last fusion was skipped.
        let mut skipped = [0; 2];
        for round in 0..400 {
            let ops = random_ops(&mut rng);
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
