//! Pooled chord distributions of a replay: `chords.csv` (bubble chord times) and
//! `chord_lengths.csv` (bubble chord lengths), one histogram per probe over the windows the
//! run summary uses.
//!
//! Chord times pool exactly: every window's log-spaced chord-time histogram
//! ([`frothline_core::chord`]) merges bin by bin; the file gives each bin the continuous
//! chord times it stands for (a chord of `n` frames stands for `n − ½ .. n + ½`, the core's
//! continuity correction). A chord length is a chord time times the
//! interfacial velocity of its window (`ch = t_ch V`, the usual dual-tip reduction: a bubble
//! is taken to cross the tip at the window's mean velocity), so each window's time bins are
//! scaled by its own velocity and shared out among fixed length bins in proportion to their
//! overlap on a logarithmic scale (counts are spread evenly in log time inside a bin, as the
//! core's percentiles assume). Lengths of windows at different velocities then add up in one
//! histogram, which chord times alone cannot do across elevations.
//!
//! Which windows count: the rule of [`crate::shared::probe_summary`]: none before the front
//! or with an excluded flag; for lengths, also none whose velocity is untrusted or missing.

use crate::offline::replay_common::window_figures;
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::output_set::OutputSet;
use crate::shared::probe_summary::SummaryRule;
use crate::shared::rig::HostRecord;
use frothline_core::chord::{continuous_span, ChordStats, CHORD_BINS};
use frothline_core::Flags;

/// Length bins per octave (a quarter octave each, as the core's chord-time bins).
const LENGTH_BINS_PER_OCTAVE: i32 = 4;
/// Lower edge of the first length bin: 2^-10 mm (about 1 µm).
const LENGTH_FIRST_OCTAVE: i32 = -10;
/// Length bins: 2^-10 mm to 2^12 mm (4.1 m), 22 octaves.
pub const LENGTH_BINS: usize = 88;

/// Header of chords.csv.
pub const CHORD_TIME_COLUMNS: &[&str] = &["probe", "bin_lower_s", "bin_upper_s", "count"];
/// Header of chord_lengths.csv.
pub const CHORD_LENGTH_COLUMNS: &[&str] = &[
    "probe",
    "elevation_mm",
    "bin_lower_mm",
    "bin_upper_mm",
    "count",
];

/// Edge `k` of the length bins, mm (edge 0 is the lower edge of bin 0).
pub fn length_edge_mm(k: usize) -> f64 {
    let e = LENGTH_FIRST_OCTAVE as f64 + k as f64 / LENGTH_BINS_PER_OCTAVE as f64;
    e.exp2()
}

/// The pooled chords of one probe.
#[derive(Clone, Debug)]
struct ProbePool {
    times: ChordStats,
    lengths: [f64; LENGTH_BINS],
}

/// Pooled chord-time and chord-length histograms of every probe of a run.
#[derive(Clone, Debug)]
pub struct ChordPool {
    probes: Vec<ProbePool>,
    rule: SummaryRule,
}

impl ChordPool {
    /// Nothing pooled yet, for `probes` layout probes, under the default summary rule.
    pub fn new(probes: usize) -> ChordPool {
        ChordPool {
            probes: vec![
                ProbePool {
                    times: ChordStats::new(),
                    lengths: [0.0; LENGTH_BINS],
                };
                probes
            ],
            rule: SummaryRule::default(),
        }
    }

    /// Pool the bubble chords of one window record (`spacing_mm`: its probe's tip spacing).
    pub fn add(&mut self, r: &HostRecord, sample_rate: u32, spacing_mm: Option<f64>) {
        let Some(pool) = self.probes.get_mut(usize::from(r.probe)) else {
            return;
        };
        let w = window_figures(r, sample_rate, spacing_mm);
        if w.before_front
            || w.flags.contains(Flags::PRE_FRONT)
            || w.flags.0 & self.rule.excluded.0 != 0
        {
            return;
        }
        let chords = &r.lead.bubble_chords;
        pool.times.merge(chords);
        let v = w.velocity_m_s.filter(|v| {
            v.is_finite() && *v > 0.0 && w.flags.0 & self.rule.untrusted_velocity.0 == 0
        });
        let Some(v) = v else {
            return;
        };
        // mm per sample of chord time
        let scale = v * 1e3 / f64::from(sample_rate.max(1));
        for (b, &n) in chords.bins.iter().enumerate().filter(|(_, n)| **n > 0) {
            let (lo, hi) = span(chords, b);
            spread(&mut pool.lengths, lo * scale, hi * scale, f64::from(n));
        }
    }

    /// Write chords.csv and chord_lengths.csv into `set` (rows only for non-empty bins);
    /// returns the names written.
    pub fn write(
        &self,
        set: &OutputSet,
        layout: &Layout,
        sample_rate: u32,
    ) -> Result<Vec<&'static str>, HostError> {
        let fs = f64::from(sample_rate.max(1));
        let mut times = Vec::new();
        let mut lengths = Vec::new();
        for (pool, probe) in self.probes.iter().zip(&layout.probes) {
            for b in (0..CHORD_BINS).filter(|&b| pool.times.bins[b] > 0) {
                let (lo, hi) = span(&pool.times, b);
                times.push(vec![
                    probe.name.clone(),
                    format!("{:.6e}", lo / fs),
                    format!("{:.6e}", hi / fs),
                    pool.times.bins[b].to_string(),
                ]);
            }
            for (k, &n) in pool.lengths.iter().enumerate().filter(|(_, n)| **n > 0.0) {
                lengths.push(vec![
                    probe.name.clone(),
                    probe.elevation_mm.to_string(),
                    format!("{:.6e}", length_edge_mm(k)),
                    format!("{:.6e}", length_edge_mm(k + 1)),
                    format!("{n:.3}"),
                ]);
            }
        }
        set.write_csv("chords.csv", CHORD_TIME_COLUMNS, &times)?;
        set.write_csv("chord_lengths.csv", CHORD_LENGTH_COLUMNS, &lengths)?;
        Ok(vec!["chords.csv", "chord_lengths.csv"])
    }
}

/// The continuous chord times of bin `b` of `s`, samples: the core's continuity-corrected
/// span ([`continuous_span`]), cut to the shortest and longest chord counted.
fn span(s: &ChordStats, b: usize) -> (f64, f64) {
    let (lo, hi) = continuous_span(b, s.max);
    let lo = f64::from(lo).max(f64::from(s.min) - 0.5);
    let hi = f64::from(hi).min(f64::from(s.max) + 0.5).max(lo);
    (lo, hi)
}

/// Share `n` chords spread evenly in log length over [lo, hi) mm among the length bins.
fn spread(bins: &mut [f64; LENGTH_BINS], lo: f64, hi: f64, n: f64) {
    if !(lo > 0.0 && hi > lo && lo.is_finite() && hi.is_finite()) {
        return;
    }
    let per_octave = f64::from(LENGTH_BINS_PER_OCTAVE);
    // positions in bin units
    let (a, b) = (
        (lo.log2() - f64::from(LENGTH_FIRST_OCTAVE)) * per_octave,
        (hi.log2() - f64::from(LENGTH_FIRST_OCTAVE)) * per_octave,
    );
    let last = LENGTH_BINS as f64;
    // beyond the grid: into the end bins
    let (a, b) = (a.clamp(0.0, last), b.clamp(0.0, last));
    if b <= a {
        let k = if a >= last { LENGTH_BINS - 1 } else { 0 };
        bins[k] += n;
        return;
    }
    let span = b - a;
    let mut k = a.floor() as usize;
    while k < LENGTH_BINS && (k as f64) < b {
        let overlap = b.min(k as f64 + 1.0) - a.max(k as f64);
        if overlap > 0.0 {
            bins[k] += n * overlap / span;
        }
        k += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edges_are_quarter_octaves_from_one_micrometre() {
        assert!((length_edge_mm(0) - 1.0 / 1024.0).abs() < 1e-15);
        assert!((length_edge_mm(40) - 1.0).abs() < 1e-12);
        assert!((length_edge_mm(LENGTH_BINS) - 4096.0).abs() < 1e-9);
        assert!((length_edge_mm(41) / length_edge_mm(40) - 2f64.powf(0.25)).abs() < 1e-12);
    }

    /// A bin that lies inside one length bin lands there whole; one spanning two bins is
    /// shared by log overlap; counts are conserved, also past the ends of the grid.
    #[test]
    fn spreading_conserves_counts_and_follows_log_overlap() {
        let mut bins = [0.0; LENGTH_BINS];
        let e = length_edge_mm;
        spread(&mut bins, e(40) * 1.01, e(41) * 0.99, 7.0);
        assert_eq!(bins[40], 7.0);
        let mut bins = [0.0; LENGTH_BINS];
        // from the middle (in log) of bin 40 to the middle of bin 41: half and half
        let mid = |k: usize| (e(k) * e(k + 1)).sqrt();
        spread(&mut bins, mid(40), mid(41), 10.0);
        assert!((bins[40] - 5.0).abs() < 1e-9 && (bins[41] - 5.0).abs() < 1e-9);
        let mut bins = [0.0; LENGTH_BINS];
        spread(&mut bins, 1e-9, 1e-8, 2.0);
        spread(&mut bins, 1e6, 1e7, 3.0);
        spread(&mut bins, 1e-4, 1e5, 4.0);
        assert!((bins.iter().sum::<f64>() - 9.0).abs() < 1e-9);
        assert!(bins[0] > 2.0 && bins[LENGTH_BINS - 1] > 3.0);
        spread(&mut bins, f64::NAN, 1.0, 1.0);
        spread(&mut bins, 2.0, 1.0, 1.0);
        assert!((bins.iter().sum::<f64>() - 9.0).abs() < 1e-9);
    }
}
