//! `frothline replay`: a recorded capture through the same core the device runs.
//!
//! Output files are written under a `.partial` name and renamed only when the whole capture
//! went through, so a failed run never leaves a file that looks complete.

use crate::capture::Capture;
use crate::error::{write_err, HostError};
use crate::layout::Layout;
use crate::rig::{chain_config, HostChain, MAX_PROBES};
use crate::window_spec::WindowSpec;
use crate::windows_csv::{ProbeMeta, WindowsCsv};
use frothline_core::ProbeWindow;
use indicatif::{ProgressBar, ProgressStyle};
use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};

/// Frames read from the capture per block.
const BLOCK_FRAMES: usize = 1 << 15;

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
    /// Analysis window: `whole` (one window over the capture) or a duration with a unit,
    /// such as `50ms`, `0.5s`, `2s` (consecutive windows from the start of the capture).
    #[arg(long, short, default_value = "whole")]
    pub window: WindowSpec,
    /// No progress bar and no summary table.
    #[arg(long, short)]
    pub quiet: bool,
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
    /// Every record, in the order the chain gave them.
    pub records: Vec<ProbeWindow>,
    /// The windows.csv written.
    pub windows_csv: PathBuf,
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
    let cap = Capture::open(capture)?;
    layout_doc.check_channels(cap.channels(), layout)?;
    if layout_doc.probes.len() > MAX_PROBES {
        return Err(HostError::Usage(format!(
            "{}: {} probes, the host handles at most {MAX_PROBES}",
            layout.display(),
            layout_doc.probes.len()
        )));
    }
    let policy = window.policy(cap.sample_rate()).map_err(HostError::Usage)?;
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
        let mut rest = &buf[..];
        while !rest.is_empty() {
            let used = chain.push(rest);
            rest = &rest[used..];
            while let Some(r) = chain.poll() {
                sink(r)?;
            }
        }
        progress.inc(n as u64);
    }
    while chain.finish().is_err() {
        while let Some(r) = chain.poll() {
            sink(r)?;
        }
    }
    while let Some(r) = chain.poll() {
        sink(r)?;
    }
    Ok(frames)
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

/// Run a replay and write its files.
pub fn run(args: &ReplayArgs) -> Result<ReplayReport, HostError> {
    let (mut cap, layout, mut chain) = open_rig(&args.capture, &args.layout, args.window)?;
    std::fs::create_dir_all(&args.out).map_err(write_err(&args.out))?;
    let final_path = args.out.join("windows.csv");
    let partial = args.out.join("windows.csv.partial");
    let file = File::create(&partial).map_err(write_err(&partial))?;
    let csv_err = |e: csv::Error| HostError::Write {
        path: partial.clone(),
        source: e.into(),
    };
    let mut csv = WindowsCsv::new(BufWriter::new(file)).map_err(csv_err)?;
    let meta = probe_meta(&layout);
    let fs = cap.sample_rate();
    let bar = progress_bar(cap.frames(), args.quiet);
    let mut records = Vec::new();
    let result = drive(&mut cap, &mut chain, &bar, |r| {
        csv.write(&r, &meta[r.probe as usize], fs, None)
            .map_err(csv_err)?;
        records.push(r);
        Ok(())
    });
    bar.finish_and_clear();
    let frames = match result {
        Ok(f) => f,
        Err(e) => {
            drop(csv);
            let _ = std::fs::remove_file(&partial);
            return Err(e);
        }
    };
    csv.finish().map_err(write_err(&partial))?;
    std::fs::rename(&partial, &final_path).map_err(write_err(&final_path))?;
    let report = ReplayReport {
        layout,
        sample_rate: fs,
        frames,
        records,
        windows_csv: final_path,
    };
    if !args.quiet {
        print!("{}", summary_table(&report));
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
        "{} frames at {} Hz ({secs:.2} s), {} windows -> {}",
        r.frames,
        r.sample_rate,
        r.records.len(),
        r.windows_csv.display()
    );
    let _ = writeln!(
        s,
        "{:<10} {:>8} {:>7} {:>8} {:>10} {:>12} {:>8}  flags",
        "probe", "y [mm]", "windows", "C [-]", "F [Hz]", "chord [ms]", "bubbles"
    );
    for (i, p) in r.layout.probes.iter().enumerate() {
        let recs: Vec<&ProbeWindow> = r.records.iter().filter(|w| w.probe as usize == i).collect();
        let frames: u64 = recs.iter().map(|w| w.lead.frames).sum();
        let air: u64 = recs.iter().map(|w| w.lead.air_frames).sum();
        let bubbles: u64 = recs.iter().map(|w| w.lead.bubbles as u64).sum();
        let mut chords = frothline_core::chord::ChordStats::new();
        let mut flags = frothline_core::Flags::NONE;
        for w in &recs {
            chords.merge(&w.lead.bubble_chords);
            flags |= w.flags;
        }
        let c = if frames > 0 {
            air as f64 / frames as f64
        } else {
            f64::NAN
        };
        let f = if frames > 0 {
            bubbles as f64 * r.sample_rate as f64 / frames as f64
        } else {
            f64::NAN
        };
        let chord = chords
            .median()
            .map_or(f64::NAN, |m| m as f64 * 1e3 / r.sample_rate as f64);
        let names: Vec<&str> = flags.names().collect();
        let _ = writeln!(
            s,
            "{:<10} {:>8.1} {:>7} {:>8.4} {:>10.1} {:>12.3} {:>8}  {}",
            p.name,
            p.elevation_mm,
            recs.len(),
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
