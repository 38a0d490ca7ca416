//! The gate library: every gate of the OpenQASM 2 standard library (arXiv:1707.03429,
//! `qelib1.inc`) and the gates real files use beyond it, each with an exact matrix.
//!
//! Matrix convention, used everywhere in tutti: a gate applied to arguments
//! `(a0, a1, ..., a_{k-1})` has a `2^k x 2^k` matrix whose basis index has bit `i`
//! equal to the state of argument `i`. Argument 0 is the least significant bit. For
//! `cx c, t` the control is bit 0, so `|c=1, t=0>` is index 1 and maps to index 3.

use nalgebra::DMatrix;
use num_complex::Complex64 as C64;
use std::f64::consts::{FRAC_1_SQRT_2, PI};

pub use super::mat2::Mat2;

macro_rules! gate_kinds {
    ($( $variant:ident => $name:literal, $params:literal, $qubits:literal; )*) => {
        /// The kinds of library gates. Names are those of the OpenQASM 2 files.
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
        pub enum GateKind { $( $variant, )* }

        impl GateKind {
            /// Every library gate, in a fixed order.
            pub const ALL: &'static [GateKind] = &[ $( GateKind::$variant, )* ];

            /// The name by which OpenQASM 2 files call this gate.
            pub fn name(self) -> &'static str {
                match self { $( GateKind::$variant => $name, )* }
            }

            /// Looks a library gate up by its file name (`U` and `CX` are the built-ins).
            pub fn from_name(name: &str) -> Option<GateKind> {
                match name { $( $name => Some(GateKind::$variant), )* _ => None }
            }

            /// Number of real parameters.
            pub fn n_params(self) -> usize {
                match self { $( GateKind::$variant => $params, )* }
            }

            /// Number of qubit arguments.
            pub fn n_qubits(self) -> usize {
                match self { $( GateKind::$variant => $qubits, )* }
            }
        }
    };
}

gate_kinds! {
    BuiltinU => "U", 3, 1;
    BuiltinCx => "CX", 0, 2;
    Id => "id", 0, 1;
    X => "x", 0, 1;
    Y => "y", 0, 1;
    Z => "z", 0, 1;
    H => "h", 0, 1;
    S => "s", 0, 1;
    Sdg => "sdg", 0, 1;
    T => "t", 0, 1;
    Tdg => "tdg", 0, 1;
    Sx => "sx", 0, 1;
    Sxdg => "sxdg", 0, 1;
    Rx => "rx", 1, 1;
    Ry => "ry", 1, 1;
    Rz => "rz", 1, 1;
    U1 => "u1", 1, 1;
    P => "p", 1, 1;
    U2 => "u2", 2, 1;
    U3 => "u3", 3, 1;
    U => "u", 3, 1;
    Cx => "cx", 0, 2;
    Cy => "cy", 0, 2;
    Cz => "cz", 0, 2;
    Ch => "ch", 0, 2;
    Swap => "swap", 0, 2;
    Crx => "crx", 1, 2;
    Cry => "cry", 1, 2;
    Crz => "crz", 1, 2;
    Cu1 => "cu1", 1, 2;
    Cp => "cp", 1, 2;
    Cu3 => "cu3", 3, 2;
    Rxx => "rxx", 1, 2;
    Ryy => "ryy", 1, 2;
    Rzz => "rzz", 1, 2;
    Ccx => "ccx", 0, 3;
    Cswap => "cswap", 0, 3;
    Rccx => "rccx", 0, 3;
    C3x => "c3x", 0, 4;
    C4x => "c4x", 0, 5;
}

/// Names that the 2017 `qelib1.inc` of arXiv:1707.03429 itself defines. A file may not
/// redefine these after including the library; the other library names may be
/// shadowed by a file's own definition (older files define e.g. `rzz` themselves).
pub const QELIB1_2017: &[&str] = &[
    "u3", "u2", "u1", "cx", "id", "x", "y", "z", "h", "s", "sdg", "t", "tdg", "rx", "ry", "rz",
    "cz", "cy", "ch", "ccx", "crz", "cu1", "cu3",
];

impl GateKind {
    /// True for gates whose matrix is diagonal for every parameter value.
    pub fn is_diagonal(self) -> bool {
        use GateKind::*;
        matches!(
            self,
            Id | Z | S | Sdg | T | Tdg | Rz | U1 | P | Cz | Crz | Cu1 | Cp | Rzz
        )
    }
}

/// A library gate with its parameter values. Unused parameter slots are zero.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gate {
    pub kind: GateKind,
    pub params: [f64; 3],
}

fn c(re: f64, im: f64) -> C64 {
    C64::new(re, im)
}

fn cis(phase: f64) -> C64 {
    C64::from_polar(1.0, phase)
}

/// The standard's `U(theta, phi, lambda)` written as the matrix
/// `[[cos, -e^{i lambda} sin], [e^{i phi} sin, e^{i(phi+lambda)} cos]]` (half angles).
/// It equals `Rz(phi) Ry(theta) Rz(lambda)` of arXiv:1707.03429 up to the global
/// phase `e^{i(phi+lambda)/2}`.
pub fn u3_matrix(theta: f64, phi: f64, lambda: f64) -> Mat2 {
    let (s, co) = (theta / 2.0).sin_cos();
    [
        [c(co, 0.0), -cis(lambda) * s],
        [cis(phi) * s, cis(phi + lambda) * co],
    ]
}

/// `Rz(phi) Ry(theta) Rz(lambda)` with `Rz(a) = diag(e^{-ia/2}, e^{ia/2})`, exactly as
/// the standard defines `U`; this is the operator that `cu3` controls (see grammar/).
pub fn zyz_matrix(theta: f64, phi: f64, lambda: f64) -> Mat2 {
    let m = u3_matrix(theta, phi, lambda);
    let ph = cis(-(phi + lambda) / 2.0);
    [[m[0][0] * ph, m[0][1] * ph], [m[1][0] * ph, m[1][1] * ph]]
}

fn diag2(a: C64, b: C64) -> Mat2 {
    let z = C64::new(0.0, 0.0);
    [[a, z], [z, b]]
}

impl Gate {
    pub fn new(kind: GateKind, params: &[f64]) -> Gate {
        let mut p = [0.0; 3];
        for (slot, v) in p.iter_mut().zip(params) {
            *slot = *v;
        }
        Gate { kind, params: p }
    }

    /// The parameters that this gate kind uses.
    pub fn params(&self) -> &[f64] {
        &self.params[..self.kind.n_params()]
    }

    /// The 2x2 matrix of a single-qubit gate; `None` for multi-qubit gates.
    pub fn matrix2(&self) -> Option<Mat2> {
        use GateKind::*;
        let [a, b, cc] = self.params;
        let one = c(1.0, 0.0);
        let r = FRAC_1_SQRT_2;
        Some(match self.kind {
            BuiltinU | U3 | U => u3_matrix(a, b, cc),
            Id => diag2(one, one),
            X => [[c(0.0, 0.0), one], [one, c(0.0, 0.0)]],
            Y => [[c(0.0, 0.0), c(0.0, -1.0)], [c(0.0, 1.0), c(0.0, 0.0)]],
            Z => diag2(one, -one),
            H => [[c(r, 0.0), c(r, 0.0)], [c(r, 0.0), c(-r, 0.0)]],
            S => diag2(one, c(0.0, 1.0)),
            Sdg => diag2(one, c(0.0, -1.0)),
            T => diag2(one, cis(PI / 4.0)),
            Tdg => diag2(one, cis(-PI / 4.0)),
            Sx => [[c(0.5, 0.5), c(0.5, -0.5)], [c(0.5, -0.5), c(0.5, 0.5)]],
            Sxdg => [[c(0.5, -0.5), c(0.5, 0.5)], [c(0.5, 0.5), c(0.5, -0.5)]],
            Rx => {
                let (s, co) = (a / 2.0).sin_cos();
                [[c(co, 0.0), c(0.0, -s)], [c(0.0, -s), c(co, 0.0)]]
            }
            Ry => {
                let (s, co) = (a / 2.0).sin_cos();
                [[c(co, 0.0), c(-s, 0.0)], [c(s, 0.0), c(co, 0.0)]]
            }
            Rz => diag2(cis(-a / 2.0), cis(a / 2.0)),
            U1 | P => diag2(one, cis(a)),
            U2 => u3_matrix(PI / 2.0, a, b),
            _ => return None,
        })
    }

    /// For gates of the form "controlled on all arguments but the last, apply a 2x2 to
    /// the last": the number of controls and the 2x2. `None` for other gates.
    pub fn controlled(&self) -> Option<(usize, Mat2)> {
        use GateKind::*;
        let [a, b, cc] = self.params;
        let on = |kind: GateKind, params: &[f64]| Gate::new(kind, params).matrix2().unwrap();
        Some(match self.kind {
            BuiltinCx | Cx => (1, on(X, &[])),
            Cy => (1, on(Y, &[])),
            Cz => (1, on(Z, &[])),
            Ch => (1, on(H, &[])),
            Crx => (1, on(Rx, &[a])),
            Cry => (1, on(Ry, &[a])),
            Crz => (1, on(Rz, &[a])),
            Cu1 | Cp => (1, on(U1, &[a])),
            Cu3 => (1, zyz_matrix(a, b, cc)),
            Ccx => (2, on(X, &[])),
            C3x => (3, on(X, &[])),
            C4x => (4, on(X, &[])),
            _ => return None,
        })
    }

    /// The exact matrix in the convention of this module (argument 0 is bit 0).
    pub fn matrix(&self) -> DMatrix<C64> {
        use GateKind::*;
        if let Some(m) = self.matrix2() {
            return DMatrix::from_fn(2, 2, |i, j| m[i][j]);
        }
        if let Some((n_controls, m)) = self.controlled() {
            let n = n_controls + 1;
            let dim = 1 << n;
            let ctrl_mask = (1usize << n_controls) - 1;
            let t = n_controls;
            return DMatrix::from_fn(dim, dim, |i, j| {
                if i & ctrl_mask == ctrl_mask && j & ctrl_mask == ctrl_mask {
                    if i & !(1 << t) == j & !(1 << t) {
                        m[(i >> t) & 1][(j >> t) & 1]
                    } else {
                        C64::new(0.0, 0.0)
                    }
                } else if i == j {
                    C64::new(1.0, 0.0)
                } else {
                    C64::new(0.0, 0.0)
                }
            });
        }
        let theta = self.params[0];
        let zero = C64::new(0.0, 0.0);
        match self.kind {
            Swap => DMatrix::from_fn(4, 4, |i, j| {
                let swapped = ((j & 1) << 1) | (j >> 1);
                if i == swapped {
                    C64::new(1.0, 0.0)
                } else {
                    zero
                }
            }),
            Cswap => DMatrix::from_fn(8, 8, |i, j| {
                let image = if j & 1 == 1 {
                    let (b1, b2) = ((j >> 1) & 1, (j >> 2) & 1);
                    1 | (b2 << 1) | (b1 << 2)
                } else {
                    j
                };
                if i == image {
                    C64::new(1.0, 0.0)
                } else {
                    zero
                }
            }),
            Rzz => DMatrix::from_fn(4, 4, |i, j| {
                if i != j {
                    return zero;
                }
                let parity = ((i & 1) ^ (i >> 1)) as f64;
                cis(-theta / 2.0 * (1.0 - 2.0 * parity))
            }),
            Rxx | Ryy => {
                // exp(-i theta/2 P P) = cos(theta/2) I - i sin(theta/2) P P.
                let pauli = if self.kind == Rxx {
                    Gate::new(X, &[]).matrix2().unwrap()
                } else {
                    Gate::new(Y, &[]).matrix2().unwrap()
                };
                let (s, co) = (theta / 2.0).sin_cos();
                DMatrix::from_fn(4, 4, |i, j| {
                    let pp = pauli[i & 1][j & 1] * pauli[i >> 1][j >> 1];
                    let id = if i == j { C64::new(co, 0.0) } else { zero };
                    id + C64::new(0.0, -s) * pp
                })
            }
            Rccx => rccx_matrix(),
            _ => unreachable!("every gate kind has a matrix"),
        }
    }
}

/// `rccx a, b, c` as the later `qelib1.inc` defines it (body from memory):
/// `u2(0,pi) c; u1(pi/4) c; cx b,c; u1(-pi/4) c; cx a,c; u1(pi/4) c; cx b,c;
/// u1(-pi/4) c; u2(0,pi) c;`. Composed here from the exact matrices above.
fn rccx_matrix() -> DMatrix<C64> {
    use GateKind::*;
    let body: [(GateKind, f64, &[usize]); 9] = [
        (U2, 0.0, &[2]),
        (U1, PI / 4.0, &[2]),
        (Cx, 0.0, &[1, 2]),
        (U1, -PI / 4.0, &[2]),
        (Cx, 0.0, &[0, 2]),
        (U1, PI / 4.0, &[2]),
        (Cx, 0.0, &[1, 2]),
        (U1, -PI / 4.0, &[2]),
        (U2, 0.0, &[2]),
    ];
    let mut total = DMatrix::<C64>::identity(8, 8);
    for (kind, angle, args) in body {
        let params: &[f64] = if kind == U2 { &[0.0, PI] } else { &[angle] };
        let g = Gate::new(kind, params);
        total = embed(&g.matrix(), args, 3) * total;
    }
    total
}

/// ZYZ Euler angles: `m = e^{i alpha} Rz(beta) Ry(gamma) Rz(delta)`, returned as
/// `(alpha, beta, gamma, delta)` with `gamma` in `[0, pi]`.
pub fn zyz(m: &Mat2) -> (f64, f64, f64, f64) {
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    let alpha = det.arg() / 2.0;
    let ph = C64::from_polar(1.0, -alpha);
    let (a, b) = (m[0][0] * ph, m[1][0] * ph);
    // SU(2): [[e^{-i(beta+delta)/2} c, -e^{-i(beta-delta)/2} s], [e^{i(beta-delta)/2} s, e^{i(beta+delta)/2} c]].
    let gamma = 2.0 * b.norm().atan2(a.norm());
    let sum = if a.norm() > 1e-12 {
        -2.0 * a.arg()
    } else {
        0.0
    };
    let diff = if b.norm() > 1e-12 { 2.0 * b.arg() } else { 0.0 };
    let (beta, delta) = ((sum + diff) / 2.0, (sum - diff) / 2.0);
    (alpha, beta, gamma, delta)
}

/// Embeds a `2^k` matrix acting on `args` into the full `2^n` space.
/// Cost `O(4^n)`; meant for small `n` (tests and gate definitions).
pub fn embed(m: &DMatrix<C64>, args: &[usize], n: usize) -> DMatrix<C64> {
    let dim = 1usize << n;
    let mask: usize = args.iter().map(|a| 1usize << a).sum();
    let local = |idx: usize| -> usize {
        args.iter()
            .enumerate()
            .map(|(bit, &a)| ((idx >> a) & 1) << bit)
            .sum()
    };
    DMatrix::from_fn(dim, dim, |i, j| {
        if i & !mask != j & !mask {
            C64::new(0.0, 0.0)
        } else {
            m[(local(i), local(j))]
        }
    })
}
