//! `status.csv` of a live session: the device status a device sends with every health
//! frame (wire kind 0x0C), one row per status.
//!
//! Columns: `device` (the device id), `uptime_s` (time since the device's power-up),
//! `supply_v` (empty when the device does not measure it), `supply_low` (`true` below
//! [`SUPPLY_LOW_MV`]), `logger_state` (`none`, `idle`, `armed`, `capturing`),
//! `capture_remaining` (results still to log while capturing), `log_used_bytes`,
//! `log_capacity_bytes`, then the run columns of every live file.

use crate::shared::error::HostError;
use crate::shared::lazy_csv::LazyCsv;
use frothline_core::logbook::LoggerState;
use frothline_core::wire::DeviceStatus;
use std::path::Path;

/// Below this supply, mV, the status is marked low (the dashboard shows it in the warning
/// style): 3.0 V, 9 % under a nominal 3.3 V rail. A probe's front end and the ADC's
/// reference run from that rail, so the levels the tips are judged by shift with it
/// before the microcontroller itself (rated down to 1.7 V) stops.
pub const SUPPLY_LOW_MV: u16 = 3_000;

/// True when the status reports a supply below [`SUPPLY_LOW_MV`].
pub fn supply_low(s: &DeviceStatus) -> bool {
    s.supply_mv.is_some_and(|mv| mv < SUPPLY_LOW_MV)
}

/// The columns of status.csv.
pub fn columns() -> Vec<&'static str> {
    let mut c = vec![
        "device",
        "uptime_s",
        "supply_v",
        "supply_low",
        "logger_state",
        "capture_remaining",
        "log_used_bytes",
        "log_capacity_bytes",
    ];
    c.extend(crate::shared::runs::RUN_COLUMNS);
    c
}

/// The cells of one status before the run columns.
pub fn status_cells(device: u16, s: &DeviceStatus) -> Vec<String> {
    let remaining = match s.logger.map(|l| l.state) {
        Some(LoggerState::Capturing { remaining }) => remaining.to_string(),
        _ => String::new(),
    };
    vec![
        device.to_string(),
        (s.uptime_ms as f64 / 1_000.0).to_string(),
        s.supply_mv
            .map_or(String::new(), |mv| (f64::from(mv) / 1_000.0).to_string()),
        supply_low(s).to_string(),
        s.logger_state_name().to_string(),
        remaining,
        s.logger.map_or(String::new(), |l| l.used_bytes.to_string()),
        s.logger
            .map_or(String::new(), |l| l.capacity_bytes.to_string()),
    ]
}

/// A status.csv writer: created at the first status.
pub struct StatusCsv(LazyCsv);

impl StatusCsv {
    /// Rows for `dir/status.csv` (nothing is created before the first status).
    pub fn new(dir: &Path) -> Self {
        StatusCsv(LazyCsv::new(dir.join("status.csv"), columns()))
    }

    /// The file's path.
    pub fn path(&self) -> &Path {
        self.0.path()
    }

    /// Write one row; returns true when this created the file.
    pub fn write(&mut self, row: &[String]) -> Result<bool, HostError> {
        self.0.write(&[row.to_vec()])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use frothline_core::wire::LoggerStatus;

    #[test]
    fn cells_follow_the_columns() {
        let s = DeviceStatus {
            supply_mv: Some(2_950),
            uptime_ms: 61_250,
            logger: Some(LoggerStatus {
                state: LoggerState::Capturing { remaining: 12 },
                used_bytes: 8_192,
                capacity_bytes: 61_440,
            }),
        };
        let c = status_cells(7, &s);
        assert_eq!(c.len() + 3, columns().len());
        assert_eq!(
            c,
            [
                "7",
                "61.25",
                "2.95",
                "true",
                "capturing",
                "12",
                "8192",
                "61440"
            ]
        );
        let bare = DeviceStatus {
            supply_mv: None,
            uptime_ms: 1_000,
            logger: None,
        };
        assert_eq!(
            status_cells(1, &bare),
            ["1", "1", "", "false", "none", "", "", ""]
        );
    }
}
