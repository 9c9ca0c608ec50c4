//! Kind 0x0C, device status: what a field engineer checks on a device besides its
//! counters: the supply voltage, the time since power-up, and the field logger's state
//! and how much of its log is written.
//!
//! A device sends one with every health frame (kind 0x05), right after it. The health
//! counters stay as they are (a body never changes within a version): the status is a
//! state, not a counter, so a lost status frame loses nothing either.
//!
//! The logger's state is the core's own [`LoggerState`], encoded by postcard's variant
//! index (0 idle, 1 armed, 2 capturing with the results still to log): its variants may
//! only be appended.

use crate::logbook::LoggerState;
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

/// Kind 0x0C body.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DeviceStatus {
    /// Supply voltage, millivolts; None when the device cannot measure it.
    pub supply_mv: Option<u16>,
    /// Time since power-up, milliseconds (the device's own clock, whether or not a run is
    /// going; `Health::uptime_frames` counts sample-clock frames instead).
    pub uptime_ms: u64,
    /// The field logger; None on a device without one.
    pub logger: Option<LoggerStatus>,
}

/// The field logger's state and the use of its log.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoggerStatus {
    /// Idle, armed (waiting for a front) or capturing.
    pub state: LoggerState,
    /// Bytes of the log's pages that hold records now (see
    /// [`Logbook::used_bytes`](crate::logbook::Logbook::used_bytes)).
    pub used_bytes: u32,
    /// Bytes the log's pages can hold at once; once full, the oldest page is recycled.
    pub capacity_bytes: u32,
}

impl DeviceStatus {
    /// The logger's state by name, as CSV files and the dashboard write it: `none`
    /// (no field logger), `idle`, `armed`, `capturing`.
    pub fn logger_state_name(&self) -> &'static str {
        match self.logger.map(|l| l.state) {
            None => "none",
            Some(s) => state_name(s),
        }
    }
}

/// The name of a logger state: `idle`, `armed`, `capturing`.
pub const fn state_name(s: LoggerState) -> &'static str {
    match s {
        LoggerState::Idle => "idle",
        LoggerState::Armed => "armed",
        LoggerState::Capturing { .. } => "capturing",
    }
}

/// Supply voltage from a reading `raw` of an internal reference by a converter whose full
/// scale is the supply: `supply = millivolts * scale / raw`, rounded to the nearest
/// millivolt. With the reference's nominal voltage, `millivolts` is that voltage and
/// `scale` the converter's full scale (4095 for 12 bits); with a calibration code taken at
/// a known supply, `millivolts` is that supply and `scale` the code (VREFINT_CAL, taken at
/// 3.3 V on an STM32F4: RM0383). None for a reading of 0 (no conversion) or a supply
/// beyond `u16` millivolts.
pub fn supply_from_reference(millivolts: u32, scale: u32, raw: u32) -> Option<u16> {
    if raw == 0 {
        return None;
    }
    let num = (millivolts as u64).saturating_mul(scale as u64);
    let mv = num.saturating_add(raw as u64 / 2) / raw as u64;
    u16::try_from(mv).ok()
}
