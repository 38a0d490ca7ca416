//! Lowering: every library gate becomes single-qubit unitaries and ZZ interactions
//! (plus measure, reset and conditions), the canonical form of ARCHITECTURE.md.
//!
//! Invariant: the product of the canonical operations of a gate equals the gate up
//! to a global phase (checked in tests by the statevector checker). Decompositions:
//! - CZ and controlled phases as ZZ plus Z rotations (exact algebra, below);
//! - controlled-U as `C; CX; B; CX; A` with a phase on the control (Barenco et al.,
//!   PRA 52, 3457, 1995, Lemma 5.1; Nielsen and Chuang, Corollary 4.2), or with one
//!   CX when U is a reflection (`U = e^{ia} V X V^dagger`);
//! - Toffoli as in Nielsen and Chuang, Fig. 4.9 (six CNOTs);
//! - more controls by Barenco et al., Lemma 7.1 recursion with `V^2 = U`.

pub use crate::circuit::gates::zyz;
use crate::circuit::{Circuit, Condition, Gate, GateKind, Mat2, Op};
use num_complex::Complex64 as C64;
use std::f64::consts::{FRAC_PI_2, FRAC_PI_4, PI};

/// One operation of the canonical form.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Canon {
    /// Any single-qubit unitary.
    Local {
        q: u32,
        m: Mat2,
    },
    /// `exp(-i theta/2 Z_a Z_b)`, the same as `rzz(theta)`.
    Zz {
        a: u32,
        b: u32,
        theta: f64,
    },
    Measure {
        q: u32,
        clbit: u32,
    },
    Reset {
        q: u32,
    },
}

/// A canonical operation with the condition of the gate it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct CanonStep {
    pub op: Canon,
    pub condition: Option<Condition>,
    /// Index of the circuit instruction this operation came from.
    pub source: u32,
}

#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LowerError {
    #[error("gate `{0}` is opaque: tutti does not know its unitary and cannot compile it")]
    Opaque(String),
    #[error("out of memory lowering {instrs} instructions (about {bytes} bytes); lower --max-ops to be told sooner, or run where more memory is available")]
    OutOfMemory { instrs: usize, bytes: usize },
}

fn g(kind: GateKind, params: &[f64]) -> Mat2 {
    Gate::new(kind, params)
        .matrix2()
        .expect("single-qubit gate")
}

use crate::circuit::mat2::{adjoint, mul};

/// A square root of a 2x2 unitary: halves the rotation angle and the phase.
fn sqrt2(m: &Mat2) -> Mat2 {
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    let alpha = det.arg() / 2.0;
    let ph = C64::from_polar(1.0, -alpha);
    let su: Mat2 = [[m[0][0] * ph, m[0][1] * ph], [m[1][0] * ph, m[1][1] * ph]];
    // su = cos(t/2) I - i sin(t/2) n.sigma
    let c = ((su[0][0] + su[1][1]) / 2.0).re.clamp(-1.0, 1.0);
    let half = c.acos();
    let s = half.sin();
    let (nx, ny, nz) = if s.abs() < 1e-12 {
        (0.0, 0.0, 1.0)
    } else {
        let x = ((su[0][1] + su[1][0]) / 2.0 * C64::new(0.0, 1.0)).re / s;
        let y = ((su[1][0] - su[0][1]) / 2.0).re / s;
        let z = ((su[0][0] - su[1][1]) / 2.0 * C64::new(0.0, 1.0)).re / s;
        (x, y, z)
    };
    let (s2, c2) = (half / 2.0).sin_cos();
    let i = C64::new(0.0, 1.0);
    let r: Mat2 = [
        [C64::new(c2, 0.0) - i * s2 * nz, -i * s2 * C64::new(nx, -ny)],
        [-i * s2 * C64::new(nx, ny), C64::new(c2, 0.0) + i * s2 * nz],
    ];
    let p = C64::from_polar(1.0, alpha / 2.0);
    [[r[0][0] * p, r[0][1] * p], [r[1][0] * p, r[1][1] * p]]
}

struct Out<'a> {
    ops: &'a mut Vec<CanonStep>,
    condition: Option<Condition>,
    source: u32,
}

impl Out<'_> {
    fn local(&mut self, q: u32, m: Mat2) {
        self.ops.push(CanonStep {
            op: Canon::Local { q, m },
            condition: self.condition.clone(),
            source: self.source,
        });
    }
    fn zz(&mut self, a: u32, b: u32, theta: f64) {
        self.ops.push(CanonStep {
            op: Canon::Zz { a, b, theta },
            condition: self.condition.clone(),
            source: self.source,
        });
    }
    fn rz(&mut self, q: u32, t: f64) {
        self.local(q, g(GateKind::Rz, &[t]));
    }
    /// CZ = Rz_a(pi/2) Rz_b(pi/2) ZZ(-pi/2) up to phase, since
    /// CZ = exp(i pi/4 (1 - Z_a - Z_b + Z_a Z_b)).
    fn cz(&mut self, a: u32, b: u32) {
        self.cphase(a, b, PI);
    }
    /// diag(1,1,1,e^{i l}) = exp(i l/4 (1 - Z_a - Z_b + Z_a Z_b)).
    fn cphase(&mut self, a: u32, b: u32, l: f64) {
        self.zz(a, b, -l / 2.0);
        // One matrix for both (the same rotation).
        let half = g(GateKind::Rz, &[l / 2.0]);
        self.local(a, half);
        self.local(b, half);
    }
    fn cx(&mut self, c: u32, t: u32) {
        let h = g(GateKind::H, &[]);
        self.local(t, h);
        self.cz(c, t);
        self.local(t, h);
    }
    /// Controlled-`u` with one control.
    fn controlled(&mut self, c: u32, t: u32, u: &Mat2) {
        let det = u[0][0] * u[1][1] - u[0][1] * u[1][0];
        let alpha = det.arg() / 2.0;
        let ph = C64::from_polar(1.0, -alpha);
        let su: Mat2 = [[u[0][0] * ph, u[0][1] * ph], [u[1][0] * ph, u[1][1] * ph]];
        // Diagonal: a controlled phase and a controlled Rz.
        if su[0][1].norm() < 1e-12 {
            let lambda = (su[1][1] / su[0][0]).arg();
            // controlled-diag(e^{-il/2}, e^{il/2}) = Rz_t(l/2) ZZ(-l/2).
            self.zz(c, t, -lambda / 2.0);
            self.rz(t, lambda / 2.0);
            self.local(c, g(GateKind::U1, &[alpha]));
            return;
        }
        // A reflection (trace zero in SU(2) up to i): su = -i n.sigma = V (-iX) V^dagger.
        let tr = su[0][0] + su[1][1];
        if tr.norm() < 1e-12 {
            // su = -i n.sigma; find V with V X V^dagger = n.sigma via ZYZ of a rotation
            // taking the x axis to n: n = (sin th cos ph, sin th sin ph, cos th).
            let i = C64::new(0.0, 1.0);
            let nz = (su[0][0] * i).re;
            let nx = (su[0][1] * i).re;
            let ny = -(su[0][1] * i).im;
            let th = nz.clamp(-1.0, 1.0).acos();
            let phi = ny.atan2(nx);
            // V = Rz(phi) Ry(th - pi/2) maps X to n.sigma.
            let v = mul(
                &g(GateKind::Rz, &[phi]),
                &g(GateKind::Ry, &[th - FRAC_PI_2]),
            );
            self.local(t, adjoint(&v));
            self.cx(c, t);
            self.local(t, v);
            // su = -i V X V^dagger, so u = e^{i alpha} (-i) V X V^dagger.
            self.local(c, g(GateKind::U1, &[alpha - FRAC_PI_2]));
            return;
        }
        let (a0, beta, gamma, delta) = zyz(u);
        let a_m = mul(&g(GateKind::Rz, &[beta]), &g(GateKind::Ry, &[gamma / 2.0]));
        let b_m = mul(
            &g(GateKind::Ry, &[-gamma / 2.0]),
            &g(GateKind::Rz, &[-(delta + beta) / 2.0]),
        );
        let c_m = g(GateKind::Rz, &[(delta - beta) / 2.0]);
        self.local(t, c_m);
        self.cx(c, t);
        self.local(t, b_m);
        self.cx(c, t);
        self.local(t, a_m);
        self.local(c, g(GateKind::U1, &[a0]));
    }
    /// Nielsen and Chuang, Fig. 4.9.
    fn toffoli(&mut self, a: u32, b: u32, c: u32) {
        let (h, t, tdg) = (
            g(GateKind::H, &[]),
            g(GateKind::T, &[]),
            g(GateKind::Tdg, &[]),
        );
        self.local(c, h);
        self.cx(b, c);
        self.local(c, tdg);
        self.cx(a, c);
        self.local(c, t);
        self.cx(b, c);
        self.local(c, tdg);
        self.cx(a, c);
        self.local(b, t);
        self.local(c, t);
        self.local(c, h);
        self.cx(a, b);
        self.local(a, t);
        self.local(b, tdg);
        self.cx(a, b);
    }
    /// Barenco et al., Lemma 7.1: C^n(U) = C(V)[c_n, t] C^{n-1}X[.., c_n] C(V^dagger)[c_n, t]
    /// C^{n-1}X[.., c_n] C^{n-1}(V)[.., t] with V^2 = U.
    fn multi_controlled(&mut self, controls: &[u32], t: u32, u: &Mat2) {
        let x = g(GateKind::X, &[]);
        match controls.len() {
            0 => self.local(t, *u),
            1 => self.controlled(controls[0], t, u),
            2 if close(u, &x) => self.toffoli(controls[0], controls[1], t),
            n => {
                let v = sqrt2(u);
                let (rest, last) = (&controls[..n - 1], controls[n - 1]);
                self.controlled(last, t, &v);
                self.multi_controlled(rest, last, &x);
                self.controlled(last, t, &adjoint(&v));
                self.multi_controlled(rest, last, &x);
                self.multi_controlled(rest, t, &v);
            }
        }
    }
}

fn close(a: &Mat2, b: &Mat2) -> bool {
    (0..2).all(|i| (0..2).all(|j| (a[i][j] - b[i][j]).norm() < 1e-12))
}

/// Lowers one gate on the given qubits.
fn lower_gate(gate: &Gate, q: &[u32], out: &mut Out<'_>) {
    use GateKind::*;
    if let Some(m) = gate.matrix2() {
        out.local(q[0], m);
        return;
    }
    let t = gate.params[0];
    match gate.kind {
        Cz => out.cz(q[0], q[1]),
        // H on the target around a CZ: exact, where the general controlled gate
        // below finds the same from the matrix through arctangents.
        Cx | BuiltinCx => out.cx(q[0], q[1]),
        Cu1 | Cp => out.cphase(q[0], q[1], t),
        Crz => {
            out.zz(q[0], q[1], -t / 2.0);
            out.rz(q[1], t / 2.0);
        }
        Rzz => out.zz(q[0], q[1], t),
        Rxx | Ryy => {
            let v = if gate.kind == Rxx {
                g(H, &[])
            } else {
                mul(&g(S, &[]), &g(H, &[]))
            };
            out.local(q[0], adjoint(&v));
            out.local(q[1], adjoint(&v));
            out.zz(q[0], q[1], t);
            out.local(q[0], v);
            out.local(q[1], v);
        }
        Swap => {
            out.cx(q[0], q[1]);
            out.cx(q[1], q[0]);
            out.cx(q[0], q[1]);
        }
        Cswap => {
            out.cx(q[2], q[1]);
            out.toffoli(q[0], q[1], q[2]);
            out.cx(q[2], q[1]);
        }
        Rccx => {
            // The body of the later qelib1.inc (see circuit::gates).
            let (h, t4, t4d) = (g(H, &[]), g(U1, &[FRAC_PI_4]), g(U1, &[-FRAC_PI_4]));
            out.local(q[2], h);
            out.local(q[2], t4);
            out.cx(q[1], q[2]);
            out.local(q[2], t4d);
            out.cx(q[0], q[2]);
            out.local(q[2], t4);
            out.cx(q[1], q[2]);
            out.local(q[2], t4d);
            out.local(q[2], h);
        }
        _ => {
            let (n_controls, m) = gate
                .controlled()
                .expect("every other library gate is a controlled 2x2");
            out.multi_controlled(&q[..n_controls], q[n_controls], &m);
        }
    }
}

/// Lowers a whole circuit to the canonical form. Barriers vanish.
pub fn lower(c: &Circuit) -> Result<Vec<CanonStep>, LowerError> {
    let mut ops = Vec::new();
    let oom = |len: usize| LowerError::OutOfMemory {
        instrs: c.instrs.len(),
        bytes: len.saturating_mul(std::mem::size_of::<CanonStep>()),
    };
    ops.try_reserve(c.instrs.len().saturating_mul(3))
        .map_err(|_| oom(c.instrs.len().saturating_mul(3)))?;
    for (source, instr) in c.instrs.iter().enumerate() {
        let source = source as u32;
        // One instruction adds a few dozen steps at most (a controlled gate by
        // Barenco et al.); grow fallibly before it could need to.
        if ops.capacity() - ops.len() < 256 {
            let more = ops.len().max(256);
            ops.try_reserve(more).map_err(|_| oom(ops.len() + more))?;
        }
        let mut out = Out {
            ops: &mut ops,
            condition: instr.condition.clone(),
            source,
        };
        match &instr.op {
            Op::Gate { gate, qubits } => {
                let q: smallvec::SmallVec<[u32; 5]> = qubits.iter().map(|q| q.0).collect();
                lower_gate(gate, &q, &mut out);
            }
            Op::Opaque { decl, .. } => {
                return Err(LowerError::Opaque(c.opaque[*decl as usize].name.clone()))
            }
            Op::Barrier { .. } => {}
            Op::Measure { qubit, clbit } => ops.push(CanonStep {
                op: Canon::Measure {
                    q: qubit.0,
                    clbit: clbit.0,
                },
                condition: instr.condition.clone(),
                source,
            }),
            Op::Reset { qubit } => ops.push(CanonStep {
                op: Canon::Reset { q: qubit.0 },
                condition: instr.condition.clone(),
                source,
            }),
        }
    }
    Ok(ops)
}
