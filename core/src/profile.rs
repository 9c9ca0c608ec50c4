//! The vertical void-fraction profile of one station over one time slice.
//!
//! Input: the void fractions `C` of the probes of one station at their elevations `y`
//! (mm above the bed), in any order. Output: a [`ProfileFit`] with
//! - `Y90`, the elevation where `C` first reaches 0.9 going up, by linear interpolation
//!   between the two probes that bracket it;
//! - the depth-averaged void fraction `Cmean = (1/Y90) ∫_0^Y90 C dy` and the equivalent
//!   clear-water depth `d = ∫_0^Y90 (1 − C) dy = (1 − Cmean) Y90` (trapezoidal rule);
//! - two one-parameter models of `C(y' = y/Y90)` fitted by least squares on the
//!   untransformed residuals: the power law `C = 0.9 y'^n` (diffusivity `D' = y'/n`, growing
//!   linearly from the bed) and the exponential profile `C = 0.9 exp((y' − 1)/D')` (constant
//!   diffusivity), both solutions of the steady rise/diffusion balance `D' dC/dy' = C`
//!   (DESIGN.md §1), with the model that fits better.
//!
//! # Treatment of the ends of the array
//!
//! - **Bed band** (from `y = 0` to the lowest probe): by default `C` is taken to fall
//!   linearly to `C(0) = 0` ([`BedTreatment::LinearToZero`]). A bubble cannot sit in a solid
//!   wall, every power law with `n > 0` has `C(0) = 0`, and the lowest probe of a station
//!   is normally a few millimetres above the bed, so the band is small and the choice keeps
//!   the integral consistent with the fitted model. [`BedTreatment::Hold`] (C constant at the
//!   lowest probe's value) is there for flows aerated from the bed (aerators, bottom
//!   injection), where the near-bed void fraction does not vanish.
//! - **Top band**: when `Y90` lies inside the array, the integral runs over the probes below
//!   `Y90` and ends with the interpolated point `(Y90, 0.9)`; probes above `Y90` do not enter
//!   the integrals nor the fits (the models are defined for `y' ≤ 1` only).
//! - **`Y90` outside the array**: `Y90`, `Cmean`, `d` and the fits are left `None` and a flag
//!   says on which side the crossing is. Extrapolating would be a guess: near the free
//!   surface `C` climbs from ~0.5 to 0.9 over a short height, so a line through the top
//!   two probes says little about where 0.9 is reached; below the lowest probe the only
//!   information is the bed assumption.
//!
//! # Fits
//!
//! Both models have the form `C = 0.9 exp(p u)`, with `u = ln y'` and `p = n` for the power
//! law, `u = y' − 1` and `p = 1/D'` for the exponential. The start value comes from the
//! linear least-squares fit of `ln(C/0.9) = p u` through the origin, weighted by `C²`: the
//! log transform divides an error `δC` by `C`, so weights `C²` make the log fit approximate
//! the untransformed least squares (points with `C = 0` cannot enter it). Then at most
//! [`ProfileConfig::max_iterations`] Gauss-Newton steps on the untransformed residuals, each
//! halved (up to 8 times) until the sum of squares does not grow; `p` is kept in
//! `[0.01, 100]` for `n` and `[0.01, 1000]` for `1/D'`. The fit converges when the step falls
//! below `1e-4 · max(p, 0.1)` or when no halved step lowers the sum of squares (the float
//! noise floor); otherwise, or when `p` ends on a bound, a flag says it did not converge.
//! Work is bounded: at most 16 points × (1 + 9 × `max_iterations`) model evaluations.
//!
//! All maths is f32 with transcendental functions built on `micromath::F32Ext` (see
//! `fmath`), so a device and a host compute the same bits.

use self::fmath::{exp, ln, sqrt};
use micromath::F32Ext;

/// Largest number of points of one profile for [`fit_profile`]; further points are dropped
/// (and flagged). [`fit_profile_sized`] takes another capacity.
pub const MAX_PROFILE_POINTS: usize = 16;

/// The void fraction that defines the flow depth `Y90` (common practice, no source).
pub const C90: f32 = 0.9;

/// Bounds of the power-law exponent `n`.
const N_BOUNDS: (f32, f32) = (0.01, 100.0);
/// Bounds of `1/D'` of the exponential profile.
const A_BOUNDS: (f32, f32) = (0.01, 1000.0);

/// One probe's void fraction at its elevation.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProfilePoint {
    /// Elevation of the tip above the bed, mm (`>= 0`).
    pub y_mm: f32,
    /// Void fraction, `0..=1`.
    pub c: f32,
}

/// Quality flags of a profile fit (a bit set; see the associated constants). Bits are
/// stable: they may travel on the wire and into CSV files.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProfileFlags(pub u16);

impl ProfileFlags {
    /// No flag raised.
    pub const NONE: ProfileFlags = ProfileFlags(0);
    /// Fewer than 2 usable points (distinct elevations): nothing could be computed.
    pub const TOO_FEW_POINTS: ProfileFlags = ProfileFlags(1 << 0);
    /// Every point is below 0.9: `Y90` lies above the top probe (flow deeper than the
    /// array); left `None`.
    pub const Y90_ABOVE_ARRAY: ProfileFlags = ProfileFlags(1 << 1);
    /// The lowest point is already at 0.9 or more: `Y90` lies below the lowest probe (flow
    /// shallower than the array); left `None`.
    pub const Y90_BELOW_ARRAY: ProfileFlags = ProfileFlags(1 << 2);
    /// The power-law fit stopped at its iteration limit or on a bound of `n`.
    pub const POWER_LAW_NOT_CONVERGED: ProfileFlags = ProfileFlags(1 << 3);
    /// The exponential fit stopped at its iteration limit or on a bound of `D'`.
    pub const EXPONENTIAL_NOT_CONVERGED: ProfileFlags = ProfileFlags(1 << 4);
    /// Some points were dropped: a non-finite value, `y < 0`, `C` outside `0..=1`, or more
    /// than [`MAX_PROFILE_POINTS`] points.
    pub const POINTS_DROPPED: ProfileFlags = ProfileFlags(1 << 5);
    /// `C` falls below 0.9 again above `Y90` (a non-monotonic profile, e.g. a splash above
    /// the roller); `Y90` is the lowest crossing.
    pub const SEVERAL_CROSSINGS: ProfileFlags = ProfileFlags(1 << 6);

    /// Names of the flags, in bit order, as written into CSV files.
    pub const NAMES: [(ProfileFlags, &'static str); 7] = [
        (ProfileFlags::TOO_FEW_POINTS, "too_few_points"),
        (ProfileFlags::Y90_ABOVE_ARRAY, "y90_above_array"),
        (ProfileFlags::Y90_BELOW_ARRAY, "y90_below_array"),
        (
            ProfileFlags::POWER_LAW_NOT_CONVERGED,
            "power_law_not_converged",
        ),
        (
            ProfileFlags::EXPONENTIAL_NOT_CONVERGED,
            "exponential_not_converged",
        ),
        (ProfileFlags::POINTS_DROPPED, "points_dropped"),
        (ProfileFlags::SEVERAL_CROSSINGS, "several_crossings"),
    ];

    /// True if every bit of `other` is set in `self`.
    pub const fn contains(self, other: ProfileFlags) -> bool {
        self.0 & other.0 == other.0
    }

    /// True if no flag is set.
    pub const fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// Set the bits of `other` when `condition` holds.
    pub fn set_if(&mut self, other: ProfileFlags, condition: bool) {
        if condition {
            self.0 |= other.0;
        }
    }

    /// Iterate over the names of the flags that are set.
    pub fn names(self) -> impl Iterator<Item = &'static str> {
        ProfileFlags::NAMES
            .into_iter()
            .filter(move |(f, _)| self.contains(*f))
            .map(|(_, n)| n)
    }
}

impl core::ops::BitOr for ProfileFlags {
    type Output = ProfileFlags;
    fn bitor(self, rhs: ProfileFlags) -> ProfileFlags {
        ProfileFlags(self.0 | rhs.0)
    }
}

impl core::ops::BitOrAssign for ProfileFlags {
    fn bitor_assign(&mut self, rhs: ProfileFlags) {
        self.0 |= rhs.0;
    }
}

/// How `C` is continued between the bed (`y = 0`) and the lowest probe.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum BedTreatment {
    /// `C` falls linearly to 0 at the bed (self-aerated flows; see the module docs).
    #[default]
    LinearToZero,
    /// `C` is held at the lowest probe's value down to the bed (flows aerated from the bed).
    Hold,
}

/// Settings of the profile fit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProfileConfig {
    /// The bed band's treatment in the integrals.
    pub bed: BedTreatment,
    /// Most Gauss-Newton iterations per model (bounds the work).
    pub max_iterations: u8,
}

impl Default for ProfileConfig {
    fn default() -> Self {
        ProfileConfig {
            bed: BedTreatment::LinearToZero,
            max_iterations: 20,
        }
    }
}

/// Which model describes the profile better.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum ProfileModel {
    /// `C = 0.9 (y/Y90)^n`: diffusivity growing linearly from the bed.
    PowerLaw,
    /// `C = 0.9 exp((y/Y90 − 1)/D')`: constant diffusivity.
    Exponential,
}

/// The power law `C = 0.9 (y/Y90)^n` fitted with `Y90` fixed.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PowerLawFit {
    /// The exponent `n`.
    pub exponent: f32,
    /// Root-mean-square residual of `C` over the fitted points.
    pub rmse: f32,
    /// The model's depth-averaged void fraction, `0.9 / (1 + n)`.
    pub mean_void_fraction: f32,
    /// The model's depth-averaged dimensionless diffusivity: `D' = y'/n` averaged over
    /// `0..1`, i.e. `1 / (2 n)`.
    pub mean_diffusivity: f32,
    /// Points in the fit (`0 < y < Y90`).
    pub points: u8,
    /// Gauss-Newton iterations taken.
    pub iterations: u8,
}

/// The exponential profile `C = 0.9 exp((y/Y90 − 1)/D')` fitted with `Y90` fixed.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ExponentialFit {
    /// The constant dimensionless diffusivity `D'`.
    pub diffusivity: f32,
    /// Root-mean-square residual of `C` over the fitted points.
    pub rmse: f32,
    /// The model's depth-averaged void fraction, `0.9 D' (1 − exp(−1/D'))`.
    pub mean_void_fraction: f32,
    /// Points in the fit (`0 < y < Y90`).
    pub points: u8,
    /// Gauss-Newton iterations taken.
    pub iterations: u8,
}

/// The profile of one station over one time slice.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProfileFit {
    /// Usable points (distinct elevations after merging duplicates).
    pub points_used: u8,
    /// Elevation where `C` first reaches 0.9, mm; `None` when the array does not span it.
    pub y90_mm: Option<f32>,
    /// Depth-averaged void fraction `Cmean` from the points (trapezoidal rule).
    pub mean_void_fraction: Option<f32>,
    /// Equivalent clear-water depth `d = (1 − Cmean) Y90`, mm.
    pub equivalent_depth_mm: Option<f32>,
    /// The power-law fit, when there was a point to fit.
    pub power_law: Option<PowerLawFit>,
    /// The exponential (constant-diffusivity) fit, when there was a point to fit.
    pub exponential: Option<ExponentialFit>,
    /// The model with the smaller RMSE (the power law on a tie).
    pub better_model: Option<ProfileModel>,
    /// Quality flags.
    pub flags: ProfileFlags,
}

/// Fit the profile of `points` (any order), at most [`MAX_PROFILE_POINTS`] of them. Never
/// panics; see the module docs for the treatment of every edge case.
pub fn fit_profile(points: &[ProfilePoint], cfg: &ProfileConfig) -> ProfileFit {
    fit_profile_sized::<MAX_PROFILE_POINTS>(points, cfg)
}

/// [`fit_profile`] with room for `N` points (`N <= 255`; the sort is O(N²) and the work
/// per fit O(N · iterations)). Uses about `5 N` f32 of stack.
pub fn fit_profile_sized<const N: usize>(
    points: &[ProfilePoint],
    cfg: &ProfileConfig,
) -> ProfileFit {
    const { assert!(N <= 255, "points are counted in a u8") };
    let mut out = ProfileFit::default();
    let mut ys = [0.0f32; N];
    let mut cs = [0.0f32; N];
    let m = sorted_points(points, &mut ys, &mut cs, &mut out.flags);
    out.points_used = m as u8;
    if m < 2 {
        out.flags |= ProfileFlags::TOO_FEW_POINTS;
        return out;
    }
    let (ys, cs) = (&ys[..m], &cs[..m]);

    // The first point at or above 0.9, going up.
    let Some(j) = cs.iter().position(|&c| c >= C90) else {
        out.flags |= ProfileFlags::Y90_ABOVE_ARRAY;
        return out;
    };
    if j == 0 {
        out.flags |= ProfileFlags::Y90_BELOW_ARRAY;
        return out;
    }
    out.flags.set_if(
        ProfileFlags::SEVERAL_CROSSINGS,
        cs[j..].iter().any(|&c| c < C90),
    );
    // cs[j] >= 0.9 > cs[j - 1], so the denominator is positive.
    let frac = (C90 - cs[j - 1]) / (cs[j] - cs[j - 1]);
    let y90 = (ys[j - 1] + frac * (ys[j] - ys[j - 1])).clamp(ys[j - 1], ys[j]);
    out.y90_mm = Some(y90);
    if y90 <= 0.0 {
        // Unreachable (ys[j] > ys[j - 1] >= 0 and frac > 0), kept so no division by zero
        // can follow even if rounding disagreed.
        return out;
    }

    // Trapezoidal rule from the bed to Y90.
    let (mut prev_y, mut prev_c) = match cfg.bed {
        BedTreatment::LinearToZero => (0.0f32, 0.0f32),
        BedTreatment::Hold => (0.0f32, cs[0]),
    };
    let mut area = 0.0f32;
    for (&y, &c) in ys[..j].iter().zip(&cs[..j]) {
        area += 0.5 * (y - prev_y) * (c + prev_c);
        prev_y = y;
        prev_c = c;
    }
    area += 0.5 * (y90 - prev_y) * (C90 + prev_c);
    let cmean = area / y90;
    out.mean_void_fraction = Some(cmean);
    out.equivalent_depth_mm = Some(y90 - area);

    // The points strictly inside (0, Y90) carry the fits.
    let mut u_pow = [0.0f32; N];
    let mut u_exp = [0.0f32; N];
    let mut c_fit = [0.0f32; N];
    let mut k = 0;
    for (&y, &c) in ys[..j].iter().zip(&cs[..j]) {
        let x = y / y90;
        if x > 0.0 && x < 1.0 {
            u_pow[k] = ln(x);
            u_exp[k] = x - 1.0;
            c_fit[k] = c;
            k += 1;
        }
    }
    if k == 0 {
        return out;
    }
    let iters = cfg.max_iterations;
    let pow = fit_scaled_exp(&u_pow[..k], &c_fit[..k], N_BOUNDS, iters);
    let exp = fit_scaled_exp(&u_exp[..k], &c_fit[..k], A_BOUNDS, iters);
    out.flags
        .set_if(ProfileFlags::POWER_LAW_NOT_CONVERGED, !pow.converged);
    out.flags
        .set_if(ProfileFlags::EXPONENTIAL_NOT_CONVERGED, !exp.converged);
    let n = pow.p;
    out.power_law = Some(PowerLawFit {
        exponent: n,
        rmse: pow.rmse,
        mean_void_fraction: C90 / (1.0 + n),
        mean_diffusivity: 1.0 / (2.0 * n),
        points: k as u8,
        iterations: pow.iterations,
    });
    let dp = 1.0 / exp.p;
    out.exponential = Some(ExponentialFit {
        diffusivity: dp,
        rmse: exp.rmse,
        mean_void_fraction: exponential_mean(dp),
        points: k as u8,
        iterations: exp.iterations,
    });
    out.better_model = Some(if exp.rmse < pow.rmse {
        ProfileModel::Exponential
    } else {
        ProfileModel::PowerLaw
    });
    out
}

/// The depth-averaged void fraction of the exponential profile with diffusivity `d`:
/// `∫_0^1 0.9 exp((y' − 1)/D') dy' = 0.9 D' (1 − exp(−1/D'))`. `None`-free: 0 for `d <= 0`
/// or NaN.
pub fn exponential_mean(d: f32) -> f32 {
    if d.is_nan() || d <= 0.0 {
        return 0.0;
    }
    C90 * d * (1.0 - exp(-1.0 / d))
}

/// Keep the usable points, sorted by elevation, duplicates merged (mean `C`); returns the
/// count.
fn sorted_points<const N: usize>(
    points: &[ProfilePoint],
    ys: &mut [f32; N],
    cs: &mut [f32; N],
    flags: &mut ProfileFlags,
) -> usize {
    let mut n = 0;
    for p in points {
        let usable = p.y_mm.is_finite() && p.y_mm >= 0.0 && (0.0..=1.0).contains(&p.c);
        if !usable || n == N {
            *flags |= ProfileFlags::POINTS_DROPPED;
            continue;
        }
        // Insertion sort: few points, and no NaN is left to upset the order.
        let mut i = n;
        while i > 0 && ys[i - 1] > p.y_mm {
            ys[i] = ys[i - 1];
            cs[i] = cs[i - 1];
            i -= 1;
        }
        ys[i] = p.y_mm;
        cs[i] = p.c;
        n += 1;
    }
    // Merge equal elevations: two tips at one height give one point of mean C (and the
    // interpolation never divides by a zero height).
    let mut m = 0;
    let mut i = 0;
    while i < n {
        let y = ys[i];
        let mut sum = 0.0f32;
        let mut count = 0u32;
        while i < n && ys[i] == y {
            sum += cs[i];
            count += 1;
            i += 1;
        }
        ys[m] = y;
        cs[m] = sum / count as f32;
        m += 1;
    }
    m
}

/// Result of a one-parameter fit of `C = 0.9 exp(p u)`.
struct ScalarFit {
    p: f32,
    rmse: f32,
    iterations: u8,
    converged: bool,
}

fn sse(u: &[f32], c: &[f32], p: f32) -> f32 {
    u.iter()
        .zip(c)
        .map(|(&u, &c)| {
            let r = c - C90 * exp(p * u);
            r * r
        })
        .sum()
}

/// Fit `C = 0.9 exp(p u)` to the points `(u, c)` (all `u < 0`): weighted log-linear start,
/// then bounded Gauss-Newton on the untransformed residuals (see the module docs).
fn fit_scaled_exp(u: &[f32], c: &[f32], (lo, hi): (f32, f32), max_iterations: u8) -> ScalarFit {
    // Start: ln(C/0.9) = p u through the origin, weights C².
    let (mut suv, mut suu) = (0.0f32, 0.0f32);
    for (&u, &c) in u.iter().zip(c) {
        if c > 0.0 && u < 0.0 {
            let w = c * c;
            suv += w * u * ln(c / C90);
            suu += w * u * u;
        }
    }
    let start = if suu > 0.0 { suv / suu } else { 1.0 };
    let mut p = if start.is_finite() {
        start.clamp(lo, hi)
    } else {
        1.0
    };
    let mut s = sse(u, c, p);
    let mut converged = false;
    let mut iterations = 0u8;
    while iterations < max_iterations {
        iterations += 1;
        let (mut sjr, mut sjj) = (0.0f32, 0.0f32);
        for (&u, &c) in u.iter().zip(c) {
            let f = C90 * exp(p * u);
            let j = f * u;
            sjr += j * (c - f);
            sjj += j * j;
        }
        if sjj.is_nan() || sjj <= 0.0 {
            // Every model value underflowed: no gradient to follow.
            break;
        }
        let mut step = sjr / sjj;
        if !step.is_finite() {
            break;
        }
        let tol = 1e-4 * p.max(0.1);
        let mut accepted = false;
        for _ in 0..9 {
            let q = (p + step).clamp(lo, hi);
            let sq = sse(u, c, q);
            if sq <= s {
                let moved = F32Ext::abs(q - p);
                p = q;
                s = sq;
                accepted = true;
                if moved <= tol {
                    converged = true;
                }
                break;
            }
            step *= 0.5;
        }
        if !accepted {
            // No step lowers the sum of squares: at its minimum to within rounding.
            converged = true;
        }
        if converged {
            break;
        }
    }
    if p <= lo || p >= hi {
        converged = false;
    }
    let rmse = sqrt(s / u.len().max(1) as f32);
    ScalarFit {
        p,
        rmse,
        iterations,
        converged,
    }
}

/// f32 `exp`, `ln` and `sqrt` built on `micromath::F32Ext` and plain IEEE operations only,
/// so a Cortex-M4F and a host agree bit for bit, at close to full f32 precision.
///
/// micromath's own functions are fast estimates: `sqrt` is a bit trick (within 5 %), `ln`
/// of `x < 1` goes through a bit-trick reciprocal (about 0.1 absolute error at 0.65, seen
/// when this module was written), `exp` is a 4-term series after reducing the argument to
/// `|r| < ln 2` (about 2e-3 relative at `r = -0.69`). A profile exponent within 1 % needs
/// better, hence:
/// - `exp(x) = exp(r/4)^4 · 2^k` with `k = round(x / ln 2)`, `r = x − k ln 2` (two-constant
///   split of `ln 2`): micromath's series at `|r/4| < 0.087` is good to ~4e-8; measured
///   worst relative error 5e-7 over `[−87, 88]`;
/// - `ln(x)`: micromath's estimate (of `1/x` for `x < 1`, by an IEEE division), then one
///   Newton step `y += x exp(−y) − 1`; measured worst error 4e-7 · max(1, |ln x|) over
///   `[1e-6, 1e3]`;
/// - `sqrt(x)`: micromath's estimate and three Newton steps.
pub(crate) mod fmath {
    use micromath::F32Ext;

    /// `ln 2` split so that `k · LN2_HI` is exact for the `k` that occur (Cody-Waite).
    const LN2_HI: f32 = 0.693_145_75;
    const LN2_LO: f32 = 1.428_606_8e-6;

    /// `2^k` for `k` in `-126..=127` (clamped), built from its bits.
    fn pow2(k: i32) -> f32 {
        f32::from_bits(((k.clamp(-126, 127) + 127) as u32) << 23)
    }

    /// `e^x`; 0 below −104, infinity above 89, NaN for NaN.
    pub(crate) fn exp(x: f32) -> f32 {
        if x.is_nan() {
            return x;
        }
        if x < -104.0 {
            return 0.0;
        }
        if x > 89.0 {
            return f32::INFINITY;
        }
        let k = F32Ext::floor(x * core::f32::consts::LOG2_E + 0.5);
        let r = (x - k * LN2_HI) - k * LN2_LO;
        let e = F32Ext::exp(0.25 * r);
        let e2 = e * e;
        let k = k as i32;
        let h = k / 2;
        // Two factors keep each power of two normal (results down to subnormals).
        e2 * e2 * pow2(h) * pow2(k - h)
    }

    /// Natural logarithm; NaN below 0, `ln(f32::MIN_POSITIVE)` at 0.
    pub(crate) fn ln(x: f32) -> f32 {
        if x.is_nan() || x < 0.0 {
            return f32::NAN;
        }
        let x = x.max(f32::MIN_POSITIVE);
        let y = if x >= 1.0 {
            F32Ext::ln(x)
        } else {
            -F32Ext::ln(1.0 / x)
        };
        if !y.is_finite() {
            return y;
        }
        y + (x * exp(-y) - 1.0)
    }

    /// Square root; 0 for `x <= 0` or NaN.
    pub(crate) fn sqrt(x: f32) -> f32 {
        if x.is_nan() || x <= 0.0 {
            return 0.0;
        }
        if x == f32::INFINITY {
            return x;
        }
        let mut y = F32Ext::sqrt(x);
        for _ in 0..3 {
            y = 0.5 * (y + x / y);
        }
        y
    }
}

#[cfg(test)]
mod tests {
    extern crate std;
    use super::fmath;

    /// The accuracy claimed in the `fmath` docs, against std's f64 functions.
    #[test]
    fn fmath_is_close_to_full_f32_precision() {
        let mut x = -87.0f32;
        while x < 88.0 {
            let rel = (fmath::exp(x) as f64 / (x as f64).exp() - 1.0).abs();
            assert!(rel < 1e-6, "exp({x}): {rel:e}");
            x += 0.0173;
        }
        let mut x = 1e-6f32;
        while x < 1e3 {
            let want = (x as f64).ln();
            let err = (fmath::ln(x) as f64 - want).abs() / want.abs().max(1.0);
            assert!(err < 1e-6, "ln({x}): {err:e}");
            let rel = (fmath::sqrt(x) as f64 / (x as f64).sqrt() - 1.0).abs();
            assert!(rel < 3e-7, "sqrt({x}): {rel:e}");
            x *= 1.0037;
        }
        assert_eq!(fmath::exp(-1000.0), 0.0);
        assert_eq!(fmath::exp(1000.0), f32::INFINITY);
        assert!(fmath::exp(f32::NAN).is_nan());
        assert!(fmath::ln(-1.0).is_nan());
        assert!(fmath::ln(0.0).is_finite());
        assert_eq!(fmath::sqrt(-1.0), 0.0);
        assert_eq!(fmath::sqrt(f32::INFINITY), f32::INFINITY);
    }
}
