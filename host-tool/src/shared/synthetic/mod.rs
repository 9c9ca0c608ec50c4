//! The synthetic-capture generator: captures of dual-tip phase-detection probes, with ground
//! truth, for tests, fixtures, benchmarks and demonstrations (written to files by `frothline
//! synth`, see [`crate::synth`]; rendered in memory by `demo` and `simulate`).
//!
//! A run writes, into one directory:
//! - `capture.wav`: PCM i16, one channel per tip, interleaved, header rate = per-channel rate;
//! - `layout.toml`: the rig description (DESIGN section 2), `kind = "steady"` (or
//!   `"transient"` for a scenario with a `[transient]` table, see [`transient`]);
//! - `truth.csv`: one row per probe, targets and the values realised by the generated
//!   continuous-time leading-tip intervals (columns in [`TRUTH_COLUMNS`]); a transient
//!   scenario writes `truth_fronts.csv`, `truth_profile.csv` and `truth_windows.csv`
//!   instead;
//! - `scenario.toml`: the effective scenario after command-line overrides (re-running it
//!   reproduces the capture bit for bit);
//! - `intervals.csv` (with `--intervals`): every tip's air intervals, `probe,tip,channel,
//!   start_s,end_s`.
//!
//! # Model
//!
//! Per probe, in continuous time (f64 seconds):
//! - **Leading tip**: an alternating renewal process. Air (bubble) and water (droplet) chord
//!   times are independent, gamma-distributed with shape `k` (`chord_shape`, default 2; 1 is
//!   exponential) and means `C/F` and `(1-C)/F`. The process starts 20 mean cycles `1/F`
//!   before t = 0 (10 ms to 60 s) in air with probability C; that warm-up is never sampled,
//!   so the record starts in a near-stationary state.
//! - **Velocity**: each bubble has `V_i = V (1 + Tu xi)`, `xi ~ N(0, 1)`, at least `0.05 V`.
//! - **Trailing tip** (dual-tip probes): every leading bubble again, delayed by
//!   `tip_spacing / V_i`, same chord time, unless missed (probability `p_miss`, default 0.1);
//!   plus extra bubbles that passed beside the leading tip, Poisson at `extra_rate_ratio * F`
//!   (default 0.1 F; with the default miss rate the trailing void fraction matches the
//!   leading one on average). Overlapping intervals are merged.
//! - **Signal**: see [`render`]: water/air levels (polarity per probe), linear wetting and
//!   de-wetting ramps centred on the interfaces, white Gaussian noise, slow baseline drift,
//!   clipping at the rails, point sampling at `n / fs`, rounding to i16.
//!
//! The generating parameters come from a [`FlowModel`] per probe, read at the start of every
//! chord; scenarios give steady ones ([`LocalParams`]), and [`Generator::set_flow`] plugs in
//! any time-varying model (a front, a decay) without touching the rest.
//!
//! **Determinism**: one `u64` seed drives everything. Probe `i` draws its intervals from its
//! own stream and channel `c` its noise from another (seeds derived by SplitMix64 mixing), so
//! the same seed gives the same file, and adding probes (`--probes N`) leaves the existing
//! ones unchanged. The streams come from `rand`'s `StdRng` and `rand_distr` samplers, so the
//! bit-exact output is tied to the versions pinned in `Cargo.lock`.
//!
//! **Speed**: intervals are generated first (a few thousand per tip), then each channel is
//! rendered by walking its sorted interval list once, in blocks of [`BLOCK_FRAMES`] frames
//! streamed to the WAV writer; memory does not grow with the record length beyond the
//! interval lists.
//!
//! # Scenario file (TOML)
//!
//! Every key except the probe targets has a default; unknown keys are errors. An example is
//! `fixtures/scenarios/steady_b2.toml`.
//!
//! ```toml
//! duration_s = 10.0            # record length, s                          (10)
//! sample_rate_hz = 40000       # per-channel rate, Hz                      (40000)
//! seed = 14                    # 0 ..= 2^63-1                               (0)
//! water_temperature_c = 20.0   # copied to the layout                      (20)
//! discharge_m2_s = 0.15        # copied to the layout's [flow]             (none)
//!
//! [signal]
//! low_counts = 3000            # lower phase level, counts (water if air_is_high)  (3000)
//! high_counts = 26000          # higher phase level, counts                        (26000)
//! noise_sigma_counts = 150.0   # white Gaussian noise                              (150)
//! wetting_time_us = 20.0       # air -> water ramp                                 (20)
//! dewetting_time_us = 60.0     # water -> air ramp                                 (60)
//! rail_low_counts = -32768     # clipping rails                                    (i16 range)
//! rail_high_counts = 32767
//! fixed_levels = false         # write air_level / water_level into the layout     (false)
//! tip_level_spread = 0.03      # each tip's levels moved by up to this x swing     (0)
//!
//! [signal.drift]
//! kind = "sine"                # "none" | "sine" | "linear"                        ("none")
//! amplitude_counts = 300.0     # both levels move by this much                     (0)
//! period_s = 10.0              # sine only                                 (the duration)
//!
//! [detector]                   # optional, copied verbatim to the layout
//! threshold = 0.5
//! hysteresis = 0.2
//!
//! [defaults]                   # per-probe defaults
//! tips = 2                     # 1 or 2                                            (2)
//! tip_spacing_mm = 6.0         #                                                   (6)
//! turbulence_intensity = 0.15  #                                                   (0.15)
//! chord_shape = 2.0            # gamma shape k                                     (2)
//! p_miss = 0.1                 # trailing tip misses a bubble                      (0.1)
//! extra_rate_ratio = 0.1       # trailing-only bubbles, fraction of F              (0.1)
//! air_is_high = true           # polarity                                          (true)
//! grouping = 0.0               # bubbles followed by a near-wake water chord        (0)
//!
//! [[probe]]
//! name = "A"                   # unique
//! elevation_mm = 10.0
//! x_mm = 0.0                   # equal x_mm form a station                         (0)
//! void_fraction = 0.05         # C, required
//! bubble_rate_hz = 30.0        # F, required
//! velocity_m_s = 2.0           # V, required
//! # optional overrides: turbulence_intensity, tips, tip_spacing_mm, chord_shape, p_miss,
//! # extra_rate_ratio, air_is_high, grouping, low_counts, high_counts,
//! # leading, trailing (channels: give them for all probes or none; automatic assignment
//! # packs probes in order, a dual-tip probe taking the next two channels, so probe i gets
//! # 2i, 2i+1 when all are dual-tip; channels must end up 0..N without gaps)
//! ```
//!
//! Levels are given as low/high rather than water/air so that a polarity swap
//! (`air_is_high = false`) needs no other change: the air level becomes `low_counts`.
//!
//! # Library use
//!
//! ```no_run
//! use frothline_host::shared::synthetic::{render_interleaved, Scenario};
//! let capture = render_interleaved(&Scenario::builtin_default(), 7).unwrap();
//! let air = capture.truth[0].leading(); // ground-truth air intervals, seconds
//! # let _ = air;
//! ```

pub mod flow;
pub mod intervals;
pub mod output;
pub mod render;
pub mod scenario;
pub mod transient;
pub mod transient_spec;

#[cfg(test)]
mod tests;

use std::fmt;
use std::fs;
use std::path::{Path, PathBuf};

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};

pub use flow::{FlowModel, FnFlow, LocalParams};
pub use intervals::{merge_intervals, Bubble, Interval, ProbeTruth, TipPairSpec};
pub use output::{realised_stats, RealisedStats, TRUTH_COLUMNS};
pub use render::{ChannelRenderer, ChannelStyle};
pub use scenario::{
    DetectorSpec, DriftKind, DriftSpec, ProbeDefaults, ProbeSpec, Resolved, ResolvedProbe,
    Scenario, SignalSpec,
};
pub use transient::{TransientFlow, TransientTruth};
pub use transient_spec::TransientSpec;

/// Frames per block when streaming a capture to disk.
pub const BLOCK_FRAMES: usize = 4096;

const PROBE_STREAM: u64 = 1;
const CHANNEL_STREAM: u64 = 1 << 32;
const LEVEL_STREAM: u64 = 2 << 32;

/// Errors of the synthetic capture generator.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SynthError {
    /// A file could not be read or written.
    #[error("{}: {source}", .path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        #[source]
        source: std::io::Error,
    },
    /// The scenario is not valid TOML or has unknown or mistyped keys.
    #[error("scenario{}: {message}", fmt_path(.path))]
    Parse {
        /// The scenario file, if read from one.
        path: Option<PathBuf>,
        /// Parser message (names the key and the line).
        message: String,
    },
    /// A scenario value is out of range or inconsistent.
    #[error("scenario key `{key}`: {reason}")]
    Invalid {
        /// Dotted key, with the probe index and name for probe keys.
        key: String,
        /// What is wrong.
        reason: String,
    },
    /// The WAV writer failed.
    #[error("{}: {source}", .path.display())]
    Wav {
        /// The WAV file.
        path: PathBuf,
        /// The cause.
        #[source]
        source: hound::Error,
    },
    /// A CSV writer failed.
    #[error("{}: {source}", .path.display())]
    Csv {
        /// The CSV file.
        path: PathBuf,
        /// The cause.
        #[source]
        source: csv::Error,
    },
}

impl From<SynthError> for crate::shared::error::HostError {
    /// A bad scenario or a file the synthesiser cannot write: exit code 2, as for any bad
    /// input.
    fn from(e: SynthError) -> Self {
        crate::shared::error::HostError::Job(Box::new(e), 2)
    }
}

fn fmt_path(p: &Option<PathBuf>) -> String {
    p.as_ref()
        .map(|p| format!(" {}", p.display()))
        .unwrap_or_default()
}

/// What a run wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthSummary {
    /// The capture.
    pub wav: PathBuf,
    /// The layout.
    pub layout: PathBuf,
    /// The truth table.
    pub truth: PathBuf,
    /// The effective scenario.
    pub scenario: PathBuf,
    /// The interval table, if requested.
    pub intervals: Option<PathBuf>,
    /// Probes.
    pub probes: usize,
    /// WAV channels.
    pub channels: u16,
    /// Frames (samples per channel).
    pub frames: u64,
    /// Per-channel sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Seed used.
    pub seed: u64,
}

impl fmt::Display for SynthSummary {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "wrote {} ({} probes, {} channels, {} frames at {} Hz = {:.3} s, seed {}), {}, {}",
            self.wav.display(),
            self.probes,
            self.channels,
            self.frames,
            self.sample_rate_hz,
            self.frames as f64 / self.sample_rate_hz as f64,
            self.seed,
            self.layout.display(),
            self.truth.display(),
        )
    }
}

/// An in-memory capture.
#[derive(Debug, Clone, PartialEq)]
pub struct Capture {
    /// Interleaved samples, `frames * channels`.
    pub samples: Vec<i16>,
    /// Channels.
    pub channels: u16,
    /// Per-channel sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Frames.
    pub frames: u64,
    /// Ground truth per probe, in scenario order.
    pub truth: Vec<ProbeTruth>,
}

impl Capture {
    /// The samples of one channel.
    pub fn channel(&self, c: u16) -> impl Iterator<Item = i16> + '_ {
        self.samples
            .iter()
            .skip(c as usize)
            .step_by(self.channels as usize)
            .copied()
    }
}

fn splitmix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Seed of one independent random stream derived from the master seed.
pub fn stream_seed(seed: u64, stream: u64) -> u64 {
    splitmix64(seed ^ splitmix64(stream))
}

/// A validated scenario ready to generate, with one flow model per probe.
pub struct Generator {
    scenario: Scenario,
    resolved: Resolved,
    flows: Vec<Box<dyn FlowModel>>,
    seed: u64,
}

impl fmt::Debug for Generator {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Generator")
            .field("scenario", &self.scenario)
            .field("seed", &self.seed)
            .finish_non_exhaustive()
    }
}

impl Generator {
    /// Validates `scenario`; every probe starts with its steady target parameters, or, in a
    /// transient scenario, with its [`TransientFlow`].
    pub fn new(scenario: Scenario, seed: u64) -> Result<Self, SynthError> {
        let resolved = scenario.resolve()?;
        let flows = match &scenario.transient {
            Some(t) => transient::flows(t, &resolved)
                .into_iter()
                .map(|f| Box::new(f) as Box<dyn FlowModel>)
                .collect(),
            None => resolved
                .probes
                .iter()
                .map(|p| Box::new(p.params) as Box<dyn FlowModel>)
                .collect(),
        };
        Ok(Self {
            scenario,
            resolved,
            flows,
            seed,
        })
    }

    /// The scenario.
    pub fn scenario(&self) -> &Scenario {
        &self.scenario
    }

    /// Resolved probes and capture dimensions.
    pub fn resolved(&self) -> &Resolved {
        &self.resolved
    }

    /// The seed.
    pub fn seed(&self) -> u64 {
        self.seed
    }

    /// Replaces the flow model of probe `probe` (index in scenario order), e.g. by a
    /// time-varying one. The truth file's targets still show the scenario's values.
    ///
    /// # Panics
    /// If `probe` is out of range.
    pub fn set_flow(&mut self, probe: usize, flow: Box<dyn FlowModel>) {
        self.flows[probe] = flow;
    }

    /// Ground-truth intervals of every probe, in scenario order.
    pub fn truth(&self) -> Vec<ProbeTruth> {
        let end = self.scenario.duration_s;
        self.resolved
            .probes
            .iter()
            .zip(&self.flows)
            .enumerate()
            .map(|(i, (p, flow))| {
                let mut rng =
                    StdRng::seed_from_u64(stream_seed(self.seed, PROBE_STREAM + i as u64));
                let warm = intervals::warm_up_s(flow.as_ref());
                let (bubbles, trailing) =
                    intervals::generate_probe(&p.pair, flow.as_ref(), -warm, end, &mut rng);
                ProbeTruth {
                    name: p.name.clone(),
                    leading_channel: p.leading,
                    trailing_channel: p.trailing,
                    bubbles,
                    trailing,
                }
            })
            .collect()
    }

    /// The truth tables of a transient scenario for the intervals `truth` (empty for a
    /// steady one).
    pub fn transient_truth(&self, truth: &[ProbeTruth]) -> TransientTruth {
        transient::truth(&self.scenario, &self.resolved, truth)
    }

    /// `style` with channel `ch`'s own levels (see `signal.tip_level_spread`).
    fn tip_style(&self, style: &ChannelStyle, ch: u16) -> ChannelStyle {
        let spread = self.scenario.signal.tip_level_spread;
        let mut out = style.clone();
        if spread > 0.0 {
            let mut rng = StdRng::seed_from_u64(stream_seed(self.seed, LEVEL_STREAM + ch as u64));
            let swing = style.air_counts - style.water_counts;
            out.water_counts += (spread * swing * rng.random_range(-1.0..=1.0)).round();
            out.air_counts += (spread * swing * rng.random_range(-1.0..=1.0)).round();
        }
        out
    }

    /// Each channel's nominal (undrifted) water and air levels, counts, in channel order.
    pub fn tip_levels(&self) -> Vec<(f64, f64)> {
        let mut out = vec![(0.0, 0.0); self.resolved.channels as usize];
        for p in &self.resolved.probes {
            let style = ChannelStyle {
                water_counts: p.water_counts as f64,
                air_counts: p.air_counts as f64,
                noise_sigma_counts: 0.0,
                wetting_time_s: 0.0,
                dewetting_time_s: 0.0,
                rails: (0.0, 0.0),
                drift: Default::default(),
                duration_s: 0.0,
                sample_rate_hz: 1,
            };
            for ch in core::iter::once(p.leading).chain(p.trailing) {
                let s = self.tip_style(&style, ch);
                if let Some(o) = out.get_mut(ch as usize) {
                    *o = (s.water_counts, s.air_counts);
                }
            }
        }
        out
    }

    /// One renderer per channel, in channel order.
    pub fn renderers(&self, truth: &[ProbeTruth]) -> Vec<ChannelRenderer> {
        let s = &self.scenario.signal;
        let mut by_channel: Vec<Option<ChannelRenderer>> =
            (0..self.resolved.channels).map(|_| None).collect();
        for (p, t) in self.resolved.probes.iter().zip(truth) {
            let style = ChannelStyle {
                water_counts: p.water_counts as f64,
                air_counts: p.air_counts as f64,
                noise_sigma_counts: s.noise_sigma_counts,
                wetting_time_s: s.wetting_time_us * 1e-6,
                dewetting_time_s: s.dewetting_time_us * 1e-6,
                rails: (s.rail_low_counts as f64, s.rail_high_counts as f64),
                drift: s.drift.clone(),
                duration_s: self.scenario.duration_s,
                sample_rate_hz: self.scenario.sample_rate_hz,
            };
            for (ch, ivs) in t.tips() {
                let seed = stream_seed(self.seed, CHANNEL_STREAM + ch as u64);
                let style = self.tip_style(&style, ch);
                by_channel[ch as usize] = Some(ChannelRenderer::new(&ivs, &style, seed));
            }
        }
        by_channel
            .into_iter()
            .map(|r| r.expect("channels validated gap-free"))
            .collect()
    }

    /// Renders the whole capture in memory.
    pub fn render_interleaved(&self) -> Capture {
        let truth = self.truth();
        let mut rs = self.renderers(&truth);
        let frames = self.resolved.frames;
        let mut samples = Vec::new();
        render::render_block(&mut rs, frames as usize, &mut samples);
        Capture {
            samples,
            channels: self.resolved.channels,
            sample_rate_hz: self.scenario.sample_rate_hz,
            frames,
            truth,
        }
    }

    /// Streams the capture to `path` as a 16-bit PCM WAV; returns the truth it rendered.
    pub fn write_wav(&self, path: &Path) -> Result<Vec<ProbeTruth>, SynthError> {
        let wav_err = |source| SynthError::Wav {
            path: path.to_path_buf(),
            source,
        };
        let truth = self.truth();
        let mut rs = self.renderers(&truth);
        let spec = hound::WavSpec {
            channels: self.resolved.channels,
            sample_rate: self.scenario.sample_rate_hz,
            bits_per_sample: 16,
            sample_format: hound::SampleFormat::Int,
        };
        let mut w = hound::WavWriter::create(path, spec).map_err(wav_err)?;
        let mut block = Vec::with_capacity(BLOCK_FRAMES * self.resolved.channels as usize);
        let mut left = self.resolved.frames;
        while left > 0 {
            let n = left.min(BLOCK_FRAMES as u64) as usize;
            render::render_block(&mut rs, n, &mut block);
            let mut sw = w.get_i16_writer(block.len() as u32);
            for &x in &block {
                sw.write_sample(x);
            }
            sw.flush().map_err(wav_err)?;
            left -= n as u64;
        }
        w.finalize().map_err(wav_err)?;
        Ok(truth)
    }

    /// Writes capture.wav, layout.toml, truth.csv and scenario.toml (and intervals.csv if
    /// `intervals`) into `dir`, creating it if needed.
    pub fn write_dir(&self, dir: &Path, intervals: bool) -> Result<SynthSummary, SynthError> {
        fs::create_dir_all(dir).map_err(|source| SynthError::Io {
            path: dir.into(),
            source,
        })?;
        let write = |name: &str, bytes: &[u8]| -> Result<PathBuf, SynthError> {
            let path = dir.join(name);
            fs::write(&path, bytes).map_err(|source| SynthError::Io {
                path: path.clone(),
                source,
            })?;
            Ok(path)
        };
        let csv_err = |name: &str| {
            let path = dir.join(name);
            move |source| SynthError::Csv { path, source }
        };
        let wav = dir.join("capture.wav");
        let truth = self.write_wav(&wav)?;
        let layout = write(
            "layout.toml",
            output::layout_toml(&self.scenario, &self.resolved, &self.tip_levels()).as_bytes(),
        )?;
        let truth_path = if self.scenario.transient.is_some() {
            let t = self.transient_truth(&truth);
            write(
                "truth_fronts.csv",
                &transient::fronts_csv(&t).map_err(csv_err("truth_fronts.csv"))?,
            )?;
            write(
                "truth_windows.csv",
                &transient::windows_csv(&t).map_err(csv_err("truth_windows.csv"))?,
            )?;
            write(
                "truth_profile.csv",
                &transient::profile_csv(&t).map_err(csv_err("truth_profile.csv"))?,
            )?
        } else {
            let table = output::truth_csv(&self.scenario, &self.resolved, &truth)
                .map_err(csv_err("truth.csv"))?;
            write("truth.csv", &table)?
        };
        let mut effective = self.scenario.clone();
        effective.seed = self.seed;
        let header = "# Effective scenario of a `frothline synth` run (re-run it to reproduce).\n";
        let scenario = write(
            "scenario.toml",
            (header.to_string() + &effective.to_toml_string()?).as_bytes(),
        )?;
        let intervals = if intervals {
            let t = output::intervals_csv(&truth, self.scenario.duration_s)
                .map_err(csv_err("intervals.csv"))?;
            Some(write("intervals.csv", &t)?)
        } else {
            None
        };
        Ok(SynthSummary {
            wav,
            layout,
            truth: truth_path,
            scenario,
            intervals,
            probes: self.resolved.probes.len(),
            channels: self.resolved.channels,
            frames: self.resolved.frames,
            sample_rate_hz: self.scenario.sample_rate_hz,
            seed: self.seed,
        })
    }
}

/// Ground-truth intervals of every probe of `scenario` with `seed` (steady flows).
pub fn generate_tip_intervals(
    scenario: &Scenario,
    seed: u64,
) -> Result<Vec<ProbeTruth>, SynthError> {
    Ok(Generator::new(scenario.clone(), seed)?.truth())
}

/// Renders `scenario` with `seed` in memory (interleaved i16, with the truth).
pub fn render_interleaved(scenario: &Scenario, seed: u64) -> Result<Capture, SynthError> {
    Ok(Generator::new(scenario.clone(), seed)?.render_interleaved())
}
