//! Levels learnt from the whole record before a replay processes it (the offline rule).
//!
//! A device learns a tip's air and water levels causally: its first learning period runs
//! before any level is known, and a tip that sits in one phase (a dry bed before a surge)
//! learns nothing until both phases have passed it. A replay has the whole record, so it
//! first counts every tip's sample values (every [`LEARN_STRIDE`](frothline_core::levels::LEARN_STRIDE)-th frame, the device's
//! stride) into a full 16-bit histogram, learns the levels from it by the device's own rule
//! ([`LevelLearner`](frothline_core::levels::LevelLearner): Otsu's split of a 64-bin histogram over the observed range, the mode
//! of each class refined by its neighbours, a separability check), and then processes the
//! record from its first frame with those levels, fixed. For a steady flow that is a
//! learning span of the whole record; for a surge the span after the front is where both
//! phases occur, and the one-phase span before it only adds to one class.
//!
//! A steady replay also learns every tip's levels in each [`DRIFT_SEGMENT_S`] segment
//! (from histograms of 64-count bins kept in the same pass) and applies them segment by
//! segment ([`crate::offline::replay_common::LevelSchedule`]), so the levels follow a slow drift.
//!
//! The class-size rule of a learning period (each phase at least 0.5 % of the samples) is
//! replaced by an absolute one ([`MIN_CLASS_SAMPLES`]), so a tip in air above the flow that
//! meets water only now and then still learns its water level when its histogram is
//! clearly two-level.
//!
//! A tip whose record shows one phase only (a tip above the flow, in air but for a few
//! droplets; a tip in still water below it) measures the level of that phase itself; its
//! other level is that one moved by the median swing of the tips that learnt both levels
//! (the conditioners of one rig give similar swings; a few per cent off moves a 50 %
//! threshold by a few per cent of the swing, inside the hysteresis band). It is named on
//! stderr and its windows say `levels_from = record_one_phase`. Only when no tip of the
//! record learnt both levels does a tip keep the device's causal rule (and its windows the
//! `levels_not_learnt` flag), again with a message naming probe and tip.

mod histogram;
mod learn;
mod outcome;
mod record;
pub use histogram::from_histogram;
pub use learn::{learn, learn_threads, learn_with, learning_tips, LearningTip};
pub use outcome::{TipLevels, TipOutcome};
pub use record::RecordLevels;

/// Smallest class (strided samples) the record rule accepts: 256 strided samples are 1024
/// frames, 26 ms at 40 kHz. A threshold that low is safe because Otsu's separability must
/// still reach 0.75, which a single noisy mode never does (common practice, no source).
pub const MIN_CLASS_SAMPLES: u64 = 256;

/// How a replay finds the levels of tips without fixed levels.
#[derive(clap::ValueEnum, Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum LevelRule {
    /// Learn each tip's levels from the whole record first, then process it from its
    /// first frame with them (nothing is lost to a learning period).
    #[default]
    Record,
    /// The device's causal rule: learn during the record, every learning period; the
    /// first period runs without levels. Reproduces a device's records exactly.
    Device,
}

/// Length of the segments in which a steady replay re-learns every tip's levels, to
/// follow a slow drift of the conditioners, s. A segment's levels apply to its frames; a
/// drift is thus followed to within what it moves in one segment (common practice, no
/// source: conditioners drift over minutes, a second holds thousands of interfaces).
pub const DRIFT_SEGMENT_S: f64 = 1.0;

#[cfg(test)]
mod tests;
