//! Kind 0x09, tip health: per tip, the levels in use, the interfaces and the void fraction
//! of its latest window, so that a host can show which tips switch and which have
//! stopped (a dead, dry or drowned tip, a fouled one whose swing has shrunk) and fill the
//! per-tip columns of its CSV files.
//!
//! A device keeps the latest report of each probe ([`TipBook`]) and sends the book after
//! every health frame, up to [`MAX_TIPS_PER_FRAME`] probes per frame: at a one-second
//! health period that is a frame or two a second whatever the window length. The states
//! are made from window records in [`crate::wire::quant`] (`TipState::from_stats`,
//! `TipReport::from_probe_window`).

use heapless::Vec;
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

/// Most probe reports one tip-health frame carries.
pub const MAX_TIPS_PER_FRAME: usize = 6;

/// Kind 0x09 body: 1 to [`MAX_TIPS_PER_FRAME`] probe reports.
pub type TipHealth = Vec<TipReport, MAX_TIPS_PER_FRAME>;

/// The tips of one probe over its latest closed window.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TipReport {
    /// Probe index (as in the description).
    pub probe: u8,
    /// First frame of the window (of the current run): the window result of kind 0x02 with
    /// the same probe and start.
    pub start: u64,
    /// Window length, frames.
    pub frames: u32,
    /// The leading tip.
    pub leading: TipState,
    /// The trailing tip of a dual-tip probe.
    pub trailing: Option<TipState>,
}

/// One tip over one window.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TipState {
    /// The air and water levels in use when the window closed, counts; None before the
    /// tip has learnt any.
    pub levels: Option<TipLevels>,
    /// Interfaces the tip crossed in the window (air to water and water to air:
    /// bubbles plus droplets closed), saturating.
    pub interfaces: u32,
    /// Bubbles closed on this tip in the window, saturating.
    pub bubbles: u32,
    /// This tip's void fraction in the window, 1e-4 (0..=10000).
    pub void_fraction: u16,
    /// This tip's flags (section 7 of the spec: `stuck`, `levels_not_learnt`, ...).
    pub flags: u32,
}

/// A tip's air and water levels, ADC counts.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TipLevels {
    /// Air level, counts.
    pub air: i16,
    /// Water level, counts.
    pub water: i16,
}

impl TipLevels {
    /// The swing |water - air|, counts.
    pub fn swing(&self) -> u16 {
        (self.water as i32 - self.air as i32)
            .unsigned_abs()
            .min(u16::MAX as u32) as u16
    }
}

impl TipState {
    /// Interfaces per second over a window of `frames` frames at `sample_rate` Hz.
    pub fn interfaces_per_s(&self, frames: u32, sample_rate: f32) -> Option<f32> {
        (frames > 0 && sample_rate > 0.0)
            .then(|| self.interfaces as f32 * sample_rate / frames as f32)
    }
}

/// The latest report of each of up to `N` probes (a later window of a probe replaces its
/// earlier one), drained in probe order into frames of [`MAX_TIPS_PER_FRAME`].
#[derive(Clone, Debug)]
pub struct TipBook<const N: usize> {
    slots: [Option<TipReport>; N],
}

impl<const N: usize> Default for TipBook<N> {
    fn default() -> Self {
        TipBook { slots: [None; N] }
    }
}

impl<const N: usize> TipBook<N> {
    /// Keep `r` as its probe's latest (a probe index of `N` or more is ignored).
    pub fn note(&mut self, r: TipReport) {
        if let Some(s) = self.slots.get_mut(r.probe as usize) {
            *s = Some(r);
        }
    }

    /// True when no report waits.
    pub fn is_empty(&self) -> bool {
        self.slots.iter().all(Option::is_none)
    }

    /// Take up to [`MAX_TIPS_PER_FRAME`] reports, lowest probe first; None when empty.
    pub fn take_frame(&mut self) -> Option<TipHealth> {
        let mut v = TipHealth::new();
        for s in self.slots.iter_mut() {
            if v.is_full() {
                break;
            }
            if let Some(r) = s.take() {
                // Cannot fail: checked for room above.
                let _ = v.push(r);
            }
        }
        (!v.is_empty()).then_some(v)
    }
}
