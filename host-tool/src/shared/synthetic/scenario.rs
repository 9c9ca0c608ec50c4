//! Scenario files: what a synthetic capture contains (format documented in [`super`]).

use std::collections::HashSet;
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::flow::LocalParams;
use super::intervals::TipPairSpec;
use super::transient_spec::TransientSpec;
use super::SynthError;

/// Default per-channel sample rate, Hz.
pub const DEFAULT_SAMPLE_RATE_HZ: u32 = 40_000;
/// Default record duration, s.
pub const DEFAULT_DURATION_S: f64 = 10.0;
/// Largest seed a scenario file can hold (TOML integers are signed 64-bit).
pub const MAX_SEED: u64 = i64::MAX as u64;
/// Streamwise offset between replicas of the probe list made by [`Scenario::replicate`], mm.
pub const REPLICA_X_STEP_MM: f64 = 1000.0;

fn d_duration() -> f64 {
    DEFAULT_DURATION_S
}
fn d_rate() -> u32 {
    DEFAULT_SAMPLE_RATE_HZ
}
fn d_temperature() -> f64 {
    20.0
}

/// A whole scenario file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Record duration, s.
    #[serde(default = "d_duration")]
    pub duration_s: f64,
    /// Per-channel sample rate, Hz.
    #[serde(default = "d_rate")]
    pub sample_rate_hz: u32,
    /// Seed of all random draws (0 ..= 2^63-1).
    #[serde(default)]
    pub seed: u64,
    /// Water temperature written to the layout, deg C.
    #[serde(default = "d_temperature")]
    pub water_temperature_c: f64,
    /// The discharge per unit width the generated flow carries, m²/s, written to the
    /// layout's `[flow] discharge_m2_s` for the continuity check (give the closed-form
    /// integral of the probes' profiles).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub discharge_m2_s: Option<f64>,
    /// Signal shape: levels, ramps, noise, drift, rails.
    #[serde(default)]
    pub signal: SignalSpec,
    /// Optional detector settings copied verbatim into the layout.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub detector: Option<DetectorSpec>,
    /// Defaults for per-probe keys that a `[[probe]]` leaves out.
    #[serde(default)]
    pub defaults: ProbeDefaults,
    /// A transient flow (dam-break surge, see [`super::transient`]): its probes are generated
    /// from the table (no `[[probe]]` then), each with a time-varying flow.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub transient: Option<TransientSpec>,
    /// The probes, in channel order when channels are automatic.
    #[serde(rename = "probe", default)]
    pub probes: Vec<ProbeSpec>,
}

/// Signal shape shared by all channels.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct SignalSpec {
    /// The lower phase level, ADC counts (water when `air_is_high`).
    pub low_counts: i32,
    /// The higher phase level, ADC counts (air when `air_is_high`).
    pub high_counts: i32,
    /// Standard deviation of the additive white Gaussian noise, counts.
    pub noise_sigma_counts: f64,
    /// Wetting ramp (air -> water) duration, microseconds.
    pub wetting_time_us: f64,
    /// De-wetting ramp (water -> air) duration, microseconds.
    pub dewetting_time_us: f64,
    /// Lower clipping rail, counts (>= -32768).
    pub rail_low_counts: i32,
    /// Upper clipping rail, counts (<= 32767).
    pub rail_high_counts: i32,
    /// Write `air_level` / `water_level` (nominal, without drift) into the layout.
    pub fixed_levels: bool,
    /// Slow baseline drift (both levels move together).
    pub drift: DriftSpec,
    /// Each tip's own levels: every channel's water and air levels are moved by up to
    /// this fraction of the nominal swing (drawn once per channel), as separate sensor
    /// circuits differ. 0 (the default) gives every tip of a probe the same levels.
    pub tip_level_spread: f64,
}

impl Default for SignalSpec {
    fn default() -> Self {
        Self {
            low_counts: 3000,
            high_counts: 26000,
            noise_sigma_counts: 150.0,
            wetting_time_us: 20.0,
            dewetting_time_us: 60.0,
            rail_low_counts: i16::MIN as i32,
            rail_high_counts: i16::MAX as i32,
            fixed_levels: false,
            drift: DriftSpec::default(),
            tip_level_spread: 0.0,
        }
    }
}

/// Kind of baseline drift.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum DriftKind {
    /// No drift.
    #[default]
    None,
    /// `amplitude * sin(2 pi t / period + phase)`, phase random per channel.
    Sine,
    /// `amplitude * t / duration`: from 0 at the start to `amplitude` at the end.
    Linear,
}

/// Slow baseline drift.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct DriftSpec {
    /// Drift shape.
    pub kind: DriftKind,
    /// Amplitude, counts.
    pub amplitude_counts: f64,
    /// Period of a sine drift, s (default: the record duration).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub period_s: Option<f64>,
}

/// Detector settings for the layout's `[detector]` table.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DetectorSpec {
    /// Phase threshold as a fraction of the water -> air range.
    pub threshold: f64,
    /// Hysteresis band width as a fraction of the range.
    pub hysteresis: f64,
}

/// Defaults applied to every probe that leaves a key out.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ProbeDefaults {
    /// Number of tips, 1 or 2.
    pub tips: u8,
    /// Leading -> trailing distance, mm.
    pub tip_spacing_mm: f64,
    /// Turbulence intensity Tu.
    pub turbulence_intensity: f64,
    /// Gamma shape k of the chord-time distributions (1 = exponential).
    pub chord_shape: f64,
    /// Probability that the trailing tip misses a leading bubble.
    pub p_miss: f64,
    /// Extra trailing-only bubbles, as a fraction of the bubble count rate F.
    pub extra_rate_ratio: f64,
    /// Polarity: air reads the higher level.
    pub air_is_high: bool,
    /// Fraction of bubbles followed by a near-wake water chord (particle grouping).
    pub grouping: f64,
}

impl Default for ProbeDefaults {
    fn default() -> Self {
        Self {
            tips: 2,
            tip_spacing_mm: 6.0,
            turbulence_intensity: 0.15,
            chord_shape: 2.0,
            p_miss: 0.1,
            extra_rate_ratio: 0.1,
            air_is_high: true,
            grouping: 0.0,
        }
    }
}

/// One `[[probe]]` entry. Optional keys fall back to `[defaults]` / `[signal]`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProbeSpec {
    /// Probe name (unique).
    pub name: String,
    /// Tip height above the bed, mm.
    pub elevation_mm: f64,
    /// Streamwise position, mm; equal `x_mm` form a station.
    #[serde(default)]
    pub x_mm: f64,
    /// Target void fraction C.
    pub void_fraction: f64,
    /// Target bubble count rate F, Hz.
    pub bubble_rate_hz: f64,
    /// Target mean interfacial velocity V, m/s.
    pub velocity_m_s: f64,
    /// Turbulence intensity Tu.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub turbulence_intensity: Option<f64>,
    /// Number of tips, 1 or 2.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tips: Option<u8>,
    /// Leading -> trailing distance, mm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tip_spacing_mm: Option<f64>,
    /// Gamma shape k of the chord-time distributions.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub chord_shape: Option<f64>,
    /// Probability that the trailing tip misses a leading bubble.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub p_miss: Option<f64>,
    /// Extra trailing-only bubbles as a fraction of F.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub extra_rate_ratio: Option<f64>,
    /// Polarity: air reads the higher level.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub air_is_high: Option<bool>,
    /// Fraction of bubbles followed by a near-wake water chord (particle grouping).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub grouping: Option<f64>,
    /// This probe's lower level, counts.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub low_counts: Option<i32>,
    /// This probe's higher level, counts.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub high_counts: Option<i32>,
    /// Explicit leading-tip channel (all probes or none).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub leading: Option<u16>,
    /// Explicit trailing-tip channel (dual-tip probes, all probes or none).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub trailing: Option<u16>,
}

impl ProbeSpec {
    /// A dual-tip probe with the given targets; everything else from the defaults.
    pub fn new(name: &str, elevation_mm: f64, c: f64, f_hz: f64, v_m_s: f64) -> Self {
        Self {
            name: name.to_string(),
            elevation_mm,
            x_mm: 0.0,
            void_fraction: c,
            bubble_rate_hz: f_hz,
            velocity_m_s: v_m_s,
            turbulence_intensity: None,
            tips: None,
            tip_spacing_mm: None,
            chord_shape: None,
            p_miss: None,
            extra_rate_ratio: None,
            air_is_high: None,
            grouping: None,
            low_counts: None,
            high_counts: None,
            leading: None,
            trailing: None,
        }
    }
}

/// A probe with every default applied and its channels assigned.
#[derive(Debug, Clone, PartialEq)]
pub struct ResolvedProbe {
    /// Probe name.
    pub name: String,
    /// Tip height above the bed, mm.
    pub elevation_mm: f64,
    /// Streamwise position, mm.
    pub x_mm: f64,
    /// Steady target parameters.
    pub params: LocalParams,
    /// Tip relation and chord shape.
    pub pair: TipPairSpec,
    /// Polarity.
    pub air_is_high: bool,
    /// Nominal water level, counts (polarity applied).
    pub water_counts: i32,
    /// Nominal air level, counts (polarity applied).
    pub air_counts: i32,
    /// Leading-tip channel.
    pub leading: u16,
    /// Trailing-tip channel.
    pub trailing: Option<u16>,
}

/// A validated scenario: resolved probes and capture dimensions.
#[derive(Debug, Clone, PartialEq)]
pub struct Resolved {
    /// Probes in scenario order.
    pub probes: Vec<ResolvedProbe>,
    /// WAV channels.
    pub channels: u16,
    /// Frames (samples per channel).
    pub frames: u64,
}

fn invalid(key: impl Into<String>, reason: impl Into<String>) -> SynthError {
    SynthError::Invalid {
        key: key.into(),
        reason: reason.into(),
    }
}

fn check(ok: bool, key: &str, reason: impl FnOnce() -> String) -> Result<(), SynthError> {
    if ok {
        Ok(())
    } else {
        Err(invalid(key, reason()))
    }
}

fn finite_in(key: &str, x: f64, lo: f64, hi: f64) -> Result<(), SynthError> {
    check(x.is_finite() && x >= lo && x <= hi, key, || {
        format!("must lie in [{lo}, {hi}], got {x}")
    })
}

fn positive(key: &str, x: f64) -> Result<(), SynthError> {
    check(x.is_finite() && x > 0.0, key, || {
        format!("must be positive and finite, got {x}")
    })
}

fn non_negative(key: &str, x: f64) -> Result<(), SynthError> {
    check(x.is_finite() && x >= 0.0, key, || {
        format!("must be non-negative and finite, got {x}")
    })
}

impl Scenario {
    /// Parses a scenario from TOML text (unknown keys are errors naming the line).
    pub fn from_toml_str(text: &str) -> Result<Self, SynthError> {
        toml::from_str(text).map_err(|e| SynthError::Parse {
            path: None,
            message: e.to_string(),
        })
    }

    /// Reads and parses a scenario file.
    pub fn load(path: &Path) -> Result<Self, SynthError> {
        let text = std::fs::read_to_string(path).map_err(|source| SynthError::Io {
            path: path.to_path_buf(),
            source,
        })?;
        toml::from_str(&text).map_err(|e| SynthError::Parse {
            path: Some(path.to_path_buf()),
            message: e.to_string(),
        })
    }

    /// The scenario as TOML (round-trips through [`Scenario::from_toml_str`]).
    pub fn to_toml_string(&self) -> Result<String, SynthError> {
        toml::to_string(self).map_err(|e| invalid("scenario", e.to_string()))
    }

    /// The built-in scenario: a 4-probe vertical array at one station of a steady aerated
    /// chute-like flow, C from 0.05 near the bed to 0.8 near the surface, V from 2.0 to
    /// 2.9 m/s, 6 mm dual tips, 40 kHz, 10 s.
    pub fn builtin_default() -> Self {
        // F peaks near C = 0.5, roughly F = Fmax 4 C (1 - C); Tu falls with elevation.
        // Probe names are words, not letters, so that none reads as a symbol (C, F, V).
        let rows = [
            ("bed", 10.0, 0.05, 30.0, 2.0, 0.30),
            ("low", 30.0, 0.20, 85.0, 2.4, 0.22),
            ("mid", 55.0, 0.50, 120.0, 2.7, 0.16),
            ("top", 85.0, 0.80, 75.0, 2.9, 0.12),
        ];
        let probes = rows
            .iter()
            .map(|&(name, y, c, f, v, tu)| ProbeSpec {
                turbulence_intensity: Some(tu),
                ..ProbeSpec::new(name, y, c, f, v)
            })
            .collect();
        Self {
            duration_s: DEFAULT_DURATION_S,
            sample_rate_hz: DEFAULT_SAMPLE_RATE_HZ,
            seed: 1,
            water_temperature_c: 20.0,
            discharge_m2_s: None,
            signal: SignalSpec {
                drift: DriftSpec {
                    kind: DriftKind::Sine,
                    amplitude_counts: 300.0,
                    period_s: None,
                },
                ..SignalSpec::default()
            },
            detector: None,
            defaults: ProbeDefaults::default(),
            transient: None,
            probes,
        }
    }

    /// The built-in transient scenario: a dam-break surge (reservoir 0.1 m deep, Ritter's
    /// celerity 1.98 m/s) over a dry bed reaching one station of ten probes 10 mm apart
    /// (5 to 95 mm; the one at 35 mm dual-tip), 40 kHz, 1.2 s, fixed levels.
    pub fn builtin_transient() -> Self {
        let mut s = Self::builtin_default();
        s.duration_s = 1.2;
        s.signal.drift = DriftSpec::default();
        s.signal.fixed_levels = true;
        s.probes.clear();
        s.transient = Some(TransientSpec {
            dual_tip_elevations_mm: vec![35.0],
            ..TransientSpec::default()
        });
        s
    }

    /// The probes of the scenario: the `[[probe]]` tables, or those a `[transient]` table
    /// generates.
    pub fn probe_list(&self) -> Vec<ProbeSpec> {
        match &self.transient {
            Some(t) if self.probes.is_empty() => t.probes(),
            _ => self.probes.clone(),
        }
    }

    /// Repeats the probe list cyclically (or truncates it) to `n` probes, for benchmarks.
    ///
    /// Copy `c` (0-based) of a probe is placed `c * REPLICA_X_STEP_MM` downstream and named
    /// `<name><c+1>` for `c >= 1`. Channels become automatic.
    pub fn replicate(&mut self, n: usize) {
        let base = std::mem::take(&mut self.probes);
        if base.is_empty() {
            return;
        }
        self.probes = (0..n)
            .map(|i| {
                let copy = i / base.len();
                let mut p = base[i % base.len()].clone();
                if copy > 0 {
                    p.name = format!("{}{}", p.name, copy + 1);
                    p.x_mm += copy as f64 * REPLICA_X_STEP_MM;
                }
                p.leading = None;
                p.trailing = None;
                p
            })
            .collect();
    }

    /// Validates the scenario, applies defaults and assigns channels.
    pub fn resolve(&self) -> Result<Resolved, SynthError> {
        positive("duration_s", self.duration_s)?;
        check(self.sample_rate_hz > 0, "sample_rate_hz", || {
            "must be positive".into()
        })?;
        check(self.seed <= MAX_SEED, "seed", || {
            format!("must be at most {MAX_SEED}")
        })?;
        if let Some(q) = self.discharge_m2_s {
            positive("discharge_m2_s", q)?;
        }
        finite_in("water_temperature_c", self.water_temperature_c, -5.0, 100.0)?;
        let s = &self.signal;
        non_negative("signal.noise_sigma_counts", s.noise_sigma_counts)?;
        non_negative("signal.wetting_time_us", s.wetting_time_us)?;
        non_negative("signal.dewetting_time_us", s.dewetting_time_us)?;
        let i16r = (i16::MIN as i32, i16::MAX as i32);
        check(
            s.rail_low_counts >= i16r.0,
            "signal.rail_low_counts",
            || format!("must be at least {}", i16r.0),
        )?;
        check(
            s.rail_high_counts <= i16r.1,
            "signal.rail_high_counts",
            || format!("must be at most {}", i16r.1),
        )?;
        check(
            s.rail_low_counts < s.rail_high_counts,
            "signal.rail_high_counts",
            || "must exceed signal.rail_low_counts".into(),
        )?;
        non_negative("signal.drift.amplitude_counts", s.drift.amplitude_counts)?;
        finite_in("signal.tip_level_spread", s.tip_level_spread, 0.0, 0.2)?;
        if let Some(p) = s.drift.period_s {
            positive("signal.drift.period_s", p)?;
        }
        if let Some(d) = &self.detector {
            finite_in("detector.threshold", d.threshold, 0.0, 1.0)?;
            finite_in("detector.hysteresis", d.hysteresis, 0.0, 1.0)?;
        }
        if let Some(t) = &self.transient {
            t.validate()?;
            check(self.probes.is_empty(), "probe", || {
                "a scenario with [transient] generates its probes: remove the [[probe]] tables"
                    .into()
            })?;
        }
        let all_probes = self.probe_list();
        check(!all_probes.is_empty(), "probe", || {
            "at least one [[probe]] is needed".into()
        })?;

        let explicit = all_probes.iter().filter(|p| p.leading.is_some()).count();
        check(
            explicit == 0 || explicit == all_probes.len(),
            "probe.leading",
            || "give channels for all probes or for none".into(),
        )?;

        let d = &self.defaults;
        let mut names = HashSet::new();
        let mut used = HashSet::new();
        let mut next_channel: u32 = 0;
        let mut probes = Vec::with_capacity(all_probes.len());
        for (i, p) in all_probes.iter().enumerate() {
            let k = |field: &str| format!("probe[{i}].{field} (probe \"{}\")", p.name);
            check(!p.name.is_empty(), &k("name"), || {
                "must not be empty".into()
            })?;
            check(names.insert(p.name.clone()), &k("name"), || {
                "duplicate probe name".into()
            })?;
            finite_in(&k("elevation_mm"), p.elevation_mm, -1e6, 1e6)?;
            finite_in(&k("x_mm"), p.x_mm, -1e9, 1e9)?;
            finite_in(&k("void_fraction"), p.void_fraction, 0.0, 1.0)?;
            non_negative(&k("bubble_rate_hz"), p.bubble_rate_hz)?;
            positive(&k("velocity_m_s"), p.velocity_m_s)?;
            let tu = p.turbulence_intensity.unwrap_or(d.turbulence_intensity);
            finite_in(&k("turbulence_intensity"), tu, 0.0, 10.0)?;
            let tips = p.tips.unwrap_or(d.tips);
            check(tips == 1 || tips == 2, &k("tips"), || {
                format!("must be 1 or 2, got {tips}")
            })?;
            let spacing_mm = p.tip_spacing_mm.unwrap_or(d.tip_spacing_mm);
            if tips == 2 {
                positive(&k("tip_spacing_mm"), spacing_mm)?;
            }
            let shape = p.chord_shape.unwrap_or(d.chord_shape);
            finite_in(&k("chord_shape"), shape, 1e-3, 1e3)?;
            let p_miss = p.p_miss.unwrap_or(d.p_miss);
            finite_in(&k("p_miss"), p_miss, 0.0, 1.0)?;
            let extra = p.extra_rate_ratio.unwrap_or(d.extra_rate_ratio);
            finite_in(&k("extra_rate_ratio"), extra, 0.0, 100.0)?;
            let grouping = p.grouping.unwrap_or(d.grouping);
            finite_in(&k("grouping"), grouping, 0.0, 0.95)?;
            let air_is_high = p.air_is_high.unwrap_or(d.air_is_high);
            let low = p.low_counts.unwrap_or(s.low_counts);
            let high = p.high_counts.unwrap_or(s.high_counts);
            check(low < high, &k("high_counts"), || {
                format!("the high level ({high}) must exceed the low level ({low})")
            })?;
            let (air_counts, water_counts) = if air_is_high {
                (high, low)
            } else {
                (low, high)
            };

            let (leading, trailing) = if explicit > 0 {
                let lead = p.leading.unwrap_or_default();
                let trail = match (tips, p.trailing) {
                    (2, Some(t)) => Some(t),
                    (2, None) => return Err(invalid(k("trailing"), "a dual-tip probe needs it")),
                    (_, Some(_)) => {
                        return Err(invalid(
                            k("trailing"),
                            "a single-tip probe has no trailing tip",
                        ))
                    }
                    (_, None) => None,
                };
                (lead, trail)
            } else {
                check(p.trailing.is_none(), &k("trailing"), || {
                    "give `leading` too (all probes or none)".into()
                })?;
                let lead = next_channel;
                next_channel += 1;
                let trail = (tips == 2).then(|| {
                    next_channel += 1;
                    next_channel - 1
                });
                check(next_channel <= u16::MAX as u32, &k("leading"), || {
                    "too many channels".into()
                })?;
                (lead as u16, trail.map(|t| t as u16))
            };
            for (field, ch) in [("leading", Some(leading)), ("trailing", trailing)] {
                if let Some(ch) = ch {
                    check(used.insert(ch), &k(field), || {
                        format!("channel {ch} is already used by another tip")
                    })?;
                }
            }
            probes.push(ResolvedProbe {
                name: p.name.clone(),
                elevation_mm: p.elevation_mm,
                x_mm: p.x_mm,
                params: LocalParams {
                    void_fraction: p.void_fraction,
                    bubble_rate_hz: p.bubble_rate_hz,
                    velocity_m_s: p.velocity_m_s,
                    turbulence_intensity: tu,
                },
                pair: TipPairSpec {
                    tip_spacing_m: (tips == 2).then_some(spacing_mm * 1e-3),
                    chord_shape: shape,
                    p_miss,
                    extra_rate_ratio: extra,
                    grouping,
                },
                air_is_high,
                water_counts,
                air_counts,
                leading,
                trailing,
            });
        }
        let channels = used.len();
        let max = used.iter().copied().max().unwrap_or(0) as usize;
        check(max + 1 == channels, "probe.leading", || {
            format!("channels must be 0..{channels} without gaps; the highest used is {max}")
        })?;
        let frames = (self.duration_s * self.sample_rate_hz as f64).round() as u64;
        check(frames > 0, "duration_s", || {
            "gives no samples at this sample rate".into()
        })?;
        let bytes = frames as u128 * channels as u128 * 2;
        check(bytes < (u32::MAX as u128 - 1024), "duration_s", || {
            format!("the capture would be {bytes} bytes, beyond the 4 GiB a WAV file can hold")
        })?;
        Ok(Resolved {
            probes,
            channels: channels as u16,
            frames,
        })
    }
}

impl TransientSpec {
    /// The probes of the scenario: every station × every elevation.
    pub fn probes(&self) -> Vec<ProbeSpec> {
        let mut out = Vec::new();
        for (s, &x) in self.stations_x_mm.iter().enumerate() {
            let letter = (b'A' + s as u8) as char;
            for (i, &y) in self.elevations_mm.iter().enumerate() {
                // The steady targets of the probe format: the values long behind the front
                // (the generator replaces them by the transient flow).
                let late = self.at(10.0 * self.n_time_s.max(self.y90_time_s));
                let c = late.void_fraction(y).clamp(0.0, 1.0);
                let mut p = ProbeSpec::new(
                    &format!("{letter}{}", i + 1),
                    y,
                    c,
                    self.bubble_rate_hz(c),
                    late.velocity_m_s,
                );
                p.x_mm = x;
                p.turbulence_intensity = Some(self.turbulence_intensity);
                let dual = self.dual_tip_elevations_mm.contains(&y);
                p.tips = Some(if dual { 2 } else { 1 });
                out.push(p);
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_default_resolves_to_eight_channels() {
        let r = Scenario::builtin_default().resolve().unwrap();
        assert_eq!(r.channels, 8);
        assert_eq!(r.frames, 400_000);
        assert_eq!(r.probes[3].leading, 6);
        assert_eq!(r.probes[3].trailing, Some(7));
    }

    #[test]
    fn scenario_round_trips_through_toml() {
        let s = Scenario::builtin_default();
        let text = s.to_toml_string().unwrap();
        assert_eq!(Scenario::from_toml_str(&text).unwrap(), s);
    }

    #[test]
    fn unknown_keys_and_bad_values_are_named() {
        let e = Scenario::from_toml_str("duration_s = 1.0\nbogus = 3\n").unwrap_err();
        assert!(e.to_string().contains("bogus"), "{e}");
        let mut s = Scenario::builtin_default();
        s.probes[2].void_fraction = 1.5;
        let e = s.resolve().unwrap_err().to_string();
        assert!(
            e.contains("probe[2].void_fraction") && e.contains("\"mid\""),
            "{e}"
        );
    }

    #[test]
    fn replicate_cycles_names_and_stations() {
        let mut s = Scenario::builtin_default();
        s.replicate(6);
        let names: Vec<_> = s.probes.iter().map(|p| p.name.as_str()).collect();
        assert_eq!(names, ["bed", "low", "mid", "top", "bed2", "low2"]);
        assert_eq!(s.probes[5].x_mm, REPLICA_X_STEP_MM);
        assert_eq!(s.resolve().unwrap().channels, 12);
    }

    #[test]
    fn mixed_tips_pack_channels_in_order() {
        let mut s = Scenario::builtin_default();
        s.probes[0].tips = Some(1);
        let r = s.resolve().unwrap();
        assert_eq!((r.probes[0].leading, r.probes[0].trailing), (0, None));
        assert_eq!((r.probes[1].leading, r.probes[1].trailing), (1, Some(2)));
        assert_eq!(r.channels, 7);
    }
}
