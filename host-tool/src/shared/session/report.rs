//! The summary of a finished session: per port, and for the whole session.

use super::{LinkGap, RunMark, SeqGap};
use frothline_core::wire::{DecoderStats, DeviceSeqStats, PROTOCOL_VERSION};
use std::path::PathBuf;

/// What one port carried.
#[derive(Clone, Debug, Default)]
pub struct PortReport {
    /// Port name.
    pub name: String,
    /// Bytes received.
    pub bytes: u64,
    /// Decoder counters.
    pub decoder: DecoderStats,
    /// Sequence tracking of each device seen.
    pub devices: Vec<DeviceSeqStats>,
    /// Bytes of an unfinished frame at the end.
    pub unfinished_bytes: usize,
    /// Command frames sent.
    pub commands_sent: u64,
}

/// The end of a session: counters and the files written.
#[derive(Clone, Debug, Default)]
pub struct SessionReport {
    /// Per port.
    pub ports: Vec<PortReport>,
    /// Every sequence gap.
    pub seq_gaps: Vec<SeqGap>,
    /// Every link-down moment.
    pub link_gaps: Vec<LinkGap>,
    /// Every run start.
    pub runs: Vec<RunMark>,
    /// Window results written to windows.csv.
    pub windows: u64,
    /// Window results written without times (the device never described itself).
    pub windows_without_times: u64,
    /// Front arrivals written.
    pub fronts: u64,
    /// Profile fits written.
    pub profiles: u64,
    /// Files written.
    pub files: Vec<PathBuf>,
    /// The archive, if one was written, and its size.
    pub archive: Option<(PathBuf, u64)>,
    /// Devices whose probe count differs from the `--layout` given (one line each).
    pub layout_mismatches: Vec<String>,
}

impl SessionReport {
    /// One line of what came out: window results (and how many lack times, `why`),
    /// fronts, profiles, and the files written.
    pub fn results_line(&self, why: &str) -> String {
        let mut o = format!("{} window results", self.windows);
        if self.windows_without_times > 0 {
            o += &format!(" ({} without times: {why})", self.windows_without_times);
        }
        if self.fronts > 0 {
            o += &format!(", {} fronts", self.fronts);
        }
        if self.profiles > 0 {
            o += &format!(", {} profiles", self.profiles);
        }
        let files: Vec<String> = self.files.iter().map(|p| p.display().to_string()).collect();
        if !files.is_empty() {
            o += &format!(" -> {}", files.join(", "));
        }
        for m in &self.layout_mismatches {
            o += &format!("\nlayout mismatch: {m}");
        }
        o
    }

    /// Frames accepted, all ports.
    pub fn frames(&self) -> u64 {
        self.ports.iter().map(|p| p.decoder.frames).sum()
    }

    /// Frames lost in sequence gaps, all ports.
    pub fn lost(&self) -> u64 {
        self.ports.iter().map(|p| p.decoder.lost).sum()
    }

    /// CRC failures, all ports.
    pub fn crc_failures(&self) -> u64 {
        self.ports.iter().map(|p| p.decoder.crc_failures).sum()
    }

    /// Lines about frames of another protocol version, one per port that had any: what
    /// they were and what to do.
    pub fn version_warnings(&self) -> Vec<String> {
        self.ports
            .iter()
            .filter(|p| p.decoder.other_version > 0)
            .map(|p| {
                format!(
                    "{}: {} frame(s) of protocol version {} skipped: this build reads version \
                     {PROTOCOL_VERSION} only (update the device's firmware or the host tool so \
                     both speak the same version)",
                    p.name, p.decoder.other_version, p.decoder.last_other_version
                )
            })
            .collect()
    }
}
