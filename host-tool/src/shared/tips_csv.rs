//! `tips.csv` of a live session: the tip health a device sends (wire kind 0x09), one row
//! per tip and report. A device reports every probe's latest window about once per health
//! period (docs/wire-protocol.md, section 11), so the file holds a sample of the windows,
//! not every one; its rows name the window they describe (`window_start_s`,
//! `window_end_s`, as in windows.csv).
//!
//! Columns: `probe`, `tip` (`leading`/`trailing`), `window_start_s`, `window_end_s`,
//! `air_level_counts`, `water_level_counts`, `swing_counts` (|water - air|),
//! `interfaces_per_s`, `void_fraction`, `bubble_count_rate_hz` (this tip's), `flags`
//! (this tip's, CSV names joined by `|`), then the run columns of every live file.

use crate::shared::error::HostError;
use crate::shared::lazy_csv::LazyCsv;
use frothline_core::wire::{quant, TipReport, TipState};
use frothline_core::Flags;
use std::path::Path;

/// The columns of tips.csv.
pub fn columns() -> Vec<&'static str> {
    let mut c = vec![
        "probe",
        "tip",
        "window_start_s",
        "window_end_s",
        "air_level_counts",
        "water_level_counts",
        "swing_counts",
        "interfaces_per_s",
        "void_fraction",
        "bubble_count_rate_hz",
        "flags",
    ];
    c.extend(crate::shared::runs::RUN_COLUMNS);
    c
}

/// The cells of one tip before the run columns; times need the sample rate `fs`.
pub fn tip_cells(
    name: &str,
    which: &str,
    r: &TipReport,
    t: &TipState,
    fs: Option<f64>,
) -> Vec<String> {
    let secs = |frames: u64| fs.map_or(String::new(), |fs| (frames as f64 / fs).to_string());
    let opt = |v: Option<String>| v.unwrap_or_default();
    let rate = |n: u32| {
        fs.filter(|_| r.frames > 0)
            .map(|fs| (n as f64 * fs / r.frames as f64).to_string())
    };
    let flags: Vec<&str> = Flags(t.flags).names().collect();
    vec![
        name.to_string(),
        which.to_string(),
        secs(r.start),
        secs(r.start.saturating_add(r.frames as u64)),
        opt(t.levels.map(|l| l.air.to_string())),
        opt(t.levels.map(|l| l.water.to_string())),
        opt(t.levels.map(|l| l.swing().to_string())),
        opt(rate(t.interfaces)),
        quant::from_fraction(t.void_fraction).to_string(),
        opt(rate(t.bubbles)),
        flags.join("|"),
    ]
}

/// A tips.csv writer: created at the first report.
pub struct TipsCsv(LazyCsv);

impl TipsCsv {
    /// Rows for `dir/tips.csv` (nothing is created before the first report).
    pub fn new(dir: &Path) -> Self {
        TipsCsv(LazyCsv::new(dir.join("tips.csv"), columns()))
    }

    /// The file's path.
    pub fn path(&self) -> &Path {
        self.0.path()
    }

    /// Write `rows`; returns true when this created the file.
    pub fn write(&mut self, rows: &[Vec<String>]) -> Result<bool, HostError> {
        self.0.write(rows)
    }
}
