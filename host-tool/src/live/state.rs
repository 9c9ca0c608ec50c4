//! What the live view knows: the latest results per probe, a short history and link health.
//!
//! The state is fed session events (decoded frames and link events, see
//! [`crate::shared::session::Event`]); the dashboard only draws it. Keeping the two apart lets tests
//! drive the state without a terminal.

mod link;
mod plain;
mod probe;
mod station;

pub use link::{DeviceHealth, DeviceState, LinkHealth};
pub use plain::plain_line;
pub use probe::{LiveWindow, ProbeRow, StripView, STRIP_POINTS};
pub use station::{LiveProfile, StationLive, DECAY_POINTS};

use crate::shared::probe_summary::{ProbeTally, SummaryRule};
use crate::shared::session::{describe_event, setting_text, Event};
use frothline_core::wire::quant::from_length;
use frothline_core::wire::Kind;
use frothline_core::Flags;
use std::collections::{BTreeMap, HashMap, VecDeque};
use std::time::{Duration, Instant};

/// Lines of history kept.
pub const HISTORY_LINES: usize = 200;

/// Analysis windows kept for the recent-windows panel.
pub const RECENT_WINDOWS: usize = 100;

/// A link is called quiet when no frame came for this long although it is up.
pub const QUIET_AFTER: Duration = Duration::from_secs(3);

/// How the live view judges and reports what it receives.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ViewOptions {
    /// Convergence target: a running figure is done when the half-width of its 95 %
    /// interval is at most this share of its mean (0.05: ±5 %).
    pub target: f64,
    /// Show protocol chatter in the events (commands sent, ACKs of description requests,
    /// repeated descriptions).
    pub chatter: bool,
    /// One events line per this many profile fits of a station (the first always).
    pub profile_every: u64,
}

impl Default for ViewOptions {
    fn default() -> Self {
        ViewOptions {
            target: DEFAULT_TARGET,
            chatter: false,
            profile_every: 10,
        }
    }
}

/// The default convergence target: ±5 % of the mean (common practice, no source).
pub const DEFAULT_TARGET: f64 = 0.05;

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
    /// Stations of transient flows, by (device, station index).
    pub stations: BTreeMap<(u32, u8), StationLive>,
    /// Convergence target, chatter, event rate.
    pub view: ViewOptions,
    /// The rule for flagged windows in the running figures.
    pub rule: SummaryRule,
    /// First probe row shown (the probe table scrolls when it does not fit).
    pub probe_scroll: usize,
    /// Events lines left out (chatter, profile lines between the ones shown).
    pub events_suppressed: u64,
    /// A question being answered on the keys line (run label, mark note).
    pub prompt: Option<Prompt>,
    /// What the bottom-right panel shows.
    pub strip_view: StripView,
    /// The rig's discharge per unit width from the layout (`[flow] discharge_m2_s`), for the
    /// continuity check of the running figures.
    pub discharge_m2_s: Option<f64>,
}

/// Events lines for a new device status: the field logger's state changed, or the supply
/// fell below the low threshold (once per fall).
fn status_changes(
    device: u16,
    before: Option<&frothline_core::wire::DeviceStatus>,
    now: &frothline_core::wire::DeviceStatus,
) -> Vec<String> {
    use crate::shared::status_csv::{supply_low, SUPPLY_LOW_MV};
    let mut lines = Vec::new();
    if let Some(b) = before {
        let (was, is) = (b.logger_state_name(), now.logger_state_name());
        if was != is {
            lines.push(format!("device {device}: logger {was} -> {is}"));
        }
    }
    if supply_low(now) && !before.is_some_and(supply_low) {
        lines.push(format!(
            "device {device}: supply LOW {:.2} V (below {:.1} V)",
            f64::from(now.supply_mv.unwrap_or(0)) / 1e3,
            f64::from(SUPPLY_LOW_MV) / 1e3
        ));
    }
    lines
}

/// What a text prompt asks for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PromptKind {
    /// The label of the run to start.
    RunLabel,
    /// The note of a mark.
    MarkNote,
}

/// A line of text typed on the dashboard.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Prompt {
    /// What it is for.
    pub kind: PromptKind,
    /// The text so far (starts with the default).
    pub text: String,
}

impl Prompt {
    /// The question shown before the text.
    pub fn question(&self) -> &'static str {
        match self.kind {
            PromptKind::RunLabel => "label of the new run (Enter starts, Esc cancels): ",
            PromptKind::MarkNote => "mark: a short note (Enter writes, Esc cancels): ",
        }
    }
}

impl LiveState {
    /// The end of the latest window received from `device`, s of device time.
    pub fn device_time_s(&self, device: u32) -> Option<f64> {
        self.devices
            .get(&device)?
            .probes
            .iter()
            .filter_map(|p| p.window_end_s)
            .reduce(f64::max)
    }
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
        let rule = self.rule;
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
        // A window that starts before the previous one ended: the device's clock went back
        // (a new run); the running figures start again.
        if row.window_end_s.is_some_and(|end| w.start_s < end - 1e-9) {
            row.tally = ProbeTally::new();
            row.strip.clear();
        }
        row.strip
            .push_back((w.end_s, [w.void_fraction, w.bubble_rate_hz, w.velocity_m_s]));
        while row.strip.len() > STRIP_POINTS {
            row.strip.pop_front();
        }
        row.tally.add(&w.figures(), &rule);
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

    /// The sample rate of `device`, Hz (1 when unknown: times in frames).
    fn sample_rate(&self, device: u16) -> f64 {
        self.devices
            .get(&(device as u32))
            .map(|d| d.sample_rate_hz as f64)
            .filter(|f| *f > 0.0)
            .unwrap_or(1.0)
    }

    /// The unit discharges of each device's stations (probes sharing `x_mm`, at least three)
    /// from the running C and V of the run so far, with the continuity check against
    /// [`discharge_m2_s`](Self::discharge_m2_s) (steady flows: a device that reported a
    /// front has none).
    pub fn continuity(&self) -> Vec<(u32, f64, crate::shared::discharge::Discharge)> {
        let mut out = Vec::new();
        for (&id, dev) in &self.devices {
            if self.stations.keys().any(|(d, _)| *d == id) {
                continue;
            }
            let points = dev.probes.iter().map(|p| {
                (
                    p.x_mm,
                    crate::shared::discharge::point_of_tally(&p.name, p.elevation_mm, &p.tally),
                )
            });
            for (x, d) in crate::shared::discharge::by_station(points, self.discharge_m2_s) {
                out.push((id, x, d));
            }
        }
        out
    }

    /// The station to show: the one with the latest profile fit, else the latest front.
    pub fn shown_station(&self) -> Option<(&(u32, u8), &StationLive)> {
        let key = |s: &StationLive| {
            (
                s.profile.as_ref().map_or(f64::NEG_INFINITY, |p| p.end_s),
                s.front_s.unwrap_or(f64::NEG_INFINITY),
            )
        };
        self.stations
            .iter()
            .filter(|(_, s)| s.front_s.is_some() || s.profile.is_some())
            .max_by(|a, b| {
                key(a.1)
                    .partial_cmp(&key(b.1))
                    .unwrap_or(std::cmp::Ordering::Equal)
            })
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
                d.descriptions += 1;
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
            Event::Front { device, front, .. } => {
                let fs = self.sample_rate(*device);
                self.stations
                    .entry((*device as u32, front.station))
                    .or_default()
                    .front(front, fs);
            }
            Event::Profile { device, fit, .. } => {
                let fs = self.sample_rate(*device);
                self.stations
                    .entry((*device as u32, fit.station))
                    .or_default()
                    .profile(fit, fs);
            }
            Event::Health { device, health, .. } => {
                let d = self.device(*device as u32);
                d.health = DeviceHealth::from(health);
                d.health_at = Some(now);
            }
            Event::Status { device, status, .. } => {
                let d = self.device(*device as u32);
                let before = d.status.replace(*status);
                d.status_at = Some(now);
                for line in status_changes(*device, before.as_ref(), status) {
                    self.note(line);
                }
            }
            Event::TipHealth { device, tips, .. } => {
                let d = self.device(*device as u32);
                for r in tips {
                    if let Some(p) = d.probes.get_mut(r.probe as usize) {
                        p.tips = Some(*r);
                    }
                }
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
                        for p in &mut d.probes {
                            p.tally = ProbeTally::new();
                            p.strip.clear();
                        }
                    }
                    Some(Kind::StopRun) => d.running = Some(false),
                    _ => {}
                }
            }
            _ => {}
        }
        match self.event_line(e, &ports, names) {
            Some(line) => self.note(line),
            None => {
                if describe_event(e, &ports).is_some() {
                    self.events_suppressed += 1;
                }
            }
        }
    }

    /// The events line for `e`, or None when it is chatter (unless asked for) or a profile
    /// fit between the ones shown. Front arrivals are always kept. Lines drop the port when
    /// there is only one.
    fn event_line(
        &self,
        e: &Event,
        ports: &[String],
        names: &dyn Fn(u16, usize) -> String,
    ) -> Option<String> {
        let chatter = match e {
            Event::Sent { .. } => true,
            Event::Reply {
                command: Some(Kind::DescribeRequest),
                nack: None,
                ..
            } => true,
            // The first description of a device is news; repeats are chatter.
            Event::Describe { device, .. } => self
                .devices
                .get(&(*device as u32))
                .is_some_and(|d| d.descriptions > 1),
            _ => false,
        };
        if chatter && !self.view.chatter {
            return None;
        }
        let single = ports.len() <= 1;
        let strip = |line: String| -> String {
            match ports.first() {
                Some(p) if single => line
                    .strip_prefix(&format!("{p}: "))
                    .map(str::to_string)
                    .unwrap_or(line),
                _ => line,
            }
        };
        match e {
            Event::Front { device, front, .. } => {
                let fs = self.sample_rate(*device);
                Some(strip(format!(
                    "{}front at {}, S{}, device t {:.3} s",
                    if single {
                        String::new()
                    } else {
                        format!("{}: ", ports.first().map_or("?", |s| s.as_str()))
                    },
                    names(*device, front.probe as usize),
                    front.station + 1,
                    front.frame as f64 / fs
                )))
            }
            Event::Profile { device, fit, .. } => {
                let st = self.stations.get(&(*device as u32, fit.station))?;
                let every = self.view.profile_every.max(1);
                if (st.profiles - 1) % every != 0 {
                    return None;
                }
                let p = st.profile.as_ref()?;
                let opt = |v: Option<f64>, prec: usize| {
                    v.map_or("-".to_string(), |v| format!("{v:.prec$}"))
                };
                Some(format!(
                    "S{} profile {}: Y90 {} mm, Cmean {} (1 line in {every})",
                    fit.station + 1,
                    st.profiles,
                    opt(p.y90_mm, 1),
                    opt(p.mean_void_fraction, 3)
                ))
            }
            other => describe_event(other, ports).map(strip),
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
