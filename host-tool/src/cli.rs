//! The `frothline` command line.

use crate::shared::error::HostError;
use clap::{Parser, Subcommand};
use std::ffi::OsString;

/// frothline: air-water flow measurements from dual-tip phase-detection probes.
///
/// Shows live results from probe devices on serial ports (dashboard, lossless archive,
/// CSV), replays recorded captures (WAV + layout) through the same signal chain the probe
/// firmware runs, draws reports, combines repeated runs and synthesises test captures.
/// Start with `frothline demo` (no hardware needed). Work near fast water and mains-powered
/// electronics near water is hazardous: follow local codes and licensed practice (see README).
#[derive(Parser, Debug)]
#[command(name = "frothline", version, about, long_about)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Run a capture (WAV + layout) through the core and write windows.csv.
    ///
    /// A steady capture is processed on as many threads as the machine has processors, or
    /// on the number in the environment variable FROTHLINE_THREADS (1: everything on one
    /// thread); the files written do not depend on the number.
    Replay(crate::offline::replay::ReplayArgs),
    /// Write a synthetic capture (WAV + layout + truth) from a scenario.
    Synth(crate::synth::SynthArgs),
    /// List the serial ports of this machine.
    Ports,
    /// Receive live results from devices on serial ports: dashboard, archive, CSV.
    Watch(crate::live::watch::WatchArgs),
    /// The live link without hardware: a simulated device on a pseudo-terminal, watched.
    Demo(crate::live::demo::DemoArgs),
    /// Run a simulated probe device on a pseudo-terminal or a serial port.
    Simulate(crate::live::demo::SimulateArgs),
    /// Decode a session archive into CSV files and report link gaps and errors.
    Unpack(crate::live::unpack::UnpackArgs),
    /// Read a field logger's flash image back into CSV files.
    Logbook(crate::field::logbook::LogbookArgs),
    /// Figures (SVG, PNG) and a one-page HTML summary of a replay or archive folder.
    Report(crate::report::ReportArgs),
    /// Combine repeated transient runs of one rig, aligned on the front.
    Ensemble(crate::offline::ensemble::EnsembleArgs),
    /// Check every tip on a segment of a capture (levels, noise, swing, interface times;
    /// flags small swing, high noise, moved levels) and optionally write the levels into
    /// the layout.
    Tipcheck(crate::offline::tipcheck::TipcheckArgs),
}

/// Parse `args` (including the program name) and run the command.
pub fn run<I, T>(args: I) -> Result<(), HostError>
where
    I: IntoIterator<Item = T>,
    T: Into<OsString> + Clone,
{
    let cli = match Cli::try_parse_from(args) {
        Ok(c) => c,
        Err(e) if !e.use_stderr() => {
            // --help and --version
            let _ = e.print();
            return Ok(());
        }
        // clap starts its message with its own `error: `; the binary adds the one prefix.
        Err(e) => {
            let text = e.render().to_string();
            let text = text.strip_prefix("error: ").unwrap_or(&text).trim_end();
            return Err(HostError::Usage(text.to_string()));
        }
    };
    // Host chains (16 probes, 1024 correlation lags) are about a megabyte and are built on
    // the stack before they are boxed: run the command on a thread with room for that,
    // whatever thread called us (tests run on small-stack threads).
    std::thread::Builder::new()
        .name("frothline".into())
        .stack_size(COMMAND_STACK)
        .spawn(move || dispatch(cli.command))
        .map_err(|e| HostError::Usage(format!("cannot start the command thread: {e}")))?
        .join()
        .unwrap_or_else(|_| {
            Err(HostError::Usage(
                "the command failed unexpectedly (internal error)".into(),
            ))
        })
}

/// Stack of the command thread (virtual: only what is touched is committed).
pub const COMMAND_STACK: usize = 256 << 20;

fn dispatch(command: Command) -> Result<(), HostError> {
    match command {
        Command::Replay(a) => {
            crate::offline::replay::run_with(&a, crate::offline::replay::Keep::TotalsOnly)
                .map(|_| ())
        }
        Command::Synth(a) => {
            let s = crate::synth::run(&a)?;
            crate::shared::stdout::println(&s.to_string());
            Ok(())
        }
        Command::Ports => {
            let ports = crate::live::ports::list()
                .map_err(|e| HostError::Usage(format!("cannot list serial ports: {e}")))?;
            if ports.is_empty() {
                crate::shared::stdout::println("no serial ports found");
            }
            for p in ports {
                crate::shared::stdout::println(&p.to_string());
            }
            Ok(())
        }
        Command::Watch(a) => crate::live::watch::run(&a).map(|_| ()),
        Command::Demo(a) => crate::live::demo::run(&a).map(|_| ()),
        Command::Simulate(a) => crate::live::demo::simulate(&a).map(|_| ()),
        Command::Unpack(a) => crate::live::unpack::run(&a).map(|_| ()),
        Command::Logbook(a) => crate::field::logbook::run(&a).map(|_| ()),
        Command::Report(a) => crate::report::run(&a).map(|_| ()).map_err(HostError::from),
        Command::Ensemble(a) => crate::offline::ensemble::run(&a).map(|_| ()),
        // A live device (`--port`) or a capture segment.
        Command::Tipcheck(a) => match a.port.clone() {
            Some(port) => {
                let live = crate::live::tipcheck_live::LiveCheck {
                    layout: a.layout.clone(),
                    baud: a.baud,
                    listen: a.listen,
                    set_levels: a.set_levels,
                    tolerance: a.tolerance,
                };
                crate::live::tipcheck_live::run(&live, &port).map(|_| ())
            }
            None => crate::offline::tipcheck::run(&a).map(|_| ()),
        },
    }
}
