//! What a watch session is asked to do: the command's arguments and the options built
//! from them.

use crate::live::state::ViewOptions;
use crate::shared::commands::{parse_label, Command};
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::window_spec::WindowSpec;
use std::path::PathBuf;
use std::time::Duration;

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
    /// Ask each device for full windows: every column of windows.csv (droplet chord,
    /// trailing tip, levels, correlation time scales). They cost link capacity (1.6 times
    /// the bytes in a measured demo run). A device that cannot refuses, and its results stay
    /// plain.
    #[arg(long)]
    pub extras: bool,
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
        if a.extras {
            startup.push(Startup::Now(Command::SetExtras(true)));
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
