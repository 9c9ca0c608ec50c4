//! The near-wake cluster tally of one tip: a bubble and the next pair when the water chord
//! between them is shorter than the leading bubble's chord, a fraction of it, or a fixed time
//! ([`NearWake`]; see [`crate::derived`] for the criterion, its source and the random-arrival
//! reference). A leaf: it imports nothing of the chain, so the records and the tip
//! accumulator can both hold it.

/// The near-wake criterion: when a bubble and the next one pair. All zero is the default
/// (the water chord between them shorter than the leading bubble's own chord), so an unused
/// chain slot stays all zero bytes.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct NearWake {
    /// A pair when the water chord is shorter than this many frames; 0: by the chord.
    pub frames: u32,
    /// A pair when the water chord is shorter than the leading bubble's chord times this,
    /// in thousandths; 0 means 1000 (the bubble's own chord).
    pub chord_permille: u16,
}

impl NearWake {
    /// The default: the water chord shorter than the leading bubble's own chord.
    pub const CHORD: Self = NearWake {
        frames: 0,
        chord_permille: 0,
    };

    /// The fraction of the bubble's chord (1 by default).
    pub fn chord_fraction(&self) -> f32 {
        if self.chord_permille == 0 {
            1.0
        } else {
            self.chord_permille as f32 / 1000.0
        }
    }

    /// True if a bubble of `bubble` frames and the water chord of `water` frames after it
    /// make a pair.
    #[inline]
    pub fn pairs(&self, water: u32, bubble: u32) -> bool {
        if self.frames > 0 {
            water < self.frames
        } else {
            let k = if self.chord_permille == 0 {
                1000
            } else {
                self.chord_permille as u64
            };
            (water as u64) * 1000 < (bubble as u64) * k
        }
    }
}

/// Cluster counts of one tip over one window.
///
/// A bubble is judged when its chord and the water chord after it are both known; the
/// judgement is counted in the window that holds the end of that water chord (where the
/// next bubble starts). A cluster is counted in the window of its first pair.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ClusterStats {
    /// Bubbles judged (chord and the following water chord known).
    pub judged: u32,
    /// Judged bubbles whose following water chord was shorter than their chord (pairs).
    pub pairs: u32,
    /// Clusters begun (a pair that follows no pair).
    pub clusters: u32,
    /// Bubbles in clusters: two for a cluster's first pair, one for each further pair.
    pub clustered: u32,
    /// The criterion the counts were made with.
    pub wake: NearWake,
}

impl ClusterStats {
    /// Nothing counted.
    pub const ZERO: Self = ClusterStats {
        judged: 0,
        pairs: 0,
        clusters: 0,
        clustered: 0,
        wake: NearWake::CHORD,
    };
}

/// The per-edge state of the cluster tally, kept across windows.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct ClusterTally {
    /// Chord of the bubble that closed last, frames (0: unknown, or a water chord since).
    last_bubble: u32,
    /// The previous judged bubble made a pair (a cluster is open).
    open: bool,
    /// This window's counts.
    pub(crate) stats: ClusterStats,
}

impl ClusterTally {
    pub(crate) const ZERO: Self = ClusterTally {
        last_bubble: 0,
        open: false,
        stats: ClusterStats::ZERO,
    };

    /// A bubble closed; `chord` its length in frames, `None` when it began before the record.
    #[inline]
    pub(crate) fn bubble_closed(&mut self, chord: Option<u32>) {
        self.last_bubble = chord.unwrap_or(0);
        if chord.is_none() {
            self.open = false;
        }
    }

    /// A water chord closed (the next bubble begins); `water` its length in frames.
    #[inline]
    pub(crate) fn water_closed(&mut self, water: Option<u32>) {
        let bubble = core::mem::take(&mut self.last_bubble);
        let (Some(w), true) = (water, bubble > 0) else {
            self.open = false;
            return;
        };
        let s = &mut self.stats;
        s.judged = s.judged.saturating_add(1);
        let pair = s.wake.pairs(w, bubble);
        if pair {
            s.pairs = s.pairs.saturating_add(1);
            if self.open {
                s.clustered = s.clustered.saturating_add(1);
            } else {
                s.clusters = s.clusters.saturating_add(1);
                s.clustered = s.clustered.saturating_add(2);
            }
        }
        self.open = pair;
    }

    /// Start the next window's counts (the open cluster, if any, carries over).
    #[inline]
    pub(crate) fn clear(&mut self) {
        let wake = self.stats.wake;
        self.stats = ClusterStats::ZERO;
        self.stats.wake = wake;
    }

    /// Count pairs by `wake` from now on.
    pub(crate) fn set_wake(&mut self, wake: NearWake) {
        self.stats.wake = wake;
    }
}
