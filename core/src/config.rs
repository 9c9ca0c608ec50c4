//! Configuration of the chain: detector settings, tips, probes, windows.
//!
//! Everything is plain data checked once by [`ChainConfig::validate`], so the hot loop never
//! has to check it again.

use crate::front::MAX_STATION_PROBES;
use crate::station::StationConfig;
use crate::window::WindowPolicy;
use crate::MAX_CHANNELS;
use heapless::Vec;

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

/// The whole chain: channel count, detector settings, probes, window policy.
#[derive(Clone, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChainConfig<const P: usize> {
    /// Number of interleaved channels in each frame (may exceed the tips in use).
    pub channels: u8,
    /// Detector settings.
    pub detector: DetectorConfig,
    /// The probes, at most `P`.
    pub probes: Vec<ProbeConfig, P>,
    /// How samples are cut into analysis windows.
    pub window: WindowPolicy,
    /// The phase every tip is taken to be in until its first interface (true = air). Steady
    /// flows usually start in water; a dry bed before a surge starts in air.
    pub initial_air: bool,
    /// Transient flows: the chain is one station (its probes share a streamwise position)
    /// with front detection, front-relative windows, profile slices and decay tracking (see
    /// [`crate::station`]). `None` for steady flows. Needs a chain with a delay ring
    /// (`Chain<P, L, D>` with `D >= (delay_frames + 1) × channels`).
    pub station: Option<StationConfig<P>>,
}

/// A configuration the chain cannot run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// No probe configured.
    NoProbes,
    /// Zero channels, or more than [`MAX_CHANNELS`].
    BadChannelCount(u8),
    /// A tip's channel is beyond the frame.
    ChannelOutOfRange {
        /// Probe index.
        probe: u8,
        /// The offending channel.
        channel: u8,
    },
    /// Two tips read the same channel.
    ChannelShared(u8),
    /// Threshold not strictly between 0 and 1.
    BadThreshold,
    /// Hysteresis negative or so wide the band leaves 0..1.
    BadHysteresis,
    /// Learning period shorter than 64 frames.
    BadLearnPeriod,
    /// Rails not ordered.
    BadRails,
    /// Fixed levels equal, or on the wrong side of each other for the polarity.
    BadLevels {
        /// Probe index.
        probe: u8,
    },
    /// A window policy of zero length, a bubble-count window whose reference probe
    /// does not exist, or front-relative windows without a station.
    BadWindow,
    /// A probe with a trailing tip has `max_lag` below 2.
    BadMaxLag {
        /// Probe index.
        probe: u8,
    },
    /// `min_peak_coefficient` outside 0..=1 (or not a number).
    BadCorrelationLimits,
    /// Station settings the chain cannot run: elevations not one per probe (or not
    /// finite), more than [`MAX_STATION_PROBES`] probes, a zero delay, or a sample rate
    /// that is not finite and positive.
    BadStation,
    /// The chain's delay ring is too small for the station's delay: it needs this many
    /// samples (`(delay_frames + 1) × channels`; the `D` of `Chain<P, L, D>`).
    DelayRingTooSmall {
        /// Samples needed.
        need: u32,
    },
}

impl core::fmt::Display for ConfigError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            ConfigError::NoProbes => write!(f, "no probe configured"),
            ConfigError::BadChannelCount(n) => {
                write!(f, "{n} channels: need 1 to {MAX_CHANNELS}")
            }
            ConfigError::ChannelOutOfRange { probe, channel } => {
                write!(f, "probe {probe} uses channel {channel}, beyond the frame")
            }
            ConfigError::ChannelShared(c) => write!(f, "channel {c} is used by two tips"),
            ConfigError::BadThreshold => write!(f, "threshold must lie strictly between 0 and 1"),
            ConfigError::BadHysteresis => {
                write!(
                    f,
                    "hysteresis band must be >= 0 and stay inside 0..1 around the threshold"
                )
            }
            ConfigError::BadLearnPeriod => write!(f, "learning period must be at least 64 frames"),
            ConfigError::BadRails => write!(f, "rail_low must be below rail_high"),
            ConfigError::BadLevels { probe } => write!(
                f,
                "probe {probe}: fixed air and water levels are equal or contradict the polarity"
            ),
            ConfigError::BadWindow => write!(
                f,
                "window length must be at least one frame (or one bubble, on an existing probe; \
                 front-relative windows need a station)"
            ),
            ConfigError::BadMaxLag { probe } => {
                write!(f, "probe {probe}: max_lag must be at least 2 frames")
            }
            ConfigError::BadCorrelationLimits => {
                write!(f, "min_peak_coefficient must lie in 0..=1")
            }
            ConfigError::BadStation => write!(
                f,
                "station: give one finite elevation per probe, at most {MAX_STATION_PROBES} \
                 probes, a delay of at least one frame and a positive sample rate"
            ),
            ConfigError::DelayRingTooSmall { need } => write!(
                f,
                "station: the chain's delay ring must hold {need} samples (delay + 1 frames)"
            ),
        }
    }
}

impl TipConfig {
    fn validate(&self, probe: u8, channels: u8) -> Result<(), ConfigError> {
        if self.channel >= channels {
            return Err(ConfigError::ChannelOutOfRange {
                probe,
                channel: self.channel,
            });
        }
        if let LevelSource::Fixed { air, water } = self.levels {
            let s = self.polarity.sign();
            if (air as i32) * s <= (water as i32) * s {
                return Err(ConfigError::BadLevels { probe });
            }
        }
        Ok(())
    }
}

impl<const P: usize> ChainConfig<P> {
    /// A configuration with default detector settings and no probes yet.
    pub fn new(channels: u8, window: WindowPolicy) -> Self {
        ChainConfig {
            channels,
            detector: DetectorConfig::default(),
            probes: Vec::new(),
            window,
            initial_air: false,
            station: None,
        }
    }

    /// The configuration an unconfigured chain reports ([`crate::GenericChain::empty`]):
    /// zero channels, no probes, zero values elsewhere (it does not validate). Its value is
    /// all zero bytes, so that a `static` chain lands in `.bss`: hence the zero window
    /// policy `Bubbles { count: 0, .. }` and a zero station configuration, whose encodings
    /// are all zero where `WindowPolicy::Whole` and `None` are not.
    pub(crate) const fn placeholder() -> Self {
        ChainConfig {
            channels: 0,
            detector: DetectorConfig {
                threshold: 0.0,
                hysteresis: 0.0,
                learn_period: 0,
                rail_low: 0,
                rail_high: 0,
                min_swing: 0,
                min_peak_coefficient: 0.0,
                min_bubbles: 0,
            },
            probes: Vec::new(),
            window: WindowPolicy::Bubbles {
                count: 0,
                probe: 0,
                max_frames: None,
            },
            initial_air: false,
            station: Some(StationConfig::zero()),
        }
    }

    /// Check every value the chain relies on.
    pub fn validate(&self) -> Result<(), ConfigError> {
        if self.channels == 0 || self.channels as usize > MAX_CHANNELS {
            return Err(ConfigError::BadChannelCount(self.channels));
        }
        if self.probes.is_empty() {
            return Err(ConfigError::NoProbes);
        }
        let d = &self.detector;
        if !(d.threshold > 0.0 && d.threshold < 1.0) {
            return Err(ConfigError::BadThreshold);
        }
        let half = d.hysteresis * 0.5;
        if !(d.hysteresis >= 0.0 && d.threshold - half > 0.0 && d.threshold + half < 1.0) {
            return Err(ConfigError::BadHysteresis);
        }
        if d.learn_period < 64 {
            return Err(ConfigError::BadLearnPeriod);
        }
        if d.rail_low >= d.rail_high {
            return Err(ConfigError::BadRails);
        }
        if !(d.min_peak_coefficient >= 0.0 && d.min_peak_coefficient <= 1.0) {
            return Err(ConfigError::BadCorrelationLimits);
        }
        if !self.window.is_valid() {
            return Err(ConfigError::BadWindow);
        }
        if let WindowPolicy::Bubbles { probe, .. } = self.window {
            if probe as usize >= self.probes.len() {
                return Err(ConfigError::BadWindow);
            }
        }
        if let Some(st) = &self.station {
            let fs = st.sample_rate_hz;
            if st.elevations_mm.len() != self.probes.len()
                || st.elevations_mm.iter().any(|y| !y.is_finite())
                || self.probes.len() > MAX_STATION_PROBES
                || st.delay_frames == 0
                || !(fs.is_finite() && fs > 0.0)
            {
                return Err(ConfigError::BadStation);
            }
        } else if matches!(self.window, WindowPolicy::AfterFront { .. }) {
            // Front-relative windows need a front.
            return Err(ConfigError::BadWindow);
        }
        let mut used = [false; MAX_CHANNELS];
        for (i, p) in self.probes.iter().enumerate() {
            let i = i as u8;
            if p.trailing.is_some() && p.max_lag < 2 {
                return Err(ConfigError::BadMaxLag { probe: i });
            }
            for tip in core::iter::once(&p.leading).chain(p.trailing.iter()) {
                tip.validate(i, self.channels)?;
                let c = tip.channel as usize;
                if used[c] {
                    return Err(ConfigError::ChannelShared(tip.channel));
                }
                used[c] = true;
            }
        }
        Ok(())
    }
}

impl core::error::Error for ConfigError {}
