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

use crate::levels::{tracking_stride, Learnt, LevelLearner, Levels, Thresholds, LEARN_STRIDE};
use crate::probe_config::{DetectorConfig, LevelSource, TipConfig};
use core::num::NonZeroUsize;

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

/// `x` crosses threshold `t` upwards (`POS`: counts, air high) or downwards (negated
/// counts, air low).
#[inline(always)]
fn above<const POS: bool>(x: i32, t: i32) -> bool {
    if POS {
        x > t
    } else {
        x < t
    }
}

/// The samples that neither leave the current phase nor lie at a rail, as `[a, a + w]`
/// (`(x - a) as u32 <= w`): the intersection of the phase's stay interval (in water
/// `!above(x, t)`, in air `above(x, t)`) with the samples off the rails (`x - base` in
/// `0..width`) and the `i16` range. When there are none, a band of one value no `i16`
/// takes, so that every sample is looked at closely.
#[inline(always)]
fn quiet_band<const POS: bool, const IN_AIR: bool>(
    t: i32,
    (base, width): (i32, u32),
) -> (i32, u32) {
    let (lo, hi) = match (POS, IN_AIR) {
        // above(x, t) = x > t
        (true, true) => (t as i64 + 1, i64::MAX),
        (true, false) => (i64::MIN, t as i64),
        // above(x, t) = x < t
        (false, true) => (i64::MIN, t as i64 - 1),
        (false, false) => (t as i64, i64::MAX),
    };
    let lo = lo.max(base as i64).max(i16::MIN as i64);
    let hi = hi.min(base as i64 + width as i64 - 1).min(i16::MAX as i64);
    if hi >= lo {
        (lo as i32, (hi - lo) as u32)
    } else {
        (i16::MAX as i32 + 1, 0)
    }
}

/// Scan the tip's samples from `*idx` (every `stride`-th of `samples`) for the first that
/// leaves the current phase: in water (`IN_AIR` false) the first `above(x, t)`, in air the
/// first `!above(x, t)`. Counts the rail samples scanned on the way (the one found
/// included); leaves `*idx` at the sample found, or past the end (false). Not inlined: the
/// loop then has the registers of a Cortex-M4 to itself (no spills), at the price of one
/// call per interval between interfaces. `step <= samples.len()`, so `i + step` cannot
/// overflow.
///
/// Most samples lie in the phase's quiet band ([`quiet_band`]: they neither end the phase
/// nor sit at a rail), which one unsigned comparison tells; only the others are looked at
/// closely. Four samples are taken per step of the loop (one bounds check for the four).
#[inline(never)]
fn scan<const POS: bool, const IN_AIR: bool>(
    samples: &[i16],
    idx: &mut usize,
    stride: usize,
    t: i32,
    rails: (i32, u32),
    rail: &mut u32,
) -> bool {
    let (base, width) = rails;
    let is_rail = |x: i32| (x.wrapping_sub(base) as u32 >= width) as u32;
    let leaves = |x: i32| above::<POS>(x, t) != IN_AIR;
    let mut i = *idx;
    let mut r = 0u32;
    let mut found = false;
    let (a, w) = quiet_band::<POS, IN_AIR>(t, rails);
    let loud = |x: i16| (x as i32).wrapping_sub(a) as u32 > w;
    let s = stride;
    // `s <= samples.len()`, so three strides cannot overflow.
    let span = 3 * s;
    'scan: loop {
        // Skip groups of four quiet samples.
        for g in samples.get(i..).unwrap_or(&[]).chunks_exact(4 * s) {
            let (Some(&x0), Some(&x1), Some(&x2), Some(&x3)) =
                (g.first(), g.get(s), g.get(2 * s), g.get(span))
            else {
                break;
            };
            if loud(x0) | loud(x1) | loud(x2) | loud(x3) {
                break;
            }
            i += 4 * s;
        }
        // One by one: the group that holds a loud sample, or the last samples.
        for _ in 0..4 {
            let Some(&x) = samples.get(i) else {
                break 'scan;
            };
            if loud(x) {
                let x = x as i32;
                r += is_rail(x);
                if leaves(x) {
                    found = true;
                    break 'scan;
                }
            }
            i += s;
        }
    }
    *idx = i;
    *rail += r;
    found
}

/// The per-sample loop of [`PhaseDetector::run`] over the tip's samples (every `stride`-th
/// of `samples`, from the first), monomorphised on the polarity so the comparisons need no
/// multiplication: with `POS` the thresholds are in counts, otherwise negated counts and
/// the comparisons reversed. Returns the phase after the run, the air frames and the rail
/// frames.
///
/// The rule is `now = above(lo) & (air | above(hi))`; the loop runs it phase by phase: in
/// air `now` is `above(lo)`, in water `above(max(lo, hi))` (air-high scale), so between two
/// interfaces it compares each sample with one threshold and counts rail samples with one
/// unsigned comparison (`x <= rl | x >= rh` is `x - (rl + 1)` outside `0..rh - rl - 1`),
/// and the air frames are counted per interval of air, at its ends. The same edges and
/// counts as a per-sample evaluation of the rule, with a few instructions per sample on a
/// 32-bit core (no 64-bit frame index, no iterator state).
#[inline(always)]
fn run_loop<const POS: bool, S: EdgeSink>(
    samples: &[i16],
    stride: NonZeroUsize,
    (lo, hi): (i64, i64),
    (rl, rh): (i16, i16),
    mut air: bool,
    first: u64,
    sink: &mut S,
) -> (bool, u32, u32) {
    let (lo, hi) = (
        lo.clamp(i32::MIN as i64, i32::MAX as i64) as i32,
        hi.clamp(i32::MIN as i64, i32::MAX as i64) as i32,
    );
    // In water both thresholds must be crossed: the stricter one decides.
    let water_t = if POS { hi.max(lo) } else { hi.min(lo) };
    let rails = (rl as i32 + 1, (rh as i32 - rl as i32 - 1).max(0) as u32);
    // The index step: the stride, or past the end when that is shorter (no overflow).
    let step = stride.get().min(samples.len().max(1));
    let (mut air_n, mut rail) = (0u32, 0u32);
    // Sample index (into `samples`) of the current scan, and frame where the phase began.
    let mut idx = 0usize;
    let mut since = 0usize;
    loop {
        let found = if air {
            scan::<POS, true>(samples, &mut idx, step, lo, rails, &mut rail)
        } else {
            scan::<POS, false>(samples, &mut idx, step, water_t, rails, &mut rail)
        };
        if !found {
            break;
        }
        let i = idx / stride;
        if air {
            air_n += (i - since) as u32;
        }
        since = i;
        air = !air;
        sink.edge(Edge {
            frame: first + i as u64,
            to_air: air,
        });
        idx += step;
    }
    if air {
        let n = samples.len() / stride + (samples.len() % stride != 0) as usize;
        air_n += n.saturating_sub(since) as u32;
    }
    (air, air_n, rail)
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
            let take = match self.learner {
                Some(_) => (self.next_learn_event(at) - at).min(n as u64) as usize,
                None => n,
            };
            let (now, later) = rest.split_at(take * channels);
            let stride = self.learn_stride();
            if let Some(l) = self.learner.as_mut() {
                l.observe_strided(now, channels, self.channel, at, stride);
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
            tracking_stride(self.learn_period)
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
        let (lo, hi) = (t.enter_water as i64, t.enter_air as i64);
        // The tip's samples: every `channels`-th from its channel on.
        let samples = frames.get(ch..).unwrap_or(&[]);
        let stride = NonZeroUsize::new(channels).unwrap_or(NonZeroUsize::MIN);
        let (air, air_n, rail_n) = if self.sign > 0 {
            run_loop::<true, _>(samples, stride, (lo, hi), (rl, rh), self.air, first, sink)
        } else {
            // In the air-is-high scale y = -x: y > t  <=>  x < -t.
            run_loop::<false, _>(samples, stride, (-lo, -hi), (rl, rh), self.air, first, sink)
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

#[cfg(test)]
mod scan_tests {
    use super::*;
    use crate::probe_config::Polarity;
    extern crate std;
    use std::vec::Vec;

    /// Collects edges.
    struct Edges(Vec<Edge>);
    impl EdgeSink for Edges {
        fn edge(&mut self, edge: Edge) {
            self.0.push(edge);
        }
    }

    /// The hysteresis rule sample by sample, as the module documentation states it, with
    /// the rail count `x <= rail_low | x >= rail_high`: (edges, air frames, rail frames).
    fn by_rule(
        d: &PhaseDetector,
        frames: &[i16],
        channels: usize,
        mut air: bool,
    ) -> (Vec<Edge>, u32, u32) {
        let (ch, lane) = d.lane();
        let (mut edges, mut air_n, mut rail) = (Vec::new(), 0, 0);
        for (i, f) in frames.chunks_exact(channels).enumerate() {
            let x = f[ch];
            let y = (x as i32 ^ lane.flip) - lane.flip;
            let now = (y > lane.lo) && (air || y > lane.hi);
            if now != air {
                edges.push(Edge {
                    frame: i as u64,
                    to_air: now,
                });
            }
            air = now;
            air_n += now as u32;
            rail += ((x <= d.rail_low) | (x >= d.rail_high)) as u32;
        }
        (edges, air_n, rail)
    }

    /// The per-tip scan (quiet band, four samples a step) gives the rule's edges and counts
    /// for random signals, levels, polarities, rails (also inside the thresholds, so that
    /// the quiet band is partial or empty) and channel counts.
    #[test]
    fn scan_matches_the_rule_sample_by_sample() {
        let mut seed = 0x2545_f491_4f6c_dd1du64;
        let mut next = move |m: u64| {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed % m
        };
        for case in 0..400 {
            let channels = 1 + next(5) as usize;
            let frames = 1 + next(300) as usize;
            let (a, w) = (next(60_000) as i32 - 30_000, next(60_000) as i32 - 30_000);
            let mut det = DetectorConfig::default();
            let r1 = next(65_536) as i32 - 32_768;
            let r2 = next(65_536) as i32 - 32_768;
            det.rail_low = r1.min(r2) as i16;
            det.rail_high = r1.max(r2) as i16;
            if case % 4 == 0 {
                (det.rail_low, det.rail_high) = (i16::MIN, i16::MAX);
            }
            let tip = TipConfig {
                channel: next(channels as u64) as u8,
                polarity: if next(2) == 0 {
                    Polarity::AirHigh
                } else {
                    Polarity::AirLow
                },
                levels: LevelSource::Fixed {
                    air: a as i16,
                    water: w as i16,
                },
            };
            let initial_air = next(2) == 0;
            let d0 = PhaseDetector::new(&tip, &det, initial_air);
            // Samples: mostly near the two levels, some anywhere, some at the rails, some
            // at and next to the thresholds.
            let (_, lane) = d0.lane();
            let unmap = |y: i32| if lane.flip < 0 { -y } else { y };
            let samples: Vec<i16> = (0..frames * channels)
                .map(|_| match next(10) {
                    0 => next(65_536) as i32 - 32_768,
                    1 => det.rail_low as i32 + next(3) as i32 - 1,
                    2 => det.rail_high as i32 + next(3) as i32 - 1,
                    3 => unmap([lane.lo, lane.hi][next(2) as usize] + next(3) as i32 - 1),
                    4..=6 => a + next(2_000) as i32 - 1_000,
                    _ => w + next(2_000) as i32 - 1_000,
                })
                .map(|x| x.clamp(-32_768, 32_767) as i16)
                .collect();
            let (want_edges, want_air, want_rail) = by_rule(&d0, &samples, channels, initial_air);
            let mut d = d0.clone();
            let mut got = Edges(Vec::new());
            let counts = d.process(&samples, channels, 0, &mut got);
            assert_eq!(got.0, want_edges, "case {case}");
            assert_eq!(
                (counts.air, counts.rail),
                (want_air, want_rail),
                "case {case}"
            );
            assert_eq!(
                d.is_air(),
                want_edges.last().map_or(initial_air, |e| e.to_air)
            );
        }
    }
}
