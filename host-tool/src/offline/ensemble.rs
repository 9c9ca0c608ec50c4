//! `frothline ensemble`: repeated runs of one rig (transient flows), aligned on each
//! station's front arrival, combined per window and per profile slice.
//!
//! Every capture goes through the transient replay ([`crate::offline::transient`]) with the same
//! layout and front-relative windows; window `k` of a probe (the `k`-th window after its
//! station's origin) is combined over the runs that have it:
//! - **void fraction**: the mean over runs (spread: the sample standard deviation across
//!   runs);
//! - **bubble count rate**: total bubbles over total time (spread: across runs);
//! - **chords**: the runs' chord histograms merged;
//! - **interfacial velocity, correlation peak, Tu**: from the runs' exact correlation sums
//!   merged before the peak is taken (`CorrelationSums::merge`: the pooled Pearson
//!   coefficients of all runs' frames), not from an average of per-run velocities (spread:
//!   of the per-run velocities);
//! - **profile slices**: the profile fit of the ensemble void fractions of the station's
//!   probes at slice `k`, each point weighted by the renewal standard error of the merged
//!   chords (spreads: of the per-run Y90, Cmean, n and d; beside them the runs' own
//!   standard errors of Cmean, which the Cmean spread should match), and the decay of the
//!   ensemble Cmean against the time since the front.
//!
//! Times: `since_front_s` is exact (`k` windows from the origin); `window_start_s` /
//! `slice_start_s` are the mean over the runs of each run's start (runs are released at
//! different times, so they differ).
//!
//! Output (`--out`): `windows.csv` (the columns of [`crate::shared::windows_csv::COLUMNS`], then
//! `runs` and the spreads), `profile.csv` (the columns of
//! [`crate::offline::transient::PROFILE_COLUMNS`], then `runs` and the spreads), `fronts.csv`
//! (mean arrival per probe over runs, spread, runs), `flow.json`.

use crate::offline::chord_files::ChordPool;
pub use crate::offline::ensemble_inputs::{capture_list, refuse_repeated_captures};
use crate::offline::replay::probe_meta;
use crate::offline::transient::{self, TransientRun, PROFILE_COLUMNS};
use crate::shared::error::{write_err, HostError};
use crate::shared::layout::Layout;
use crate::shared::output_set::{Committed, OutputSet};
use crate::shared::rig::{FullRecord, HostRecord, HOST_LAGS};
use crate::shared::window_spec::WindowSpec;
use crate::shared::windows_csv;
use frothline_core::decay::DecayTracker;
use frothline_core::profile::{fit_profile_sized, ProfileConfig, ProfilePoint};
use frothline_core::station::{ProfileRecord, MAX_DECAY_POINTS};
use frothline_core::{CorrelationSums, FrontRecord, TipStats, WindowPolicy};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Arguments of `frothline ensemble`.
#[derive(clap::Args, Debug, Clone)]
pub struct EnsembleArgs {
    /// The captures (WAV files), or folders: every `*.wav` in a folder, and the
    /// `capture.wav` of each of its sub-folders, in name order.
    #[arg(required = true)]
    pub captures: Vec<PathBuf>,
    /// The rig layout (TOML), shared by every run; must be a transient layout.
    #[arg(long, short)]
    pub layout: PathBuf,
    /// Folder for the output files (created if missing).
    #[arg(long, short)]
    pub out: PathBuf,
    /// Window length after the front (a duration such as `50ms`; `whole` means 50 ms).
    #[arg(long, short, default_value = "whole")]
    pub window: WindowSpec,
    /// No summary.
    #[arg(long, short)]
    pub quiet: bool,
}

/// Per-run values of one window, for the spreads.
#[derive(Debug, Clone, Default)]
struct Spread {
    void_fraction: Vec<f64>,
    count_rate_hz: Vec<f64>,
    velocity_m_s: Vec<f64>,
}

/// One probe's window `k`, accumulated over runs.
#[derive(Debug, Clone)]
struct WindowAcc {
    lead: TipStats,
    trail: Option<TipStats>,
    sums: Option<CorrelationSums<HOST_LAGS>>,
    starts_s: Vec<f64>,
    ends_s: Vec<f64>,
    /// Each run's time from the front to the window start, s (when the run knew it).
    since_s: Vec<f64>,
    flags: frothline_core::Flags,
    spread: Spread,
}

/// One station's slice `k`, accumulated over runs.
#[derive(Debug, Clone, Default)]
struct SliceAcc {
    starts_s: Vec<f64>,
    ends_s: Vec<f64>,
    y90: Vec<f64>,
    cmean: Vec<f64>,
    n: Vec<f64>,
    depth: Vec<f64>,
    /// Each run's standard error of its Cmean.
    cmean_se: Vec<f64>,
    partial: bool,
}

/// Repeated runs of one rig, combined (see the module docs).
#[derive(Debug, Clone)]
pub struct Ensemble {
    layout: Layout,
    sample_rate: u32,
    /// Window length after the front, frames.
    window_frames: u64,
    /// (probe, k) -> window.
    windows: BTreeMap<(usize, i64), WindowAcc>,
    /// (station, k) -> slice.
    slices: BTreeMap<(usize, i64), SliceAcc>,
    /// probe -> per-run arrival relative to the run's station arrival... and absolute.
    arrivals: BTreeMap<usize, Vec<f64>>,
    /// station -> per-run arrivals, s.
    station_arrivals: BTreeMap<usize, Vec<f64>>,
    /// Runs added.
    pub runs: usize,
    stations: Vec<transient::StationInfo>,
}

fn merge_tip(a: &mut TipStats, b: &TipStats) {
    a.frames += b.frames;
    a.air_frames += b.air_frames;
    a.rail_frames += b.rail_frames;
    a.unlearnt_frames += b.unlearnt_frames;
    a.bubbles = a.bubbles.saturating_add(b.bubbles);
    a.droplets = a.droplets.saturating_add(b.droplets);
    a.bubble_chords.merge(&b.bubble_chords);
    a.droplet_chords.merge(&b.droplet_chords);
    a.flags |= b.flags;
    if a.levels.is_none() {
        a.levels = b.levels;
    }
}

fn mean(v: &[f64]) -> Option<f64> {
    (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
}

/// Sample standard deviation (`None` below two values).
fn sd(v: &[f64]) -> Option<f64> {
    let m = mean(v)?;
    (v.len() >= 2)
        .then(|| (v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (v.len() - 1) as f64).sqrt())
}

/// Root mean square.
fn rms(v: &[f64]) -> Option<f64> {
    (!v.is_empty()).then(|| (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt())
}

/// A value computed from the core's f32 results, written with the digits of its f32
/// precision (0.283, not 0.28299999237060547 from the f32 widened to f64).
fn opt(v: Option<f64>) -> String {
    v.map(|v| (v as f32).to_string()).unwrap_or_default()
}

/// The ensemble value of one probe's window `k`.
#[derive(Debug, Clone)]
pub struct EnsembleWindow {
    /// Layout probe index.
    pub probe: usize,
    /// Window index after the origin (−1: the pre-front record).
    pub k: i64,
    /// Runs that had this window.
    pub runs: usize,
    /// Mean over the runs.
    pub void_fraction: Option<f64>,
    /// Total bubbles over total time, Hz.
    pub bubble_count_rate_hz: Option<f64>,
    /// From the merged correlation sums, m/s.
    pub velocity_m_s: Option<f64>,
    /// Spreads across runs.
    pub void_fraction_spread: Option<f64>,
    /// Spread of the per-run count rates, Hz.
    pub bubble_count_rate_spread_hz: Option<f64>,
    /// Spread of the per-run velocities, m/s.
    pub velocity_spread_m_s: Option<f64>,
    /// The per-run velocities, m/s (runs with a peak).
    pub run_velocities_m_s: Vec<f64>,
    /// The merged record (correlation from the merged sums).
    pub record: HostRecord,
    /// `since_front_s` of the window.
    pub since_front_s: f64,
}

/// The ensemble profile of one station's slice `k`.
#[derive(Debug, Clone)]
pub struct EnsembleSlice {
    /// Station index.
    pub station: usize,
    /// Slice index.
    pub k: i64,
    /// Runs that had this slice.
    pub runs: usize,
    /// The fit of the ensemble void fractions, as a profile record (its decay fit over the
    /// ensemble slices so far).
    pub record: ProfileRecord,
    /// Spreads across runs of Y90 (mm), Cmean and n.
    pub spread: (Option<f64>, Option<f64>, Option<f64>),
    /// Spread across runs of d, mm.
    pub depth_spread_mm: Option<f64>,
    /// The runs' own standard errors of Cmean, root mean square: what one run claims, to
    /// set beside the spread across runs (`spread.1`) it should match.
    pub run_void_fraction_se: Option<f64>,
    /// Mean slice start and end over the runs, s.
    pub start_s: f64,
    /// Mean slice end, s.
    pub end_s: f64,
}

impl Ensemble {
    /// An empty ensemble of runs of `layout` at `sample_rate` with front-relative windows of
    /// `policy` (must be [`WindowPolicy::AfterFront`]).
    pub fn new(layout: &Layout, sample_rate: u32, policy: WindowPolicy) -> Result<Self, String> {
        let WindowPolicy::AfterFront { frames } = policy else {
            return Err("ensembles need windows counted from the front (a duration)".into());
        };
        Ok(Ensemble {
            layout: layout.clone(),
            sample_rate,
            window_frames: frames as u64,
            windows: BTreeMap::new(),
            slices: BTreeMap::new(),
            arrivals: BTreeMap::new(),
            station_arrivals: BTreeMap::new(),
            runs: 0,
            stations: transient::stations(layout),
        })
    }

    fn secs(&self, frames: f64) -> f64 {
        frames / self.sample_rate.max(1) as f64
    }

    /// Window index of a record starting at `start` in a station with origin `origin`.
    fn index(&self, start: u64, origin: Option<u64>) -> i64 {
        match origin {
            Some(w) if start >= w => ((start - w) / self.window_frames.max(1)) as i64,
            _ => -1,
        }
    }

    /// Add one run: its transient replay and its full records (with correlation sums).
    pub fn add_run(&mut self, run: &TransientRun, full: &[FullRecord]) -> Result<(), String> {
        if run.sample_rate != self.sample_rate {
            return Err(format!(
                "run at {} Hz in an ensemble at {} Hz",
                run.sample_rate, self.sample_rate
            ));
        }
        if run.stations != self.stations {
            return Err("run of another rig (stations differ)".into());
        }
        let origin: Vec<Option<u64>> = (0..self.stations.len())
            .map(|s| run.station_front(s).and_then(|a| a.origin))
            .collect();
        let station_of = |probe: usize| {
            self.stations
                .iter()
                .position(|s| s.probes.contains(&probe))
                .unwrap_or(0)
        };
        let fs = self.sample_rate as f32;
        for r in full {
            let p = r.probe as usize;
            let s = station_of(p);
            let k = self.index(r.start, origin[s]);
            let spacing = self.layout.probes[p].tip_spacing_mm;
            let v = r
                .correlation
                .and_then(|c| c.velocity_m_s(spacing? as f32, fs))
                .map(|v| v as f64);
            let (start_s, end_s) = (self.secs(r.start as f64), self.secs(r.end as f64));
            let since_s = r.since_front.map(|f| self.secs(f as f64));
            let e = self.windows.entry((p, k)).or_insert_with(|| WindowAcc {
                lead: TipStats {
                    frames: 0,
                    air_frames: 0,
                    rail_frames: 0,
                    unlearnt_frames: 0,
                    bubbles: 0,
                    droplets: 0,
                    bubble_chords: Default::default(),
                    droplet_chords: Default::default(),
                    clusters: Default::default(),
                    levels: None,
                    flags: frothline_core::Flags::NONE,
                },
                trail: None,
                sums: None,
                starts_s: Vec::new(),
                ends_s: Vec::new(),
                since_s: Vec::new(),
                flags: frothline_core::Flags::NONE,
                spread: Spread::default(),
            });
            merge_tip(&mut e.lead, &r.lead);
            if let Some(t) = &r.trail {
                match &mut e.trail {
                    Some(a) => merge_tip(a, t),
                    None => e.trail = Some(t.clone()),
                }
            }
            if let Some(sums) = &r.correlation_sums {
                match &mut e.sums {
                    Some(a) => a.merge(sums),
                    None => e.sums = Some(sums.clone()),
                }
            }
            e.flags |= r.flags;
            e.starts_s.push(start_s);
            e.ends_s.push(end_s);
            e.since_s.extend(since_s);
            if let Some(c) = r.lead.void_fraction() {
                e.spread.void_fraction.push(c as f64);
            }
            if let Some(f) = r.lead.bubble_count_rate(fs) {
                e.spread.count_rate_hz.push(f as f64);
            }
            if let Some(v) = v {
                e.spread.velocity_m_s.push(v);
            }
        }
        for (s, p) in &run.profiles {
            let k = self.index(p.start, origin[*s]);
            let (a, b) = (self.secs(p.start as f64), self.secs(p.end as f64));
            let e = self.slices.entry((*s, k)).or_default();
            e.starts_s.push(a);
            e.ends_s.push(b);
            e.partial |= p.partial;
            if let Some(y) = p.fit.y90_mm {
                e.y90.push(y as f64);
            }
            if let Some(c) = p.fit.mean_void_fraction {
                e.cmean.push(c as f64);
            }
            if let Some(pl) = p.fit.power_law {
                e.n.push(pl.exponent as f64);
            }
            if let Some(d) = p.fit.equivalent_depth_mm {
                e.depth.push(d as f64);
            }
            if let Some(se) = p.fit.errors.mean_void_fraction {
                e.cmean_se.push(se as f64);
            }
        }
        for f in &run.fronts {
            match &f.record {
                FrontRecord::Probe(p) => {
                    let t = self.secs(p.arrival as f64);
                    self.arrivals.entry(p.probe as usize).or_default().push(t)
                }
                FrontRecord::Station(a) => {
                    if let Some(t) = a.front.arrival {
                        let t = self.secs(t as f64);
                        self.station_arrivals.entry(f.station).or_default().push(t);
                    }
                }
            }
        }
        self.runs += 1;
        Ok(())
    }

    /// The ensemble windows, by probe then window index.
    pub fn windows(&self) -> Vec<EnsembleWindow> {
        let fs = self.sample_rate as f32;
        let min_peak = frothline_core::DetectorConfig::default().min_peak_coefficient;
        self.windows
            .iter()
            .map(|(&(probe, k), w)| {
                let (correlation, cflags) = match &w.sums {
                    Some(s) => {
                        let (r, f) = s.analyse(min_peak);
                        (Some(r), f)
                    }
                    None => (None, frothline_core::Flags::NONE),
                };
                // The merged correlation's own flags replace the runs' correlation flags.
                let corr_bits = frothline_core::Flags(
                    frothline_core::Flags::NO_CORRELATION_PEAK.0
                        | frothline_core::Flags::PEAK_AT_LAG_BOUNDARY.0
                        | frothline_core::Flags::TU_UNDEFINED.0,
                );
                let mut flags = frothline_core::Flags(w.flags.0 & !corr_bits.0);
                flags |= cflags;
                let spacing = self.layout.probes[probe].tip_spacing_mm;
                let velocity = correlation
                    .and_then(|c| c.velocity_m_s(spacing? as f32, fs))
                    .map(|v| v as f64);
                let start = mean(&w.starts_s).unwrap_or(0.0);
                let end = mean(&w.ends_s).unwrap_or(start);
                let runs = w.starts_s.len();
                // Windows from the front are `k` windows after it, exactly; the record
                // before the front runs from the start of each run's capture, so its time
                // since the front is the runs' mean, as each run's replay writes it.
                let since = match (k < 0, mean(&w.since_s)) {
                    (true, Some(m)) => m,
                    _ => k as f64 * self.secs(self.window_frames as f64),
                };
                let record = HostRecord {
                    probe: probe as u8,
                    start: (start * self.sample_rate as f64).round() as u64,
                    end: (end * self.sample_rate as f64).round() as u64,
                    since_front: None,
                    lead: w.lead.clone(),
                    trail: w.trail.clone(),
                    flags,
                    correlation,
                    correlation_sums: None,
                };
                EnsembleWindow {
                    probe,
                    k,
                    runs,
                    void_fraction: mean(&w.spread.void_fraction),
                    bubble_count_rate_hz: w.lead.bubble_count_rate(fs).map(|f| f as f64),
                    velocity_m_s: velocity,
                    void_fraction_spread: sd(&w.spread.void_fraction),
                    bubble_count_rate_spread_hz: sd(&w.spread.count_rate_hz),
                    velocity_spread_m_s: sd(&w.spread.velocity_m_s),
                    run_velocities_m_s: w.spread.velocity_m_s.clone(),
                    record,
                    since_front_s: since,
                }
            })
            .collect()
    }

    /// The ensemble profile slices, by station then slice index, with the decay of the
    /// ensemble Cmean fitted over the slices so far.
    pub fn slices(&self) -> Vec<EnsembleSlice> {
        let ens = self.windows();
        let mut out = Vec::new();
        let cfg = ProfileConfig::default();
        let mut decay: BTreeMap<usize, DecayTracker<MAX_DECAY_POINTS>> = BTreeMap::new();
        let ref_depth = self
            .layout
            .flow
            .reference_depth_m
            .map_or(f32::NAN, |d| d as f32);
        let wsec = self.secs(self.window_frames as f64);
        for (&(s, k), acc) in &self.slices {
            if k < 0 {
                continue;
            }
            let info = &self.stations[s];
            let mut points = Vec::new();
            let mut used = 0u32;
            for (local, &p) in info.probes.iter().enumerate() {
                let Some(w) = ens.iter().find(|w| w.probe == p && w.k == k) else {
                    continue;
                };
                let learnt = !w
                    .record
                    .flags
                    .contains(frothline_core::Flags::LEVELS_NOT_LEARNT);
                if let (Some(c), true) = (w.void_fraction, learnt) {
                    // The standard error of the pooled runs' void fraction: the renewal
                    // variance of the merged chords (all runs' cycles).
                    let sigma = w.record.lead.void_fraction_sigma().unwrap_or(0.0);
                    points.push(ProfilePoint::with_sigma(
                        self.layout.probes[p].elevation_mm as f32,
                        c as f32,
                        sigma,
                    ));
                    used |= 1 << local;
                }
            }
            let fit = fit_profile_sized::<32>(&points, &cfg);
            let tracker = decay.entry(s).or_default();
            if let (false, Some(c)) = (acc.partial, fit.mean_void_fraction) {
                let _ = tracker.push(((k as f64 + 0.5) * wsec) as f32, c);
            }
            let start_s = mean(&acc.starts_s).unwrap_or(0.0);
            let end_s = mean(&acc.ends_s).unwrap_or(start_s);
            let fs = self.sample_rate as f64;
            let record = ProfileRecord {
                slice: k as u32,
                start: (start_s * fs).round() as u64,
                end: (end_s * fs).round() as u64,
                since_front: (k as f64 * self.window_frames as f64) as i64,
                fit,
                used,
                dead: 0,
                unlearnt: 0,
                partial: acc.partial,
                decay_points: tracker.len() as u16,
                decay: Some(tracker.fit(ref_depth)),
            };
            out.push(EnsembleSlice {
                station: s,
                k,
                runs: acc.starts_s.len(),
                record,
                spread: (sd(&acc.y90), sd(&acc.cmean), sd(&acc.n)),
                depth_spread_mm: sd(&acc.depth),
                run_void_fraction_se: rms(&acc.cmean_se),
                start_s,
                end_s,
            });
        }
        out
    }

    /// Mean arrival of each probe over the runs, with spread and runs: (probe, mean, sd, n).
    pub fn arrivals(&self) -> Vec<(usize, f64, Option<f64>, usize)> {
        self.arrivals
            .iter()
            .filter_map(|(&p, v)| Some((p, mean(v)?, sd(v), v.len())))
            .collect()
    }

    /// Write windows.csv, profile.csv, fronts.csv, flow.json and the pooled chords
    /// (chords.csv, chord_lengths.csv: every run's chords) into `dir` as one set
    /// ([`OutputSet`]: all of them and a `run.json` manifest, or the folder as it was);
    /// `inputs` (role, path) are recorded in the manifest.
    pub fn write(
        &self,
        dir: &Path,
        description: &str,
        inputs: &[(&str, &Path)],
    ) -> Result<Committed, HostError> {
        let set = OutputSet::begin(dir)?;
        let meta = probe_meta(&self.layout);
        let mut header: Vec<&str> = windows_csv::COLUMNS.to_vec();
        header.extend([
            "runs",
            "void_fraction_spread",
            "bubble_count_rate_spread_hz",
            "interfacial_velocity_spread_m_s",
        ]);
        let windows = self.windows();
        let mut chords = ChordPool::new(self.layout.probes.len());
        for w in &windows {
            let spacing = self
                .layout
                .probes
                .get(w.probe)
                .and_then(|p| p.tip_spacing_mm);
            chords.add(&w.record, self.sample_rate, spacing);
        }
        let rows: Vec<Vec<String>> = windows
            .iter()
            .map(|w| {
                let p = w.probe;
                let mut row = windows_csv::row(
                    &w.record,
                    &meta[p],
                    self.sample_rate,
                    Some(w.since_front_s),
                    self.layout.probes[p].tip_spacing_mm,
                );
                // Void fraction: the mean over the runs.
                if let Some(cell) = row.get_mut(4) {
                    *cell = opt(w.void_fraction);
                }
                row.extend([
                    w.runs.to_string(),
                    opt(w.void_fraction_spread),
                    opt(w.bubble_count_rate_spread_hz),
                    opt(w.velocity_spread_m_s),
                ]);
                row
            })
            .collect();
        set.write_csv("windows.csv", &header, &rows)?;

        let mut header: Vec<&str> = PROFILE_COLUMNS.to_vec();
        header.extend([
            "runs",
            "y90_spread_mm",
            "void_fraction_spread",
            "exponent_spread",
            "equivalent_depth_spread_mm",
            "run_void_fraction_se",
        ]);
        let fake = TransientRun {
            layout: self.layout.clone(),
            sample_rate: self.sample_rate,
            frames: 0,
            stations: self.stations.clone(),
            windows: Vec::new(),
            profiles: Vec::new(),
            slice_discharges: Vec::new(),
            fronts: Vec::new(),
            policy: WindowPolicy::AfterFront {
                frames: self.window_frames as u32,
            },
            delay_frames: Vec::new(),
            levels_from: Vec::new(),
        };
        let rows: Vec<Vec<String>> = self
            .slices()
            .iter()
            .map(|s| {
                let mut row = fake.profile_row(s.station, &s.record);
                row[1] = s.start_s.to_string();
                row[2] = s.end_s.to_string();
                row.extend([
                    s.runs.to_string(),
                    opt(s.spread.0),
                    opt(s.spread.1),
                    opt(s.spread.2),
                    opt(s.depth_spread_mm),
                    opt(s.run_void_fraction_se),
                ]);
                row
            })
            .collect();
        set.write_csv("profile.csv", &header, &rows)?;

        let rows: Vec<Vec<String>> = self
            .stations
            .iter()
            .enumerate()
            .flat_map(|(s, info)| {
                let st = self.station_arrivals.get(&s).cloned().unwrap_or_default();
                info.probes
                    .iter()
                    .map(|&p| {
                        let a = self.arrivals.get(&p).cloned().unwrap_or_default();
                        vec![
                            self.layout.probes[p].name.clone(),
                            info.name.clone(),
                            opt(mean(&a)),
                            opt(mean(&st)),
                            opt(sd(&a)),
                            a.len().to_string(),
                        ]
                    })
                    .collect::<Vec<_>>()
            })
            .collect();
        set.write_csv(
            "fronts.csv",
            &[
                "probe",
                "station",
                "arrival_s",
                "station_arrival_s",
                "arrival_spread_s",
                "runs",
            ],
            &rows,
        )?;
        let flow = transient::flow_indicators(&fake);
        let path = set.staged("flow.json");
        std::fs::write(&path, flow.to_json(description)).map_err(write_err(&path))?;
        let mut names = vec!["windows.csv", "profile.csv", "fronts.csv", "flow.json"];
        names.extend(chords.write(&set, &self.layout, self.sample_rate)?);
        set.commit(&names, inputs)
    }
}

/// What `frothline ensemble` did.
#[derive(Debug)]
pub struct EnsembleReport {
    /// The captures, in order.
    pub captures: Vec<PathBuf>,
    /// The combined runs.
    pub ensemble: Ensemble,
    /// What writing the output set replaced, and the run's id.
    pub committed: Committed,
}

/// `frothline ensemble`: replay every capture, combine, write the files.
pub fn run(args: &EnsembleArgs) -> Result<EnsembleReport, HostError> {
    let captures = capture_list(&args.captures)?;
    refuse_repeated_captures(&captures)?;
    let layout = Layout::load(&args.layout)?;
    if !transient::is_transient(&layout) {
        return Err(HostError::Usage(format!(
            "{}: ensembles align runs on the front: the layout must be transient",
            args.layout.display()
        )));
    }
    let mut ensemble: Option<Ensemble> = None;
    for c in &captures {
        let mut full = Vec::new();
        let mut keep = |r: &FullRecord| full.push(r.clone());
        let run = transient::replay_capture(
            c,
            &args.layout,
            &args.window,
            crate::offline::record_levels::LevelRule::Record,
            Some(&mut keep),
        )?;
        let e = match &mut ensemble {
            Some(e) => e,
            None => ensemble.insert(
                Ensemble::new(&layout, run.sample_rate, run.policy).map_err(HostError::Usage)?,
            ),
        };
        e.add_run(&run, &full)
            .map_err(|m| HostError::Usage(format!("{}: {m}", c.display())))?;
    }
    let ensemble = ensemble.ok_or_else(|| HostError::Usage("ensemble: no run".into()))?;
    // Manifest inputs: the layout, then "capture 1", "capture 2", ... in replay order.
    let roles: Vec<String> = (1..=captures.len())
        .map(|i| format!("capture {i}"))
        .collect();
    let mut inputs: Vec<(&str, &Path)> = vec![("layout", args.layout.as_path())];
    inputs.extend(
        roles
            .iter()
            .map(String::as_str)
            .zip(captures.iter().map(|c| c.as_path())),
    );
    let committed = ensemble.write(
        &args.out,
        &format!(
            "ensemble of {} runs ({})",
            captures.len(),
            args.layout.display()
        ),
        &inputs,
    )?;

    if !args.quiet {
        println!(
            "{} runs -> {} windows, {} profile slices in {}",
            ensemble.runs,
            ensemble.windows.len(),
            ensemble.slices.len(),
            args.out.display()
        );
        if let Some(note) = committed.note() {
            println!("{note}");
        }
    }
    Ok(EnsembleReport {
        captures,
        ensemble,
        committed,
    })
}
