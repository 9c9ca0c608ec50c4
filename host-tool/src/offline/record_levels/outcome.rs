//! What the record said about each learning tip: two levels, one phase, or nothing clear.

use frothline_core::levels::Levels;

/// What the record said about one tip's levels.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum TipOutcome {
    /// Two clear levels, counts, with the noise (standard deviation, counts) of the
    /// samples within a quarter of the swing of each level.
    Learnt {
        /// The levels.
        levels: Levels,
        /// Noise of the air class, counts.
        air_noise: f32,
        /// Noise of the water class, counts.
        water_noise: f32,
    },
    /// The tip's samples span less than the smallest accepted swing: it never left one
    /// phase (`min`..=`max`, counts).
    OnePhase {
        /// Smallest sample, counts.
        min: i16,
        /// Largest sample, counts.
        max: i16,
    },
    /// The samples span more than the swing but show no clear two-level histogram (a swing
    /// buried in noise, or one phase too rare to tell).
    Unclear {
        /// Smallest sample, counts.
        min: i16,
        /// Largest sample, counts.
        max: i16,
    },
    /// The tip shows one phase only (or the other too rarely to learn it): the level of
    /// the phase it shows is its own (`own`: the mean around its histogram's mode), the
    /// other is that level moved by the median swing of the tips of the record that did
    /// learn both levels.
    Borrowed {
        /// The levels: one measured, one borrowed.
        levels: Levels,
        /// True when the measured phase is air.
        in_air: bool,
        /// The swing borrowed, counts.
        swing: f32,
        /// Tips the swing's median came from.
        from_tips: usize,
        /// Smallest sample, counts.
        min: i16,
        /// Largest sample, counts.
        max: i16,
    },
    /// The record holds no sample of this tip.
    Empty,
}

impl TipOutcome {
    /// The levels to use, if any.
    pub fn levels(&self) -> Option<Levels> {
        match *self {
            TipOutcome::Learnt { levels, .. } | TipOutcome::Borrowed { levels, .. } => Some(levels),
            _ => None,
        }
    }

    /// The name of the rule that gave the levels (windows.csv `levels_from`).
    pub fn source_name(&self) -> Option<&'static str> {
        match self {
            TipOutcome::Learnt { .. } => Some("record"),
            TipOutcome::Borrowed { .. } => Some("record_one_phase"),
            _ => None,
        }
    }
}

/// One tip's result.
#[derive(Clone, Debug, PartialEq)]
pub struct TipLevels {
    /// Probe index in the layout.
    pub probe: usize,
    /// Trailing tip (false: leading).
    pub trailing: bool,
    /// WAV channel.
    pub channel: u8,
    /// What was learnt.
    pub outcome: TipOutcome,
}

impl TipLevels {
    /// "leading" or "trailing".
    pub fn tip_name(&self) -> &'static str {
        if self.trailing {
            "trailing"
        } else {
            "leading"
        }
    }
}
