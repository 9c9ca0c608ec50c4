//! `frothline replay`: a recorded capture through the same core the device runs.
//!
//! Output files are written as one set ([`crate::shared::output_set`]): staged, then renamed into
//! place with a manifest only when the whole capture went through, so a failed run leaves
//! the folder as it was. The summary comes from running totals ([`crate::offline::run_summary`]):
//! memory does not grow with the number of windows.
//!
//! A capture that stopped abruptly (a truncated data chunk, an unfinished header) is read to
//! where it stops: the results up to there are written, the last window is flagged
//! `capture_cut`, a warning names the file and the frame, and `--strict` turns it into a
//! failure (exit 2, after the files are written).

pub use crate::offline::replay_common::{
    levels_sources, mark_cut, period_rule, probe_meta, probe_meta_with, probe_table, probe_tallies,
    report_unlearnt, tally_table, window_figures, Keep, LevelSchedule, ReplayArgs, ReplayReport,
};
pub use crate::offline::replay_drive::{
    drive, drive_parallel, drive_parallel_prepared, drive_parallel_with, drive_with,
};
pub use crate::shared::rig::{check_learn_period, check_levels_fit, require_frames};

use crate::offline::chord_files::ChordPool;
use crate::offline::record_levels::{self, LevelRule, RecordLevels};
use crate::offline::run_summary::RunTotals;
use crate::shared::capture::Capture;
use crate::shared::error::{write_err, HostError};
use crate::shared::layout::Layout;
use crate::shared::output_set::OutputSet;
use crate::shared::probe_summary::{ProbeTally, SummaryRule};
use crate::shared::rig::HostRecord as ProbeWindow;
use crate::shared::rig::{chain_config, HostChain, MAX_PROBES};
use crate::shared::window_spec::WindowSpec;
use crate::shared::windows_csv::{self, WindowsCsv};
use indicatif::{ProgressBar, ProgressStyle};
use std::io::BufWriter;
use std::path::Path;

/// Open a capture and its layout and build the chain for them.
pub fn open_rig(
    capture: &Path,
    layout: &Path,
    window: WindowSpec,
) -> Result<(Capture, Layout, Box<HostChain>), HostError> {
    let layout_doc = Layout::load(layout)?;
    let mut cap = Capture::open(capture)?;
    require_frames(&cap)?;
    cap.end_at_cut();
    layout_doc.check_channels(cap.channels(), layout)?;
    check_levels_fit(&layout_doc, &cap, layout)?;
    if layout_doc.probes.len() > MAX_PROBES {
        return Err(HostError::Usage(format!(
            "{}: {} probes, the host handles at most {MAX_PROBES}",
            layout.display(),
            layout_doc.probes.len()
        )));
    }
    let policy = window
        .policy(cap.sample_rate(), |name| {
            layout_doc.probes.iter().position(|p| p.name == name)
        })
        .map_err(HostError::Usage)?;
    let cfg = chain_config(&layout_doc, cap.channels(), cap.sample_rate(), policy, &cap).map_err(
        |source| HostError::Config {
            file: layout.to_path_buf(),
            source,
        },
    )?;
    let chain = HostChain::new(cfg).map_err(|source| HostError::Config {
        file: layout.to_path_buf(),
        source,
    })?;
    Ok((cap, layout_doc, Box::new(chain)))
}

/// `chain` rebuilt with the record's levels for its learning tips; the tips that did not
/// learn are reported on stderr (probe and tip named) and keep the causal rule.
pub fn with_record_levels(
    chain: Box<HostChain>,
    learnt: &RecordLevels,
    layout: &Layout,
    layout_path: &Path,
) -> Result<Box<HostChain>, HostError> {
    let mut cfg = chain.config().clone();
    drop(chain);
    report_unlearnt(learnt, layout, cfg.detector.min_swing);
    learnt.apply(&mut cfg);
    let chain = HostChain::new(cfg).map_err(|source| HostError::Config {
        file: layout_path.to_path_buf(),
        source,
    })?;
    Ok(Box::new(chain))
}

fn progress_bar(frames: u64, quiet: bool) -> ProgressBar {
    if quiet {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(frames);
    if let Ok(style) = ProgressStyle::with_template(
        "{msg:10} [{bar:40}] {percent:>3}% {elapsed_precise} eta {eta}",
    ) {
        bar.set_style(style.progress_chars("=> "));
    }
    bar.set_message("replaying");
    bar
}

/// Run a replay and write its files, keeping every record (see [`Keep`]).
pub fn run(args: &ReplayArgs) -> Result<ReplayReport, HostError> {
    run_with(args, Keep::Records)
}

/// Run a replay and write its files, on as many threads as
/// [`offline_threads`](crate::offline::threads::offline_threads) gives.
pub fn run_with(args: &ReplayArgs, keep: Keep) -> Result<ReplayReport, HostError> {
    run_threads(args, keep, crate::offline::threads::offline_threads())
}

/// Run a replay and write its files on at most `threads` threads (the files do not depend
/// on the number). A steady replay counts its learning pass on up to `threads` threads and
/// splits its probes over up to 4 worker chains; with 1 both run on this thread. A
/// transient replay runs its stations' chains on this thread.
pub fn run_threads(
    args: &ReplayArgs,
    keep: Keep,
    threads: usize,
) -> Result<ReplayReport, HostError> {
    // Transient layouts (surge fronts): one station chain per station, front-relative
    // windows, profile.csv, fronts.csv, stations.csv, flow.json (see `crate::offline::transient`).
    if crate::offline::transient::is_transient(&Layout::load(&args.layout)?) {
        return crate::offline::transient::run_with(args, keep).map(|(_, report)| report);
    }
    let (mut cap, layout, mut chain) = open_rig(&args.capture, &args.layout, args.window.clone())?;
    let mut learnt = None;
    if args.levels == LevelRule::Record {
        let cfg = chain.config();
        let tips = record_levels::learning_tips(cfg, |i| i);
        let l = record_levels::learn_threads(
            &args.capture,
            &tips,
            cfg.detector.min_swing,
            true,
            threads,
        )?;
        chain = with_record_levels(chain, &l, &layout, &args.layout)?;
        learnt = Some(l);
    }
    period_rule(
        check_learn_period(chain.config(), &layout, cap.sample_rate(), &args.layout),
        args.levels,
    )?;
    let set = OutputSet::begin(&args.out)?;
    let staged = set.staged("windows.csv");
    let file = set.create("windows.csv")?;
    let csv_err = |e: csv::Error| HostError::Write {
        path: staged.clone(),
        source: e.into(),
    };
    let mut csv = WindowsCsv::new(BufWriter::new(file)).map_err(csv_err)?;
    let meta = probe_meta_with(&layout, &levels_sources(&layout, learnt.as_ref()));
    let spacing: Vec<Option<f64>> = layout.probes.iter().map(|p| p.tip_spacing_mm).collect();
    let fs = cap.sample_rate();
    let bar = progress_bar(cap.frames_in_file(), args.quiet);
    let mut records = Vec::new();
    let mut totals = RunTotals::new(layout.probes.len());
    let mut chords = ChordPool::new(layout.probes.len());
    // The per-probe summary, streaming (memory flat in the record length).
    let rule = SummaryRule::default();
    let mut tallies = vec![ProbeTally::new(); layout.probes.len()];
    let (abrupt, last_frame) = (cap.ends_abruptly(), cap.frames_in_file());
    let workers = threads.min(4);
    let schedule = learnt.as_ref().and_then(LevelSchedule::from_record);
    // The flag and the row of a record depend on nothing else: the worker that made the
    // record prepares them, and this thread writes them in order and adds to the totals.
    let prepare = |r: &mut ProbeWindow| {
        mark_cut(r, abrupt, last_frame);
        let p = r.probe as usize;
        windows_csv::row(r, &meta[p], fs, None, spacing[p])
    };
    let result = drive_parallel_prepared(
        &mut cap,
        chain,
        schedule.as_ref(),
        workers,
        &bar,
        &prepare,
        |r, row| {
            csv.write_fields(&row).map_err(csv_err)?;
            totals.add(&r);
            chords.add(&r, fs, spacing[r.probe as usize]);
            if let Some(t) = tallies.get_mut(r.probe as usize) {
                t.add(&window_figures(&r, fs, spacing[r.probe as usize]), &rule);
            }
            if keep == Keep::Records {
                records.push(r);
            }
            Ok(())
        },
    );
    bar.finish_and_clear();
    let frames = result?;
    csv.finish().map_err(write_err(&staged))?;
    let discharges = crate::shared::discharge::station_discharges(&layout, &tallies);
    let mut names = vec!["windows.csv"];
    if !discharges.is_empty() {
        let path = set.staged("discharge.csv");
        let file = set.create("discharge.csv")?;
        crate::shared::discharge::write_csv(file, &discharges).map_err(|e| HostError::Write {
            path,
            source: e.into(),
        })?;
        names.push("discharge.csv");
    }
    names.extend(chords.write(&set, &layout, fs)?);
    let committed = set.commit(
        &names,
        &[("capture", &args.capture), ("layout", &args.layout)],
    )?;
    let abrupt_end = cap.abrupt_end_warning();
    let report = ReplayReport {
        layout,
        sample_rate: fs,
        frames,
        records,
        totals,
        tallies,
        windows_csv: args.out.join("windows.csv"),
        abrupt_end,
        committed,
        discharges,
    };
    if let Some(w) = &report.abrupt_end {
        eprintln!("warning: {w}");
    }
    if !args.quiet {
        crate::shared::stdout::print(&summary_table(&report));
    }
    if args.strict {
        if let Some(e) = cap.abrupt_end_error() {
            return Err(e.into());
        }
    }
    Ok(report)
}

/// A short human summary: one line per probe over all its windows (see
/// [`crate::shared::probe_summary`] for the rule on flagged windows).
pub fn summary_table(r: &ReplayReport) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let secs = r.frames as f64 / r.sample_rate.max(1) as f64;
    let _ = writeln!(
        s,
        "{} frames at {} Hz ({secs:.2} s), {} -> {}",
        r.frames,
        r.sample_rate,
        r.totals.windows_phrase(),
        r.windows_csv.display()
    );
    if let Some(note) = r.committed.note() {
        let _ = writeln!(s, "{note}");
    }
    s.push_str(&tally_table(&r.layout, &r.tallies));
    for (x, d) in &r.discharges {
        s.push_str(&crate::shared::discharge::summary(*x, d));
    }
    s
}
