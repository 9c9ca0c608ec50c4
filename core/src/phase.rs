//! Phase detection of one tip: samples -> binary phase -> interface edges.
//!
//! The hot loop is branch-light: with thresholds `enter_air > enter_water` (both in the
//! air-is-high scale) the new phase is `(y > enter_water) & (air | (y > enter_air))`, which
//! is the hysteresis rule. Between two interfaces the phase is known, so the rule is one
//! comparison with the threshold that would end it (`enter_water` in air, `enter_air` in
//! water), and the air frames are counted per interval of air; only an interface (rare next
//! to the sample rate) takes a branch, to report the edge. The loop is monomorphised on the
//! polarity (the thresholds are mapped back to counts, so no multiplication per sample) and
//! walks the tip's channel by index (one bounds check per sample, no iterator state).

use crate::levels::{
    inside_one_phase, tracking_stride, Learnt, LevelLearner, Levels, Thresholds, LEARN_STRIDE,
};
use crate::probe_config::{DetectorConfig, LevelSource, TipConfig};
use core::num::NonZeroUsize;
use scan::run_loop;

mod scan;

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

/// Parameters of one detector as a lane of [`run_lanes`].
#[derive(Clone, Copy, Debug)]
pub(crate) struct Lane {
    /// 0 for air-high, -1 for air-low: `(x ^ flip) - flip` maps a sample to the
    /// air-is-high scale.
    pub(crate) flip: i32,
    /// `enter_water` (or `i32::MIN` when held).
    pub(crate) lo: i32,
    /// `enter_air` (or `i32::MAX` when held).
    pub(crate) hi: i32,
    /// No levels yet: the phase is held and the frames count as unlearnt.
    pub(crate) held: bool,
}

/// The state of `W` lanes (one per channel of a `W`-channel frame) for [`run_lanes`].
#[derive(Clone, Copy, Debug)]
pub(crate) struct Lanes<const W: usize> {
    pub(crate) flip: [i32; W],
    pub(crate) lo: [i32; W],
    pub(crate) hi: [i32; W],
    /// Phase, 0 or 1.
    pub(crate) air: [i32; W],
    /// Air frames of the run.
    pub(crate) air_n: [u32; W],
    /// Rail frames of the run.
    pub(crate) rail: [u32; W],
}

impl<const W: usize> Lanes<W> {
    /// Every lane held in water (lanes of channels no tip reads stay so).
    pub(crate) const fn new() -> Self {
        Lanes {
            flip: [0; W],
            lo: [i32::MIN; W],
            hi: [i32::MAX; W],
            air: [0; W],
            air_n: [0; W],
            rail: [0; W],
        }
    }

    /// Set lane `j` from a detector's parameters and phase.
    pub(crate) fn load(&mut self, j: usize, lane: Lane, air: bool) {
        if let (Some(f), Some(l), Some(h), Some(a)) = (
            self.flip.get_mut(j),
            self.lo.get_mut(j),
            self.hi.get_mut(j),
            self.air.get_mut(j),
        ) {
            (*f, *l, *h, *a) = (lane.flip, lane.lo, lane.hi, air as i32);
        }
    }
}

/// Frame-major phase detection: every channel of `W`-channel frames (`W <= 64`) at once, the
/// same rule
/// as [`PhaseDetector::run`] per lane (`(y > lo) & (air | (y > hi))` with
/// `y = (x ^ flip) - flip`), in a fixed-width loop over the lanes that the compiler
/// vectorises (contiguous loads, no dependency between lanes). Edges are reported in time
/// order, lanes in channel order within a frame, through `emit(lane, edge)`.
#[inline]
pub(crate) fn run_lanes<const W: usize>(
    frames: &[i16],
    lanes: &mut Lanes<W>,
    (rl, rh): (i16, i16),
    first: u64,
    mut emit: impl FnMut(usize, Edge),
) {
    let Lanes {
        flip,
        lo,
        hi,
        air,
        air_n,
        rail,
    } = lanes;
    for (i, f) in frames.chunks_exact(W).enumerate() {
        let Ok(f) = <&[i16; W]>::try_from(f) else {
            break;
        };
        let mut change = [0i32; W];
        let mut any = 0i32;
        for j in 0..W {
            let x = f[j];
            let y = (x as i32 ^ flip[j]) - flip[j];
            let now = ((y > lo[j]) as i32) & (air[j] | (y > hi[j]) as i32);
            change[j] = now ^ air[j];
            any |= change[j];
            air_n[j] = air_n[j].wrapping_add(now as u32);
            rail[j] = rail[j].wrapping_add(((x <= rl) | (x >= rh)) as u32);
            air[j] = now;
        }
        if any != 0 {
            // Visit the changed lanes only (W <= 64).
            let mut mask = 0u64;
            for (j, &c) in change.iter().enumerate().take(64) {
                mask |= ((c != 0) as u64) << j;
            }
            while mask != 0 {
                let j = mask.trailing_zeros() as usize;
                mask &= mask - 1;
                emit(
                    j,
                    Edge {
                        frame: first + i as u64,
                        to_air: air.get(j).is_some_and(|&a| a != 0),
                    },
                );
            }
        }
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
    /// [`tracking_stride`] of `learn_period`, worked out once (it takes 64-bit divisions,
    /// library calls on a 32-bit core, which every run would otherwise pay).
    track_stride: u8,
    thresholds: Option<Thresholds>,
    levels: Option<Levels>,
    learner: Option<LevelLearner>,
    air: bool,
}

impl PhaseDetector {
    /// All zero bytes: the placeholder in an unused probe slot of a chain (reconfigured
    /// before use; the learner is `Some` because `None` is not zero bytes).
    pub(crate) const ZERO: Self = PhaseDetector {
        channel: 0,
        sign: 0,
        threshold: 0.0,
        hysteresis: 0.0,
        rail_low: 0,
        rail_high: 0,
        min_swing: 0,
        learn_period: 0,
        track_stride: 0,
        thresholds: None,
        levels: None,
        learner: Some(LevelLearner::ZERO),
        air: false,
    };

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
            track_stride: tracking_stride(det.learn_period.max(64) as u64) as u8,
            thresholds,
            levels,
            learner,
            air: initial_air,
        }
    }

    /// Start afresh for `tip`, in place: the detector [`new`](Self::new) builds, without a
    /// detector-sized temporary on the stack (its learner's histogram is cleared where it is).
    pub fn configure(&mut self, tip: &TipConfig, det: &DetectorConfig, initial_air: bool) {
        let sign = tip.polarity.sign();
        let levels = match tip.levels {
            LevelSource::Fixed { air, water } => {
                self.learner = None;
                Some(Levels {
                    air: air as f32,
                    water: water as f32,
                })
            }
            LevelSource::Learnt => {
                match self.learner.as_mut() {
                    Some(l) => l.reset(),
                    None => self.learner = Some(LevelLearner::new()),
                }
                None
            }
        };
        self.channel = tip.channel as usize;
        self.sign = sign;
        self.threshold = det.threshold;
        self.hysteresis = det.hysteresis;
        self.rail_low = det.rail_low;
        self.rail_high = det.rail_high;
        self.min_swing = det.min_swing;
        self.learn_period = det.learn_period.max(64) as u64;
        self.track_stride = tracking_stride(self.learn_period) as u8;
        self.thresholds =
            levels.map(|l| Thresholds::from_levels(l, sign, det.threshold, det.hysteresis));
        self.levels = levels;
        self.air = initial_air;
    }

    /// The current phase (true = air).
    pub fn is_air(&self) -> bool {
        self.air
    }

    /// The levels in use, if known.
    pub fn levels(&self) -> Option<Levels> {
        self.levels
    }

    /// True if the levels are fixed (given, not learnt and tracked from the signal).
    pub fn levels_fixed(&self) -> bool {
        self.learner.is_none()
    }

    /// Use `levels` from the next frame on (thresholds recomputed). A learning detector
    /// keeps learning and replaces them at its next learning event.
    pub fn set_levels(&mut self, levels: Levels) {
        self.levels = Some(levels);
        self.thresholds = Some(Thresholds::from_levels(
            levels,
            self.sign,
            self.threshold,
            self.hysteresis,
        ));
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
            // The learning event this run ends at, if it reaches it (every frame before
            // the event has it as its next one, so it is worked out once per run).
            let event = self.learner.as_ref().map(|_| self.next_learn_event(at));
            let take = match event {
                Some(e) => (e - at).min(n as u64) as usize,
                None => n,
            };
            let (now, later) = rest.split_at(take * channels);
            self.observe(now, channels, at);
            let c = self.run(now, channels, at, sink);
            counts.air += c.air;
            counts.rail += c.rail;
            counts.unlearnt += c.unlearnt;
            at += take as u64;
            rest = later;
            if event == Some(at) {
                self.learn_event(at);
            }
        }
        counts
    }

    /// Frame-major processing (see [`run_lanes`]): the next frame at which this detector
    /// must stop for a learning event, if it learns.
    pub(crate) fn next_stop(&self, at: u64) -> Option<u64> {
        self.learner.as_ref().map(|_| self.next_learn_event(at))
    }

    /// Frame-major processing: feed the learner with a run of frames (before the run).
    pub(crate) fn observe(&mut self, frames: &[i16], channels: usize, first: u64) {
        let stride = self.learn_stride();
        if let Some(l) = self.learner.as_mut() {
            l.observe_strided(frames, channels, self.channel, first, stride);
        }
    }

    /// The learner's stride: [`LEARN_STRIDE`] until the tip has levels, then the tracking
    /// stride of its period (see [`tracking_stride`]): levels that are known are tracked
    /// on fewer samples. Levels change only at learning events and through
    /// [`set_levels`](Self::set_levels), between runs, so the frames fed stay fixed by
    /// absolute frame index.
    fn learn_stride(&self) -> u64 {
        if self.levels.is_some() {
            self.track_stride as u64
        } else {
            LEARN_STRIDE
        }
    }

    /// Frame-major processing: after a run that ended at frame `at`, fire the learning
    /// event due there (as [`process`](Self::process) does).
    pub(crate) fn end_run_at(&mut self, at: u64) {
        if self.learner.is_some() && at > 0 && at == self.next_learn_event(at - 1) {
            self.learn_event(at);
        }
    }

    /// Frame-major processing: this detector's channel and lane parameters
    /// `(flip, lo, hi, held)` (`held`: no levels yet, the phase is held).
    pub(crate) fn lane(&self) -> (usize, Lane) {
        let flip = if self.sign < 0 { -1 } else { 0 };
        let lane = match self.thresholds {
            Some(t) => Lane {
                flip,
                lo: t.enter_water,
                hi: t.enter_air,
                held: false,
            },
            None => Lane {
                flip,
                lo: i32::MIN,
                hi: i32::MAX,
                held: true,
            },
        };
        (self.channel, lane)
    }

    /// Frame-major processing: the phase after a run.
    pub(crate) fn set_air(&mut self, air: bool) {
        self.air = air;
    }

    /// The first learning event after frame `at`: the end of the first half-period (range
    /// found), then every period end.
    fn next_learn_event(&self, at: u64) -> u64 {
        let half = self.learn_period / 2;
        if at < half {
            half
        } else if let (Ok(a), Ok(p)) = (u32::try_from(at), u32::try_from(self.learn_period)) {
            // The same quotient in 32 bits (one instruction on a Cortex-M4, a library call
            // in 64); the period is at least 64 frames.
            ((a / p.max(1)) as u64 + 1) * self.learn_period
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
            // A split inside one phase's signal (a tip in one phase all period, its noise
            // or hum split in two) keeps the levels in use.
            if self
                .levels
                .is_some_and(|cur| inside_one_phase(cur, low, high))
            {
                return;
            }
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
                // `ch < channels` is checked by the configuration; `get` keeps it panic-free.
                if let Some(&x) = f.get(ch) {
                    rail += ((x <= rl) | (x >= rh)) as u32;
                }
            }
            let air = if self.air { n } else { 0 };
            return RunCounts {
                air,
                rail,
                unlearnt: n,
            };
        };
        let (lo, hi) = (t.enter_water, t.enter_air);
        // The tip's samples: every `channels`-th from its channel on.
        let samples = frames.get(ch..).unwrap_or(&[]);
        let stride = NonZeroUsize::new(channels).unwrap_or(NonZeroUsize::MIN);
        let (air, air_n, rail_n) = if self.sign > 0 {
            run_loop::<true, _>(samples, stride, (lo, hi), (rl, rh), self.air, first, sink)
        } else {
            // In the air-is-high scale y = -x: y > t  <=>  x < -t (-i32::MIN saturates to
            // i32::MAX, below which every i16 lies either way).
            let neg = (lo.saturating_neg(), hi.saturating_neg());
            run_loop::<false, _>(samples, stride, neg, (rl, rh), self.air, first, sink)
        };
        rail += rail_n;
        self.air = air;
        RunCounts {
            air: air_n,
            rail,
            unlearnt: 0,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::probe_config::Polarity;
    extern crate std;
    use std::format;

    /// Levels learnt from both phases are kept through a period in water with mains hum
    /// on the signal: the hum's arcsine distribution is bimodal enough for Otsu's split
    /// (separability about 0.8) and wider than the smallest swing, but it lies on the
    /// water side of the levels in use with a fraction of their swing. (Analytic case:
    /// levels 3000 and 26000 counts, a 150-count hum of one cycle per period, two
    /// periods of it.)
    #[test]
    fn hum_in_one_phase_does_not_replace_the_levels() {
        let det = DetectorConfig {
            learn_period: 400,
            ..DetectorConfig::default()
        };
        let tip = TipConfig {
            channel: 0,
            polarity: Polarity::AirHigh,
            levels: LevelSource::Learnt,
        };
        let mut random = crate::test_rng::xorshift(0x9E37_79B9_7F4A_7C15);
        let mut noise = move || ((random() >> 40) % 81) as f32 - 40.0;
        let mut frames = std::vec::Vec::new();
        for i in 0..400 {
            let level = if (i / 20) % 3 == 0 { 26000.0 } else { 3000.0 };
            frames.push((level + noise()) as i16);
        }
        // Two periods of hum: the first in the bins of the two-phase period (too narrow a
        // split for them), the second in bins ranged over the hum itself.
        for i in 400..1200 {
            let phase = 2.0 * core::f32::consts::PI * (i % 400) as f32 / 400.0;
            frames.push((3000.0 + 150.0 * micromath::F32Ext::sin(phase) + 0.1 * noise()) as i16);
        }
        let mut d = PhaseDetector::new(&tip, &det, false);
        d.process(&frames[..400], 1, 0, &mut ());
        let learnt = d.levels().expect("levels from both phases");
        assert!((learnt.air - 26000.0).abs() < 200.0 && (learnt.water - 3000.0).abs() < 200.0);
        d.process(&frames[400..], 1, 400, &mut ());
        assert_eq!(d.levels(), Some(learnt));
    }

    /// A detector configured in place, whatever it held, is the detector `new` builds.
    #[test]
    fn configure_in_place_equals_new() {
        let det = DetectorConfig::default();
        let learnt = TipConfig {
            channel: 1,
            polarity: Polarity::AirHigh,
            levels: LevelSource::Learnt,
        };
        let fixed = TipConfig {
            channel: 0,
            polarity: Polarity::AirLow,
            levels: LevelSource::Fixed {
                air: 3000,
                water: 26000,
            },
        };
        // A learner that has seen a signal, ranged and binned it.
        let samples: std::vec::Vec<i16> = (0..4096)
            .map(|i| if (i / 64) % 2 == 0 { 3000 } else { 26000 })
            .collect();
        for (from, to) in [(learnt, learnt), (fixed, learnt), (learnt, fixed)] {
            for initial_air in [false, true] {
                let mut d = PhaseDetector::new(&from, &det, !initial_air);
                d.process(&samples, 2, 0, &mut ());
                d.configure(&to, &det, initial_air);
                let fresh = PhaseDetector::new(&to, &det, initial_air);
                assert_eq!(format!("{d:?}"), format!("{fresh:?}"));
            }
        }
        let mut z = PhaseDetector::ZERO;
        z.configure(&learnt, &det, false);
        assert_eq!(
            format!("{z:?}"),
            format!("{:?}", PhaseDetector::new(&learnt, &det, false))
        );
    }
}
