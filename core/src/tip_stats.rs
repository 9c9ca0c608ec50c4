//! Per-window statistics of one tip, fed by its edges and its per-run sample counts.
//!
//! See [`crate::record::TipStats`] for how chords that straddle a window edge are counted.

use crate::chord::ChordStats;
use crate::cluster::ClusterTally;
use crate::flags::Flags;
use crate::levels::Levels;
use crate::phase::{Edge, EdgeSink, RunCounts};
use crate::record::TipStats;

/// Accumulates one tip's statistics over the current window.
#[derive(Clone, Debug)]
pub struct TipAccumulator {
    /// Frame of the last interface; None while the phase began before the record.
    since: Option<u64>,
    frames: u64,
    air_frames: u64,
    rail_frames: u64,
    unlearnt_frames: u64,
    bubbles: u32,
    droplets: u32,
    bubble_chords: ChordStats,
    droplet_chords: ChordStats,
    clusters: ClusterTally,
}

impl Default for TipAccumulator {
    fn default() -> Self {
        Self::new()
    }
}

impl TipAccumulator {
    /// All zero bytes: the placeholder in an unused probe slot of a chain.
    pub(crate) const ZERO: Self = TipAccumulator {
        since: None,
        frames: 0,
        air_frames: 0,
        rail_frames: 0,
        unlearnt_frames: 0,
        bubbles: 0,
        droplets: 0,
        bubble_chords: ChordStats::ZERO,
        droplet_chords: ChordStats::ZERO,
        clusters: ClusterTally::ZERO,
    };

    /// An empty accumulator at the start of a record.
    pub const fn new() -> Self {
        TipAccumulator {
            since: None,
            frames: 0,
            air_frames: 0,
            rail_frames: 0,
            unlearnt_frames: 0,
            bubbles: 0,
            droplets: 0,
            bubble_chords: ChordStats::new(),
            droplet_chords: ChordStats::new(),
            clusters: ClusterTally::ZERO,
        }
    }

    /// Count clusters by `wake` from now on.
    pub fn set_near_wake(&mut self, wake: crate::cluster::NearWake) {
        self.clusters.set_wake(wake);
    }

    /// Add the sample counts of a run of `frames` frames.
    pub fn add_run(&mut self, frames: u32, c: RunCounts) {
        self.frames += frames as u64;
        self.air_frames += c.air as u64;
        self.rail_frames += c.rail as u64;
        self.unlearnt_frames += c.unlearnt as u64;
    }

    /// Close the window: return its statistics and start the next window.
    pub fn close(&mut self, levels: Option<Levels>) -> TipStats {
        let mut stats = TipStats::ZERO;
        self.close_into(&mut stats, levels);
        stats
    }

    /// [`close`](Self::close), the statistics written into `stats` (a record built in
    /// place: no copy of it through the stack).
    pub fn close_into(&mut self, stats: &mut TipStats, levels: Option<Levels>) {
        let mut flags = Flags::NONE;
        let chords = self.bubble_chords.count + self.droplet_chords.count;
        let short = self.bubble_chords.short + self.droplet_chords.short;
        flags.set_if(Flags::STUCK, self.bubbles == 0 && self.droplets == 0);
        flags.set_if(Flags::LEVELS_NOT_LEARNT, self.unlearnt_frames > 0);
        flags.set_if(Flags::SATURATED, self.rail_frames > 0);
        flags.set_if(
            Flags::SHORT_CHORDS,
            chords > 0 && short as u64 * 10 >= chords as u64,
        );
        stats.frames = self.frames;
        stats.air_frames = self.air_frames;
        stats.rail_frames = self.rail_frames;
        stats.unlearnt_frames = self.unlearnt_frames;
        stats.bubbles = self.bubbles;
        stats.droplets = self.droplets;
        stats.bubble_chords.clone_from(&self.bubble_chords);
        stats.droplet_chords.clone_from(&self.droplet_chords);
        stats.clusters = self.clusters.stats;
        stats.levels = levels;
        stats.flags = flags;
        // Start the next window (as `new()`, keeping `since`), field by field: no
        // temporary accumulator on the stack.
        self.frames = 0;
        self.air_frames = 0;
        self.rail_frames = 0;
        self.unlearnt_frames = 0;
        self.bubbles = 0;
        self.droplets = 0;
        // Built by `add` alone (see `edge`): only the bins a chord reached are cleared.
        self.bubble_chords.clear_added();
        self.droplet_chords.clear_added();
        self.clusters.clear();
    }
}

impl EdgeSink for TipAccumulator {
    #[inline]
    fn edge(&mut self, e: Edge) {
        let chord = self
            .since
            .map(|s| e.frame.saturating_sub(s).min(u32::MAX as u64) as u32);
        if e.to_air {
            self.droplets = self.droplets.saturating_add(1);
            if let Some(c) = chord {
                self.droplet_chords.add(c);
            }
            self.clusters.water_closed(chord);
        } else {
            self.bubbles = self.bubbles.saturating_add(1);
            if let Some(c) = chord {
                self.bubble_chords.add(c);
            }
            self.clusters.bubble_closed(chord);
        }
        self.since = Some(e.frame);
    }
}
