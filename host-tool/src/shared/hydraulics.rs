//! Flow indicators for reports: water properties, Reynolds number, ideal dam-break and
//! hydraulic-jump/bore relations (host side, f64).
//!
//! Published relations used (coefficients recalled from memory where marked; each is
//! checked in the tests against a handbook table or an independent published formula):
//! - density of air-free water at 1 atm: the Kell (1975) formulation, a rational function of
//!   the temperature in °C, quoted for 0–150 °C (coefficients from memory; the tests check it
//!   against the Tanaka et al. (2001) formula and a handbook table);
//! - dynamic viscosity: the Kestin et al. (1978) correlation relative to 20 °C, as adopted by
//!   ISO/TR 3666 with `mu(20 °C) = 1.0016 mPa s` (coefficients and reference value from
//!   memory; checked against a handbook table and the Vogel equation);
//! - Ritter's (1892) solution of the ideal dam break over a dry, horizontal, frictionless
//!   bed: front celerity `2 sqrt(g d0)`, depth `(2 sqrt(g d0) − x/t)² / (9 g)` in the fan;
//! - the Belanger equation for the conjugate depths of a hydraulic jump,
//!   `d2/d1 = (sqrt(1 + 8 Fr1²) − 1) / 2`, which holds for a moving bore in the frame of the
//!   bore (momentum conservation across a steep front, friction and bed slope neglected).
//!
//! `g` is the standard gravity, 9.80665 m/s². Local gravity differs from it by at most about
//! 0.3 % (about 9.78 m/s² at the equator to 9.83 m/s² at the poles, from memory), which moves
//! `sqrt(g d)` by 0.15 % at most, below the uncertainty of a measured depth; a laboratory that
//! knows its local `g` can pass it to the `_with_g` variants where offered.

/// Standard gravity, m/s² (the conventional value of the international system of units).
pub const STANDARD_GRAVITY: f64 = 9.80665;

/// Temperatures for which the water correlations are used here, °C (liquid at 1 atm).
pub const TEMPERATURE_RANGE_C: (f64, f64) = (0.0, 100.0);

/// Reynolds number below which laboratory models are cautioned for under-estimating air
/// entrainment: `Re = rho U d / mu > 1e5` is the commonly quoted condition for negligible
/// scale effects in the void fraction of hydraulic jumps (from memory; studies of bubble
/// count rates and chord sizes ask for larger values, so passing it does not make those
/// scale-free).
pub const SCALE_EFFECT_REYNOLDS: f64 = 1.0e5;

fn in_range(t_c: f64) -> bool {
    t_c.is_finite() && (TEMPERATURE_RANGE_C.0..=TEMPERATURE_RANGE_C.1).contains(&t_c)
}

/// Density of air-free water at 1 atm, kg/m³, at `t_c` °C: the Kell (1975) formulation.
/// `None` outside [`TEMPERATURE_RANGE_C`] or for NaN.
pub fn water_density(t_c: f64) -> Option<f64> {
    if !in_range(t_c) {
        return None;
    }
    let t = t_c;
    // Kell (1975), coefficients from memory; tests/water_properties.rs checks the result
    // against IAPWS-95 (within 10 ppm from 0 to 40 °C).
    let num = 999.839_52 + 16.945_176 * t - 7.987_040_1e-3 * t * t - 46.170_461e-6 * t.powi(3)
        + 105.563_02e-9 * t.powi(4)
        - 280.542_53e-12 * t.powi(5);
    Some(num / (1.0 + 16.879_850e-3 * t))
}

/// Dynamic viscosity of water at 1 atm, Pa s, at `t_c` °C: the Kestin et al. (1978)
/// correlation `log10(mu/mu20) = (20 − t)/(t + 96) · (1.2378 − 1.303e-3 (20 − t)
/// + 3.06e-6 (20 − t)² + 2.55e-8 (20 − t)³)` with `mu20 = 1.0016 mPa s`. `None` outside
/// [`TEMPERATURE_RANGE_C`] or for NaN.
pub fn water_viscosity(t_c: f64) -> Option<f64> {
    if !in_range(t_c) {
        return None;
    }
    // Coefficients and the 20 °C value from memory; tests/water_properties.rs checks the
    // result against the IAPWS 2008 viscosity release (within 0.2 % from 0 to 40 °C).
    let d = 20.0 - t_c;
    let log_ratio =
        d / (t_c + 96.0) * (1.2378 - 1.303e-3 * d + 3.06e-6 * d * d + 2.55e-8 * d * d * d);
    Some(1.0016e-3 * 10f64.powf(log_ratio))
}

/// Kinematic viscosity of water, m²/s, at `t_c` °C (`mu / rho`).
pub fn water_kinematic_viscosity(t_c: f64) -> Option<f64> {
    Some(water_viscosity(t_c)? / water_density(t_c)?)
}

/// Reynolds number `rho U d / mu` of a flow of velocity `u_m_s` and depth (or hydraulic
/// length) `d_m` in water at `t_c` °C (DESIGN.md §1). `None` for invalid inputs.
pub fn reynolds(u_m_s: f64, d_m: f64, t_c: f64) -> Option<f64> {
    if !(u_m_s.is_finite() && d_m.is_finite() && d_m > 0.0) {
        return None;
    }
    Some(water_density(t_c)? * u_m_s.abs() * d_m / water_viscosity(t_c)?)
}

/// A caution for reports when `re` is below [`SCALE_EFFECT_REYNOLDS`] (or not a number):
/// air entrainment (void fractions, bubble counts) of a small laboratory model is then
/// likely under-estimated relative to the prototype. `None` when no caution is due.
pub fn scale_effect_caution(re: f64) -> Option<String> {
    if re.is_nan() {
        return Some(
            "Reynolds number unknown: scale effects on air entrainment not assessed".into(),
        );
    }
    (re.abs() < SCALE_EFFECT_REYNOLDS).then(|| {
        format!(
            "Reynolds number {:.3e} is below {:.0e}: air entrainment of this model is likely \
             under-estimated (scale effects); compare runs at equal Reynolds numbers and do \
             not scale bubble counts or chords to the prototype",
            re, SCALE_EFFECT_REYNOLDS
        )
    })
}

/// Froude number `V / sqrt(g d)`, standard gravity.
pub fn froude(v_m_s: f64, d_m: f64) -> Option<f64> {
    froude_with_g(v_m_s, d_m, STANDARD_GRAVITY)
}

/// Froude number `V / sqrt(g d)` with a given `g`.
pub fn froude_with_g(v_m_s: f64, d_m: f64, g: f64) -> Option<f64> {
    let f = v_m_s / (g * d_m).sqrt();
    (d_m > 0.0 && g > 0.0 && f.is_finite()).then_some(f)
}

/// Ritter's (1892) ideal dam-break front celerity `2 sqrt(g d0)`, m/s, for a reservoir of
/// depth `d0_m` released over a dry horizontal bed, standard gravity.
pub fn ritter_front_celerity(d0_m: f64) -> Option<f64> {
    ritter_front_celerity_with_g(d0_m, STANDARD_GRAVITY)
}

/// [`ritter_front_celerity`] with a given `g`.
pub fn ritter_front_celerity_with_g(d0_m: f64, g: f64) -> Option<f64> {
    (d0_m.is_finite() && d0_m >= 0.0 && g > 0.0).then(|| 2.0 * (g * d0_m).sqrt())
}

/// Ritter's (1892) depth at `x_m` (dam at 0, reservoir at `x < 0`) and `t_s > 0` after the
/// release, m: `d0` behind the negative wave `x < −c0 t`, `(2 c0 − x/t)² / (9 g)` in the fan,
/// 0 beyond the front `x > 2 c0 t`, with `c0 = sqrt(g d0)`; standard gravity.
pub fn ritter_depth(d0_m: f64, x_m: f64, t_s: f64) -> Option<f64> {
    if !(d0_m.is_finite() && d0_m >= 0.0 && x_m.is_finite() && t_s.is_finite() && t_s > 0.0) {
        return None;
    }
    let g = STANDARD_GRAVITY;
    let c0 = (g * d0_m).sqrt();
    let xi = x_m / t_s;
    Some(if xi <= -c0 {
        d0_m
    } else if xi >= 2.0 * c0 {
        0.0
    } else {
        (2.0 * c0 - xi).powi(2) / (9.0 * g)
    })
}

/// The Belanger equation: conjugate-depth ratio `d2/d1 = (sqrt(1 + 8 Fr1²) − 1) / 2` of a
/// hydraulic jump with upstream Froude number `fr1` (or of a bore with its surge Froude
/// number, see [`surge_froude`]). Meaningful for `Fr1 >= 1`; `None` for NaN or infinite.
pub fn belanger_depth_ratio(fr1: f64) -> Option<f64> {
    let r = ((1.0 + 8.0 * fr1 * fr1).sqrt() - 1.0) / 2.0;
    r.is_finite().then_some(r)
}

/// The inverse of the Belanger equation: the upstream Froude number of a jump (or surge
/// Froude number of a bore) with conjugate-depth ratio `r = d2/d1`,
/// `Fr1 = sqrt(r (r + 1) / 2)`. `None` for `r <= 0` or non-finite.
pub fn froude_from_depth_ratio(r: f64) -> Option<f64> {
    (r.is_finite() && r > 0.0).then(|| (r * (r + 1.0) / 2.0).sqrt())
}

/// Surge Froude number of a bore: its speed relative to the flow it advances into,
/// `|V1 − c| / sqrt(g d1)`, with `celerity_m_s` (`c`) and `v1_m_s` (`V1`, the initial flow
/// ahead of the bore, of depth `d1_m`) signed along one axis; standard gravity. For a bore
/// moving upstream against a flow, `c < 0 < V1` and the speeds add.
pub fn surge_froude(celerity_m_s: f64, v1_m_s: f64, d1_m: f64) -> Option<f64> {
    froude((v1_m_s - celerity_m_s).abs(), d1_m)
}

/// Celerity of a bore between the depth `d1_m` ahead of it (flow `v1_m_s`) and `d2_m`
/// behind it, from the Belanger equation in the bore's frame, m/s, signed like `v1_m_s`:
/// `c = V1 + s sqrt(g d1 r (r + 1) / 2)`, `r = d2/d1`, with `s = +1` for a bore advancing
/// towards positive `x` and `−1` towards negative `x`. `None` for invalid depths.
pub fn bore_celerity(d1_m: f64, d2_m: f64, v1_m_s: f64, towards_positive: bool) -> Option<f64> {
    if !(d1_m > 0.0 && d2_m > 0.0 && v1_m_s.is_finite()) {
        return None;
    }
    let fr = froude_from_depth_ratio(d2_m / d1_m)?;
    let w = fr * (STANDARD_GRAVITY * d1_m).sqrt();
    let s = if towards_positive { 1.0 } else { -1.0 };
    Some(v1_m_s + s * w)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    /// CRC Handbook of Chemistry and Physics, table "Properties of water in the range
    /// 0–100 °C": density (tabulated in g/cm³, here kg/m³) and viscosity (tabulated in
    /// µPa s, here Pa s) at 5, 20 and 35 °C. Values from memory.
    const CRC: [(f64, f64, f64); 3] = [
        (5.0, 999.967, 1.519e-3),
        (20.0, 998.207, 1.002e-3),
        (35.0, 994.03, 0.7191e-3),
    ];

    #[test]
    fn water_properties_match_the_handbook_table_to_0_2_percent() {
        for (t, rho, mu) in CRC {
            let r = water_density(t).unwrap();
            let m = water_viscosity(t).unwrap();
            assert!(rel(r, rho) < 0.002, "density at {t}: {r}");
            assert!(rel(m, mu) < 0.002, "viscosity at {t}: {m}");
        }
    }

    #[test]
    fn density_agrees_with_the_tanaka_formula() {
        // Tanaka et al. (2001), standard mean ocean water, air-free, 0-40 °C
        // (coefficients from memory): rho = a5 (1 - (t + a1)² (t + a2) / (a3 (t + a4))).
        let (a1, a2, a3, a4, a5) = (-3.983_035, 301.797, 522_528.9, 69.348_81, 999.974_950);
        let mut t = 0.0f64;
        while t <= 40.0 {
            let tanaka = a5 * (1.0 - (t + a1) * (t + a1) * (t + a2) / (a3 * (t + a4)));
            let kell = water_density(t).unwrap();
            assert!(
                rel(kell, tanaka) < 2e-5,
                "{t} °C: Kell {kell}, Tanaka {tanaka}"
            );
            t += 0.5;
        }
        // The density maximum near 4 °C (both formulations, and the handbook).
        let (r3, r4, r5) = (
            water_density(3.0).unwrap(),
            water_density(4.0).unwrap(),
            water_density(5.0).unwrap(),
        );
        assert!(r4 > r3 && r4 > r5);
    }

    #[test]
    fn viscosity_agrees_with_the_vogel_equation() {
        // Vogel equation mu = A exp(B / (T - C)), A = 0.02939 mPa s, B = 507.88 K,
        // C = 149.3 K (coefficients from memory). A three-parameter fit, coarser at the ends
        // of the range: within 1.5 % over 0-100 °C and 0.3 % over 10-80 °C. A mistake in a
        // recalled coefficient of either formula would show as a much larger gap.
        let mut t = 0.0f64;
        while t <= 100.0 {
            let vogel = 0.02939e-3 * (507.88 / (t + 273.15 - 149.3)).exp();
            let kestin = water_viscosity(t).unwrap();
            let tol = if (10.0..=80.0).contains(&t) {
                0.003
            } else {
                0.015
            };
            assert!(rel(kestin, vogel) < tol, "{t} °C: {kestin} vs {vogel}");
            t += 5.0;
        }
        // Exact at 20 °C by construction of the correlation.
        assert_eq!(water_viscosity(20.0), Some(1.0016e-3));
    }

    #[test]
    fn out_of_range_temperatures_are_refused() {
        for t in [-1.0, 101.0, f64::NAN, f64::INFINITY] {
            assert_eq!(water_density(t), None);
            assert_eq!(water_viscosity(t), None);
        }
        assert_eq!(reynolds(1.0, 0.0, 20.0), None);
        assert_eq!(reynolds(f64::NAN, 0.1, 20.0), None);
    }

    #[test]
    fn reynolds_number_and_caution() {
        // rho U d / mu with the handbook values at 20 °C.
        let re = reynolds(1.5, 0.08, 20.0).unwrap();
        let want = 998.207 * 1.5 * 0.08 / 1.0016e-3;
        assert!(rel(re, want) < 1e-5, "{re}");
        // Re ~ 1.2e5 passes; a 2 cm deep flow at 0.5 m/s (Re ~ 1e4) is cautioned.
        assert_eq!(scale_effect_caution(re), None);
        let small = reynolds(0.5, 0.02, 20.0).unwrap();
        let text = scale_effect_caution(small).unwrap();
        assert!(text.contains("under-estimated"), "{text}");
        assert!(scale_effect_caution(f64::NAN).is_some());
    }

    #[test]
    fn ritter_solution_closed_forms_and_mass_conservation() {
        let g = STANDARD_GRAVITY;
        for d0 in [0.05, 0.1, 0.3] {
            let c0 = (g * d0).sqrt();
            // Front celerity 2 sqrt(g d0).
            assert!(rel(ritter_front_celerity(d0).unwrap(), 2.0 * c0) < 1e-15);
            // The depth at the dam site is 4 d0 / 9 at every t > 0 (Ritter 1892).
            for t in [0.1, 1.0, 3.0] {
                assert!(rel(ritter_depth(d0, 0.0, t).unwrap(), 4.0 * d0 / 9.0) < 1e-12);
            }
            // Independent check, mass: the water in [-c0 t, 2 c0 t] equals what was in
            // [-c0 t, 0] at the release, d0 c0 t (midpoint rule, 20000 cells).
            let t = 1.3;
            let (a, b) = (-c0 * t, 2.0 * c0 * t);
            let n = 20_000;
            let h = (b - a) / n as f64;
            let vol: f64 = (0..n)
                .map(|i| ritter_depth(d0, a + (i as f64 + 0.5) * h, t).unwrap() * h)
                .sum();
            assert!(rel(vol, d0 * c0 * t) < 1e-6, "{vol} vs {}", d0 * c0 * t);
            // Dry ahead of the front, undisturbed behind the negative wave.
            assert_eq!(ritter_depth(d0, 2.0 * c0 * t * 1.01, t), Some(0.0));
            assert_eq!(ritter_depth(d0, -c0 * t * 1.01, t), Some(d0));
        }
        assert_eq!(ritter_front_celerity(-1.0), None);
        assert_eq!(ritter_depth(0.1, 1.0, 0.0), None);
    }

    /// Momentum function per unit width and unit weight, `q²/(g d) + d²/2`: equal on both
    /// sides of a jump (the derivation of the Belanger equation, here evaluated
    /// numerically from the two depths).
    fn momentum(q: f64, d: f64) -> f64 {
        q * q / (STANDARD_GRAVITY * d) + d * d / 2.0
    }

    #[test]
    fn belanger_equation_closed_form_and_momentum_conservation() {
        // Closed form at a few points: Fr1 = 1 gives 1; Fr1 = sqrt(3) gives 2
        // (sqrt(1 + 24) = 5); Fr1 = sqrt(10) gives (9 - 1)/2 = 4.
        assert!((belanger_depth_ratio(1.0).unwrap() - 1.0).abs() < 1e-15);
        assert!((belanger_depth_ratio(3f64.sqrt()).unwrap() - 2.0).abs() < 1e-14);
        assert!((belanger_depth_ratio(10f64.sqrt()).unwrap() - 4.0).abs() < 1e-14);
        for fr1 in [1.5, 2.0, 4.0, 7.5, 12.0] {
            let d1 = 0.03;
            let v1 = fr1 * (STANDARD_GRAVITY * d1).sqrt();
            let d2 = d1 * belanger_depth_ratio(fr1).unwrap();
            let q = v1 * d1;
            let (m1, m2) = (momentum(q, d1), momentum(q, d2));
            assert!(rel(m1, m2) < 1e-12, "Fr1 {fr1}: {m1} vs {m2}");
            // The inverse gives Fr1 back.
            assert!(rel(froude_from_depth_ratio(d2 / d1).unwrap(), fr1) < 1e-12);
        }
        assert_eq!(belanger_depth_ratio(f64::NAN), None);
        assert_eq!(froude_from_depth_ratio(0.0), None);
    }

    #[test]
    fn bore_celerity_and_surge_froude_number_agree_with_momentum() {
        // A bore moving upstream (towards -x) against a flow of 0.4 m/s, 0.05 m deep,
        // 0.12 m deep behind it.
        let (d1, d2, v1) = (0.05, 0.12, 0.4);
        let c = bore_celerity(d1, d2, v1, false).unwrap();
        assert!(c < 0.0, "moves upstream: {c}");
        let fr = surge_froude(c, v1, d1).unwrap();
        assert!(rel(belanger_depth_ratio(fr).unwrap(), d2 / d1) < 1e-12);
        // In the bore's frame the flow enters at V1 - c and leaves at (V1 - c) d1 / d2
        // (continuity); the momentum flux plus hydrostatic force balances.
        let u1 = v1 - c;
        let u2 = u1 * d1 / d2;
        let g = STANDARD_GRAVITY;
        let f1 = u1 * u1 * d1 + g * d1 * d1 / 2.0;
        let f2 = u2 * u2 * d2 + g * d2 * d2 / 2.0;
        assert!(rel(f1, f2) < 1e-12, "{f1} vs {f2}");
        // A surge advancing over still water towards +x.
        let c = bore_celerity(0.02, 0.06, 0.0, true).unwrap();
        assert!(c > 0.0);
        assert!(
            rel(
                surge_froude(c, 0.0, 0.02).unwrap(),
                froude_from_depth_ratio(3.0).unwrap()
            ) < 1e-12
        );
        assert_eq!(bore_celerity(0.0, 0.1, 0.0, true), None);
        assert_eq!(froude(1.0, 0.0), None);
    }
}
