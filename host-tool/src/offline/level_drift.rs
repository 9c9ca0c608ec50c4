//! Level drift in a transient replay: each tip's levels checked segment by segment where
//! the tip is steady enough to judge, and applied to the statistics as the record goes.
//!
//! A steady replay re-learns every tip's levels in each
//! [`DRIFT_SEGMENT_S`](crate::offline::record_levels::DRIFT_SEGMENT_S) segment from the
//! two phases the segment shows. A surge record has segments of three kinds, judged so:
//!
//! - **Both phases** (the flow behind the front, and usually the segment the front enters):
//!   the segment's own levels, learnt as in a steady replay.
//! - **One phase** (a tip dry, or in still water, before the front; a tip above the flow):
//!   when at least [`ONE_PHASE_SHARE`] of the segment's samples lie within a quarter of the
//!   swing of their mode, that mode is the level of the phase it is nearer to, and the
//!   other level moves by the same amount (a conditioner's drift moves its baseline, both
//!   levels together; common practice, no source). A mode more than a quarter of the
//!   swing from both levels is not judged.
//! - **Neither** (a few stray droplets, a front that only grazes the tip): not judged; the
//!   levels of the last judged segment hold (the record's before the first).
//!
//! The levels of a segment apply to the statistics path from the segment's first frame
//! ([`frothline_core::Chain::set_tip_levels`]); the station's front path, which runs ahead
//! by its delay, keeps the record's levels, so the front is found as without the check.
//! The last frames of the record, processed by the statistics when the chain finishes,
//! keep the levels of the segment they follow. Only tips without fixed levels in the
//! layout take part, as in a steady replay, and windows.csv's `air_level_counts` /
//! `water_level_counts` (`trailing_…`) say which levels each window ended with.

use crate::offline::record_levels::{RecordLevels, MIN_CLASS_SAMPLES};
use crate::offline::replay_common::LevelSchedule;
use crate::shared::stations::StationChain;
use frothline_core::levels::Levels;

/// Share of a segment's samples that must lie within a quarter of the swing of its mode
/// for the segment to count as one phase (common practice, no source: a few stray
/// droplets or a grazing wave stay below 1 %).
pub const ONE_PHASE_SHARE: f64 = 0.99;

/// The level of a segment showing one phase, from its coarse histogram (`bin`-count bins
/// over the i16 range, offset by 0x8000, each count at its bin's centre) and the tip's
/// swing: the mean of the values within a quarter of the swing of the most populated bin,
/// recentred until it settles (a mean shift), when at least [`ONE_PHASE_SHARE`] of the
/// segment's samples (and at least [`MIN_CLASS_SAMPLES`]) lie within it; else `None`.
pub fn one_phase_level(coarse: &[u32], bin: usize, swing: f32) -> Option<f32> {
    let total: f64 = coarse.iter().map(|&c| c as f64).sum();
    if total < MIN_CLASS_SAMPLES as f64 || swing.is_nan() || swing <= 0.0 || bin == 0 {
        return None;
    }
    let centre_of = |b: usize| (b * bin + bin / 2) as f64 - 32768.0;
    let (m, _) = coarse
        .iter()
        .enumerate()
        .max_by_key(|&(i, &n)| (n, core::cmp::Reverse(i)))?;
    let half = 0.25 * swing as f64;
    let mut centre = centre_of(m);
    let mut within = 0.0;
    for _ in 0..16 {
        let (mut n, mut s) = (0f64, 0f64);
        for (b, &c) in coarse.iter().enumerate() {
            let x = centre_of(b);
            if c > 0 && (x - centre).abs() <= half {
                n += c as f64;
                s += c as f64 * x;
            }
        }
        if n == 0.0 {
            return None;
        }
        within = n;
        let next = s / n;
        let settled = (next - centre).abs() < 0.01;
        centre = next;
        if settled {
            break;
        }
    }
    (within >= ONE_PHASE_SHARE * total).then_some(centre as f32)
}

/// The levels every learning tip takes in each segment of a transient record, by the
/// rule of the module documentation; `None` when the record was not learnt segment by
/// segment. Tips the record gave no levels are left out.
pub fn transient_schedule(learnt: &RecordLevels) -> Option<LevelSchedule> {
    if learnt.segment_frames == 0 {
        return None;
    }
    let n = learnt.segment_count();
    let tips = learnt
        .tips
        .iter()
        .enumerate()
        .filter_map(|(i, t)| {
            let mut cur = t.outcome.levels()?;
            let two = learnt.segments.get(i);
            let one = learnt.segment_one_phase.get(i);
            let levels = (0..n)
                .map(|k| {
                    if let Some(l) = two.and_then(|s| s.get(k).copied().flatten()) {
                        cur = l;
                    } else if let Some(m) = one.and_then(|s| s.get(k).copied().flatten()) {
                        cur = shifted_to(cur, m).unwrap_or(cur);
                    }
                    cur
                })
                .collect();
            Some((t.probe, t.trailing, levels))
        })
        .collect();
    Some(LevelSchedule {
        segment_frames: learnt.segment_frames,
        tips,
    })
}

/// `levels` moved so that the one nearer to the measured one-phase level `m` equals it,
/// or `None` when `m` is more than a quarter of the swing from both.
fn shifted_to(levels: Levels, m: f32) -> Option<Levels> {
    let quarter = 0.25 * (levels.air - levels.water).abs();
    let (da, dw) = (m - levels.air, m - levels.water);
    let d = if da.abs() <= dw.abs() { da } else { dw };
    (d.abs() <= quarter).then_some(Levels {
        air: levels.air + d,
        water: levels.water + d,
    })
}

/// Before a push to a station chain: apply the levels of the segment the statistics path
/// is at, if they are at its first frame with no partial frame pending, and return how
/// many samples may be pushed before the statistics reach the next segment's first frame
/// (so that it is not passed). `probes` maps the station's probes to layout indices.
pub fn apply_due(chain: &mut StationChain, schedule: &LevelSchedule, probes: &[usize]) -> usize {
    let seg = schedule.segment_frames;
    let channels = (chain.config().channels as usize).max(1);
    if seg == 0 {
        return usize::MAX;
    }
    let at = chain.processed_frames();
    let pending = chain.pending_samples();
    if at.is_multiple_of(seg) && pending == 0 {
        let k = (at / seg) as usize;
        for (probe, trailing, levels) in &schedule.tips {
            let local = probes.iter().position(|p| p == probe);
            if let (Some(p), Some(l)) = (local, levels.get(k)) {
                chain.set_tip_levels(p, *trailing, *l);
            }
        }
    }
    let to_next = seg - at % seg;
    (to_next as usize)
        .saturating_mul(channels)
        .saturating_sub(pending)
        .max(1)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A coarse histogram (64-count bins) with `n` samples spread evenly over the bins
    /// from `lo` to `hi` counts.
    fn hist(parts: &[(i32, i32, u32)]) -> Vec<u32> {
        let mut h = vec![0u32; 1024];
        for &(lo, hi, n) in parts {
            let (a, b) = (((lo + 32768) / 64) as usize, ((hi + 32768) / 64) as usize);
            for c in h.iter_mut().take(b + 1).skip(a) {
                *c += n / (b - a + 1) as u32;
            }
        }
        h
    }

    /// One phase: the mean of a symmetric block of bins is its centre (analytic case).
    #[test]
    fn one_phase_segment_gives_its_mode() {
        let h = hist(&[(9600, 10400, 13_000)]);
        let m = one_phase_level(&h, 64, 20_000.0).unwrap();
        // Bins 9600..=10400 have centres 9632 .. 10400+32; their mean is the middle one.
        assert!((m - 10_016.0).abs() < 40.0, "{m}");
    }

    /// Two phases of similar weight are not one phase.
    #[test]
    fn two_phase_segment_is_not_one_phase() {
        let h = hist(&[(9600, 10400, 13_000), (-10400, -9600, 13_000)]);
        assert_eq!(one_phase_level(&h, 64, 20_000.0), None);
    }

    /// A shift moves both levels by what the nearer one moved, and refuses a mode far from
    /// both (arithmetic).
    #[test]
    fn shift_keeps_the_swing() {
        let l = Levels {
            air: 10_000.0,
            water: -10_000.0,
        };
        let s = shifted_to(l, 10_500.0).unwrap();
        assert_eq!((s.air, s.water), (10_500.0, -9_500.0));
        let s = shifted_to(l, -11_000.0).unwrap();
        assert_eq!((s.air, s.water), (9_000.0, -11_000.0));
        assert_eq!(shifted_to(l, 0.0), None);
    }
}
