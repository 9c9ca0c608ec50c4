//! Running per-probe totals of a replay, for its summary table.
//!
//! A replay hands every record to the CSV writer and then folds it in here, so the memory a
//! replay needs does not grow with the length of the capture or the number of windows: one
//! fixed-size accumulator per probe (the chord statistics merge into a fixed histogram).

use crate::shared::rig::HostRecord;
use frothline_core::chord::ChordStats;
use frothline_core::Flags;

/// Totals of one probe over all its windows.
#[derive(Debug, Clone)]
pub struct ProbeTotals {
    /// Windows (records) of the probe.
    pub windows: u64,
    /// Frames of the leading tip over all windows.
    pub frames: u64,
    /// Frames the leading tip read air.
    pub air_frames: u64,
    /// Bubbles closed by the leading tip.
    pub bubbles: u64,
    /// Bubble chords of the leading tip, merged.
    pub chords: ChordStats,
    /// Every flag raised in any window.
    pub flags: Flags,
}

impl Default for ProbeTotals {
    fn default() -> Self {
        ProbeTotals {
            windows: 0,
            frames: 0,
            air_frames: 0,
            bubbles: 0,
            chords: ChordStats::new(),
            flags: Flags::NONE,
        }
    }
}

impl ProbeTotals {
    /// Void fraction over all windows (air frames / frames).
    pub fn void_fraction(&self) -> Option<f64> {
        (self.frames > 0).then(|| self.air_frames as f64 / self.frames as f64)
    }

    /// Bubble count rate over all windows, Hz.
    pub fn bubble_count_rate(&self, sample_rate: u32) -> Option<f64> {
        (self.frames > 0).then(|| self.bubbles as f64 * f64::from(sample_rate) / self.frames as f64)
    }
}

/// Totals of every probe of a run.
#[derive(Debug, Clone, Default)]
pub struct RunTotals {
    /// One entry per layout probe, in layout order.
    pub probes: Vec<ProbeTotals>,
    /// Records folded in.
    pub records: u64,
}

impl RunTotals {
    /// Totals for `probes` probes, all zero.
    pub fn new(probes: usize) -> RunTotals {
        RunTotals {
            probes: vec![ProbeTotals::default(); probes],
            records: 0,
        }
    }

    /// Folds one record in (a record of an unknown probe only counts as a record).
    pub fn add(&mut self, r: &HostRecord) {
        self.records = self.records.saturating_add(1);
        let Some(t) = self.probes.get_mut(usize::from(r.probe)) else {
            return;
        };
        t.windows = t.windows.saturating_add(1);
        t.frames = t.frames.saturating_add(r.lead.frames);
        t.air_frames = t.air_frames.saturating_add(r.lead.air_frames);
        t.bubbles = t.bubbles.saturating_add(u64::from(r.lead.bubbles));
        t.chords.merge(&r.lead.bubble_chords);
        t.flags |= r.flags;
    }

    /// Totals of a list of records.
    pub fn of<'a>(probes: usize, records: impl IntoIterator<Item = &'a HostRecord>) -> RunTotals {
        let mut t = RunTotals::new(probes);
        for r in records {
            t.add(r);
        }
        t
    }

    /// Analysis windows: the most windows any probe has (every probe has the same number
    /// under a fixed window policy).
    pub fn windows(&self) -> u64 {
        self.probes.iter().map(|p| p.windows).max().unwrap_or(0)
    }

    /// "N window(s) x M probe(s) (R rows)", for summaries.
    pub fn windows_phrase(&self) -> String {
        let plural =
            |n: u64, one: &str, many: &str| format!("{n} {}", if n == 1 { one } else { many });
        format!(
            "{} x {} ({})",
            plural(self.windows(), "window", "windows"),
            plural(self.probes.len() as u64, "probe", "probes"),
            plural(self.records, "row", "rows")
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn record(probe: u8, frames: u64, air_frames: u64, bubbles: u32) -> HostRecord {
        crate::shared::rig::test_record(probe, 0, frames, air_frames, bubbles)
    }

    /// Totals equal the sums over the records (void fraction as the frame-weighted mean,
    /// the definition of a time-averaged void fraction: common practice, no source).
    #[test]
    fn totals_are_the_sums_of_the_records() {
        let recs = [
            record(0, 100, 10, 2),
            record(1, 100, 50, 5),
            record(0, 300, 90, 6),
            record(7, 1, 1, 1),
        ];
        let t = RunTotals::of(2, &recs);
        assert_eq!(t.records, 4);
        assert_eq!(t.windows(), 2);
        assert_eq!(t.probes[0].void_fraction(), Some(100.0 / 400.0));
        assert_eq!(t.probes[0].bubble_count_rate(400), Some(8.0));
        assert_eq!(t.probes[1].windows, 1);
        assert_eq!(t.windows_phrase(), "2 windows x 2 probes (4 rows)");
        assert_eq!(RunTotals::new(1).probes[0].void_fraction(), None);
    }

    #[test]
    fn one_window_of_six_probes_is_not_six_windows() {
        let recs: Vec<HostRecord> = (0..6).map(|p| record(p, 10, 1, 1)).collect();
        let t = RunTotals::of(6, &recs);
        assert_eq!(t.windows_phrase(), "1 window x 6 probes (6 rows)");
    }
}
