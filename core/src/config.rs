//! Configuration of the chain: detector settings, tips, probes, windows.
//!
//! Everything is plain data checked once by [`ChainConfig::validate`], so the hot loop never
//! has to check it again.

pub use crate::probe_config::{DetectorConfig, LevelSource, Polarity, ProbeConfig, TipConfig};

use crate::front::MAX_STATION_PROBES;
use crate::station::StationConfig;
use crate::window::WindowPolicy;
use crate::MAX_CHANNELS;
use heapless::Vec;

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
                near_wake: crate::cluster::NearWake::CHORD,
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
