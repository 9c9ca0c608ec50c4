//! `frothline watch`: receive framed results from one or more devices over serial ports.
//!
//! ```text
//! port 0 reader thread --(port, host time, bytes)--+
//! port 1 reader thread ----------------------------+--> main loop --> Session (archive first,
//!   (raw 8N1, 50 ms timeout;                       |                 then decoder, CSV)
//!    on a read error: gap, reopen every second)    |             --> LiveState --> dashboard
//!                                                  +<-- commands (DescribeRequest on open,
//!                                                       --start-run ..., dashboard keys)
//! ```
//!
//! Every byte read goes to the archive before anything else looks at it, so the archive can
//! be decoded again (`frothline unpack`) into the same CSV files. After an unplug the reader
//! records a gap, the view shows the link DOWN, and the port is reopened every second. Ctrl-C
//! or `q` ends the session cleanly: readers stopped, the last bytes archived, the archive
//! synced, the CSV files flushed, the terminal restored.

use crate::live::dashboard::SAFETY_LINE;
use crate::live::state::{LiveState, LiveWindow, ViewOptions};
use crate::shared::archive::ArchiveWriter;
use crate::shared::commands::{parse_label, Command};
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::session::{describe_event, Event, Session, SessionOptions, SessionReport};
use crate::shared::window_spec::WindowSpec;
use frothline_core::wire::WindowSetting;
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, RecvTimeoutError, Sender};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Read timeout of a port: how long a reader waits for bytes before it looks at the stop flag.
pub const READ_TIMEOUT: Duration = Duration::from_millis(50);
/// Pause between attempts to reopen a lost port.
pub const REOPEN_EVERY: Duration = Duration::from_secs(1);
/// Dashboard redraw period.
const REDRAW: Duration = Duration::from_millis(100);

/// Arguments of `frothline watch`.
#[derive(clap::Args, Debug, Clone)]
pub struct WatchArgs {
    /// Serial port of a device, e.g. /dev/ttyUSB0 or COM3; repeat for several devices (one
    /// device per port, told apart by device id). `frothline ports` lists them.
    #[arg(long = "port", short = 'p', value_name = "PORT", required = true)]
    pub ports: Vec<String>,
    /// Baud rate of every port (8 data bits, no parity, 1 stop bit).
    #[arg(long, default_value_t = 115_200)]
    pub baud: u32,
    /// Folder for the session: the archive of every byte received
    /// (`session-<UTC time>.frothwire`, a new file for each session; read it again with
    /// `frothline unpack`) and the decoded windows.csv, fronts.csv, profile.csv (replaced by
    /// each session; a session started while another one writes the folder puts its CSV
    /// files in a subfolder named after its archive).
    #[arg(long, value_name = "DIR", default_value = "frothline-data")]
    pub archive: PathBuf,
    /// A layout file (TOML) whose probe names label the probes, by index.
    #[arg(long, short)]
    pub layout: Option<PathBuf>,
    /// One line per window result on standard output instead of the dashboard (for pipes
    /// and logs); other events as lines starting with `#`.
    #[arg(long)]
    pub plain: bool,
    /// Stop after this many seconds.
    #[arg(
        long,
        value_name = "SECS",
        allow_hyphen_values = true,
        value_parser = crate::live::session_time::parse_session_secs
    )]
    pub duration: Option<f64>,
    /// Start a run with this label (at most 16 bytes) once each device has described itself.
    #[arg(long, value_name = "LABEL", value_parser = parse_label)]
    pub start_run: Option<String>,
    /// Stop the run of each device once it has described itself.
    #[arg(long)]
    pub stop_run: bool,
    /// Set the analysis window of each device: `whole` or a duration such as `100ms`.
    #[arg(long, value_name = "WINDOW")]
    pub set_window: Option<WindowSpec>,
    /// Ask each device to re-learn the air/water levels of all its probes.
    #[arg(long)]
    pub relearn: bool,
    /// Convergence target of the running figures, in percent: a probe is done when the
    /// 95 % intervals of its C, F (and V) are within this share of their means.
    #[arg(long, value_name = "PERCENT", default_value_t = 5.0)]
    pub target: f64,
    /// Show protocol chatter (commands sent, description ACKs) in the events pane.
    #[arg(long)]
    pub chatter: bool,
    /// Wait for a port that cannot be opened yet (a device still to be plugged in) instead
    /// of stopping with an error.
    #[arg(long)]
    pub wait_for_port: bool,
}

/// How the session is shown.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Ui {
    /// The terminal dashboard (falls back to plain lines when stdout is not a terminal).
    Dashboard,
    /// One line per record on stdout.
    Plain,
    /// Nothing (tests).
    Silent,
}

/// A command to send once a device has described itself.
#[derive(Clone, Debug, PartialEq)]
pub enum Startup {
    /// Send as is.
    Now(Command),
    /// Set the window (needs the device's sample rate).
    Window(WindowSpec),
}

/// Everything a watch session needs.
#[derive(Clone, Debug)]
pub struct WatchOptions {
    /// Port names.
    pub ports: Vec<String>,
    /// Baud rate.
    pub baud: u32,
    /// Folder for the archive and the CSV files (`None`: write nothing).
    pub dir: Option<PathBuf>,
    /// Probe names.
    pub layout: Option<Layout>,
    /// The layout's text (kept in the archive).
    pub layout_text: Option<String>,
    /// How to show it.
    pub ui: Ui,
    /// Stop after this long.
    pub duration: Option<Duration>,
    /// Commands for each device after its first description.
    pub startup: Vec<Startup>,
    /// Convergence target and events of the live view.
    pub view: ViewOptions,
    /// Keep trying a port that cannot be opened at the start (else: an error with a hint).
    pub wait_for_port: bool,
}

impl WatchOptions {
    /// Options from the command line.
    pub fn from_args(a: &WatchArgs) -> Result<Self, HostError> {
        let layout = a.layout.as_deref().map(Layout::load).transpose()?;
        let layout_text = a
            .layout
            .as_deref()
            .and_then(|p| std::fs::read_to_string(p).ok());
        let duration = match a.duration {
            Some(s) if s.is_finite() && s > 0.0 => Some(Duration::from_secs_f64(s)),
            Some(s) => {
                return Err(HostError::Usage(format!(
                    "--duration {s}: give a positive number of seconds"
                )))
            }
            None => None,
        };
        if !(a.target.is_finite() && a.target > 0.0 && a.target < 100.0) {
            return Err(HostError::Usage(format!(
                "--target {}: give a percentage above 0 and below 100",
                a.target
            )));
        }
        let view = ViewOptions {
            target: a.target / 100.0,
            chatter: a.chatter,
            ..ViewOptions::default()
        };
        let mut startup = Vec::new();
        if let Some(w) = a.set_window.clone() {
            startup.push(Startup::Window(w));
        }
        if a.relearn {
            startup.push(Startup::Now(Command::Relearn(u32::MAX)));
        }
        if a.stop_run {
            startup.push(Startup::Now(Command::StopRun));
        }
        if let Some(l) = &a.start_run {
            startup.push(Startup::Now(Command::StartRun(l.clone())));
        }
        Ok(WatchOptions {
            ports: a.ports.clone(),
            baud: a.baud,
            dir: Some(a.archive.clone()),
            layout,
            layout_text,
            ui: if a.plain { Ui::Plain } else { Ui::Dashboard },
            duration,
            startup,
            view,
            wait_for_port: a.wait_for_port,
        })
    }
}

/// What the reader threads tell the main loop.
enum LinkMsg {
    Opened {
        port: usize,
        t_us: u64,
        writer: Option<Box<dyn serialport::SerialPort>>,
    },
    OpenFailed {
        port: usize,
        reason: String,
    },
    Bytes {
        port: usize,
        t_us: u64,
        bytes: Vec<u8>,
    },
    Lost {
        port: usize,
        t_us: u64,
        reason: String,
    },
}

fn sleep_unless(stop: &AtomicBool, d: Duration) {
    let end = Instant::now() + d;
    while !stop.load(Ordering::Relaxed) {
        let now = Instant::now();
        if now >= end {
            break;
        }
        std::thread::sleep((end - now).min(Duration::from_millis(25)));
    }
}

/// Open `path` raw at `baud`, 8N1, with the read timeout.
pub fn open_port(path: &str, baud: u32) -> serialport::Result<Box<dyn serialport::SerialPort>> {
    serialport::new(path, baud)
        .data_bits(serialport::DataBits::Eight)
        .parity(serialport::Parity::None)
        .stop_bits(serialport::StopBits::One)
        .flow_control(serialport::FlowControl::None)
        .timeout(READ_TIMEOUT)
        .open()
}

/// Reads of one port are gathered for this long (from the first byte) before they go to the
/// session as one piece: at low baud rates a read returns a byte or two, and an archive
/// chunk per read would cost more than the bytes. 50 ms is 24 bytes at 4800 Bd and
/// 576 bytes at 115200 Bd; the live view lags by at most this much.
pub const GATHER: Duration = Duration::from_millis(50);

/// Most bytes gathered before they go out anyway.
const GATHER_BYTES: usize = 4096;

/// Bytes read from a port and not yet handed on, with the arrival time of the first.
#[derive(Default)]
struct Batch {
    bytes: Vec<u8>,
    first: Option<(Instant, u64)>,
}

impl Batch {
    fn add(&mut self, b: &[u8]) {
        if self.first.is_none() {
            self.first = Some((Instant::now(), crate::shared::archive::now_us()));
        }
        self.bytes.extend_from_slice(b);
    }

    fn due(&self) -> bool {
        self.bytes.len() >= GATHER_BYTES || self.first.is_some_and(|(t, _)| t.elapsed() >= GATHER)
    }

    /// Hand the bytes on (nothing if none): an error when the session is gone.
    fn send(&mut self, port: usize, tx: &Sender<LinkMsg>) -> Result<(), ()> {
        let Some((_, t_us)) = self.first.take() else {
            return Ok(());
        };
        let bytes = std::mem::take(&mut self.bytes);
        tx.send(LinkMsg::Bytes { port, t_us, bytes })
            .map_err(|_| ())
    }
}

/// The claim of a watch session on its folder's CSV files: `.watch-lock` holds the
/// process id, removed when the session ends. A session that finds the lock held by a
/// live process writes its CSV files into a subfolder named after its archive instead, so
/// two sessions never write the same windows.csv. A lock left by a killed process is
/// taken over.
pub struct FolderLock {
    path: PathBuf,
}

/// The name of the lock file in a watch folder.
pub const LOCK_FILE: &str = ".watch-lock";

impl FolderLock {
    /// The CSV folder for a session archiving to `archive` in `dir`, and the lock if this
    /// session holds the folder.
    pub fn claim(dir: &Path, archive: &Path) -> (PathBuf, Option<FolderLock>) {
        let path = dir.join(LOCK_FILE);
        for _ in 0..2 {
            match std::fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&path)
            {
                Ok(mut f) => {
                    let _ = write!(f, "{}", std::process::id());
                    return (dir.to_path_buf(), Some(FolderLock { path }));
                }
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                    let holder = std::fs::read_to_string(&path)
                        .ok()
                        .and_then(|s| s.trim().parse::<u32>().ok());
                    if holder.is_some_and(process_alive) {
                        break;
                    }
                    // Left by a process that is gone: take it over.
                    let _ = std::fs::remove_file(&path);
                }
                Err(_) => break,
            }
        }
        let stem = archive
            .file_stem()
            .map_or_else(|| "session".into(), |s| s.to_string_lossy().into_owned());
        (dir.join(stem), None)
    }
}

impl Drop for FolderLock {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}

/// True if process `pid` runs (Linux: /proc; elsewhere assumed, which only costs a
/// separate CSV folder).
fn process_alive(pid: u32) -> bool {
    if cfg!(target_os = "linux") {
        Path::new(&format!("/proc/{pid}")).exists()
    } else {
        true
    }
}

fn reader(port: usize, path: String, baud: u32, tx: Sender<LinkMsg>, stop: Arc<AtomicBool>) {
    let mut last_failure = String::new();
    while !stop.load(Ordering::Relaxed) {
        match open_port(&path, baud) {
            Ok(mut p) => {
                last_failure.clear();
                let writer = p.try_clone().ok();
                if tx
                    .send(LinkMsg::Opened {
                        port,
                        t_us: crate::shared::archive::now_us(),
                        writer,
                    })
                    .is_err()
                {
                    return;
                }
                let mut buf = vec![0u8; 4096];
                let mut batch = Batch::default();
                loop {
                    if stop.load(Ordering::Relaxed) {
                        let _ = batch.send(port, &tx);
                        return;
                    }
                    let lost = match p.read(&mut buf) {
                        Ok(0) => Some("the port reported end of input".to_string()),
                        Ok(n) => {
                            batch.add(&buf[..n]);
                            None
                        }
                        Err(e) => match e.kind() {
                            std::io::ErrorKind::TimedOut
                            | std::io::ErrorKind::WouldBlock
                            | std::io::ErrorKind::Interrupted => None,
                            _ => Some(e.to_string()),
                        },
                    };
                    if (lost.is_some() || batch.due()) && batch.send(port, &tx).is_err() {
                        return;
                    }
                    if let Some(reason) = lost {
                        let msg = LinkMsg::Lost {
                            port,
                            t_us: crate::shared::archive::now_us(),
                            reason,
                        };
                        if tx.send(msg).is_err() {
                            return;
                        }
                        break;
                    }
                }
            }
            Err(e) => {
                let reason = e.to_string();
                if reason != last_failure {
                    last_failure = reason.clone();
                    if tx.send(LinkMsg::OpenFailed { port, reason }).is_err() {
                        return;
                    }
                }
            }
        }
        sleep_unless(&stop, REOPEN_EVERY);
    }
}

/// The end of a watch session.
#[derive(Debug)]
pub struct WatchSummary {
    /// Counters and files.
    pub report: SessionReport,
    /// How long it ran.
    pub elapsed: Duration,
    /// Baud rate of the links.
    pub baud: u32,
    /// Per probe of every device (highest first): name, elevation in mm, and the running
    /// figures of its latest run.
    pub probes: Vec<(String, f64, crate::shared::probe_summary::ProbeTally)>,
}

impl std::fmt::Display for WatchSummary {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let secs = self.elapsed.as_secs_f64().max(1e-3);
        writeln!(f, "session ended after {secs:.1} s")?;
        for p in &self.report.ports {
            let d = &p.decoder;
            let bps = p.bytes as f64 / secs;
            writeln!(
                f,
                "  {}: {} frames ({:.1} per s), {} bytes ({:.0} B/s = {:.1} % of {} Bd 8N1), lost {}, CRC failures {}, malformed {}, discarded {} B",
                p.name,
                d.frames,
                d.frames as f64 / secs,
                p.bytes,
                bps,
                100.0 * bps * 10.0 / self.baud.max(1) as f64,
                self.baud,
                d.lost,
                d.crc_failures,
                d.malformed + d.oversize,
                d.bytes_discarded
            )?;
        }
        for w in self.report.version_warnings() {
            writeln!(f, "  {w}")?;
        }
        if !self.report.runs.is_empty() {
            writeln!(f, "  runs started: {}", self.report.runs.len())?;
        }
        if !self.report.link_gaps.is_empty() {
            writeln!(f, "  link lost {} time(s)", self.report.link_gaps.len())?;
        }
        if !self.probes.is_empty() {
            writeln!(f, "results of the latest run, per probe:")?;
            let rows: Vec<crate::shared::probe_summary::SummaryRow> = self
                .probes
                .iter()
                .map(
                    |(name, y, tally)| crate::shared::probe_summary::SummaryRow {
                        name,
                        elevation_mm: *y,
                        tally,
                    },
                )
                .collect();
            f.write_str(&crate::shared::probe_summary::summary_table(&rows))?;
        }
        writeln!(f, "{} window results; files written:", self.report.windows)?;
        for p in &self.report.files {
            writeln!(f, "  {}", p.display())?;
        }
        if let Some((path, bytes)) = &self.report.archive {
            writeln!(
                f,
                "  {} (archive, {bytes} bytes; decode it again with: frothline unpack {} --out DIR)",
                path.display(),
                path.display()
            )?;
        }
        Ok(())
    }
}

/// Keys of the dashboard.
pub const KEYS_HELP: &str =
    "q quit  s start run  e end run  m mark  r re-learn  d describe  c chart  PgUp/PgDn probes";

struct Watch<'a> {
    opts: WatchOptions,
    session: Session,
    live: LiveState,
    writers: Vec<Option<Box<dyn serialport::SerialPort>>>,
    /// Startup commands sent to the port already.
    started: Vec<bool>,
    runs: u32,
    out: Option<std::io::Stdout>,
    /// Standard output was closed (plain mode in a pipe whose reader went away).
    quit: bool,
    observer: &'a mut dyn FnMut(&Event),
}

impl Watch<'_> {
    /// A history line (and a `#` line in plain mode).
    fn note(&mut self, line: String) {
        if let Some(out) = self.out.as_mut() {
            if writeln!(out, "# {line}").is_err() {
                self.quit = true;
            }
        }
        self.live.note(line);
    }

    fn emit(&mut self, events: Vec<Event>) {
        let now = Instant::now();
        for e in &events {
            let session = &self.session;
            self.live.apply(e, now, &|d, i| session.probe_name(d, i));
            if let Some(out) = self.out.as_mut() {
                let line = match e {
                    Event::Window { device, result, .. } => {
                        let dev = self.live.devices.get(&(*device as u32));
                        let fs = dev.map(|d| d.sample_rate_hz as f64).filter(|f| *f > 0.0);
                        dev.and_then(|d| d.probes.get(result.probe as usize))
                            .map(|row| {
                                crate::live::state::plain_line(
                                    row,
                                    &LiveWindow::from_wire(*device, result, fs),
                                )
                            })
                    }
                    other => {
                        describe_event(other, self.session.port_names()).map(|l| format!("# {l}"))
                    }
                };
                if let Some(line) = line {
                    if writeln!(out, "{line}").is_err() {
                        self.quit = true;
                    }
                }
            }
            (self.observer)(e);
        }
        let describes: Vec<usize> = events
            .iter()
            .filter_map(|e| match e {
                Event::Describe { port, .. } => Some(*port),
                _ => None,
            })
            .collect();
        for port in describes {
            if !self.started[port] {
                self.started[port] = true;
                let cmds = self.opts.startup.clone();
                for c in cmds {
                    match c {
                        Startup::Now(c) => self.send(port, c),
                        Startup::Window(w) => {
                            let fs = self.session.sample_rate(port).unwrap_or(0.0).round() as u32;
                            let layout = self.opts.layout.as_ref();
                            let index = |name: &str| {
                                layout.and_then(|l| crate::live::device_sim::probe_index(l, name))
                            };
                            let setting = if fs == 0 && !matches!(w, WindowSpec::Whole) {
                                Err("the device's sample rate is not known".to_string())
                            } else {
                                w.policy(fs.max(1), index).and_then(|p| {
                                    WindowSetting::from_policy(&p)
                                        .ok_or_else(|| "the wire has no form for it".to_string())
                                })
                            };
                            match setting {
                                Ok(s) => self.send(port, Command::SetWindow(s)),
                                Err(e) => self.note(format!(
                                    "{}: cannot set the window: {e}",
                                    self.opts.ports[port]
                                )),
                            }
                        }
                    }
                }
            }
        }
    }

    fn send(&mut self, port: usize, cmd: Command) {
        let name = self.opts.ports[port].clone();
        let Some(w) = self.writers.get_mut(port).and_then(|w| w.as_mut()) else {
            self.note(format!("{name}: link down, command not sent"));
            return;
        };
        let (seq, bytes) = match self.session.encode_command(port, &cmd) {
            Ok(x) => x,
            Err(e) => {
                self.note(format!("{name}: {e}"));
                return;
            }
        };
        if let Err(e) = w.write_all(&bytes) {
            self.note(format!("{name}: cannot send command: {e}"));
            return;
        }
        if let Command::StartRun(label) = &cmd {
            self.live.pending_labels.insert((port, seq), label.clone());
        }
        match self
            .session
            .sent(port, crate::shared::archive::now_us(), &bytes)
        {
            Ok(ev) => self.emit(ev),
            Err(e) => self.note(format!("archive: {e}")),
        }
    }

    /// Write a mark with `note` for the first device's current run.
    pub fn mark(&mut self, note: &str) {
        let device = self.live.devices.iter().next().map(|(id, d)| (*id, d.port));
        let (tag, device_time_s) = match device {
            Some((id, port)) => (
                self.session.run_tag(port, id as u16),
                self.live.device_time_s(id),
            ),
            None => (Default::default(), None),
        };
        let t_us = crate::shared::archive::now_us();
        let mark = crate::shared::marks::Mark {
            run_number: tag.number,
            run_label: tag.label,
            host_utc: crate::shared::archive::utc_iso(t_us),
            device_time_s,
            note: note
                .trim()
                .chars()
                .take(crate::shared::marks::MAX_NOTE_CHARS)
                .collect(),
        };
        let port = device.map_or(0, |(_, p)| p);
        let result = match self.session.mark(port, t_us, &mark) {
            Ok(Some(path)) => Ok(path.display().to_string()),
            Ok(None) => Ok("the archive only (the session writes no CSV files)".into()),
            Err(e) => Err(e),
        };
        match result {
            Ok(to) => self.note(format!(
                "mark in run {} at device t {}: {} -> {to}",
                mark.run_number,
                mark.device_time_s
                    .map_or("-".into(), |t| format!("{t:.1} s")),
                mark.note
            )),
            Err(e) => self.note(format!("mark not written: {e}")),
        }
    }

    /// A key typed while a prompt is open: edit, confirm (Enter) or cancel (Esc).
    fn prompt_key(&mut self, code: ratatui::crossterm::event::KeyCode) {
        use crate::live::state::PromptKind;
        use ratatui::crossterm::event::KeyCode;
        let Some(p) = self.live.prompt.as_mut() else {
            return;
        };
        match code {
            KeyCode::Esc => self.live.prompt = None,
            KeyCode::Backspace => {
                p.text.pop();
            }
            KeyCode::Char(c) => {
                let limit = match p.kind {
                    PromptKind::RunLabel => frothline_core::wire::LABEL_BYTES,
                    PromptKind::MarkNote => crate::shared::marks::MAX_NOTE_CHARS,
                };
                let mut t = p.text.clone();
                t.push(c);
                if (p.kind == PromptKind::RunLabel && t.len() <= limit)
                    || (p.kind == PromptKind::MarkNote && t.chars().count() <= limit)
                {
                    p.text = t;
                }
            }
            KeyCode::Enter => {
                let Some(p) = self.live.prompt.take() else {
                    return;
                };
                match p.kind {
                    PromptKind::RunLabel => match parse_label(p.text.trim()) {
                        Ok(label) => {
                            self.runs += 1;
                            self.broadcast(Command::StartRun(label));
                        }
                        Err(e) => self.note(format!("run not started: {e}")),
                    },
                    PromptKind::MarkNote => self.mark(&p.text),
                }
            }
            _ => {}
        }
    }

    /// An action from outside the keyboard, taken as its key would take it.
    fn control(&mut self, c: crate::live::watch_control::Control) {
        use crate::live::watch_control::Control;
        match c {
            Control::StartRun(label) => match parse_label(label.trim()) {
                Ok(label) => {
                    self.runs += 1;
                    self.broadcast(Command::StartRun(label));
                }
                Err(e) => self.note(format!("run not started: {e}")),
            },
            Control::StopRun => self.broadcast(Command::StopRun),
            Control::Mark(note) => self.mark(&note),
            Control::Relearn => self.broadcast(Command::Relearn(u32::MAX)),
            Control::Command(c) => self.broadcast(c),
        }
    }

    fn broadcast(&mut self, cmd: Command) {
        for port in 0..self.opts.ports.len() {
            self.send(port, cmd.clone());
        }
    }

    fn handle(&mut self, msg: LinkMsg) -> Result<(), HostError> {
        match msg {
            LinkMsg::Opened { port, t_us, writer } => {
                self.writers[port] = writer;
                let ev = self.session.opened(port, t_us)?;
                self.emit(ev);
                self.send(port, Command::DescribeRequest);
                // The device's clock, so the runs it starts by itself are dated too.
                self.send(port, Command::SetClock);
            }
            LinkMsg::OpenFailed { port, reason } => {
                let name = self.opts.ports[port].clone();
                self.note(format!(
                    "{name}: cannot open ({reason}); trying every second"
                ));
            }
            LinkMsg::Bytes { port, t_us, bytes } => {
                let before = self.session.decoder_stats(port).map_or(0, |s| s.frames);
                let ev = self.session.received(port, t_us, &bytes)?;
                let stats = self.session.decoder_stats(port).copied();
                let frames = stats.map_or(0, |s| s.frames.saturating_sub(before)) as usize;
                self.live
                    .link_batch(port, Instant::now(), bytes.len(), frames, stats.as_ref());
                self.emit(ev);
            }
            LinkMsg::Lost { port, t_us, reason } => {
                self.writers[port] = None;
                let ev = self.session.lost(port, t_us, &reason)?;
                self.emit(ev);
            }
        }
        Ok(())
    }
}

/// Run a watch session until `stop` is set, the duration is over, or (dashboard) `q` is
/// pressed. `observer` sees every event (tests use it to collect results).
pub fn run_with(
    opts: WatchOptions,
    stop: Arc<AtomicBool>,
    observer: &mut dyn FnMut(&Event),
) -> Result<WatchSummary, HostError> {
    let (_keep, none) = mpsc::channel();
    run_controlled(opts, stop, observer, none)
}

/// [`run_with`], also taking the actions sent on `control` (those of the dashboard's keys)
/// as they come.
pub fn run_controlled(
    opts: WatchOptions,
    stop: Arc<AtomicBool>,
    observer: &mut dyn FnMut(&Event),
    control: Receiver<crate::live::watch_control::Control>,
) -> Result<WatchSummary, HostError> {
    run_session(opts, stop, &mut || {}, observer, control)
}

/// [`run_controlled`], calling `on_end` when the session ends and before the link is
/// drained ([`crate::live::link_drain`]): the demo stops its simulated device there, so
/// that every frame it sent is read.
pub fn run_session(
    opts: WatchOptions,
    stop: Arc<AtomicBool>,
    on_end: &mut dyn FnMut(),
    observer: &mut dyn FnMut(&Event),
    control: Receiver<crate::live::watch_control::Control>,
) -> Result<WatchSummary, HostError> {
    if opts.ports.is_empty() {
        return Err(HostError::Usage("give at least one --port".into()));
    }
    if !opts.wait_for_port {
        for p in &opts.ports {
            if let Err(e) = open_port(p, opts.baud) {
                return Err(HostError::Usage(open_hint(p, &e)));
            }
        }
    }
    let mut ui = opts.ui;
    if ui == Ui::Dashboard && !std::io::stdout().is_terminal() {
        ui = Ui::Plain;
    }
    let started_us = crate::shared::archive::now_us();
    let (archive, csv_dir, folder_lock) = match &opts.dir {
        Some(dir) => {
            std::fs::create_dir_all(dir).map_err(crate::shared::error::write_err(dir))?;
            let a = ArchiveWriter::create_in(dir, started_us)
                .map_err(crate::shared::error::write_err(dir))?;
            let (csv, lock) = FolderLock::claim(dir, a.path());
            (Some(a), Some(csv), lock)
        }
        None => (None, None, None),
    };
    let separate = folder_lock.is_none() && csv_dir.is_some();
    let session = Session::with_archive(
        SessionOptions {
            ports: opts.ports.clone(),
            layout: opts.layout.clone(),
            layout_text: opts.layout_text.clone(),
            out_dir: csv_dir.clone(),
        },
        archive,
    )?;
    let mut live = LiveState::new(&opts.ports);
    let t0 = Instant::now();
    live.started = Some(t0);
    live.keys_help = KEYS_HELP.into();
    live.view = opts.view;
    for l in &mut live.links {
        l.baud = opts.baud;
    }
    if let Some(p) = session.archive_path() {
        live.note(format!("archiving every byte to {}", p.display()));
    }
    if let (true, Some(d)) = (separate, &csv_dir) {
        live.note(format!(
            "another session writes this folder: CSV files go to {}",
            d.display()
        ));
    }
    let mut term = if ui == Ui::Dashboard {
        Some(
            ratatui::try_init()
                .map_err(|e| HostError::Usage(format!("cannot use the terminal: {e}")))?,
        )
    } else {
        None
    };
    let (tx, rx): (Sender<LinkMsg>, Receiver<LinkMsg>) = mpsc::channel();
    let reader_stop = Arc::new(AtomicBool::new(false));
    let readers: Vec<JoinHandle<()>> = opts
        .ports
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let (tx, stop, path, baud) = (tx.clone(), reader_stop.clone(), p.clone(), opts.baud);
            std::thread::spawn(move || reader(i, path, baud, tx, stop))
        })
        .collect();
    drop(tx);
    let n = opts.ports.len();
    let out = (ui == Ui::Plain).then(std::io::stdout);
    if let Some(mut o) = out.as_ref().map(|o| o.lock()) {
        let _ = writeln!(o, "# {SAFETY_LINE}");
        if let Some(p) = session.archive_path() {
            let _ = writeln!(o, "# archiving every byte to {}", p.display());
        }
        if let (true, Some(d)) = (separate, &csv_dir) {
            let _ = writeln!(
                o,
                "# another session writes this folder: CSV files go to {}",
                d.display()
            );
        }
    }
    let mut w = Watch {
        opts,
        session,
        live,
        writers: (0..n).map(|_| None).collect(),
        started: vec![false; n],
        runs: 0,
        out,
        quit: false,
        observer,
    };
    let result = main_loop(&mut w, &rx, &control, &stop, t0, term.as_mut());
    if term.is_some() {
        ratatui::restore();
    }
    // Frames already on their way are read before the link is closed.
    on_end();
    let mut drained = Ok(());
    if result.is_ok() {
        let d = crate::live::link_drain::drain(
            &rx,
            crate::live::link_drain::QUIET,
            crate::live::link_drain::DRAIN_MAX,
            |m| w.handle(m),
        );
        if let Err(e) = d {
            drained = Err(e);
        }
    }
    reader_stop.store(true, Ordering::Relaxed);
    for r in readers {
        let _ = r.join();
    }
    // The readers are gone: archive and decode whatever they sent last.
    while let Ok(msg) = rx.try_recv() {
        if drained.is_err() {
            break;
        }
        if let Err(e) = w.handle(msg) {
            drained = Err(e);
            break;
        }
    }
    w.writers.clear();
    let report = w.session.finish()?;
    drop(folder_lock);
    result?;
    drained?;
    let probes = crate::live::dashboard::probe_rows(&w.live)
        .into_iter()
        .map(|(_, p)| (p.name.clone(), p.elevation_mm, p.tally.clone()))
        .collect();
    Ok(WatchSummary {
        report,
        elapsed: t0.elapsed(),
        baud: w.opts.baud,
        probes,
    })
}

fn main_loop(
    w: &mut Watch<'_>,
    rx: &Receiver<LinkMsg>,
    control: &Receiver<crate::live::watch_control::Control>,
    stop: &AtomicBool,
    t0: Instant,
    mut term: Option<&mut ratatui::DefaultTerminal>,
) -> Result<(), HostError> {
    use ratatui::crossterm::event::{
        self, Event as TermEvent, KeyCode, KeyEventKind, KeyModifiers,
    };
    let mut last_draw: Option<Instant> = None;
    loop {
        if stop.load(Ordering::Relaxed) || w.quit {
            return Ok(());
        }
        if w.opts.duration.is_some_and(|d| t0.elapsed() >= d) {
            return Ok(());
        }
        match rx.recv_timeout(REDRAW / 2) {
            Ok(msg) => {
                w.handle(msg)?;
                // Take what else is waiting, but keep the screen and keys alive.
                for _ in 0..256 {
                    match rx.try_recv() {
                        Ok(m) => w.handle(m)?,
                        Err(_) => break,
                    }
                }
            }
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => return Ok(()),
        }
        while let Ok(c) = control.try_recv() {
            w.control(c);
        }
        let Some(term) = term.as_deref_mut() else {
            continue;
        };
        let now = Instant::now();
        if last_draw.is_none_or(|t| now.duration_since(t) >= REDRAW) {
            last_draw = Some(now);
            term.draw(|f| crate::live::dashboard::draw(f, &w.live, now))
                .map_err(|e| HostError::Usage(format!("cannot draw: {e}")))?;
        }
        while event::poll(Duration::ZERO).unwrap_or(false) {
            let Ok(TermEvent::Key(k)) = event::read() else {
                continue;
            };
            if k.kind != KeyEventKind::Press {
                continue;
            }
            if k.code == KeyCode::Char('c') && k.modifiers.contains(KeyModifiers::CONTROL) {
                return Ok(());
            }
            if w.live.prompt.is_some() {
                w.prompt_key(k.code);
                continue;
            }
            match k.code {
                KeyCode::Char('q') | KeyCode::Esc => return Ok(()),
                KeyCode::Char('s') => {
                    // Default label: the next run number of the first device.
                    let next = w.live.devices.iter().next().map_or(w.runs, |(id, d)| {
                        w.session.run_tag(d.port, *id as u16).number
                    }) + 1;
                    w.live.prompt = Some(crate::live::state::Prompt {
                        kind: crate::live::state::PromptKind::RunLabel,
                        text: format!("run-{next}"),
                    });
                }
                KeyCode::Char('m') => {
                    w.live.prompt = Some(crate::live::state::Prompt {
                        kind: crate::live::state::PromptKind::MarkNote,
                        text: String::new(),
                    });
                }
                KeyCode::Char('e') => w.broadcast(Command::StopRun),
                KeyCode::Char('r') => w.broadcast(Command::Relearn(u32::MAX)),
                KeyCode::Char('d') => w.broadcast(Command::DescribeRequest),
                KeyCode::Char('c') => w.live.strip_view = w.live.strip_view.next(),
                KeyCode::PageDown | KeyCode::Down => {
                    let step = if k.code == KeyCode::Down { 1 } else { 8 };
                    let total = crate::live::dashboard::probe_rows(&w.live).len();
                    w.live.probe_scroll = (w.live.probe_scroll + step).min(total.saturating_sub(1));
                }
                KeyCode::PageUp | KeyCode::Up => {
                    let step = if k.code == KeyCode::Up { 1 } else { 8 };
                    w.live.probe_scroll = w.live.probe_scroll.saturating_sub(step);
                }
                _ => {}
            }
        }
    }
}

/// Why `port` could not be opened, and what to try.
pub fn open_hint(port: &str, e: &serialport::Error) -> String {
    let denied = matches!(
        e.kind(),
        serialport::ErrorKind::Io(std::io::ErrorKind::PermissionDenied)
    ) || e.to_string().to_lowercase().contains("permission");
    let mut s = format!("cannot open port {port}: {e}\n");
    if denied {
        s.push_str(&format!(
            "hint: the port exists but this user may not open it: check `ls -l {port}` and \
             join the group that owns it (often `dialout` or `uucp`: \
             `sudo usermod -aG dialout $USER`, then log in again)\n"
        ));
    } else {
        s.push_str(
            "hint: `frothline ports` lists the serial ports of this machine; check the cable \
             and that the device is powered\n",
        );
    }
    s.push_str("hint: give --wait-for-port to wait until the port can be opened");
    s
}

/// The process-wide Ctrl-C flag (set by the handler `frothline` installs once).
pub fn interrupt_flag() -> Arc<AtomicBool> {
    static FLAG: std::sync::OnceLock<Arc<AtomicBool>> = std::sync::OnceLock::new();
    FLAG.get_or_init(|| {
        let flag = Arc::new(AtomicBool::new(false));
        let f = flag.clone();
        // Fails only if a handler was installed already; then Ctrl-C keeps its old meaning.
        let _ = ctrlc::set_handler(move || f.store(true, Ordering::Relaxed));
        flag
    })
    .clone()
}

/// `frothline watch`.
pub fn run(args: &WatchArgs) -> Result<WatchSummary, HostError> {
    let opts = WatchOptions::from_args(args)?;
    let ui = opts.ui;
    let summary = run_with(opts, interrupt_flag(), &mut |_| {})?;
    if ui != Ui::Silent {
        print!("{summary}");
    }
    Ok(summary)
}
