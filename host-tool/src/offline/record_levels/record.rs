//! The levels of every learning tip of a record, per record and per drift segment: the
//! swing borrowed by one-phase tips, the levels applied to a chain, the warnings.

use super::histogram::{mode_level, spread_around, NOISY_FACTOR};
use super::outcome::{TipLevels, TipOutcome};
use crate::shared::rig::MAX_PROBES;
use frothline_core::levels::{inside_one_phase, Levels};
use frothline_core::{ChainConfig, LevelSource, Polarity};

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

impl RecordLevels {
    /// The levels tip `i` (index into `tips`) uses in segment `k`: the segment's own, else
    /// the record's. A segment's split inside one phase of the record's levels (noise or
    /// hum of a tip in one phase, [`inside_one_phase`]) is not the segment's levels.
    pub fn levels_in_segment(&self, i: usize, k: usize) -> Option<Levels> {
        let record = self.tips.get(i).and_then(|t| t.outcome.levels());
        let own = self
            .segments
            .get(i)
            .and_then(|s| s.get(k).copied().flatten());
        match (own, record) {
            (Some(s), Some(r)) if inside_one_phase(r, s.air, s.water) => Some(r),
            (Some(s), _) => Some(s),
            (None, r) => r,
        }
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
    pub(super) fn borrow_swing(&mut self, hists: &[Vec<u32>], polarities: &[Polarity]) {
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
