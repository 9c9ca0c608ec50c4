//! Health of a link and of the devices on it.

use super::probe::ProbeRow;
use frothline_core::wire::Health;
use std::collections::VecDeque;
use std::time::{Duration, Instant};

/// Health of one link (one port).
#[derive(Clone, Debug, Default)]
pub struct LinkHealth {
    /// Port name.
    pub port: String,
    /// Nominal rate of the link, baud (8N1: a byte is 10 bits).
    pub baud: u32,
    /// Frames accepted.
    pub frames: u64,
    /// Bytes received.
    pub bytes: u64,
    /// Frames lost (sequence gaps).
    pub lost: u64,
    /// Frames refused for a bad CRC.
    pub crc_failures: u64,
    /// Frames that did not parse.
    pub malformed: u64,
    /// Bytes thrown away while resynchronising.
    pub bytes_discarded: u64,
    /// Times the port was lost.
    pub reconnects: u64,
    /// True while the port is open.
    pub connected: bool,
    /// True once the port was opened at least once.
    pub ever_opened: bool,
    /// When the last frame arrived.
    pub last_frame: Option<Instant>,
    recent: VecDeque<Instant>,
    recent_bytes: VecDeque<(Instant, usize)>,
}

/// Span over which rates are averaged.
const RATE_SPAN: Duration = Duration::from_secs(5);

impl LinkHealth {
    /// A link on `port`, not yet open.
    pub fn new(port: &str) -> Self {
        LinkHealth {
            port: port.to_string(),
            ..Default::default()
        }
    }

    /// Count one accepted frame at `now`.
    pub fn frame(&mut self, now: Instant) {
        self.frames += 1;
        self.last_frame = Some(now);
        self.recent.push_back(now);
        while self.recent.len() > 4096 {
            self.recent.pop_front();
        }
    }

    /// Count `n` bytes received at `now`.
    pub fn bytes_in(&mut self, now: Instant, n: usize) {
        self.bytes += n as u64;
        self.recent_bytes.push_back((now, n));
        while self.recent_bytes.len() > 4096 {
            self.recent_bytes.pop_front();
        }
    }

    fn span(now: Instant, since: Option<Instant>) -> f64 {
        // Average over the span, or over the time since the first sample if shorter.
        let s = since.map_or(RATE_SPAN, |t| now.duration_since(t).min(RATE_SPAN));
        s.as_secs_f64().max(0.5)
    }

    /// Frames per second over the last 5 s.
    pub fn frames_per_s(&self, now: Instant) -> f64 {
        let n = self
            .recent
            .iter()
            .filter(|&&t| now.duration_since(t) <= RATE_SPAN)
            .count();
        n as f64 / Self::span(now, self.recent.front().copied())
    }

    /// Bytes per second over the last 5 s.
    pub fn bytes_per_s(&self, now: Instant) -> f64 {
        let n: usize = self
            .recent_bytes
            .iter()
            .filter(|(t, _)| now.duration_since(*t) <= RATE_SPAN)
            .map(|(_, n)| n)
            .sum();
        n as f64 / Self::span(now, self.recent_bytes.front().map(|x| x.0))
    }

    /// Share of the link's capacity in use (8N1), if the baud rate is known.
    pub fn load(&self, now: Instant) -> Option<f64> {
        (self.baud > 0).then(|| self.bytes_per_s(now) * 10.0 / self.baud as f64)
    }

    /// Seconds since the last frame.
    pub fn age_s(&self, now: Instant) -> Option<f64> {
        self.last_frame.map(|t| now.duration_since(t).as_secs_f64())
    }

    /// Copy the decoder's counters.
    pub fn set_decoder(&mut self, s: &frothline_core::wire::DecoderStats) {
        self.lost = s.lost;
        self.crc_failures = s.crc_failures;
        self.malformed = s.malformed + s.oversize;
        self.bytes_discarded = s.bytes_discarded;
    }
}

/// Device-reported health, latest values.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct DeviceHealth {
    /// Samples the device dropped (processing fell behind the ADC).
    pub samples_dropped: u64,
    /// Samples at an ADC rail.
    pub saturated: u64,
    /// Result frames the device's streamer dropped (link too slow).
    pub frames_dropped: u64,
    /// Tips currently sitting in one phase.
    pub tips_stuck: u32,
    /// Highest fill of the acquisition buffer, samples.
    pub buffer_high_water: u32,
    /// Device uptime, frames of its sample clock.
    pub uptime_frames: u64,
}

impl From<&Health> for DeviceHealth {
    fn from(h: &Health) -> Self {
        DeviceHealth {
            samples_dropped: h.samples_dropped,
            saturated: h.saturated_samples,
            frames_dropped: h.frames_dropped as u64,
            tips_stuck: h.tips_stuck.count_ones(),
            buffer_high_water: h.buffer_high_water,
            uptime_frames: h.uptime_frames,
        }
    }
}

/// One device as the live view knows it.
#[derive(Clone, Debug, Default)]
pub struct DeviceState {
    /// The port it talks on.
    pub port: usize,
    /// Firmware version string.
    pub firmware: String,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// The window policy in words.
    pub window: String,
    /// Label of the run last started from this host, if any.
    pub run_label: Option<String>,
    /// True after an acknowledged StartRun, false after an acknowledged StopRun; `None`
    /// when not known.
    pub running: Option<bool>,
    /// The probes.
    pub probes: Vec<ProbeRow>,
    /// Latest health report.
    pub health: DeviceHealth,
    /// When the latest health report came.
    pub health_at: Option<Instant>,
    /// Latest device status (supply, time since power-up, field logger; kind 0x0C).
    pub status: Option<frothline_core::wire::DeviceStatus>,
    /// When it came.
    pub status_at: Option<Instant>,
    /// Descriptions received.
    pub descriptions: u64,
}
