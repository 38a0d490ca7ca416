//! Every path of the statevector kernels (serial and parallel, tiles and high-qubit
//! passes, the staged path for halves 2^24 apart, controlled gates on high qubits)
//! against plain loops written here, once with the vector kernels and once with
//! them switched off, so that the scalar fallback is exercised on a machine with
//! AVX2 too. The reference is the definition of a gate on a statevector (qubit 0 the
//! least significant bit; Nielsen and Chuang, section 4.2-4.3).

use num_complex::Complex64 as C;
use rand::{Rng, SeedableRng};
use tutti::sim::program::rotation;
use tutti::sim::{set_vector_kernels, StateVector};

type M2 = [[C; 2]; 2];

/// `m` on `target` wherever every control is 1: the textbook loop over indices.
fn plain_controlled(amps: &mut [C], controls: &[usize], target: usize, m: &M2) {
    let cmask: usize = controls.iter().map(|c| 1usize << c).sum();
    let t = 1usize << target;
    for i in 0..amps.len() {
        if i & t == 0 && i & cmask == cmask {
            let (x, y) = (amps[i], amps[i | t]);
            amps[i] = m[0][0] * x + m[0][1] * y;
            amps[i | t] = m[1][0] * x + m[1][1] * y;
        }
    }
}

/// A dense `2^k x 2^k` matrix on `qubits` (argument 0 = bit 0).
fn plain_dense(amps: &mut [C], qubits: &[usize], m: &nalgebra::DMatrix<C>) {
    let mask: usize = qubits.iter().map(|q| 1usize << q).sum();
    let dim = 1usize << qubits.len();
    for base in (0..amps.len()).filter(|i| i & mask == 0) {
        let index = |s: usize| {
            base + (0..qubits.len())
                .filter(|j| s >> j & 1 == 1)
                .map(|j| 1usize << qubits[j])
                .sum::<usize>()
        };
        let old: Vec<C> = (0..dim).map(|s| amps[index(s)]).collect();
        for r in 0..dim {
            amps[index(r)] = (0..dim).map(|c| m[(r, c)] * old[c]).sum();
        }
    }
}

fn worst(a: &[C], b: &[C]) -> f64 {
    assert_eq!(a.len(), b.len());
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).norm())
        .fold(0.0, f64::max)
}

fn random_mat2(rng: &mut impl Rng) -> M2 {
    let m = rotation(rng.gen_range(-3.0..3.0), rng.gen_range(-3.0..3.0));
    let z = tutti::sim::program::z_rotation(rng.gen_range(-3.0..3.0));
    let mut out = [[C::new(0.0, 0.0); 2]; 2];
    for i in 0..2 {
        for j in 0..2 {
            out[i][j] = m[i][0] * z[0][j] + m[i][1] * z[1][j];
        }
    }
    out
}

/// All kernels on an `n`-qubit state with the qubits given, against the plain loops.
fn every_kernel_against_plain_loops(n: usize, high: &[usize], rng: &mut impl Rng) {
    let start = StateVector::haar_random(n, rng);
    let m = random_mat2(rng);
    // A collective rotation on low and high qubits together (tiles and GROUP sets).
    let mut set: Vec<usize> = (0..n.min(5)).collect();
    for &q in high {
        if !set.contains(&q) {
            set.push(q);
        }
    }
    let mut fast = start.clone();
    fast.apply_same_to_all(&set, &m);
    let mut plain = start.amps.clone();
    for &q in &set {
        plain_controlled(&mut plain, &[], q, &m);
    }
    assert!(
        worst(&fast.amps, &plain) < 1e-10,
        "collective, n = {n}, set {set:?}"
    );
    // One qubit at a time on the high qubits (staged halves for q >= 24).
    for &q in high {
        let mut fast = start.clone();
        fast.apply_mat2(q, &m);
        let mut plain = start.amps.clone();
        plain_controlled(&mut plain, &[], q, &m);
        assert!(worst(&fast.amps, &plain) < 1e-12, "mat2 on {q}, n = {n}");
    }
    // Controlled gates with high controls and targets.
    let last = n - 1;
    for (controls, target) in [
        (vec![0usize], last),
        (vec![last], 0),
        (vec![last, 1], last - 1),
    ]
    .into_iter()
    .filter(|(c, t)| !c.contains(t))
    {
        let mut fast = start.clone();
        fast.apply_controlled(&controls, target, &m);
        let mut plain = start.amps.clone();
        plain_controlled(&mut plain, &controls, target, &m);
        assert!(
            worst(&fast.amps, &plain) < 1e-12,
            "controlled {controls:?} -> {target}, n = {n}"
        );
    }
    // A dense gate on a low and two high qubits.
    let qubits = [1, last, last - 2];
    let dense = nalgebra::DMatrix::from_fn(8, 8, |i, j| {
        C::new(((i * 8 + j) as f64 * 0.7).sin(), ((i + 3 * j) as f64).cos())
    });
    let mut fast = start.clone();
    fast.apply_dense(&qubits, &dense);
    let mut plain = start.amps.clone();
    plain_dense(&mut plain, &qubits, &dense);
    assert!(worst(&fast.amps, &plain) < 1e-10, "dense, n = {n}");
}

#[test]
fn kernels_match_plain_loops_with_and_without_vector_instructions() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5eed);
    for vector in [false, true] {
        set_vector_kernels(vector);
        for (n, high) in [
            (3usize, vec![2usize]),
            (15, vec![14]),
            (21, vec![14, 15, 16, 17, 18, 19, 20]),
        ] {
            every_kernel_against_plain_loops(n, &high, &mut rng);
        }
    }
    set_vector_kernels(true);
}

#[test]
fn kernels_match_plain_loops_at_25_qubits() {
    // Halves 2^24 apart take the staged path; 25 qubits hold 512 MiB per state.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(25);
    every_kernel_against_plain_loops(25, &[24, 20, 14], &mut rng);
}

type Call = Box<dyn Fn(&mut StateVector) + std::panic::RefUnwindSafe>;

// Bug: safe public functions wrote out of bounds for a qubit index >= n.
#[test]
fn a_qubit_outside_the_state_is_a_panic_not_a_write() {
    let s = StateVector::zero(4);
    let m = rotation(0.3, 0.1);
    let calls: Vec<Call> = vec![
        Box::new(move |s| s.apply_mat2(4, &m)),
        Box::new(move |s| s.apply_controlled(&[7], 0, &m)),
        Box::new(move |s| s.apply_controlled(&[1], 1, &m)),
        Box::new(move |s| s.apply_same_to_all(&[0, 1, 2, 9], &m)),
        Box::new(move |s| s.apply_same_to_all_direct(&[5], &m)),
        Box::new(move |s| s.apply_dense(&[0, 64], &nalgebra::DMatrix::identity(4, 4))),
        Box::new(move |s| s.apply_dense(&[0, 1], &nalgebra::DMatrix::identity(2, 2))),
        Box::new(move |s| {
            s.amps.truncate(3);
            s.apply_same_to_all(&[0, 1, 2, 3], &m)
        }),
    ];
    for (i, call) in calls.iter().enumerate() {
        let mut copy = s.clone();
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| call(&mut copy)));
        assert!(r.is_err(), "call {i} did not refuse");
    }
}
