//! Levels from histograms of sample values: the device's two-level rule with the record's
//! class size, a drift segment's levels, and the mode and spread of a one-phase tip.

use super::outcome::TipOutcome;
use super::MIN_CLASS_SAMPLES;
use frothline_core::levels::{Learnt, LevelLearner, Levels};
use frothline_core::Polarity;

/// Most strided samples of one tip fed to the learner: the learner's per-bin sums are
/// 32-bit, so a longer record's counts are scaled down (the shape is kept).
const MAX_FED: u64 = 1 << 22;

/// Width of the bins of the per-segment histograms, counts.
pub(super) const SEGMENT_BIN: usize = 64;

/// What [`modes`] found.
enum Modes {
    Two { low: f32, high: f32 },
    OnePhase { min: i16, max: i16 },
    Unclear { min: i16, max: i16 },
    Empty,
}

/// The two levels of counted values (`(value, count)` in increasing value, counts > 0) by
/// the device's rule ([`LevelLearner`]), with the record rule's class size.
fn modes(points: &[(i16, u32)], min_swing: u16) -> Modes {
    let total: u64 = points.iter().map(|&(_, c)| c as u64).sum();
    let (Some(&(min, _)), Some(&(max, _))) = (points.first(), points.last()) else {
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
        for &(x, c) in points {
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
pub(super) fn segment_levels(coarse: &[u32], polarity: Polarity, min_swing: u16) -> Option<Levels> {
    let points = occupied(coarse, |b| value(b * SEGMENT_BIN + SEGMENT_BIN / 2));
    match modes(&points, min_swing) {
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

/// The occupied bins of `counts` as `(value_of(bin), count)`, in bin order.
fn occupied(counts: &[u32], value_of: impl Fn(usize) -> i16) -> Vec<(i16, u32)> {
    counts
        .iter()
        .enumerate()
        .filter(|&(_, &c)| c > 0)
        .map(|(b, &c)| (value_of(b), c))
        .collect()
}

/// The value of histogram bin `b` (bins are i16 values offset by 0x8000).
fn value(b: usize) -> i16 {
    (b as u16 ^ 0x8000) as i16
}

/// Learn one tip's levels from the counts of its values (`hist[x ^ 0x8000]`).
pub fn from_histogram(hist: &[u32], polarity: Polarity, min_swing: u16) -> TipOutcome {
    // The occupied values, listed once: the rule reads them several times, and a tip's
    // 65 536 bins hold a few thousand.
    let points = occupied(hist, value);
    let (low, high) = match modes(&points, min_swing) {
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
pub(super) const NOISY_FACTOR: f32 = 1.5;

/// The standard deviation (counts) of the values within `half` counts of `centre`,
/// estimated robustly as 1.4826 times their median absolute deviation from `centre` (the
/// normal distribution's ratio; Hampel 1974, "The influence curve and its role in robust
/// estimation"), so the few samples on interface ramps do not inflate it.
pub(super) fn spread_around(hist: &[u32], centre: f32, half: f32) -> f32 {
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
pub(super) fn mode_level(hist: &[u32]) -> Option<f32> {
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
