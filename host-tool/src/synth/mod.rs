//! `frothline synth`: the command that writes a synthetic capture with its truth into a
//! folder. The generator itself (scenario, intervals, signal rendering, files) is a shared
//! part, [`crate::shared::synthetic`], because the simulated device of the live job draws its
//! samples from it too; this module holds only the command line and re-exports the
//! generator under the command's name.

use std::path::PathBuf;

pub use crate::shared::synthetic::*;

/// Command-line arguments of `frothline synth`.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct SynthArgs {
    /// Scenario file (TOML; format in the module docs and fixtures/scenarios/steady_b2.toml).
    /// Without it, a built-in scenario: 4 dual-tip probes in a vertical array at one station
    /// of a steady aerated chute-like flow, C 0.05 to 0.8, V 2 to 2.9 m/s, 40 kHz, 10 s.
    pub scenario: Option<PathBuf>,

    /// Output directory (created if missing); receives capture.wav, layout.toml, truth.csv
    /// and scenario.toml.
    #[arg(long, short, value_name = "DIR")]
    pub out: PathBuf,

    /// Record duration in seconds (overrides the scenario).
    #[arg(long, value_name = "SECONDS")]
    pub duration: Option<f64>,

    /// Per-channel sample rate in Hz (overrides the scenario).
    #[arg(long, value_name = "HZ")]
    pub rate: Option<u32>,

    /// Random seed, 0 to 2^63-1 (overrides the scenario); the same seed gives the same files.
    #[arg(long)]
    pub seed: Option<u64>,

    /// Repeat the scenario's probe list cyclically up to N probes (copies placed 1 m apart
    /// downstream, names suffixed 2, 3, ...), or keep only the first N; for benchmarks.
    #[arg(long, value_name = "N")]
    pub probes: Option<usize>,

    /// Noise standard deviation in ADC counts (overrides the scenario).
    #[arg(long, value_name = "COUNTS")]
    pub noise: Option<f64>,

    /// Also write intervals.csv with every tip's true air intervals.
    #[arg(long)]
    pub intervals: bool,
}

/// The scenario a command line asks for: the file or the built-in one, with overrides.
pub fn scenario_from_args(args: &SynthArgs) -> Result<Scenario, SynthError> {
    let mut s = match &args.scenario {
        Some(p) => Scenario::load(p)?,
        None => Scenario::builtin_default(),
    };
    if let Some(d) = args.duration {
        s.duration_s = d;
    }
    if let Some(r) = args.rate {
        s.sample_rate_hz = r;
    }
    if let Some(seed) = args.seed {
        s.seed = seed;
    }
    if let Some(n) = args.probes {
        if n == 0 {
            return Err(SynthError::Invalid {
                key: "--probes".into(),
                reason: "must be at least 1".into(),
            });
        }
        // A capture replay cannot read is no test capture.
        if n > crate::shared::rig::MAX_PROBES {
            return Err(SynthError::Invalid {
                key: "--probes".into(),
                reason: format!(
                    "{n}: `replay` runs at most {} probes on one chain",
                    crate::shared::rig::MAX_PROBES
                ),
            });
        }
        s.replicate(n);
    }
    if let Some(sigma) = args.noise {
        s.signal.noise_sigma_counts = sigma;
    }
    Ok(s)
}

/// `frothline synth`: writes DIR/capture.wav, DIR/layout.toml, DIR/truth.csv and
/// DIR/scenario.toml (DIR/intervals.csv with `--intervals`).
pub fn run(args: &SynthArgs) -> Result<SynthSummary, SynthError> {
    let scenario = scenario_from_args(args)?;
    let seed = scenario.seed;
    Generator::new(scenario, seed)?.write_dir(&args.out, args.intervals)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn run_uses_the_builtin_scenario_and_overrides() {
        let dir = tempfile::tempdir().unwrap();
        let args = SynthArgs {
            out: dir.path().join("cap"),
            duration: Some(0.25),
            rate: Some(20_000),
            seed: Some(5),
            probes: Some(2),
            ..SynthArgs::default()
        };
        let sum = run(&args).unwrap();
        assert_eq!(
            (sum.channels, sum.frames, sum.sample_rate_hz, sum.seed),
            (4, 5000, 20_000, 5)
        );
        // Re-running the written scenario reproduces the capture.
        let wav1 = std::fs::read(&sum.wav).unwrap();
        let args2 = SynthArgs {
            scenario: Some(sum.scenario.clone()),
            out: dir.path().join("again"),
            ..SynthArgs::default()
        };
        let sum2 = run(&args2).unwrap();
        assert_eq!(wav1, std::fs::read(&sum2.wav).unwrap());
    }
}
