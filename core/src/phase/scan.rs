//! The per-tip scan of [`PhaseDetector::run`](super::PhaseDetector): a tip's samples, every
//! `stride`-th of a run of frames, walked phase by phase for the sample that ends the
//! phase, most of them tested against the phase's quiet band alone.

use super::{Edge, EdgeSink};
use core::num::NonZeroUsize;

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
/// takes, so that every sample is looked at closely. In 32-bit arithmetic: the bounds are
/// clamped to the `i16` range before any sum could pass `i32`.
#[inline(always)]
fn quiet_band<const POS: bool, const IN_AIR: bool>(
    t: i32,
    (base, width): (i32, u32),
) -> (i32, u32) {
    const MIN: i32 = i16::MIN as i32;
    const MAX: i32 = i16::MAX as i32;
    // The stay interval within the i16 range (`t` clamped first: `t ± 1` cannot wrap).
    let t = t.clamp(MIN - 1, MAX + 1);
    let (lo, hi) = match (POS, IN_AIR) {
        // above(x, t) = x > t
        (true, true) => (t + 1, MAX),
        (true, false) => (MIN, t),
        // above(x, t) = x < t
        (false, true) => (MIN, t - 1),
        (false, false) => (t, MAX),
    };
    // The samples off the rails, `base..base + width`, within the i16 range (`base` is
    // a rail plus one, `width` below 2^16).
    let top = base.saturating_add(width.min(1 << 17) as i32) - 1;
    let lo = lo.max(base).max(MIN);
    let hi = hi.min(top).min(MAX);
    if hi >= lo {
        (lo, (hi - lo) as u32)
    } else {
        (MAX + 1, 0)
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
/// Most samples lie in the phase's quiet band `(a, w)` ([`quiet_band`] of `t` and the
/// rails, worked out once per run: they neither end the phase nor sit at a rail), which
/// one unsigned comparison tells; only the others are looked at closely. Four samples are
/// taken per step of the loop (one bounds check for the four).
#[inline(never)]
fn scan<const POS: bool, const IN_AIR: bool>(
    samples: &[i16],
    idx: &mut usize,
    stride: usize,
    (t, rails): (i32, (i32, u32)),
    (a, w): (i32, u32),
    rail: &mut u32,
) -> bool {
    let (base, width) = rails;
    let is_rail = |x: i32| (x.wrapping_sub(base) as u32 >= width) as u32;
    let leaves = |x: i32| above::<POS>(x, t) != IN_AIR;
    let mut i = *idx;
    let mut r = 0u32;
    let mut found = false;
    let loud = |x: i16| (x as i32).wrapping_sub(a) as u32 > w;
    let s = stride;
    'scan: loop {
        i = skip_quiet(samples, i, s, a, w);
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

/// The first sample index from `i` (a step of `s` samples) of a group of four of the tip's
/// samples (`i`, `i + s`, `i + 2 s`, `i + 3 s`) that holds one outside the quiet band
/// `(a, w)`, or of the last samples (fewer than eight strides left): every group before it
/// is quiet. Groups are tested two at a time (one bounds check and one loop step for eight
/// samples). Apart from [`scan`], so that its loop keeps the band and the strides in
/// registers; for the usual channel counts with the stride a constant, so the samples of a
/// group are loads at fixed offsets. `s <= samples.len()`, so eight strides cannot
/// overflow.
#[inline(never)]
fn skip_quiet(samples: &[i16], i: usize, s: usize, a: i32, w: u32) -> usize {
    match s {
        1 => skip_quiet_by(samples, i, 1, a, w),
        2 => skip_quiet_by(samples, i, 2, a, w),
        4 => skip_quiet_by(samples, i, 4, a, w),
        8 => skip_quiet_by(samples, i, 8, a, w),
        16 => skip_quiet_by(samples, i, 16, a, w),
        32 => skip_quiet_by(samples, i, 32, a, w),
        _ => skip_quiet_by(samples, i, s, a, w),
    }
}

/// [`skip_quiet`] for stride `s` (inlined: a constant `s` gives loads at fixed offsets).
#[inline(always)]
fn skip_quiet_by(samples: &[i16], mut i: usize, s: usize, a: i32, w: u32) -> usize {
    let loud = |x: i16| (x as i32).wrapping_sub(a) as u32 > w;
    let span = 3 * s;
    for g in samples.get(i..).unwrap_or(&[]).chunks_exact(8 * s) {
        let (Some(&x0), Some(&x1), Some(&x2), Some(&x3)) =
            (g.first(), g.get(s), g.get(2 * s), g.get(span))
        else {
            break;
        };
        if loud(x0) | loud(x1) | loud(x2) | loud(x3) {
            break;
        }
        let (Some(&x4), Some(&x5), Some(&x6), Some(&x7)) =
            (g.get(4 * s), g.get(5 * s), g.get(6 * s), g.get(7 * s))
        else {
            break;
        };
        if loud(x4) | loud(x5) | loud(x6) | loud(x7) {
            return i + 4 * s;
        }
        i += 8 * s;
    }
    i
}

/// The per-sample loop of [`PhaseDetector::run`](super::PhaseDetector) over the tip's samples (every `stride`-th
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
pub(super) fn run_loop<const POS: bool, S: EdgeSink>(
    samples: &[i16],
    stride: NonZeroUsize,
    (lo, hi): (i32, i32),
    (rl, rh): (i16, i16),
    mut air: bool,
    first: u64,
    sink: &mut S,
) -> (bool, u32, u32) {
    // In water both thresholds must be crossed: the stricter one decides.
    let water_t = if POS { hi.max(lo) } else { hi.min(lo) };
    let rails = (rl as i32 + 1, (rh as i32 - rl as i32 - 1).max(0) as u32);
    let (air_band, water_band) = (
        quiet_band::<POS, true>(lo, rails),
        quiet_band::<POS, false>(water_t, rails),
    );
    // The index step: the stride, or past the end when that is shorter (no overflow).
    let step = stride.get().min(samples.len().max(1));
    let (mut air_n, mut rail) = (0u32, 0u32);
    // Sample index (into `samples`) of the current scan, and frame where the phase began.
    let mut idx = 0usize;
    let mut since = 0usize;
    loop {
        let found = if air {
            scan::<POS, true>(samples, &mut idx, step, (lo, rails), air_band, &mut rail)
        } else {
            let t = (water_t, rails);
            scan::<POS, false>(samples, &mut idx, step, t, water_band, &mut rail)
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::phase::PhaseDetector;
    use crate::probe_config::Polarity;
    use crate::probe_config::{DetectorConfig, LevelSource, TipConfig};
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
            let channels = [1, 2, 3, 4, 5, 8, 16, 32, 33][next(9) as usize];
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
