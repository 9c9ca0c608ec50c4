//! What the live view knows: the latest results per probe, a short history and link health.
//!
//! The state is fed session events (decoded frames and link events, see
//! [`crate::shared::session::Event`]); the dashboard only draws it. Keeping the two apart lets tests
//! drive the state without a terminal.

use crate::shared::probe_summary::{ProbeTally, SummaryRule, WindowFigures};
use crate::shared::session::{describe_event, setting_text, Event};
use frothline_core::decay::{DecayFit, DecayTracker};
use frothline_core::wire::quant::{
    from_exponent, from_fraction, from_length, from_micros, from_spacing,
};
use frothline_core::wire::{
    FrontArrival, Health, Kind, ProfileFit, WindowResult, PROFILE_ESTIMATES,
};
use frothline_core::Flags;
use std::collections::{BTreeMap, HashMap, VecDeque};
use std::time::{Duration, Instant};

/// Lines of history kept.
pub const HISTORY_LINES: usize = 200;

/// Analysis windows kept for the recent-windows panel.
pub const RECENT_WINDOWS: usize = 100;

/// A link is called quiet when no frame came for this long although it is up.
pub const QUIET_AFTER: Duration = Duration::from_secs(3);

/// Points of a station's decay series (Cmean against time since the front) kept and fitted.
pub const DECAY_POINTS: usize = 256;

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

/// A station's latest profile fit, as received (kind 0x04).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LiveProfile {
    /// Slice start, seconds of device time.
    pub start_s: f64,
    /// Slice end, seconds of device time.
    pub end_s: f64,
    /// Slice start minus the station's front, s (when the front is known).
    pub since_front_s: Option<f64>,
    /// Elevation where C = 0.9, mm.
    pub y90_mm: Option<f64>,
    /// Depth-averaged void fraction over 0..Y90.
    pub mean_void_fraction: Option<f64>,
    /// Power-law exponent n of C = 0.9 (y/Y90)^n.
    pub exponent: Option<f64>,
    /// RMSE of the power-law fit.
    pub rmse: Option<f64>,
    /// Probes that contributed.
    pub probes_used: u8,
    /// Which estimate Y90 and Cmean are (`power_law`, `exponential`, `trapezoid`).
    pub estimate: Option<&'static str>,
    /// Standard error of Y90, mm.
    pub y90_se_mm: Option<f64>,
    /// Standard error of Cmean.
    pub mean_void_fraction_se: Option<f64>,
    /// Standard error of n.
    pub exponent_se: Option<f64>,
}

/// What the live view knows of one station of a transient flow.
#[derive(Clone, Debug, Default)]
pub struct StationLive {
    /// The front arrival at the station: the earliest probe arrival, frames of device time.
    pub front_frame: Option<u64>,
    /// The same, seconds of device time.
    pub front_s: Option<f64>,
    /// Probe arrivals received: (probe index, device time, s).
    pub arrivals: Vec<(usize, f64)>,
    /// The latest profile fit.
    pub profile: Option<LiveProfile>,
    /// Profile fits received.
    pub profiles: u64,
    /// Cmean against time since the front, s.
    pub series: DecayTracker<DECAY_POINTS>,
    /// The host's decay fit of [`StationLive::series`] (refitted at each profile).
    pub decay: Option<DecayFit>,
    /// Start frame of the latest profile's slice.
    pub last_slice: Option<u64>,
}

impl StationLive {
    /// Take a front arrival (`fs`: the device's sample rate, Hz).
    pub fn front(&mut self, f: &FrontArrival, fs: f64) {
        // A front before the latest slice: the device's clock went back (a new run).
        if self.last_slice.is_some_and(|t| f.frame < t) {
            *self = StationLive::default();
        }
        let s = f.frame as f64 / fs;
        self.arrivals.push((f.probe as usize, s));
        if self.front_frame.is_none_or(|t| f.frame < t) {
            self.front_frame = Some(f.frame);
            self.front_s = Some(s);
        }
    }

    /// Take a profile fit: the latest fit, and a point of the decay series (then refit).
    pub fn profile(&mut self, p: &ProfileFit, fs: f64) {
        // A slice before the latest one: a new run; its series starts again.
        if self.last_slice.is_some_and(|t| p.slice_start <= t) {
            self.series.clear();
            self.decay = None;
        }
        self.last_slice = Some(p.slice_start);
        let since = self
            .front_frame
            .map(|f| (p.slice_start as f64 - f as f64) / fs);
        let fit = LiveProfile {
            start_s: p.slice_start as f64 / fs,
            end_s: (p.slice_start + p.slice_frames as u64) as f64 / fs,
            since_front_s: since,
            y90_mm: p.y90.map(|v| v as f64 / 10.0),
            mean_void_fraction: p.mean_void_fraction.map(|q| from_fraction(q) as f64),
            exponent: p.exponent.map(|q| from_exponent(q) as f64),
            rmse: p.fit_rmse.map(|q| from_fraction(q) as f64),
            probes_used: p.probes_used,
            estimate: PROFILE_ESTIMATES
                .get(p.estimate as usize)
                .copied()
                .filter(|&e| e != "none"),
            y90_se_mm: p.y90_se.map(|q| from_spacing(q) as f64),
            mean_void_fraction_se: p.mean_void_fraction_se.map(|q| from_fraction(q) as f64),
            exponent_se: p.exponent_se.map(|q| from_exponent(q) as f64),
        };
        if let (Some(t), Some(c)) = (since, fit.mean_void_fraction) {
            if self.series.push(t as f32, c as f32).is_ok() {
                self.decay = Some(self.series.fit(f32::NAN));
            }
        }
        self.profile = Some(fit);
        self.profiles += 1;
    }
}

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
    /// Running figures of the current run (see [`crate::shared::probe_summary`]).
    pub tally: ProbeTally,
    /// The latest windows of the run for the strip chart: (end, s of device time; C, F, V).
    pub strip: VecDeque<(f64, [Option<f64>; 3])>,
    /// The latest tip-health report of this probe (wire kind 0x09).
    pub tips: Option<frothline_core::wire::TipReport>,
}

/// Windows per probe kept for the strip chart.
pub const STRIP_POINTS: usize = 600;

/// What the bottom-right panel shows (key `c` cycles it).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum StripView {
    /// The recent windows as a table of C.
    #[default]
    Table,
    /// C of every probe against device time.
    VoidFraction,
    /// F against device time.
    CountRate,
    /// V against device time.
    Velocity,
    /// Every tip's levels, swing and interfaces per second ([`crate::dashboard_tips`]).
    Tips,
}

impl StripView {
    /// The next view.
    pub fn next(self) -> StripView {
        match self {
            StripView::Table => StripView::VoidFraction,
            StripView::VoidFraction => StripView::CountRate,
            StripView::CountRate => StripView::Velocity,
            StripView::Velocity => StripView::Tips,
            StripView::Tips => StripView::Table,
        }
    }

    /// Index into the strip values and a name with unit (none for the table).
    pub fn quantity(self) -> Option<(usize, &'static str)> {
        match self {
            StripView::Table | StripView::Tips => None,
            StripView::VoidFraction => Some((0, "C [-]")),
            StripView::CountRate => Some((1, "F [Hz]")),
            StripView::Velocity => Some((2, "V [m/s]")),
        }
    }
}

impl ProbeRow {
    /// The worst relative half-width of the running C, F and (when measured) V, and
    /// whether all of them met `target`. None before any interval exists.
    pub fn convergence(&self, target: f64) -> Option<(f64, bool)> {
        let figures = [
            self.tally.void_fraction(),
            self.tally.count_rate_hz(),
            self.tally.velocity_m_s(),
        ];
        let mut worst: Option<f64> = None;
        let mut done = true;
        for (i, e) in figures.iter().enumerate() {
            let Some(e) = e else {
                // C and F are always expected; V only from dual-tip probes.
                if i < 2 {
                    done = false;
                }
                continue;
            };
            match e.relative_half_width() {
                Some(r) => worst = Some(worst.map_or(r, |w: f64| w.max(r))),
                None => done = false,
            }
            done &= e.converged(target);
        }
        worst.map(|w| (w, done))
    }
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
    /// The window's figures for the per-probe summary.
    pub fn figures(&self) -> WindowFigures {
        WindowFigures {
            duration_s: self.end_s - self.start_s,
            void_fraction: self.void_fraction,
            count_rate_hz: self.bubble_rate_hz,
            bubbles: Some(self.bubbles as f64),
            velocity_m_s: self.velocity_m_s,
            turbulence_intensity: self.turbulence_intensity,
            chord_median_s: self.chord_median_s,
            flags: self.flags,
            before_front: false,
        }
    }

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
    /// Descriptions received.
    pub descriptions: u64,
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
        "{:>9.3} s  dev {:<5} probe {:<10} C {}  F {} Hz  V {} m/s  Tu {}  chord {} ms  bubbles {:>4}  {}",
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
