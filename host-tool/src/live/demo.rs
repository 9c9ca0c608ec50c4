//! `frothline demo` and `frothline simulate`: the live link without hardware.
//!
//! `demo` renders the built-in synthetic scenario in memory (4 dual-tip probes of a steady
//! aerated flow, 40 kHz), starts a simulated device on one end of a pseudo-terminal pair and
//! runs the `watch` code on the other end, for `--duration` seconds: the same bytes, archive,
//! CSV files and dashboard as with a real device on a USB serial port.
//!
//! `demo --transient` plays the built-in dam-break scenario instead (a surge front over a
//! dry bed reaching one station of ten probes, 1.2 s, repeated): the device sends the front
//! arrivals and the station's profile fits as they happen, and the dashboard shows the
//! profile with its fit and the decay of Cmean behind the front.
//!
//! `simulate` runs the simulated device alone, on a new pseudo-terminal (its path is
//! printed) or on a given serial port, until Ctrl-C: point `frothline watch` at it from
//! another terminal, or start several for a multi-port session.

use crate::live::device_sim::{SimCapture, SimOptions, SimStats};
use crate::live::watch::{interrupt_flag, run_session, Startup, Ui, WatchOptions, WatchSummary};
use crate::shared::commands::Command;
use crate::shared::error::HostError;
use crate::shared::window_spec::WindowSpec;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Arguments of `frothline demo`.
#[derive(clap::Args, Debug, Clone)]
pub struct DemoArgs {
    /// One line per window result instead of the dashboard.
    #[arg(long)]
    pub plain: bool,
    /// Seconds to run.
    #[arg(
        long,
        value_name = "SECS",
        allow_hyphen_values = true,
        value_parser = crate::live::session_time::parse_session_secs,
        default_value_t = 20.0
    )]
    pub duration: f64,
    /// Folder for the session archive and CSV files.
    #[arg(long, value_name = "DIR", default_value = "target/demo")]
    pub out: PathBuf,
    /// Analysis window of the simulated device (default: 100ms; with --transient, 50 ms
    /// slices from the front).
    #[arg(long)]
    pub window: Option<WindowSpec>,
    /// Play the built-in dam-break surge (fronts, profile fits, decay) instead of the
    /// steady flow.
    #[arg(long)]
    pub transient: bool,
    /// Baud rate of the simulated link (the device keeps to its byte budget).
    #[arg(long, default_value_t = 115_200)]
    pub baud: u32,
    /// Ask the simulated device for full windows (every column of windows.csv; 1.6 times the
    /// link's bytes in a measured run of this demo at 50 ms windows).
    #[arg(long)]
    pub extras: bool,
}

/// Arguments of `frothline simulate`.
#[derive(clap::Args, Debug, Clone)]
pub struct SimulateArgs {
    /// A capture (WAV) to play; needs --layout. Without it: the built-in synthetic scenario.
    pub capture: Option<PathBuf>,
    /// The capture's layout (TOML).
    #[arg(long, short)]
    pub layout: Option<PathBuf>,
    /// Serial port to talk on; without it a new pseudo-terminal is made and its path printed.
    #[arg(long, short)]
    pub port: Option<String>,
    /// Device id in the frame headers.
    #[arg(long, default_value_t = 1)]
    pub device_id: u16,
    /// Link rate the device keeps to, baud (0: no limit).
    #[arg(long, default_value_t = 115_200)]
    pub baud: u32,
    /// Sample-clock speed relative to real time.
    #[arg(long, default_value_t = 1.0)]
    pub speed: f64,
    /// Analysis window.
    #[arg(long, default_value = "100ms")]
    pub window: WindowSpec,
    /// Wait for a StartRun command instead of starting a run at once.
    #[arg(long)]
    pub wait_for_start: bool,
    /// Play the capture once per run and stop (default: start a new run at its end).
    #[arg(long)]
    pub once: bool,
    /// Stop after this many seconds.
    #[arg(
        long,
        value_name = "SECS",
        allow_hyphen_values = true,
        value_parser = crate::live::session_time::parse_session_secs
    )]
    pub duration: Option<f64>,
}

/// What a demo did.
#[derive(Debug)]
pub struct DemoSummary {
    /// The host side.
    pub watch: WatchSummary,
    /// The device side.
    pub device: SimStats,
    /// Folder of the files.
    pub out: PathBuf,
}

impl std::fmt::Display for DemoSummary {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.watch)?;
        let secs = self.watch.elapsed.as_secs_f64().max(1e-3);
        let d = &self.device;
        let bps = d.bytes_sent as f64 / secs;
        writeln!(
            f,
            "  simulated device: {} frames, {} bytes ({:.0} B/s = {:.1} % of {} Bd 8N1, {:.1} B per frame), {} window results sent, {} dropped for want of link capacity, {} commands acknowledged, {} refused",
            d.frames_sent,
            d.bytes_sent,
            bps,
            100.0 * bps * 10.0 / self.watch.baud.max(1) as f64,
            self.watch.baud,
            d.bytes_sent as f64 / d.frames_sent.max(1) as f64,
            d.windows_sent,
            d.windows_dropped,
            d.acks,
            d.nacks
        )
    }
}

fn positive_secs(s: f64, what: &str) -> Result<Duration, HostError> {
    if s.is_finite() && s > 0.0 {
        Ok(Duration::from_secs_f64(s))
    } else {
        Err(HostError::Usage(format!(
            "{what} {s}: give a positive number of seconds"
        )))
    }
}

/// The demo's capture: the built-in scenario, as long as the demo (10 s to 60 s; runs
/// repeat beyond that).
pub fn demo_capture(duration_s: f64, window: WindowSpec) -> Result<SimCapture, HostError> {
    let mut scenario = crate::shared::synthetic::Scenario::builtin_default();
    scenario.duration_s = (duration_s + 1.0).clamp(10.0, 60.0);
    SimCapture::from_scenario(&scenario, window)
}

/// The transient demo's capture: the built-in dam-break scenario (runs repeat).
pub fn transient_demo_capture(window: WindowSpec) -> Result<SimCapture, HostError> {
    SimCapture::from_scenario(
        &crate::shared::synthetic::Scenario::builtin_transient(),
        window,
    )
}

/// `frothline demo`.
#[cfg(unix)]
pub fn run(args: &DemoArgs) -> Result<DemoSummary, HostError> {
    let duration = positive_secs(args.duration, "--duration")?;
    let ui = if args.plain { Ui::Plain } else { Ui::Dashboard };
    if args.plain {
        println!(
            "# demo: a simulated {} device on a pseudo-terminal, {} s, files in {}",
            if args.transient {
                "10-probe dam-break surge"
            } else {
                "4-probe"
            },
            args.duration,
            args.out.display()
        );
    }
    let cap = if args.transient {
        transient_demo_capture(args.window.clone().unwrap_or(WindowSpec::Whole))?
    } else {
        let window = match &args.window {
            Some(w) => w.clone(),
            None => "100ms".parse().map_err(HostError::Usage)?,
        };
        demo_capture(args.duration, window)?
    };
    let layout = cap.layout.clone();
    let layout_text = cap.layout_text.clone();
    let (mut master, slave) = serialport::TTYPort::pair()
        .map_err(|e| HostError::Usage(format!("cannot make a pseudo-terminal: {e}")))?;
    let path = slave
        .name()
        .ok_or_else(|| HostError::Usage("the pseudo-terminal has no name".into()))?;
    use serialport::SerialPort;
    let _ = master.set_timeout(Duration::from_millis(2));
    // A second handle on the device's end keeps the link up while the session drains it
    // after the device stopped (the device's own handle closes when it stops).
    let keep_open = master.try_clone_native().ok();
    let stop = Arc::new(AtomicBool::new(false));
    let sim = crate::live::device_sim::spawn(
        cap,
        SimOptions {
            baud: args.baud,
            autostart: false,
            repeat: true,
            ..SimOptions::default()
        },
        master,
        stop.clone(),
    )
    .map_err(|e| HostError::Usage(format!("cannot start the simulated device: {e}")))?;
    let opts = WatchOptions {
        ports: vec![path],
        baud: args.baud,
        dir: Some(args.out.clone()),
        layout: Some(layout),
        layout_text: Some(layout_text),
        ui,
        duration: Some(duration),
        startup: {
            let mut v = Vec::new();
            if args.extras {
                v.push(Startup::Now(Command::SetExtras(true)));
            }
            v.push(Startup::Now(Command::StartRun("demo".into())));
            v
        },
        view: Default::default(),
        wait_for_port: false,
    };
    // The device stops sending when the session ends; the session then reads what it sent.
    let stop_device = stop.clone();
    let (_keep, no_control) = std::sync::mpsc::channel();
    let watch = run_session(
        opts,
        interrupt_flag(),
        &mut || stop_device.store(true, Ordering::Relaxed),
        &mut |_| {},
        no_control,
    );
    stop.store(true, Ordering::Relaxed);
    let device = match sim.join() {
        Ok(r) => r?,
        Err(_) => return Err(HostError::Usage("the simulated device failed".into())),
    };
    drop(slave);
    drop(keep_open);
    let summary = DemoSummary {
        watch: watch?,
        device,
        out: args.out.clone(),
    };
    crate::shared::stdout::print(&summary.to_string());
    Ok(summary)
}

/// `frothline demo` (needs a pseudo-terminal).
#[cfg(not(unix))]
pub fn run(_args: &DemoArgs) -> Result<DemoSummary, HostError> {
    Err(HostError::Usage(
        "frothline demo needs a pseudo-terminal pair (Unix); use `frothline simulate --port` with a serial loopback".into(),
    ))
}

/// `frothline simulate`.
pub fn simulate(args: &SimulateArgs) -> Result<SimStats, HostError> {
    let cap = match (&args.capture, &args.layout) {
        (Some(c), Some(l)) => SimCapture::from_files(c, l, args.window.clone())?,
        (Some(_), None) => {
            return Err(HostError::Usage("a capture needs its --layout".into()));
        }
        (None, _) => {
            let mut s = crate::shared::synthetic::Scenario::builtin_default();
            s.duration_s = 10.0;
            SimCapture::from_scenario(&s, args.window.clone())?
        }
    };
    if !(args.speed.is_finite() && args.speed > 0.0) {
        return Err(HostError::Usage(format!(
            "--speed {}: give a positive factor",
            args.speed
        )));
    }
    let deadline = args
        .duration
        .map(|s| positive_secs(s, "--duration"))
        .transpose()?
        .map(|d| Instant::now() + d);
    let opts = SimOptions {
        device: args.device_id,
        baud: args.baud,
        speed: args.speed,
        autostart: !args.wait_for_start,
        repeat: !args.once,
        ..SimOptions::default()
    };
    let stop = interrupt_flag();
    let timer_stop = Arc::new(AtomicBool::new(false));
    let watcher = {
        let (stop, timer_stop) = (stop.clone(), timer_stop.clone());
        std::thread::spawn(move || loop {
            if stop.load(Ordering::Relaxed) || deadline.is_some_and(|d| Instant::now() >= d) {
                timer_stop.store(true, Ordering::Relaxed);
                return;
            }
            std::thread::sleep(Duration::from_millis(50));
        })
    };
    let stats = match &args.port {
        Some(p) => {
            let port = serialport::new(p, args.baud.max(1200))
                .timeout(Duration::from_millis(2))
                .open()
                .map_err(|e| HostError::Usage(format!("cannot open {p}: {e}")))?;
            println!(
                "simulated device {} on {p}; Ctrl-C to stop. {}",
                args.device_id,
                crate::live::dashboard::SAFETY_LINE
            );
            join(crate::live::device_sim::spawn(
                cap,
                opts,
                port,
                timer_stop.clone(),
            ))?
        }
        None => simulate_on_pty(cap, opts, args, timer_stop.clone())?,
    };
    let _ = watcher.join();
    println!(
        "simulated device {}: {} frames, {} bytes, {} window results, {} dropped, {} commands acknowledged, {} refused",
        args.device_id,
        stats.frames_sent,
        stats.bytes_sent,
        stats.windows_sent,
        stats.windows_dropped,
        stats.acks,
        stats.nacks
    );
    Ok(stats)
}

fn join(
    h: std::io::Result<std::thread::JoinHandle<Result<SimStats, HostError>>>,
) -> Result<SimStats, HostError> {
    let h = h.map_err(|e| HostError::Usage(format!("cannot start the simulated device: {e}")))?;
    h.join()
        .unwrap_or_else(|_| Err(HostError::Usage("the simulated device failed".into())))
}

#[cfg(unix)]
fn simulate_on_pty(
    cap: SimCapture,
    opts: SimOptions,
    args: &SimulateArgs,
    stop: Arc<AtomicBool>,
) -> Result<SimStats, HostError> {
    use serialport::SerialPort;
    let (mut master, slave) = serialport::TTYPort::pair()
        .map_err(|e| HostError::Usage(format!("cannot make a pseudo-terminal: {e}")))?;
    let _ = master.set_timeout(Duration::from_millis(2));
    let path = slave.name().unwrap_or_default();
    println!(
        "simulated device {} on {path} ({} Bd budget); watch it with: frothline watch --port {path}\nCtrl-C to stop. {}",
        args.device_id,
        args.baud,
        crate::live::dashboard::SAFETY_LINE
    );
    let stats = join(crate::live::device_sim::spawn(cap, opts, master, stop));
    drop(slave);
    stats
}

#[cfg(not(unix))]
fn simulate_on_pty(
    _cap: SimCapture,
    _opts: SimOptions,
    _args: &SimulateArgs,
    _stop: Arc<AtomicBool>,
) -> Result<SimStats, HostError> {
    Err(HostError::Usage(
        "no pseudo-terminals here: give --port with a serial loopback".into(),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::live::device_sim::SimDevice;
    use crate::live::state::LiveState;
    use crate::shared::session::{Session, SessionOptions};

    /// The transient demo without a terminal: the simulated device stepped in memory, its
    /// bytes through the session into the live state, the dashboard rendered to text.
    #[test]
    fn transient_demo_shows_front_profile_fit_and_decay() {
        let h = std::thread::Builder::new()
            .stack_size(crate::live::device_sim::THREAD_STACK)
            .spawn(|| {
                let cap = transient_demo_capture(WindowSpec::Whole).unwrap();
                let opts = SimOptions {
                    baud: 0,
                    repeat: false,
                    ..SimOptions::default()
                };
                let layout = cap.layout.clone();
                let t0 = Instant::now();
                let mut dev = SimDevice::new(cap, opts, t0).unwrap();
                let port = "/dev/pts/sim".to_string();
                let mut session = Session::new(SessionOptions {
                    ports: vec![port.clone()],
                    layout: Some(layout),
                    ..SessionOptions::default()
                })
                .unwrap();
                let mut state = LiveState::new(&[port]);
                state.started = Some(t0);
                let mut events = session.opened(0, 0).unwrap();
                let mut out = Vec::new();
                for k in 1..=140u64 {
                    let t = t0 + Duration::from_millis(10 * k);
                    dev.advance(t);
                    out.clear();
                    dev.output(t, &mut out);
                    events.extend(session.received(0, 10_000 * k, &out).unwrap());
                    for e in events.drain(..) {
                        let name = |d: u16, i: usize| session.probe_name(d, i);
                        state.apply(&e, t, &name);
                    }
                }
                let st = state.stations.values().next().expect("a station");
                assert!(st.front_s.is_some(), "a front arrived");
                assert!(st.profile.is_some() && st.series.len() >= 10);
                let lines = crate::live::dashboard::render_text(
                    &state,
                    t0 + Duration::from_secs(2),
                    132,
                    44,
                );
                println!("{}", lines.join("\n"));
                let text = lines.join("\n");
                assert!(text.contains("Y90") && text.contains("tau"), "{text}");
            })
            .unwrap();
        if let Err(e) = h.join() {
            std::panic::resume_unwind(e);
        }
    }
}
