//! Fitting a profile: the power-law and exponential fits by reweighted least squares, the
//! model-free trapezoid estimate, and the choice between them.

use super::fmath::{exp, ln, sqrt};
use super::solve::{fit_two, FitSetup, Points, Shape, TwoFit};
use super::{
    exponential_mean, spread_shape, BedTreatment, ExponentialFit, PowerLawFit, ProfileConfig,
    ProfileErrors, ProfileFit, ProfileFlags, ProfileModel, ProfilePoint, TrapezoidEstimate,
    BAD_FIT_RMSE, C90, CHI2_99, MAX_PROFILE_POINTS, MODEL_MARGIN,
};

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
