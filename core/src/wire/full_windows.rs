//! Kind 0x0B, full windows: window results with the figures a window result leaves out
//! (the droplet chord, the trailing tip's C and F, the levels each tip used, and the
//! correlation's time scales), for a host that keeps every column of a replay's
//! `windows.csv` from a live device.
//!
//! A device sends them only after a host asked with command 0x28 SetExtras: they cost about
//! twice a window result's bytes, which a slow link may not have to spare. While they are
//! on, a device's window results go out as kind 0x0B instead of kind 0x02 (never both), up
//! to [`MAX_FULL_WINDOWS_PER_FRAME`] per frame.

use crate::record::ProbeWindow;
use crate::wire::frame::WindowResult;
use crate::wire::quant::{counts, fraction, micros_from_samples, rate};
use crate::wire::tip_health::TipLevels;
use heapless::Vec;
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

/// Most full windows one frame carries (a full window at its longest is about twice a
/// window result).
pub const MAX_FULL_WINDOWS_PER_FRAME: usize = 4;

/// The trailing tip of a dual-tip probe over the window.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrailingWindow {
    /// Void fraction, 1e-4.
    pub void_fraction: u16,
    /// Bubble count rate, 0.01 Hz.
    pub bubble_rate: u32,
}

/// The correlation's time scales, µs.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CorrelationTimes {
    /// Transit time T (the cross-correlation's peak lag), µs.
    pub transit: Option<u32>,
    /// Secondary peak over the main peak, 1e-4.
    pub secondary_peak_ratio: Option<u16>,
    /// Half-width T0.5 of the cross-correlation peak, µs.
    pub t05: Option<u32>,
    /// Half-width τ0.5 of the auto-correlation, µs.
    pub tau05: Option<u32>,
    /// Auto-correlation integral time, µs.
    pub auto_integral: Option<u32>,
    /// Cross-correlation integral time, µs.
    pub cross_integral: Option<u32>,
}

/// What a window result leaves out.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WindowExtras {
    /// Mean droplet (water) chord of the leading tip, µs; None without droplet chords.
    pub droplet_chord_mean: Option<u32>,
    /// The trailing tip, for a dual-tip probe.
    pub trailing: Option<TrailingWindow>,
    /// The leading tip's levels when the window closed, counts.
    pub levels: Option<TipLevels>,
    /// The trailing tip's levels when the window closed, counts.
    pub trailing_levels: Option<TipLevels>,
    /// The correlation's time scales, for a dual-tip probe.
    pub correlation: Option<CorrelationTimes>,
}

/// One window: its result and its extras.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FullWindow {
    /// The window result (as kind 0x02 carries it).
    pub result: WindowResult,
    /// The figures kind 0x02 leaves out.
    pub extras: WindowExtras,
}

/// Kind 0x0B body: 1 to [`MAX_FULL_WINDOWS_PER_FRAME`] full windows.
pub type FullWindows = Vec<FullWindow, MAX_FULL_WINDOWS_PER_FRAME>;

impl WindowExtras {
    /// The extras of a chain record at `sample_rate_hz`, quantised as the window result is.
    pub fn from_probe_window<const L: usize>(rec: &ProbeWindow<L>, sample_rate_hz: f32) -> Self {
        let us = |frames: f32| micros_from_samples(frames, sample_rate_hz);
        let levels = |l: Option<crate::levels::Levels>| {
            l.map(|l| TipLevels {
                air: counts(l.air),
                water: counts(l.water),
            })
        };
        let lead = &rec.lead;
        WindowExtras {
            droplet_chord_mean: lead.droplet_chords.mean().map(us),
            trailing: rec.trail.as_ref().map(|t| TrailingWindow {
                void_fraction: fraction(t.void_fraction().unwrap_or(0.0)),
                bubble_rate: rate(t.bubble_count_rate(sample_rate_hz).unwrap_or(0.0)),
            }),
            levels: levels(lead.levels),
            trailing_levels: levels(rec.trail.as_ref().and_then(|t| t.levels)),
            correlation: rec.correlation.as_ref().map(|c| CorrelationTimes {
                transit: c
                    .peak_lag_frames
                    .filter(|l| *l > 0.0 && l.is_finite())
                    .map(us),
                secondary_peak_ratio: c.secondary_peak_ratio.map(fraction),
                t05: c.t05_frames.map(us),
                tau05: c.tau05_frames.map(us),
                auto_integral: c.auto_integral_frames.map(us),
                cross_integral: c.cross_integral_frames.map(us),
            }),
        }
    }
}
