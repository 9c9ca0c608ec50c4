//! One model fitted to the points: the two model shapes and the bounded Levenberg-Marquardt
//! least-squares fit of `(a, p)` behind both fits.

use super::fmath::{exp, ln, sqrt};
use super::{A_BOUNDS, C90, N_BOUNDS};
use micromath::F32Ext;

/// The two model shapes, both `C = 0.9 exp(p g(y; a))`, `a = ln Y90`.
#[derive(Clone, Copy)]
pub(super) enum Shape {
    /// `g = ln y − a`, `p = n`.
    PowerLaw,
    /// `g = y e^(−a) − 1`, `p = 1/D'`.
    Exponential,
}

impl Shape {
    pub(super) fn p_bounds(self) -> (f32, f32) {
        match self {
            Shape::PowerLaw => N_BOUNDS,
            Shape::Exponential => A_BOUNDS,
        }
    }

    /// `(g, ∂g/∂a)` at a point; `inv_y90 = e^(−a)`.
    #[inline]
    pub(super) fn g(self, y: f32, ly: f32, a: f32, inv_y90: f32) -> (f32, f32) {
        match self {
            Shape::PowerLaw => (ly - a, -1.0),
            Shape::Exponential => {
                let x = y * inv_y90;
                (x - 1.0, -x)
            }
        }
    }
}

/// The fitted points: elevation, its logarithm, void fraction, weight.
pub(super) struct Points<'a> {
    pub(super) y: &'a [f32],
    pub(super) ly: &'a [f32],
    pub(super) c: &'a [f32],
    pub(super) w: &'a [f32],
}

impl Points<'_> {
    pub(super) fn iter(&self) -> impl Iterator<Item = (f32, f32, f32, f32)> + '_ {
        self.y
            .iter()
            .zip(self.ly)
            .zip(self.c)
            .zip(self.w)
            .map(|(((&y, &ly), &c), &w)| (y, ly, c, w))
    }

    /// Weighted sum of squares at `(a, p)`.
    pub(super) fn wsse(&self, shape: Shape, a: f32, p: f32) -> f32 {
        let inv = exp(-a);
        self.iter()
            .map(|(y, ly, c, w)| {
                let r = c - C90 * exp(p * shape.g(y, ly, a, inv).0);
                w * r * r
            })
            .sum()
    }

    /// `Jᵀ W J` as `(aa, ap, pp)` and `Jᵀ W r` as `(a, p)` at `(a, p)`.
    pub(super) fn normal(&self, shape: Shape, a: f32, p: f32) -> ([f32; 3], [f32; 2], f32) {
        let inv = exp(-a);
        let (mut h, mut g, mut sse) = ([0.0f32; 3], [0.0f32; 2], 0.0f32);
        for (y, ly, c, w) in self.iter() {
            let (gv, dg) = shape.g(y, ly, a, inv);
            let f = C90 * exp(p * gv);
            let (ja, jp) = (f * p * dg, f * gv);
            let r = c - f;
            h[0] += w * ja * ja;
            h[1] += w * ja * jp;
            h[2] += w * jp * jp;
            g[0] += w * ja * r;
            g[1] += w * jp * r;
            sse += r * r;
        }
        (h, g, sse)
    }
}

/// What both fits share: start, bracket of `a`, how to scale the covariance.
pub(super) struct FitSetup {
    /// Start of `a = ln Y90` (the interpolated `Y90`).
    pub(super) a0: f32,
    /// The bracket of `a` (the probes around 0.9).
    pub(super) bracket: (f32, f32),
    /// `a` held at `a0` (one point only).
    pub(super) fixed: bool,
    /// Variance of `a` when it is held.
    pub(super) var_a_fixed: Option<f32>,
    /// `Some(1)`: weights are `1/σ²`; `None`: scale by `S/dof`; `Some(NaN)`: no covariance.
    pub(super) scale: Option<f32>,
    pub(super) dof: usize,
    pub(super) max_iterations: u8,
}

/// A two-parameter fit: the minimum and its covariance `(aa, ap, pp)`.
pub(super) struct TwoFit {
    pub(super) a: f32,
    pub(super) p: f32,
    /// Weighted sum of squares.
    pub(super) s: f32,
    pub(super) rmse: f32,
    pub(super) cov: Option<[f32; 3]>,
    pub(super) iterations: u8,
    pub(super) converged: bool,
    pub(super) on_bracket: bool,
}

impl TwoFit {
    /// Standard error of a quantity of gradient `(∂q/∂a, ∂q/∂p)` (delta method).
    pub(super) fn se(&self, (ga, gp): (f32, f32)) -> Option<f32> {
        let [aa, ap, pp] = self.cov?;
        let v = ga * ga * aa + 2.0 * ga * gp * ap + gp * gp * pp;
        v.is_finite().then(|| sqrt(v.max(0.0)))
    }
}

/// Levenberg-Marquardt on `(a, p)` for one shape (see the module docs): start from the
/// interpolated `Y90` and the log-linear fit of `p`, `a` kept in its bracket, `p` in its
/// bounds; a step whose `a` leaves the bracket is redone with `a` held.
pub(super) fn fit_two(
    shape: Shape,
    pts: &Points,
    setup: &FitSetup,
    from: Option<(f32, f32)>,
) -> TwoFit {
    let (alo, ahi) = setup.bracket;
    let (plo, phi) = shape.p_bounds();
    let mut a = from.map_or(setup.a0, |f| f.0).clamp(alo, ahi);
    // Start of p: ln(C/0.9) = p g through the origin, weights w C² (the log transform
    // divides an error δC by C).
    let inv = exp(-a);
    let (mut sgv, mut sgg) = (0.0f32, 0.0f32);
    for (y, ly, c, w) in pts.iter() {
        let gv = shape.g(y, ly, a, inv).0;
        if c > 0.0 && gv < 0.0 {
            let wc = w * c * c;
            sgv += wc * gv * ln(c / C90);
            sgg += wc * gv * gv;
        }
    }
    let start = match from {
        Some((_, p)) => p,
        None if sgg > 0.0 => sgv / sgg,
        None => 1.0,
    };
    let mut p = if start.is_finite() {
        start.clamp(plo, phi)
    } else {
        1.0
    };
    let mut s = pts.wsse(shape, a, p);
    let mut lambda = 1e-3f32;
    let mut converged = false;
    let mut iterations = 0u8;
    while iterations < setup.max_iterations {
        iterations += 1;
        let ([haa, hap, hpp], [ga, gp], _) = pts.normal(shape, a, p);
        if hpp.is_nan() || hpp <= 0.0 || !(haa + hap + hpp).is_finite() {
            // Every model value underflowed: no gradient to follow.
            break;
        }
        let mut accepted = false;
        for _ in 0..8 {
            let (dpp, daa) = (hpp * (1.0 + lambda), haa * (1.0 + lambda));
            let held = (0.0, gp / dpp);
            let mut step = held;
            if !setup.fixed {
                let det = daa * dpp - hap * hap;
                if det > 0.0 && det.is_finite() {
                    step = ((dpp * ga - hap * gp) / det, (daa * gp - hap * ga) / det);
                }
                if (a <= alo && step.0 < 0.0) || (a >= ahi && step.0 > 0.0) {
                    step = held;
                }
            }
            let a2 = (a + step.0).clamp(alo, ahi);
            let p2 = (p + step.1).clamp(plo, phi);
            let s2 = pts.wsse(shape, a2, p2);
            if s2 <= s {
                let small = F32Ext::abs(p2 - p) <= 1e-4 * p.max(0.1) && F32Ext::abs(a2 - a) <= 1e-5;
                a = a2;
                p = p2;
                s = s2;
                accepted = true;
                lambda = (lambda * 0.1).max(1e-7);
                converged = small;
                break;
            }
            lambda *= 10.0;
        }
        if !accepted {
            // No step lowers the sum of squares: at its minimum to within rounding.
            converged = true;
        }
        if converged {
            break;
        }
    }
    if p <= plo || p >= phi {
        converged = false;
    }
    let ([haa, hap, hpp], _, sse) = pts.normal(shape, a, p);
    let scale = match setup.scale {
        Some(x) => x,
        None => s / setup.dof.max(1) as f32,
    };
    let cov = if setup.fixed {
        setup
            .var_a_fixed
            .filter(|_| hpp > 0.0)
            .map(|va| [va, 0.0, scale / hpp])
    } else {
        let det = haa * hpp - hap * hap;
        (det > 0.0).then(|| [scale * hpp / det, -scale * hap / det, scale * haa / det])
    }
    .filter(|c| c.iter().all(|x| x.is_finite()));
    TwoFit {
        a,
        p,
        s,
        rmse: sqrt(sse / pts.c.len().max(1) as f32),
        cov,
        iterations,
        converged,
        on_bracket: !setup.fixed && (a <= alo || a >= ahi),
    }
}
