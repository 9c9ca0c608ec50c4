//! What the steady replay ([`crate::offline::replay`]) and the transient replay
//! ([`crate::offline::transient`]) share: the command's arguments and report, the rule for
//! a learning period too short, where each probe's levels come from, the capture-cut flag,
//! and the per-probe summary table.

use crate::offline::record_levels::{LevelRule, RecordLevels};
use crate::offline::run_summary::RunTotals;
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::output_set::Committed;
use crate::shared::probe_summary::{ProbeTally, SummaryRow, SummaryRule, WindowFigures};
use crate::shared::rig::HostChain;
use crate::shared::rig::HostRecord as ProbeWindow;
use crate::shared::window_spec::WindowSpec;
use crate::shared::windows_csv::ProbeMeta;
use frothline_core::levels::Levels;
use std::path::PathBuf;

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
    /// Levels of tips without fixed levels in the layout: `record` learns them from the
    /// whole capture first, then processes it from its first frame; `device` learns them
    /// as the device does, during the record (its first learning period runs without
    /// levels), and reproduces a device's records exactly.
    #[arg(long, value_enum, default_value_t = LevelRule::Record)]
    pub levels: LevelRule,
    /// Fail (exit 2) when the capture stopped abruptly (truncated, or a header its recorder
    /// never finished). Without it, the results up to the cut are written with a warning and
    /// the last window is flagged `capture_cut`. The files are written either way.
    #[arg(long)]
    pub strict: bool,
}

/// Whether a replay hands back every record ([`run`](crate::offline::replay::run), for tests and tools that compare
/// records) or only running totals ([`run_with`](crate::offline::replay::run_with) with `TotalsOnly`, the command line: memory
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
    /// The per-probe summary of [`crate::shared::probe_summary`] under its default rule, one per
    /// layout probe.
    pub tallies: Vec<ProbeTally>,
    /// The windows.csv written.
    pub windows_csv: PathBuf,
    /// The warning about a capture that stopped abruptly, if it did.
    pub abrupt_end: Option<String>,
    /// What the run replaced in the output folder.
    pub committed: Committed,
    /// Unit discharges per station and the continuity check ([`crate::shared::discharge`]).
    pub discharges: Vec<(f64, crate::shared::discharge::Discharge)>,
}

/// Layout probes as CSV row metadata (where the levels come from not known).
pub fn probe_meta(layout: &Layout) -> Vec<ProbeMeta> {
    probe_meta_with(layout, &[])
}

/// Layout probes as CSV row metadata, with where each probe's leading-tip levels come
/// from (`sources`, per probe; see [`levels_sources`]).
pub fn probe_meta_with(layout: &Layout, sources: &[Option<&'static str>]) -> Vec<ProbeMeta> {
    layout
        .probes
        .iter()
        .enumerate()
        .map(|(i, p)| ProbeMeta {
            name: p.name.clone(),
            elevation_mm: p.elevation_mm,
            x_mm: p.x_mm,
            levels_from: sources.get(i).copied().flatten(),
        })
        .collect()
}

/// Where each probe's leading-tip levels come from: the layout, the record (`learnt`, when
/// the record rule ran) or the device's causal rule.
pub fn levels_sources(layout: &Layout, learnt: Option<&RecordLevels>) -> Vec<Option<&'static str>> {
    layout
        .probes
        .iter()
        .map(|p| {
            if p.tip_levels(false).is_some() {
                return Some("layout");
            }
            let ch = p.leading.min(255) as u8;
            Some(
                learnt
                    .and_then(|l| l.tip(ch))
                    .and_then(|t| t.outcome.source_name())
                    .unwrap_or("device_rule"),
            )
        })
        .collect()
}

/// A learning period too short is an error under the device's rule; under the record rule
/// it concerns only the tips the record could not give levels (already named), so it is a
/// warning there.
pub fn period_rule(check: Result<(), HostError>, rule: LevelRule) -> Result<(), HostError> {
    match (check, rule) {
        (Err(e), LevelRule::Record) => {
            eprintln!("warning: {e}");
            Ok(())
        }
        (other, _) => other,
    }
}

/// Tell the user on stderr which tips learnt no levels from the record.
pub fn report_unlearnt(learnt: &RecordLevels, layout: &Layout, min_swing: u16) {
    let names: Vec<String> = layout.probes.iter().map(|p| p.name.clone()).collect();
    for w in learnt.warnings(&names, min_swing) {
        eprintln!("warning: {w}");
    }
}

/// Raises [`Flags::CAPTURE_CUT`](frothline_core::Flags::CAPTURE_CUT) on the records that
/// reach the last frame of a capture that stopped abruptly.
pub fn mark_cut(r: &mut ProbeWindow, abrupt: bool, last_frame: u64) {
    if abrupt && r.end >= last_frame {
        r.flags |= frothline_core::Flags::CAPTURE_CUT;
    }
}

/// The figures of a chain record for the per-probe summary (`spacing_mm`: the probe's tip
/// spacing, for the velocity).
pub fn window_figures(r: &ProbeWindow, sample_rate: u32, spacing_mm: Option<f64>) -> WindowFigures {
    let fs = sample_rate.max(1) as f64;
    let frames = r.end.saturating_sub(r.start);
    let corr = r.correlation.as_ref();
    WindowFigures {
        duration_s: frames as f64 / fs,
        void_fraction: r.lead.void_fraction().map(f64::from),
        count_rate_hz: r.lead.bubble_count_rate(fs as f32).map(f64::from),
        bubbles: Some(r.lead.bubbles as f64),
        velocity_m_s: corr
            .and_then(|c| c.velocity_m_s(spacing_mm? as f32, fs as f32))
            .map(f64::from),
        turbulence_intensity: corr.and_then(|c| c.turbulence_intensity).map(f64::from),
        chord_median_s: r.lead.bubble_chords.median().map(|m| m as f64 / fs),
        flags: r.flags,
        before_front: r.since_front.is_some_and(|t| t < 0),
    }
}

/// Per-probe tallies of `records` under `rule`, one per layout probe.
pub fn probe_tallies(
    layout: &Layout,
    sample_rate: u32,
    records: &[ProbeWindow],
    rule: &SummaryRule,
) -> Vec<ProbeTally> {
    let mut t = vec![ProbeTally::new(); layout.probes.len()];
    for r in records {
        let p = r.probe as usize;
        if let Some(tally) = t.get_mut(p) {
            let spacing = layout.probes.get(p).and_then(|p| p.tip_spacing_mm);
            tally.add(&window_figures(r, sample_rate, spacing), rule);
        }
    }
    t
}

/// The per-probe table of `records` under the default rule.
pub fn probe_table(layout: &Layout, sample_rate: u32, records: &[ProbeWindow]) -> String {
    let tallies = probe_tallies(layout, sample_rate, records, &SummaryRule::default());
    tally_table(layout, &tallies)
}

/// The per-probe table of `tallies` (one per layout probe), fitted to the terminal when
/// standard output is one.
pub fn tally_table(layout: &Layout, tallies: &[ProbeTally]) -> String {
    let rows: Vec<SummaryRow> = layout
        .probes
        .iter()
        .zip(tallies)
        .map(|(p, tally)| SummaryRow {
            name: &p.name,
            elevation_mm: p.elevation_mm,
            tally,
        })
        .collect();
    crate::shared::probe_summary::summary_table_fitted(
        &rows,
        crate::shared::stdout::terminal_width(),
    )
}

/// Levels that change during the record, segment by segment (drift tracking): every tip
/// listed takes its segment's levels at the segment's first frame.
#[derive(Clone, Debug, Default)]
pub struct LevelSchedule {
    /// Frames per segment (> 0).
    pub segment_frames: u64,
    /// (layout probe index, trailing tip, levels per segment).
    pub tips: Vec<(usize, bool, Vec<Levels>)>,
}

impl LevelSchedule {
    /// The schedule of a record's per-segment levels (tips without levels left out);
    /// `None` when the record was not learnt segment by segment.
    pub fn from_record(learnt: &RecordLevels) -> Option<LevelSchedule> {
        if learnt.segment_frames == 0 {
            return None;
        }
        let n = learnt.segment_count();
        let tips = learnt
            .tips
            .iter()
            .enumerate()
            .filter_map(|(i, t)| {
                let levels: Option<Vec<Levels>> =
                    (0..n).map(|k| learnt.levels_in_segment(i, k)).collect();
                levels.map(|l| (t.probe, t.trailing, l))
            })
            .collect();
        Some(LevelSchedule {
            segment_frames: learnt.segment_frames,
            tips,
        })
    }

    /// Apply the levels of the segment that starts at `frame`, if one does, to the tips of
    /// `chain` (`local` maps a layout probe index to the chain's).
    pub(crate) fn apply(
        &self,
        chain: &mut HostChain,
        frame: u64,
        local: &dyn Fn(usize) -> Option<usize>,
    ) {
        if self.segment_frames == 0 || !frame.is_multiple_of(self.segment_frames) {
            return;
        }
        let k = (frame / self.segment_frames) as usize;
        for (probe, trailing, levels) in &self.tips {
            if let (Some(p), Some(l)) = (local(*probe), levels.get(k)) {
                chain.set_tip_levels(p, *trailing, *l);
            }
        }
    }
}
