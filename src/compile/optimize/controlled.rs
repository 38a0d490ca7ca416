//! Singly controlled gates as one interaction.
//!
//! Write the controlled operator as `U = e^{i alpha} exp(-i theta/2 n.sigma)` with
//! `theta` in `[0, pi]`. With `P1 = (1 - Z_c)/2` the projector on the control's 1,
//! `C-U = exp(i alpha P1) exp(-i theta/2 P1 n.sigma_t)`
//! `    = u1(alpha)_c exp(-i theta/4 n.sigma_t) exp(i theta/4 Z_c n.sigma_t)`
//! (the factors commute; common practice). The last factor is one ZZ interaction of
//! angle `theta/4` in the frame `V = Rz(phi) Ry(beta)` that takes `Z` to `n.sigma`:
//! `theta/pi` units of MS area, where the lowering by Barenco et al. (PRA 52, 3457,
//! 1995, Lemma 5.1) spends two CNOTs (two units). A controlled `Ry(theta)` (`cry`,
//! the way W states are written) gains most; `cx`, `cz` and the controlled phases
//! already are one interaction and are left to the phase polynomials.
//!
//! Invariant: the output is the input's unitary up to global phase.

use super::gate;
use crate::circuit::{GateKind, Instr};
use std::f64::consts::PI;

/// `(alpha, theta, beta, phi)`: `u = e^{i alpha} exp(-i theta/2 n.sigma)` with
/// `theta` in `[0, pi]` and `n = (sin beta cos phi, sin beta sin phi, cos beta)`.
pub fn axis_angle(u: &crate::circuit::Mat2) -> (f64, f64, f64, f64) {
    let det = u[0][0] * u[1][1] - u[0][1] * u[1][0];
    let mut alpha = det.arg() / 2.0;
    let ph = num_complex::Complex64::from_polar(1.0, -alpha);
    let su = [[u[0][0] * ph, u[0][1] * ph], [u[1][0] * ph, u[1][1] * ph]];
    // su = cos(theta/2) I - i sin(theta/2) n.sigma.
    let mut c = ((su[0][0] + su[1][1]) / 2.0).re;
    let mut v = [
        -(su[0][1] + su[1][0]).im / 2.0,
        (su[1][0] - su[0][1]).re / 2.0,
        -(su[0][0] - su[1][1]).im / 2.0,
    ];
    if c < 0.0 {
        // -su has theta' = 2 pi - theta about -n: the same operator, alpha + pi.
        c = -c;
        v = [-v[0], -v[1], -v[2]];
        alpha += PI;
    }
    let s = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    let theta = 2.0 * s.atan2(c);
    let beta = (v[0] * v[0] + v[1] * v[1]).sqrt().atan2(v[2]);
    let phi = v[1].atan2(v[0]);
    (alpha, theta, beta, phi)
}

/// Rewrites unconditioned `cy`, `ch`, `crx`, `cry` and `cu3` (the others pass).
pub fn rewrite(instrs: Vec<Instr>) -> Vec<Instr> {
    use GateKind::*;
    super::expand_gates(instrs, &[Cy, Ch, Crx, Cry, Cu3], |g, q, out| {
        let (_, u) = g.controlled().expect("a singly controlled gate");
        let (c, t) = (q[0], q[1]);
        let (alpha, theta, beta, phi) = axis_angle(&u);
        out.push(gate(U1, &[alpha], &[c]));
        out.push(gate(Rz, &[-phi], &[t]));
        out.push(gate(Ry, &[-beta], &[t]));
        out.push(gate(Rzz, &[-theta / 2.0], &[c, t]));
        out.push(gate(Rz, &[theta / 2.0], &[t]));
        out.push(gate(Ry, &[beta], &[t]));
        out.push(gate(Rz, &[phi], &[t]));
    })
}
