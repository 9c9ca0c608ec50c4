//! Which run a live row belongs to: run number, label and host start time per device.
//!
//! A run starts when a device reports one in a RunStart frame (wire protocol version 2),
//! with the label the host sent in its StartRun command. The session feeds
//! [`RunTracker::started`] from those frames, which the archive keeps, so `watch` and
//! `unpack` of its archive give every row the same run columns. Run numbers count the run
//! starts of a device seen in the session from 1; rows before the first are run 0 with an
//! empty label (a run started before this session, or never). `command_sent` and
//! `acknowledged` serve a device that reports no run starts of its own.
//!
//! This is the one place that decides the run of a row.

use std::collections::HashMap;

/// Columns added at the end of the live CSV files (windows.csv, fronts.csv, profile.csv).
pub const RUN_COLUMNS: [&str; 3] = ["run_number", "run_label", "host_utc"];

/// The run of a device.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct RunTag {
    /// 1 for the first run started in this session, 0 before any.
    pub number: u32,
    /// The label sent with the StartRun command.
    pub label: String,
    /// Host time of the acknowledgement, µs since the Unix epoch.
    pub started_utc_us: u64,
}

/// Runs of every device of a session, keyed by (port, device id).
#[derive(Clone, Debug, Default)]
pub struct RunTracker {
    /// Labels of StartRun commands sent, by (port, sequence number).
    pending: HashMap<(usize, u16), String>,
    runs: HashMap<(usize, u16), RunTag>,
}

impl RunTracker {
    /// No run known.
    pub fn new() -> Self {
        Self::default()
    }

    /// The host sent StartRun with `label` as command `seq` on `port`.
    pub fn command_sent(&mut self, port: usize, seq: u16, label: &str) {
        self.pending.insert((port, seq), label.to_string());
    }

    /// `device` on `port` acknowledged command `seq`, a StartRun, at host time `t_us`.
    pub fn acknowledged(&mut self, port: usize, device: u16, seq: u16, t_us: u64) {
        let label = self.pending.get(&(port, seq)).cloned().unwrap_or_default();
        self.started(port, device, label, t_us);
    }

    /// A new run of `device` on `port` started at host time `t_us`.
    pub fn started(&mut self, port: usize, device: u16, label: String, t_us: u64) {
        let run = self.runs.entry((port, device)).or_default();
        run.number = run.number.saturating_add(1);
        run.label = label;
        run.started_utc_us = t_us;
    }

    /// The current run of `device` on `port` (run 0 when none was started).
    pub fn tag(&self, port: usize, device: u16) -> RunTag {
        self.runs.get(&(port, device)).cloned().unwrap_or_default()
    }

    /// The run columns of a row received at host time `t_us`.
    pub fn columns(&self, port: usize, device: u16, t_us: u64) -> [String; 3] {
        let t = self.tag(port, device);
        [
            t.number.to_string(),
            t.label,
            crate::shared::archive::utc_iso(t_us),
        ]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn runs_count_acknowledged_starts_and_keep_their_labels() {
        let mut r = RunTracker::new();
        assert_eq!(r.tag(0, 7).number, 0);
        r.command_sent(0, 3, "flume-a");
        r.acknowledged(0, 7, 3, 1_000_000);
        r.command_sent(0, 5, "flume-b");
        assert_eq!(r.tag(0, 7).label, "flume-a");
        r.acknowledged(0, 7, 5, 2_000_000);
        let t = r.tag(0, 7);
        assert_eq!((t.number, t.label.as_str()), (2, "flume-b"));
        assert_eq!(
            r.columns(0, 7, 2_500_000),
            [
                "2".to_string(),
                "flume-b".into(),
                "1970-01-01T00:00:02.500Z".into()
            ]
        );
        // Another device on the same port has its own runs.
        assert_eq!(r.tag(0, 8).number, 0);
    }
}
