//! Chord times: exact count, sum, min and max, plus a fixed log-spaced histogram.
//!
//! Bins are a quarter octave wide (ratio 2^(1/4) = 1.19) starting at one sample, so 72 bins
//! span 1 to 2^18 samples (6.5 s at 40 kHz); longer chords fall in the last bin. The bin of
//! a chord is found with integer operations only (the position of the leading one bit and
//! the two bits after it), so it costs the same on a device as on a host. Percentiles
//! interpolate geometrically inside the bin that holds them: at most a 19 % bin width of
//! error, usually far less; the mean, min and max are exact.

use crate::quotient::count_quotient;
use micromath::F32Ext;

/// Bins per octave.
pub const BINS_PER_OCTAVE: usize = 4;
/// Number of bins.
pub const CHORD_BINS: usize = 72;

/// The histogram bin of a chord of `n` samples (n >= 1).
pub const fn bin_of(n: u32) -> usize {
    if n == 0 {
        return 0;
    }
    let lz = n.leading_zeros();
    // The two bits after the leading one, read from `n` shifted up to bit 31 (for octaves
    // 0 and 1 the bits below `n` are zeros, as a shift up gives them).
    let quarter = ((n << lz) >> 29) & 3;
    let b = ((31 - lz) * BINS_PER_OCTAVE as u32 + quarter) as usize;
    if b >= CHORD_BINS {
        CHORD_BINS - 1
    } else {
        b
    }
}

/// Lower edge of bin `b`, samples.
pub fn bin_lower(b: usize) -> f32 {
    let quarter = (b % BINS_PER_OCTAVE) as f32;
    octave_base(b) * (1.0 + quarter / BINS_PER_OCTAVE as f32)
}

/// `2^octave` of bin `b`, exact: built from its exponent bits (the value repeated doubling
/// gives, without the loop).
fn octave_base(b: usize) -> f32 {
    let octave = (b / BINS_PER_OCTAVE).min(127) as u32;
    f32::from_bits((octave + 127) << 23)
}

/// Upper edge of bin `b`, samples.
pub fn bin_upper(b: usize) -> f32 {
    let quarter = (b % BINS_PER_OCTAVE) as f32 + 1.0;
    octave_base(b) * (1.0 + quarter / BINS_PER_OCTAVE as f32)
}

/// The continuous chords bin `b` stands for, samples: a chord of `n` frames is a continuous
/// chord about `n` rounded to the frame (a continuity correction), so a bin holding the
/// integers `lo..hi` spans `lo − ½ .. hi − ½`. The last bin holds everything up to
/// `longest`, the longest chord counted. A bin that holds no integer spans nothing
/// (`lo == hi`).
pub fn continuous_span(b: usize, longest: u32) -> (f32, f32) {
    let hi = if b + 1 >= CHORD_BINS {
        longest as f32 + 1.0
    } else {
        F32Ext::ceil(bin_upper(b))
    };
    (F32Ext::ceil(bin_lower(b)) - 0.5, hi - 0.5)
}

/// Statistics of the chords of one phase over one window.
#[derive(Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ChordStats {
    /// Number of chords.
    pub count: u32,
    /// Sum of the chords, samples.
    pub sum: u64,
    /// Shortest chord, samples (u32::MAX when empty).
    pub min: u32,
    /// Longest chord, samples (0 when empty).
    pub max: u32,
    /// Chords shorter than [`crate::flags::SHORT_CHORD_FRAMES`].
    pub short: u32,
    /// Histogram counts per bin.
    #[cfg_attr(feature = "serde", serde(with = "bins_serde"))]
    pub bins: [u32; CHORD_BINS],
}

impl Default for ChordStats {
    fn default() -> Self {
        Self::new()
    }
}

impl ChordStats {
    /// All zero bytes: the placeholder in an unused probe slot of a chain (not "no chord
    /// yet": that is [`new`](Self::new), whose `min` is `u32::MAX`).
    pub(crate) const ZERO: Self = ChordStats {
        count: 0,
        sum: 0,
        min: 0,
        max: 0,
        short: 0,
        bins: [0; CHORD_BINS],
    };

    /// No chord yet.
    pub const fn new() -> Self {
        ChordStats {
            count: 0,
            sum: 0,
            min: u32::MAX,
            max: 0,
            short: 0,
            bins: [0; CHORD_BINS],
        }
    }

    /// Back to no chord yet ([`new`](Self::new)), in place, for stats built by
    /// [`add`](Self::add) alone: their bins beyond those of the shortest and the longest
    /// chord are zero ([`bin_of`] never decreases with the chord), so only the bins from
    /// the one to the other are cleared.
    pub(crate) fn clear_added(&mut self) {
        // Empty (shortest u32::MAX, longest 0): a start past the end, nothing to clear.
        let reached = bin_of(self.min)..bin_of(self.max).saturating_add(1);
        if let Some(bins) = self.bins.get_mut(reached) {
            bins.fill(0);
        }
        self.count = 0;
        self.sum = 0;
        self.min = u32::MAX;
        self.max = 0;
        self.short = 0;
    }

    /// Add one chord of `n` samples.
    #[inline]
    pub fn add(&mut self, n: u32) {
        self.count = self.count.saturating_add(1);
        self.sum = self.sum.saturating_add(n as u64);
        self.min = self.min.min(n);
        self.max = self.max.max(n);
        self.short += (n < crate::flags::SHORT_CHORD_FRAMES) as u32;
        let b = bin_of(n);
        self.bins[b] = self.bins[b].saturating_add(1);
    }

    /// Merge another window's chords into this one.
    pub fn merge(&mut self, other: &ChordStats) {
        self.count = self.count.saturating_add(other.count);
        self.sum = self.sum.saturating_add(other.sum);
        self.min = self.min.min(other.min);
        self.max = self.max.max(other.max);
        self.short = self.short.saturating_add(other.short);
        for (a, b) in self.bins.iter_mut().zip(other.bins.iter()) {
            *a = a.saturating_add(*b);
        }
    }

    /// Mean chord, samples.
    pub fn mean(&self) -> Option<f32> {
        (self.count > 0).then(|| count_quotient(self.sum, self.count as u64))
    }

    /// The squared coefficient of variation of the chords, `s²/mean²` (`s²` the sample
    /// variance, divisor `n − 1`): the mean is exact,
    /// the second moment from the histogram (a bin's value is its one integer when it holds
    /// one, its geometric middle otherwise: within a few % for bins 19 % wide). `None` with
    /// fewer than 3 chords.
    pub fn cv2(&self) -> Option<f32> {
        if self.count < 3 || self.sum == 0 {
            return None;
        }
        let mut m2 = 0.0f32;
        for (b, &c) in self.bins.iter().enumerate() {
            if c == 0 {
                continue;
            }
            let (lo, hi) = (bin_lower(b), bin_upper(b));
            let x2 = if hi - lo <= 1.0 {
                let x = F32Ext::ceil(lo);
                x * x
            } else {
                lo * hi
            };
            m2 += c as f32 * x2;
        }
        let n = self.count as f32;
        let mean = self.sum as f32 / n;
        // The sample variance with Bessel's correction, n/(n − 1).
        let cv2 = (m2 / n / (mean * mean) - 1.0) * n / (n - 1.0);
        cv2.is_finite().then_some(cv2.max(0.0))
    }

    /// The `q`-quantile (0..=1) of the chords, samples, from the histogram.
    pub fn quantile(&self, q: f32) -> Option<f32> {
        if self.count == 0 || !(0.0..=1.0).contains(&q) {
            return None;
        }
        let target = q * self.count as f32;
        let mut below = 0f32;
        for (b, &c) in self.bins.iter().enumerate() {
            if c == 0 {
                continue;
            }
            let c = c as f32;
            if below + c >= target {
                let (lo, hi) = (
                    bin_lower(b).max(self.min as f32),
                    bin_upper(b).min(self.max as f32 + 1.0),
                );
                let frac = ((target - below) / c).clamp(0.0, 1.0);
                let hi = hi.max(lo);
                return Some(lo * F32Ext::powf(hi / lo, frac));
            }
            below += c;
        }
        Some(self.max as f32)
    }

    /// Median chord, samples.
    pub fn median(&self) -> Option<f32> {
        self.quantile(0.5)
    }
}

#[cfg(feature = "serde")]
mod bins_serde {
    use super::CHORD_BINS;
    use serde::{Deserialize, Deserializer, Serialize, Serializer};

    pub fn serialize<S: Serializer>(bins: &[u32; CHORD_BINS], s: S) -> Result<S::Ok, S::Error> {
        bins.as_slice().serialize(s)
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<[u32; CHORD_BINS], D::Error> {
        let v = heapless::Vec::<u32, CHORD_BINS>::deserialize(d)?;
        let mut out = [0; CHORD_BINS];
        out[..v.len()].copy_from_slice(&v);
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bins_are_monotone_and_cover_their_chords() {
        let mut last = 0;
        for n in 1..200_000u32 {
            let b = bin_of(n);
            assert!(b >= last, "bin order broke at {n}");
            last = b;
            if b < CHORD_BINS - 1 {
                assert!(
                    bin_lower(b) <= n as f32 && (n as f32) < bin_upper(b),
                    "chord {n} outside bin {b}"
                );
            }
        }
    }

    #[test]
    fn quantiles_of_a_uniform_set_are_close() {
        // 1000 chords 100..1100 samples: the exact median is 600 (analytic case).
        let mut s = ChordStats::new();
        for n in 100..1100 {
            s.add(n);
        }
        let m = s.median().unwrap();
        assert!((m - 600.0).abs() < 0.1 * 600.0, "median {m}");
        assert_eq!(s.mean().unwrap(), 599.5);
        assert_eq!((s.min, s.max), (100, 1099));
    }

    #[test]
    fn empty_stats_give_none() {
        let s = ChordStats::new();
        assert_eq!(s.mean(), None);
        assert_eq!(s.median(), None);
    }
}

#[cfg(test)]
mod octave_tests {
    use super::*;

    /// The bin edges are those of `2^octave` by repeated doubling, bit for bit.
    #[test]
    fn octave_bases_are_exact_powers_of_two() {
        for b in 0..CHORD_BINS {
            let want = (0..b / BINS_PER_OCTAVE).fold(1.0f32, |x, _| x * 2.0);
            assert_eq!(octave_base(b).to_bits(), want.to_bits(), "bin {b}");
        }
    }
}

#[cfg(test)]
mod bin_tests {
    use super::*;

    /// Clearing only the reached bins leaves the state of a fresh histogram: chords from
    /// 1 frame to 2^32 - 1, a few or many, none, and each end of the bin range.
    #[test]
    fn clearing_the_reached_bins_leaves_a_fresh_histogram() {
        let mut next = crate::test_rng::xorshift(0x853C_49E6_748F_EA9B);
        for case in 0..2_000u32 {
            let mut s = ChordStats::new();
            let bits = 1 + case % 32;
            for _ in 0..case % 40 {
                let n = (next() % (1u64 << bits)) as u32;
                s.add(n.max(1));
            }
            if case % 7 == 0 {
                s.add(u32::MAX);
            }
            if case % 11 == 0 {
                s.add(1);
            }
            s.clear_added();
            assert_eq!(s, ChordStats::new(), "case {case}");
        }
    }

    /// The bin as it was worked out before (the two bits after the leading one by a shift
    /// down, or up for octaves 0 and 1).
    fn bin_by_octave(n: u32) -> usize {
        if n == 0 {
            return 0;
        }
        let octave = 31 - n.leading_zeros();
        let quarter = if octave >= 2 {
            (n >> (octave - 2)) & 3
        } else {
            (n << (2 - octave)) & 3
        };
        ((octave * BINS_PER_OCTAVE as u32 + quarter) as usize).min(CHORD_BINS - 1)
    }

    /// `bin_of` gives that bin for every chord up to 2^22 samples, every power of two and
    /// its neighbours, and random chords up to `u32::MAX`.
    #[test]
    fn bins_equal_the_octave_form() {
        let mut next = crate::test_rng::xorshift(0x9E37_79B9_7F4A_7C15);
        let random = (0..100_000).map(|_| next() as u32);
        let edges = (0..32).flat_map(|k| {
            let p = 1u32 << k;
            [p - 1, p, p.saturating_add(1)]
        });
        for n in (0..1u32 << 22).chain(edges).chain(random).chain([u32::MAX]) {
            assert_eq!(bin_of(n), bin_by_octave(n), "chord {n}");
        }
    }
}
