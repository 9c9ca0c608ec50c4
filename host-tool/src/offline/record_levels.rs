//! Levels learnt from the whole record before a replay processes it (the offline rule).
//!
//! A device learns a tip's air and water levels causally: its first learning period runs
//! before any level is known, and a tip that sits in one phase (a dry bed before a surge)
//! learns nothing until both phases have passed it. A replay has the whole record, so it
//! first counts every tip's sample values (every [`LEARN_STRIDE`]-th frame, the device's
//! stride) into a full 16-bit histogram, learns the levels from it by the device's own rule
//! ([`LevelLearner`]: Otsu's split of a 64-bin histogram over the observed range, the mode
//! of each class refined by its neighbours, a separability check), and then processes the
//! record from its first frame with those levels, fixed. For a steady flow that is a
//! learning span of the whole record; for a surge the span after the front is where both
//! phases occur, and the one-phase span before it only adds to one class.
//!
//! A steady replay also learns every tip's levels in each [`DRIFT_SEGMENT_S`] segment
//! (from histograms of 64-count bins kept in the same pass) and applies them segment by
//! segment ([`crate::offline::replay::LevelSchedule`]), so the levels follow a slow drift.
//!
//! The class-size rule of a learning period (each phase at least 0.5 % of the samples) is
//! replaced by an absolute one ([`MIN_CLASS_SAMPLES`]), so a tip in air above the flow that
//! meets water only now and then still learns its water level when its histogram is
//! clearly two-level.
//!
//! A tip whose record shows one phase only (a tip above the flow, in air but for a few
//! droplets; a tip in still water below it) measures the level of that phase itself; its
//! other level is that one moved by the median swing of the tips that learnt both levels
//! (the conditioners of one rig give similar swings; a few per cent off moves a 50 %
//! threshold by a few per cent of the swing, inside the hysteresis band). It is named on
//! stderr and its windows say `levels_from = record_one_phase`. Only when no tip of the
//! record learnt both levels does a tip keep the device's causal rule (and its windows the
//! `levels_not_learnt` flag), again with a message naming probe and tip.

use crate::offline::level_drift;
use crate::shared::capture::Capture;
use crate::shared::error::HostError;
use crate::shared::rig::MAX_PROBES;
use frothline_core::levels::{Learnt, LevelLearner, Levels, LEARN_STRIDE};
use frothline_core::{ChainConfig, LevelSource, Polarity, TipConfig};
use std::path::Path;

/// Smallest class (strided samples) the record rule accepts: 256 strided samples are 1024
/// frames, 26 ms at 40 kHz. A threshold that low is safe because Otsu's separability must
/// still reach 0.75, which a single noisy mode never does (common practice, no source).
pub const MIN_CLASS_SAMPLES: u64 = 256;

/// Most strided samples of one tip fed to the learner: the learner's per-bin sums are
/// 32-bit, so a longer record's counts are scaled down (the shape is kept).
const MAX_FED: u64 = 1 << 22;

/// How a replay finds the levels of tips without fixed levels.
#[derive(clap::ValueEnum, Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum LevelRule {
    /// Learn each tip's levels from the whole record first, then process it from its
    /// first frame with them (nothing is lost to a learning period).
    #[default]
    Record,
    /// The device's causal rule: learn during the record, every learning period; the
    /// first period runs without levels. Reproduces a device's records exactly.
    Device,
}

/// What the record said about one tip's levels.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum TipOutcome {
    /// Two clear levels, counts, with the noise (standard deviation, counts) of the
    /// samples within a quarter of the swing of each level.
    Learnt {
        /// The levels.
        levels: Levels,
        /// Noise of the air class, counts.
        air_noise: f32,
        /// Noise of the water class, counts.
        water_noise: f32,
    },
    /// The tip's samples span less than the smallest accepted swing: it never left one
    /// phase (`min`..=`max`, counts).
    OnePhase {
        /// Smallest sample, counts.
        min: i16,
        /// Largest sample, counts.
        max: i16,
    },
    /// The samples span more than the swing but show no clear two-level histogram (a swing
    /// buried in noise, or one phase too rare to tell).
    Unclear {
        /// Smallest sample, counts.
        min: i16,
        /// Largest sample, counts.
        max: i16,
    },
    /// The tip shows one phase only (or the other too rarely to learn it): the level of
    /// the phase it shows is its own (`own`: the mean around its histogram's mode), the
    /// other is that level moved by the median swing of the tips of the record that did
    /// learn both levels.
    Borrowed {
        /// The levels: one measured, one borrowed.
        levels: Levels,
        /// True when the measured phase is air.
        in_air: bool,
        /// The swing borrowed, counts.
        swing: f32,
        /// Tips the swing's median came from.
        from_tips: usize,
        /// Smallest sample, counts.
        min: i16,
        /// Largest sample, counts.
        max: i16,
    },
    /// The record holds no sample of this tip.
    Empty,
}

impl TipOutcome {
    /// The levels to use, if any.
    pub fn levels(&self) -> Option<Levels> {
        match *self {
            TipOutcome::Learnt { levels, .. } | TipOutcome::Borrowed { levels, .. } => Some(levels),
            _ => None,
        }
    }

    /// The name of the rule that gave the levels (windows.csv `levels_from`).
    pub fn source_name(&self) -> Option<&'static str> {
        match self {
            TipOutcome::Learnt { .. } => Some("record"),
            TipOutcome::Borrowed { .. } => Some("record_one_phase"),
            _ => None,
        }
    }
}

/// One tip's result.
#[derive(Clone, Debug, PartialEq)]
pub struct TipLevels {
    /// Probe index in the layout.
    pub probe: usize,
    /// Trailing tip (false: leading).
    pub trailing: bool,
    /// WAV channel.
    pub channel: u8,
    /// What was learnt.
    pub outcome: TipOutcome,
}

impl TipLevels {
    /// "leading" or "trailing".
    pub fn tip_name(&self) -> &'static str {
        if self.trailing {
            "trailing"
        } else {
            "leading"
        }
    }
}

/// The levels of every learning tip of a record.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RecordLevels {
    /// One entry per tip that had no fixed levels.
    pub tips: Vec<TipLevels>,
    /// Drift tracking: each tip's levels in every [`DRIFT_SEGMENT_S`] segment of the
    /// record (same order as `tips`; `None` where the segment did not show both phases
    /// clearly, and the record's levels hold there). Empty when not tracked.
    pub segments: Vec<Vec<Option<Levels>>>,
    /// Frames per segment (0 when not tracked).
    pub segment_frames: u64,
    /// Per tip and segment, the level of a segment that shows one phase only
    /// ([`crate::offline::level_drift::one_phase_level`]; a tip dry before a front), for
    /// the transient replay's drift check. Empty when not tracked.
    pub segment_one_phase: Vec<Vec<Option<f32>>>,
}

/// Length of the segments in which a steady replay re-learns every tip's levels, to
/// follow a slow drift of the conditioners, s. A segment's levels apply to its frames; a
/// drift is thus followed to within what it moves in one segment (common practice, no
/// source: conditioners drift over minutes, a second holds thousands of interfaces).
pub const DRIFT_SEGMENT_S: f64 = 1.0;

/// Width of the bins of the per-segment histograms, counts.
const SEGMENT_BIN: usize = 64;

impl RecordLevels {
    /// The levels tip `i` (index into `tips`) uses in segment `k`: the segment's own, else
    /// the record's.
    pub fn levels_in_segment(&self, i: usize, k: usize) -> Option<Levels> {
        self.segments
            .get(i)
            .and_then(|s| s.get(k).copied().flatten())
            .or_else(|| self.tips.get(i).and_then(|t| t.outcome.levels()))
    }

    /// Number of segments tracked.
    pub fn segment_count(&self) -> usize {
        self.segments.iter().map(Vec::len).max().unwrap_or(0)
    }
}

impl RecordLevels {
    /// The levels the record gave the tip on `channel`, if any.
    pub fn levels_of(&self, channel: u8) -> Option<Levels> {
        self.tip(channel).and_then(|t| t.outcome.levels())
    }

    /// The result of the tip on `channel`.
    pub fn tip(&self, channel: u8) -> Option<&TipLevels> {
        self.tips.iter().find(|t| t.channel == channel)
    }

    /// Give each tip that showed one phase only the other level from the median swing of
    /// the tips that learnt both (their levels known, a tip's one-phase level measured):
    /// the phase it shows is the one whose median level of the learnt tips is nearer.
    /// With no tip that learnt both, nothing changes.
    fn borrow_swing(&mut self, hists: &[Vec<u32>], polarities: &[Polarity]) {
        let learnt: Vec<Levels> = self
            .tips
            .iter()
            .filter_map(|t| match t.outcome {
                TipOutcome::Learnt { levels, .. } => Some(levels),
                _ => None,
            })
            .collect();
        if learnt.is_empty() {
            return;
        }
        let median = |mut v: Vec<f32>| -> f32 {
            v.sort_by(f32::total_cmp);
            let n = v.len();
            if n % 2 == 1 {
                v[n / 2]
            } else {
                0.5 * (v[n / 2 - 1] + v[n / 2])
            }
        };
        let noises: Vec<f32> = self
            .tips
            .iter()
            .filter_map(|t| match t.outcome {
                TipOutcome::Learnt {
                    air_noise,
                    water_noise,
                    ..
                } => Some(air_noise.max(water_noise)),
                _ => None,
            })
            .filter(|n| n.is_finite())
            .collect();
        let noise = if noises.is_empty() {
            f32::INFINITY
        } else {
            median(noises)
        };
        let swing = median(learnt.iter().map(|l| (l.air - l.water).abs()).collect());
        let air_med = median(learnt.iter().map(|l| l.air).collect());
        let water_med = median(learnt.iter().map(|l| l.water).collect());
        for ((t, h), &pol) in self.tips.iter_mut().zip(hists).zip(polarities) {
            let (min, max) = match t.outcome {
                TipOutcome::OnePhase { min, max } | TipOutcome::Unclear { min, max } => (min, max),
                _ => continue,
            };
            let Some(own) = mode_level(h) else { continue };
            // A tip much noisier around its mode than the others is not a clean one-phase
            // tip: its swing may be buried in the noise. It stays unlearnt.
            if spread_around(h, own, 0.5 * swing) > NOISY_FACTOR * noise {
                continue;
            }
            let in_air = (own - air_med).abs() < (own - water_med).abs();
            // Air reads `swing` above water when air is high, below it otherwise.
            let up = if pol == Polarity::AirHigh { 1.0 } else { -1.0 };
            let other = if in_air {
                own - up * swing
            } else {
                own + up * swing
            };
            // A level the ADC cannot give: the tip is not in the phase it seemed to be.
            if !(i16::MIN as f32..=i16::MAX as f32).contains(&other) {
                continue;
            }
            let levels = if in_air {
                Levels {
                    air: own,
                    water: other,
                }
            } else {
                Levels {
                    air: other,
                    water: own,
                }
            };
            t.outcome = TipOutcome::Borrowed {
                levels,
                in_air,
                swing,
                from_tips: learnt.len(),
                min,
                max,
            };
        }
    }

    /// Give every tip of `cfg` that learns its levels (and whose record gave them) the
    /// record's levels, fixed. Tips without a result keep the causal rule.
    pub fn apply(&self, cfg: &mut ChainConfig<MAX_PROBES>) {
        for p in cfg.probes.iter_mut() {
            for tip in core::iter::once(&mut p.leading).chain(p.trailing.as_mut()) {
                if tip.levels == LevelSource::Learnt {
                    if let Some(l) = self.levels_of(tip.channel) {
                        tip.levels = fixed(l);
                    }
                }
            }
        }
    }

    /// One line per tip that did not learn, naming probe and tip, for the user.
    pub fn warnings(&self, names: &[String], min_swing: u16) -> Vec<String> {
        self.tips
            .iter()
            .filter_map(|t| {
                let name = names.get(t.probe).map_or("?", |s| s.as_str());
                let who = format!(
                    "probe `{name}`, {} tip (channel {})",
                    t.tip_name(),
                    t.channel
                );
                match t.outcome {
                    TipOutcome::Learnt { .. } => None,
                    TipOutcome::Borrowed {
                        levels,
                        in_air,
                        swing,
                        from_tips,
                        min,
                        max,
                    } => {
                        let (seen, other, own, lent) = if in_air {
                            ("air", "water", levels.air, levels.water)
                        } else {
                            ("water", "air", levels.water, levels.air)
                        };
                        Some(format!(
                            "{who}: shows {seen} only, or {other} too rarely to learn it \
                             (samples {min}..={max}): its {seen} level {own:.0} is its own, \
                             its {other} level {lent:.0} is that moved by the median swing \
                             {swing:.0} of the {from_tips} tips that learnt both; its windows \
                             say levels_from = record_one_phase (check the tip if it should \
                             have met {other})"
                        ))
                    }
                    TipOutcome::OnePhase { min, max } => Some(format!(
                        "{who}: never leaves one phase (samples {min}..={max}, a span below \
                         min_swing = {min_swing} counts): levels not learnt, its windows \
                         are flagged levels_not_learnt"
                    )),
                    TipOutcome::Unclear { min, max } => Some(format!(
                        "{who}: no clear air and water levels (samples {min}..={max}: the \
                         swing is buried in noise, or one phase is too rare): levels not \
                         learnt, its windows are flagged levels_not_learnt"
                    )),
                    TipOutcome::Empty => Some(format!("{who}: no sample in the record")),
                }
            })
            .collect()
    }
}

/// The core's fixed level source for learnt levels (rounded to counts).
fn fixed(l: Levels) -> LevelSource {
    let r = |v: f32| v.round().clamp(i16::MIN as f32, i16::MAX as f32) as i16;
    LevelSource::Fixed {
        air: r(l.air),
        water: r(l.water),
    }
}

/// Frames read per block by the learning pass.
const BLOCK_FRAMES: usize = 1 << 15;

/// A tip to learn: its probe's index in the layout, trailing or not, its configuration.
pub type LearningTip = (usize, bool, TipConfig);

/// The tips of `cfg` that learn their levels; `layout_index` maps the chain's probe index
/// to the layout's (a station chain holds a subset of the layout's probes).
pub fn learning_tips(
    cfg: &ChainConfig<MAX_PROBES>,
    layout_index: impl Fn(usize) -> usize,
) -> Vec<LearningTip> {
    let mut out = Vec::new();
    for (i, p) in cfg.probes.iter().enumerate() {
        for (trailing, tip) in [(false, Some(p.leading)), (true, p.trailing)] {
            if let Some(t) = tip.filter(|t| t.levels == LevelSource::Learnt) {
                out.push((layout_index(i), trailing, t));
            }
        }
    }
    out
}

/// Learn the levels of `tips` from the capture at `path` (opened afresh: the replay reads
/// it again after), with the smallest accepted swing `min_swing` (counts).
pub fn learn(path: &Path, tips: &[LearningTip], min_swing: u16) -> Result<RecordLevels, HostError> {
    learn_with(path, tips, min_swing, false)
}

/// [`learn`], and with `track_drift` the levels of every [`DRIFT_SEGMENT_S`] segment too.
pub fn learn_with(
    path: &Path,
    tips: &[LearningTip],
    min_swing: u16,
    track_drift: bool,
) -> Result<RecordLevels, HostError> {
    if tips.is_empty() {
        return Ok(RecordLevels::default());
    }
    let mut cap = Capture::open(path)?;
    // A capture that stopped abruptly is learnt from what it holds; the processing pass
    // that follows reports the cut.
    cap.end_at_cut();
    let channels = cap.channels().max(1);
    let chans: Vec<usize> = tips.iter().map(|t| t.2.channel as usize).collect();
    let mut hist = vec![vec![0u32; 1 << 16]; chans.len()];
    let segment_frames = if track_drift {
        ((DRIFT_SEGMENT_S * cap.sample_rate() as f64).round() as u64).max(LEARN_STRIDE)
    } else {
        0
    };
    let bins = (1 << 16) / SEGMENT_BIN;
    // Per tip, per segment: a histogram of `SEGMENT_BIN`-count bins.
    let mut seg_hist: Vec<Vec<Vec<u32>>> = vec![Vec::new(); chans.len()];
    let mut buf = Vec::with_capacity(BLOCK_FRAMES * channels);
    let mut at = 0u64;
    loop {
        let n = cap.read_frames(&mut buf, BLOCK_FRAMES)?;
        if n == 0 {
            break;
        }
        let skip = ((LEARN_STRIDE - at % LEARN_STRIDE) % LEARN_STRIDE) as usize;
        // Cut the block at segment starts, so each piece belongs to one segment.
        let mut first = skip;
        while first < n {
            let f0 = at + first as u64;
            let (end, seg) = match f0.checked_div(segment_frames) {
                Some(k) => (
                    (((k + 1) * segment_frames - at) as usize).min(n),
                    Some(k as usize),
                ),
                None => (n, None),
            };
            if let Some(k) = seg {
                for sh in seg_hist.iter_mut() {
                    while sh.len() <= k {
                        sh.push(vec![0u32; bins]);
                    }
                }
            }
            let piece = &buf[first * channels..end * channels];
            for frame in piece.chunks_exact(channels).step_by(LEARN_STRIDE as usize) {
                for ((h, sh), &c) in hist.iter_mut().zip(seg_hist.iter_mut()).zip(&chans) {
                    if let Some(&x) = frame.get(c) {
                        let b = (x as u16 ^ 0x8000) as usize;
                        h[b] = h[b].saturating_add(1);
                        if let Some(cell) = seg
                            .and_then(|k| sh.get_mut(k))
                            .map(|v| &mut v[b / SEGMENT_BIN])
                        {
                            *cell = cell.saturating_add(1);
                        }
                    }
                }
            }
            // The next piece starts on the stride grid.
            let next = end.max(first + 1);
            first =
                next + ((LEARN_STRIDE - (at + next as u64) % LEARN_STRIDE) % LEARN_STRIDE) as usize;
        }
        at += n as u64;
    }
    let out = tips
        .iter()
        .zip(&hist)
        .map(|(&(probe, trailing, tip), h)| TipLevels {
            probe,
            trailing,
            channel: tip.channel,
            outcome: from_histogram(h, tip.polarity, min_swing),
        })
        .collect();
    let segments = seg_hist
        .iter()
        .zip(tips)
        .map(|(sh, t)| {
            sh.iter()
                .map(|coarse| segment_levels(coarse, t.2.polarity, min_swing))
                .collect()
        })
        .collect();
    let mut levels = RecordLevels {
        tips: out,
        segments,
        segment_frames,
        segment_one_phase: Vec::new(),
    };
    let polarities: Vec<Polarity> = tips.iter().map(|t| t.2.polarity).collect();
    levels.borrow_swing(&hist, &polarities);
    levels.segment_one_phase = levels
        .tips
        .iter()
        .zip(&seg_hist)
        .map(|(t, sh)| {
            let swing = t.outcome.levels().map(|l| (l.air - l.water).abs());
            sh.iter()
                .map(|coarse| {
                    swing.and_then(|w| level_drift::one_phase_level(coarse, SEGMENT_BIN, w))
                })
                .collect()
        })
        .collect();
    Ok(levels)
}

/// What [`modes`] found.
enum Modes {
    Two { low: f32, high: f32 },
    OnePhase { min: i16, max: i16 },
    Unclear { min: i16, max: i16 },
    Empty,
}

/// The two levels of counted values (`(value, count)` in increasing value, counts > 0) by
/// the device's rule ([`LevelLearner`]), with the record rule's class size.
fn modes(points: impl Iterator<Item = (i16, u32)> + Clone, min_swing: u16) -> Modes {
    let total: u64 = points.clone().map(|(_, c)| c as u64).sum();
    let (Some((min, _)), Some((max, _))) = (points.clone().next(), points.clone().last()) else {
        return Modes::Empty;
    };
    if (max as i32 - min as i32) < min_swing as i32 {
        return Modes::OnePhase { min, max };
    }
    // Scale long records down so the learner's 32-bit sums cannot saturate.
    let scale = |c: u32| -> u32 {
        if total <= MAX_FED {
            c
        } else {
            ((c as u64 * MAX_FED).div_ceil(total)) as u32
        }
    };
    let mut learner = LevelLearner::new();
    let feed = |l: &mut LevelLearner| {
        for (x, c) in points.clone() {
            l.observe_repeated(x, scale(c));
        }
    };
    feed(&mut learner);
    learner.range_from_seen();
    feed(&mut learner);
    let fed = total.min(MAX_FED);
    let min_class = MIN_CLASS_SAMPLES.min((fed / 200).max(2));
    match learner.decide_with_min_class(min_swing, min_class) {
        Learnt::Modes { low, high } => Modes::Two { low, high },
        Learnt::Unclear => Modes::Unclear { min, max },
    }
}

/// The levels of one drift segment from its coarse histogram (`SEGMENT_BIN`-count bins,
/// each count taken at its bin's centre), or `None` when it shows no two clear levels.
fn segment_levels(coarse: &[u32], polarity: Polarity, min_swing: u16) -> Option<Levels> {
    let points = coarse
        .iter()
        .enumerate()
        .filter(|&(_, &c)| c > 0)
        .map(|(b, &c)| (value(b * SEGMENT_BIN + SEGMENT_BIN / 2), c));
    match modes(points, min_swing) {
        Modes::Two { low, high } => Some(match polarity {
            Polarity::AirHigh => Levels {
                air: high,
                water: low,
            },
            Polarity::AirLow => Levels {
                air: low,
                water: high,
            },
        }),
        _ => None,
    }
}

/// The value of histogram bin `b` (bins are i16 values offset by 0x8000).
fn value(b: usize) -> i16 {
    (b as u16 ^ 0x8000) as i16
}

/// Learn one tip's levels from the counts of its values (`hist[x ^ 0x8000]`).
pub fn from_histogram(hist: &[u32], polarity: Polarity, min_swing: u16) -> TipOutcome {
    let points = hist
        .iter()
        .enumerate()
        .filter(|&(_, &c)| c > 0)
        .map(|(b, &c)| (value(b), c));
    let (low, high) = match modes(points, min_swing) {
        Modes::Two { low, high } => (low, high),
        Modes::OnePhase { min, max } => return TipOutcome::OnePhase { min, max },
        Modes::Unclear { min, max } => return TipOutcome::Unclear { min, max },
        Modes::Empty => return TipOutcome::Empty,
    };
    let (levels, air_low) = match polarity {
        Polarity::AirHigh => (
            Levels {
                air: high,
                water: low,
            },
            false,
        ),
        Polarity::AirLow => (
            Levels {
                air: low,
                water: high,
            },
            true,
        ),
    };
    // The noise of each phase: the spread of the samples within a quarter of the swing of
    // its level (the interfaces' ramps between the levels stay out).
    let quarter = 0.25 * (high - low);
    let (lo_sd, hi_sd) = (
        spread_around(hist, low, quarter),
        spread_around(hist, high, quarter),
    );
    let (air_noise, water_noise) = if air_low {
        (lo_sd, hi_sd)
    } else {
        (hi_sd, lo_sd)
    };
    TipOutcome::Learnt {
        levels,
        air_noise,
        water_noise,
    }
}

/// A one-phase tip whose noise around its mode exceeds this many times the median noise
/// of the tips that learnt both levels is left unlearnt (common practice, no source).
const NOISY_FACTOR: f32 = 1.5;

/// The standard deviation (counts) of the values within `half` counts of `centre`,
/// estimated robustly as 1.4826 times their median absolute deviation from `centre` (the
/// normal distribution's ratio; Hampel 1974, "The influence curve and its role in robust
/// estimation"), so the few samples on interface ramps do not inflate it.
fn spread_around(hist: &[u32], centre: f32, half: f32) -> f32 {
    let c = centre as f64;
    let lo = ((c - half as f64).floor() + 32768.0).clamp(0.0, 65535.0) as usize;
    let hi = ((c + half as f64).ceil() + 32768.0).clamp(0.0, 65535.0) as usize;
    // Counts by distance from the centre, in whole counts.
    let mut by_dist: Vec<(u64, u64)> = Vec::new();
    let mut n = 0u64;
    for (b, &k) in hist.iter().enumerate().take(hi + 1).skip(lo) {
        if k == 0 {
            continue;
        }
        let d = (value(b) as f64 - c).abs().round() as u64;
        by_dist.push((d, k as u64));
        n += k as u64;
    }
    if n < 2 {
        return 0.0;
    }
    by_dist.sort_unstable();
    let mut seen = 0u64;
    for (d, k) in by_dist {
        seen += k;
        if 2 * seen >= n {
            return (1.4826 * d as f64) as f32;
        }
    }
    0.0
}

/// Width of the bins in which a one-phase tip's mode is first looked for, counts.
const MODE_BIN: usize = 64;
/// Half width of the window whose mean refines a one-phase tip's mode, counts: wide
/// against usual noise, narrow against the swing.
const MODE_HALF_WIDTH: f64 = 400.0;

/// The level of a one-phase histogram: starting from the most populated
/// [`MODE_BIN`]-count bin, the mean of the values within [`MODE_HALF_WIDTH`] counts of the
/// estimate, recentred until it settles (a mean shift; for a symmetric peak it converges on
/// the peak), or `None` when empty.
fn mode_level(hist: &[u32]) -> Option<f32> {
    let coarse: Vec<u64> = hist
        .chunks(MODE_BIN)
        .map(|c| c.iter().map(|&n| n as u64).sum())
        .collect();
    let (m, _) = coarse
        .iter()
        .enumerate()
        .max_by_key(|&(i, &n)| (n, core::cmp::Reverse(i)))
        .filter(|&(_, &n)| n > 0)?;
    let mut centre = (m * MODE_BIN + MODE_BIN / 2) as f64;
    for _ in 0..16 {
        let lo = (centre - MODE_HALF_WIDTH).max(0.0) as usize;
        let hi = ((centre + MODE_HALF_WIDTH) as usize + 1).min(hist.len());
        let (mut n, mut s) = (0f64, 0f64);
        for (b, &c) in hist.iter().enumerate().take(hi).skip(lo) {
            n += c as f64;
            s += c as f64 * b as f64;
        }
        if n == 0.0 {
            break;
        }
        let next = s / n;
        let settled = (next - centre).abs() < 0.01;
        centre = next;
        if settled {
            break;
        }
    }
    Some((centre - 32768.0) as f32)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Two Gaussian levels: the learnt levels are the means within a small fraction of the
    /// noise, and the class noise is the Gaussian's sigma (analytic case: a mixture of two
    /// well-separated normal distributions).
    #[test]
    fn two_gaussian_levels() {
        use rand::{rngs::StdRng, Rng, SeedableRng};
        use rand_distr::{Distribution, Normal};
        let mut rng = StdRng::seed_from_u64(5);
        let mut hist = vec![0u32; 1 << 16];
        let (water, air, sigma) = (3120.0f64, 25480.0f64, 150.0f64);
        for _ in 0..200_000 {
            let base = if rng.random::<f64>() < 0.3 {
                air
            } else {
                water
            };
            let x = Normal::new(base, sigma).unwrap().sample(&mut rng).round() as i16;
            hist[(x as u16 ^ 0x8000) as usize] += 1;
        }
        let TipOutcome::Learnt {
            levels,
            air_noise,
            water_noise,
        } = from_histogram(&hist, Polarity::AirHigh, 64)
        else {
            panic!("not learnt");
        };
        assert!((levels.air as f64 - air).abs() < 20.0, "{levels:?}");
        assert!((levels.water as f64 - water).abs() < 20.0, "{levels:?}");
        assert!((air_noise as f64 / sigma - 1.0).abs() < 0.05, "{air_noise}");
        assert!(
            (water_noise as f64 / sigma - 1.0).abs() < 0.05,
            "{water_noise}"
        );
        // Air low: the same levels, swapped.
        let TipOutcome::Learnt { levels: l2, .. } = from_histogram(&hist, Polarity::AirLow, 64)
        else {
            panic!("not learnt");
        };
        assert_eq!((l2.air, l2.water), (levels.water, levels.air));
    }

    fn gaussian_hist(parts: &[(f64, f64, usize)], seed: u64) -> Vec<u32> {
        use rand::{rngs::StdRng, SeedableRng};
        use rand_distr::{Distribution, Normal};
        let mut rng = StdRng::seed_from_u64(seed);
        let mut hist = vec![0u32; 1 << 16];
        for &(mean, sigma, n) in parts {
            let d = Normal::new(mean, sigma).unwrap();
            for _ in 0..n {
                let x = d.sample(&mut rng).round() as i16;
                hist[(x as u16 ^ 0x8000) as usize] += 1;
            }
        }
        hist
    }

    /// A tip in air but for a few droplets keeps its own air level and borrows the median
    /// swing of the tips that learnt both (analytic case: its water level is its air level
    /// minus that swing); a tip noisier than the others by far is not given levels.
    #[test]
    fn one_phase_tip_borrows_the_median_swing() {
        let polarities = [Polarity::AirHigh; 5];
        let mut hists = vec![
            gaussian_hist(&[(3000.0, 150.0, 30_000), (26000.0, 150.0, 30_000)], 1),
            gaussian_hist(&[(3400.0, 150.0, 30_000), (25600.0, 150.0, 30_000)], 2),
            gaussian_hist(&[(2800.0, 150.0, 30_000), (26300.0, 150.0, 30_000)], 3),
            // Air only, with 10 strided samples of water: too rare to learn.
            gaussian_hist(&[(25800.0, 150.0, 50_000), (3000.0, 150.0, 10)], 4),
            // One broad mode, 20 times the others' noise.
            gaussian_hist(&[(15000.0, 3000.0, 50_000)], 5),
        ];
        let mut levels = RecordLevels {
            tips: hists
                .iter()
                .enumerate()
                .map(|(i, h)| TipLevels {
                    probe: i,
                    trailing: false,
                    channel: i as u8,
                    outcome: from_histogram(h, Polarity::AirHigh, 64),
                })
                .collect(),
            ..Default::default()
        };
        assert!(matches!(levels.tips[3].outcome, TipOutcome::Unclear { .. }));
        levels.borrow_swing(&hists, &polarities);
        let TipOutcome::Borrowed {
            levels: l,
            in_air,
            swing,
            from_tips,
            ..
        } = levels.tips[3].outcome
        else {
            panic!("{:?}", levels.tips[3]);
        };
        assert!(in_air);
        assert_eq!(from_tips, 3);
        // Swings 23000, 22200, 23500: the median is 23000.
        assert!((swing - 23000.0).abs() < 30.0, "{swing}");
        assert!((l.air - 25800.0).abs() < 10.0, "{l:?}");
        assert!((l.water - (l.air - swing)).abs() < 1e-3, "{l:?}");
        assert!(matches!(levels.tips[4].outcome, TipOutcome::Unclear { .. }));
        let names: Vec<String> = (0..5).map(|i| format!("P{i}")).collect();
        let w = levels.warnings(&names, 64);
        assert_eq!(w.len(), 2, "{w:?}");
        assert!(
            w[0].contains("probe `P3`, leading tip (channel 3): shows air only"),
            "{}",
            w[0]
        );
        assert!(
            w[1].contains("probe `P4`") && w[1].contains("buried in noise"),
            "{}",
            w[1]
        );
        hists.clear();
    }

    /// One phase only (a dry tip): never learnt, and told apart from a buried swing.
    #[test]
    fn one_phase_and_unclear() {
        let mut hist = vec![0u32; 1 << 16];
        for x in 25000i16..25040 {
            hist[(x as u16 ^ 0x8000) as usize] = 500;
        }
        assert_eq!(
            from_histogram(&hist, Polarity::AirHigh, 64),
            TipOutcome::OnePhase {
                min: 25000,
                max: 25039
            }
        );
        // A flat spread of 4000 counts: no two levels in it.
        let mut flat = vec![0u32; 1 << 16];
        for x in 20000i16..24000 {
            flat[(x as u16 ^ 0x8000) as usize] = 50;
        }
        assert!(matches!(
            from_histogram(&flat, Polarity::AirHigh, 64),
            TipOutcome::Unclear { .. }
        ));
        assert_eq!(
            from_histogram(&vec![0u32; 1 << 16], Polarity::AirHigh, 64),
            TipOutcome::Empty
        );
    }
}
