//! What the live view knows: the latest results per probe, a short history and link health.
//!
//! The state is fed decoded results (from the wire decoder) and link events; the dashboard
//! only draws it. Keeping the two apart lets tests drive the state without a terminal.

use frothline_core::Flags;
use std::collections::{BTreeMap, VecDeque};
use std::time::{Duration, Instant};

/// Lines of history kept.
pub const HISTORY_LINES: usize = 200;

/// One probe's latest window, as the live view shows it.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ProbeRow {
    /// Probe name (from the device description or the layout).
    pub name: String,
    /// Elevation above the bed, mm.
    pub elevation_mm: f64,
    /// Streamwise position, mm.
    pub x_mm: f64,
    /// Void fraction.
    pub void_fraction: Option<f64>,
    /// Bubble count rate, Hz.
    pub bubble_rate_hz: Option<f64>,
    /// Interfacial velocity, m/s.
    pub velocity_m_s: Option<f64>,
    /// Turbulence intensity.
    pub turbulence_intensity: Option<f64>,
    /// Median bubble chord time, s.
    pub chord_median_s: Option<f64>,
    /// Cross-correlation peak coefficient.
    pub correlation_peak: Option<f64>,
    /// Flags of the latest window.
    pub flags: Flags,
    /// End of the latest window, seconds of device time.
    pub window_end_s: Option<f64>,
    /// Windows received for this probe.
    pub windows: u64,
}

/// Decoded result of one probe window, device-independent.
#[derive(Clone, Debug, PartialEq)]
pub struct LiveWindow {
    /// Device id that sent it.
    pub device: u32,
    /// Probe index on that device.
    pub probe: usize,
    /// Window start, seconds of device time.
    pub start_s: f64,
    /// Window end, seconds of device time.
    pub end_s: f64,
    /// Values as in [`ProbeRow`].
    pub void_fraction: Option<f64>,
    /// Bubble count rate, Hz.
    pub bubble_rate_hz: Option<f64>,
    /// Interfacial velocity, m/s.
    pub velocity_m_s: Option<f64>,
    /// Turbulence intensity.
    pub turbulence_intensity: Option<f64>,
    /// Median bubble chord, s.
    pub chord_median_s: Option<f64>,
    /// Correlation peak.
    pub correlation_peak: Option<f64>,
    /// Bubbles in the window.
    pub bubbles: u32,
    /// Flags.
    pub flags: Flags,
}

/// Health of one link (one port).
#[derive(Clone, Debug, Default)]
pub struct LinkHealth {
    /// Port name.
    pub port: String,
    /// Frames accepted.
    pub frames: u64,
    /// Frames lost (sequence gaps).
    pub lost: u64,
    /// Frames refused for a bad CRC.
    pub crc_failures: u64,
    /// Frames that did not parse.
    pub malformed: u64,
    /// Bytes thrown away while resynchronising.
    pub bytes_discarded: u64,
    /// Times the port was lost and reopened.
    pub reconnects: u64,
    /// True while the port is open.
    pub connected: bool,
    /// When the last frame arrived.
    pub last_frame: Option<Instant>,
    recent: VecDeque<Instant>,
}

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

    /// Frames per second over the last 5 s.
    pub fn frames_per_s(&self, now: Instant) -> f64 {
        let span = Duration::from_secs(5);
        let n = self
            .recent
            .iter()
            .filter(|&&t| now.duration_since(t) <= span)
            .count();
        n as f64 / span.as_secs_f64()
    }

    /// Seconds since the last frame.
    pub fn age_s(&self, now: Instant) -> Option<f64> {
        self.last_frame.map(|t| now.duration_since(t).as_secs_f64())
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
    /// Buffer high-water mark, percent.
    pub high_water_pct: u8,
}

/// One device as the live view knows it.
#[derive(Clone, Debug, Default)]
pub struct DeviceState {
    /// Firmware version string.
    pub firmware: String,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Run label, if a run is going.
    pub run_label: Option<String>,
    /// The probes.
    pub probes: Vec<ProbeRow>,
    /// Latest health report.
    pub health: DeviceHealth,
}

/// Everything the live view shows.
#[derive(Clone, Debug, Default)]
pub struct LiveState {
    /// Devices by id.
    pub devices: BTreeMap<u32, DeviceState>,
    /// Links by port index.
    pub links: Vec<LinkHealth>,
    /// Recent lines, newest last.
    pub history: VecDeque<String>,
}

impl LiveState {
    /// A state for the given port names.
    pub fn new(ports: &[String]) -> Self {
        LiveState {
            links: ports.iter().map(|p| LinkHealth::new(p)).collect(),
            ..Default::default()
        }
    }

    /// Add a line to the history.
    pub fn note(&mut self, line: String) {
        self.history.push_back(line);
        while self.history.len() > HISTORY_LINES {
            self.history.pop_front();
        }
    }

    /// The device entry, created on first sight.
    pub fn device(&mut self, id: u32) -> &mut DeviceState {
        self.devices.entry(id).or_default()
    }

    /// Take a window result.
    pub fn window(&mut self, w: &LiveWindow) {
        let dev = self.device(w.device);
        while dev.probes.len() <= w.probe {
            let n = dev.probes.len();
            dev.probes.push(ProbeRow {
                name: format!("p{n}"),
                ..Default::default()
            });
        }
        let row = &mut dev.probes[w.probe];
        row.void_fraction = w.void_fraction;
        row.bubble_rate_hz = w.bubble_rate_hz;
        row.velocity_m_s = w.velocity_m_s;
        row.turbulence_intensity = w.turbulence_intensity;
        row.chord_median_s = w.chord_median_s;
        row.correlation_peak = w.correlation_peak;
        row.flags = w.flags;
        row.window_end_s = Some(w.end_s);
        row.windows += 1;
        let line = plain_line(row, w);
        self.note(line);
    }
}

fn num(v: Option<f64>, width: usize, prec: usize) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v:>width$.prec$}"),
        _ => format!("{:>width$}", "-"),
    }
}

/// One line per window result, for `--plain` output and the history panel.
pub fn plain_line(row: &ProbeRow, w: &LiveWindow) -> String {
    let flags: Vec<&str> = w.flags.names().collect();
    format!(
        "{:>9.3}s dev {:<4} {:<8} C {} F {} Hz V {} m/s Tu {} chord {} ms n {:>4} {}",
        w.end_s,
        w.device,
        row.name,
        num(w.void_fraction, 5, 3),
        num(w.bubble_rate_hz, 6, 1),
        num(w.velocity_m_s, 5, 2),
        num(w.turbulence_intensity, 4, 2),
        num(w.chord_median_s.map(|s| s * 1e3), 6, 3),
        w.bubbles,
        if flags.is_empty() {
            String::new()
        } else {
            flags.join("|")
        }
    )
}
