//! Files a synthetic capture writes: layout TOML, truth CSV, interval CSV, and the realised
//! statistics behind the truth file.

use std::fmt::Write as _;

use super::intervals::{Interval, ProbeTruth};
use super::scenario::{Resolved, Scenario};

/// Statistics realised by one tip's continuous-time intervals over `[0, duration]`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RealisedStats {
    /// Air time within the record / duration.
    pub void_fraction: f64,
    /// Bubbles whose closing (air -> water) interface lies in `(0, duration]`, per second.
    pub bubble_count_rate_hz: f64,
    /// Mean chord of the bubbles lying wholly inside the record; `None` if there are none.
    pub bubble_chord_mean_s: Option<f64>,
    /// Bubbles counted for the count rate.
    pub bubbles: usize,
}

/// Realised statistics of sorted, non-overlapping air intervals over `[0, duration_s]`.
pub fn realised_stats(intervals: &[Interval], duration_s: f64) -> RealisedStats {
    let mut air = 0.0;
    let mut closing = 0usize;
    let mut inside = 0usize;
    let mut chord_sum = 0.0;
    for iv in intervals {
        let a = iv.start_s.max(0.0);
        let b = iv.end_s.min(duration_s);
        if b > a {
            air += b - a;
        }
        if iv.end_s > 0.0 && iv.end_s <= duration_s {
            closing += 1;
            if iv.start_s >= 0.0 {
                inside += 1;
                chord_sum += iv.duration_s();
            }
        }
    }
    RealisedStats {
        void_fraction: air / duration_s,
        bubble_count_rate_hz: closing as f64 / duration_s,
        bubble_chord_mean_s: (inside > 0).then(|| chord_sum / inside as f64),
        bubbles: closing,
    }
}

fn tv_str(s: &str) -> String {
    toml::Value::String(s.to_string()).to_string()
}

fn tv_f(x: f64) -> String {
    toml::Value::Float(x).to_string()
}

/// The layout file of a capture (the format of DESIGN section 2): a steady flow, or a
/// transient one (dry tips before the front, the reservoir depth as reference depth, fixed
/// levels) for a scenario with a `[transient]` table.
/// `tip_levels` are each channel's nominal (water, air) levels: with
/// `signal.tip_level_spread` above 0 each tip's own pair is written.
pub fn layout_toml(scenario: &Scenario, resolved: &Resolved, tip_levels: &[(f64, f64)]) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "# Layout of a synthetic capture written by `frothline synth`."
    );
    let _ = writeln!(s, "[flow]");
    match &scenario.transient {
        Some(t) => {
            let _ = writeln!(s, "kind = \"transient\"");
            let before = if t.submerged { "water" } else { "air" };
            let _ = writeln!(s, "phase_before_front = \"{before}\"");
            let _ = writeln!(s, "reference_depth_m = {}", tv_f(t.reservoir_depth_m));
        }
        None => {
            let _ = writeln!(s, "kind = \"steady\"");
        }
    }
    let _ = writeln!(
        s,
        "water_temperature_c = {}",
        tv_f(scenario.water_temperature_c)
    );
    if let Some(q) = scenario.discharge_m2_s {
        let _ = writeln!(s, "discharge_m2_s = {}", tv_f(q));
    }
    if let Some(d) = &scenario.detector {
        let _ = writeln!(s, "\n[detector]");
        let _ = writeln!(s, "threshold = {}", tv_f(d.threshold));
        let _ = writeln!(s, "hysteresis = {}", tv_f(d.hysteresis));
    }
    for p in &resolved.probes {
        let _ = writeln!(s, "\n[[probe]]");
        let _ = writeln!(s, "name = {}", tv_str(&p.name));
        let _ = writeln!(s, "elevation_mm = {}", tv_f(p.elevation_mm));
        let _ = writeln!(s, "x_mm = {}", tv_f(p.x_mm));
        let _ = writeln!(s, "leading = {}", p.leading);
        if let (Some(t), Some(sp)) = (p.trailing, p.pair.tip_spacing_m) {
            let _ = writeln!(s, "trailing = {t}");
            // Round the mm value so 6 mm does not print as 6.000000000000001.
            let mm = (sp * 1e3 * 1e9).round() / 1e9;
            let _ = writeln!(s, "tip_spacing_mm = {}", tv_f(mm));
        }
        let _ = writeln!(s, "air_is_high = {}", p.air_is_high);
        // Tips that sit in air before a front cannot learn a water level: a transient
        // layout always fixes them.
        if scenario.signal.fixed_levels || scenario.transient.is_some() {
            if scenario.signal.tip_level_spread > 0.0 {
                let tips = [("leading", Some(p.leading)), ("trailing", p.trailing)];
                for (name, ch) in tips {
                    if let Some(&(w, a)) = ch.and_then(|c| tip_levels.get(c as usize)) {
                        let _ = writeln!(s, "{name}_air_level = {a}");
                        let _ = writeln!(s, "{name}_water_level = {w}");
                    }
                }
            } else {
                let _ = writeln!(s, "air_level = {}", p.air_counts);
                let _ = writeln!(s, "water_level = {}", p.water_counts);
            }
        }
    }
    s
}

/// Columns of truth.csv, in order (the first ten are the contract; the rest are extras).
pub const TRUTH_COLUMNS: [&str; 12] = [
    "probe",
    "elevation_mm",
    "void_fraction_target",
    "bubble_count_rate_hz_target",
    "interfacial_velocity_m_s_target",
    "turbulence_intensity_target",
    "void_fraction_realised",
    "bubble_count_rate_hz_realised",
    "bubble_chord_mean_s_realised",
    "bubbles_realised",
    "trailing_void_fraction_realised",
    "tip_lag_mean_s_realised",
];

fn opt(x: Option<f64>) -> String {
    x.map(|v| v.to_string()).unwrap_or_default()
}

/// Mean leading -> trailing delay of the bubbles the trailing tip saw whose leading interval
/// closes inside the record; `None` for a single-tip probe or no such bubble.
pub fn lag_mean_s(truth: &ProbeTruth, duration_s: f64) -> Option<f64> {
    let lags: Vec<f64> = truth
        .bubbles
        .iter()
        .filter(|b| b.interval.end_s > 0.0 && b.interval.end_s <= duration_s)
        .filter_map(|b| b.lag_s)
        .collect();
    (!lags.is_empty()).then(|| lags.iter().sum::<f64>() / lags.len() as f64)
}

/// truth.csv contents: one row per probe, realised values from the leading tip.
pub fn truth_csv(
    scenario: &Scenario,
    resolved: &Resolved,
    truth: &[ProbeTruth],
) -> Result<Vec<u8>, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(TRUTH_COLUMNS)?;
    let d = scenario.duration_s;
    for (p, t) in resolved.probes.iter().zip(truth) {
        let lead = realised_stats(&t.leading(), d);
        let trail = t
            .trailing
            .as_ref()
            .map(|iv| realised_stats(iv, d).void_fraction);
        w.write_record([
            p.name.clone(),
            p.elevation_mm.to_string(),
            p.params.void_fraction.to_string(),
            p.params.bubble_rate_hz.to_string(),
            p.params.velocity_m_s.to_string(),
            p.params.turbulence_intensity.to_string(),
            lead.void_fraction.to_string(),
            lead.bubble_count_rate_hz.to_string(),
            opt(lead.bubble_chord_mean_s),
            lead.bubbles.to_string(),
            opt(trail),
            opt(lag_mean_s(t, d)),
        ])?;
    }
    w.into_inner().map_err(|e| e.into_error().into())
}

/// intervals.csv contents: every air interval of every tip that overlaps the record.
pub fn intervals_csv(truth: &[ProbeTruth], duration_s: f64) -> Result<Vec<u8>, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(["probe", "tip", "channel", "start_s", "end_s"])?;
    for t in truth {
        for (i, (ch, ivs)) in t.tips().into_iter().enumerate() {
            let tip = if i == 0 { "leading" } else { "trailing" };
            for iv in ivs
                .iter()
                .filter(|iv| iv.end_s > 0.0 && iv.start_s < duration_s)
            {
                w.write_record([
                    t.name.as_str(),
                    tip,
                    &ch.to_string(),
                    &iv.start_s.to_string(),
                    &iv.end_s.to_string(),
                ])?;
            }
        }
    }
    w.into_inner().map_err(|e| e.into_error().into())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn realised_stats_clip_to_the_record() {
        let iv = [
            Interval {
                start_s: -0.5,
                end_s: 0.5,
            },
            Interval {
                start_s: 1.0,
                end_s: 2.0,
            },
            Interval {
                start_s: 9.5,
                end_s: 10.5,
            },
        ];
        let r = realised_stats(&iv, 10.0);
        assert!((r.void_fraction - 0.2).abs() < 1e-12);
        assert_eq!(r.bubbles, 2);
        assert_eq!(r.bubble_chord_mean_s, Some(1.0));
        assert!((r.bubble_count_rate_hz - 0.2).abs() < 1e-12);
    }
}
