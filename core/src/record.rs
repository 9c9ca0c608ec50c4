//! The records the chain produces.

use crate::chord::ChordStats;
use crate::cluster::ClusterStats;
use crate::correlation::{CorrelationResult, CorrelationSums, DEFAULT_LAGS};
use crate::flags::Flags;
use crate::levels::Levels;
use crate::quotient::count_quotient;

/// Statistics of one tip over one window.
///
/// Counting rule for chords that straddle a window edge: a bubble (air chord) belongs to the
/// window that holds its closing interface (air -> water), a droplet (water chord) to the
/// window that holds its closing water -> air interface; the chord's full length goes into
/// that window's chord statistics. So every chord is counted exactly once, and a window's
/// record is complete when the window ends. A chord cut by the start of the record has an
/// unknown length: it is counted in `bubbles`/`droplets` but not in the chord statistics. A
/// chord still open when the record ends is not counted. Void fraction is exact: air frames
/// over frames of the window, whatever the chords do.
#[derive(Clone, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct TipStats {
    /// Frames in the window.
    pub frames: u64,
    /// Frames in air.
    pub air_frames: u64,
    /// Frames at an ADC rail.
    pub rail_frames: u64,
    /// Frames processed before the levels were known (phase held).
    pub unlearnt_frames: u64,
    /// Bubbles closed in the window (air -> water interfaces).
    pub bubbles: u32,
    /// Droplets closed in the window (water -> air interfaces).
    pub droplets: u32,
    /// Chords of the bubbles with a known start, samples.
    pub bubble_chords: ChordStats,
    /// Chords of the droplets (water between bubbles) with a known start, samples.
    pub droplet_chords: ChordStats,
    /// Particle grouping: bubbles followed by a water chord shorter than their own chord
    /// (see [`crate::derived`]).
    pub clusters: ClusterStats,
    /// The levels in use when the window closed.
    pub levels: Option<Levels>,
    /// Quality flags of this tip.
    pub flags: Flags,
}

impl TipStats {
    /// Nothing counted (a record slot not filled yet).
    pub(crate) const ZERO: Self = TipStats {
        frames: 0,
        air_frames: 0,
        rail_frames: 0,
        unlearnt_frames: 0,
        bubbles: 0,
        droplets: 0,
        bubble_chords: ChordStats::ZERO,
        droplet_chords: ChordStats::ZERO,
        clusters: ClusterStats::ZERO,
        levels: None,
        flags: Flags::NONE,
    };

    /// Void fraction: the fraction of the window's frames in air.
    pub fn void_fraction(&self) -> Option<f32> {
        (self.frames > 0).then(|| count_quotient(self.air_frames, self.frames))
    }

    /// Standard error of [`void_fraction`](Self::void_fraction) from the window's chords
    /// (the renewal-process variance of [`crate::profile::renewal_sigma`]: cycles are the
    /// closed bubbles or droplets, whichever are more, the chord spreads from the
    /// histograms).
    pub fn void_fraction_sigma(&self) -> Option<f32> {
        let c = self.void_fraction()?;
        Some(crate::profile::renewal_sigma(
            c,
            self.bubbles.max(self.droplets),
            self.bubble_chords.cv2(),
            self.droplet_chords.cv2(),
        ))
    }

    /// Bubble count rate, bubbles per second, at `sample_rate` frames per second.
    pub fn bubble_count_rate(&self, sample_rate: f32) -> Option<f32> {
        (self.frames > 0 && sample_rate > 0.0)
            .then(|| (self.bubbles as f64 * sample_rate as f64 / self.frames as f64) as f32)
    }

    /// Number of interfaces in the window.
    pub fn interfaces(&self) -> u32 {
        self.bubbles.saturating_add(self.droplets)
    }
}

/// One probe over one window. `L` is the chain's number of correlation lag slots (see
/// [`crate::Chain`]).
#[derive(Clone, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProbeWindow<const L: usize = DEFAULT_LAGS> {
    /// Index of the probe in the configuration.
    pub probe: u8,
    /// First frame of the window (absolute index since the run started).
    pub start: u64,
    /// One past the last frame of the window.
    pub end: u64,
    /// Station chains (transient flows): `start` minus the station's front arrival, frames
    /// (negative before the front). `None` in steady chains, and for windows that closed
    /// before the statistics reached the front (the arrival was not fixed yet).
    pub since_front: Option<i64>,
    /// The leading tip: the probe's statistics.
    pub lead: TipStats,
    /// The trailing tip, if the probe has one.
    pub trail: Option<TipStats>,
    /// The probe's flags: the leading tip's, plus window-, trailing-tip and correlation
    /// flags.
    pub flags: Flags,
    /// The dual-tip correlation results (probes with a trailing tip only). Present for
    /// every window of such a probe; values that could not be computed are `None`, with
    /// the reason in `flags`.
    pub correlation: Option<CorrelationResult>,
    /// The exact correlation sums behind `correlation`, lag by lag (for ensemble averaging
    /// over runs: see [`CorrelationSums::merge`]).
    pub correlation_sums: Option<CorrelationSums<L>>,
}

impl<const L: usize> ProbeWindow<L> {
    /// An empty record (a queue slot not filled yet).
    pub(crate) const ZERO: Self = ProbeWindow {
        probe: 0,
        start: 0,
        end: 0,
        since_front: None,
        lead: TipStats::ZERO,
        trail: None,
        flags: Flags::NONE,
        correlation: None,
        correlation_sums: None,
    };

    /// The same record with `correlation_sums` (its own, if any, left out), as a record
    /// type of `M` lag slots.
    pub(crate) fn with_sums<const M: usize>(
        &self,
        correlation_sums: Option<CorrelationSums<M>>,
    ) -> ProbeWindow<M> {
        ProbeWindow {
            probe: self.probe,
            start: self.start,
            end: self.end,
            since_front: self.since_front,
            lead: self.lead.clone(),
            trail: self.trail.clone(),
            flags: self.flags,
            correlation: self.correlation,
            correlation_sums,
        }
    }

    /// The same record without its raw correlation sums, as a record type of `M` lag slots
    /// (pick a small `M`): what a consumer keeps when it only needs the results. Moving a
    /// record moves its sums too (`28 L` bytes), so a host that stores or sends many records
    /// converts them first.
    pub fn without_sums<const M: usize>(&self) -> ProbeWindow<M> {
        let ProbeWindow {
            probe,
            start,
            end,
            since_front,
            lead,
            trail,
            flags,
            correlation,
            correlation_sums: _,
        } = self;
        ProbeWindow {
            probe: *probe,
            start: *start,
            end: *end,
            since_front: *since_front,
            lead: lead.clone(),
            trail: trail.clone(),
            flags: *flags,
            correlation: *correlation,
            correlation_sums: None,
        }
    }
}
