//! Phase detection of one tip: samples -> binary phase -> interface edges.
//!
//! The hot loop is branch-light: with thresholds `enter_air > enter_water` (both in the
//! air-is-high scale) the new phase is `(y > enter_water) & (air | (y > enter_air))`, which
//! is the hysteresis rule without a data-dependent branch. Only an interface (rare next to
//! the sample rate) takes a branch, to report the edge.

use crate::config::{DetectorConfig, LevelSource, TipConfig};
use crate::levels::{Learnt, LevelLearner, Levels, Thresholds};

/// An interface seen by a tip.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Edge {
    /// Absolute index of the first frame in the new phase.
    pub frame: u64,
    /// True for water -> air (a bubble starts), false for air -> water (it ends).
    pub to_air: bool,
}

/// Receives the edges of a tip, in order.
pub trait EdgeSink {
    /// One interface.
    fn edge(&mut self, edge: Edge);
}

impl EdgeSink for () {
    fn edge(&mut self, _: Edge) {}
}

impl<A: EdgeSink, B: EdgeSink> EdgeSink for (A, B) {
    fn edge(&mut self, edge: Edge) {
        self.0.edge(edge);
        self.1.edge(edge);
    }
}

/// Sample counts of one processed run of frames.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct RunCounts {
    /// Frames in air.
    pub air: u32,
    /// Frames at an ADC rail.
    pub rail: u32,
    /// Frames processed without levels (phase held).
    pub unlearnt: u32,
}

/// The phase detector of one tip.
#[derive(Clone, Debug)]
pub struct PhaseDetector {
    channel: usize,
    sign: i32,
    threshold: f32,
    hysteresis: f32,
    rail_low: i16,
    rail_high: i16,
    min_swing: u16,
    learn_period: u64,
    thresholds: Option<Thresholds>,
    levels: Option<Levels>,
    learner: Option<LevelLearner>,
    air: bool,
}

impl PhaseDetector {
    /// A detector for `tip`; `initial_air` is the phase assumed before the first interface.
    pub fn new(tip: &TipConfig, det: &DetectorConfig, initial_air: bool) -> Self {
        let sign = tip.polarity.sign();
        let (levels, learner) = match tip.levels {
            LevelSource::Fixed { air, water } => (
                Some(Levels {
                    air: air as f32,
                    water: water as f32,
                }),
                None,
            ),
            LevelSource::Learnt => (None, Some(LevelLearner::new())),
        };
        let thresholds =
            levels.map(|l| Thresholds::from_levels(l, sign, det.threshold, det.hysteresis));
        PhaseDetector {
            channel: tip.channel as usize,
            sign,
            threshold: det.threshold,
            hysteresis: det.hysteresis,
            rail_low: det.rail_low,
            rail_high: det.rail_high,
            min_swing: det.min_swing,
            learn_period: det.learn_period.max(64) as u64,
            thresholds,
            levels,
            learner,
            air: initial_air,
        }
    }

    /// The current phase (true = air).
    pub fn is_air(&self) -> bool {
        self.air
    }

    /// The levels in use, if known.
    pub fn levels(&self) -> Option<Levels> {
        self.levels
    }

    /// Process whole `frames` (interleaved, `channels` wide) whose first frame has absolute
    /// index `first`, reporting every interface to `sink`.
    pub fn process<S: EdgeSink>(
        &mut self,
        frames: &[i16],
        channels: usize,
        first: u64,
        sink: &mut S,
    ) -> RunCounts {
        let mut counts = RunCounts::default();
        let channels = channels.max(1);
        let mut rest = frames;
        let mut at = first;
        loop {
            let n = rest.len() / channels;
            if n == 0 {
                break;
            }
            let take = match self.learner {
                Some(_) => (self.next_learn_event(at) - at).min(n as u64) as usize,
                None => n,
            };
            let (now, later) = rest.split_at(take * channels);
            if let Some(l) = self.learner.as_mut() {
                l.observe(now, channels, self.channel, at);
            }
            let c = self.run(now, channels, at, sink);
            counts.air += c.air;
            counts.rail += c.rail;
            counts.unlearnt += c.unlearnt;
            at += take as u64;
            rest = later;
            if self.learner.is_some() && at == self.next_learn_event(at - 1) {
                self.learn_event(at);
            }
        }
        counts
    }

    /// The first learning event after frame `at`: the end of the first half-period (range
    /// found), then every period end.
    fn next_learn_event(&self, at: u64) -> u64 {
        let half = self.learn_period / 2;
        if at < half {
            half
        } else {
            (at / self.learn_period + 1) * self.learn_period
        }
    }

    fn learn_event(&mut self, at: u64) {
        let Some(learner) = self.learner.as_mut() else {
            return;
        };
        if at == self.learn_period / 2 {
            learner.range_from_seen();
            return;
        }
        if let Learnt::Modes { low, high } = learner.finish_period(self.min_swing) {
            let levels = if self.sign > 0 {
                Levels {
                    air: high,
                    water: low,
                }
            } else {
                Levels {
                    air: low,
                    water: high,
                }
            };
            self.levels = Some(levels);
            self.thresholds = Some(Thresholds::from_levels(
                levels,
                self.sign,
                self.threshold,
                self.hysteresis,
            ));
        }
    }

    /// The hot loop over one run of frames with fixed thresholds.
    #[inline]
    fn run<S: EdgeSink>(
        &mut self,
        frames: &[i16],
        channels: usize,
        first: u64,
        sink: &mut S,
    ) -> RunCounts {
        let ch = self.channel;
        let (rl, rh) = (self.rail_low, self.rail_high);
        let mut rail = 0u32;
        let n = (frames.len() / channels) as u32;
        let Some(t) = self.thresholds else {
            for f in frames.chunks_exact(channels) {
                let x = f[ch];
                rail += ((x <= rl) | (x >= rh)) as u32;
            }
            let air = if self.air { n } else { 0 };
            return RunCounts {
                air,
                rail,
                unlearnt: n,
            };
        };
        let (lo, hi, sign) = (t.enter_water, t.enter_air, self.sign);
        let mut air = self.air;
        let mut air_n = 0u32;
        for (i, f) in frames.chunks_exact(channels).enumerate() {
            let x = f[ch];
            rail += ((x <= rl) | (x >= rh)) as u32;
            let y = x as i32 * sign;
            let now = (y > lo) & (air | (y > hi));
            air_n += now as u32;
            if now != air {
                sink.edge(Edge {
                    frame: first + i as u64,
                    to_air: now,
                });
            }
            air = now;
        }
        self.air = air;
        RunCounts {
            air: air_n,
            rail,
            unlearnt: 0,
        }
    }
}
