//! `windows.csv`: one row per probe per analysis window (column contract in DESIGN.md §3).
//!
//! The first twelve columns are the contract that scripts read; the extra columns after them
//! may grow. Empty cells mean "could not be computed". Flags are their names joined by `|`.

use frothline_core::ProbeWindow;
use std::io::Write;

/// The header row.
pub const COLUMNS: &[&str] = &[
    "probe",
    "window_start_s",
    "window_end_s",
    "since_front_s",
    "void_fraction",
    "bubble_count_rate_hz",
    "bubble_chord_mean_s",
    "interfacial_velocity_m_s",
    "correlation_peak",
    "turbulence_intensity",
    "bubbles",
    "flags",
    // extra columns, after the contract
    "elevation_mm",
    "x_mm",
    "bubble_chord_median_s",
    "bubble_chord_p10_s",
    "bubble_chord_p90_s",
    "droplet_chord_mean_s",
    "trailing_void_fraction",
    "trailing_bubble_count_rate_hz",
    "air_level_counts",
    "water_level_counts",
];

/// What a row needs to know about its probe besides the record.
#[derive(Clone, Debug)]
pub struct ProbeMeta {
    /// Probe name from the layout.
    pub name: String,
    /// Tip elevation above the bed, mm.
    pub elevation_mm: f64,
    /// Streamwise position, mm.
    pub x_mm: f64,
}

fn opt<T: std::fmt::Display>(v: Option<T>) -> String {
    v.map(|v| v.to_string()).unwrap_or_default()
}

/// One row of `windows.csv` as strings, in [`COLUMNS`] order.
pub fn row(
    rec: &ProbeWindow,
    meta: &ProbeMeta,
    sample_rate: u32,
    since_front_s: Option<f64>,
) -> Vec<String> {
    let fs = sample_rate as f64;
    // Derived values are f32 in the core: print them as f32 so no false digits appear.
    let secs = |frames: f32| (frames as f64 / fs) as f32;
    let lead = &rec.lead;
    let chords = &lead.bubble_chords;
    let flags: Vec<&str> = rec.flags.names().collect();
    vec![
        meta.name.clone(),
        (rec.start as f64 / fs).to_string(),
        (rec.end as f64 / fs).to_string(),
        opt(since_front_s),
        opt(lead.void_fraction()),
        opt(lead.bubble_count_rate(sample_rate as f32)),
        opt(chords.mean().map(secs)),
        String::new(),
        String::new(),
        String::new(),
        lead.bubbles.to_string(),
        flags.join("|"),
        meta.elevation_mm.to_string(),
        meta.x_mm.to_string(),
        opt(chords.median().map(secs)),
        opt(chords.quantile(0.1).map(secs)),
        opt(chords.quantile(0.9).map(secs)),
        opt(lead.droplet_chords.mean().map(secs)),
        opt(rec.trail.as_ref().and_then(|t| t.void_fraction())),
        opt(rec
            .trail
            .as_ref()
            .and_then(|t| t.bubble_count_rate(sample_rate as f32))),
        opt(lead.levels.map(|l| l.air)),
        opt(lead.levels.map(|l| l.water)),
    ]
}

/// A `windows.csv` writer over any byte sink.
pub struct WindowsCsv<W: Write> {
    out: csv::Writer<W>,
}

impl<W: Write> WindowsCsv<W> {
    /// Start the file: writes the header row.
    pub fn new(sink: W) -> csv::Result<Self> {
        let mut out = csv::Writer::from_writer(sink);
        out.write_record(COLUMNS)?;
        Ok(WindowsCsv { out })
    }

    /// Write one record.
    pub fn write(
        &mut self,
        rec: &ProbeWindow,
        meta: &ProbeMeta,
        sample_rate: u32,
        since_front_s: Option<f64>,
    ) -> csv::Result<()> {
        self.out
            .write_record(row(rec, meta, sample_rate, since_front_s))
    }

    /// Flush and hand back the sink.
    pub fn finish(self) -> std::io::Result<W> {
        self.out.into_inner().map_err(|e| e.into_error())
    }
}
