//! The settings of a chain's tips and probes: polarity, where levels come from, the
//! detector's thresholds and limits, which channels form a probe.
//!
//! Plain data that imports nothing of the chain, so every stage ([`crate::phase`],
//! [`crate::station`], [`crate::chain`]) can read its settings from here without depending
//! on [`crate::config`], which gathers them into a [`ChainConfig`](crate::ChainConfig) and
//! checks them once.

/// Which voltage the air phase reads.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum Polarity {
    /// Air reads the higher voltage (the usual conductivity-probe wiring).
    AirHigh,
    /// Air reads the lower voltage.
    AirLow,
}

impl Polarity {
    /// +1 or -1: multiplying a sample by this maps it to a scale where air is high.
    pub(crate) const fn sign(self) -> i32 {
        match self {
            Polarity::AirHigh => 1,
            Polarity::AirLow => -1,
        }
    }
}

/// Where a tip's air and water levels come from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum LevelSource {
    /// Levels fixed by the operator, in ADC counts.
    Fixed {
        /// The air level, counts.
        air: i16,
        /// The water level, counts.
        water: i16,
    },
    /// Levels learnt from the signal and re-learnt every learning period (see [`crate::levels`]).
    Learnt,
}

/// Settings shared by every tip of a chain.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct DetectorConfig {
    /// Threshold as a fraction of the water-to-air range (0.5 is common practice).
    pub threshold: f32,
    /// Full width of the hysteresis band as a fraction of the range (0.2 gives 40 %/60 %);
    /// 0 disables hysteresis.
    pub hysteresis: f32,
    /// Learning period in frames (samples per channel) for learnt levels.
    pub learn_period: u32,
    /// Samples at or below this count are at the lower ADC rail.
    pub rail_low: i16,
    /// Samples at or above this count are at the upper ADC rail.
    pub rail_high: i16,
    /// Smallest accepted air-water swing, counts, when learning levels.
    pub min_swing: u16,
    /// Dual-tip correlation: a window whose cross-correlation peak coefficient is below this
    /// is flagged [`Flags::NO_CORRELATION_PEAK`](crate::Flags::NO_CORRELATION_PEAK)
    /// (0.3 by default; must lie in 0..=1).
    pub min_peak_coefficient: f32,
    /// Dual-tip correlation: a window in which either tip closed fewer bubbles than this is
    /// flagged [`Flags::FEW_BUBBLES`](crate::Flags::FEW_BUBBLES) (10 by default).
    pub min_bubbles: u32,
    /// The near-wake criterion of the cluster tally (by default the water chord shorter than
    /// the leading bubble's chord).
    pub near_wake: crate::cluster::NearWake,
}

impl Default for DetectorConfig {
    fn default() -> Self {
        DetectorConfig {
            threshold: 0.5,
            hysteresis: 0.2,
            learn_period: 8192,
            rail_low: i16::MIN,
            rail_high: i16::MAX,
            min_swing: 64,
            min_peak_coefficient: 0.3,
            min_bubbles: 10,
            near_wake: crate::cluster::NearWake::CHORD,
        }
    }
}

/// One tip: its channel, polarity and levels.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct TipConfig {
    /// Channel index in the interleaved frame.
    pub channel: u8,
    /// Which voltage reads air.
    pub polarity: Polarity,
    /// Fixed or learnt levels.
    pub levels: LevelSource,
}

/// One probe: a leading tip and optionally a trailing tip behind it.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProbeConfig {
    /// The leading (upstream) tip; its statistics are the probe's.
    pub leading: TipConfig,
    /// The trailing tip, if the probe has two.
    pub trailing: Option<TipConfig>,
    /// Largest correlation lag, frames, for a probe with a trailing tip: the leading and
    /// trailing signals are correlated over lags `0..=max_lag` (trailing delayed). Must be
    /// at least 2 when there is a trailing tip (ignored otherwise). The chain caps it at
    /// its compile-time maximum `L - 1` (see [`crate::Chain`]). The host sets it from the
    /// layout (`max_lag_ms`, or tip spacing / 0.2 m/s by default).
    pub max_lag: u16,
}

impl ProbeConfig {
    /// A single-tip probe.
    pub const fn single(leading: TipConfig) -> Self {
        ProbeConfig {
            leading,
            trailing: None,
            max_lag: 0,
        }
    }

    /// A dual-tip probe correlated over lags `0..=max_lag` frames.
    pub const fn dual(leading: TipConfig, trailing: TipConfig, max_lag: u16) -> Self {
        ProbeConfig {
            leading,
            trailing: Some(trailing),
            max_lag,
        }
    }
}
