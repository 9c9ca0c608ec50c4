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

mod lock;
mod options;
mod reader;
mod summary;

pub use crate::shared::serial_port::open_hint;
pub use lock::{FolderLock, LOCK_FILE};
pub use options::{Startup, Ui, WatchArgs, WatchOptions};
pub use reader::{open_port, GATHER, READ_TIMEOUT, REOPEN_EVERY};
pub use summary::WatchSummary;

use crate::live::dashboard::SAFETY_LINE;
use crate::live::state::{LiveState, LiveWindow};
use crate::shared::archive::ArchiveWriter;
use crate::shared::commands::{parse_label, Command};
use crate::shared::error::HostError;
use crate::shared::session::{describe_event, Event, Session, SessionOptions};
use crate::shared::window_spec::WindowSpec;
use frothline_core::wire::WindowSetting;
use reader::{reader, LinkMsg};
use std::io::{IsTerminal, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, RecvTimeoutError, Sender};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Dashboard redraw period.
const REDRAW: Duration = Duration::from_millis(100);

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
    live.discharge_m2_s = opts.layout.as_ref().and_then(|l| l.flow.discharge_m2_s);
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
    let discharges = w
        .live
        .continuity()
        .into_iter()
        .map(|(_, x, d)| (x, d))
        .collect();
    Ok(WatchSummary {
        report,
        elapsed: t0.elapsed(),
        baud: w.opts.baud,
        probes,
        discharges,
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
