//! `derived.csv` of a live session: one row per derived result of kind 0x08 (the derived
//! figures of a window result: chord lengths, interfacial area, Sauter diameter, cluster
//! counts and the random-arrival pair probability; see `frothline_core::derived`), in
//! the order they arrive. A row belongs to the windows.csv row of the same probe and
//! `window_start_s`. The cluster rate and the reference figures follow from the counts and
//! the window length: `clusters / duration`, `clustered / judged`, and for the reference
//! `1 − (1 − p)²`, `F p (1 − p)`.

use frothline_core::derived::RandomClusters;
use frothline_core::wire::quant::from_fraction;
use frothline_core::wire::DerivedResult;

/// The header row (the run columns of [`crate::shared::runs::RUN_COLUMNS`] follow).
pub const COLUMNS: &[&str] = &[
    "probe",
    "window_start_s",
    "bubble_chord_length_mean_mm",
    "bubble_chord_length_median_mm",
    "bubble_chord_length_p90_mm",
    "interfacial_area_per_m",
    "sauter_diameter_mm",
    "judged_bubbles",
    "bubble_pairs",
    "clusters",
    "clustered_bubbles",
    "clustered_fraction",
    "random_pair_probability",
    "random_clustered_fraction",
];

fn opt<T: std::fmt::Display>(v: Option<T>) -> String {
    v.map(|v| v.to_string()).unwrap_or_default()
}

/// One row, in [`COLUMNS`] order (`sample_rate_hz` none: the start time stays empty).
pub fn row(d: &DerivedResult, probe: &str, sample_rate_hz: Option<f64>) -> Vec<String> {
    let lengths = d.chord_lengths_mm();
    let p = d.random_pair_probability.map(from_fraction);
    vec![
        probe.to_string(),
        opt(sample_rate_hz
            .filter(|f| *f > 0.0)
            .map(|f| d.start as f64 / f)),
        opt(lengths.map(|l| l.0)),
        opt(lengths.map(|l| l.1)),
        opt(lengths.map(|l| l.2)),
        opt(d.interfacial_area_per_m()),
        opt(d.sauter_diameter_mm()),
        d.judged.to_string(),
        d.pairs.to_string(),
        d.clusters.to_string(),
        d.clustered.to_string(),
        opt((d.judged > 0).then(|| (d.clustered as f32 / d.judged as f32).min(1.0))),
        opt(p),
        opt(p.map(|p| RandomClusters::new(p, 0.0).clustered_fraction)),
    ]
}
