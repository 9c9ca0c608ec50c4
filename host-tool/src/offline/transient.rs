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
use crate::offline::replay_common::LevelSchedule;
pub use crate::shared::stations::{
    is_transient, station_configs, stations, transient_policy, StationChain, StationInfo,
    DEFAULT_SLICE_S, RING_SAMPLES,
};
pub use crate::shared::transient_columns::{FRONT_COLUMNS, PROFILE_COLUMNS, STATION_COLUMNS};

use crate::offline::replay_common::{self as common, Keep, ReplayArgs, ReplayReport};
use crate::shared::capture::Capture;
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::rig::{Counts, FullRecord, HostRecord, MAX_PROBES};
use crate::shared::window_spec::WindowSpec;
use frothline_core::{ChainConfig, ConfigError, FrontRecord, ProfileRecord, WindowPolicy};
use std::path::{Path, PathBuf};

mod counts;
mod indicators;
mod outputs;
mod record_store;
mod rows;
mod slice_discharge;
mod summary;
pub use counts::{RecordCounts, StationSlices};
pub use indicators::{flow_indicators, FlowIndicators};
pub use outputs::{write_output_set, write_output_set_from, write_outputs, TransientFiles};
pub use record_store::{DischargeStore, ProfileStore, RecordStore, WindowStore};
pub use slice_discharge::{SliceDischarge, SLICE_DISCHARGE_COLUMNS};
pub use summary::{summary, summary_with};

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
    /// The unit discharges of each profile slice, in the order of `profiles` (empty when
    /// not computed, as in an ensemble).
    pub slice_discharges: Vec<SliceDischarge>,
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
struct Sinks<'a, 'l> {
    records: StoredRecords,
    /// Window records waiting for their slice's discharge.
    slices: slice_discharge::SliceDischarges,
    layout: &'l Layout,
    sample_rate: u32,
    fronts: Vec<StationFront>,
    /// Sees every full record (with its correlation sums) before it is reduced.
    full: Option<&'a mut (dyn FnMut(&FullRecord) + Send)>,
}

fn drain(idx: usize, r: &mut Running, out: &mut Sinks<'_, '_>) -> Result<(), HostError> {
    let Sinks {
        records,
        slices,
        layout,
        sample_rate,
        fronts,
        full,
    } = out;
    while let Some(mut w) = r.chain.poll() {
        w.probe = r.info.probes[w.probe as usize] as u8;
        if let Some(f) = full.as_mut() {
            f(&w);
        }
        let lean = w.without_sums();
        slices.window(idx, &lean, layout, *sample_rate);
        records.windows.push(lean).map_err(spill_error)?;
    }
    while let Some(p) = r.chain.poll_profile() {
        let probes = &r.info.probes;
        let dead = |g: usize| {
            probes
                .iter()
                .position(|&l| l == g)
                .is_some_and(|local| p.dead & (1 << local) != 0)
        };
        records
            .discharges
            .push(slices.slice(idx, p.start, dead))
            .map_err(spill_error)?;
        records.profiles.push((idx, p)).map_err(spill_error)?;
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
    Ok(())
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
    next_block: impl FnMut(&mut Vec<i16>) -> Result<usize, HostError>,
) -> Result<TransientRun, ConfigErrorOrHost> {
    let (mut run, stored) = run_blocks_stored(
        layout,
        configs,
        sample_rate,
        sizes,
        schedule,
        full,
        next_block,
    )?;
    stored.into_run(&mut run).map_err(ConfigErrorOrHost::Host)?;
    Ok(run)
}

/// The window records and profile slices of a run, kept out of memory
/// ([`RecordStore`]).
#[derive(Debug, Default)]
pub struct StoredRecords {
    /// Window records (`probe` = layout index, without their correlation sums).
    pub windows: WindowStore,
    /// Profile slices with their station index.
    pub profiles: ProfileStore,
    /// Their discharges, one per slice in the same order.
    pub discharges: DischargeStore,
}

impl StoredRecords {
    /// Move the records into `run` ([`TransientRun::windows`], [`TransientRun::profiles`]).
    pub fn into_run(self, run: &mut TransientRun) -> Result<(), HostError> {
        run.windows = self.windows.into_vec().map_err(spill_error)?;
        run.profiles = self.profiles.into_vec().map_err(spill_error)?;
        run.slice_discharges = self.discharges.into_vec().map_err(spill_error)?;
        Ok(())
    }
}

/// The records' temporary file failed (its folder: the system's temporary folder, TMPDIR):
/// a write failure, exit 1.
fn spill_error(e: std::io::Error) -> HostError {
    HostError::Write {
        path: std::env::temp_dir(),
        source: e,
    }
}

/// [`run_blocks`], keeping the window records and profile slices in [`StoredRecords`]
/// (memory flat in the record's length): [`TransientRun::windows`] and
/// [`TransientRun::profiles`] stay empty.
pub fn run_blocks_stored(
    layout: &Layout,
    configs: Vec<(StationInfo, ChainConfig<MAX_PROBES>)>,
    sample_rate: u32,
    sizes: &[usize],
    schedule: Option<&LevelSchedule>,
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
    mut next_block: impl FnMut(&mut Vec<i16>) -> Result<usize, HostError>,
) -> Result<(TransientRun, StoredRecords), ConfigErrorOrHost> {
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
        records: StoredRecords::default(),
        slices: Default::default(),
        layout,
        sample_rate,
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
                    drain(idx, r, &mut out).map_err(ConfigErrorOrHost::Host)?;
                }
                rest = &rest[take..];
            }
            next_k = kk;
        }
        k = next_k;
    }
    for (idx, r) in running.iter_mut().enumerate() {
        while r.chain.finish().is_err() {
            drain(idx, r, &mut out).map_err(ConfigErrorOrHost::Host)?;
        }
        drain(idx, r, &mut out).map_err(ConfigErrorOrHost::Host)?;
    }
    let Sinks {
        records, fronts, ..
    } = out;
    let run = TransientRun {
        layout: layout.clone(),
        sample_rate,
        frames,
        stations: running.into_iter().map(|r| r.info).collect(),
        windows: Vec::new(),
        profiles: Vec::new(),
        slice_discharges: Vec::new(),
        fronts,
        policy,
        delay_frames,
        levels_from: Vec::new(),
    };
    Ok((run, records))
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
    let (mut run, stored, cap) = replay_capture_stored(capture, layout_path, window, rule, full)?;
    stored.into_run(&mut run)?;
    let (abrupt, last) = (cap.ends_abruptly(), cap.position());
    for w in &mut run.windows {
        common::mark_cut(w, abrupt, last);
    }
    Ok((run, cap))
}

/// [`replay_capture_to_cut`] with the window records and profile slices left in
/// [`StoredRecords`] (memory flat in the capture's length; [`TransientRun::windows`] and
/// [`TransientRun::profiles`] stay empty). Apply [`common::mark_cut`] with the capture's end
/// as the window records are read back.
pub fn replay_capture_stored(
    capture: &Path,
    layout_path: &Path,
    window: &WindowSpec,
    rule: LevelRule,
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
) -> Result<(TransientRun, StoredRecords, Capture), HostError> {
    let layout = Layout::load(layout_path)?;
    let mut cap = Capture::open(capture)?;
    crate::shared::rig::require_frames(&cap)?;
    cap.end_at_cut();
    layout.check_channels(cap.channels(), layout_path)?;
    crate::shared::rig::check_levels_fit(&layout, &cap, layout_path)?;
    let (run, stored) = replay_open(&mut cap, &layout, layout_path, window, rule, full)?;
    Ok((run, stored, cap))
}

fn replay_open(
    cap: &mut Capture,
    layout: &Layout,
    layout_path: &Path,
    window: &WindowSpec,
    rule: LevelRule,
    full: Option<&mut (dyn FnMut(&FullRecord) + Send)>,
) -> Result<(TransientRun, StoredRecords), HostError> {
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
    let (mut run, stored) = with_big_stack(|| {
        run_blocks_stored(layout, configs, fs, &[], schedule.as_ref(), full, |buf| {
            Ok(cap.read_frames(buf, BLOCK_FRAMES)?)
        })
        .map_err(|e| e.into_host(layout_path))
    })?;
    run.levels_from = common::levels_sources(layout, learnt.as_ref());
    Ok((run, stored))
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

/// `frothline replay` of a transient layout: replay, write the files, print the summary;
/// the report keeps every window record ([`run_with`] with [`Keep::TotalsOnly`] keeps
/// none, so memory stays flat).
pub fn run(args: &ReplayArgs) -> Result<(TransientRun, ReplayReport), HostError> {
    run_with(args, Keep::Records)
}

/// [`run`], keeping the window records in the report or not (`keep`).
pub fn run_with(args: &ReplayArgs, keep: Keep) -> Result<(TransientRun, ReplayReport), HostError> {
    let (run, mut stored, cap) =
        replay_capture_stored(&args.capture, &args.layout, &args.window, args.levels, None)?;
    let (abrupt, last) = (cap.ends_abruptly(), cap.position());
    let mut records = Vec::new();
    let kept = &mut records;
    let discharges = stored.discharges.sorted().map_err(spill_error)?;
    let mut profiles = stored
        .profiles
        .sorted()
        .map_err(spill_error)?
        .zip(discharges)
        .map(|(p, d)| match (p, d) {
            (Ok((s, p)), Ok(d)) => Ok((s, p, d)),
            (Err(e), _) | (_, Err(e)) => Err(spill_error(e)),
        });
    let mut windows = stored.windows.sorted().map_err(spill_error)?.map(|w| {
        w.map_err(spill_error).map(|mut w| {
            common::mark_cut(&mut w, abrupt, last);
            if keep == Keep::Records {
                kept.push(w.clone());
            }
            w
        })
    });
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
    let (files, committed, counts) = write_output_set_from(
        &run,
        &mut windows,
        &mut profiles,
        &args.out,
        &description,
        &[("capture", &args.capture), ("layout", &args.layout)],
    )?;
    drop((windows, profiles));
    let abrupt_end = cap.abrupt_end_warning();
    if let Some(w) = &abrupt_end {
        eprintln!("warning: {w}");
    }
    if !args.quiet {
        let mut text = summary_with(&run, &counts, Some(&files));
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
        // Empty unless asked for (the command line keeps totals only, as a steady replay
        // does).
        records,
        totals: counts.totals,
        tallies: counts.tallies,
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
