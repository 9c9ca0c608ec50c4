//! From a layout file and a capture's format to the core's chain configuration.
//!
//! The one place where physical units of the layout (seconds, file units) become the core's
//! frames and i16 counts, so replay and the simulated device build identical chains.

use crate::shared::capture::{Capture, CaptureError};
use crate::shared::error::HostError;
use crate::shared::layout::{Layout, Phase};
use frothline_core::{
    ChainConfig, ConfigError, DetectorConfig, LevelSource, Polarity, ProbeConfig, TipConfig,
    WindowPolicy,
};
use std::path::Path;

/// Most probes a host chain holds (a station array of 16 dual-tip probes is 32 channels).
pub const MAX_PROBES: usize = 16;

/// Correlation lag slots of a host chain: lags up to 1023 frames, so 6 mm tips at 40 kHz
/// resolve velocities down to 0.23 m/s. A device with less memory uses fewer slots; set
/// `max_lag_ms` in the layout to make both compute the same lags.
pub const HOST_LAGS: usize = 1024;

/// The chain type the host runs for steady flows (replay, the simulated device). It keeps no
/// raw correlation sums (`S = 0`): each window's sums are analysed inside the correlator as
/// they are cleared, as on the firmware, where a chain that keeps them copies 28 KiB per
/// probe-window out first. The records are the same bit for bit (the firmware checks
/// compare its records with a host replay's; the core tests both forms), with
/// `correlation_sums: None`.
pub type HostChain = frothline_core::GenericChain<MAX_PROBES, HOST_LAGS, 0, 0, 1>;

/// The records of the host's chains at full size (a station chain's keep their raw
/// correlation sums, 28 KiB each, for ensembles; a [`HostChain`]'s have none).
pub type FullRecord = frothline_core::ProbeWindow<HOST_LAGS>;

/// A record as the host keeps and passes it around: results only, without the raw
/// correlation sums ([`FullRecord::without_sums`]), so storing thousands stays cheap.
pub type HostRecord = frothline_core::ProbeWindow<4>;

/// A single-tip record for unit tests: `frames` frames from `start`, `air_frames` of them in
/// air, `bubbles` bubbles, no chords, no flags.
#[cfg(test)]
pub(crate) fn test_record(
    probe: u8,
    start: u64,
    frames: u64,
    air_frames: u64,
    bubbles: u32,
) -> HostRecord {
    use frothline_core::{chord::ChordStats, Flags};
    HostRecord {
        probe,
        start,
        end: start + frames,
        since_front: None,
        lead: frothline_core::TipStats {
            frames,
            air_frames,
            rail_frames: 0,
            unlearnt_frames: 0,
            bubbles,
            droplets: 0,
            bubble_chords: ChordStats::new(),
            droplet_chords: ChordStats::new(),
            clusters: Default::default(),
            levels: None,
            flags: Flags::NONE,
        },
        trail: None,
        flags: Flags::NONE,
        correlation: None,
        correlation_sums: None,
    }
}

/// How the host maps file units to counts (the capture's conversion).
pub trait ToCounts {
    /// A level or rail in file units, as i16 counts.
    fn to_counts(&self, file_units: f64) -> f64;
}

impl ToCounts for crate::shared::capture::Capture {
    fn to_counts(&self, v: f64) -> f64 {
        crate::shared::capture::Capture::to_counts(self, v)
    }
}

/// Identity mapping, for captures already in i16 counts (the synthesiser, the device).
pub struct Counts;

impl ToCounts for Counts {
    fn to_counts(&self, v: f64) -> f64 {
        v
    }
}

fn clamp_i16(v: f64) -> i16 {
    v.round().clamp(i16::MIN as f64, i16::MAX as f64) as i16
}

/// Slowest interfacial velocity searched by default, m/s (the layout's `max_lag_ms` overrides).
pub const SLOWEST_VELOCITY_M_S: f64 = 0.2;

/// The longest correlation lag in seconds: the layout's `max_lag_ms`, or the time the
/// slowest velocity of interest takes over the tip spacing. The core caps it at its
/// compile-time maximum lag.
pub fn default_max_lag_s(max_lag_ms: Option<f64>, tip_spacing_mm: Option<f64>) -> f64 {
    match (max_lag_ms, tip_spacing_mm) {
        (Some(ms), _) => ms * 1e-3,
        (None, Some(mm)) => mm * 1e-3 / SLOWEST_VELOCITY_M_S,
        (None, None) => 0.0,
    }
}

/// Build the chain configuration of `layout` for a capture of `channels` channels at
/// `sample_rate` frames per second.
pub fn chain_config(
    layout: &Layout,
    channels: usize,
    sample_rate: u32,
    window: WindowPolicy,
    units: &dyn ToCounts,
) -> Result<ChainConfig<MAX_PROBES>, ConfigError> {
    if channels == 0 || channels > frothline_core::MAX_CHANNELS {
        return Err(ConfigError::BadChannelCount(channels.min(255) as u8));
    }
    let d = &layout.detector;
    let fs = sample_rate as f64;
    let detector = DetectorConfig {
        threshold: d.threshold as f32,
        hysteresis: d.hysteresis as f32,
        learn_period: (d.learn_period_s * fs).round().clamp(64.0, u32::MAX as f64) as u32,
        rail_low: d
            .rail_low
            .map_or(i16::MIN, |v| clamp_i16(units.to_counts(v))),
        rail_high: d
            .rail_high
            .map_or(i16::MAX, |v| clamp_i16(units.to_counts(v))),
        min_swing: d.min_swing.map_or(64, |v| {
            (units.to_counts(v) - units.to_counts(0.0))
                .abs()
                .round()
                .clamp(1.0, u16::MAX as f64) as u16
        }),
        near_wake: frothline_core::cluster::NearWake {
            frames: d.near_wake_ms.map_or(0, |ms| {
                (ms * 1e-3 * fs).round().clamp(1.0, u32::MAX as f64) as u32
            }),
            chord_permille: d.near_wake_chord_fraction.map_or(0, |k| {
                (k * 1000.0).round().clamp(1.0, u16::MAX as f64) as u16
            }),
        },
        ..DetectorConfig::default()
    };
    let mut cfg = ChainConfig::new(channels as u8, window);
    cfg.detector = detector;
    cfg.initial_air = layout.flow.phase_before_front == Phase::Air
        && layout.flow.kind == crate::shared::layout::FlowKind::Transient;
    for p in &layout.probes {
        let polarity = if p.air_is_high {
            Polarity::AirHigh
        } else {
            Polarity::AirLow
        };
        let tip = |ch: usize, trailing: bool| TipConfig {
            channel: ch.min(255) as u8,
            polarity,
            levels: match p.tip_levels(trailing) {
                Some(l) => LevelSource::Fixed {
                    air: clamp_i16(units.to_counts(l.air)),
                    water: clamp_i16(units.to_counts(l.water)),
                },
                None => LevelSource::Learnt,
            },
        };
        let max_lag = default_max_lag_s(p.max_lag_ms, p.tip_spacing_mm) * fs;
        let probe = ProbeConfig {
            leading: tip(p.leading, false),
            trailing: p.trailing.map(|c| tip(c, true)),
            max_lag: max_lag.round().clamp(2.0, u16::MAX as f64) as u16,
        };
        // The caller checks the probe count against MAX_PROBES first.
        let _ = cfg.probes.push(probe);
    }
    cfg.validate()?;
    Ok(cfg)
}

/// Tips that learn their levels during the record (the device's rule, or the tips the
/// record rule could not give levels) need a learning period of at least 64 frames to fill
/// its histogram: a shorter one (`learn_period_s = 1e-9`, or a 1 Hz file) is refused,
/// with the key, the value and the frames it makes at the capture's rate.
pub fn check_learn_period(
    cfg: &frothline_core::ChainConfig<{ crate::shared::rig::MAX_PROBES }>,
    layout: &Layout,
    sample_rate: u32,
    layout_path: &Path,
) -> Result<(), HostError> {
    let learning = cfg.probes.iter().any(|p| {
        core::iter::once(&p.leading)
            .chain(p.trailing.as_ref())
            .any(|t| t.levels == frothline_core::LevelSource::Learnt)
    });
    let period = layout.detector.learn_period_s;
    let frames = period * sample_rate as f64;
    if learning && frames < 64.0 {
        return Err(HostError::Usage(format!(
            "{}: key `detector.learn_period_s`: {period} s is {frames:.3e} frames at \
             {sample_rate} Hz, but a learning period must hold at least 64 frames ({:.4} s \
             at this rate) to fill its histogram; give a longer period, or fix the tips' \
             levels in the layout",
            layout_path.display(),
            64.0 / sample_rate.max(1) as f64
        )));
    }
    Ok(())
}

/// The layout's fixed levels must lie inside the capture's sample range.
pub fn check_levels_fit(
    layout: &Layout,
    cap: &Capture,
    layout_path: &Path,
) -> Result<(), HostError> {
    let format = cap.format();
    layout.check_levels(format.full_scale(), &format.to_string(), layout_path)?;
    Ok(())
}

/// A capture with no complete frame is refused: there is nothing to replay, and a summary
/// of no samples would be all NaN.
///
/// A capture wider than the core's [`MAX_CHANNELS`](frothline_core::MAX_CHANNELS) is
/// refused here too, naming the capture and its true channel count.
pub fn require_frames(cap: &Capture) -> Result<(), HostError> {
    if cap.channels() > frothline_core::MAX_CHANNELS {
        return Err(CaptureError::TooManyChannels {
            path: cap.path().to_path_buf(),
            channels: cap.channels(),
            max: frothline_core::MAX_CHANNELS,
        }
        .into());
    }
    if cap.frames_in_file() == 0 {
        return Err(CaptureError::NoFrames {
            path: cap.path().to_path_buf(),
            channels: cap.channels(),
        }
        .into());
    }
    Ok(())
}
