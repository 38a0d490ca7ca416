//! Hadamard matrices for sign-vector echoes.
//!
//! Constructions (each checked to give `H H^T = m I` when built): Sylvester's
//! doubling, Paley I (order `q + 1` for a prime `q = 3 mod 4`) and Paley II (order
//! `2(q + 1)` for a prime `q = 1 mod 4`), and doubling of those (Paley, "On
//! orthogonal matrices", J. Math. Phys. 12, 311, 1933; common practice).

/// A Hadamard matrix of order `m` as rows of `+1/-1`.
pub type Hadamard = Vec<Vec<i8>>;

fn is_prime(q: usize) -> bool {
    q >= 2 && (2..).take_while(|d| d * d <= q).all(|d| q % d != 0)
}

/// The quadratic character modulo a prime `q`: 0, 1 or -1.
fn chi(a: usize, q: usize) -> i8 {
    let a = a % q;
    if a == 0 {
        return 0;
    }
    if (1..q).any(|x| x * x % q == a) {
        1
    } else {
        -1
    }
}

fn sylvester(m: usize) -> Hadamard {
    let mut h: Hadamard = vec![vec![1]];
    while h.len() < m {
        h = double(&h);
    }
    h
}

fn double(h: &Hadamard) -> Hadamard {
    let n = h.len();
    let mut out = vec![vec![0i8; 2 * n]; 2 * n];
    for i in 0..n {
        for j in 0..n {
            out[i][j] = h[i][j];
            out[i][j + n] = h[i][j];
            out[i + n][j] = h[i][j];
            out[i + n][j + n] = -h[i][j];
        }
    }
    out
}

/// Jacobsthal matrix `Q[i][j] = chi(j - i)`.
fn jacobsthal(q: usize) -> Vec<Vec<i8>> {
    (0..q)
        .map(|i| (0..q).map(|j| chi(j + q - i, q)).collect())
        .collect()
}

fn paley1(q: usize) -> Hadamard {
    let jq = jacobsthal(q);
    let m = q + 1;
    let mut h = vec![vec![0i8; m]; m];
    for j in 0..m {
        h[0][j] = 1;
    }
    for i in 1..m {
        h[i][0] = -1;
        for j in 1..m {
            h[i][j] = jq[i - 1][j - 1] + if i == j { 1 } else { 0 };
        }
    }
    h
}

fn paley2(q: usize) -> Hadamard {
    let jq = jacobsthal(q);
    let n = q + 1;
    // C = [[0, 1^T], [1, Q]], symmetric conference matrix; replace 0 by
    // [[1,-1],[-1,-1]] and +-1 by +-[[1,1],[1,-1]].
    let mut c = vec![vec![0i8; n]; n];
    for j in 1..n {
        c[0][j] = 1;
        c[j][0] = 1;
    }
    for i in 1..n {
        for j in 1..n {
            c[i][j] = jq[i - 1][j - 1];
        }
    }
    let mut h = vec![vec![0i8; 2 * n]; 2 * n];
    for i in 0..n {
        for j in 0..n {
            let block: [[i8; 2]; 2] = match c[i][j] {
                0 => [[1, -1], [-1, -1]],
                s => [[s, s], [s, -s]],
            };
            for a in 0..2 {
                for b in 0..2 {
                    h[2 * i + a][2 * j + b] = block[a][b];
                }
            }
        }
    }
    h
}

/// True when `h h^T = m I`.
pub fn is_hadamard(h: &Hadamard) -> bool {
    let m = h.len();
    h.iter().all(|r| r.len() == m)
        && (0..m).all(|i| {
            (0..m).all(|j| {
                let dot: i32 = (0..m).map(|k| h[i][k] as i32 * h[j][k] as i32).sum();
                dot == if i == j { m as i32 } else { 0 }
            })
        })
}

/// How a Hadamard matrix of some order is made.
enum Plan {
    Sylvester,
    Paley1(usize),
    Paley2(usize),
    /// `[[H, H], [H, -H]]` from the matrix of half the order.
    Double,
}

/// Which construction gives order `m`, if one does (without building it).
fn plan(m: usize) -> Option<Plan> {
    if m == 1 || m == 2 {
        return Some(Plan::Sylvester);
    }
    if m % 4 != 0 {
        return None;
    }
    if m.is_power_of_two() {
        return Some(Plan::Sylvester);
    }
    let q = m - 1;
    if is_prime(q) && q % 4 == 3 {
        return Some(Plan::Paley1(q));
    }
    let q = m / 2 - 1;
    if is_prime(q) && q % 4 == 1 {
        return Some(Plan::Paley2(q));
    }
    plan(m / 2).map(|_| Plan::Double)
}

/// A Hadamard matrix of order `m`, if one of the constructions above gives it.
pub fn hadamard_of_order(m: usize) -> Option<Hadamard> {
    Some(match plan(m)? {
        Plan::Sylvester => sylvester(m),
        Plan::Paley1(q) => paley1(q),
        Plan::Paley2(q) => paley2(q),
        Plan::Double => double(&hadamard_of_order(m / 2)?),
    })
}

/// The order of [`smallest_hadamard`]`(k)`, without building it.
pub fn smallest_order(k: usize) -> usize {
    (k.max(1)..)
        .find(|&m| plan(m).is_some())
        .expect("orders 2^j exist")
}

/// The smallest constructible Hadamard matrix of order at least `k`. Each order is
/// built once per process and shared (a block's echo asks for one, and a long
/// circuit has tens of thousands of blocks).
pub fn smallest_hadamard(k: usize) -> std::sync::Arc<Hadamard> {
    use std::collections::HashMap;
    use std::sync::{Arc, Mutex, OnceLock};
    static BUILT: OnceLock<Mutex<HashMap<usize, Arc<Hadamard>>>> = OnceLock::new();
    let m = smallest_order(k);
    let built = BUILT.get_or_init(Default::default);
    if let Some(h) = built.lock().expect("hadamard cache").get(&m) {
        return Arc::clone(h);
    }
    let h = Arc::new(hadamard_of_order(m).expect("the order has a construction"));
    built
        .lock()
        .expect("hadamard cache")
        .entry(m)
        .or_insert(h)
        .clone()
}
