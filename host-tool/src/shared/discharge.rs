//! Unit discharges across a probe array and the continuity check against the rig's discharge.
//!
//! From the per-probe void fraction `C` and interfacial velocity `V` at their elevations:
//! - the void-fraction profile is fitted with the core's profile estimator
//!   ([`frothline_core::profile::fit_profile_sized`]: `C = 0.9 (y/Y90)^n` or the exponential
//!   model, whichever fits better), which gives `Y90`;
//! - the velocity with a power law `V = V90 (y/Y90)^(1/N)`, least squares on `ln V` against
//!   `ln y` over the probes from the bed to `Y90` (the velocity law of self-aerated and
//!   skimming flows; common practice, no source); a fitted slope below zero is taken as a
//!   uniform velocity, and a velocity more than twice or less than half the array's median
//!   is left out as a false correlation peak;
//! - `q_w = ∫_0^Y90 (1 − C) V dy` and `q_a = ∫_0^Y90 C V dy` through the fitted models with
//!   the core's depth integral ([`frothline_core::profile::depth_integral`], the profile
//!   estimator's unbiased integration);
//! - above `Y90`, the same integrands by the trapezoid rule over the probes there, from
//!   `Y90` (where `C = 0.9` and `V = V90`) to the highest probe, as separate terms (spray:
//!   little water, and often no trusted velocity).
//!
//! The continuity check compares `q_w` (below plus above `Y90`) with the discharge given in
//! the layout (`[flow] discharge_m2_s`, or `discharge_m3_s` with `width_m`). A gap of more
//! than [`CONTINUITY_TOLERANCE`] warns: it reveals a bad probe, bad levels or a bad velocity
//! (common practice, no source). A probe whose tip was stuck in most windows is left out of
//! the integrals and named in the result, which then warns too.

use frothline_core::profile::{depth_integral, fit_profile_sized, ProfileConfig, ProfilePoint};

/// The relative gap between the integrated and the delivered water discharge beyond which
/// the continuity check warns (5 %).
pub const CONTINUITY_TOLERANCE: f64 = 0.05;

/// A probe's velocity more than this factor above or below the array's median is left out of
/// the velocity law as an outlier.
pub const VELOCITY_OUTLIER: f64 = 2.0;

/// One probe of the array.
#[derive(Clone, Debug, PartialEq)]
pub struct ArrayPoint {
    /// Probe name.
    pub name: String,
    /// Elevation above the bed, mm.
    pub y_mm: f64,
    /// Void fraction (none when not measured).
    pub c: Option<f64>,
    /// Interfacial velocity, m/s (none for a single-tip probe or no trusted window).
    pub v_m_s: Option<f64>,
    /// The tip was stuck (no interface) in most windows.
    pub dead: bool,
}

/// The unit discharges of one array and its continuity check.
#[derive(Clone, Debug, PartialEq)]
pub struct Discharge {
    /// Probes that entered the integrals.
    pub probes_used: usize,
    /// Probes left out, with why (`name:dead`, `name:no_velocity`).
    pub left_out: Vec<String>,
    /// `Y90` of the fitted void-fraction profile, mm.
    pub y90_mm: f64,
    /// `V90` of the velocity law, m/s.
    pub v90_m_s: f64,
    /// `N` of the velocity law `V = V90 (y/Y90)^(1/N)` (infinite for a uniform velocity).
    pub velocity_exponent_n: f64,
    /// `∫_0^Y90 (1 − C) V dy`, m²/s.
    pub q_water_m2_s: f64,
    /// `∫_0^Y90 C V dy`, m²/s.
    pub q_air_m2_s: f64,
    /// `∫ (1 − C) V dy` from `Y90` to the highest probe, m²/s.
    pub q_water_above_m2_s: f64,
    /// `∫ C V dy` from `Y90` to the highest probe, m²/s.
    pub q_air_above_m2_s: f64,
    /// The discharge the layout gives, m²/s.
    pub expected_m2_s: Option<f64>,
}

impl Discharge {
    /// Water discharge below and above `Y90`, m²/s.
    pub fn q_water_total_m2_s(&self) -> f64 {
        self.q_water_m2_s + self.q_water_above_m2_s
    }

    /// `q_w / q_expected − 1`, when the layout gives a discharge.
    pub fn continuity_error(&self) -> Option<f64> {
        self.expected_m2_s
            .filter(|q| *q > 0.0)
            .map(|q| self.q_water_total_m2_s() / q - 1.0)
    }

    /// Why the check warns: a gap beyond [`CONTINUITY_TOLERANCE`], probes left out.
    pub fn warnings(&self) -> Vec<String> {
        let mut w = Vec::new();
        if let Some(e) = self.continuity_error() {
            if e.abs() > CONTINUITY_TOLERANCE {
                w.push(format!(
                    "continuity: q_w = {:.4} m2/s is {:+.1} % off the layout's {:.4} m2/s \
                     (tolerance {:.0} %): check the probes, their levels and velocities",
                    self.q_water_total_m2_s(),
                    e * 100.0,
                    self.expected_m2_s.unwrap_or(0.0),
                    CONTINUITY_TOLERANCE * 100.0
                ));
            }
        }
        let dead: Vec<&str> = self
            .left_out
            .iter()
            .filter_map(|s| s.strip_suffix(":dead"))
            .collect();
        if !dead.is_empty() {
            w.push(format!(
                "continuity: probe(s) {} stuck in most windows, left out of the discharge",
                dead.join(", ")
            ));
        }
        w
    }
}

/// Least squares of `ln v` on `ln y`: `(ln V90 at y90, 1/N)`.
fn velocity_law(points: &[(f64, f64)], y90: f64) -> Option<(f64, f64)> {
    let pts: Vec<(f64, f64)> = points
        .iter()
        .filter(|(y, v)| *y > 0.0 && *y <= y90 && *v > 0.0)
        .map(|(y, v)| ((y / y90).ln(), v.ln()))
        .collect();
    if pts.len() < 2 {
        return None;
    }
    let n = pts.len() as f64;
    let (sx, sy) = pts.iter().fold((0.0, 0.0), |a, p| (a.0 + p.0, a.1 + p.1));
    let (mx, my) = (sx / n, sy / n);
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    if sxx <= 0.0 {
        return None;
    }
    // A velocity falling with height, which the law cannot describe, is taken as uniform
    // (the geometric mean of the probes' V): behind a surge front the velocity is close to
    // uniform over the depth, and noise tips the fitted slope either way.
    let b = (sxy / sxx).max(0.0);
    let a = my - b * mx;
    (a.is_finite() && b.is_finite()).then_some((a, b))
}

/// The unit discharges of one array (`None` when fewer than three probes with C, or fewer
/// than two with V below `Y90`, or no `Y90`).
pub fn discharge(points: &[ArrayPoint], expected_m2_s: Option<f64>) -> Option<Discharge> {
    let mut left_out = Vec::new();
    let mut used: Vec<&ArrayPoint> = Vec::new();
    for p in points {
        if p.dead {
            left_out.push(format!("{}:dead", p.name));
        } else if p.c.is_some() {
            used.push(p);
        }
    }
    let cps: Vec<ProfilePoint> = used
        .iter()
        .map(|p| ProfilePoint {
            y_mm: p.y_mm as f32,
            c: p.c.unwrap_or(0.0) as f32,
            sigma: 0.0,
        })
        .collect();
    if cps.len() < 3 {
        return None;
    }
    let fit = fit_profile_sized::<64>(&cps, &ProfileConfig::default());
    let model = fit.fitted_profile()?;
    let y90 = model.y90_mm() as f64;
    let mut vel: Vec<(f64, f64)> = used
        .iter()
        .filter_map(|p| Some((p.y_mm, p.v_m_s?.abs())))
        .collect();
    for p in &used {
        if p.v_m_s.is_none() {
            left_out.push(format!("{}:no_velocity", p.name));
        }
    }
    // A velocity more than a factor VELOCITY_OUTLIER from the array's median is a false
    // correlation peak (a secondary peak taken for the main one), not the flow: left out of
    // the velocity law (common practice, no source).
    if vel.len() >= 3 {
        let mut logs: Vec<f64> = vel.iter().map(|v| v.1.ln()).collect();
        logs.sort_by(f64::total_cmp);
        let median = logs[logs.len() / 2];
        for p in &used {
            if let Some(v) = p.v_m_s {
                if (v.abs().ln() - median).abs() > VELOCITY_OUTLIER.ln() {
                    left_out.push(format!("{}:velocity_outlier", p.name));
                }
            }
        }
        vel.retain(|v| (v.1.ln() - median).abs() <= VELOCITY_OUTLIER.ln());
    }
    let (ln_v90, inv_n) = velocity_law(&vel, y90)?;
    let v90 = ln_v90.exp();
    let v = |y_mm: f32| (v90 as f32) * (y_mm / y90 as f32).max(0.0).powf(inv_n as f32);
    // depth_integral works in mm: mm·m/s -> m²/s.
    let q_water = depth_integral(&model, |y, c| (1.0 - c) * v(y)) as f64 * 1e-3;
    let q_air = depth_integral(&model, |y, c| c * v(y)) as f64 * 1e-3;
    // Above Y90: trapezoid from (Y90, 0.9, V90) over the probes there with C and V.
    let mut above: Vec<(f64, f64, f64)> = vec![(y90, 0.9, v90)];
    let mut higher: Vec<(f64, f64, f64)> = used
        .iter()
        .filter(|p| p.y_mm > y90)
        .filter_map(|p| Some((p.y_mm, p.c?, p.v_m_s?.abs())))
        .collect();
    higher.sort_by(|a, b| a.0.total_cmp(&b.0));
    above.extend(higher);
    let (mut qw_above, mut qa_above) = (0.0, 0.0);
    for w in above.windows(2) {
        let (y0, c0, v0) = w[0];
        let (y1, c1, v1) = w[1];
        let dy = (y1 - y0) * 1e-3;
        qw_above += 0.5 * dy * ((1.0 - c0) * v0 + (1.0 - c1) * v1);
        qa_above += 0.5 * dy * (c0 * v0 + c1 * v1);
    }
    Some(Discharge {
        probes_used: cps.len(),
        left_out,
        y90_mm: y90,
        v90_m_s: v90,
        velocity_exponent_n: 1.0 / inv_n,
        q_water_m2_s: q_water,
        q_air_m2_s: q_air,
        q_water_above_m2_s: qw_above,
        q_air_above_m2_s: qa_above,
        expected_m2_s,
    })
}

/// Columns of `discharge.csv`: one row per station (probes sharing a streamwise position).
pub const DISCHARGE_COLUMNS: &[&str] = &[
    "x_mm",
    "probes_used",
    "probes_left_out",
    "y90_mm",
    "v90_m_s",
    "velocity_exponent_n",
    "q_water_m2_s",
    "q_air_m2_s",
    "q_water_above_y90_m2_s",
    "q_air_above_y90_m2_s",
    "q_water_total_m2_s",
    "layout_discharge_m2_s",
    "continuity_error",
    "continuity_warning",
];

/// One `discharge.csv` row.
pub fn row(x_mm: f64, d: &Discharge) -> Vec<String> {
    let opt = |v: Option<f64>| v.map(|v| v.to_string()).unwrap_or_default();
    vec![
        x_mm.to_string(),
        d.probes_used.to_string(),
        d.left_out.join("|"),
        d.y90_mm.to_string(),
        d.v90_m_s.to_string(),
        d.velocity_exponent_n.to_string(),
        d.q_water_m2_s.to_string(),
        d.q_air_m2_s.to_string(),
        d.q_water_above_m2_s.to_string(),
        d.q_air_above_m2_s.to_string(),
        d.q_water_total_m2_s().to_string(),
        opt(d.expected_m2_s),
        opt(d.continuity_error()),
        (!d.warnings().is_empty()).to_string(),
    ]
}

/// A one-paragraph text of a station's discharges for the replay summary.
pub fn summary(x_mm: f64, d: &Discharge) -> String {
    let mut s = format!(
        "discharge at x = {x_mm} mm ({} probes, Y90 = {:.1} mm, V = {:.2} (y/Y90)^(1/{:.1}) m/s): \
         q_w = {:.4} m2/s below Y90 + {:.4} above, q_a = {:.4} + {:.4} m2/s",
        d.probes_used,
        d.y90_mm,
        d.v90_m_s,
        d.velocity_exponent_n,
        d.q_water_m2_s,
        d.q_water_above_m2_s,
        d.q_air_m2_s,
        d.q_air_above_m2_s
    );
    if let (Some(q), Some(e)) = (d.expected_m2_s, d.continuity_error()) {
        s.push_str(&format!(
            "; layout {q:.4} m2/s, continuity error {:+.1} %",
            e * 100.0
        ));
    }
    s.push('\n');
    for w in d.warnings() {
        s.push_str(&format!("warning: {w}\n"));
    }
    s
}

/// The discharges of every station of a layout (probes sharing `x_mm`, at least three),
/// from the per-probe summary of a run (one tally per layout probe). A probe is dead when
/// its tip was stuck in more than half of its windows.
pub fn station_discharges(
    layout: &crate::shared::layout::Layout,
    tallies: &[crate::shared::probe_summary::ProbeTally],
) -> Vec<(f64, Discharge)> {
    let points = layout
        .probes
        .iter()
        .zip(tallies)
        .map(|(p, t)| (p.x_mm, point_of_tally(&p.name, p.elevation_mm, t)));
    by_station(points, layout.flow.discharge_m2_s)
}

/// A probe of the array from its per-probe summary (the run's mean C and V); dead when its
/// tip was stuck in more than half of its windows.
pub fn point_of_tally(
    name: &str,
    y_mm: f64,
    t: &crate::shared::probe_summary::ProbeTally,
) -> ArrayPoint {
    let stuck = t
        .flag_counts()
        .into_iter()
        .find(|(n, _)| n == "stuck")
        .map_or(0, |(_, n)| n as u64);
    ArrayPoint {
        name: name.to_string(),
        y_mm,
        c: t.void_fraction().map(|e| e.mean),
        v_m_s: t.velocity_m_s().map(|e| e.mean),
        dead: t.windows > 0 && stuck * 2 > t.windows,
    }
}

/// The discharges of the stations among `points` (streamwise position, probe): probes of
/// one `x_mm` form a station, which needs at least three.
pub fn by_station(
    points: impl IntoIterator<Item = (f64, ArrayPoint)>,
    expected_m2_s: Option<f64>,
) -> Vec<(f64, Discharge)> {
    let mut points: Vec<(f64, ArrayPoint)> =
        points.into_iter().filter(|(x, _)| x.is_finite()).collect();
    points.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out = Vec::new();
    for group in points.chunk_by(|a, b| a.0 == b.0) {
        if group.len() < 3 {
            continue;
        }
        let array: Vec<ArrayPoint> = group.iter().map(|(_, p)| p.clone()).collect();
        if let Some(d) = discharge(&array, expected_m2_s) {
            out.push((group[0].0, d));
        }
    }
    out
}

/// Write `discharge.csv` ([`DISCHARGE_COLUMNS`], one row per station).
pub fn write_csv(file: std::fs::File, rows: &[(f64, Discharge)]) -> csv::Result<()> {
    let mut w = csv::Writer::from_writer(std::io::BufWriter::new(file));
    w.write_record(DISCHARGE_COLUMNS)?;
    for (x, d) in rows {
        w.write_record(row(*x, d))?;
    }
    w.flush()?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `C = 0.9 (y/Y90)^n` and `V = V90 (y/Y90)^(1/N)` integrate in closed form:
    /// `q_w = V90 Y90 [1/(1 + 1/N) − 0.9/(1 + n + 1/N)]`, `q_a = 0.9 V90 Y90/(1 + n + 1/N)`
    /// (analytic case).
    #[test]
    fn power_law_profiles_integrate_to_their_closed_forms() {
        let (y90, n, v90, big_n) = (80.0f64, 1.5f64, 3.0f64, 6.0f64);
        let points: Vec<ArrayPoint> = (1..=10)
            .map(|i| {
                let y = y90 * i as f64 / 10.0;
                ArrayPoint {
                    name: format!("P{i}"),
                    y_mm: y,
                    c: Some(0.9 * (y / y90).powf(n)),
                    v_m_s: Some(v90 * (y / y90).powf(1.0 / big_n)),
                    dead: false,
                }
            })
            .collect();
        let d = discharge(&points, Some(1.0)).unwrap();
        let m = 1.0 + n + 1.0 / big_n;
        let qw = v90 * y90 * 1e-3 * (1.0 / (1.0 + 1.0 / big_n) - 0.9 / m);
        let qa = 0.9 * v90 * y90 * 1e-3 / m;
        assert!(
            (d.q_water_m2_s / qw - 1.0).abs() < 1e-3,
            "{} {qw}",
            d.q_water_m2_s
        );
        assert!(
            (d.q_air_m2_s / qa - 1.0).abs() < 1e-3,
            "{} {qa}",
            d.q_air_m2_s
        );
        assert!((d.velocity_exponent_n / big_n - 1.0).abs() < 1e-3);
        assert!(d.q_water_above_m2_s.abs() < 1e-9);
    }

    #[test]
    fn a_dead_probe_and_a_gap_warn() {
        let mut points: Vec<ArrayPoint> = (1..=6)
            .map(|i| ArrayPoint {
                name: format!("P{i}"),
                y_mm: 15.0 * i as f64,
                c: Some(0.9 * (i as f64 / 6.0).powi(2)),
                v_m_s: Some(2.0),
                dead: false,
            })
            .collect();
        let d = discharge(&points, None).unwrap();
        assert!(d.warnings().is_empty());
        let q = d.q_water_total_m2_s();
        let off = discharge(&points, Some(q * 1.1)).unwrap();
        assert_eq!(off.warnings().len(), 1);
        points[2].dead = true;
        let d = discharge(&points, Some(q)).unwrap();
        assert_eq!(d.left_out, vec!["P3:dead".to_string()]);
        assert!(d.warnings().iter().any(|w| w.contains("P3")));
    }

    /// A uniform velocity (a surge behind its front) whose noise tips the fitted slope below
    /// zero, and one false correlation peak at a quarter of the flow's velocity: the law is
    /// uniform at the others' velocity, the outlier is named and left out, and `q_w` is the
    /// closed form of the power-law C with a uniform V, `V Y90 (1 − 0.9/(1 + n))` (analytic
    /// case).
    #[test]
    fn a_falling_fit_is_uniform_and_an_outlier_velocity_is_left_out() {
        let (y90, n, v) = (60.0f64, 1.0f64, 2.0f64);
        let points: Vec<ArrayPoint> = (1..=6)
            .map(|i| {
                let y = y90 * i as f64 / 6.0;
                // Falling slightly with height, and P4 a false peak.
                let vi = if i == 4 {
                    v / 4.0
                } else {
                    v * (1.0 - 0.002 * i as f64)
                };
                ArrayPoint {
                    name: format!("P{i}"),
                    y_mm: y,
                    c: Some(0.9 * (y / y90).powf(n)),
                    v_m_s: Some(vi),
                    dead: false,
                }
            })
            .collect();
        let d = discharge(&points, None).expect("a discharge");
        assert!(
            d.left_out.contains(&"P4:velocity_outlier".to_string()),
            "{:?}",
            d.left_out
        );
        assert!(
            d.velocity_exponent_n.is_infinite(),
            "{}",
            d.velocity_exponent_n
        );
        let qw = v * y90 * 1e-3 * (1.0 - 0.9 / (1.0 + n));
        assert!(
            (d.q_water_m2_s / qw - 1.0).abs() < 0.01,
            "{} {qw}",
            d.q_water_m2_s
        );
    }
}
