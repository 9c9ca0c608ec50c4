//! `frothline replay`: a recorded capture through the same core the device runs.
//!
//! Output files are written as one set ([`crate::output_set`]): staged, then renamed into
//! place with a manifest only when the whole capture went through, so a failed run leaves
//! the folder as it was. The summary comes from running totals ([`crate::run_summary`]):
//! memory does not grow with the number of windows.
//!
//! A capture that stopped abruptly (a truncated data chunk, an unfinished header) is read to
//! where it stops: the results up to there are written, the last window is flagged
//! `capture_cut`, a warning names the file and the frame, and `--strict` turns it into a
//! failure (exit 2, after the files are written).

use crate::capture::{Capture, CaptureError};
use crate::error::{write_err, HostError};
use crate::layout::Layout;
use crate::output_set::{Committed, OutputSet};
use crate::rig::HostRecord as ProbeWindow;
use crate::rig::{chain_config, HostChain, MAX_PROBES};
use crate::run_summary::RunTotals;
use crate::window_spec::WindowSpec;
use crate::windows_csv::{ProbeMeta, WindowsCsv};
use indicatif::{ProgressBar, ProgressStyle};
use std::io::BufWriter;
use std::path::{Path, PathBuf};

/// Frames read from the capture per block.
const BLOCK_FRAMES: usize = 1 << 15;
/// Windows per block at most in the parallel driver: the records of a block travel from the
/// workers to the writer together, so short windows get shorter blocks and the records in
/// flight stay a few megabytes whatever the window length.
const WINDOWS_PER_BLOCK: usize = 256;

/// Frames per block for `policy` (results do not depend on it: the core's records do not
/// depend on how samples are split into pushes).
fn block_frames(policy: &frothline_core::WindowPolicy) -> usize {
    match policy {
        frothline_core::WindowPolicy::Frames(n) => (*n as usize)
            .saturating_mul(WINDOWS_PER_BLOCK)
            .clamp(1024, BLOCK_FRAMES),
        _ => BLOCK_FRAMES,
    }
}

/// Arguments of `frothline replay`.
#[derive(clap::Args, Debug, Clone)]
pub struct ReplayArgs {
    /// The capture: a WAV file, one channel per probe tip (16-bit PCM is usual; 8/24/32-bit
    /// integer and 32-bit float are read too).
    pub capture: PathBuf,
    /// The rig layout (TOML): which channel is which tip, elevations, levels, detector settings.
    #[arg(long, short)]
    pub layout: PathBuf,
    /// Folder for the output files (created if missing): windows.csv.
    #[arg(long, short)]
    pub out: PathBuf,
    /// Analysis window: `whole` (one window over the capture); a duration with a unit such
    /// as `50ms`, `0.5s`, `2s` (consecutive windows from the start of the capture); or
    /// `bubbles:N[@PROBE][,max=DURATION]`, adaptive windows that each hold N bubbles of the
    /// reference probe's leading tip (default: the first probe), e.g. `bubbles:200@B2-3,max=1s`
    /// — for unsteady flows, where a fixed duration holds too few bubbles at times.
    #[arg(long, short, default_value = "whole")]
    pub window: WindowSpec,
    /// No progress bar and no summary table.
    #[arg(long, short)]
    pub quiet: bool,
    /// Fail (exit 2) when the capture stopped abruptly (truncated, or a header its recorder
    /// never finished). Without it, the results up to the cut are written with a warning and
    /// the last window is flagged `capture_cut`. The files are written either way.
    #[arg(long)]
    pub strict: bool,
}

/// Whether a replay hands back every record ([`run`], for tests and tools that compare
/// records) or only running totals ([`run_with`] with `TotalsOnly`, the command line: memory
/// flat in the length of the capture).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Keep {
    /// Keep every record in [`ReplayReport::records`].
    Records,
    /// Keep only [`ReplayReport::totals`].
    TotalsOnly,
}

/// What a replay produced, for the summary and for tests.
#[derive(Debug)]
pub struct ReplayReport {
    /// The layout used.
    pub layout: Layout,
    /// Frames per second of the capture.
    pub sample_rate: u32,
    /// Frames read.
    pub frames: u64,
    /// Every record, in the order the chain gave them (empty under [`Keep::TotalsOnly`]).
    pub records: Vec<ProbeWindow>,
    /// Running totals per probe.
    pub totals: RunTotals,
    /// The windows.csv written.
    pub windows_csv: PathBuf,
    /// The warning about a capture that stopped abruptly, if it did.
    pub abrupt_end: Option<String>,
    /// What the run replaced in the output folder.
    pub committed: Committed,
}

/// Layout probes as CSV row metadata.
pub fn probe_meta(layout: &Layout) -> Vec<ProbeMeta> {
    layout
        .probes
        .iter()
        .map(|p| ProbeMeta {
            name: p.name.clone(),
            elevation_mm: p.elevation_mm,
            x_mm: p.x_mm,
        })
        .collect()
}

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

/// A capture with no complete frame is refused: there is nothing to replay, and a summary
/// of no samples would be all NaN.
///
/// A capture wider than the core's [`MAX_CHANNELS`](frothline_core::MAX_CHANNELS) is
/// refused here too, naming the capture and its true channel count.
pub fn require_frames(cap: &Capture) -> Result<(), HostError> {
    if cap.channels() > frothline_core::MAX_CHANNELS {
        return Err(CaptureError::TooManyChannels {
            path: cap.path().to_path_buf(),
            channels: cap.channels(),
            max: frothline_core::MAX_CHANNELS,
        }
        .into());
    }
    if cap.frames_in_file() == 0 {
        return Err(CaptureError::NoFrames {
            path: cap.path().to_path_buf(),
            channels: cap.channels(),
        }
        .into());
    }
    Ok(())
}

/// Raises [`Flags::CAPTURE_CUT`](frothline_core::Flags::CAPTURE_CUT) on the records that
/// reach the last frame of a capture that stopped abruptly.
pub fn mark_cut(r: &mut ProbeWindow, abrupt: bool, last_frame: u64) {
    if abrupt && r.end >= last_frame {
        r.flags |= frothline_core::Flags::CAPTURE_CUT;
    }
}

/// Push every frame of `cap` through `chain`, handing each record to `sink`.
pub fn drive(
    cap: &mut Capture,
    chain: &mut HostChain,
    progress: &ProgressBar,
    mut sink: impl FnMut(ProbeWindow) -> Result<(), HostError>,
) -> Result<u64, HostError> {
    let mut buf = Vec::with_capacity(BLOCK_FRAMES * cap.channels());
    let mut frames = 0u64;
    loop {
        let n = cap.read_frames(&mut buf, BLOCK_FRAMES)?;
        if n == 0 {
            break;
        }
        frames += n as u64;
        push_all(chain, &buf, &mut |r| sink(r))?;
        progress.inc(n as u64);
    }
    finish_all(chain, &mut |r| sink(r))?;
    Ok(frames)
}

/// Push a whole block, draining records as the chain's queue fills.
fn push_all<E>(
    chain: &mut HostChain,
    block: &[i16],
    sink: &mut dyn FnMut(ProbeWindow) -> Result<(), E>,
) -> Result<(), E> {
    let mut rest = block;
    while !rest.is_empty() {
        let used = chain.push(rest);
        rest = &rest[used..];
        while let Some(r) = chain.poll() {
            sink(r.without_sums())?;
        }
    }
    Ok(())
}

/// Close the record and drain every remaining record.
fn finish_all<E>(
    chain: &mut HostChain,
    sink: &mut dyn FnMut(ProbeWindow) -> Result<(), E>,
) -> Result<(), E> {
    while chain.finish().is_err() {
        while let Some(r) = chain.poll() {
            sink(r.without_sums())?;
        }
    }
    while let Some(r) = chain.poll() {
        sink(r.without_sums())?;
    }
    Ok(())
}

/// Like [`drive`], with the probes split over worker threads, one chain each, fed the same
/// blocks. Probes are independent under the `Whole` and fixed-duration window policies, so
/// the records are the ones one chain would give; they are handed to `sink` in the same
/// order (by window start, then probe). Other policies run on one chain.
pub fn drive_parallel(
    cap: &mut Capture,
    chain: Box<HostChain>,
    workers: usize,
    progress: &ProgressBar,
    mut sink: impl FnMut(ProbeWindow) -> Result<(), HostError>,
) -> Result<u64, HostError> {
    use frothline_core::WindowPolicy;
    use std::collections::BTreeMap;
    use std::sync::{mpsc, Arc};
    let cfg = chain.config().clone();
    let independent = matches!(cfg.window, WindowPolicy::Whole | WindowPolicy::Frames(_));
    let workers = workers.min(cfg.probes.len());
    if workers <= 1 || !independent {
        let mut chain = chain;
        return drive(cap, &mut chain, progress, sink);
    }
    // Contiguous groups of probes, balanced by tip count.
    let tips: Vec<usize> = cfg
        .probes
        .iter()
        .map(|p| 1 + p.trailing.is_some() as usize)
        .collect();
    let total: usize = tips.iter().sum();
    let mut groups: Vec<Vec<usize>> = vec![Vec::new(); workers];
    let mut acc = 0;
    for (i, t) in tips.iter().enumerate() {
        let g = (acc * workers / total).min(workers - 1);
        groups[g].push(i);
        acc += t;
    }
    groups.retain(|g| !g.is_empty());
    let mut chains = Vec::new();
    for g in &groups {
        let mut c = cfg.clone();
        c.probes.clear();
        for &i in g {
            let _ = c.probes.push(cfg.probes[i]);
        }
        let c = HostChain::new(c)
            .map_err(|e| HostError::Usage(format!("internal: split chain refused: {e}")))?;
        chains.push((Box::new(c), g.clone()));
    }
    std::thread::scope(|scope| {
        let (rec_tx, rec_rx) = mpsc::channel::<(usize, Vec<ProbeWindow>)>();
        let mut block_txs = Vec::new();
        for (w, (mut chain, global)) in chains.into_iter().enumerate() {
            let (tx, rx) = mpsc::sync_channel::<Arc<Vec<i16>>>(2);
            block_txs.push(tx);
            let rec_tx = rec_tx.clone();
            scope.spawn(move || {
                let out = std::cell::RefCell::new(Vec::new());
                let mut keep = |mut r: ProbeWindow| -> Result<(), ()> {
                    r.probe = global[r.probe as usize] as u8;
                    out.borrow_mut().push(r);
                    Ok(())
                };
                for block in rx {
                    let _ = push_all(&mut chain, &block, &mut keep);
                    let _ = rec_tx.send((w, out.take()));
                }
                let _ = finish_all(&mut chain, &mut keep);
                let _ = rec_tx.send((w, out.take()));
            });
        }
        drop(rec_tx);
        let n_workers = block_txs.len();
        let mut pending: BTreeMap<(u64, u8), ProbeWindow> = BTreeMap::new();
        let mut last_start = vec![0u64; n_workers];
        let mut flush =
            |pending: &mut BTreeMap<(u64, u8), ProbeWindow>, upto: u64| -> Result<(), HostError> {
                while let Some(entry) = pending.first_entry() {
                    if entry.key().0 >= upto {
                        break;
                    }
                    sink(entry.remove())?;
                }
                Ok(())
            };
        let mut take =
            |w: usize, recs: Vec<ProbeWindow>, pending: &mut BTreeMap<(u64, u8), ProbeWindow>| {
                for r in recs {
                    last_start[w] = last_start[w].max(r.start);
                    pending.insert((r.start, r.probe), r);
                }
                *last_start.iter().min().unwrap_or(&0)
            };
        let mut frames = 0u64;
        let block_frames = block_frames(&cfg.window);
        let mut buf = Vec::with_capacity(block_frames * cap.channels());
        let result: Result<(), HostError> = (|| {
            loop {
                let n = cap.read_frames(&mut buf, block_frames)?;
                if n == 0 {
                    break;
                }
                frames += n as u64;
                let block = Arc::new(std::mem::take(&mut buf));
                for tx in &block_txs {
                    let _ = tx.send(Arc::clone(&block));
                }
                buf = Arc::try_unwrap(block)
                    .unwrap_or_else(|_| Vec::with_capacity(block_frames * cap.channels()));
                while let Ok((w, recs)) = rec_rx.try_recv() {
                    let upto = take(w, recs, &mut pending);
                    flush(&mut pending, upto)?;
                }
                progress.inc(n as u64);
            }
            Ok(())
        })();
        drop(block_txs);
        for (w, recs) in rec_rx.iter() {
            let upto = take(w, recs, &mut pending);
            if result.is_ok() {
                flush(&mut pending, upto)?;
            }
        }
        result?;
        flush(&mut pending, u64::MAX)?;
        Ok(frames)
    })
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

/// Run a replay and write its files.
pub fn run_with(args: &ReplayArgs, keep: Keep) -> Result<ReplayReport, HostError> {
    // Transient layouts (surge fronts): one station chain per station, front-relative
    // windows, profile.csv, fronts.csv, stations.csv, flow.json (see `crate::transient`).
    if crate::transient::is_transient(&Layout::load(&args.layout)?) {
        return crate::transient::run(args).map(|(_, report)| report);
    }
    let (mut cap, layout, chain) = open_rig(&args.capture, &args.layout, args.window.clone())?;
    let set = OutputSet::begin(&args.out)?;
    let staged = set.staged("windows.csv");
    let file = set.create("windows.csv")?;
    let csv_err = |e: csv::Error| HostError::Write {
        path: staged.clone(),
        source: e.into(),
    };
    let mut csv = WindowsCsv::new(BufWriter::new(file)).map_err(csv_err)?;
    let meta = probe_meta(&layout);
    let spacing: Vec<Option<f64>> = layout.probes.iter().map(|p| p.tip_spacing_mm).collect();
    let fs = cap.sample_rate();
    let bar = progress_bar(cap.frames_in_file(), args.quiet);
    let mut records = Vec::new();
    let mut totals = RunTotals::new(layout.probes.len());
    let (abrupt, last_frame) = (cap.ends_abruptly(), cap.frames_in_file());
    let workers = std::thread::available_parallelism()
        .map_or(1, |n| n.get())
        .min(4);
    let result = drive_parallel(&mut cap, chain, workers, &bar, |mut r| {
        mark_cut(&mut r, abrupt, last_frame);
        csv.write(
            &r,
            &meta[r.probe as usize],
            fs,
            None,
            spacing[r.probe as usize],
        )
        .map_err(csv_err)?;
        totals.add(&r);
        if keep == Keep::Records {
            records.push(r);
        }
        Ok(())
    });
    bar.finish_and_clear();
    let frames = result?;
    csv.finish().map_err(write_err(&staged))?;
    let committed = set.commit(
        &["windows.csv"],
        &[("capture", &args.capture), ("layout", &args.layout)],
    )?;
    let abrupt_end = cap.abrupt_end_warning();
    let report = ReplayReport {
        layout,
        sample_rate: fs,
        frames,
        records,
        totals,
        windows_csv: args.out.join("windows.csv"),
        abrupt_end,
        committed,
    };
    if let Some(w) = &report.abrupt_end {
        eprintln!("warning: {w}");
    }
    if !args.quiet {
        crate::stdout::print(&summary_table(&report));
    }
    if args.strict {
        if let Some(e) = cap.abrupt_end_error() {
            return Err(e.into());
        }
    }
    Ok(report)
}

/// A short human summary: one line per probe over all its windows.
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
    let _ = writeln!(
        s,
        "{:<10} {:>8} {:>7} {:>8} {:>10} {:>12} {:>8}  flags",
        "probe", "y [mm]", "windows", "C [-]", "F [Hz]", "chord [ms]", "bubbles"
    );
    let empty = crate::run_summary::ProbeTotals::default();
    for (i, p) in r.layout.probes.iter().enumerate() {
        let t = r.totals.probes.get(i).unwrap_or(&empty);
        let c = t.void_fraction().unwrap_or(f64::NAN);
        let f = t.bubble_count_rate(r.sample_rate).unwrap_or(f64::NAN);
        let chord = t
            .chords
            .median()
            .map_or(f64::NAN, |m| m as f64 * 1e3 / r.sample_rate as f64);
        let (flags, windows, bubbles) = (t.flags, t.windows, t.bubbles);
        let names: Vec<&str> = flags.names().collect();
        let _ = writeln!(
            s,
            "{:<10} {:>8.1} {:>7} {:>8.4} {:>10.1} {:>12.3} {:>8}  {}",
            p.name,
            p.elevation_mm,
            windows,
            c,
            f,
            chord,
            bubbles,
            if names.is_empty() {
                "-".to_string()
            } else {
                names.join("|")
            }
        );
    }
    s
}
