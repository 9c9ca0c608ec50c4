//! The depth-averaged void fraction versus time behind a front, and its exponential decay.
//!
//! Behind a surge front the roller de-aerates: `Cmean(t)` falls from a high initial level
//! towards the level of the flow behind. [`DecayTracker`] keeps a bounded series of
//! `(t, Cmean)`, `t` in seconds since the station's front, and fits
//!
//! ```text
//! C(t) = C_final + (C_0 − C_final) exp(−t / tau)
//! ```
//!
//! For a fixed `tau` the model is linear in `C_final` and `A = C_0 − C_final`, so the fit
//! is a one-dimensional search over `tau` of the least-squares residual with the two
//! levels solved exactly (variable projection):
//! 1. a geometric grid of [`TAU_GRID`] values of `tau` from `span/500` to `20 · span`
//!    (`span` = the time range of the series): faster decays are over before the second
//!    point and slower ones are straight lines over the series, neither is resolved;
//! 2. golden-section refinement between the grid neighbours of the best grid point,
//!    [`GOLDEN_STEPS`] steps (the bracket shrinks by `0.618^30 ≈ 5e-7`).
//!
//! Work is bounded: at most `(TAU_GRID + GOLDEN_STEPS + 4) × N` exponentials per fit,
//! and a scratch array of `N` f32 on the stack. A best `tau`
//! on the first or last grid point is flagged [`DecayFlags::TAU_AT_LIMIT`]. The levels at
//! each `tau` come from centred sums, which stay well conditioned in f32.
//!
//! Exponentials and square roots come from the crate's micromath-based `fmath` (see the
//! `profile` module), so a device and a host compute the same bits.
//!
//! `tau` is also given in units of `sqrt(d_ref/g)`, the time scale of a flow of depth
//! `d_ref` (the layout's `reference_depth_m`), so that runs at different scales compare.

use crate::profile::fmath::{exp, ln, sqrt};
use micromath::F32Ext;

/// Standard gravity, m/s² (the conventional value of the international system of units).
pub const STANDARD_GRAVITY: f32 = 9.80665;

/// Points of the geometric grid of `tau`.
pub const TAU_GRID: usize = 48;

/// Golden-section steps after the grid.
pub const GOLDEN_STEPS: usize = 30;

/// A fitted amplitude `|C_0 − C_final|` at or below this is no decay at all.
const FLAT_AMPLITUDE: f32 = 1e-4;

/// Quality flags of a decay fit (a bit set; see the associated constants).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct DecayFlags(pub u8);

impl DecayFlags {
    /// No flag raised.
    pub const NONE: DecayFlags = DecayFlags(0);
    /// Fewer than 3 points (three parameters), or all at one time: no fit.
    pub const TOO_FEW_POINTS: DecayFlags = DecayFlags(1 << 0);
    /// The series does not decay (`|C_0 − C_final| <= 1e-4`): the levels are the mean and
    /// `tau` means nothing.
    pub const NO_DECAY: DecayFlags = DecayFlags(1 << 1);
    /// The best `tau` lies on an end of the grid: the decay is faster than the first points
    /// or slower than the series resolves.
    pub const TAU_AT_LIMIT: DecayFlags = DecayFlags(1 << 2);
    /// Points were refused (non-finite, or the series was full).
    pub const POINTS_REJECTED: DecayFlags = DecayFlags(1 << 3);
    /// No reference depth (non-finite or `<= 0`): `tau_star` is `None`.
    pub const NO_REFERENCE_DEPTH: DecayFlags = DecayFlags(1 << 4);

    /// Names of the flags, in bit order, as written into CSV files.
    pub const NAMES: [(DecayFlags, &'static str); 5] = [
        (DecayFlags::TOO_FEW_POINTS, "too_few_points"),
        (DecayFlags::NO_DECAY, "no_decay"),
        (DecayFlags::TAU_AT_LIMIT, "tau_at_limit"),
        (DecayFlags::POINTS_REJECTED, "points_rejected"),
        (DecayFlags::NO_REFERENCE_DEPTH, "no_reference_depth"),
    ];

    /// True if every bit of `other` is set in `self`.
    pub const fn contains(self, other: DecayFlags) -> bool {
        self.0 & other.0 == other.0
    }

    /// True if no flag is set.
    pub const fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// Set the bits of `other` when `condition` holds.
    pub fn set_if(&mut self, other: DecayFlags, condition: bool) {
        if condition {
            self.0 |= other.0;
        }
    }

    /// Iterate over the names of the flags that are set.
    pub fn names(self) -> impl Iterator<Item = &'static str> {
        DecayFlags::NAMES
            .into_iter()
            .filter(move |(f, _)| self.contains(*f))
            .map(|(_, n)| n)
    }
}

impl core::ops::BitOr for DecayFlags {
    type Output = DecayFlags;
    fn bitor(self, rhs: DecayFlags) -> DecayFlags {
        DecayFlags(self.0 | rhs.0)
    }
}

impl core::ops::BitOrAssign for DecayFlags {
    fn bitor_assign(&mut self, rhs: DecayFlags) {
        self.0 |= rhs.0;
    }
}

/// The fitted decay `C(t) = final_level + (initial − final_level) exp(−t / tau)`.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct DecayModel {
    /// `C_0`, the model's level at the front (`t = 0`).
    pub initial: f32,
    /// `C_final`, the level the series tends to.
    pub final_level: f32,
    /// The time constant, s.
    pub tau_s: f32,
    /// The time constant in units of `sqrt(d_ref / g)`, when a reference depth was given.
    pub tau_star: Option<f32>,
    /// Root-mean-square residual of the fit.
    pub rmse: f32,
}

/// The result of [`DecayTracker::fit`].
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct DecayFit {
    /// The model, when the series allowed a fit.
    pub model: Option<DecayModel>,
    /// Points in the fit.
    pub points: u16,
    /// Quality flags.
    pub flags: DecayFlags,
}

/// A bounded series of `(time since front, Cmean)` of capacity `N`.
#[derive(Clone, Debug)]
pub struct DecayTracker<const N: usize> {
    t: [f32; N],
    c: [f32; N],
    len: usize,
    rejected: u32,
}

impl<const N: usize> Default for DecayTracker<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> DecayTracker<N> {
    /// An empty series.
    pub const fn new() -> Self {
        const { assert!(N > 0, "a decay series needs room for at least one point") };
        DecayTracker {
            t: [0.0; N],
            c: [0.0; N],
            len: 0,
            rejected: 0,
        }
    }

    /// Add a point: `t_s` seconds since the front, depth-averaged void fraction `c`. A full
    /// series or a non-finite value hands the point back (the earliest points, which carry
    /// the decay, are kept); refused points are counted.
    pub fn push(&mut self, t_s: f32, c: f32) -> Result<(), (f32, f32)> {
        if !(t_s.is_finite() && c.is_finite()) || self.len >= N {
            self.rejected = self.rejected.saturating_add(1);
            return Err((t_s, c));
        }
        self.t[self.len] = t_s;
        self.c[self.len] = c;
        self.len += 1;
        Ok(())
    }

    /// Points held.
    pub fn len(&self) -> usize {
        self.len
    }

    /// True when no point is held.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Points refused so far.
    pub fn rejected(&self) -> u32 {
        self.rejected
    }

    /// Forget every point (the next front).
    pub fn clear(&mut self) {
        self.len = 0;
        self.rejected = 0;
    }

    /// The points held, in the order pushed.
    pub fn points(&self) -> impl Iterator<Item = (f32, f32)> + '_ {
        self.t[..self.len]
            .iter()
            .copied()
            .zip(self.c[..self.len].iter().copied())
    }

    /// Fit the decay; `reference_depth_m` scales `tau` (see [`DecayModel::tau_star`]).
    pub fn fit(&self, reference_depth_m: f32) -> DecayFit {
        let mut out = DecayFit {
            points: self.len.min(u16::MAX as usize) as u16,
            ..DecayFit::default()
        };
        out.flags
            .set_if(DecayFlags::POINTS_REJECTED, self.rejected > 0);
        let (t, c) = (&self.t[..self.len], &self.c[..self.len]);
        let mut scratch = [0.0f32; N];
        let e = &mut scratch[..self.len];
        let (lo, hi) = t
            .iter()
            .fold((f32::INFINITY, f32::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        let span = hi - lo;
        if t.len() < 3 || span.is_nan() || span <= 0.0 || !span.is_finite() {
            out.flags |= DecayFlags::TOO_FEW_POINTS;
            return out;
        }

        // 1. Geometric grid from span/500 to 20 span.
        let tau0 = span / 500.0;
        let ratio = exp(ln(10_000.0) / (TAU_GRID - 1) as f32);
        let mut grid = [0.0f32; TAU_GRID];
        let mut tau = tau0;
        let mut best = (0usize, f32::INFINITY);
        for (k, g) in grid.iter_mut().enumerate() {
            *g = tau;
            let s = residual(t, c, tau, e).map_or(f32::INFINITY, |r| r.sse);
            if s < best.1 {
                best = (k, s);
            }
            tau *= ratio;
        }
        let k = best.0;
        out.flags
            .set_if(DecayFlags::TAU_AT_LIMIT, k == 0 || k == TAU_GRID - 1);

        // 2. Golden section between the neighbours of the best grid point.
        let (mut a, mut b) = (grid[k.saturating_sub(1)], grid[(k + 1).min(TAU_GRID - 1)]);
        let mut sse_at = |tau: f32| residual(t, c, tau, e).map_or(f32::INFINITY, |r| r.sse);
        const INV_PHI: f32 = 0.618_034;
        let mut x1 = b - INV_PHI * (b - a);
        let mut x2 = a + INV_PHI * (b - a);
        let (mut f1, mut f2) = (sse_at(x1), sse_at(x2));
        for _ in 0..GOLDEN_STEPS {
            if f1 <= f2 {
                b = x2;
                x2 = x1;
                f2 = f1;
                x1 = b - INV_PHI * (b - a);
                f1 = sse_at(x1);
            } else {
                a = x1;
                x1 = x2;
                f1 = f2;
                x2 = a + INV_PHI * (b - a);
                f2 = sse_at(x2);
            }
        }
        let mut tau = if f1 <= f2 { x1 } else { x2 };
        let mut fit = residual(t, c, tau, e);
        // Keep the grid point if the refinement found nothing better (flat or noisy SSE).
        if fit.is_none_or(|r| r.sse > best.1) {
            tau = grid[k];
            fit = residual(t, c, tau, e);
        }
        let Some(r) = fit else {
            // Every grid point was degenerate: no exponential to fit.
            out.flags |= DecayFlags::TOO_FEW_POINTS;
            return out;
        };
        out.flags.set_if(
            DecayFlags::NO_DECAY,
            F32Ext::abs(r.amplitude) <= FLAT_AMPLITUDE,
        );
        let tau_star = if reference_depth_m.is_finite() && reference_depth_m > 0.0 {
            Some(tau * sqrt(STANDARD_GRAVITY / reference_depth_m))
        } else {
            out.flags |= DecayFlags::NO_REFERENCE_DEPTH;
            None
        };
        out.model = Some(DecayModel {
            initial: r.final_level + r.amplitude,
            final_level: r.final_level,
            tau_s: tau,
            tau_star,
            rmse: sqrt(r.sse / t.len() as f32),
        });
        out
    }
}

#[derive(Clone, Copy)]
struct Residual {
    final_level: f32,
    amplitude: f32,
    sse: f32,
}

/// The least-squares levels at a fixed `tau`, and the residual sum of squares. `None` when
/// `exp(−t/tau)` is constant over the points (the levels are not separable). `e` is scratch
/// room for the exponentials (as long as `t`).
fn residual(t: &[f32], c: &[f32], tau: f32, e: &mut [f32]) -> Option<Residual> {
    if tau.is_nan() || tau <= 0.0 || e.len() < t.len() {
        return None;
    }
    let n = t.len() as f32;
    let (mut se, mut sc) = (0.0f32, 0.0f32);
    for ((&t, &c), e) in t.iter().zip(c).zip(e.iter_mut()) {
        *e = exp(-t / tau);
        se += *e;
        sc += c;
    }
    let (me, mc) = (se / n, sc / n);
    let (mut sxx, mut sxy) = (0.0f32, 0.0f32);
    for (&e, &c) in e.iter().zip(c) {
        let dx = e - me;
        sxx += dx * dx;
        sxy += dx * (c - mc);
    }
    if sxx.is_nan() || sxx <= 1e-12 {
        return None;
    }
    let amplitude = sxy / sxx;
    let final_level = mc - amplitude * me;
    let mut sse = 0.0f32;
    for (&e, &c) in e.iter().zip(c) {
        let r = c - final_level - amplitude * e;
        sse += r * r;
    }
    sse.is_finite().then_some(Residual {
        final_level,
        amplitude,
        sse,
    })
}
