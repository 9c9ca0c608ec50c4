//! Kind 0x08 body: the derived figures of per-probe windows ([`crate::derived`]), sent after
//! the window results they belong to (matched by `probe` and `start`).
//!
//! A frame of its own, so that no body of kind 0x02 changes: a host that does not read kind
//! 0x08 skips it (section 5 of docs/wire-protocol.md) and keeps every window result.

use heapless::Vec;
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::derived::Derived;
use crate::record::ProbeWindow;
use crate::wire::quant::fraction;
use crate::wire::MAX_WINDOWS_PER_FRAME;

/// Chord lengths, 0.01 mm.
pub const CHORD_LENGTH_SCALE: f32 = 100.0;
/// Specific interfacial area, 0.1 1/m.
pub const AREA_SCALE: f32 = 10.0;
/// Sauter diameter, 0.001 mm (µm).
pub const SAUTER_SCALE: f32 = 1000.0;

/// Kind 0x08 body: 1 to [`MAX_WINDOWS_PER_FRAME`] derived results.
pub type DerivedBatch = Vec<DerivedResult, MAX_WINDOWS_PER_FRAME>;

/// Bubble chord lengths of one window, 0.01 mm (saturating).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChordLengths {
    /// Mean chord length.
    pub mean: u32,
    /// Median chord length.
    pub median: u32,
    /// 90th percentile.
    pub p90: u32,
}

/// The derived figures of one probe over one window.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DerivedResult {
    /// Probe index.
    pub probe: u8,
    /// First frame of the window (the `start` of its window result).
    pub start: u64,
    /// Chord lengths; absent without a velocity or without bubble chords.
    pub chord_lengths: Option<ChordLengths>,
    /// Specific interfacial area `4F/V`, 0.1 1/m; absent without a velocity.
    pub interfacial_area: Option<u32>,
    /// Sauter mean diameter `1.5 C V / F`, 0.001 mm; absent without a velocity or bubbles.
    pub sauter_diameter: Option<u32>,
    /// Bubbles judged by the near-wake criterion.
    pub judged: u32,
    /// Judged bubbles that pair with the next.
    pub pairs: u32,
    /// Clusters begun.
    pub clusters: u32,
    /// Bubbles in clusters.
    pub clustered: u32,
    /// Pair probability of random (Poisson) arrivals, 1e-4.
    pub random_pair_probability: Option<u16>,
}

fn fixed(x: f32, scale: f32) -> u32 {
    // NaN fails the comparison and becomes 0; the cast saturates.
    if x > 0.0 {
        (x * scale + 0.5) as u32
    } else {
        0
    }
}

impl DerivedResult {
    /// The derived figures of a chain record's leading tip, at `sample_rate_hz`, with the
    /// velocity of a dual-tip probe whose tips are `spacing_mm` apart (none: no velocity).
    pub fn from_probe_window_with_spacing<const L: usize>(
        rec: &ProbeWindow<L>,
        sample_rate_hz: f32,
        spacing_mm: Option<f32>,
    ) -> DerivedResult {
        let v = rec
            .correlation
            .as_ref()
            .zip(spacing_mm)
            .and_then(|(c, s)| c.velocity_m_s(s, sample_rate_hz));
        let d = Derived::of_tip(&rec.lead, sample_rate_hz, v);
        let len = |mm: Option<f32>| mm.map(|x| fixed(x, CHORD_LENGTH_SCALE));
        let cl = &rec.lead.clusters;
        DerivedResult {
            probe: rec.probe,
            start: rec.start,
            chord_lengths: match (
                len(d.chord_length_mean_mm),
                len(d.chord_length_median_mm),
                len(d.chord_length_p90_mm),
            ) {
                (Some(mean), Some(median), Some(p90)) => Some(ChordLengths { mean, median, p90 }),
                _ => None,
            },
            interfacial_area: d.interfacial_area_per_m.map(|a| fixed(a, AREA_SCALE)),
            sauter_diameter: d.sauter_diameter_mm.map(|x| fixed(x, SAUTER_SCALE)),
            judged: cl.judged,
            pairs: cl.pairs,
            clusters: cl.clusters,
            clustered: cl.clustered,
            random_pair_probability: d.random.map(|r| fraction(r.pair_probability)),
        }
    }

    /// Chord lengths (mean, median, p90), mm.
    pub fn chord_lengths_mm(&self) -> Option<(f32, f32, f32)> {
        self.chord_lengths.map(|c| {
            (
                c.mean as f32 / CHORD_LENGTH_SCALE,
                c.median as f32 / CHORD_LENGTH_SCALE,
                c.p90 as f32 / CHORD_LENGTH_SCALE,
            )
        })
    }

    /// Specific interfacial area, 1/m.
    pub fn interfacial_area_per_m(&self) -> Option<f32> {
        self.interfacial_area.map(|a| a as f32 / AREA_SCALE)
    }

    /// Sauter diameter, mm.
    pub fn sauter_diameter_mm(&self) -> Option<f32> {
        self.sauter_diameter.map(|d| d as f32 / SAUTER_SCALE)
    }
}
