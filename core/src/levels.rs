//! Air and water levels: thresholds from levels, and levels learnt from the signal.
//!
//! Learning keeps a fixed 64-bin histogram of every 4th sample over one learning period;
//! once the tip has levels it tracks them on every 8th or 16th sample when the period is
//! long enough to leave 128 of them ([`tracking_stride`]), which is most of the learner's
//! cost spared on a device.
//! At the end of the period the histogram is split in two classes by Otsu's method (Otsu,
//! 1979, "A threshold selection method from gray-level histograms"), each class's level is
//! the mode refined by the mean of the samples in the mode bin and its neighbours, and the
//! split is accepted only if it is clearly bimodal (Otsu's separability eta >= 0.75, each
//! class holding >= 0.5 % of the samples, the swing at least `min_swing` counts and
//! [`MIN_SWING_BINS`] bins, neither mode in an end bin that took samples beyond the range).
//! A period that fails keeps the previous levels, so a tip sitting in one phase keeps its
//! last good levels; a tip's detector also keeps them when a split lies on one side of
//! their midpoint with less than half their swing ([`inside_one_phase`]: noise or hum
//! inside one phase). The bin range of each period comes from the previous period's
//! min/max, so the learnt levels do not depend on the ADC's scale; the very first period
//! spends its first half finding that range. All arithmetic is deterministic (integers, plain f32), so a
//! device and a host replay learn the same levels from the same samples.

use crate::quotient::sum_quotient;
use micromath::F32Ext;

/// Number of histogram bins.
pub const LEARN_BINS: usize = 64;
/// Only every `LEARN_STRIDE`-th frame (by absolute frame index) feeds the histogram.
pub const LEARN_STRIDE: u64 = 4;
/// Once a tip has levels, its learner keeps tracking them on fewer frames: every
/// [`tracking_stride`]-th, at most this many. A learning period then still holds at least
/// [`TRACK_MIN_SAMPLES`] of them.
pub const MAX_TRACK_STRIDE: u64 = 16;
/// Fewest samples per learning period that a tracking stride leaves.
pub const TRACK_MIN_SAMPLES: u64 = 128;

/// The stride of a learner that tracks levels it already has, for `learn_period` frames: the
/// largest power of two, from [`LEARN_STRIDE`] to [`MAX_TRACK_STRIDE`], that leaves at least
/// [`TRACK_MIN_SAMPLES`] samples per period (so [`LEARN_STRIDE`] for periods below
/// `8 * TRACK_MIN_SAMPLES` frames). A multiple of [`LEARN_STRIDE`], so the tracked frames
/// are a subset of the learning ones, fixed by absolute frame index.
pub const fn tracking_stride(learn_period: u64) -> u64 {
    let mut s = MAX_TRACK_STRIDE;
    while s > LEARN_STRIDE && learn_period / s < TRACK_MIN_SAMPLES {
        s /= 2;
    }
    s
}

/// Smallest accepted Otsu separability (between-class over total variance). A single
/// Gaussian mode gives 2/pi = 0.64; two well-separated modes give close to 1.
pub const MIN_SEPARABILITY: f32 = 0.75;

/// Smallest accepted swing in bin widths. Noise of one phase alone that falls in a few
/// wide bins (the bins are set by the previous period's full swing) can pass Otsu's
/// separability, since two occupied bins separate completely; its two "levels" then lie
/// within a couple of bins of each other. A real air-water swing spans about a fifth of
/// the bins or more (the range is the previous period's span padded by a quarter each
/// side, its bin width rounded up to a power of two), so this refuses only noise.
pub const MIN_SWING_BINS: f32 = 4.0;

/// The two levels of a tip, in ADC counts.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Levels {
    /// Air level, counts.
    pub air: f32,
    /// Water level, counts.
    pub water: f32,
}

/// True if a split into levels `a` and `b` (counts, either order) lies on one side of the
/// midpoint of the levels in use, `current`, with less than half their swing: noise or hum
/// inside one phase's signal rather than a change of levels (a re-zeroed conditioner still
/// gives a split with most of the swing). Such a split does not replace the levels.
pub fn inside_one_phase(current: Levels, a: f32, b: f32) -> bool {
    let mid = 0.5 * (current.air + current.water);
    let swing = (current.air - current.water).abs();
    (a > mid) == (b > mid) && (a - b).abs() < 0.5 * swing
}

/// Thresholds in the "air is high" scale (sample times the polarity sign).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Thresholds {
    /// A water sample above this becomes air.
    pub enter_air: i32,
    /// An air sample at or below this becomes water.
    pub enter_water: i32,
}

impl Thresholds {
    /// Thresholds at `threshold` of the range, with a band `hysteresis` wide around it.
    /// `sign` maps counts to the air-is-high scale.
    pub fn from_levels(levels: Levels, sign: i32, threshold: f32, hysteresis: f32) -> Self {
        let air = levels.air * sign as f32;
        let water = levels.water * sign as f32;
        let range = air - water;
        let half = hysteresis * 0.5;
        let hi = water + (threshold + half) * range;
        let lo = water + (threshold - half) * range;
        Thresholds {
            enter_air: F32Ext::floor(hi) as i32,
            enter_water: F32Ext::floor(lo) as i32,
        }
    }
}

/// What a finished learning period decided.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Learnt {
    /// Two clear modes: these are the low and high levels, counts.
    Modes {
        /// Lower level, counts.
        low: f32,
        /// Higher level, counts.
        high: f32,
    },
    /// Not bimodal enough this period.
    Unclear,
}

/// Otsu's split of a learning period's histogram.
struct Split {
    /// Samples in the histogram.
    total: u64,
    /// Separability: between-class over total variance.
    eta: f32,
    /// Last bin of the low class.
    k: usize,
    /// Samples in the low class (bins `0..=k`).
    low_n: u64,
}

/// One histogram bin.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Bin {
    /// Samples in the bin.
    count: u32,
    /// Sum of (sample - bin lower edge), for sub-bin level estimates.
    offset: u32,
}

impl Bin {
    const ZERO: Bin = Bin {
        count: 0,
        offset: 0,
    };
}

/// A fixed-size histogram that learns the two levels of a tip.
#[derive(Clone, Debug)]
pub struct LevelLearner {
    origin: i32,
    /// Bin width: 2^shift counts (at most 2^10 for 64 bins over the i16 range).
    shift: u8,
    /// Each bin's count and offset sum side by side, so a fed sample's bin is one address.
    bins: [Bin; LEARN_BINS],
    /// Samples binned since the histogram was last cleared (saturating): while this times
    /// the bin width fits 32 bits, no bin's count or offset sum can saturate.
    binned: u32,
    min: i16,
    max: i16,
    ranged: bool,
}

impl Default for LevelLearner {
    fn default() -> Self {
        Self::new()
    }
}

impl LevelLearner {
    /// All zero bytes: the placeholder in an unused probe slot of a chain (not a learner
    /// that has seen nothing: that is [`new`](Self::new)).
    pub(crate) const ZERO: Self = LevelLearner {
        origin: 0,
        shift: 0,
        bins: [Bin::ZERO; LEARN_BINS],
        binned: 0,
        min: 0,
        max: 0,
        ranged: false,
    };

    /// A learner that has not seen the signal yet.
    pub const fn new() -> Self {
        LevelLearner {
            origin: 0,
            shift: 0,
            bins: [Bin::ZERO; LEARN_BINS],
            binned: 0,
            min: i16::MAX,
            max: i16::MIN,
            ranged: false,
        }
    }

    /// Forget everything seen, in place: the learner [`new`](Self::new) builds.
    pub fn reset(&mut self) {
        self.origin = 0;
        self.shift = 0;
        self.bins = [Bin::ZERO; LEARN_BINS];
        self.binned = 0;
        self.min = i16::MAX;
        self.max = i16::MIN;
        self.ranged = false;
    }

    /// Feed every `LEARN_STRIDE`-th frame of `frames` (interleaved, `channels` wide) whose
    /// absolute index is a multiple of the stride; `first` is the index of the first frame.
    pub fn observe(&mut self, frames: &[i16], channels: usize, channel: usize, first: u64) {
        self.observe_strided(frames, channels, channel, first, LEARN_STRIDE);
    }

    /// [`observe`](Self::observe) with another stride (a power of two, at least 1): feed
    /// the frames whose absolute index is a multiple of `stride`.
    pub fn observe_strided(
        &mut self,
        frames: &[i16],
        channels: usize,
        channel: usize,
        first: u64,
        stride: u64,
    ) {
        let stride = stride.max(1);
        // Powers of two: the remainder is a mask (no 64-bit division on a 32-bit core).
        let skip = (first.wrapping_neg() & (stride - 1)) as usize;
        let start = skip * channels + channel;
        if start >= frames.len() {
            return;
        }
        let samples = frames.get(start..).unwrap_or(&[]);
        // At most the samples' length (the same samples fed; an index plus it cannot wrap).
        let step = (stride as usize)
            .saturating_mul(channels)
            .clamp(1, samples.len().max(1));
        // The running extremes as i32 (no sign extension of an i16 at every sample).
        let (mut lo, mut hi) = (self.min as i32, self.max as i32);
        if self.ranged {
            // Samples this call feeds: those at 0, step, 2 step, ... of `samples` (not empty).
            let n = (samples.len().saturating_sub(1) / step + 1).min(u32::MAX as usize) as u32;
            self.binned = self.binned.saturating_add(n);
            // While no bin can reach 2^32 (every count at most `binned`, every offset sum
            // at most `binned` times the bin width less one), the sums wrap nowhere, and
            // wrapping additions give the saturating ones.
            let exact = ((self.binned as u64) << self.shift) < u32::MAX as u64;
            (lo, hi) = if exact {
                self.bin_samples::<false>(samples, step, (lo, hi))
            } else {
                self.bin_samples::<true>(samples, step, (lo, hi))
            };
        } else {
            let mut i = 0;
            while let Some(&x) = samples.get(i) {
                lo = lo.min(x as i32);
                hi = hi.max(x as i32);
                i += step;
            }
        }
        // Extremes of i16 samples (or the i16 start values): they fit.
        self.min = lo as i16;
        self.max = hi as i16;
    }

    /// Bin `samples[0]`, `samples[step]`, ... and widen the running extremes `(lo, hi)`;
    /// with `SATURATE` the bins' sums saturate, else they wrap (the caller knows they
    /// cannot).
    #[inline(always)]
    fn bin_samples<const SATURATE: bool>(
        &mut self,
        samples: &[i16],
        step: usize,
        (mut lo, mut hi): (i32, i32),
    ) -> (i32, i32) {
        let (origin, shift) = (self.origin, self.shift as u32);
        let mut i = 0;
        while let Some(&x) = samples.get(i) {
            let x = x as i32;
            lo = lo.min(x);
            hi = hi.max(x);
            let rel = x - origin;
            // Inside the range: one unsigned comparison of the bin number; samples beyond
            // either end go to the end bins, their offsets clamped to the bin (0 below the
            // range, the bin width less one above it).
            let (b, off) = match (rel as u32) >> shift {
                b if b < LEARN_BINS as u32 => (b as usize, (rel as u32) - (b << shift)),
                _ if rel < 0 => (0, 0),
                _ => (LEARN_BINS - 1, (1u32 << shift) - 1),
            };
            let bin = &mut self.bins[b & (LEARN_BINS - 1)];
            if SATURATE {
                bin.count = bin.count.saturating_add(1);
                bin.offset = bin.offset.saturating_add(off);
            } else {
                bin.count = bin.count.wrapping_add(1);
                bin.offset = bin.offset.wrapping_add(off);
            }
            i += step;
        }
        (lo, hi)
    }

    /// Feed `count` samples of value `x` at once: the same state as `count` calls of
    /// [`observe`](Self::observe) with that one sample. A host that has counted a record's
    /// values (a full 16-bit histogram) feeds them through this, so it learns the levels of
    /// the whole record by the device's rule in one pass over the counts.
    pub fn observe_repeated(&mut self, x: i16, count: u32) {
        if count == 0 {
            return;
        }
        self.min = self.min.min(x);
        self.max = self.max.max(x);
        if self.ranged {
            let width = 1i32 << self.shift;
            let rel = x as i32 - self.origin;
            let bin = (rel >> self.shift).clamp(0, LEARN_BINS as i32 - 1);
            let off = (rel - (bin << self.shift)).clamp(0, width - 1) as u32;
            let b = bin as usize;
            self.binned = self.binned.saturating_add(count);
            self.bins[b].count = self.bins[b].count.saturating_add(count);
            self.bins[b].offset = self.bins[b]
                .offset
                .saturating_add(off.saturating_mul(count));
        }
    }

    /// Set the histogram range from the min/max seen so far (widened by a quarter of the
    /// span each side) and start a fresh histogram and min/max.
    pub fn range_from_seen(&mut self) {
        let (lo, hi) = if self.min <= self.max {
            (self.min as i32, self.max as i32)
        } else {
            (-32768, 32767)
        };
        let pad = ((hi - lo) / 4).max(1);
        let lo = (lo - pad).max(-32768);
        let hi = (hi + pad).min(32767);
        let span = (hi - lo + 1) as u32;
        let per_bin = span.div_ceil(LEARN_BINS as u32).max(1);
        let shift = 32 - (per_bin - 1).leading_zeros();
        self.origin = lo;
        self.shift = if per_bin == 1 { 0 } else { shift as u8 };
        self.bins = [Bin::ZERO; LEARN_BINS];
        self.binned = 0;
        self.min = i16::MAX;
        self.max = i16::MIN;
        self.ranged = true;
    }

    /// End a learning period: decide the levels and start the next period.
    pub fn finish_period(&mut self, min_swing: u16) -> Learnt {
        let out = self.decide(min_swing, None);
        self.range_from_seen();
        out
    }

    /// Decide the levels of what was observed, accepting a class of at least `min_class`
    /// samples (instead of the learning period's 0.5 % of them): a whole record's
    /// histogram in which one phase is rare but well sampled (a tip mostly in air above
    /// the flow still meets water for tens of milliseconds). The histogram is kept.
    pub fn decide_with_min_class(&self, min_swing: u16, min_class: u64) -> Learnt {
        self.decide(min_swing, Some(min_class.max(2)))
    }

    fn bin_low(&self, b: usize) -> f32 {
        (self.origin + ((b as i32) << self.shift)) as f32
    }

    /// Mean sample value of bins `lo..=hi`, or None if they are empty.
    ///
    /// The sum is an exact integer (counts times bin edges, which are integers, plus the
    /// offsets); the mean is that sum over the count, rounded to f32. When both are exact
    /// in f32 (below 2^24: any learning period of up to 2^24 / 32768 = 512 strided
    /// samples per bin range), one f32 division rounds it, else an f64 one: the same value
    /// ([`sum_quotient`]).
    fn mean_of(&self, lo: usize, hi: usize) -> Option<f32> {
        let mut n = 0u64;
        let mut s = 0i64;
        for b in lo..=hi {
            let (c, off) = (self.bins[b].count, self.bins[b].offset);
            n += c as u64;
            let edge = self
                .origin
                .wrapping_add((b as i32).wrapping_shl(self.shift as u32));
            s = s
                .wrapping_add((c as i64).wrapping_mul(edge as i64))
                .wrapping_add(off as i64);
        }
        (n > 0).then(|| sum_quotient(s, n))
    }

    /// The count of bin `b` (any index: masked to the bins, no bounds check).
    fn bin_count(&self, b: usize) -> u32 {
        self.bins[b & (LEARN_BINS - 1)].count
    }

    /// The occupied bins in increasing order, into `out`; returns how many.
    fn occupied_bins(&self, out: &mut [u8; LEARN_BINS]) -> usize {
        let mut m = 0;
        for (b, bin) in self.bins.iter().enumerate() {
            out[m & (LEARN_BINS - 1)] = b as u8;
            m += (bin.count != 0) as usize;
        }
        m
    }

    /// Otsu's split of the histogram whose occupied bins are `occupied` (in increasing
    /// order), or `None` for fewer than 16 samples or no spread.
    fn otsu_split(&self, occupied: &[u8]) -> Option<Split> {
        let width = (1u32 << self.shift) as f32;
        let centre = |b: usize| self.bin_low(b) + 0.5 * width;
        // Empty bins are skipped in the three sums below: each would add an exact zero
        // (a zero count times a finite value) and, in the split search, repeat the
        // previous split's between-class variance, which never beats the best so far. The
        // sums and the split are those of every bin, bit for bit; a two-level histogram
        // fills only a few of its bins, so most of a decision's float work is spared. The
        // count and the low class's size are summed in the same passes.
        let count = |b: u8| self.bin_count(b as usize);
        let (mut total, mut sum) = (0u64, 0f32);
        for &b in occupied {
            let c = count(b);
            total += c as u64;
            sum += c as f32 * centre(b as usize);
        }
        if total < 16 {
            return None;
        }
        let nt = total as f32;
        let mean_t = sum / nt;
        let mut var_t = 0f32;
        for &b in occupied {
            let d = centre(b as usize) - mean_t;
            var_t += count(b) as f32 * d * d;
        }
        var_t /= nt;
        if var_t <= 0.0 {
            return None;
        }
        // Otsu: maximise the between-class variance over split points.
        let (mut w0, mut m0, mut n0) = (0f32, 0f32, 0u64);
        // The low class while no split beats zero: bin 0 (as for a best split at bin 0).
        let (mut best, mut best_k, mut low_n) = (0f32, 0usize, self.bins[0].count as u64);
        for &k in occupied
            .iter()
            .take_while(|&&k| (k as usize) < LEARN_BINS - 1)
        {
            let (count, k) = (count(k), k as usize);
            let c = count as f32 / nt;
            n0 += count as u64;
            w0 += c;
            m0 += c * centre(k);
            let w1 = 1.0 - w0;
            if w0 <= 0.0 || w1 <= 0.0 {
                continue;
            }
            let d = mean_t * w0 - m0;
            let between = d * d / (w0 * w1);
            if between > best {
                best = between;
                best_k = k;
                low_n = n0;
            }
        }
        Some(Split {
            total,
            eta: best / var_t,
            k: best_k,
            low_n,
        })
    }

    fn decide(&self, min_swing: u16, min_class: Option<u64>) -> Learnt {
        if !self.ranged {
            return Learnt::Unclear;
        }
        let width = (1u32 << self.shift) as f32;
        let mut list = [0u8; LEARN_BINS];
        let n = self.occupied_bins(&mut list);
        let occupied = list.get(..n).unwrap_or(&[]);
        let Some(Split {
            total,
            eta,
            k: best_k,
            low_n,
        }) = self.otsu_split(occupied)
        else {
            return Learnt::Unclear;
        };
        let high_n = total - low_n;
        let min_class = min_class.unwrap_or((total / 200).max(2));
        if eta < MIN_SEPARABILITY || low_n < min_class || high_n < min_class {
            return Learnt::Unclear;
        }
        // The first fullest bin of `lo..=hi` (`lo` if all are empty): empty bins never
        // beat it, so only the occupied ones are looked at.
        let mode = |lo: usize, hi: usize| -> usize {
            let mut m = lo;
            for &b in occupied {
                let b = b as usize;
                if (lo..=hi).contains(&b) && self.bin_count(b) > self.bin_count(m) {
                    m = b;
                }
            }
            m
        };
        let ml = mode(0, best_k);
        let mh = mode(best_k + 1, LEARN_BINS - 1);
        // A class whose mode is an end bin that took samples beyond the range (clamped into
        // it, their values lost: after a period in one phase the range spans that phase's
        // noise alone) has no level the histogram can tell. The range pads the previous
        // period's span by a quarter each side, so samples inside that span never reach
        // an end bin; the next period's range covers these samples.
        let top = self.origin + ((LEARN_BINS as i32) << self.shift) - 1;
        let cut_low = ml == 0 && (self.min as i32) < self.origin;
        let cut_high = mh == LEARN_BINS - 1 && (self.max as i32) > top;
        if cut_low || cut_high {
            return Learnt::Unclear;
        }
        let low = self.mean_of(ml.saturating_sub(1), (ml + 1).min(best_k));
        let high = self.mean_of((mh - 1).max(best_k + 1), (mh + 1).min(LEARN_BINS - 1));
        match (low, high) {
            (Some(low), Some(high))
                if high - low >= (min_swing as f32).max(MIN_SWING_BINS * width) =>
            {
                Learnt::Modes { low, high }
            }
            _ => Learnt::Unclear,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    extern crate std;
    use crate::test_rng::xorshift;

    /// Standard normal deviates by the Box-Muller transform (Box and Muller 1958) over
    /// [`xorshift`].
    fn gaussian(seed: u64) -> impl FnMut() -> f64 {
        let mut next = xorshift(seed);
        move || {
            let mut uniform = || ((next() >> 11) as f64 / (1u64 << 53) as f64).max(1e-12);
            let (u, v) = (uniform(), uniform());
            (-2.0 * u.ln()).sqrt() * (2.0 * core::f64::consts::PI * v).cos()
        }
    }

    /// `mean_of`'s f32 division equals the f64 division rounded to f32 (the computation
    /// it replaced) for sums and counts exact in f32: a sweep over many quotients.
    #[test]
    fn f32_mean_equals_f64_mean_rounded() {
        let mut next = xorshift(0x9E37_79B9_7F4A_7C15);
        for _ in 0..2_000_000 {
            let x = next();
            let n = (x % (1 << 24)) as i64 + 1;
            let s = ((x >> 24) % (1 << 25)) as i64 - (1 << 24);
            let a = s as f32 / n as f32;
            let b = (s as f64 / n as f64) as f32;
            assert_eq!(a.to_bits(), b.to_bits(), "{s} / {n}");
        }
    }

    /// The tracking stride: the largest power of two from 4 to 16 with `period / stride >=
    /// 128` (worked by hand: 400 / 4 = 100, 1024 / 8 = 128, 2047 / 8 = 255 but 2047 / 16
    /// = 127, 4000 / 16 = 250).
    #[test]
    fn tracking_stride_leaves_enough_samples() {
        for (period, want) in [
            (64, 4),
            (400, 4),
            (1023, 4),
            (1024, 8),
            (2047, 8),
            (2048, 16),
            (4000, 16),
            (u64::MAX, 16),
        ] {
            assert_eq!(tracking_stride(period), want, "period {period}");
        }
    }

    /// The histogram of [`LevelLearner::observe`] is the module's rule, written out per
    /// sample (the bin of `x - origin` shifted, clamped to the end bins; the offset in the
    /// bin clamped to the bin): samples inside, below and above the range, any phase of
    /// the stride, several channels.
    #[test]
    fn observe_follows_the_binning_rule() {
        let mut next = xorshift(0x2545_F491_4F6C_DD1D);
        for case in 0..200 {
            let channels = 1 + (case % 5) as usize;
            let channel = case as usize % channels;
            let first = next() % 9;
            let frames: std::vec::Vec<i16> = (0..channels * (50 + case as usize * 7))
                .map(|_| next() as i16)
                .collect();
            let mut l = LevelLearner::new();
            // A narrow range learnt from part of the record, so that many samples fall
            // outside it.
            let part = frames.len() / 8;
            l.observe(&frames[..part - part % channels], channels, channel, first);
            l.range_from_seen();
            let mut want = l.clone();
            l.observe(&frames, channels, channel, first);
            let width = 1i32 << want.shift;
            for (i, f) in frames.chunks_exact(channels).enumerate() {
                if !(first + i as u64).is_multiple_of(LEARN_STRIDE) {
                    continue;
                }
                let v = f[channel];
                want.min = want.min.min(v);
                want.max = want.max.max(v);
                let rel = v as i32 - want.origin;
                let bin = (rel >> want.shift).clamp(0, LEARN_BINS as i32 - 1);
                let off = (rel - (bin << want.shift)).clamp(0, width - 1);
                want.bins[bin as usize].count += 1;
                want.bins[bin as usize].offset += off as u32;
            }
            assert_eq!(l.bins, want.bins, "case {case}");
            assert_eq!((l.min, l.max), (want.min, want.max), "case {case}");
        }
    }

    /// Bins near 2^32 saturate instead of wrapping: the feeding loop that adds without a
    /// saturation test runs only while no bin can reach 2^32, here the one that tests does.
    #[test]
    fn bins_near_the_limit_saturate() {
        let mut l = LevelLearner::new();
        l.observe_strided(&[0, 1000], 1, 0, 0, 1);
        l.range_from_seen();
        let at = |l: &LevelLearner, x: i16| ((x as i32 - l.origin) >> l.shift) as usize;
        let (b, width) = (at(&l, 900), 1u32 << l.shift);
        assert!(width > 1, "the test needs bins wider than one count");
        l.bins[b].count = u32::MAX - 1;
        l.bins[b].offset = u32::MAX - 1;
        l.binned = u32::MAX - 1;
        l.observe_strided(&[900, 901, 902], 1, 0, 0, 1);
        assert_eq!(l.bins[b].count, u32::MAX);
        assert_eq!(l.bins[b].offset, u32::MAX);
        // A fresh histogram counts exactly again.
        l.range_from_seen();
        let b = at(&l, 900);
        l.observe_strided(&[900, 900], 1, 0, 0, 1);
        assert_eq!(l.bins[b].count, 2);
    }

    /// Counted values fed at once give the state that sample-by-sample feeding gives
    /// (the same histogram, so the same decision).
    #[test]
    fn repeated_observation_equals_samples() {
        let frames: std::vec::Vec<i16> = (0..8000)
            .map(|i| {
                if (i / 52) % 3 == 0 {
                    3100 + (i % 11) as i16
                } else {
                    25900 - (i % 13) as i16
                }
            })
            .collect();
        let mut a = LevelLearner::new();
        a.observe(&frames, 1, 0, 0);
        a.range_from_seen();
        a.observe(&frames, 1, 0, 0);
        let mut counts = std::collections::BTreeMap::new();
        for &x in frames.iter().step_by(LEARN_STRIDE as usize) {
            *counts.entry(x).or_insert(0u32) += 1;
        }
        let mut b = LevelLearner::new();
        for (&x, &n) in &counts {
            b.observe_repeated(x, n);
        }
        b.range_from_seen();
        for (&x, &n) in &counts {
            b.observe_repeated(x, n);
        }
        assert_eq!(a.bins, b.bins);
        assert_eq!((a.min, a.max), (b.min, b.max));
        assert_eq!(a.finish_period(64), b.finish_period(64));
    }

    /// A period in which the tip stays in water, after a period that saw both phases (so
    /// the bins are wide, set by the full swing), holds only the water noise in a few
    /// bins. Such a histogram can look perfectly bimodal to Otsu's criterion (two occupied
    /// bins separate completely), so its split must be refused on its width: for Gaussian
    /// noise of any width from a tenth of a bin to ten bins the period is `Unclear` and the
    /// levels are kept. A two-level period in the same bins is still learnt. (Analytic
    /// case: noise alone has no second level.)
    #[test]
    fn water_noise_alone_is_not_split_in_two() {
        let mut normal = gaussian(0x9E37_79B9_7F4A_7C15);
        let two_levels: std::vec::Vec<i16> = (0..4000)
            .map(|i| if (i / 40) % 2 == 0 { 3000 } else { 26000 })
            .collect();
        for tenth in 1..=100 {
            let mut l = LevelLearner::new();
            l.observe(&two_levels, 1, 0, 0);
            l.range_from_seen();
            l.observe(&two_levels, 1, 0, 0);
            let mut both = l.clone();
            assert!(matches!(both.finish_period(64), Learnt::Modes { .. }));
            let sigma = tenth as f64 / 10.0 * (1u32 << l.shift) as f64;
            l.finish_period(64);
            let noise: std::vec::Vec<i16> = (0..4000)
                .map(|_| (3000.0 + sigma * normal()).round() as i16)
                .collect();
            l.observe(&noise, 1, 0, 0);
            let got = l.finish_period(64);
            assert_eq!(
                got,
                Learnt::Unclear,
                "noise sigma {sigma:.0} counts: {got:?}"
            );
        }
    }

    /// After a period in water alone the bin range spans the water noise; the next period
    /// meets air far above it, clamped into the top bin, whose mean is then the range's
    /// top rather than the air level. That period is `Unclear` (the levels kept), and the
    /// one after it, ranged over both phases, learns both levels to within a bin.
    /// (Analytic case: levels 3000 and 26000 counts with Gaussian noise.)
    #[test]
    fn air_beyond_a_water_only_range_is_not_taken_as_a_level() {
        // Gaussian noise of sigma 40 counts.
        let mut normal = gaussian(0x2545_F491_4F6C_DD1D);
        let mut noise = move || (40.0 * normal()).round() as i16;
        let water: std::vec::Vec<i16> = (0..4000).map(|_| 3000 + noise()).collect();
        let both: std::vec::Vec<i16> = (0..4000)
            .map(|i| if (i / 40) % 4 == 0 { 26000 } else { 3000 } + noise())
            .collect();
        let mut l = LevelLearner::new();
        l.observe(&water, 1, 0, 0);
        l.range_from_seen();
        l.observe(&water, 1, 0, 0);
        assert_eq!(l.finish_period(64), Learnt::Unclear);
        l.observe(&both, 1, 0, 0);
        assert_eq!(l.finish_period(64), Learnt::Unclear);
        l.observe(&both, 1, 0, 0);
        let width = (1u32 << l.shift) as f32;
        match l.finish_period(64) {
            Learnt::Modes { low, high } => {
                assert!((low - 3000.0).abs() <= width, "water {low}");
                assert!((high - 26000.0).abs() <= width, "air {high}");
            }
            other => panic!("both phases, full range: {other:?}"),
        }
    }

    /// Otsu's split over every bin, as written in the definition (no bin skipped).
    fn otsu_every_bin(l: &LevelLearner, nt: f32) -> Option<(f32, usize)> {
        let width = (1u32 << l.shift) as f32;
        let centre = |b: usize| l.bin_low(b) + 0.5 * width;
        let mut mean_t = 0f32;
        for b in 0..LEARN_BINS {
            mean_t += l.bins[b].count as f32 * centre(b);
        }
        mean_t /= nt;
        let mut var_t = 0f32;
        for b in 0..LEARN_BINS {
            let d = centre(b) - mean_t;
            var_t += l.bins[b].count as f32 * d * d;
        }
        var_t /= nt;
        if var_t <= 0.0 {
            return None;
        }
        let (mut w0, mut m0) = (0f32, 0f32);
        let (mut best, mut best_k) = (0f32, 0usize);
        for k in 0..LEARN_BINS - 1 {
            let c = l.bins[k].count as f32 / nt;
            w0 += c;
            m0 += c * centre(k);
            let w1 = 1.0 - w0;
            if w0 <= 0.0 || w1 <= 0.0 {
                continue;
            }
            let d = mean_t * w0 - m0;
            let between = d * d / (w0 * w1);
            if between > best {
                best = between;
                best_k = k;
            }
        }
        Some((best / var_t, best_k))
    }

    /// The split that skips empty bins is the split over every bin, bit for bit, on
    /// random histograms from one bin to all 64 filled, at any origin and bin width.
    #[test]
    fn otsu_split_equals_the_split_over_every_bin() {
        let mut next = xorshift(0x1234_5678_9ABC_DEF1);
        for case in 0..20_000 {
            let mut l = LevelLearner::new();
            l.ranged = true;
            l.shift = (next() % 11) as u8;
            l.origin = (next() % 60_000) as i32 - 32_768;
            let filled = 1 + next() % 64;
            for _ in 0..filled {
                let b = (next() % 64) as usize;
                l.bins[b].count = (next() % 3000) as u32;
            }
            let total: u64 = l.bins.iter().map(|b| b.count as u64).sum();
            let mut list = [0u8; LEARN_BINS];
            let n = l.occupied_bins(&mut list);
            assert!(list[..n].windows(2).all(|w| w[0] < w[1]), "case {case}");
            assert!(list[..n].iter().all(|&b| l.bins[b as usize].count != 0));
            assert_eq!(n, l.bins.iter().filter(|b| b.count != 0).count());
            let got = l
                .otsu_split(&list[..n])
                .map(|s| (s.total, s.eta.to_bits(), s.k, s.low_n));
            let want = (total >= 16)
                .then(|| otsu_every_bin(&l, total as f32))
                .flatten()
                .map(|(e, k)| {
                    let low: u64 = l.bins[..=k].iter().map(|b| b.count as u64).sum();
                    (total, e.to_bits(), k, low)
                });
            assert_eq!(got, want, "case {case}");
        }
    }

    /// The learnt levels of a two-level signal (analytic case: the mode bins' means).
    #[test]
    fn mean_of_matches_the_f64_sum() {
        let mut l = LevelLearner::new();
        let frames: std::vec::Vec<i16> = (0..4000)
            .map(|i| {
                if (i / 40) % 2 == 0 {
                    3000 + (i % 7) as i16
                } else {
                    26000 - (i % 5) as i16
                }
            })
            .collect();
        l.observe(&frames, 1, 0, 0);
        l.range_from_seen();
        l.observe(&frames, 1, 0, 0);
        for lo in 0..LEARN_BINS - 2 {
            let mut n = 0u64;
            let mut s = 0f64;
            for b in lo..=lo + 2 {
                n += l.bins[b].count as u64;
                s += l.bins[b].count as f64 * l.bin_low(b) as f64 + l.bins[b].offset as f64;
            }
            let want = (n > 0).then(|| (s / n as f64) as f32);
            assert_eq!(l.mean_of(lo, lo + 2), want, "bins {lo}..");
        }
    }
}
