//! What the live view knows: the latest results per probe, a short history and link health.
//!
//! The state is fed session events (decoded frames and link events, see
//! [`crate::session::Event`]); the dashboard only draws it. Keeping the two apart lets tests
//! drive the state without a terminal.

use crate::session::{describe_event, setting_text, Event};
use frothline_core::wire::quant::{from_fraction, from_length, from_micros};
use frothline_core::wire::{Health, Kind, WindowResult};
use frothline_core::Flags;
use std::collections::{BTreeMap, HashMap, VecDeque};
use std::time::{Duration, Instant};

/// Lines of history kept.
pub const HISTORY_LINES: usize = 200;

/// Analysis windows kept for the recent-windows panel.
pub const RECENT_WINDOWS: usize = 100;

/// A link is called quiet when no frame came for this long although it is up.
pub const QUIET_AFTER: Duration = Duration::from_secs(3);

/// One probe's latest window, as the live view shows it.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ProbeRow {
    /// Probe name (from the layout, or `p0`, `p1`, ...).
    pub name: String,
    /// Elevation above the bed, mm.
    pub elevation_mm: f64,
    /// Streamwise position, mm.
    pub x_mm: f64,
    /// Station index.
    pub station: u8,
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
    /// Bubbles in the latest window.
    pub bubbles: u32,
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
    /// Window start, seconds of device time (frames when the rate is unknown).
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

impl LiveWindow {
    /// A wire window result of `device`, at `sample_rate_hz` (times in frames if unknown).
    pub fn from_wire(device: u16, w: &WindowResult, sample_rate_hz: Option<f64>) -> LiveWindow {
        let fs = sample_rate_hz.filter(|f| *f > 0.0).unwrap_or(1.0);
        LiveWindow {
            device: device as u32,
            probe: w.probe as usize,
            start_s: w.start as f64 / fs,
            end_s: (w.start + w.frames as u64) as f64 / fs,
            void_fraction: Some(w.void_fraction_value() as f64),
            bubble_rate_hz: Some(w.bubble_rate_hz() as f64),
            velocity_m_s: w.velocity_m_s().map(f64::from),
            turbulence_intensity: w.turbulence_intensity().map(f64::from),
            chord_median_s: w.chords.map(|c| from_micros(c.median) as f64),
            correlation_peak: w.correlation.map(|c| from_fraction(c.peak) as f64),
            bubbles: w.bubbles,
            flags: Flags(w.flags),
        }
    }
}

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
}

/// One analysis window of one device: the void fraction of each probe.
#[derive(Clone, Debug, PartialEq)]
pub struct RecentWindow {
    /// Device id.
    pub device: u32,
    /// Window start frame.
    pub start: u64,
    /// Start and end, seconds of device time.
    pub start_s: f64,
    /// End, seconds.
    pub end_s: f64,
    /// C by probe index.
    pub void_fraction: Vec<Option<f64>>,
    /// Union of the probes' flags.
    pub flags: Flags,
}

/// Everything the live view shows.
#[derive(Clone, Debug, Default)]
pub struct LiveState {
    /// Devices by id.
    pub devices: BTreeMap<u32, DeviceState>,
    /// Links by port index.
    pub links: Vec<LinkHealth>,
    /// Event lines, newest last.
    pub history: VecDeque<String>,
    /// Recent analysis windows, newest last.
    pub recent: VecDeque<RecentWindow>,
    /// When the view started (history times are relative to it).
    pub started: Option<Instant>,
    /// Labels of StartRun commands sent, by (port, sequence number).
    pub pending_labels: HashMap<(usize, u16), String>,
    /// What the keys do, shown at the bottom (empty: no key help).
    pub keys_help: String,
}

impl LiveState {
    /// A state for the given port names.
    pub fn new(ports: &[String]) -> Self {
        LiveState {
            links: ports.iter().map(|p| LinkHealth::new(p)).collect(),
            ..Default::default()
        }
    }

    /// Add a line to the history, stamped with the time since the view started.
    pub fn note(&mut self, line: String) {
        let line = match self.started {
            Some(t0) => format!("{:>7.1} s  {line}", t0.elapsed().as_secs_f64()),
            None => line,
        };
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
                elevation_mm: f64::NAN,
                x_mm: f64::NAN,
                ..Default::default()
            });
        }
        let nprobes = dev.probes.len();
        let row = &mut dev.probes[w.probe];
        row.void_fraction = w.void_fraction;
        row.bubble_rate_hz = w.bubble_rate_hz;
        row.velocity_m_s = w.velocity_m_s;
        row.turbulence_intensity = w.turbulence_intensity;
        row.chord_median_s = w.chord_median_s;
        row.correlation_peak = w.correlation_peak;
        row.bubbles = w.bubbles;
        row.flags = w.flags;
        row.window_end_s = Some(w.end_s);
        row.windows += 1;
        let start = (w.start_s * 1e6).round() as u64;
        match self.recent.back_mut() {
            Some(r) if r.device == w.device && r.start == start => {
                if r.void_fraction.len() < nprobes {
                    r.void_fraction.resize(nprobes, None);
                }
                r.void_fraction[w.probe] = w.void_fraction;
                r.flags |= w.flags;
            }
            _ => {
                let mut c = vec![None; nprobes];
                c[w.probe] = w.void_fraction;
                self.recent.push_back(RecentWindow {
                    device: w.device,
                    start,
                    start_s: w.start_s,
                    end_s: w.end_s,
                    void_fraction: c,
                    flags: w.flags,
                });
                while self.recent.len() > RECENT_WINDOWS {
                    self.recent.pop_front();
                }
            }
        }
    }

    /// Take a session event at `now`. `names` gives the CSV name of a probe (device, index).
    pub fn apply(&mut self, e: &Event, now: Instant, names: &dyn Fn(u16, usize) -> String) {
        let ports: Vec<String> = self.links.iter().map(|l| l.port.clone()).collect();
        match e {
            Event::LinkUp { port } => {
                if let Some(l) = self.links.get_mut(*port) {
                    l.connected = true;
                    l.ever_opened = true;
                }
            }
            Event::LinkDown { port, .. } => {
                if let Some(l) = self.links.get_mut(*port) {
                    l.connected = false;
                    l.reconnects += 1;
                }
            }
            Event::Describe { port, device, desc } => {
                let d = self.device(*device as u32);
                d.port = *port;
                d.firmware = desc.firmware.as_str().to_string();
                d.sample_rate_hz = (desc.sample_rate_millihz as f64 / 1000.0).round() as u32;
                d.window = setting_text(&desc.window, desc.sample_rate_millihz as f64 / 1000.0);
                let old = std::mem::take(&mut d.probes);
                d.probes = desc
                    .probes
                    .iter()
                    .enumerate()
                    .map(|(i, p)| {
                        let mut row = old.get(i).cloned().unwrap_or_default();
                        row.name = names(*device, i);
                        row.elevation_mm = from_length(p.elevation) as f64;
                        row.x_mm = from_length(p.x) as f64;
                        row.station = p.station;
                        row
                    })
                    .collect();
            }
            Event::Window {
                port,
                device,
                result,
            } => {
                let fs = self
                    .devices
                    .get(&(*device as u32))
                    .map(|d| d.sample_rate_hz as f64)
                    .filter(|f| *f > 0.0);
                if let Some(l) = self.links.get_mut(*port) {
                    l.last_frame = Some(now);
                }
                self.window(&LiveWindow::from_wire(*device, result, fs));
            }
            Event::Health { device, health, .. } => {
                let d = self.device(*device as u32);
                d.health = DeviceHealth::from(health);
                d.health_at = Some(now);
            }
            Event::Reply {
                port,
                device,
                seq,
                command,
                nack: None,
            } => {
                let label = self.pending_labels.remove(&(*port, *seq));
                let d = self.device(*device as u32);
                match command {
                    Some(Kind::StartRun) => {
                        d.running = Some(true);
                        d.run_label = label;
                    }
                    Some(Kind::StopRun) => d.running = Some(false),
                    _ => {}
                }
            }
            _ => {}
        }
        if let Some(line) = describe_event(e, &ports) {
            self.note(line);
        }
    }

    /// Count frames and bytes of a batch on `port` and copy the decoder's counters.
    pub fn link_batch(
        &mut self,
        port: usize,
        now: Instant,
        bytes: usize,
        frames: usize,
        stats: Option<&frothline_core::wire::DecoderStats>,
    ) {
        if let Some(l) = self.links.get_mut(port) {
            l.bytes_in(now, bytes);
            for _ in 0..frames {
                l.frame(now);
            }
            if let Some(s) = stats {
                l.set_decoder(s);
            }
        }
    }
}

fn num(v: Option<f64>, width: usize, prec: usize) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v:>width$.prec$}"),
        _ => format!("{:>width$}", "-"),
    }
}

/// One line per window result, for `--plain` output: device time at the window end,
/// device, probe, C, F, V, Tu, median chord, bubbles and flags, in fixed-width columns.
pub fn plain_line(row: &ProbeRow, w: &LiveWindow) -> String {
    let flags: Vec<&str> = w.flags.names().collect();
    format!(
        "{:>9.3} s  dev {:<5} probe {:<10} C {}  F {} Hz  V {} m/s  Tu {}  chord {} ms  n {:>4}  {}",
        w.end_s,
        w.device,
        row.name,
        num(w.void_fraction, 6, 4),
        num(w.bubble_rate_hz, 7, 2),
        num(w.velocity_m_s, 5, 2),
        num(w.turbulence_intensity, 5, 3),
        num(w.chord_median_s.map(|s| s * 1e3), 7, 3),
        w.bubbles,
        if flags.is_empty() {
            "-".to_string()
        } else {
            flags.join("|")
        }
    )
}
