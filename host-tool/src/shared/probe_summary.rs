//! The per-probe summary of a run, shared by the replay summary, the live view (its
//! running figures and the end-of-session table) and the report.
//!
//! One streaming accumulator ([`ProbeTally`]) takes the windows of one probe in time order
//! and keeps fixed-size state, whatever the record length: memory is O(1) per probe.
//!
//! The rule for flagged windows ([`SummaryRule`], stated in [`RULE_TEXT`]):
//! - a window enters C, F, chord, V and Tu unless it carries an excluded flag (default
//!   `levels_not_learnt`) or lies before the front (`pre_front`, or a negative time since
//!   the front);
//! - it enters V and Tu only if it also carries no flag that makes its velocity untrusted
//!   (default `no_correlation_peak` and `peak_at_lag_boundary`, the two the report's flag
//!   table calls not to be trusted or doubtful);
//! - C and F are weighted by window duration (C is air time over time, F bubbles over
//!   time); V, Tu and the chord median by the window's bubbles, so a `few_bubbles` window
//!   weighs little instead of being dropped.
//!
//! Every figure carries a 95 % batch-means interval ([`crate::shared::running_stats`]).

use crate::shared::running_stats::{BatchMeans, Estimate};
use frothline_core::Flags;

/// The rule in one paragraph, for help texts, the README and the outputs.
pub const RULE_TEXT: &str = "windows with an excluded flag (default levels_not_learnt) or \
before the front are left out of every figure; windows flagged no_correlation_peak or \
peak_at_lag_boundary are also left out of V and Tu; C and F are weighted by window \
duration, V, Tu and chord by bubbles";

/// Flag bits a `Flags` value can carry.
const FLAG_BITS: usize = 32;

/// Which windows enter which figures.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SummaryRule {
    /// Windows carrying any of these flags enter no figure.
    pub excluded: Flags,
    /// Windows carrying any of these flags enter no velocity or Tu figure.
    pub untrusted_velocity: Flags,
}

impl Default for SummaryRule {
    fn default() -> Self {
        SummaryRule {
            excluded: Flags::LEVELS_NOT_LEARNT,
            untrusted_velocity: Flags(Flags::NO_CORRELATION_PEAK.0 | Flags::PEAK_AT_LAG_BOUNDARY.0),
        }
    }
}

/// The bits of the window flags named in `names` (as in windows.csv; `none` names no flag).
/// An unknown name is an error that lists the known ones.
pub fn flag_bits(names: &[String]) -> Result<Flags, String> {
    let mut bits = Flags::NONE;
    for n in names.iter().map(|n| n.trim()).filter(|n| !n.is_empty()) {
        if n == "none" {
            continue;
        }
        match Flags::NAMES.iter().find(|(_, name)| *name == n) {
            Some((f, _)) => bits |= *f,
            None => {
                let known: Vec<&str> = Flags::NAMES.iter().map(|(_, n)| *n).collect();
                return Err(format!(
                    "`{n}` is not a window flag; the flags are: none, {}",
                    known.join(", ")
                ));
            }
        }
    }
    Ok(bits)
}

/// The name of flag bit `bit` (`bit12` for a bit this version does not know).
pub fn flag_name(bit: usize) -> String {
    Flags::NAMES
        .iter()
        .find(|(f, _)| f.0 == 1u32.checked_shl(bit as u32).unwrap_or(0))
        .map_or(format!("bit{bit}"), |(_, n)| n.to_string())
}

/// The figures of one window, from whichever source (a chain record, a wire frame, a CSV
/// row).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct WindowFigures {
    /// Window duration, s.
    pub duration_s: f64,
    /// Void fraction.
    pub void_fraction: Option<f64>,
    /// Bubble count rate, Hz.
    pub count_rate_hz: Option<f64>,
    /// Bubbles of the leading tip (none when the source does not say).
    pub bubbles: Option<f64>,
    /// Interfacial velocity, m/s.
    pub velocity_m_s: Option<f64>,
    /// Turbulence intensity.
    pub turbulence_intensity: Option<f64>,
    /// Median bubble chord time, s.
    pub chord_median_s: Option<f64>,
    /// Flags of the window.
    pub flags: Flags,
    /// True if the window lies before the front (negative time since the front).
    pub before_front: bool,
}

/// Whole-run figures of one probe, built window by window.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ProbeTally {
    /// Windows seen.
    pub windows: u64,
    /// Windows that entered C, F and chord.
    pub used: u64,
    /// Windows that entered V and Tu (among `used`).
    pub velocity_used: u64,
    /// Windows left out of every figure because they lay before the front.
    pub before_front: u64,
    /// Windows left out of every figure for an excluded flag.
    pub excluded: u64,
    /// Used windows left out of V and Tu for an untrusted-velocity flag.
    pub velocity_untrusted: u64,
    /// Windows raising each flag bit, over every window seen.
    flag_counts: [u32; FLAG_BITS],
    /// Bubbles of the used windows.
    pub bubbles: f64,
    /// Duration of the used windows, s.
    pub duration_s: f64,
    c: BatchMeans,
    f: BatchMeans,
    v: BatchMeans,
    tu: BatchMeans,
    chord: BatchMeans,
}

impl ProbeTally {
    /// No window yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Take the next window of the probe under `rule`.
    pub fn add(&mut self, w: &WindowFigures, rule: &SummaryRule) {
        self.windows = self.windows.saturating_add(1);
        for (bit, n) in self.flag_counts.iter_mut().enumerate() {
            if w.flags.0 & (1 << bit) != 0 {
                *n = n.saturating_add(1);
            }
        }
        let before = w.before_front || w.flags.contains(Flags::PRE_FRONT);
        if before {
            self.before_front += 1;
            return;
        }
        if w.flags.0 & rule.excluded.0 != 0 {
            self.excluded += 1;
            return;
        }
        let dur = if w.duration_s.is_finite() && w.duration_s > 0.0 {
            w.duration_s
        } else {
            1.0
        };
        self.used += 1;
        self.duration_s += dur;
        let nb = w.bubbles.filter(|b| b.is_finite() && *b >= 0.0);
        self.bubbles += nb.unwrap_or(0.0);
        let bubble_weight = nb.unwrap_or(1.0);
        if let Some(c) = w.void_fraction {
            self.c.push(c, dur);
        }
        if let Some(f) = w.count_rate_hz {
            self.f.push(f, dur);
        }
        if let Some(ch) = w.chord_median_s {
            self.chord.push(ch, bubble_weight);
        }
        if w.flags.0 & rule.untrusted_velocity.0 != 0 {
            self.velocity_untrusted += 1;
            return;
        }
        self.velocity_used += 1;
        if let Some(v) = w.velocity_m_s {
            self.v.push(v, bubble_weight);
        }
        if let Some(tu) = w.turbulence_intensity {
            self.tu.push(tu, bubble_weight);
        }
    }

    /// Void fraction, duration-weighted.
    pub fn void_fraction(&self) -> Option<Estimate> {
        self.c.estimate()
    }
    /// Bubble count rate, Hz (bubbles over time).
    pub fn count_rate_hz(&self) -> Option<Estimate> {
        self.f.estimate()
    }
    /// Interfacial velocity, m/s, over trusted windows, bubble-weighted.
    pub fn velocity_m_s(&self) -> Option<Estimate> {
        self.v.estimate()
    }
    /// Turbulence intensity over trusted windows, bubble-weighted.
    pub fn turbulence_intensity(&self) -> Option<Estimate> {
        self.tu.estimate()
    }
    /// Median bubble chord, s: bubble-weighted mean of the window medians.
    pub fn chord_median_s(&self) -> Option<Estimate> {
        self.chord.estimate()
    }

    /// (flag name, windows raising it), over every window seen, in bit order.
    pub fn flag_counts(&self) -> Vec<(String, u32)> {
        self.flag_counts
            .iter()
            .enumerate()
            .filter(|(_, n)| **n > 0)
            .map(|(bit, n)| (flag_name(bit), *n))
            .collect()
    }

    /// Flag counts as `few_bubbles 3/15`, one per flag that occurred, or `-` alone.
    pub fn flag_items(&self) -> Vec<String> {
        let v: Vec<String> = self
            .flag_counts()
            .into_iter()
            .map(|(name, n)| format!("{name} {n}/{}", self.windows))
            .collect();
        if v.is_empty() {
            vec!["-".into()]
        } else {
            v
        }
    }

    /// Flag counts as `few_bubbles 3/15 stuck 1/15`, or `-`.
    pub fn flags_text(&self) -> String {
        self.flag_items().join(" ")
    }

    /// Why windows were left out, as `2 before the front, 1 excluded flag; V: 3 untrusted`
    /// (`-` when none was).
    pub fn left_out_text(&self) -> String {
        let mut parts = Vec::new();
        if self.before_front > 0 {
            parts.push(format!("{} before the front", self.before_front));
        }
        if self.excluded > 0 {
            parts.push(format!("{} excluded flag", self.excluded));
        }
        let mut s = parts.join(", ");
        if self.velocity_untrusted > 0 {
            if !s.is_empty() {
                s.push_str("; ");
            }
            s.push_str(&format!("V, Tu: {} untrusted", self.velocity_untrusted));
        }
        if s.is_empty() {
            "-".into()
        } else {
            s
        }
    }
}

/// `0.3861±0.0123` (or the mean alone when no interval yet, `-` when no value).
pub fn estimate_text(e: Option<Estimate>, scale: f64, prec: usize) -> String {
    match e {
        None => "-".into(),
        Some(e) => match e.half_width {
            Some(h) => format!("{:.prec$}±{:.prec$}", e.mean * scale, h * scale),
            None => format!("{:.prec$}", e.mean * scale),
        },
    }
}

/// One probe's line of a summary table.
pub struct SummaryRow<'a> {
    /// Probe name.
    pub name: &'a str,
    /// Elevation, mm.
    pub elevation_mm: f64,
    /// Its tally.
    pub tally: &'a ProbeTally,
}

/// The per-probe table printed by replay and at the end of a live session: windows used
/// of all, C, F, V, Tu and chord median with 95 % intervals, bubbles, why windows were left
/// out, and windows per flag.
pub fn summary_table(rows: &[SummaryRow<'_>]) -> String {
    let mut s = String::new();
    s.push_str(&figures_header());
    s.push_str("  left out | flags (windows)\n");
    for r in rows {
        let t = r.tally;
        s.push_str(&figures_row(r));
        s.push_str(&format!("  {} | {}\n", t.left_out_text(), t.flags_text()));
    }
    s.push_str(&format!("(± 95 % batch-means interval; {RULE_TEXT})\n"));
    s
}

/// The header of the figures' columns of [`summary_table`] (no line end).
fn figures_header() -> String {
    format!(
        "{:<10} {:>7} {:>9} {:>15} {:>13} {:>11} {:>11} {:>13} {:>8}",
        "probe",
        "y [mm]",
        "used/all",
        "C [-]",
        "F [Hz]",
        "V [m/s]",
        "Tu [-]",
        "chord [ms]",
        "bubbles"
    )
}

/// A probe's five figures as printed, in table order: name, unit, value with interval
/// (`-` for none): C, F, V, Tu and the chord median.
fn figure_texts(t: &ProbeTally) -> [(&'static str, &'static str, String); 5] {
    [
        ("C", "", estimate_text(t.void_fraction(), 1.0, 4)),
        ("F", " Hz", estimate_text(t.count_rate_hz(), 1.0, 1)),
        ("V", " m/s", estimate_text(t.velocity_m_s(), 1.0, 2)),
        ("Tu", "", estimate_text(t.turbulence_intensity(), 1.0, 2)),
        ("chord", " ms", estimate_text(t.chord_median_s(), 1e3, 3)),
    ]
}

/// One probe's figures under [`figures_header`] (no line end).
fn figures_row(r: &SummaryRow<'_>) -> String {
    let t = r.tally;
    let [c, f, v, tu, chord] = figure_texts(t).map(|(_, _, text)| text);
    format!(
        "{:<10} {:>7.1} {:>9} {c:>15} {f:>13} {v:>11} {tu:>11} {chord:>13} {:>8.0}",
        r.name,
        r.elevation_mm,
        format!("{}/{}", t.used, t.windows),
        t.bubbles
    )
}

/// [`summary_table`] for a reader `width` columns wide (`None`: no limit, the table as it
/// is). When its lines do not fit, why windows were left out and the flag counts go on
/// lines of their own under each probe's row; when even the rows do not fit (an 80-column
/// terminal), each probe gets a block instead: its name, elevation, windows used and
/// bubbles, then its figures. Every line is packed with whole items up to the width (a
/// figure is never split from its value).
pub fn summary_table_fitted(rows: &[SummaryRow<'_>], width: Option<usize>) -> String {
    let table = summary_table(rows);
    let Some(width) = width else {
        return table;
    };
    let w = textwrap::core::display_width;
    if table.lines().all(|l| w(l) <= width) {
        return table;
    }
    let as_rows = w(&figures_header()) <= width && rows.iter().all(|r| w(&figures_row(r)) <= width);
    let mut s = String::new();
    if as_rows {
        s.push_str(figures_header().trim_end());
        s.push('\n');
    }
    for r in rows {
        let t = r.tally;
        if as_rows {
            s.push_str(figures_row(r).trim_end());
            s.push('\n');
        } else {
            let head = [
                r.name.to_string(),
                format!("y {:.1} mm", r.elevation_mm),
                format!("windows used {}/{}", t.used, t.windows),
                format!("{:.0} bubbles", t.bubbles),
            ];
            // `V 2.91±0.03 m/s`, or `V -` without a value.
            let figures = figure_texts(t).map(|(name, unit, value)| match value.as_str() {
                "-" => format!("{name} -"),
                _ => format!("{name} {value}{unit}"),
            });
            pack_items(&mut s, "", "    ", &head, width);
            pack_items(&mut s, "    ", "    ", &figures, width);
        }
        s.push_str(&crate::shared::stdout::fold_lines(
            &format!("    left out: {}\n", t.left_out_text()),
            width,
        ));
        pack_items(
            &mut s,
            "    flags (windows): ",
            "        ",
            &t.flag_items(),
            width,
        );
    }
    let note = format!("(± 95 % batch-means interval; {RULE_TEXT})\n");
    s.push_str(&crate::shared::stdout::fold_lines(&note, width));
    s
}

/// Lines of `items` separated by three spaces, as many on a line as fit in `width` (an
/// item wider than the line alone gets a line of its own), the first line after `first`,
/// the others after `rest`.
fn pack_items(s: &mut String, first: &str, rest: &str, items: &[String], width: usize) {
    let w = textwrap::core::display_width;
    let mut line = first.to_string();
    let mut on_line = 0;
    for item in items {
        if on_line > 0 && w(&line) + 3 + w(item) > width {
            s.push_str(line.trim_end());
            s.push('\n');
            line = rest.to_string();
            on_line = 0;
        }
        if on_line > 0 {
            line.push_str("   ");
        }
        line.push_str(item);
        on_line += 1;
    }
    s.push_str(line.trim_end());
    s.push('\n');
}

#[cfg(test)]
mod tests {
    use super::*;

    fn w(c: f64, f: f64, v: f64, bubbles: f64, flags: Flags) -> WindowFigures {
        WindowFigures {
            duration_s: 0.1,
            void_fraction: Some(c),
            count_rate_hz: Some(f),
            bubbles: Some(bubbles),
            velocity_m_s: Some(v),
            turbulence_intensity: Some(0.2),
            chord_median_s: Some(1e-3),
            flags,
            before_front: false,
        }
    }

    /// A worked case by hand: weights and the rule give these means exactly.
    #[test]
    fn the_rule_leaves_out_what_it_says_and_weights_by_bubbles() {
        let rule = SummaryRule::default();
        let mut t = ProbeTally::new();
        t.add(&w(0.2, 100.0, 1.0, 10.0, Flags::NONE), &rule);
        t.add(&w(0.4, 300.0, 2.0, 30.0, Flags::FEW_BUBBLES), &rule);
        // Untrusted velocity: enters C and F, not V.
        t.add(
            &w(0.6, 200.0, 0.2, 20.0, Flags::PEAK_AT_LAG_BOUNDARY),
            &rule,
        );
        // Levels not learnt: enters nothing.
        t.add(&w(1.0, 0.0, 9.0, 0.0, Flags::LEVELS_NOT_LEARNT), &rule);
        let mut pre = w(0.9, 5.0, 9.0, 1.0, Flags::NONE);
        pre.before_front = true;
        t.add(&pre, &rule);
        assert_eq!((t.windows, t.used, t.velocity_used), (5, 3, 2));
        assert!((t.void_fraction().unwrap().mean - 0.4).abs() < 1e-12);
        assert!((t.count_rate_hz().unwrap().mean - 200.0).abs() < 1e-9);
        // (1.0 * 10 + 2.0 * 30) / 40
        assert!((t.velocity_m_s().unwrap().mean - 1.75).abs() < 1e-12);
        assert_eq!(
            t.flags_text(),
            "levels_not_learnt 1/5 peak_at_lag_boundary 1/5 few_bubbles 1/5"
        );
        assert_eq!(
            t.left_out_text(),
            "1 before the front, 1 excluded flag; V, Tu: 1 untrusted"
        );
    }

    #[test]
    fn unknown_flag_names_are_refused() {
        let ok = flag_bits(&["stuck".into(), " few_bubbles".into(), "none".into()]).unwrap();
        assert_eq!(ok, Flags::STUCK | Flags::FEW_BUBBLES);
        let e = flag_bits(&["few_bubble".into()]).unwrap_err();
        assert!(
            e.contains("`few_bubble`") && e.contains("few_bubbles"),
            "{e}"
        );
        assert_eq!(flag_name(8), "few_bubbles");
        assert_eq!(flag_name(31), "bit31");
    }

    #[test]
    fn a_narrow_table_keeps_every_figure_within_the_width() {
        let rule = SummaryRule::default();
        let mut t = ProbeTally::new();
        for k in 0..12 {
            let flags = [
                Flags::NONE,
                Flags::FEW_BUBBLES | Flags::TU_INDEX,
                Flags::STUCK | Flags::TRAILING_STUCK,
                Flags::PEAK_AT_LAG_BOUNDARY | Flags::SHORT_CHORDS,
            ][k % 4];
            t.add(&w(0.3 + 0.01 * k as f64, 120.0, 2.5, 15.0, flags), &rule);
        }
        let rows = [
            SummaryRow {
                name: "upper",
                elevation_mm: 85.0,
                tally: &t,
            },
            SummaryRow {
                name: "lower",
                elevation_mm: 12.5,
                tally: &t,
            },
        ];
        let wide = summary_table(&rows);
        assert_eq!(summary_table_fitted(&rows, None), wide);
        assert_eq!(summary_table_fitted(&rows, Some(400)), wide);
        let middle = summary_table_fitted(&rows, Some(120));
        assert!(middle.lines().all(|l| l.chars().count() <= 120));
        assert!(middle.contains(&figures_row(&rows[1])), "{middle}");
        let narrow = summary_table_fitted(&rows, Some(80));
        assert_ne!(narrow, wide);
        for line in narrow.lines() {
            assert!(line.chars().count() <= 80, "{line:?}");
        }
        // Every figure and flag count of the wide table is in the narrow one.
        for cell in [
            estimate_text(t.void_fraction(), 1.0, 4),
            estimate_text(t.count_rate_hz(), 1.0, 1),
            estimate_text(t.velocity_m_s(), 1.0, 2),
            estimate_text(t.turbulence_intensity(), 1.0, 2),
            estimate_text(t.chord_median_s(), 1e3, 3),
            format!("{}/{}", t.used, t.windows),
            t.left_out_text(),
        ] {
            assert_eq!(narrow.matches(&cell).count(), 2, "{cell} in\n{narrow}");
        }
        for (name, n) in t.flag_counts() {
            let cell = format!(" {name} {n}/{}", t.windows);
            assert_eq!(narrow.matches(&cell).count(), 2, "{cell} in\n{narrow}");
        }
    }
}
