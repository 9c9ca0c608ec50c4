//! `frothline report DIR`: figures and a one-page HTML summary of a run folder.
//!
//! DIR is the `--out` folder of `frothline replay`, or the archive folder of a live session
//! (the same CSV files). It must hold `windows.csv`; a transient run also has `profile.csv`
//! and `fronts.csv` (columns in DESIGN.md §3, extra columns at the end are fine). Optional,
//! when present:
//! - `chords.csv` — pooled chord-time histograms, `probe,bin_lower_s,bin_upper_s,count`
//!   (seconds; any bins, logarithmic ones read best);
//! - `chord_lengths.csv` — pooled chord-length histograms,
//!   `probe,elevation_mm,bin_lower_mm,bin_upper_mm,count` (only `probe`, the edges and
//!   `count` are read);
//! - `flow.json` or `indicators.csv` — flow indicators (format in [`indicators`]);
//! - extra columns of `profile.csv`: `decay_c0`, `decay_cf`, `decay_tau_s` (a decay fit made
//!   by the writer), `flags` and `decay_flags` (fit flags, `|`-separated).
//!
//! Written to the output folder (default `DIR/report/`), each figure as `.svg` and `.png`:
//!
//! | file stem | figure | needs |
//! |---|---|---|
//! | `void_fraction_profile` | C against elevation: power-law fits C = 0.9 (y/Y90)^n at chosen times since the front with the windows over each slice (transient), or whole-record means per probe (steady) | profile.csv, or `elevation_mm` |
//! | `void_fraction_decay` | depth-averaged C against time since the front, with C(t) = Cf + (C0 − Cf) exp(−t/τ) | profile.csv |
//! | `velocity_turbulence` | V and Tu against elevation, window values and probe means | those columns |
//! | `chord_times` | chord-time histograms per probe (chords.csv), or 10th–90th percentile bars with median and mean | chord columns |
//! | `chord_lengths` | chord-length histograms per probe, labelled with its elevation, bottom to top | chord_lengths.csv |
//! | `count_rate_void_fraction` | F against C per window, envelope F = 4 Fmax C (1 − C) per probe and for all | C and F |
//! | `derived_figures` | interfacial area, Sauter diameter and chord lengths against elevation; `(1 − C) V` and `C V` against elevation with the areas under them (q_w, q_a, continuity error from discharge.csv); clustered fraction against C with the random-arrival reference | the derived columns |
//! | `report.html` | the page: figures, per-probe table, flow indicators, every flag raised and its meaning, notes | — |
//!
//! A figure whose data are missing is skipped, and the page says why. Means and fits use
//! the windows after the front (transient) that carry none of the excluded flags
//! (`--exclude-flags`, default `levels_not_learnt`); flag counts cover every window.

mod derived_fig;
pub mod error;
mod figures;
pub mod flags;
mod html;
pub mod indicators;
pub mod input;
mod render;
pub mod stats;
mod style;

pub use error::ReportError;

use figures::{
    fmax_all, thinned, ChordFigure, ChordQuantity, CountRateFigure, Ctx, DecayFigure, DecayStation,
    ProfileFigure, VelocityFigure, MAX_POINTS,
};
use indicatif::{ProgressBar, ProgressStyle};
use render::render;
use stats::{fit_decay, pick_slices, summarise, DecayFit, Selection};
use std::fmt;
use std::path::{Path, PathBuf};
use std::str::FromStr;
use style::Sizes;

/// Arguments of `frothline report`.
#[derive(clap::Args, Debug, Clone)]
pub struct ReportArgs {
    /// The run folder: the --out folder of `frothline replay`, or a live-session archive.
    /// It must hold windows.csv; profile.csv, fronts.csv, chords.csv, flow.json and
    /// indicators.csv are used when present.
    pub dir: PathBuf,
    /// Folder for the figures and report.html (created if missing; default: DIR/report).
    #[arg(long, short)]
    pub out: Option<PathBuf>,
    /// Times since the front, in seconds, at which to draw void fraction profiles
    /// (comma-separated, e.g. `0.1,0.5,1,2`; the nearest slice of profile.csv is drawn).
    /// Default: up to five slices spread over the record.
    #[arg(long, short, value_delimiter = ',', value_name = "SECONDS")]
    pub times: Vec<f64>,
    /// Station of profile.csv to draw (default: the first for the profiles, every station
    /// for the decay).
    #[arg(long)]
    pub station: Option<String>,
    /// Figure size in pixels, WIDTHxHEIGHT (text and markers scale with it).
    #[arg(long, default_value = "800x500", value_name = "WxH")]
    pub size: FigureSize,
    /// Windows carrying any of these flags are left out of means and fits
    /// (comma-separated names as in windows.csv; `none` keeps every window).
    #[arg(
        long,
        value_delimiter = ',',
        default_value = "levels_not_learnt",
        value_name = "FLAGS"
    )]
    pub exclude_flags: Vec<String>,
    /// Reynolds number below which the page warns that air entrainment is under-estimated
    /// (scale effects of small laboratory models).
    #[arg(long, default_value_t = 1.0e5, value_name = "RE")]
    pub low_reynolds: f64,
    /// No progress bar and no summary.
    #[arg(long, short)]
    pub quiet: bool,
}

impl ReportArgs {
    /// Arguments for `dir` with the command line's defaults (report into `dir/report`),
    /// except that it is quiet: no progress bar, no summary printed.
    pub fn new(dir: impl Into<PathBuf>) -> ReportArgs {
        ReportArgs {
            dir: dir.into(),
            out: None,
            times: Vec::new(),
            station: None,
            size: FigureSize::default(),
            exclude_flags: vec!["levels_not_learnt".into()],
            low_reynolds: 1.0e5,
            quiet: true,
        }
    }
}

/// A figure size in pixels (`800x500`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FigureSize {
    /// Width, px.
    pub width: u32,
    /// Height, px.
    pub height: u32,
}

impl Default for FigureSize {
    fn default() -> Self {
        FigureSize {
            width: 800,
            height: 500,
        }
    }
}

impl FromStr for FigureSize {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        let bad = || format!("`{s}`: give WIDTHxHEIGHT in pixels, 320x200 to 4000x4000");
        let (w, h) = s.split_once(['x', 'X']).ok_or_else(bad)?;
        let (width, height): (u32, u32) = (
            w.trim().parse().map_err(|_| bad())?,
            h.trim().parse().map_err(|_| bad())?,
        );
        if !(320..=4000).contains(&width) || !(200..=4000).contains(&height) {
            return Err(bad());
        }
        Ok(FigureSize { width, height })
    }
}

impl fmt::Display for FigureSize {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}x{}", self.width, self.height)
    }
}

/// What happened to one figure.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum FigureStatus {
    /// Written as SVG and PNG.
    Written {
        /// The SVG file.
        svg: PathBuf,
        /// The PNG file.
        png: PathBuf,
        /// Data series in the figure (`<g class="series">` groups of the SVG).
        series: usize,
    },
    /// Not drawn, and why.
    Skipped(String),
}

/// One figure of the report.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FigureOutcome {
    /// File stem (`void_fraction_profile`).
    pub stem: &'static str,
    /// Title for people.
    pub title: &'static str,
    /// Written or skipped.
    pub status: FigureStatus,
}

/// What a report produced.
#[derive(Debug, Clone)]
pub struct ReportSummary {
    /// The output folder.
    pub out_dir: PathBuf,
    /// The page.
    pub html: PathBuf,
    /// Every figure, written or skipped, in page order.
    pub figures: Vec<FigureOutcome>,
    /// Probes found in windows.csv.
    pub probes: usize,
    /// Rows of windows.csv.
    pub windows: usize,
    /// Rows that entered means and fits.
    pub windows_used: usize,
    /// True for a transient run (profile.csv rows or times since the front).
    pub transient: bool,
    /// True when the Reynolds number is below `--low-reynolds` (the page warns).
    pub low_reynolds: bool,
    /// Notes shown on the page (skips, thinning, rows left out, unknown columns).
    pub notes: Vec<String>,
    /// Per probe: name and whole-record figures (as in the page's probe table).
    pub probe_summaries: Vec<(String, stats::ProbeSummary)>,
}

impl ReportSummary {
    /// Every file written: the page and each figure's SVG and PNG.
    pub fn files(&self) -> Vec<PathBuf> {
        let mut out = vec![self.html.clone()];
        for f in &self.figures {
            if let FigureStatus::Written { svg, png, .. } = &f.status {
                out.push(svg.clone());
                out.push(png.clone());
            }
        }
        out
    }
}

impl fmt::Display for ReportSummary {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "{} ({} run, {} probes, {} of {} windows used)",
            self.html.display(),
            if self.transient {
                "transient"
            } else {
                "steady"
            },
            self.probes,
            self.windows_used,
            self.windows
        )?;
        for fig in &self.figures {
            match &fig.status {
                FigureStatus::Written { series, .. } => {
                    writeln!(f, "  {:<26} .svg .png  {series} series", fig.stem)?
                }
                FigureStatus::Skipped(why) => writeln!(f, "  {:<26} skipped: {why}", fig.stem)?,
            }
        }
        if self.low_reynolds {
            writeln!(
                f,
                "  caution: low Reynolds number, air entrainment is under-estimated"
            )?;
        }
        Ok(())
    }
}

/// Titles of the figures, by stem, in page order.
const TITLES: [(&str, &str); 7] = [
    ("void_fraction_profile", "Void fraction against elevation"),
    (
        "void_fraction_decay",
        "Depth-averaged void fraction after the front",
    ),
    (
        "velocity_turbulence",
        "Interfacial velocity and turbulence intensity",
    ),
    ("chord_times", "Bubble chord times"),
    ("chord_lengths", "Bubble chord lengths per elevation"),
    (
        "count_rate_void_fraction",
        "Bubble count rate against void fraction",
    ),
    ("derived_figures", "Derived figures"),
];

fn title(stem: &str) -> &'static str {
    TITLES
        .iter()
        .find(|t| t.0 == stem)
        .map_or("figure", |t| t.1)
}

/// The progress bar: drawn only for large inputs, never with --quiet.
fn progress_bar(args: &ReportArgs) -> ProgressBar {
    let size = std::fs::metadata(args.dir.join("windows.csv"))
        .map(|m| m.len())
        .unwrap_or(0);
    if args.quiet || size < input::PROGRESS_BYTES {
        return ProgressBar::hidden();
    }
    let pb = ProgressBar::new(size);
    if let Ok(style) =
        ProgressStyle::with_template("{msg:20} [{bar:32}] {percent:>3}% {elapsed_precise}")
    {
        pb.set_style(style.progress_chars("=> "));
    }
    pb
}

/// Bits (over the run's flag names) of the flags named in `names`, and the summary rule
/// for them. An unknown name is a usage error.
fn excluded_bits(
    run: &input::Run,
    names: &[String],
) -> Result<(u64, crate::shared::probe_summary::SummaryRule), ReportError> {
    let core = crate::shared::probe_summary::flag_bits(names)
        .map_err(|e| ReportError::Usage(format!("--exclude-flags: {e}")))?;
    let mut bits = 0;
    for (i, f) in run.flag_names.iter().enumerate() {
        if core.names().any(|n| n == f) {
            bits |= 1 << i;
        }
    }
    let rule = crate::shared::probe_summary::SummaryRule {
        excluded: core,
        ..Default::default()
    };
    Ok((bits, rule))
}

/// Make the report of `args.dir`.
pub fn run(args: &ReportArgs) -> Result<ReportSummary, ReportError> {
    if args.times.iter().any(|t| !t.is_finite() || *t < 0.0) {
        return Err(ReportError::Usage(
            "--times: times since the front are seconds, zero or more".into(),
        ));
    }
    if !(args.low_reynolds.is_finite() && args.low_reynolds >= 0.0) {
        return Err(ReportError::Usage(
            "--low-reynolds: give a Reynolds number, zero or more".into(),
        ));
    }
    crate::shared::probe_summary::flag_bits(&args.exclude_flags)
        .map_err(|e| ReportError::Usage(format!("--exclude-flags: {e}")))?;
    let progress = progress_bar(args);
    let run = input::read_run(&args.dir, &progress)?;
    let mut notes = run.notes.clone();
    let (excluded_flags, rule) = excluded_bits(&run, &args.exclude_flags)?;
    let sel = Selection {
        excluded_flags,
        rule,
    };
    let stations = run.stations();
    if let Some(st) = &args.station {
        if !stations.contains(st) {
            return Err(ReportError::Usage(format!(
                "--station {st}: profile.csv has {}",
                if stations.is_empty() {
                    "no stations".to_string()
                } else {
                    format!("stations {}", stations.join(", "))
                }
            )));
        }
    }
    let summaries = summarise(&run, sel);
    let out_dir = args.out.clone().unwrap_or_else(|| args.dir.join("report"));
    std::fs::create_dir_all(&out_dir).map_err(|source| ReportError::Write {
        path: out_dir.clone(),
        source,
    })?;
    let ctx = Ctx {
        run: &run,
        summaries: &summaries,
        sel,
    };
    let sizes = Sizes::new(args.size.width, args.size.height);
    progress.set_length(TITLES.len() as u64);
    progress.set_position(0);
    progress.set_message("drawing figures");

    let mut figures: Vec<FigureOutcome> = Vec::new();
    let mut push = |stem: &'static str, status: FigureStatus| {
        figures.push(FigureOutcome {
            stem,
            title: title(stem),
            status,
        });
        progress.inc(1);
    };
    let out = out_dir.as_path();
    let written = |r: render::Rendered| FigureStatus::Written {
        svg: r.svg,
        png: r.png,
        series: r.series,
    };
    let skip = |why: &str| FigureStatus::Skipped(why.to_string());

    // 1. void fraction against elevation
    let profile_station = args.station.clone().or_else(|| stations.first().cloned());
    let slices = profile_station
        .as_deref()
        .map(|st| pick_slices(&run, st, &args.times, 5))
        .unwrap_or_default();
    let has_elevation = run.probes.iter().any(|p| p.elevation_mm.is_some());
    let steady_profile = summaries
        .iter()
        .zip(&run.probes)
        .any(|(s, p)| s.void_fraction.is_some() && p.elevation_mm.is_some());
    let profile = if !slices.is_empty() {
        let fig = ProfileFigure {
            ctx,
            transient: Some((profile_station.clone().unwrap_or_default(), slices.clone())),
        };
        written(render(&fig, out, sizes)?)
    } else if !run.profile.is_empty() && !steady_profile {
        skip("profile.csv has no slice after the front with both Y90 and an exponent")
    } else if steady_profile {
        if !run.profile.is_empty() {
            notes.push(
                "profile.csv has no slice after the front with both Y90 and an exponent: \
                 the profile figure shows whole-record means per probe"
                    .into(),
            );
        } else if run.is_transient() {
            notes.push(
                "no profile.csv: the profile figure shows whole-record means per probe (after \
                 the front)"
                    .into(),
            );
        }
        let fig = ProfileFigure {
            ctx,
            transient: None,
        };
        written(render(&fig, out, sizes)?)
    } else if !has_elevation {
        skip("windows.csv has no elevation_mm column (or it is empty)")
    } else {
        skip("windows.csv has no void fraction to average")
    };
    push("void_fraction_profile", profile);

    // 2. depth-averaged void fraction against time since the front
    let mut decay_fits: Vec<(String, Option<DecayFit>, bool, usize)> = Vec::new();
    let decay = if run.profile.is_empty() {
        skip(if run.is_transient() {
            "no profile.csv in the folder: no depth-averaged void fraction"
        } else {
            "steady run (no profile.csv): no front to count time from"
        })
    } else {
        let chosen: Vec<String> = match &args.station {
            Some(s) => vec![s.clone()],
            None => stations.clone(),
        };
        let mut list = Vec::new();
        for st in chosen {
            let rows: Vec<&input::Slice> = run.profile.iter().filter(|s| s.station == st).collect();
            let kept: Vec<(f64, f64, Option<f64>)> = rows
                .iter()
                .filter_map(|s| {
                    let t = s.since_front_s?;
                    Some((t, s.depth_averaged_void_fraction?, s.void_fraction_se))
                })
                .filter(|p| p.0 >= 0.0)
                .collect();
            if kept.is_empty() {
                continue;
            }
            let points: Vec<(f64, f64)> = kept.iter().map(|p| (p.0, p.1)).collect();
            // 90 % intervals: ±1.645 standard errors (normal quantile).
            let intervals: Vec<Option<f64>> = kept
                .iter()
                .map(|p| p.2.map(|se| frothline_core::profile::Z90 as f64 * se))
                .collect();
            let given = rows.iter().rev().find_map(|s| s.decay);
            let (fit, from_file) = match given {
                Some((c0, cf, tau_s)) => (
                    Some(DecayFit {
                        c0,
                        cf,
                        tau_s,
                        rmse: None,
                        resolved: true,
                    }),
                    true,
                ),
                None => (fit_decay(&points), false),
            };
            if fit.is_none() {
                notes.push(format!(
                    "station {st}: {} slices, too few for a decay fit (4 needed)",
                    points.len()
                ));
            } else if fit.is_some_and(|f| !f.resolved) {
                notes.push(format!(
                    "station {st}: the decay time τ is not resolved by the record (it ran to \
                     the end of the search range); read the fit as a trend"
                ));
            }
            decay_fits.push((st.clone(), fit, from_file, points.len()));
            list.push(DecayStation {
                station: st,
                points,
                intervals,
                fit,
                fit_from_file: from_file,
            });
        }
        if list.is_empty() {
            skip("profile.csv has no depth-averaged void fraction after the front")
        } else {
            let fig = DecayFigure { stations: list };
            written(render(&fig, out, sizes)?)
        }
    };
    push("void_fraction_decay", decay);

    // 3. interfacial velocity and turbulence intensity
    let with_elev = |p: usize| run.probes[p].elevation_mm.is_some();
    let has_v = summaries
        .iter()
        .enumerate()
        .any(|(p, s)| s.velocity_m_s.is_some() && with_elev(p));
    let has_tu = summaries
        .iter()
        .enumerate()
        .any(|(p, s)| s.turbulence_intensity.is_some() && with_elev(p));
    let velocity = if has_v || has_tu {
        if !has_tu {
            notes.push("turbulence intensity column empty: velocity panel only".into());
        } else if !has_v {
            notes.push("interfacial velocity column empty: turbulence panel only".into());
        }
        let fig = VelocityFigure {
            ctx,
            velocity: has_v,
            turbulence: has_tu,
        };
        written(render(&fig, out, sizes)?)
    } else if !has_elevation {
        skip("windows.csv has no elevation_mm column (or it is empty)")
    } else {
        skip(
            "interfacial velocity and turbulence intensity are empty in windows.csv (single-tip \
             probes, or the pair correlation did not run)",
        )
    };
    push("velocity_turbulence", velocity);

    // 4. chord times
    let has_hist = run.chords.iter().any(|b| b.count > 0.0);
    let has_chords = summaries.iter().any(|s| {
        s.chord_median_s.is_some_and(|v| v > 0.0) || s.chord_mean_s.is_some_and(|v| v > 0.0)
    });
    let chords = if has_hist || has_chords {
        let fig = ChordFigure {
            ctx,
            quantity: ChordQuantity::Times {
                histograms: has_hist,
            },
        };
        written(render(&fig, out, sizes)?)
    } else {
        skip("no bubble chord times in windows.csv (no bubbles closed?)")
    };
    push("chord_times", chords);

    // 4b. chord lengths per elevation
    let lengths = if run.chord_lengths.iter().any(|b| b.count > 0.0) {
        let fig = ChordFigure {
            ctx,
            quantity: ChordQuantity::Lengths,
        };
        written(render(&fig, out, sizes)?)
    } else if run.files_found.contains(&"chord_lengths.csv") {
        skip("chord_lengths.csv holds no chord (no window with a trusted velocity)")
    } else {
        skip("no chord_lengths.csv in the folder (written by `frothline replay`)")
    };
    push("chord_lengths", lengths);

    // 5. bubble count rate against void fraction
    let all_fmax = fmax_all(&ctx);
    let has_cf = run
        .windows
        .iter()
        .any(|w| sel.uses(w) && w.void_fraction.is_some() && w.count_rate_hz.is_some());
    let count_rate = if has_cf {
        let fig = CountRateFigure {
            ctx,
            fmax_all: all_fmax,
        };
        written(render(&fig, out, sizes)?)
    } else {
        skip("no window has both a void fraction and a bubble count rate")
    };
    push("count_rate_void_fraction", count_rate);

    // 6. derived figures: a, d, chord lengths, discharge integrands, clusters
    let derived = match derived_fig::read(&args.dir) {
        Some(d) => written(render(
            &derived_fig::DerivedFigure { data: &d },
            out,
            sizes,
        )?),
        None => skip(
            "windows.csv has no derived figures (interfacial area, clusters): replayed by an \
             older frothline, or no bubbles",
        ),
    };
    push("derived_figures", derived);
    progress.finish_and_clear();

    let thin: Vec<&str> = (0..run.probes.len())
        .filter(|&p| thinned(&ctx, p))
        .map(|p| run.probes[p].name.as_str())
        .collect();
    if !thin.is_empty() {
        notes.push(format!(
            "more than {MAX_POINTS} windows for {}: window markers thinned evenly to at most \
             {MAX_POINTS} per probe (means and fits use every window)",
            thin.join(", ")
        ));
    }
    let windows_used = run.windows.iter().filter(|w| sel.uses(w)).count();
    let left_out = run.windows.len() - windows_used;
    if left_out > 0 {
        let before = run
            .windows
            .iter()
            .filter(|w| w.since_front_s.is_some_and(|t| t < 0.0))
            .count();
        let flagged = run
            .windows
            .iter()
            .filter(|w| w.flags & sel.excluded_flags != 0)
            .count();
        notes.push(format!(
            "{left_out} of {} windows left out of means and fits: {before} before the front, \
             {flagged} with an excluded flag (a window may be both)",
            run.windows.len()
        ));
    }
    let untrusted: usize = summaries
        .iter()
        .map(|s| s.used.saturating_sub(s.velocity_used))
        .sum();
    if untrusted > 0 {
        notes.push(format!(
            "{untrusted} used windows left out of V and Tu only: flagged no_correlation_peak \
             or peak_at_lag_boundary (velocity not to be trusted)"
        ));
    }
    let reynolds = run.indicators.as_ref().and_then(|i| i.reynolds());
    let low_reynolds = reynolds.is_some_and(|re| re < args.low_reynolds);
    let marks = crate::shared::marks::read(&args.dir).map_err(ReportError::Usage)?;
    let html_path = out_dir.join("report.html");
    let page = html::Page {
        args,
        run: &run,
        summaries: &summaries,
        figures: &figures,
        out_dir: &out_dir,
        decay_fits: &decay_fits,
        fmax_all: all_fmax,
        reynolds,
        low_reynolds,
        notes: &notes,
        sel,
        marks: &marks,
    };
    std::fs::write(&html_path, page.render()).map_err(|source| ReportError::Write {
        path: html_path.clone(),
        source,
    })?;
    let summary = ReportSummary {
        out_dir,
        html: html_path,
        figures,
        probes: run.probes.len(),
        windows: run.windows.len(),
        windows_used,
        transient: run.is_transient(),
        low_reynolds,
        notes,
        probe_summaries: run
            .probes
            .iter()
            .map(|p| p.name.clone())
            .zip(summaries.iter().cloned())
            .collect(),
    };
    if !args.quiet {
        crate::shared::stdout::print(&summary.to_string());
    }
    Ok(summary)
}

/// The path of `file` relative to `dir` when inside it (for links in the page).
fn relative(file: &Path, dir: &Path) -> String {
    file.strip_prefix(dir)
        .unwrap_or(file)
        .to_string_lossy()
        .replace('\\', "/")
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::{CommandFactory, Parser};

    #[derive(Parser, Debug)]
    struct Cli {
        #[command(flatten)]
        report: ReportArgs,
    }

    #[test]
    fn command_line() {
        Cli::command().debug_assert();
        let a = Cli::try_parse_from(["report", "runs/14"]).unwrap().report;
        assert_eq!(a.size, FigureSize::default());
        assert_eq!(a.exclude_flags, ["levels_not_learnt"]);
        assert!(a.times.is_empty() && !a.quiet && a.out.is_none());
        assert_eq!(a.low_reynolds, 1.0e5);
        let a = Cli::try_parse_from([
            "report",
            "runs/14",
            "--times",
            "0.1,0.5,2",
            "--size",
            "1200x750",
            "--exclude-flags",
            "none",
            "-o",
            "out",
        ])
        .unwrap()
        .report;
        assert_eq!(a.times, [0.1, 0.5, 2.0]);
        assert_eq!(a.size.width, 1200);
        assert_eq!(a.exclude_flags, ["none"]);
        assert_eq!(a.out, Some(PathBuf::from("out")));
        assert!(Cli::try_parse_from(["report", "d", "--size", "big"]).is_err());
    }

    #[test]
    fn figure_sizes_parse() {
        assert_eq!(
            "800x500".parse::<FigureSize>(),
            Ok(FigureSize {
                width: 800,
                height: 500
            })
        );
        assert_eq!(
            "1200X750".parse::<FigureSize>().map(|s| s.to_string()),
            Ok("1200x750".into())
        );
        assert!("800".parse::<FigureSize>().is_err());
        assert!("10x10".parse::<FigureSize>().is_err());
    }
}
