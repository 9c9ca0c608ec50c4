//! `windows.csv`: one row per probe per analysis window (column contract in DESIGN.md §3).
//!
//! The first twelve columns are the contract that scripts read; the extra columns after them
//! may grow. Empty cells mean "could not be computed". Flags are their names joined by `|`.

use crate::shared::rig::HostRecord as ProbeWindow;
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
    "transit_time_s",
    "secondary_peak_ratio",
    "t05_s",
    "tau05_s",
    "auto_integral_time_s",
    "cross_integral_time_s",
    "turbulence_intensity_skew_corrected",
    "trailing_air_level_counts",
    "trailing_water_level_counts",
    "levels_from",
    // derived figures (frothline_core::derived): chord lengths at the window's velocity,
    // specific interfacial area 4F/V, Sauter diameter 1.5CV/F, near-wake clusters and what
    // Poisson arrivals would give
    "bubble_chord_length_mean_mm",
    "bubble_chord_length_median_mm",
    "bubble_chord_length_p90_mm",
    "interfacial_area_per_m",
    "sauter_diameter_mm",
    "cluster_rate_hz",
    "bubbles_per_cluster",
    "clustered_fraction",
    "random_cluster_rate_hz",
    "random_bubbles_per_cluster",
    "random_clustered_fraction",
    "grouping_z",
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
    /// Where the leading tip's levels come from, for the `levels_from` column: `layout`
    /// (fixed there), `record` (learnt from the whole record before the replay),
    /// `record_one_phase` (one level measured, the other from the rig's median swing),
    /// `device_rule` (learnt during the record, as a device does); `None` when unknown
    /// (a live device's records).
    pub levels_from: Option<&'static str>,
}

fn opt<T: std::fmt::Display>(v: Option<T>) -> String {
    v.map(|v| v.to_string()).unwrap_or_default()
}

/// One row of `windows.csv` as strings, in [`COLUMNS`] order. `tip_spacing_mm` is the
/// probe's leading -> trailing distance (none for a single-tip probe).
pub fn row(
    rec: &ProbeWindow,
    meta: &ProbeMeta,
    sample_rate: u32,
    since_front_s: Option<f64>,
    tip_spacing_mm: Option<f64>,
) -> Vec<String> {
    let fs = sample_rate as f64;
    // Derived values are f32 in the core: print them as f32 so no false digits appear.
    let secs = |frames: f32| (frames as f64 / fs) as f32;
    let lead = &rec.lead;
    let chords = &lead.bubble_chords;
    let flags: Vec<&str> = rec.flags.names().collect();
    let corr = rec.correlation.as_ref();
    let fs32 = sample_rate as f32;
    let velocity = corr.and_then(|c| c.velocity_m_s(tip_spacing_mm? as f32, fs32));
    let d = frothline_core::derived::Derived::of_tip(lead, fs32, velocity);
    let r = d.random;
    vec![
        meta.name.clone(),
        (rec.start as f64 / fs).to_string(),
        (rec.end as f64 / fs).to_string(),
        opt(since_front_s),
        opt(lead.void_fraction()),
        opt(lead.bubble_count_rate(sample_rate as f32)),
        opt(chords.mean().map(secs)),
        opt(velocity),
        opt(corr.and_then(|c| c.peak_coefficient)),
        opt(corr.and_then(|c| c.turbulence_intensity)),
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
        opt(corr.and_then(|c| c.transit_time_s(fs32))),
        opt(corr.and_then(|c| c.secondary_peak_ratio)),
        opt(corr.and_then(|c| c.t05_frames).map(secs)),
        opt(corr.and_then(|c| c.tau05_frames).map(secs)),
        opt(corr.and_then(|c| c.auto_integral_frames).map(secs)),
        opt(corr.and_then(|c| c.cross_integral_frames).map(secs)),
        opt(corr
            .and_then(|c| c.turbulence_intensity)
            .and_then(frothline_core::correlation::tu_for_gaussian_velocity)),
        opt(rec.trail.as_ref().and_then(|t| t.levels).map(|l| l.air)),
        opt(rec.trail.as_ref().and_then(|t| t.levels).map(|l| l.water)),
        opt(lead.levels.and(meta.levels_from)),
        opt(d.chord_length_mean_mm),
        opt(d.chord_length_median_mm),
        opt(d.chord_length_p90_mm),
        opt(d.interfacial_area_per_m),
        opt(d.sauter_diameter_mm),
        opt(d.cluster_rate_hz),
        opt(d.bubbles_per_cluster),
        opt(d.clustered_fraction),
        opt(r.map(|r| r.cluster_rate_hz)),
        opt(r.and_then(|r| r.bubbles_per_cluster)),
        opt(r.map(|r| r.clustered_fraction)),
        opt(d.grouping_z),
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

    /// Start a live file: the header row with the run columns
    /// ([`crate::shared::runs::RUN_COLUMNS`]) after [`COLUMNS`].
    pub fn new_live(sink: W) -> csv::Result<Self> {
        let mut out = csv::Writer::from_writer(sink);
        out.write_record(
            COLUMNS
                .iter()
                .chain(crate::shared::runs::RUN_COLUMNS.iter()),
        )?;
        Ok(WindowsCsv { out })
    }

    /// Write one record.
    pub fn write(
        &mut self,
        rec: &ProbeWindow,
        meta: &ProbeMeta,
        sample_rate: u32,
        since_front_s: Option<f64>,
        tip_spacing_mm: Option<f64>,
    ) -> csv::Result<()> {
        self.out
            .write_record(row(rec, meta, sample_rate, since_front_s, tip_spacing_mm))
    }

    /// Flush and hand back the sink.
    pub fn finish(self) -> std::io::Result<W> {
        self.out.into_inner().map_err(|e| e.into_error())
    }
}

/// One row of `windows.csv` from a window result decoded off the wire, in [`COLUMNS`] order.
///
/// The row matches [`row`] of the record the device quantised, to the wire's resolution:
/// times from the sample clock and `sample_rate_hz` (cells empty while the rate is unknown),
/// fractions to 1e-4, rates to 0.01 Hz, chords to 1 µs, velocity to 1 mm/s. Columns a window
/// result does not carry (droplet chords, trailing-tip C and F, levels, correlation time
/// scales: see [`fill_extras`] for a full window) are empty, and so are
/// the elevation and position of a probe the device did not describe (NaN in `meta`).
pub fn wire_row(
    w: &frothline_core::wire::WindowResult,
    meta: &ProbeMeta,
    sample_rate_hz: Option<f64>,
    since_front_s: Option<f64>,
) -> Vec<String> {
    use frothline_core::wire::quant::{from_fraction, from_micros};
    let fs = sample_rate_hz.filter(|f| *f > 0.0);
    let secs = |frames: u64| fs.map(|fs| frames as f64 / fs);
    let chord = |us: fn(&frothline_core::wire::ChordTimes) -> u32| {
        w.chords.as_ref().map(|c| from_micros(us(c)))
    };
    let corr = w.correlation.as_ref();
    let flags: Vec<&str> = frothline_core::Flags(w.flags).names().collect();
    let finite = |v: f64| v.is_finite().then_some(v);
    let mut fields = vec![
        meta.name.clone(),
        opt(secs(w.start)),
        opt(secs(w.start.saturating_add(w.frames as u64))),
        opt(since_front_s),
        w.void_fraction_value().to_string(),
        w.bubble_rate_hz().to_string(),
        opt(chord(|c| c.mean)),
        opt(w.velocity_m_s()),
        opt(corr.map(|c| from_fraction(c.peak))),
        opt(w.turbulence_intensity()),
        w.bubbles.to_string(),
        flags.join("|"),
        opt(finite(meta.elevation_mm)),
        opt(finite(meta.x_mm)),
        opt(chord(|c| c.median)),
        opt(chord(|c| c.p10)),
        opt(chord(|c| c.p90)),
        String::new(),
        String::new(),
        String::new(),
        String::new(),
        String::new(),
    ];
    // Columns the wire does not carry stay empty.
    fields.resize(COLUMNS.len(), String::new());
    // Tu corrected as replay corrects it, from the Tu on the wire.
    set(
        &mut fields,
        "turbulence_intensity_skew_corrected",
        w.turbulence_intensity()
            .and_then(frothline_core::correlation::tu_for_gaussian_velocity),
    );
    fields
}

fn set<T: std::fmt::Display>(fields: &mut [String], column: &str, v: Option<T>) {
    if let (Some(v), Some(i)) = (v, COLUMNS.iter().position(|c| *c == column)) {
        fields[i] = v.to_string();
    }
}

/// Fill the columns a window result leaves out from the extras of a full window (kind
/// 0x0B): the droplet chord, the trailing tip's C and F, both tips' levels and the
/// correlation's time scales, at the wire's resolution (times to 1 µs, fractions to 1e-4).
pub fn fill_extras(fields: &mut [String], x: &frothline_core::wire::WindowExtras) {
    use frothline_core::wire::quant::{from_fraction, from_micros, from_rate};
    set(
        fields,
        "droplet_chord_mean_s",
        x.droplet_chord_mean.map(from_micros),
    );
    set(
        fields,
        "trailing_void_fraction",
        x.trailing.map(|t| from_fraction(t.void_fraction)),
    );
    set(
        fields,
        "trailing_bubble_count_rate_hz",
        x.trailing.map(|t| from_rate(t.bubble_rate)),
    );
    set(fields, "air_level_counts", x.levels.map(|l| l.air));
    set(fields, "water_level_counts", x.levels.map(|l| l.water));
    set(
        fields,
        "trailing_air_level_counts",
        x.trailing_levels.map(|l| l.air),
    );
    set(
        fields,
        "trailing_water_level_counts",
        x.trailing_levels.map(|l| l.water),
    );
    let c = x.correlation.as_ref();
    set(
        fields,
        "transit_time_s",
        c.and_then(|c| c.transit).map(from_micros),
    );
    set(
        fields,
        "secondary_peak_ratio",
        c.and_then(|c| c.secondary_peak_ratio).map(from_fraction),
    );
    set(fields, "t05_s", c.and_then(|c| c.t05).map(from_micros));
    set(fields, "tau05_s", c.and_then(|c| c.tau05).map(from_micros));
    set(
        fields,
        "auto_integral_time_s",
        c.and_then(|c| c.auto_integral).map(from_micros),
    );
    set(
        fields,
        "cross_integral_time_s",
        c.and_then(|c| c.cross_integral).map(from_micros),
    );
}

impl<W: Write> WindowsCsv<W> {
    /// Write one row already in [`COLUMNS`] order (from [`row`] or [`wire_row`]).
    pub fn write_fields(&mut self, fields: &[String]) -> csv::Result<()> {
        self.out.write_record(fields)
    }

    /// Flush buffered rows to the sink (a live session flushes after every batch, so a
    /// killed process leaves whole rows behind).
    pub fn flush(&mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}
