//! The `frothline` command line.

use crate::error::HostError;
use clap::{Parser, Subcommand};
use std::ffi::OsString;

/// frothline: air-water flow measurements from dual-tip phase-detection probes.
///
/// Replays recorded captures (WAV + layout) through the same signal chain the probe
/// firmware runs, and synthesises test captures. Work near fast water and mains-powered
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
    Replay(crate::replay::ReplayArgs),
    /// Write a synthetic capture (WAV + layout + truth) from a scenario.
    Synth(crate::synth::SynthArgs),
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
        Err(e) => return Err(HostError::Usage(e.render().to_string())),
    };
    match cli.command {
        Command::Replay(a) => crate::replay::run(&a).map(|_| ()),
        Command::Synth(a) => {
            let s = crate::synth::run(&a)?;
            println!("{s}");
            Ok(())
        }
    }
}
