//! `report.html`: one self-contained page (inline CSS, no script) that embeds the SVG
//! figures by relative path and holds the tables.

use super::figures::fmt_num;
use super::flags::{self, FlagSource};
use super::indicators::Value;
use super::input::Run;
use super::stats::{ChordSource, DecayFit, ProbeSummary, Selection};
use super::{relative, FigureOutcome, FigureStatus, ReportArgs};
use std::collections::BTreeMap;
use std::fmt::Write;
use std::path::Path;

/// Everything the page shows.
pub struct Page<'a> {
    pub args: &'a ReportArgs,
    pub run: &'a Run,
    pub summaries: &'a [ProbeSummary],
    pub figures: &'a [FigureOutcome],
    pub out_dir: &'a Path,
    /// (station, fit, fit given by profile.csv, slices)
    pub decay_fits: &'a [(String, Option<DecayFit>, bool, usize)],
    pub fmax_all: Option<f64>,
    pub reynolds: Option<f64>,
    pub low_reynolds: bool,
    pub notes: &'a [String],
    pub sel: Selection,
    /// marks.csv of a live session (empty when none).
    pub marks: &'a [crate::shared::marks::Mark],
}

/// Escape text for HTML.
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A number for the page with `digits` significant digits, in scientific notation
/// (`5.548 × 10<sup>4</sup>`) outside 0.01 to 10000.
fn sci_digits(v: f64, digits: usize) -> String {
    if v == 0.0 || !v.is_finite() {
        return fmt_num(v);
    }
    let e = v.abs().log10().floor() as i32;
    let trim = |s: String| {
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    };
    if (-2..4).contains(&e) {
        let decimals = (digits as i32 - 1 - e).max(0) as usize;
        return trim(format!("{v:.decimals$}"));
    }
    let m = v / 10f64.powi(e);
    let decimals = digits.saturating_sub(1);
    format!("{} × 10<sup>{e}</sup>", trim(format!("{m:.decimals$}")))
}

/// As [`sci_digits`] with 3 significant digits.
fn sci(v: f64) -> String {
    sci_digits(v, 3)
}

fn opt(v: Option<f64>, scale: f64) -> String {
    v.map(|v| fmt_num(v * scale))
        .unwrap_or_else(|| "–".to_string())
}

const CSS: &str = "
body { font-family: 'DejaVu Sans', Verdana, Arial, sans-serif; color: #222; max-width: 64rem;
       margin: 2rem auto; padding: 0 1rem; line-height: 1.45; }
h1 { font-size: 1.6rem; margin-bottom: 0.2rem; }
h2 { font-size: 1.2rem; margin-top: 2rem; border-bottom: 1px solid #ddd; padding-bottom: 0.2rem; }
.sub { color: #555; margin-top: 0; }
table { border-collapse: collapse; margin: 0.6rem 0; font-size: 0.92rem; }
th, td { padding: 0.25rem 0.6rem; border-bottom: 1px solid #e4e4e4; text-align: right;
         vertical-align: top; }
th { background: #f4f4f4; font-weight: 600; }
td.l, th.l { text-align: left; }
.swatch { display: inline-block; width: 0.8rem; height: 0.8rem; border-radius: 50%;
          margin-right: 0.35rem; vertical-align: -0.05rem; }
figure { margin: 1.2rem 0; }
figure img { max-width: 100%; height: auto; border: 1px solid #eee; }
figcaption { color: #444; font-size: 0.92rem; }
.skipped { color: #666; font-style: italic; }
.caution { background: #fff4e0; border-left: 4px solid #d55e00; padding: 0.6rem 0.9rem; }
.muted { color: #666; font-size: 0.9rem; }
";

impl Page<'_> {
    /// The page as HTML.
    pub fn render(&self) -> String {
        let mut h = String::new();
        let run = self.run;
        let dir = self.args.dir.display().to_string();
        let _ = write!(
            h,
            "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
             <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
             <title>frothline report: {}</title>\n<style>{CSS}</style>\n</head>\n<body>\n",
            esc(&dir)
        );
        let kind = if run.is_transient() {
            "transient run"
        } else {
            "steady run"
        };
        let description = run.indicators.as_ref().and_then(|i| {
            i.entries
                .iter()
                .find(|e| e.key == "description")
                .and_then(|e| match &e.value {
                    Value::Text(t) => Some(t.clone()),
                    Value::Number(_) => None,
                })
        });
        let _ = write!(
            h,
            "<h1>frothline report</h1>\n<p class=\"sub\">{}{} · {kind} · {} probes · {} windows \
             ({} used in means and fits) · frothline {}</p>\n",
            description
                .map(|d| format!("{} · ", esc(&d)))
                .unwrap_or_default(),
            esc(&dir),
            run.probes.len(),
            run.windows.len(),
            run.windows.iter().filter(|w| self.sel.uses(w)).count(),
            env!("CARGO_PKG_VERSION"),
        );
        self.indicators(&mut h);
        self.probe_table(&mut h);
        self.figures(&mut h);
        self.fits(&mut h);
        self.flags(&mut h);
        self.marks(&mut h);
        self.notes(&mut h);
        h.push_str("</body>\n</html>\n");
        h
    }

    fn indicators(&self, h: &mut String) {
        let Some(ind) = &self.run.indicators else {
            return;
        };
        h.push_str("<h2 id=\"flow\">Flow indicators</h2>\n");
        if self.low_reynolds {
            let re = self.reynolds.unwrap_or(0.0);
            let _ = writeln!(
                h,
                "<p class=\"caution\"><strong>Caution: low Reynolds number.</strong> \
                 Re = {} is below {}. Small laboratory models under-estimate air entrainment \
                 at small Reynolds numbers (scale effects): the void fractions, and still more \
                 the bubble count rates and the chord sizes, of this run are not to be scaled \
                 up to a larger flow by Froude similitude alone. Compare runs at similar \
                 Reynolds numbers.</p>",
                sci(re),
                sci(self.args.low_reynolds)
            );
        } else if self.reynolds.is_none() {
            h.push_str(
                "<p class=\"muted\">No Reynolds number: give it, or the water density, \
                 viscosity, a reference velocity and depth, to compare scales.</p>\n",
            );
        }
        h.push_str(
            "<table>\n<tr><th class=\"l\">indicator</th><th>value</th><th class=\"l\">unit</th>\
             <th class=\"l\">source</th></tr>\n",
        );
        for e in &ind.entries {
            if e.key == "description" {
                continue;
            }
            let value = match &e.value {
                Value::Number(v) => sci_digits(*v, 4),
                Value::Text(t) => esc(t),
            };
            let source = if e.note.is_empty() {
                e.source.to_string()
            } else {
                format!("{} ({})", e.source, e.note)
            };
            let _ = writeln!(
                h,
                "<tr><td class=\"l\">{}</td><td>{value}</td><td class=\"l\">{}</td>\
                 <td class=\"l\">{}</td></tr>",
                esc(&e.label),
                esc(&e.unit),
                esc(&source)
            );
        }
        h.push_str("</table>\n");
    }

    fn probe_table(&self, h: &mut String) {
        let run = self.run;
        h.push_str(
            "<h2 id=\"probes\">Probes</h2>\n<table>\n<tr><th class=\"l\">probe</th>\
             <th>x (mm)</th><th>y (mm)</th><th>windows used / all</th><th>C (–)</th>\
             <th>F (Hz)</th><th>Fmax (Hz)</th><th>chord median (ms)</th><th>V (m/s)</th>\
             <th>Tu (–)</th><th class=\"l\">flags raised (windows)</th></tr>\n",
        );
        for (p, s) in self.summaries.iter().enumerate() {
            let probe = &run.probes[p];
            let c = super::style::probe_colour(p);
            let flags: Vec<String> = s
                .flag_counts
                .iter()
                .map(|&(bit, n)| format!("{}&nbsp;×&nbsp;{n}", esc(&run.flag_names[bit])))
                .collect();
            let _ = writeln!(
                h,
                "<tr><td class=\"l\"><span class=\"swatch\" style=\"background:#{:02x}{:02x}{:02x}\">\
                 </span>{}</td><td>{}</td><td>{}</td><td>{} / {}</td><td>{}</td><td>{}</td>\
                 <td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td></tr>",
                c.0,
                c.1,
                c.2,
                esc(&probe.name),
                opt(probe.x_mm, 1.0),
                opt(probe.elevation_mm, 1.0),
                s.used,
                s.windows,
                opt(s.void_fraction, 1.0),
                opt(s.count_rate_hz, 1.0),
                opt(s.fmax_hz, 1.0),
                opt(s.chord_median_s, 1e3),
                opt(s.velocity_m_s, 1.0),
                opt(s.turbulence_intensity, 1.0),
                if flags.is_empty() {
                    "none".to_string()
                } else {
                    flags.join(", ")
                }
            );
        }
        h.push_str("</table>\n");
        let from_hist = self
            .summaries
            .iter()
            .any(|s| s.chord_source == ChordSource::Histogram);
        let _ = writeln!(
            h,
            "<p class=\"muted\">C: mean over the windows used, weighted by window length; F: \
             bubbles over time; Fmax: parabolic envelope fitted to the probe's windows{}; chord \
             median: {}; V and Tu: bubble-weighted means of the window values, leaving out \
             windows flagged no_correlation_peak or peak_at_lag_boundary (velocity not to be \
             trusted). Windows used: after the front (transient runs), without {}.</p>",
            self.fmax_all
                .map(|f| format!(" (all probes together: {} Hz)", fmt_num(f)))
                .unwrap_or_default(),
            if from_hist {
                "from the pooled histograms of chords.csv"
            } else {
                "bubble-weighted mean of the window medians (approximate)"
            },
            {
                let names: Vec<&str> = self.run.flag_list(self.sel.excluded_flags).collect();
                if names.is_empty() {
                    "exclusions by flag".to_string()
                } else {
                    format!("the flags {}", esc(&names.join(", ")))
                }
            }
        );
    }

    fn figures(&self, h: &mut String) {
        h.push_str("<h2 id=\"figures\">Figures</h2>\n");
        let (w, hh) = (self.args.size.width, self.args.size.height);
        for f in self.figures {
            match &f.status {
                FigureStatus::Written { svg, png, .. } => {
                    let (svg, png) = (relative(svg, self.out_dir), relative(png, self.out_dir));
                    let _ = writeln!(
                        h,
                        "<figure id=\"{}\">\n<img src=\"{}\" width=\"{w}\" height=\"{hh}\" \
                         alt=\"{}\">\n<figcaption>{}. {} <a href=\"{}\">PNG</a> · \
                         <a href=\"{}\">SVG</a></figcaption>\n</figure>",
                        f.stem,
                        esc(&svg),
                        esc(f.title),
                        esc(f.title),
                        caption(f.stem),
                        esc(&png),
                        esc(&svg),
                    );
                }
                FigureStatus::Skipped(why) => {
                    let _ = writeln!(
                        h,
                        "<p class=\"skipped\" id=\"{}\">{}: skipped, {}.</p>",
                        f.stem,
                        esc(f.title),
                        esc(why)
                    );
                }
            }
        }
    }

    fn fits(&self, h: &mut String) {
        if self.decay_fits.is_empty() {
            return;
        }
        h.push_str(
            "<h2 id=\"decay\">Decay after the front</h2>\n<p class=\"muted\">Cmean(t) = Cf + \
             (C0 − Cf) exp(−t/τ), t the time since the front, Cmean the depth-averaged void \
             fraction of profile.csv.</p>\n<table>\n<tr><th class=\"l\">station</th>\
             <th>slices</th><th>C0 (–)</th><th>Cf (–)</th><th>τ (s)</th><th>rms residual (–)</th>\
             <th class=\"l\">fit</th></tr>\n",
        );
        for (st, fit, from_file, n) in self.decay_fits {
            let (c0, cf, tau, rmse) = match fit {
                Some(f) => (
                    fmt_num(f.c0),
                    fmt_num(f.cf),
                    fmt_num(f.tau_s),
                    f.rmse.map_or("–".into(), fmt_num),
                ),
                None => ("–".into(), "–".into(), "–".into(), "–".into()),
            };
            let how = match (fit, from_file) {
                (None, _) => "too few slices",
                (Some(_), true) => "given by profile.csv",
                (Some(f), false) if !f.resolved => "least squares here; τ not resolved",
                (Some(_), false) => "least squares here",
            };
            let _ = writeln!(
                h,
                "<tr><td class=\"l\">{}</td><td>{n}</td><td>{c0}</td><td>{cf}</td><td>{tau}</td>\
                 <td>{rmse}</td><td class=\"l\">{how}</td></tr>",
                esc(st)
            );
        }
        h.push_str("</table>\n");
    }

    fn flags(&self, h: &mut String) {
        let run = self.run;
        // (source, name) -> (rows raising it, probes or stations)
        let mut table: BTreeMap<(FlagSource, String), (usize, Vec<String>)> = BTreeMap::new();
        for s in self.summaries.iter().enumerate() {
            for &(bit, n) in &s.1.flag_counts {
                let e = table
                    .entry((FlagSource::Window, run.flag_names[bit].clone()))
                    .or_default();
                e.0 += n;
                e.1.push(run.probes[s.0].name.clone());
            }
        }
        for sl in &run.profile {
            for (src, names) in [
                (FlagSource::Profile, &sl.flags),
                (FlagSource::Decay, &sl.decay_flags),
            ] {
                for n in names {
                    let e = table.entry((src, n.clone())).or_default();
                    e.0 += 1;
                    if !e.1.contains(&sl.station) {
                        e.1.push(sl.station.clone());
                    }
                }
            }
        }
        h.push_str("<h2 id=\"flags\">Flags raised</h2>\n");
        if table.is_empty() {
            h.push_str("<p>No flag was raised in this run.</p>\n");
            return;
        }
        h.push_str(
            "<table>\n<tr><th class=\"l\">flag</th><th class=\"l\">on</th><th>rows</th>\
             <th class=\"l\">where</th><th class=\"l\">meaning</th></tr>\n",
        );
        for ((src, name), (n, wher)) in &table {
            let meaning = flags::meaning(*src, name).unwrap_or(flags::UNKNOWN);
            let _ = writeln!(
                h,
                "<tr><td class=\"l\"><code>{}</code></td><td class=\"l\">{}</td><td>{n}</td>\
                 <td class=\"l\">{}</td><td class=\"l\">{}</td></tr>",
                esc(name),
                src.label(),
                esc(&wher.join(", ")),
                esc(meaning)
            );
        }
        h.push_str("</table>\n");
    }

    /// The technician's marks (marks.csv), in file order.
    fn marks(&self, h: &mut String) {
        if self.marks.is_empty() {
            return;
        }
        h.push_str(
            "<h2 id=\"marks\">Marks</h2>\n<table>\n<tr><th>run</th><th class=\"l\">label</th>\
             <th class=\"l\">host time (UTC)</th><th>device time (s)</th>\
             <th class=\"l\">note</th></tr>\n",
        );
        for m in self.marks {
            let _ = writeln!(
                h,
                "<tr><td>{}</td><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{}</td>\
                 <td class=\"l\">{}</td></tr>",
                m.run_number,
                esc(&m.run_label),
                esc(&m.host_utc),
                m.device_time_s.map_or("–".into(), |t| format!("{t:.3}")),
                esc(&m.note)
            );
        }
        h.push_str("</table>\n");
    }

    fn notes(&self, h: &mut String) {
        let run = self.run;
        h.push_str("<h2 id=\"notes\">Inputs and notes</h2>\n<ul>\n");
        let optional = [
            "profile.csv",
            "fronts.csv",
            "chords.csv",
            "chord_lengths.csv",
            "flow.json",
            "indicators.csv",
        ];
        let found: Vec<&str> = optional
            .iter()
            .copied()
            .filter(|f| run.files_found.contains(f))
            .collect();
        let missing: Vec<&str> = optional
            .iter()
            .copied()
            .filter(|f| !run.files_found.contains(f))
            .collect();
        let _ = writeln!(
            h,
            "<li>Read: windows.csv{}{}.</li>",
            found.iter().map(|f| format!(", {f}")).collect::<String>(),
            if missing.is_empty() {
                String::new()
            } else {
                format!(" (not present: {})", missing.join(", "))
            }
        );
        for n in self.notes {
            let _ = writeln!(h, "<li>{}</li>", esc(n));
        }
        h.push_str("</ul>\n");
    }
}

/// The caption of a figure (after its title).
fn caption(stem: &str) -> &'static str {
    match stem {
        "void_fraction_profile" => {
            "Lines: power law C = 0.9 (y/Y90)<sup>n</sup> from each slice's Y90 and n; markers: \
             the windows over the slice (transient), or whole-record means with 10th–90th \
             percentile bars (steady)."
        }
        "void_fraction_decay" => {
            "Markers: depth-averaged void fraction of each profile slice; line: exponential \
             decay fit."
        }
        "velocity_turbulence" => "Small dots: windows; large markers: bubble-weighted probe means.",
        "chord_times" => {
            "Chord times of the leading tips on a logarithmic axis, one colour per probe."
        }
        "chord_lengths" => {
            "Chord lengths (chord time × the window's interfacial velocity) of the leading \
             tips, pooled over the windows with a trusted velocity, one colour per probe, \
             listed from the bed up."
        }
        "count_rate_void_fraction" => {
            "Markers: windows; thin lines: envelope F = 4 Fmax C (1 − C) fitted to each \
             probe's windows (least squares); dashed: fitted to every probe together."
        }
        "derived_figures" => {
            "Probe means over their windows. Top: a = 4F/V; Sauter diameter d = 1.5 C V / F \
             (markers) and the median-to-p90 chord lengths (bars). Bottom left: (1 − C) V and \
             C V against elevation, the shaded areas being q_w and q_a. Bottom right: \
             fraction of bubbles in near-wake clusters (filled) against what Poisson \
             arrivals with the same chords give (rings): filled above ring is real grouping."
        }
        _ => "",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_and_scientific_numbers() {
        assert_eq!(esc("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
        assert_eq!(sci(55483.0), "5.55 × 10<sup>4</sup>");
        assert_eq!(sci(100000.0), "1 × 10<sup>5</sup>");
        assert_eq!(sci(998.7), "999");
        assert_eq!(sci_digits(998.7, 4), "998.7");
        assert_eq!(sci_digits(0.0732, 4), "0.0732");
        assert_eq!(sci_digits(55483.3, 4), "5.548 × 10<sup>4</sup>");
        assert_eq!(sci(2.6e-11), "2.6 × 10<sup>-11</sup>");
    }
}
