//! `frothline replay` of a transient layout (`flow.kind = "transient"`): surge fronts.
//!
//! One core chain per station (probes with equal `x_mm`, [`Layout::stations`]), each with a
//! [`StationConfig`]: the front detectors see the samples as they come, the statistics run
//! a delay line behind them so that the first window starts exactly at the station's front
//! arrival (see `frothline_core::station`). Every chain is fed the same blocks of the
//! capture. Windows are front-relative ([`WindowPolicy::AfterFront`]): `--window 20ms`
//! gives 20 ms windows from the arrival, the default (`whole`) 50 ms ones (a whole-record
//! average across a surge mixes dry tips, the roller and the flow behind it); `bubbles:N`
//! windows count from the front too (the station chain's front-relative bubble windows).
//!
//! Output, in the `--out` folder:
//! - `windows.csv` ([`crate::shared::windows_csv`]) with `since_front_s` filled in;
//! - `profile.csv`: one row per station per slice ([`PROFILE_COLUMNS`]);
//! - `fronts.csv`: one row per probe ([`FRONT_COLUMNS`]);
//! - `stations.csv`: one row per station, with the front celerity from the previous
//!   station ([`STATION_COLUMNS`]);
//! - `flow.json`: water properties at the layout's temperature, the front's reference
//!   velocity and Reynolds number, and the scale-effect caution (the format
//!   `crate::report::indicators` reads).

use crate::offline::level_drift;
use crate::offline::record_levels::{self, LevelRule};
use crate::offline::replay::LevelSchedule;
pub use crate::shared::stations::{
    is_transient, station_configs, stations, transient_policy, StationChain, StationInfo,
    DEFAULT_SLICE_S, RING_SAMPLES,
};
pub use crate::shared::transient_columns::{FRONT_COLUMNS, PROFILE_COLUMNS, STATION_COLUMNS};

use crate::offline::replay_common::{self as common, ReplayArgs, ReplayReport};
use crate::shared::capture::Capture;
use crate::shared::error::{write_err, HostError};
use crate::shared::hydraulics;
use crate::shared::layout::Layout;
use crate::shared::output_set::{Committed, OutputSet};
use crate::shared::rig::{Counts, FullRecord, HostRecord, MAX_PROBES};
use crate::shared::window_spec::WindowSpec;
use crate::shared::windows_csv::WindowsCsv;
use frothline_core::front::FrontRule;
use frothline_core::profile::ProfileModel;
use frothline_core::station::StationArrival;
use frothline_core::{ChainConfig, ConfigError, FrontRecord, ProfileRecord, WindowPolicy};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Flag of stations.csv (and the summary) for a station the front reached before the one
/// upstream of it.
pub const REVERSED_ARRIVAL: &str = "arrived_before_upstream_station";

/// Frames read from the capture per block.
const BLOCK_FRAMES: usize = 1 << 14;

/// Stack for the thread that runs the station chains (they are large values, and debug
/// builds copy them on construction).
const WORKER_STACK: usize = 64 << 20;

/// A front record with the probe index mapped to the layout's.
#[derive(Debug, Clone, PartialEq)]
pub struct StationFront {
    /// Index into [`TransientRun::stations`].
    pub station: usize,
    /// The record (a probe record's `probe` is the layout index; a station record's masks
    /// are over [`StationInfo::probes`]).
    pub record: FrontRecord,
}

/// Everything a transient replay produced, in memory.
#[derive(Debug, Clone)]
pub struct TransientRun {
    /// The layout.
    pub layout: Layout,
    /// Frames per second.
    pub sample_rate: u32,
    /// Frames read.
    pub frames: u64,
    /// The stations.
    pub stations: Vec<StationInfo>,
    /// Window records (`probe` = layout index, without their raw correlation sums), by
    /// window start, then probe.
    pub windows: Vec<HostRecord>,
    /// Profile records: (station index, record), per station in time order.
    pub profiles: Vec<(usize, ProfileRecord)>,
    /// Front records.
    pub fronts: Vec<StationFront>,
    /// The window policy used.
    pub policy: WindowPolicy,
    /// Delay of each station chain, frames.
    pub delay_frames: Vec<u32>,
    /// Where each layout probe's leading-tip levels came from (`windows.csv`
    /// `levels_from`; empty when not known).
    pub levels_from: Vec<Option<&'static str>>,
}

struct Running {
    info: StationInfo,
    chain: Box<StationChain>,
}

/// What the drivers collect.
struct Sinks<'a> {
    windows: Vec<HostRecord>,
    profiles: Vec<(usize, ProfileRecord)>,
    fronts: Vec<StationFront>,
    /// Sees every full record (with its correlation sums) before it is reduced.
    full: Option<&'a mut (dyn FnMut(&FullRecord) + Send)>,
}

fn drain(idx: usize, r: &mut Running, out: &mut Sinks<'_>) {
    let Sinks {
        windows,
        profiles,
        fronts,
        full,
    } = out;
    while let Some(mut w) = r.chain.poll() {
        w.probe = r.info.probes[w.probe as usize] as u8;
        if let Some(f) = full.as_mut() {
            f(&w);
        }
        windows.push(w.without_sums());
    }
    while let Some(p) = r.chain.poll_profile() {
        profiles.push((idx, p));
    }
    while let Some(mut f) = r.chain.poll_front() {
        if let FrontRecord::Probe(p) = &mut f {
            p.probe = r.info.probes[p.probe as usize] as u8;
        }
        fronts.push(StationFront {
            station: idx,
            record: f,
        });
    }
}

/// Run the station chains of `layout` over the blocks `next_block` hands out (interleaved
/// frames; an empty block ends the record). Each block is pushed to every chain in pieces
/// of `sizes` samples (cycled; `&[]` for whole blocks), as a device-like stream would.
/// `configs` come from [`station_configs`]; `full` sees every record with its correlation
/// sums (for ensembles) before the run keeps it without them. With a `schedule`
/// ([`level_drift`]), the statistics take each segment's levels at its first frame.
pub fn run_blocks(
    layout: &Layout,
    configs: Vec<(StationInfo, ChainConfig<MAX_PROBES>)>,
    sample_rate: u32,
    sizes: &[usize],
    schedule: Option<&LevelSchedule>,
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
    mut next_block: impl FnMut(&mut Vec<i16>) -> Result<usize, HostError>,
) -> Result<TransientRun, ConfigErrorOrHost> {
    let policy = configs
        .first()
        .map_or(WindowPolicy::Whole, |(_, c)| c.window);
    let mut running = Vec::new();
    let mut delay_frames = Vec::new();
    for (info, cfg) in configs {
        delay_frames.push(cfg.station.as_ref().map_or(0, |s| s.delay_frames));
        let chain =
            Box::new(StationChain::with_delay_ring(cfg).map_err(ConfigErrorOrHost::Config)?);
        running.push(Running { info, chain });
    }
    let mut out = Sinks {
        windows: Vec::new(),
        profiles: Vec::new(),
        fronts: Vec::new(),
        full,
    };
    let mut buf = Vec::new();
    let mut frames = 0u64;
    let mut k = 0usize;
    loop {
        let n = next_block(&mut buf).map_err(ConfigErrorOrHost::Host)?;
        if n == 0 {
            break;
        }
        frames += n as u64;
        let mut next_k = k;
        for (idx, r) in running.iter_mut().enumerate() {
            let mut rest = &buf[..];
            let mut kk = k;
            while !rest.is_empty() {
                let take = match sizes.get(kk % sizes.len().max(1)) {
                    Some(&s) => s.max(1).min(rest.len()),
                    None => rest.len(),
                };
                kk += 1;
                let mut piece = &rest[..take];
                while !piece.is_empty() {
                    let part = match schedule {
                        Some(s) => {
                            let room = level_drift::apply_due(&mut r.chain, s, &r.info.probes);
                            &piece[..room.min(piece.len())]
                        }
                        None => piece,
                    };
                    let used = r.chain.push(part);
                    piece = &piece[used..];
                    drain(idx, r, &mut out);
                }
                rest = &rest[take..];
            }
            next_k = kk;
        }
        k = next_k;
    }
    for (idx, r) in running.iter_mut().enumerate() {
        while r.chain.finish().is_err() {
            drain(idx, r, &mut out);
        }
        drain(idx, r, &mut out);
    }
    let Sinks {
        mut windows,
        profiles,
        fronts,
        ..
    } = out;
    windows.sort_by_key(|w| (w.start, w.probe));
    Ok(TransientRun {
        layout: layout.clone(),
        sample_rate,
        frames,
        stations: running.into_iter().map(|r| r.info).collect(),
        windows,
        profiles,
        fronts,
        policy,
        delay_frames,
        levels_from: Vec::new(),
    })
}

/// A configuration error of the core, or a host error (reading the capture).
#[derive(Debug)]
pub enum ConfigErrorOrHost {
    /// The core refused a station chain.
    Config(ConfigError),
    /// Reading failed.
    Host(HostError),
}

impl ConfigErrorOrHost {
    fn into_host(self, layout: &Path) -> HostError {
        match self {
            ConfigErrorOrHost::Config(source) => HostError::Config {
                file: layout.to_path_buf(),
                source,
            },
            ConfigErrorOrHost::Host(e) => e,
        }
    }
}

/// A transient replay of in-memory interleaved counts (`samples`, `channels` wide), pushed
/// in pieces of `sizes` samples (cycled; `&[]`: whole blocks).
pub fn replay_samples(
    layout: &Layout,
    samples: &[i16],
    channels: usize,
    sample_rate: u32,
    window: &WindowSpec,
    sizes: &[usize],
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
) -> Result<TransientRun, HostError> {
    let policy = transient_policy(window, sample_rate, layout).map_err(HostError::Usage)?;
    let configs =
        station_configs(layout, channels, sample_rate, policy, &Counts).map_err(|source| {
            HostError::Config {
                file: PathBuf::from("layout"),
                source,
            }
        })?;
    let mut at = 0usize;
    let block = BLOCK_FRAMES * channels.max(1);
    with_big_stack(|| {
        run_blocks(layout, configs, sample_rate, sizes, None, full, |buf| {
            let end = (at + block).min(samples.len());
            buf.clear();
            buf.extend_from_slice(&samples[at..end]);
            let n = (end - at) / channels.max(1);
            at = end;
            Ok(n)
        })
        .map_err(|e| e.into_host(Path::new("layout")))
    })
}

/// A transient replay of a capture file.
/// `rule` says how tips without fixed levels get them (see [`crate::offline::record_levels`]).
pub fn replay_capture(
    capture: &Path,
    layout_path: &Path,
    window: &WindowSpec,
    rule: LevelRule,
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
) -> Result<TransientRun, HostError> {
    replay_capture_to_cut(capture, layout_path, window, rule, full).map(|(run, _)| run)
}

/// Like [`replay_capture`], reading a capture that stopped abruptly up to where it stops:
/// the windows reaching its last frame are flagged `capture_cut`, and the open capture is
/// handed back for its warning ([`Capture::abrupt_end_warning`]).
pub fn replay_capture_to_cut(
    capture: &Path,
    layout_path: &Path,
    window: &WindowSpec,
    rule: LevelRule,
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
) -> Result<(TransientRun, Capture), HostError> {
    let layout = Layout::load(layout_path)?;
    let mut cap = Capture::open(capture)?;
    crate::shared::rig::require_frames(&cap)?;
    cap.end_at_cut();
    layout.check_channels(cap.channels(), layout_path)?;
    crate::shared::rig::check_levels_fit(&layout, &cap, layout_path)?;
    let mut run = replay_open(&mut cap, &layout, layout_path, window, rule, full)?;
    let (abrupt, last) = (cap.ends_abruptly(), cap.position());
    for w in &mut run.windows {
        common::mark_cut(w, abrupt, last);
    }
    Ok((run, cap))
}

fn replay_open(
    cap: &mut Capture,
    layout: &Layout,
    layout_path: &Path,
    window: &WindowSpec,
    rule: LevelRule,
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
) -> Result<TransientRun, HostError> {
    if let Some(st) = stations(layout)
        .iter()
        .find(|s| s.probes.len() > MAX_PROBES)
    {
        return Err(HostError::Usage(format!(
            "{}: station {} has {} probes, the host handles at most {MAX_PROBES} per station",
            layout_path.display(),
            st.name,
            st.probes.len()
        )));
    }
    let fs = cap.sample_rate();
    let channels = cap.channels();
    let policy = transient_policy(window, fs, layout).map_err(HostError::Usage)?;
    let mut configs = station_configs(layout, channels, fs, policy, &*cap).map_err(|source| {
        HostError::Config {
            file: layout_path.to_path_buf(),
            source,
        }
    })?;
    let mut learnt = None;
    if rule == LevelRule::Record {
        let mut tips = Vec::new();
        let mut min_swing = 64;
        for (st, cfg) in &configs {
            tips.extend(record_levels::learning_tips(cfg, |i| st.probes[i]));
            min_swing = cfg.detector.min_swing;
        }
        let l = record_levels::learn_with(cap.path(), &tips, min_swing, true)?;
        common::report_unlearnt(&l, layout, min_swing);
        for (_, cfg) in configs.iter_mut() {
            l.apply(cfg);
        }
        learnt = Some(l);
    }
    for (_, cfg) in &configs {
        common::period_rule(
            crate::shared::rig::check_learn_period(cfg, layout, fs, layout_path),
            rule,
        )?;
    }
    let schedule = learnt.as_ref().and_then(level_drift::transient_schedule);
    let mut run = with_big_stack(|| {
        run_blocks(layout, configs, fs, &[], schedule.as_ref(), full, |buf| {
            Ok(cap.read_frames(buf, BLOCK_FRAMES)?)
        })
        .map_err(|e| e.into_host(layout_path))
    })?;
    run.levels_from = common::levels_sources(layout, learnt.as_ref());
    Ok(run)
}

/// Run `f` on a thread with a large stack (the station chains are large values).
fn with_big_stack<T: Send>(f: impl FnOnce() -> T + Send) -> T {
    std::thread::scope(|s| {
        match std::thread::Builder::new()
            .stack_size(WORKER_STACK)
            .spawn_scoped(s, f)
        {
            Ok(h) => match h.join() {
                Ok(v) => v,
                Err(p) => std::panic::resume_unwind(p),
            },
            Err(e) => panic!("cannot start the replay thread: {e}"),
        }
    })
}

fn opt<T: std::fmt::Display>(v: Option<T>) -> String {
    v.map(|v| v.to_string()).unwrap_or_default()
}

impl TransientRun {
    /// Seconds of `frames`.
    pub fn secs(&self, frames: f64) -> f64 {
        frames / self.sample_rate.max(1) as f64
    }

    /// The station record of station `s`.
    pub fn station_front(&self, s: usize) -> Option<&StationArrival> {
        self.fronts.iter().find_map(|f| match &f.record {
            FrontRecord::Station(a) if f.station == s => Some(a),
            _ => None,
        })
    }

    /// The station's arrival, s.
    pub fn arrival_s(&self, s: usize) -> Option<f64> {
        self.station_front(s)
            .and_then(|a| a.front.arrival)
            .map(|f| self.secs(f as f64))
    }

    /// Front celerity between consecutive stations, m/s: `(x_s − x_{s−1}) / (t_s −
    /// t_{s−1})`; `None` for the first station or a missing arrival.
    pub fn celerity_from_previous(&self, s: usize) -> Option<f64> {
        let prev = s.checked_sub(1)?;
        let (a, b) = (
            self.station_front(prev)?.front.arrival?,
            self.station_front(s)?.front.arrival?,
        );
        frothline_core::front::front_celerity_frames(
            self.stations[prev].x_mm as f32,
            a,
            self.stations[s].x_mm as f32,
            b,
            self.sample_rate as f32,
        )
        .map(|v| v as f64)
    }

    /// True when the front reached station `s` before the station upstream of it (a
    /// negative celerity): stations listed in the wrong order, or probes swapped.
    pub fn arrived_before_previous(&self, s: usize) -> bool {
        self.celerity_from_previous(s).is_some_and(|c| c < 0.0)
    }

    /// The front celerity over the whole array (first to last station with an arrival).
    pub fn celerity(&self) -> Option<f64> {
        let with: Vec<(usize, u64)> = (0..self.stations.len())
            .filter_map(|s| Some((s, self.station_front(s)?.front.arrival?)))
            .collect();
        let (&(s0, a0), &(s1, a1)) = (with.first()?, with.last()?);
        if s0 == s1 {
            return None;
        }
        frothline_core::front::front_celerity_frames(
            self.stations[s0].x_mm as f32,
            a0,
            self.stations[s1].x_mm as f32,
            a1,
            self.sample_rate as f32,
        )
        .map(|v| v as f64)
    }

    /// One `profile.csv` row.
    pub fn profile_row(&self, s: usize, p: &ProfileRecord) -> Vec<String> {
        let f = &p.fit;
        let pl = f.power_law;
        let ex = f.exponential;
        let model = f.better_model.map(ProfileModel::name);
        let tr = f.trapezoid;
        let flags: Vec<&str> = f.flags.names().collect();
        let info = &self.stations[s];
        let names = |mask: u32| -> Vec<String> {
            info.probes
                .iter()
                .enumerate()
                .filter(|(i, _)| mask & (1 << i) != 0)
                .map(|(_, &g)| self.layout.probes[g].name.clone())
                .collect()
        };
        let mut left_out: Vec<String> = names(p.dead)
            .into_iter()
            .map(|n| format!("{n}:dead"))
            .collect();
        left_out.extend(names(p.unlearnt).into_iter().map(|n| format!("{n}:levels")));
        let model_d = p.decay.and_then(|d| d.model);
        let decay_flags: Vec<&str> = p
            .decay
            .map(|d| d.flags.names().collect())
            .unwrap_or_default();
        vec![
            info.name.clone(),
            self.secs(p.start as f64).to_string(),
            self.secs(p.end as f64).to_string(),
            self.secs(p.since_front as f64).to_string(),
            opt(f.y90_mm),
            opt(f.mean_void_fraction),
            opt(f.equivalent_depth_mm),
            opt(pl.map(|x| x.exponent)),
            opt(pl.map(|x| x.rmse)),
            f.points_used.to_string(),
            p.slice.to_string(),
            p.partial.to_string(),
            opt(pl.map(|x| x.mean_void_fraction)),
            opt(pl.map(|x| x.mean_diffusivity)),
            opt(ex.map(|x| x.diffusivity)),
            opt(ex.map(|x| x.rmse)),
            opt(ex.map(|x| x.mean_void_fraction)),
            opt(model),
            flags.join("|"),
            left_out.join("|"),
            opt(model_d.map(|m| m.initial)),
            opt(model_d.map(|m| m.final_level)),
            opt(model_d.map(|m| m.tau_s)),
            opt(model_d.and_then(|m| m.tau_star)),
            opt(model_d.map(|m| m.rmse)),
            p.decay_points.to_string(),
            decay_flags.join("|"),
            opt(f.estimate.map(ProfileModel::name)),
            opt(f.errors.y90_mm),
            opt(f.errors.mean_void_fraction),
            opt(f.errors.shape),
            opt(f.errors.equivalent_depth_mm),
            opt(tr.map(|t| t.y90_mm)),
            opt(tr.map(|t| t.mean_void_fraction)),
            opt(tr.map(|t| t.equivalent_depth_mm)),
            opt(tr.and_then(|t| t.errors.mean_void_fraction)),
            opt(pl.map(|x| x.y90_mm)),
            opt(pl.map(|x| x.chi2)),
            opt(ex.map(|x| x.y90_mm)),
            opt(ex.map(|x| x.chi2)),
            opt(ex.and_then(|x| x.errors.shape)),
            if pl.is_some() {
                f.dof.to_string()
            } else {
                String::new()
            },
        ]
    }

    /// `fronts.csv` rows: one per probe of the layout (station order, bottom up).
    pub fn front_rows(&self) -> Vec<Vec<String>> {
        let mut rows = Vec::new();
        for (s, info) in self.stations.iter().enumerate() {
            let st = self.station_front(s);
            let st_arrival = st.and_then(|a| a.front.arrival);
            for (local, &g) in info.probes.iter().enumerate() {
                let bit = 1u32 << local;
                let rec = self.fronts.iter().find_map(|f| match &f.record {
                    FrontRecord::Probe(p) if p.probe as usize == g => Some(*p),
                    _ => None,
                });
                let mut flags = Vec::new();
                if let Some(a) = st {
                    if a.front.first_probe == Some(local as u8) {
                        flags.push("first");
                    }
                    if a.dead & bit != 0 {
                        flags.push("dead");
                    } else if a.front.silent & bit != 0 {
                        flags.push("silent");
                    }
                    if a.front.unconfirmed & bit != 0 {
                        flags.push("unconfirmed");
                    }
                }
                if rec.is_some_and(|r| r.late) {
                    flags.push("late");
                }
                // The probe's arrival is its first contact with the front; the confirmed
                // arrival (the onset of the sustained change) follows at the end.
                rows.push(vec![
                    self.layout.probes[g].name.clone(),
                    info.name.clone(),
                    opt(rec.map(|r| self.secs(r.first_contact as f64))),
                    opt(st_arrival.map(|a| self.secs(a as f64))),
                    opt(rec
                        .zip(st_arrival)
                        .map(|(r, a)| self.secs(r.first_contact as f64 - a as f64))),
                    opt(rec.map(|r| self.secs(r.confirmed_at as f64))),
                    opt(rec.map(|r| match r.rule {
                        FrontRule::Hold => "hold",
                        FrontRule::Burst => "burst",
                    })),
                    opt(rec.map(|r| r.false_starts)),
                    self.layout.probes[g].elevation_mm.to_string(),
                    flags.join("|"),
                    opt(rec.map(|r| self.secs(r.arrival as f64))),
                    opt(rec.map(|r| self.secs(r.first_contact as f64))),
                ]);
            }
        }
        rows
    }

    /// `stations.csv` rows.
    pub fn station_rows(&self) -> Vec<Vec<String>> {
        self.stations
            .iter()
            .enumerate()
            .map(|(s, info)| {
                let st = self.station_front(s);
                let mut flags: Vec<&str> = st
                    .map(|a| a.front.flags.names().collect())
                    .unwrap_or_default();
                if self.arrived_before_previous(s) {
                    flags.push(REVERSED_ARRIVAL);
                }
                vec![
                    info.name.clone(),
                    info.x_mm.to_string(),
                    opt(self.arrival_s(s)),
                    opt(st.and_then(|a| a.origin).map(|o| self.secs(o as f64))),
                    opt(st
                        .and_then(|a| a.front.first_probe)
                        .and_then(|l| info.probes.get(l as usize))
                        .map(|&g| self.layout.probes[g].name.clone())),
                    info.probes.len().to_string(),
                    opt(st.map(|a| a.front.arrived.count_ones())),
                    opt(self.celerity_from_previous(s)),
                    flags.join("|"),
                ]
            })
            .collect()
    }
}

/// Flow indicators of a transient run (DESIGN.md §1: compare runs by their Reynolds number).
#[derive(Debug, Clone, PartialEq)]
pub struct FlowIndicators {
    /// Water temperature, °C.
    pub water_temperature_c: f64,
    /// Density, kg/m³ (Kell 1975).
    pub density_kg_m3: Option<f64>,
    /// Dynamic viscosity, Pa s (Kestin et al. 1978).
    pub viscosity_pa_s: Option<f64>,
    /// Kinematic viscosity, m²/s.
    pub kinematic_viscosity_m2_s: Option<f64>,
    /// The reference depth of the layout, m.
    pub reference_depth_m: Option<f64>,
    /// The front's reference velocity, m/s, and where it came from.
    pub reference_velocity: Option<(f64, &'static str)>,
    /// `rho U d / mu` with the reference velocity and depth.
    pub reynolds: Option<f64>,
    /// The scale-effect caution, when due.
    pub caution: Option<String>,
}

/// The flow indicators: water properties at the layout's temperature, the front celerity
/// measured between the stations (or, with one station, Ritter's ideal dam-break celerity
/// `2 sqrt(g d)` of the reference depth, marked as such), its Reynolds number over the
/// reference depth, and the caution of [`hydraulics::scale_effect_caution`].
pub fn flow_indicators(run: &TransientRun) -> FlowIndicators {
    let t = run.layout.flow.water_temperature_c;
    let d = run.layout.flow.reference_depth_m;
    let velocity = match run.celerity() {
        Some(c) => Some((
            c,
            "front celerity measured between the first and last stations",
        )),
        None => d.and_then(hydraulics::ritter_front_celerity).map(|c| {
            (
                c,
                "Ritter's ideal dam-break celerity 2 sqrt(g d) of the reference depth (one \
                 station: no measured celerity)",
            )
        }),
    };
    let reynolds = match (velocity, d) {
        (Some((u, _)), Some(d)) => hydraulics::reynolds(u, d, t),
        _ => None,
    };
    FlowIndicators {
        water_temperature_c: t,
        density_kg_m3: hydraulics::water_density(t),
        viscosity_pa_s: hydraulics::water_viscosity(t),
        kinematic_viscosity_m2_s: hydraulics::water_kinematic_viscosity(t),
        reference_depth_m: d,
        reference_velocity: velocity,
        reynolds,
        caution: hydraulics::scale_effect_caution(reynolds.unwrap_or(f64::NAN)),
    }
}

/// serde_json's pretty printer, with floating-point numbers written in Rust's shortest
/// round-trip form (`16`, `0.0000011096…`): the form flow.json has always had, and one every
/// JSON reader takes.
struct ShortestFloats(serde_json::ser::PrettyFormatter<'static>);

impl serde_json::ser::Formatter for ShortestFloats {
    fn write_f64<W: ?Sized + std::io::Write>(&mut self, w: &mut W, v: f64) -> std::io::Result<()> {
        write!(w, "{v}")
    }
    fn begin_array<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_array(w)
    }
    fn end_array<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_array(w)
    }
    fn begin_array_value<W: ?Sized + std::io::Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.0.begin_array_value(w, first)
    }
    fn end_array_value<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_array_value(w)
    }
    fn begin_object<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_object(w)
    }
    fn end_object<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_object(w)
    }
    fn begin_object_key<W: ?Sized + std::io::Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.0.begin_object_key(w, first)
    }
    fn begin_object_value<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_object_value(w)
    }
    fn end_object_value<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_object_value(w)
    }
}

impl FlowIndicators {
    /// `flow.json` (a flat object, the keys `crate::report::indicators` knows, plus
    /// `reference_velocity_source` and `scale_effect_caution` as texts), keys in this order.
    pub fn to_json(&self, description: &str) -> String {
        use serde_json::{Map, Value};
        let mut fields = Map::new();
        fields.insert("description".into(), Value::from(description));
        let mut num = |k: &str, v: Option<f64>| {
            if let Some(v) = v.filter(|v| v.is_finite()) {
                fields.insert(k.into(), Value::from(v));
            }
        };
        num("water_temperature_c", Some(self.water_temperature_c));
        num("water_density_kg_m3", self.density_kg_m3);
        num("dynamic_viscosity_pa_s", self.viscosity_pa_s);
        num("kinematic_viscosity_m2_s", self.kinematic_viscosity_m2_s);
        num(
            "reference_velocity_m_s",
            self.reference_velocity.map(|v| v.0),
        );
        num("reference_depth_m", self.reference_depth_m);
        num("reynolds_number", self.reynolds);
        if let Some((_, src)) = self.reference_velocity {
            fields.insert("reference_velocity_source".into(), Value::from(src));
        }
        if let Some(c) = &self.caution {
            fields.insert("scale_effect_caution".into(), Value::from(c.as_str()));
        }
        let mut out = Vec::new();
        let fmt = ShortestFloats(serde_json::ser::PrettyFormatter::new());
        let mut ser = serde_json::Serializer::with_formatter(&mut out, fmt);
        serde::Serialize::serialize(&fields, &mut ser).expect("a map of strings and numbers");
        let mut text = String::from_utf8(out).expect("serde_json writes UTF-8");
        text.push('\n');
        text
    }
}

/// What [`write_outputs`] wrote.
#[derive(Debug, Clone)]
pub struct TransientFiles {
    /// windows.csv.
    pub windows: PathBuf,
    /// profile.csv.
    pub profile: PathBuf,
    /// fronts.csv.
    pub fronts: PathBuf,
    /// stations.csv.
    pub stations: PathBuf,
    /// flow.json.
    pub flow: PathBuf,
}

fn write_csv(
    set: &OutputSet,
    name: &str,
    header: &[&str],
    rows: &[Vec<String>],
) -> Result<(), HostError> {
    let staged = set.staged(name);
    let err = |e: csv::Error| HostError::Write {
        path: staged.clone(),
        source: e.into(),
    };
    let mut w = csv::Writer::from_writer(set.create(name)?);
    w.write_record(header).map_err(err)?;
    for r in rows {
        w.write_record(r).map_err(err)?;
    }
    w.flush().map_err(write_err(&staged))
}

/// Write windows.csv, profile.csv, fronts.csv, stations.csv and flow.json into `dir`, as one
/// set ([`OutputSet`]): all of them, or the folder as it was.
pub fn write_outputs(
    run: &TransientRun,
    dir: &Path,
    description: &str,
) -> Result<TransientFiles, HostError> {
    write_output_set(run, dir, description, &[]).map(|(files, _)| files)
}

/// [`write_outputs`], recording `inputs` (role, path) in the manifest, and telling what the
/// set replaced.
pub fn write_output_set(
    run: &TransientRun,
    dir: &Path,
    description: &str,
    inputs: &[(&str, &Path)],
) -> Result<(TransientFiles, Committed), HostError> {
    let set = OutputSet::begin(dir)?;
    let staged = set.staged("windows.csv");
    let file = set.create("windows.csv")?;
    let csv_err = |e: csv::Error| HostError::Write {
        path: staged.clone(),
        source: e.into(),
    };
    let mut csv = WindowsCsv::new(std::io::BufWriter::new(file)).map_err(csv_err)?;
    let meta = common::probe_meta_with(&run.layout, &run.levels_from);
    for w in &run.windows {
        let since = w.since_front.map(|f| run.secs(f as f64));
        let p = w.probe as usize;
        csv.write(
            w,
            &meta[p],
            run.sample_rate,
            since,
            run.layout.probes[p].tip_spacing_mm,
        )
        .map_err(csv_err)?;
    }
    csv.finish().map_err(write_err(&staged))?;

    let rows: Vec<Vec<String>> = run
        .profiles
        .iter()
        .map(|(s, p)| run.profile_row(*s, p))
        .collect();
    write_csv(&set, "profile.csv", PROFILE_COLUMNS, &rows)?;
    write_csv(&set, "fronts.csv", FRONT_COLUMNS, &run.front_rows())?;
    write_csv(&set, "stations.csv", STATION_COLUMNS, &run.station_rows())?;
    let flow = set.staged("flow.json");
    std::fs::write(&flow, flow_indicators(run).to_json(description)).map_err(write_err(&flow))?;
    let names = [
        "windows.csv",
        "profile.csv",
        "fronts.csv",
        "stations.csv",
        "flow.json",
    ];
    let committed = set.commit(&names, inputs)?;
    Ok((
        TransientFiles {
            windows: dir.join("windows.csv"),
            profile: dir.join("profile.csv"),
            fronts: dir.join("fronts.csv"),
            stations: dir.join("stations.csv"),
            flow: dir.join("flow.json"),
        },
        committed,
    ))
}

/// The replay summary of a transient run.
pub fn summary(run: &TransientRun, files: Option<&TransientFiles>) -> String {
    let mut s = String::new();
    let secs = run.secs(run.frames as f64);
    let _ = writeln!(
        s,
        "{} frames at {} Hz ({secs:.3} s), {} stations, {} windows, {} profile slices",
        run.frames,
        run.sample_rate,
        run.stations.len(),
        run.windows.len(),
        run.profiles.len()
    );
    if let WindowPolicy::AfterFront { frames } = run.policy {
        let _ = writeln!(
            s,
            "windows of {:.1} ms from each station's front arrival",
            run.secs(frames as f64) * 1e3
        );
    }
    for (i, st) in run.stations.iter().enumerate() {
        let a = run.station_front(i);
        let arrival = run.arrival_s(i);
        let arrived = a.map_or(0, |a| a.front.arrived.count_ones());
        let flags: Vec<&str> = a
            .map(|a| a.front.flags.names().collect())
            .unwrap_or_default();
        let _ = writeln!(
            s,
            "station {} (x = {} mm, {} probes): front at {}, {} probes arrived{}",
            st.name,
            st.x_mm,
            st.probes.len(),
            arrival.map_or("-".into(), |t| format!("{t:.4} s")),
            arrived,
            if flags.is_empty() {
                String::new()
            } else {
                format!(" [{}]", flags.join("|"))
            }
        );
        if let Some(a) = a {
            for (l, &g) in st.probes.iter().enumerate() {
                if a.dead & (1 << l) != 0 {
                    let _ = writeln!(
                        s,
                        "  probe {} looks dead (no interface while the flow reached the probes \
                         above it): left out of the profiles",
                        run.layout.probes[g].name
                    );
                }
            }
        }
        if let Some(c) = run.celerity_from_previous(i) {
            let _ = writeln!(s, "  front celerity from the previous station: {c:.3} m/s");
        }
        if run.arrived_before_previous(i) {
            let _ = writeln!(
                s,
                "  [{REVERSED_ARRIVAL}] the front reached this station before the one upstream: \
                 check the x_mm of the stations (or swapped probes)"
            );
        }
        let slices: Vec<&ProfileRecord> = run
            .profiles
            .iter()
            .filter(|(k, _)| *k == i)
            .map(|(_, p)| p)
            .collect();
        let _ = writeln!(
            s,
            "  {:>10} {:>9} {:>7} {:>7} {:>9}",
            "since [s]", "Y90 [mm]", "Cmean", "n", "d [mm]"
        );
        let f4 = |v: Option<f32>, w: usize, p: usize| {
            v.map_or(format!("{:>w$}", "-"), |v| format!("{v:>w$.p$}"))
        };
        for p in slices.iter().take(6) {
            let _ = writeln!(
                s,
                "  {:>10.3} {} {} {} {}",
                run.secs(p.since_front as f64),
                f4(p.fit.y90_mm, 9, 1),
                f4(p.fit.mean_void_fraction, 7, 3),
                f4(p.fit.power_law.map(|x| x.exponent), 7, 3),
                f4(p.fit.equivalent_depth_mm, 9, 1),
            );
        }
        if slices.len() > 6 {
            let _ = writeln!(s, "  … {} more slices", slices.len() - 6);
        }
        if let Some(m) = slices
            .iter()
            .rev()
            .find_map(|p| p.decay.and_then(|d| d.model))
        {
            let _ = writeln!(
                s,
                "  decay of Cmean: C0 {:.3} -> Cf {:.3}, tau {:.3} s{}",
                m.initial,
                m.final_level,
                m.tau_s,
                m.tau_star
                    .map_or(String::new(), |t| format!(" ({t:.2} sqrt(d/g))"))
            );
        }
    }
    let ind = flow_indicators(run);
    let _ = writeln!(
        s,
        "water at {} °C: density {}, viscosity {}",
        ind.water_temperature_c,
        ind.density_kg_m3
            .map_or("-".into(), |v| format!("{v:.2} kg/m³")),
        ind.viscosity_pa_s
            .map_or("-".into(), |v| format!("{:.4} mPa s", v * 1e3)),
    );
    match (ind.reference_velocity, ind.reynolds) {
        (Some((u, src)), Some(re)) => {
            let _ = writeln!(
                s,
                "front velocity {u:.3} m/s ({src}); Reynolds number {re:.3e}"
            );
        }
        _ => {
            let _ = writeln!(
                s,
                "Reynolds number not computed (needs two stations or reference_depth_m)"
            );
        }
    }
    if let Some(c) = &ind.caution {
        let _ = writeln!(s, "caution: {c}");
    }
    let records: Vec<_> = run.windows.clone();
    s.push_str(&common::probe_table(&run.layout, run.sample_rate, &records));
    if let Some(f) = files {
        let _ = writeln!(
            s,
            "wrote {}, {}, {}, {}, {}",
            f.windows.display(),
            f.profile.display(),
            f.fronts.display(),
            f.stations.display(),
            f.flow.display()
        );
    }
    s
}

/// `frothline replay` of a transient layout: replay, write the files, print the summary.
pub fn run(args: &ReplayArgs) -> Result<(TransientRun, ReplayReport), HostError> {
    let (run, cap) =
        replay_capture_to_cut(&args.capture, &args.layout, &args.window, args.levels, None)?;
    let name = |p: &Path| {
        p.file_name().map_or_else(
            || p.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        )
    };
    let description = format!(
        "replay of {} with {}",
        name(&args.capture),
        name(&args.layout)
    );
    let (files, committed) = write_output_set(
        &run,
        &args.out,
        &description,
        &[("capture", &args.capture), ("layout", &args.layout)],
    )?;
    let abrupt_end = cap.abrupt_end_warning();
    if let Some(w) = &abrupt_end {
        eprintln!("warning: {w}");
    }
    if !args.quiet {
        let mut text = summary(&run, Some(&files));
        if let Some(note) = committed.note() {
            text.push_str(&note);
            text.push('\n');
        }
        crate::shared::stdout::print(&text);
    }
    let report = ReplayReport {
        layout: run.layout.clone(),
        sample_rate: run.sample_rate,
        frames: run.frames,
        records: run.windows.clone(),
        totals: crate::offline::run_summary::RunTotals::of(run.layout.probes.len(), &run.windows),
        tallies: common::probe_tallies(
            &run.layout,
            run.sample_rate,
            &run.windows,
            &crate::shared::probe_summary::SummaryRule::default(),
        ),
        windows_csv: files.windows.clone(),
        abrupt_end,
        committed,
        discharges: Vec::new(),
    };
    if args.strict {
        if let Some(e) = cap.abrupt_end_error() {
            return Err(e.into());
        }
    }
    Ok((run, report))
}
