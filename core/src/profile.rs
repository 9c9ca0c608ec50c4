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

mod fit;
pub(crate) mod fmath;
mod solve;

pub use fit::{chi2_99, fit_profile, fit_profile_sized};

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

/// The depth-averaged void fraction of the exponential profile with diffusivity `d`:
/// `∫_0^1 0.9 exp((y' − 1)/D') dy' = 0.9 D' (1 − exp(−1/D'))`. `None`-free: 0 for `d <= 0`
/// or NaN.
pub fn exponential_mean(d: f32) -> f32 {
    if d.is_nan() || d <= 0.0 {
        return 0.0;
    }
    C90 * d * (1.0 - exp(-1.0 / d))
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
