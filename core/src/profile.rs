//! The vertical void-fraction profile of one station over one time slice.
//!
//! Input: the void fractions `C` of the probes of one station at their elevations `y` (mm
//! above the bed), in any order, each with its standard error when known
//! ([`ProfilePoint::sigma`], see [`renewal_sigma`]). Output: a [`ProfileFit`].
//!
//! # The estimator: a joint fit of two two-parameter models
//!
//! Both models of DESIGN.md §1 solve the steady rise/diffusion balance `D' dC/dy' = C`
//! with `y' = y/Y90`:
//! - the power law `C = 0.9 (y/Y90)^n` (diffusivity `D' = y'/n`, growing from the bed);
//! - the exponential profile `C = 0.9 exp((y/Y90 − 1)/D')` (constant diffusivity).
//!
//! Each is fitted for `Y90` **and** its shape parameter jointly, by weighted least squares
//! on the untransformed void fractions, weights `1/σ²` from each point's standard error.
//! Both are `C = 0.9 exp(p g(y; a))` with `a = ln Y90`: `p = n`, `g = ln y − a` for the
//! power law; `p = 1/D'`, `g = y e^(−a) − 1` for the exponential. The minimiser is
//! Levenberg-Marquardt (Marquardt 1963, "An algorithm for least-squares estimation of
//! nonlinear parameters", SIAM J. Appl. Math. 11) on the two parameters, at most
//! [`ProfileConfig::max_iterations`] steps of at most 8 damping trials each: bounded work,
//! f32 only, so a device and a host give the same bits.
//!
//! **Points above `Y90`.** A profile bends towards 1 above `Y90` (it is no longer either
//! model), so those points are not fitted. The rule: going up, the first point with
//! `C >= 0.9` and every point above it stay out of the fit; that first point and the highest
//! point below it bracket `Y90`, and the fitted `Y90` is held inside that bracket (a box
//! constraint on `a`; [`ProfileFlags::Y90_ON_BRACKET`] when it ends on an edge). Points
//! at the bed (`y = 0`) do not enter either (both models are fixed there).
//!
//! **Integration consistent with the model.** `Cmean = (1/Y90) ∫_0^Y90 C dy` and
//! `d = (1 − Cmean) Y90` come from the fitted model's closed form: `0.9/(1 + n)` for the
//! power law, `0.9 D' (1 − exp(−1/D'))` for the exponential. The band from the bed to the
//! lowest probe is therefore the model's own (for `n < 1` it lies well above a straight
//! line to zero). [`depth_integral`] integrates any quantity weighted by a fitted profile
//! (`∫ w(y, C(y)) dy`, e.g. a water discharge `∫ (1 − C) V dy`) with the same model.
//!
//! **Model-free column.** [`ProfileFit::trapezoid`] keeps the estimator that needs no model:
//! `Y90` by linear interpolation between the two bracketing probes, the trapezoidal rule
//! from the bed (treated by [`ProfileConfig::bed`]) through the probes to `(Y90, 0.9)`.
//! On coarse arrays it is biased (the chord misplaces `Y90` where `C` bends, and it
//! under-fills the bed band for `n < 1`), but it assumes nothing about the shape.
//!
//! **Which estimate to read.** The headline (`y90_mm`, `mean_void_fraction`,
//! `equivalent_depth_mm`, [`ProfileFit::estimate`]) is the power law (the self-aerated
//! case: `C` vanishes at the bed), unless the exponential fits clearly better
//! ([`MODEL_MARGIN`] in `χ²`); if that model fails the residual test and the other passes
//! it, the other; if both fail, the model-free trapezoid, with [`ProfileFlags::BAD_FIT`].
//! [`ProfileFit::better_model`] says which model has the smaller `χ²` whatever the margin.
//! The residual test: with known standard errors and `k > 2` points, `χ² = Σ (r/σ)²` above
//! the 99 % quantile of the χ² law with `k − 2` degrees of freedom (NIST/SEMATECH
//! e-Handbook of Statistical Methods, §1.3.6.7.4, critical values of the chi-square
//! distribution); without standard errors, an RMSE above [`BAD_FIT_RMSE`]; a fit that did
//! not converge fails too. With two points the models pass through them and nothing can
//! be tested.
//!
//! **Weights.** A void fraction's standard error scales as `C (1 − C)` ([`renewal_sigma`]).
//! Weights taken from the measured `C` would be correlated with its error, so the fit is
//! iteratively reweighted: equal weights first, then twice weights from the previous
//! model's `C` (see `fit_reweighted`).
//!
//! # Uncertainty (delta method)
//!
//! The covariance of the fitted parameters is `(Jᵀ W J)⁻¹` at the minimum (`J` the
//! Jacobian, `W = diag(1/σ²)`); without standard errors it is scaled by the residual
//! variance `S/(k − 2)` (none with two points). Standard errors of `Y90`, `Cmean`, `n`
//! (or `D'`) and `d` follow by the delta method, `var q = ∇qᵀ Cov ∇q` (first-order
//! propagation, e.g. JCGM 100:2008 "Guide to the expression of uncertainty in
//! measurement", §5.1.2). Those of the trapezoid are the same first-order propagation of
//! the points' standard errors through the rule (derivatives by finite differences). A
//! 90 % interval is `± 1.645` standard errors (normal quantile). The standard errors
//! ignore the model's own error: when [`ProfileFlags::BAD_FIT`] is set, read the
//! trapezoid.
//!
//! # Other edge cases
//!
//! - **`Y90` outside the array**: `Y90`, `Cmean`, `d` and the fits are left `None` and a
//!   flag says on which side the crossing is (never extrapolated).
//! - **One point below `Y90`**: two parameters cannot be fitted; `Y90` is the interpolated
//!   one, held fixed, and only the shape is fitted ([`ProfileFlags::Y90_INTERPOLATED`]).
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

/// RMSE of `C` above which a fit without standard errors is taken as bad (common practice,
/// no source: about twice the sampling scatter of a void fraction from a few hundred
/// bubbles).
pub const BAD_FIT_RMSE: f32 = 0.05;

/// How much smaller the exponential's `χ²` must be than the power law's for the headline
/// to take it: both have two parameters, so this is a difference of Akaike's criterion,
/// and 10 means "essentially no support" for the power law (Burnham & Anderson 2002,
/// "Model Selection and Multimodel Inference", §2.6). Without standard errors `χ²` is in
/// units of the better model's residual variance.
pub const MODEL_MARGIN: f32 = 10.0;

/// The normal quantile of a two-sided 90 % interval (`± 1.645 σ`).
pub const Z90: f32 = 1.644_853_6;

/// 99 % quantiles of the χ² law for 1 to 14 degrees of freedom (NIST/SEMATECH
/// e-Handbook of Statistical Methods, §1.3.6.7.4; checked against scipy by
/// tests/python/profile_vs_scipy.py).
pub const CHI2_99: [f32; 14] = [
    6.6349, 9.2103, 11.3449, 13.2767, 15.0863, 16.8119, 18.4753, 20.0902, 21.6660, 23.2093,
    24.7250, 26.2170, 27.6882, 29.1412,
];

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
    /// Standard error of `c` (see [`renewal_sigma`]); `0` (or not finite) when unknown: the
    /// fit then weighs the points equally and takes the scatter from the residuals.
    pub sigma: f32,
}

impl ProfilePoint {
    /// A point without a standard error.
    pub const fn new(y_mm: f32, c: f32) -> Self {
        ProfilePoint {
            y_mm,
            c,
            sigma: 0.0,
        }
    }

    /// A point with the standard error `sigma` of its void fraction.
    pub const fn with_sigma(y_mm: f32, c: f32, sigma: f32) -> Self {
        ProfilePoint { y_mm, c, sigma }
    }
}

/// The standard error of a window's void fraction from its chords: a tip's signal is an
/// alternating renewal process of `cycles` air/water chord pairs, and to first order
/// (Cox 1962, "Renewal Theory", ch. 7, the ratio of renewal sums)
/// `var C = C² (1 − C)² (cv_a² + cv_w²) / N`, with `cv` the coefficients of variation of
/// the air and water chords (`cv² = 1` for exponential chords; pass `None` when they are
/// unknown, which takes that value). Floors that keep a weight finite (common practice, no
/// source): `C` is taken in `[0.02, 0.98]`, `N >= 1`, each `cv²` in `[0.05, 4]`. Never
/// panics: a non-finite `c` gives the widest value, 0.25.
pub fn renewal_sigma(c: f32, cycles: u32, cv2_air: Option<f32>, cv2_water: Option<f32>) -> f32 {
    if !c.is_finite() {
        return 0.25;
    }
    let n = cycles.max(1) as f32;
    let cv = |x: Option<f32>| match x {
        Some(v) if v.is_finite() => v.clamp(0.05, 4.0),
        _ => 1.0,
    };
    let g = spread_shape(c);
    sqrt(g * g * (cv(cv2_air) + cv(cv2_water)) / n)
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
    /// The better model failed the residual test (see the module docs): the headline
    /// holds the model-free trapezoid.
    pub const BAD_FIT: ProfileFlags = ProfileFlags(1 << 7);
    /// The headline model's `Y90` ended on an edge of the bracket of the two probes around
    /// 0.9 (the points pull it outside: read its standard error with care).
    pub const Y90_ON_BRACKET: ProfileFlags = ProfileFlags(1 << 8);
    /// Only one point lies below `Y90`: `Y90` is the interpolated one, only the shapes were
    /// fitted.
    pub const Y90_INTERPOLATED: ProfileFlags = ProfileFlags(1 << 9);

    /// Names of the flags, in bit order, as written into CSV files.
    pub const NAMES: [(ProfileFlags, &'static str); 10] = [
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
        (ProfileFlags::BAD_FIT, "bad_fit"),
        (ProfileFlags::Y90_ON_BRACKET, "y90_on_bracket"),
        (ProfileFlags::Y90_INTERPOLATED, "y90_interpolated"),
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

/// How the model-free trapezoid continues `C` between the bed (`y = 0`) and the lowest
/// probe (the model fits use their own shape there).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum BedTreatment {
    /// `C` falls linearly to 0 at the bed (self-aerated flows: a bubble cannot sit in a
    /// solid wall).
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
    /// The bed band's treatment in the model-free trapezoid.
    pub bed: BedTreatment,
    /// Most Levenberg-Marquardt iterations per model (bounds the work).
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

/// Which estimate a value comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum ProfileModel {
    /// `C = 0.9 (y/Y90)^n`: diffusivity growing linearly from the bed.
    PowerLaw,
    /// `C = 0.9 exp((y/Y90 − 1)/D')`: constant diffusivity.
    Exponential,
    /// The model-free trapezoid (see the module docs).
    Trapezoid,
}

impl ProfileModel {
    /// The name used in CSV files.
    pub const fn name(self) -> &'static str {
        match self {
            ProfileModel::PowerLaw => "power_law",
            ProfileModel::Exponential => "exponential",
            ProfileModel::Trapezoid => "trapezoid",
        }
    }
}

/// Standard errors of one estimate (delta method; see the module docs). `None` where it
/// cannot be computed (no standard errors and no residual degree of freedom, or a singular
/// fit).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProfileErrors {
    /// Of `Y90`, mm.
    pub y90_mm: Option<f32>,
    /// Of `Cmean`.
    pub mean_void_fraction: Option<f32>,
    /// Of the shape parameter: `n` (power law) or `D'` (exponential); `None` for the
    /// trapezoid.
    pub shape: Option<f32>,
    /// Of `d`, mm.
    pub equivalent_depth_mm: Option<f32>,
}

/// The power law `C = 0.9 (y/Y90)^n`, `Y90` and `n` fitted jointly.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct PowerLawFit {
    /// The fitted `Y90`, mm.
    pub y90_mm: f32,
    /// The exponent `n`.
    pub exponent: f32,
    /// Root-mean-square residual of `C` over the fitted points.
    pub rmse: f32,
    /// Weighted sum of squares `Σ (r/σ)²` (`Σ r²` without standard errors).
    pub chi2: f32,
    /// The model's depth-averaged void fraction, `0.9 / (1 + n)`.
    pub mean_void_fraction: f32,
    /// The model's depth-averaged dimensionless diffusivity: `D' = y'/n` averaged over
    /// `0..1`, i.e. `1 / (2 n)`.
    pub mean_diffusivity: f32,
    /// Standard errors (`shape` is that of `n`).
    pub errors: ProfileErrors,
    /// Points in the fit (`0 < y`, below the first `C >= 0.9`).
    pub points: u8,
    /// Levenberg-Marquardt iterations taken.
    pub iterations: u8,
}

/// The exponential profile `C = 0.9 exp((y/Y90 − 1)/D')`, `Y90` and `D'` fitted jointly.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ExponentialFit {
    /// The fitted `Y90`, mm.
    pub y90_mm: f32,
    /// The constant dimensionless diffusivity `D'`.
    pub diffusivity: f32,
    /// Root-mean-square residual of `C` over the fitted points.
    pub rmse: f32,
    /// Weighted sum of squares `Σ (r/σ)²` (`Σ r²` without standard errors).
    pub chi2: f32,
    /// The model's depth-averaged void fraction, `0.9 D' (1 − exp(−1/D'))`.
    pub mean_void_fraction: f32,
    /// Standard errors (`shape` is that of `D'`).
    pub errors: ProfileErrors,
    /// Points in the fit.
    pub points: u8,
    /// Levenberg-Marquardt iterations taken.
    pub iterations: u8,
}

/// The model-free estimate: `Y90` interpolated linearly, trapezoidal rule (module docs).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct TrapezoidEstimate {
    /// `Y90` by linear interpolation between the two bracketing probes, mm.
    pub y90_mm: f32,
    /// `Cmean` by the trapezoidal rule.
    pub mean_void_fraction: f32,
    /// `d = (1 − Cmean) Y90`, mm.
    pub equivalent_depth_mm: f32,
    /// Standard errors propagated from the points' (`shape` is `None`).
    pub errors: ProfileErrors,
}

/// A fitted profile model, for [`depth_integral`].
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum FittedProfile {
    /// `C = 0.9 (y/Y90)^n`.
    PowerLaw {
        /// `Y90`, mm.
        y90_mm: f32,
        /// `n`.
        exponent: f32,
    },
    /// `C = 0.9 exp((y/Y90 − 1)/D')`.
    Exponential {
        /// `Y90`, mm.
        y90_mm: f32,
        /// `D'`.
        diffusivity: f32,
    },
}

impl FittedProfile {
    /// `Y90`, mm.
    pub fn y90_mm(&self) -> f32 {
        match *self {
            FittedProfile::PowerLaw { y90_mm, .. } | FittedProfile::Exponential { y90_mm, .. } => {
                y90_mm
            }
        }
    }

    /// The model's void fraction at `y_mm` (`0..=Y90`; clamped to `0..=1` outside).
    pub fn void_fraction(&self, y_mm: f32) -> f32 {
        let c = match *self {
            FittedProfile::PowerLaw { y90_mm, exponent } => {
                if y_mm <= 0.0 || y90_mm <= 0.0 {
                    0.0
                } else {
                    C90 * exp(exponent * ln(y_mm / y90_mm))
                }
            }
            FittedProfile::Exponential {
                y90_mm,
                diffusivity,
            } => {
                if y90_mm <= 0.0 || diffusivity <= 0.0 {
                    0.0
                } else {
                    C90 * exp((y_mm / y90_mm - 1.0) / diffusivity)
                }
            }
        };
        if c.is_nan() {
            0.0
        } else {
            c.clamp(0.0, 1.0)
        }
    }

    /// The model's depth-averaged void fraction (closed form).
    pub fn mean_void_fraction(&self) -> f32 {
        match *self {
            FittedProfile::PowerLaw { exponent, .. } => C90 / (1.0 + exponent.max(0.0)),
            FittedProfile::Exponential { diffusivity, .. } => exponential_mean(diffusivity),
        }
    }
}

/// Gauss-Legendre nodes and weights on `[-1, 1]`, 5 points (Abramowitz & Stegun 1964,
/// Table 25.4).
const GL5: [(f32, f32); 5] = [
    (0.0, 0.568_888_9),
    (-0.538_469_3, 0.478_628_7),
    (0.538_469_3, 0.478_628_7),
    (-0.906_179_8, 0.236_926_9),
    (0.906_179_8, 0.236_926_9),
];
/// Panels of [`depth_integral`].
const PANELS: usize = 8;

/// `∫_0^Y90 w(y, C(y)) dy` over the depth of a fitted profile, `C` from the model, `y` in
/// mm: e.g. `|_, c| c` gives `Cmean Y90`, `|y, c| (1 − c) v(y)` a water discharge per unit
/// width. The substitution `y = Y90 s³` smooths the bed end (a power law `y^n` with small
/// `n`, a velocity `y^(1/N)`), then 8 panels of 5-point Gauss-Legendre in `s`: 40
/// evaluations of `w`, relative error below 1e-5 on `y^q` for `q >= 0.1` and on the
/// exponential profile for `D' >= 0.1` (checked against closed forms in
/// core/tests/profile.rs). 0 when `Y90` is not positive or `w` is not
/// finite.
pub fn depth_integral(model: &FittedProfile, w: impl Fn(f32, f32) -> f32) -> f32 {
    let top = model.y90_mm();
    if top.is_nan() || top <= 0.0 {
        return 0.0;
    }
    let h = 1.0 / PANELS as f32;
    let mut sum = 0.0f32;
    for p in 0..PANELS {
        let mid = (p as f32 + 0.5) * h;
        for &(x, wt) in &GL5 {
            let s = mid + 0.5 * h * x;
            let y = top * s * s * s;
            // dy = 3 Y90 s² ds, ds = h/2 dx.
            sum += wt * 0.5 * h * 3.0 * top * s * s * w(y, model.void_fraction(y));
        }
    }
    if sum.is_finite() {
        sum
    } else {
        0.0
    }
}

/// The profile of one station over one time slice.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProfileFit {
    /// Usable points (distinct elevations after merging duplicates).
    pub points_used: u8,
    /// `Y90` of the estimate to read ([`estimate`](Self::estimate)), mm; `None` when the
    /// array does not span it.
    pub y90_mm: Option<f32>,
    /// Depth-averaged void fraction `Cmean` of the estimate to read.
    pub mean_void_fraction: Option<f32>,
    /// Equivalent clear-water depth `d = (1 − Cmean) Y90` of the estimate to read, mm.
    pub equivalent_depth_mm: Option<f32>,
    /// Standard errors of the estimate to read (`shape`: of the power law's `n`).
    pub errors: ProfileErrors,
    /// Which estimate the three values above are.
    pub estimate: Option<ProfileModel>,
    /// The model-free trapezoid.
    pub trapezoid: Option<TrapezoidEstimate>,
    /// The power-law fit, when there was a point to fit.
    pub power_law: Option<PowerLawFit>,
    /// The exponential (constant-diffusivity) fit, when there was a point to fit.
    pub exponential: Option<ExponentialFit>,
    /// The model with the smaller weighted sum of squares (the power law on a tie).
    pub better_model: Option<ProfileModel>,
    /// Residual degrees of freedom of the fits (points minus 2).
    pub dof: u8,
    /// Quality flags.
    pub flags: ProfileFlags,
}

impl ProfileFit {
    /// The better model as a [`FittedProfile`] (for [`depth_integral`]).
    pub fn fitted_profile(&self) -> Option<FittedProfile> {
        match self.better_model? {
            ProfileModel::PowerLaw => self.power_law.map(|p| FittedProfile::PowerLaw {
                y90_mm: p.y90_mm,
                exponent: p.exponent,
            }),
            ProfileModel::Exponential => self.exponential.map(|e| FittedProfile::Exponential {
                y90_mm: e.y90_mm,
                diffusivity: e.diffusivity,
            }),
            ProfileModel::Trapezoid => None,
        }
    }
}

/// Fit the profile of `points` (any order), at most [`MAX_PROFILE_POINTS`] of them. Never
/// panics; see the module docs for the treatment of every edge case.
pub fn fit_profile(points: &[ProfilePoint], cfg: &ProfileConfig) -> ProfileFit {
    fit_profile_sized::<MAX_PROFILE_POINTS>(points, cfg)
}

/// [`fit_profile`] with room for `N` points (`N <= 255`; the sort is O(N²) and the work
/// per fit O(N · iterations)). Uses about `8 N` f32 of stack.
pub fn fit_profile_sized<const N: usize>(
    points: &[ProfilePoint],
    cfg: &ProfileConfig,
) -> ProfileFit {
    const { assert!(N <= 255, "points are counted in a u8") };
    let mut out = ProfileFit::default();
    let mut ys = [0.0f32; N];
    let mut cs = [0.0f32; N];
    let mut ss = [0.0f32; N];
    let m = sorted_points(points, &mut ys, &mut cs, &mut ss, &mut out.flags);
    out.points_used = m as u8;
    if m < 2 {
        out.flags |= ProfileFlags::TOO_FEW_POINTS;
        return out;
    }
    let (ys, cs, ss) = (&ys[..m], &cs[..m], &ss[..m]);

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
    let known = ss[..=j].iter().all(|&s| s > 0.0 && s.is_finite());
    let Some(trap) = trapezoid(ys, cs, ss, j, cfg.bed, known) else {
        return out;
    };
    out.trapezoid = Some(trap);
    out.estimate = Some(ProfileModel::Trapezoid);
    out.y90_mm = Some(trap.y90_mm);
    out.mean_void_fraction = Some(trap.mean_void_fraction);
    out.equivalent_depth_mm = Some(trap.equivalent_depth_mm);
    out.errors = trap.errors;

    // The fitted points: 0 < y, below the first C >= 0.9; with standard errors, each
    // point's variance factor `σ² / (C (1 − C))²` (see `reweigh`).
    let mut yf = [0.0f32; N];
    let mut lf = [0.0f32; N];
    let mut cf = [0.0f32; N];
    let mut kf = [0.0f32; N];
    let mut k = 0;
    for i in 0..j {
        if ys[i] > 0.0 {
            yf[k] = ys[i];
            lf[k] = ln(ys[i]);
            cf[k] = cs[i];
            let g = spread_shape(cs[i]);
            kf[k] = if known { ss[i] * ss[i] / (g * g) } else { 0.0 };
            k += 1;
        }
    }
    if k == 0 {
        return out;
    }
    let fixed = k < 2;
    out.flags.set_if(ProfileFlags::Y90_INTERPOLATED, fixed);
    let free = if fixed { 1 } else { 2 };
    let dof = k.saturating_sub(free);
    out.dof = dof as u8;
    let setup = FitSetup {
        a0: ln(trap.y90_mm),
        bracket: (ln(ys[j - 1]), ln(ys[j])),
        fixed,
        // With Y90 held, its variance is the interpolation's.
        var_a_fixed: trap
            .errors
            .y90_mm
            .map(|s| (s / trap.y90_mm) * (s / trap.y90_mm)),
        scale: if known {
            Some(1.0)
        } else if dof > 0 {
            None
        } else {
            Some(f32::NAN)
        },
        dof,
        max_iterations: cfg.max_iterations,
    };
    let data = (&yf[..k], &lf[..k], &cf[..k], &kf[..k]);
    let pow = fit_reweighted::<N>(Shape::PowerLaw, data, known, &setup);
    let ex = fit_reweighted::<N>(Shape::Exponential, data, known, &setup);
    out.flags
        .set_if(ProfileFlags::POWER_LAW_NOT_CONVERGED, !pow.converged);
    out.flags
        .set_if(ProfileFlags::EXPONENTIAL_NOT_CONVERGED, !ex.converged);

    let y90 = exp(pow.a);
    let n = pow.p;
    let cm = C90 / (1.0 + n);
    let dcm = -C90 / ((1.0 + n) * (1.0 + n));
    let d = y90 * (1.0 - cm);
    let pl = PowerLawFit {
        y90_mm: y90,
        exponent: n,
        rmse: pow.rmse,
        chi2: pow.s,
        mean_void_fraction: cm,
        mean_diffusivity: 1.0 / (2.0 * n),
        errors: ProfileErrors {
            y90_mm: pow.se((y90, 0.0)),
            mean_void_fraction: pow.se((0.0, dcm)),
            shape: pow.se((0.0, 1.0)),
            equivalent_depth_mm: pow.se((d, -y90 * dcm)),
        },
        points: k as u8,
        iterations: pow.iterations,
    };
    out.power_law = Some(pl);

    let y90e = exp(ex.a);
    let u = ex.p;
    let dp = 1.0 / u;
    let cme = exponential_mean(dp);
    let eu = exp(-u);
    let dcme = C90 * (u * eu - (1.0 - eu)) / (u * u);
    let de = y90e * (1.0 - cme);
    let el = ExponentialFit {
        y90_mm: y90e,
        diffusivity: dp,
        rmse: ex.rmse,
        chi2: ex.s,
        mean_void_fraction: cme,
        errors: ProfileErrors {
            y90_mm: ex.se((y90e, 0.0)),
            mean_void_fraction: ex.se((0.0, dcme)),
            shape: ex.se((0.0, -1.0 / (u * u))),
            equivalent_depth_mm: ex.se((de, -y90e * dcme)),
        },
        points: k as u8,
        iterations: ex.iterations,
    };
    out.exponential = Some(el);

    out.better_model = Some(if ex.s < pow.s {
        ProfileModel::Exponential
    } else {
        ProfileModel::PowerLaw
    });
    let bad = |f: &TwoFit| {
        !f.converged
            || if known {
                dof > 0 && f.s > chi2_99(dof)
            } else {
                f.rmse > BAD_FIT_RMSE
            }
    };
    // The power law, unless the exponential fits clearly better (by MODEL_MARGIN in
    // χ²); the other model if the preferred one fails the residual test and the other
    // passes it; else the trapezoid.
    let scale = if known {
        1.0
    } else if dof > 0 {
        pow.s.min(ex.s) / dof as f32
    } else {
        f32::INFINITY
    };
    let exp_first = pow.s - ex.s > MODEL_MARGIN * scale;
    let order = if exp_first {
        [
            (ProfileModel::Exponential, &ex),
            (ProfileModel::PowerLaw, &pow),
        ]
    } else {
        [
            (ProfileModel::PowerLaw, &pow),
            (ProfileModel::Exponential, &ex),
        ]
    };
    let Some(&(model, best)) = order.iter().find(|(_, f)| !bad(f)) else {
        out.flags |= ProfileFlags::BAD_FIT;
        out.errors.shape = pl.errors.shape;
        return out;
    };
    out.flags
        .set_if(ProfileFlags::Y90_ON_BRACKET, best.on_bracket);
    let (y, c, dd, mut errors) = match model {
        ProfileModel::Exponential => (y90e, cme, de, el.errors),
        _ => (y90, cm, d, pl.errors),
    };
    errors.shape = pl.errors.shape;
    out.estimate = Some(model);
    out.y90_mm = Some(y);
    out.mean_void_fraction = Some(c);
    out.equivalent_depth_mm = Some(dd);
    out.errors = errors;
    out
}

/// Void fractions are taken in `[C_FLOOR, 1 − C_FLOOR]` in variances (common practice, no
/// source: keeps a weight finite at `C = 0` and `1`).
const C_FLOOR: f32 = 0.02;

/// `C (1 − C)` with `C` kept off 0 and 1: the renewal-process standard error of a void
/// fraction scales as this ([`renewal_sigma`]).
fn spread_shape(c: f32) -> f32 {
    let c = if c.is_nan() {
        0.5
    } else {
        c.clamp(C_FLOOR, 1.0 - C_FLOOR)
    };
    c * (1.0 - c)
}

/// Outer passes of the reweighted fit.
const REWEIGH_PASSES: usize = 2;

/// One model fitted by iteratively reweighted least squares: with standard errors, a first
/// fit with equal weights, then [`REWEIGH_PASSES`] fits whose weights come from the
/// previous model's void fractions, `w = 1 / (k (f (1 − f))²)` with `k` each point's
/// variance factor. Weights from the measured `C` would be correlated with its error (a
/// point that came out low would weigh more) and bias the fit; the model's `C` is not
/// (the quasi-likelihood fit of a variance function: Wedderburn 1974, Biometrika 61, 439;
/// McCullagh & Nelder 1989, "Generalized Linear Models", §9.2). Without standard errors,
/// one pass with equal weights.
fn fit_reweighted<const N: usize>(
    shape: Shape,
    (y, ly, c, kf): (&[f32], &[f32], &[f32], &[f32]),
    known: bool,
    setup: &FitSetup,
) -> TwoFit {
    let mut w = [1.0f32; N];
    let k = y.len().min(N);
    let first = {
        let pts = Points {
            y,
            ly,
            c,
            w: &w[..k],
        };
        fit_two(shape, &pts, setup, None)
    };
    if !known {
        return first;
    }
    let mut fit = first;
    for _ in 0..REWEIGH_PASSES {
        let inv = exp(-fit.a);
        for i in 0..k {
            let f = C90 * exp(fit.p * shape.g(y[i], ly[i], fit.a, inv).0);
            let g = spread_shape(f);
            let var = kf[i] * g * g;
            w[i] = if var > 0.0 && var.is_finite() {
                1.0 / var
            } else {
                1.0
            };
        }
        let pts = Points {
            y,
            ly,
            c,
            w: &w[..k],
        };
        fit = fit_two(shape, &pts, setup, Some((fit.a, fit.p)));
    }
    fit
}

/// The 99 % quantile of χ² with `dof` degrees of freedom: the table up to 14, then the
/// Wilson-Hilferty approximation `dof (1 − 2/(9 dof) + 2.326 sqrt(2/(9 dof)))³` (Wilson &
/// Hilferty 1931, Proc. Natl. Acad. Sci. 17), within 0.1 % of the table at 14.
pub fn chi2_99(dof: usize) -> f32 {
    match dof {
        0 => f32::INFINITY,
        1..=14 => CHI2_99[dof - 1],
        _ => {
            let v = dof as f32;
            let t = 2.0 / (9.0 * v);
            let x = 1.0 - t + 2.326_348 * sqrt(t);
            v * x * x * x
        }
    }
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

/// The model-free estimate over the sorted points, `j` the first at or above 0.9 (`j >= 1`),
/// with the first-order propagation of the standard errors when `known`.
fn trapezoid(
    ys: &[f32],
    cs: &[f32],
    ss: &[f32],
    j: usize,
    bed: BedTreatment,
    known: bool,
) -> Option<TrapezoidEstimate> {
    let (ya, yb) = (*ys.get(j - 1)?, *ys.get(j)?);
    let (ca, cb) = (*cs.get(j - 1)?, *cs.get(j)?);
    // cb >= 0.9 > ca, so the denominator is positive.
    let den = cb - ca;
    let frac = (C90 - ca) / den;
    let y90 = (ya + frac * (yb - ya)).clamp(ya, yb);
    if y90.is_nan() || y90 <= 0.0 {
        // Unreachable (yb > ya >= 0 and frac > 0), kept so no division by zero can follow
        // even if rounding disagreed.
        return None;
    }
    let (mut prev_y, mut prev_c) = match bed {
        BedTreatment::LinearToZero => (0.0f32, 0.0f32),
        BedTreatment::Hold => (0.0f32, cs[0]),
    };
    let mut area = 0.0f32;
    for (&y, &c) in ys[..j].iter().zip(&cs[..j]) {
        area += 0.5 * (y - prev_y) * (c + prev_c);
        prev_y = y;
        prev_c = c;
    }
    area += 0.5 * (y90 - ya) * (C90 + ca);
    let cmean = area / y90;
    let d = y90 - area;
    let mut errors = ProfileErrors::default();
    if known {
        // d(Y90)/dc for c_a and c_b; d(area)/dc by point; then Cmean = A/Y90, d = Y90 − A.
        let dy_a = (yb - ya) * (C90 - cb) / (den * den);
        let dy_b = -(yb - ya) * (C90 - ca) / (den * den);
        let da_dy = 0.5 * (C90 + ca);
        let (mut vy, mut vc, mut vd) = (0.0f32, 0.0f32, 0.0f32);
        for i in 0..=j {
            let left = if i == 0 { 0.0 } else { ys[i - 1] };
            let (mut g_y, mut g_a) = (0.0f32, 0.0f32);
            if i < j {
                // The interval on the left of point i, and on its right (the last one ends
                // at Y90).
                let right = if i + 1 < j { ys[i + 1] } else { y90 };
                g_a += 0.5 * (right - left);
                if i == 0 && bed == BedTreatment::Hold {
                    g_a += 0.5 * ys[0];
                }
            }
            if i == j - 1 {
                g_y = dy_a;
                g_a += da_dy * dy_a;
            } else if i == j {
                g_y = dy_b;
                g_a += da_dy * dy_b;
            }
            let var = ss[i] * ss[i];
            let g_c = (g_a - cmean * g_y) / y90;
            let g_d = g_y - g_a;
            vy += g_y * g_y * var;
            vc += g_c * g_c * var;
            vd += g_d * g_d * var;
        }
        errors = ProfileErrors {
            y90_mm: Some(sqrt(vy)),
            mean_void_fraction: Some(sqrt(vc)),
            shape: None,
            equivalent_depth_mm: Some(sqrt(vd)),
        };
    }
    Some(TrapezoidEstimate {
        y90_mm: y90,
        mean_void_fraction: cmean,
        equivalent_depth_mm: d,
        errors,
    })
}

/// Keep the usable points, sorted by elevation, duplicates merged (mean `C`, its standard
/// error); returns the count.
fn sorted_points<const N: usize>(
    points: &[ProfilePoint],
    ys: &mut [f32; N],
    cs: &mut [f32; N],
    ss: &mut [f32; N],
    flags: &mut ProfileFlags,
) -> usize {
    let mut n = 0;
    for p in points {
        let usable = p.y_mm.is_finite() && p.y_mm >= 0.0 && (0.0..=1.0).contains(&p.c);
        if !usable || n == N {
            *flags |= ProfileFlags::POINTS_DROPPED;
            continue;
        }
        let sigma = if p.sigma.is_finite() && p.sigma > 0.0 {
            p.sigma
        } else {
            0.0
        };
        // Insertion sort: few points, and no NaN is left to upset the order.
        let mut i = n;
        while i > 0 && ys[i - 1] > p.y_mm {
            ys[i] = ys[i - 1];
            cs[i] = cs[i - 1];
            ss[i] = ss[i - 1];
            i -= 1;
        }
        ys[i] = p.y_mm;
        cs[i] = p.c;
        ss[i] = sigma;
        n += 1;
    }
    // Merge equal elevations: two tips at one height give one point of mean C (and the
    // interpolation never divides by a zero height).
    let mut m = 0;
    let mut i = 0;
    while i < n {
        let y = ys[i];
        let (mut sum, mut var) = (0.0f32, 0.0f32);
        let mut unknown = false;
        let mut count = 0u32;
        while i < n && ys[i] == y {
            sum += cs[i];
            var += ss[i] * ss[i];
            unknown |= ss[i] == 0.0;
            count += 1;
            i += 1;
        }
        ys[m] = y;
        cs[m] = sum / count as f32;
        ss[m] = if unknown {
            0.0
        } else {
            sqrt(var) / count as f32
        };
        m += 1;
    }
    m
}

/// The two model shapes, both `C = 0.9 exp(p g(y; a))`, `a = ln Y90`.
#[derive(Clone, Copy)]
enum Shape {
    /// `g = ln y − a`, `p = n`.
    PowerLaw,
    /// `g = y e^(−a) − 1`, `p = 1/D'`.
    Exponential,
}

impl Shape {
    fn p_bounds(self) -> (f32, f32) {
        match self {
            Shape::PowerLaw => N_BOUNDS,
            Shape::Exponential => A_BOUNDS,
        }
    }

    /// `(g, ∂g/∂a)` at a point; `inv_y90 = e^(−a)`.
    #[inline]
    fn g(self, y: f32, ly: f32, a: f32, inv_y90: f32) -> (f32, f32) {
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
struct Points<'a> {
    y: &'a [f32],
    ly: &'a [f32],
    c: &'a [f32],
    w: &'a [f32],
}

impl Points<'_> {
    fn iter(&self) -> impl Iterator<Item = (f32, f32, f32, f32)> + '_ {
        self.y
            .iter()
            .zip(self.ly)
            .zip(self.c)
            .zip(self.w)
            .map(|(((&y, &ly), &c), &w)| (y, ly, c, w))
    }

    /// Weighted sum of squares at `(a, p)`.
    fn wsse(&self, shape: Shape, a: f32, p: f32) -> f32 {
        let inv = exp(-a);
        self.iter()
            .map(|(y, ly, c, w)| {
                let r = c - C90 * exp(p * shape.g(y, ly, a, inv).0);
                w * r * r
            })
            .sum()
    }

    /// `Jᵀ W J` as `(aa, ap, pp)` and `Jᵀ W r` as `(a, p)` at `(a, p)`.
    fn normal(&self, shape: Shape, a: f32, p: f32) -> ([f32; 3], [f32; 2], f32) {
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
struct FitSetup {
    /// Start of `a = ln Y90` (the interpolated `Y90`).
    a0: f32,
    /// The bracket of `a` (the probes around 0.9).
    bracket: (f32, f32),
    /// `a` held at `a0` (one point only).
    fixed: bool,
    /// Variance of `a` when it is held.
    var_a_fixed: Option<f32>,
    /// `Some(1)`: weights are `1/σ²`; `None`: scale by `S/dof`; `Some(NaN)`: no covariance.
    scale: Option<f32>,
    dof: usize,
    max_iterations: u8,
}

/// A two-parameter fit: the minimum and its covariance `(aa, ap, pp)`.
struct TwoFit {
    a: f32,
    p: f32,
    /// Weighted sum of squares.
    s: f32,
    rmse: f32,
    cov: Option<[f32; 3]>,
    iterations: u8,
    converged: bool,
    on_bracket: bool,
}

impl TwoFit {
    /// Standard error of a quantity of gradient `(∂q/∂a, ∂q/∂p)` (delta method).
    fn se(&self, (ga, gp): (f32, f32)) -> Option<f32> {
        let [aa, ap, pp] = self.cov?;
        let v = ga * ga * aa + 2.0 * ga * gp * ap + gp * gp * pp;
        v.is_finite().then(|| sqrt(v.max(0.0)))
    }
}

/// Levenberg-Marquardt on `(a, p)` for one shape (see the module docs): start from the
/// interpolated `Y90` and the log-linear fit of `p`, `a` kept in its bracket, `p` in its
/// bounds; a step whose `a` leaves the bracket is redone with `a` held.
fn fit_two(shape: Shape, pts: &Points, setup: &FitSetup, from: Option<(f32, f32)>) -> TwoFit {
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
