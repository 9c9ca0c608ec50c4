//! `frothline tipcheck`: check every tip of a rig on a segment of a capture (a dip in still
//! water, then air; or a stretch of the flow) and, on request, write the levels it measured
//! into the layout.
//!
//! Per tip it measures the air and water levels (the record rule of
//! [`crate::offline::record_levels`] over the segment), the noise of each phase (the standard
//! deviation of the samples within a quarter of the swing of its level), the swing, and
//! the interface
//! times: the median time from 10 % to 90 % of the swing for a tip that dries (water to
//! air) and from 90 % to 10 % for one that wets (air to water), over every interface of the
//! segment that passes from one level to the other. Slow interfaces are the sign of a
//! fouled or badly wetting tip.
//!
//! Flags (thresholds of this crate, common practice, no source): `not_learnt` (no two
//! levels: one phase only, or a swing buried in noise); `small_swing` (a swing below 10 %
//! of the file's full scale: the ADC range is poorly used); `high_noise` (a phase's noise
//! above 10 % of the swing: the 40 %/60 % hysteresis band is then only six standard
//! deviations from a level); `moved` (a level differs from the layout's fixed one by more
//! than `--tolerance` of the swing: drift, or a fouled tip).
//!
//! `--write` stores each tip's levels in the layout as its own pair
//! (`leading_air_level`, ...), edited with `toml_edit` so the user's comments, blank lines
//! and key order stay; a probe's shared pair (`air_level` / `water_level`) is replaced by
//! the two tips' own pairs in its place.

use crate::offline::record_levels::{from_histogram, TipOutcome};
use crate::shared::capture::Capture;
use crate::shared::error::{write_err, HostError};
use crate::shared::layout::Layout;
use frothline_core::levels::LEARN_STRIDE;
use frothline_core::Polarity;
use std::fmt::Write as _;
use std::path::PathBuf;

/// Arguments of `frothline tipcheck`.
#[derive(clap::Args, Debug, Clone)]
pub struct TipcheckArgs {
    /// The capture: a WAV file, one channel per probe tip (or `--port` for a live device).
    #[arg(required_unless_present = "port")]
    pub capture: Option<PathBuf>,
    /// Check a live device on this serial port instead of a capture, from the tip-health
    /// frames it sends (levels in use, swing, interfaces per second).
    #[arg(long, short, conflicts_with_all = ["capture", "write", "from", "to"])]
    pub port: Option<String>,
    /// Baud rate of `--port`.
    #[arg(long, default_value_t = 115_200)]
    pub baud: u32,
    /// Seconds to listen to a live device before the table (and the SetLevels).
    #[arg(long, default_value_t = 5.0)]
    pub listen: f64,
    /// With `--port`: fix the levels the device has learnt, one SetLevels command per tip.
    #[arg(long, requires = "port")]
    pub set_levels: bool,
    /// The rig layout (TOML).
    #[arg(long, short)]
    pub layout: PathBuf,
    /// Start of the segment to check, seconds from the start of the capture.
    #[arg(long, default_value_t = 0.0)]
    pub from: f64,
    /// End of the segment, seconds (default: the end of the capture).
    #[arg(long)]
    pub to: Option<f64>,
    /// A level that moved from the layout's by more than this fraction of the swing is
    /// flagged `moved`.
    #[arg(long, default_value_t = 0.05)]
    pub tolerance: f64,
    /// Write the measured levels into the layout file (comments and key order kept).
    #[arg(long)]
    pub write: bool,
}

/// What was measured on one tip.
#[derive(Clone, Debug, PartialEq)]
pub struct TipCheck {
    /// Probe name.
    pub probe: String,
    /// Layout index of the probe.
    pub probe_index: usize,
    /// Trailing tip (false: leading).
    pub trailing: bool,
    /// WAV channel.
    pub channel: usize,
    /// Air and water levels, file units (`None`: not learnt).
    pub levels: Option<(f64, f64)>,
    /// Noise of the air and water phases, counts.
    pub noise: Option<(f64, f64)>,
    /// Swing, counts.
    pub swing: Option<f64>,
    /// Median 10-90 % time of the water -> air interfaces, s.
    pub drying_s: Option<f64>,
    /// Median 90-10 % time of the air -> water interfaces, s.
    pub wetting_s: Option<f64>,
    /// Interfaces that passed from one level to the other.
    pub interfaces: usize,
    /// Flags raised (names).
    pub flags: Vec<&'static str>,
}

/// The result of a check.
#[derive(Clone, Debug)]
pub struct TipcheckReport {
    /// One row per tip, layout order, leading first.
    pub tips: Vec<TipCheck>,
    /// Segment checked, s.
    pub segment_s: (f64, f64),
    /// True if the layout was written.
    pub written: bool,
}

/// Run the check (and the write, if asked).
pub fn run(args: &TipcheckArgs) -> Result<TipcheckReport, HostError> {
    let report = check(args)?;
    crate::shared::stdout::print(&table(&report));
    if args.write {
        let text = std::fs::read_to_string(&args.layout).map_err(|e| {
            HostError::Usage(format!("{}: cannot read: {e}", args.layout.display()))
        })?;
        let out = write_levels(&text, &report.tips).map_err(|e| {
            HostError::Usage(format!("{}: cannot edit: {e}", args.layout.display()))
        })?;
        // Check the result is still a valid layout before it replaces the file.
        Layout::parse(&out, &args.layout)?;
        let tmp = args.layout.with_extension("toml.partial");
        std::fs::write(&tmp, &out).map_err(write_err(&tmp))?;
        std::fs::rename(&tmp, &args.layout).map_err(write_err(&args.layout))?;
        crate::shared::stdout::println(&format!("wrote the levels into {}", args.layout.display()));
    }
    Ok(TipcheckReport {
        written: args.write,
        ..report
    })
}

/// Measure every tip of the layout on the segment.
pub fn check(args: &TipcheckArgs) -> Result<TipcheckReport, HostError> {
    let layout = Layout::load(&args.layout)?;
    let Some(capture) = &args.capture else {
        return Err(HostError::Usage(
            "give a capture (WAV) to check, or --port for a live device".into(),
        ));
    };
    let mut cap = Capture::open(capture)?;
    layout.check_channels(cap.channels(), &args.layout)?;
    let fs = cap.sample_rate().max(1) as f64;
    let total = cap.frames();
    let from = (args.from.max(0.0) * fs).round() as u64;
    let to = args
        .to
        .map_or(total, |t| ((t * fs).round().max(0.0) as u64).min(total));
    if !(args.from.is_finite() && from < to) {
        return Err(HostError::Usage(format!(
            "--from {} --to {}: the segment holds no frame of the capture ({:.3} s long)",
            args.from,
            args.to.map_or("end".into(), |t| t.to_string()),
            total as f64 / fs
        )));
    }
    let channels = cap.channels().max(1);
    // The segment, per channel.
    let mut per: Vec<Vec<i16>> = vec![Vec::new(); channels];
    let mut buf = Vec::new();
    let mut at = 0u64;
    while at < to {
        let n = cap.read_frames(&mut buf, 1 << 15)?;
        if n == 0 {
            break;
        }
        for (k, frame) in buf.chunks_exact(channels).enumerate() {
            let f = at + k as u64;
            if (from..to).contains(&f) {
                for (c, &x) in frame.iter().enumerate() {
                    per[c].push(x);
                }
            }
        }
        at += n as u64;
    }
    let format = cap.format();
    let (lo, hi) = format.full_scale();
    let full_counts = cap.to_counts(hi) - cap.to_counts(lo);
    let min_swing = layout.detector.min_swing.map_or(64, |v| {
        (cap.to_counts(v) - cap.to_counts(0.0)).abs().round() as u16
    });
    let to_file = |counts: f64| counts_to_file(&cap, counts);
    let mut tips = Vec::new();
    for (i, p) in layout.probes.iter().enumerate() {
        let polarity = if p.air_is_high {
            Polarity::AirHigh
        } else {
            Polarity::AirLow
        };
        for (trailing, ch) in [(false, Some(p.leading)), (true, p.trailing)] {
            let Some(ch) = ch else { continue };
            let samples = per.get(ch).map_or(&[][..], |v| v.as_slice());
            let mut hist = vec![0u32; 1 << 16];
            for &x in samples.iter().step_by(LEARN_STRIDE as usize) {
                let b = (x as u16 ^ 0x8000) as usize;
                hist[b] = hist[b].saturating_add(1);
            }
            let outcome = from_histogram(&hist, polarity, min_swing);
            let mut t = TipCheck {
                probe: p.name.clone(),
                probe_index: i,
                trailing,
                channel: ch,
                levels: None,
                noise: None,
                swing: None,
                drying_s: None,
                wetting_s: None,
                interfaces: 0,
                flags: Vec::new(),
            };
            if let TipOutcome::Learnt {
                levels,
                air_noise,
                water_noise,
            } = outcome
            {
                let (air, water) = (levels.air as f64, levels.water as f64);
                let swing = (air - water).abs();
                t.levels = Some((to_file(air), to_file(water)));
                t.noise = Some((air_noise as f64, water_noise as f64));
                t.swing = Some(swing);
                let (dry, wet, n) = interface_times(samples, water, air);
                t.drying_s = dry.map(|f| f / fs);
                t.wetting_s = wet.map(|f| f / fs);
                t.interfaces = n;
                if swing < 0.1 * full_counts {
                    t.flags.push("small_swing");
                }
                if (air_noise.max(water_noise) as f64) > 0.1 * swing {
                    t.flags.push("high_noise");
                }
                if let Some(fixed) = p.tip_levels(trailing) {
                    let (fa, fw) = (cap.to_counts(fixed.air), cap.to_counts(fixed.water));
                    if (fa - air).abs() > args.tolerance * swing
                        || (fw - water).abs() > args.tolerance * swing
                    {
                        t.flags.push("moved");
                    }
                }
            } else {
                t.flags.push("not_learnt");
            }
            tips.push(t);
        }
    }
    Ok(TipcheckReport {
        tips,
        segment_s: (from as f64 / fs, to as f64 / fs),
        written: false,
    })
}

/// A level in counts back in the file's units (the inverse of the capture's conversion,
/// to the file's resolution).
fn counts_to_file(cap: &Capture, counts: f64) -> f64 {
    use crate::shared::capture::SampleFormat;
    match cap.format() {
        SampleFormat::Int { bits: 8 } => counts / 256.0 + 128.0,
        SampleFormat::Int { bits: 16 } => counts,
        SampleFormat::Int { bits } => counts * f64::powi(2.0, i32::from(bits.saturating_sub(16))),
        SampleFormat::Float32 => counts / 32767.0,
    }
}

/// Median frames from 10 % to 90 % of the swing for the drying interfaces (water -> air)
/// and from 90 % to 10 % for the wetting ones, over the interfaces that pass from one level
/// to the other, with the fractional crossing frames interpolated linearly between samples;
/// and the number of such interfaces.
fn interface_times(samples: &[i16], water: f64, air: f64) -> (Option<f64>, Option<f64>, usize) {
    let span = air - water;
    if span == 0.0 {
        return (None, None, 0);
    }
    // Fraction of the way from water to air (0 water, 1 air), whatever the polarity.
    let frac = |x: i16| (x as f64 - water) / span;
    // The last crossing of the 10 % (in water) or 90 % (in air) line, as a fractional frame.
    let mut last_low: Option<f64> = None;
    let mut last_high: Option<f64> = None;
    // Which side the signal was on last: Some(false) low, Some(true) high.
    let mut side: Option<bool> = None;
    let (mut dry, mut wet) = (Vec::new(), Vec::new());
    for i in 1..samples.len() {
        let (a, b) = (frac(samples[i - 1]), frac(samples[i]));
        let cross = |t: f64| -> Option<f64> {
            ((a - t) * (b - t) < 0.0 || (b == t && a != t))
                .then(|| (i - 1) as f64 + (t - a) / (b - a))
        };
        if let Some(f) = cross(0.1) {
            if b > a {
                last_low = Some(f);
            } else if side == Some(true) {
                if let Some(h) = last_high {
                    wet.push(f - h);
                }
                side = Some(false);
            } else {
                side = Some(false);
            }
        }
        if let Some(f) = cross(0.9) {
            if b < a {
                last_high = Some(f);
            } else if side == Some(false) {
                if let Some(l) = last_low {
                    dry.push(f - l);
                }
                side = Some(true);
            } else {
                side = Some(true);
            }
        }
        if side.is_none() {
            if b <= 0.1 {
                side = Some(false);
            } else if b >= 0.9 {
                side = Some(true);
            }
        }
    }
    let median = |mut v: Vec<f64>| -> Option<f64> {
        if v.is_empty() {
            return None;
        }
        v.sort_by(f64::total_cmp);
        Some(v[v.len() / 2])
    };
    let n = dry.len() + wet.len();
    (median(dry), median(wet), n)
}

/// The printed table.
pub fn table(r: &TipcheckReport) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "tips checked over {:.3} s to {:.3} s of the capture",
        r.segment_s.0, r.segment_s.1
    );
    let _ = writeln!(
        s,
        "{:<10} {:<8} {:>3} {:>10} {:>10} {:>8} {:>9} {:>9} {:>8} {:>8} {:>6}  flags",
        "probe",
        "tip",
        "ch",
        "air",
        "water",
        "swing",
        "air sd",
        "water sd",
        "dry ms",
        "wet ms",
        "ifaces"
    );
    let num = |v: Option<f64>, p: usize| v.map_or("-".to_string(), |v| format!("{v:.p$}"));
    for t in &r.tips {
        let _ = writeln!(
            s,
            "{:<10} {:<8} {:>3} {:>10} {:>10} {:>8} {:>9} {:>9} {:>8} {:>8} {:>6}  {}",
            t.probe,
            if t.trailing { "trailing" } else { "leading" },
            t.channel,
            num(t.levels.map(|l| l.0), 0),
            num(t.levels.map(|l| l.1), 0),
            num(t.swing, 0),
            num(t.noise.map(|n| n.0), 1),
            num(t.noise.map(|n| n.1), 1),
            num(t.drying_s.map(|x| x * 1e3), 3),
            num(t.wetting_s.map(|x| x * 1e3), 3),
            t.interfaces,
            if t.flags.is_empty() {
                "-".to_string()
            } else {
                t.flags.join("|")
            }
        );
    }
    s
}

/// `text` (a layout) with each learnt tip's levels written as its own pair, rounded to
/// whole file units for integer files. Comments, blank lines and the order of the other
/// keys stay; a probe's shared pair is replaced by its tips' own pairs at its place.
pub fn write_levels(text: &str, tips: &[TipCheck]) -> Result<String, String> {
    use toml_edit::{value, DocumentMut, Item};
    let mut doc: DocumentMut = text.parse().map_err(|e| format!("{e}"))?;
    let probes = doc
        .get_mut("probe")
        .and_then(Item::as_array_of_tables_mut)
        .ok_or("no [[probe]] tables")?;
    for (i, table) in probes.iter_mut().enumerate() {
        let mine: Vec<&TipCheck> = tips
            .iter()
            .filter(|t| t.probe_index == i && t.levels.is_some())
            .collect();
        if mine.is_empty() {
            continue;
        }
        let shared = table.contains_key("air_level") || table.contains_key("water_level");
        let mut pairs: Vec<(String, f64)> = Vec::new();
        for t in &mine {
            let Some((air, water)) = t.levels else {
                continue;
            };
            let tip = if t.trailing { "trailing" } else { "leading" };
            pairs.push((format!("{tip}_air_level"), air));
            pairs.push((format!("{tip}_water_level"), water));
        }
        let as_value = |v: f64| {
            if v.fract() == 0.0 || v.abs() >= 1.0 {
                value(v.round() as i64)
            } else {
                value((v * 1e6).round() / 1e6)
            }
        };
        if shared {
            // Rebuild the table in order, the tips' pairs where the shared pair stood.
            let old: Vec<(String, Item)> = table
                .iter()
                .map(|(k, v)| (k.to_string(), v.clone()))
                .collect();
            let key_decor = table
                .key("air_level")
                .map(|k| k.leaf_decor().clone())
                .unwrap_or_default();
            // The comments on the shared pair's values go to the first tip's pair.
            let value_decor = |k: &str| {
                table
                    .get(k)
                    .and_then(Item::as_value)
                    .map(|v| v.decor().clone())
            };
            let (air_decor, water_decor) = (value_decor("air_level"), value_decor("water_level"));
            table.clear();
            let mut placed = false;
            for (k, v) in old {
                if k == "air_level" || k == "water_level" {
                    if !placed {
                        for (j, (pk, pv)) in pairs.iter().enumerate() {
                            let mut item = as_value(*pv);
                            let decor = match j {
                                0 => air_decor.as_ref(),
                                1 => water_decor.as_ref(),
                                _ => None,
                            };
                            if let (Some(d), Some(v)) = (decor, item.as_value_mut()) {
                                *v.decor_mut() = d.clone();
                            }
                            table.insert(pk, item);
                        }
                        if let Some(mut key) = table.key_mut(&pairs[0].0) {
                            *key.leaf_decor_mut() = key_decor.clone();
                        }
                        placed = true;
                    }
                    continue;
                }
                if pairs.iter().any(|(pk, _)| *pk == k) {
                    continue;
                }
                table.insert(&k, v);
            }
        } else {
            for (k, v) in &pairs {
                match table.get_mut(k).and_then(Item::as_value_mut) {
                    // Keep the existing key's place and its comment.
                    Some(old) => {
                        let decor = old.decor().clone();
                        *old = as_value(*v).into_value().map_err(|_| "bad value")?;
                        *old.decor_mut() = decor;
                    }
                    None => {
                        table.insert(k, as_value(*v));
                    }
                }
            }
        }
    }
    Ok(doc.to_string())
}
