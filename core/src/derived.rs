//! Figures derived from a window's record: chord lengths, specific interfacial area, Sauter
//! mean diameter and particle grouping (clusters) with its random-arrival reference.
//!
//! Formulas and their assumptions (the sources are named beside each one):
//! - **chord length** `ch = t_ch V`: a chord time times the local interfacial velocity. It
//!   assumes the bubble crosses the tip at the mean velocity of the window (the velocity of
//!   the window's correlation), so chord lengths of one window share one velocity.
//! - **specific interfacial area** `a = 4 F / V` (1/m): the stereological relation
//!   `S_V = 2 P_L` between the interface area per unit volume and the interface crossings
//!   per unit length of a test line through a random structure (Underwood 1970,
//!   Quantitative Stereology; from memory), with `P_L = 2F/V` crossings per metre of the
//!   tip's path (two interfaces per bubble). It holds for bubbles of any shape, randomly
//!   distributed and randomly oriented with respect to the tip, all moving at `V`; in
//!   dense or strongly elongated air structures (void fractions above about 0.3, or
//!   bubbles stretched along the flow) it is an estimate only.
//! - **Sauter mean diameter** `d = 6 C / a = 1.5 C V / F`: the diameter of the sphere with
//!   the volume-to-area ratio of the mixture (the definition `d = 6 V_air / A`, with
//!   `V_air / V_mix = C`). Same assumptions as `a`.
//! - **particle grouping**: a bubble and the next one form a pair when the water chord
//!   between them is shorter than the leading bubble's own chord: the trailing bubble is in
//!   the near wake of the leading one (the near-wake criterion of the particle-grouping
//!   literature for air-water flows; from memory). The criterion can also be a fraction of
//!   that chord or a fixed time ([`crate::cluster::NearWake`], the layout's
//!   `near_wake_chord_fraction` / `near_wake_ms`), the reference following it. Runs of such pairs are clusters. The reference is random arrivals: bubbles
//!   arriving as a Poisson process, so the water chord after a bubble is exponential with
//!   the window's mean water chord, the bubble chords keeping the window's distribution.
//!   Each bubble then pairs with the next with probability `p = P(W < B)`, independently of
//!   the others: a bubble is in a cluster with probability `1 − (1 − p)²` (paired with the
//!   one before or the one after), a cluster starts at a pair that follows no pair (rate
//!   `F p (1 − p)`), and a cluster holds `(2 − p)/(1 − p)` bubbles on average (its number of
//!   pairs is geometric with mean `1/(1 − p)`). Grouping is real when the pairs stand well
//!   above `n p` (`grouping_z`); water chords more regular than exponential give fewer
//!   pairs than random arrivals (a negative `grouping_z`). Checked against a direct Monte
//!   Carlo in `core/tests/derived.rs`.
//!
//! The cluster counts are tallied by [`crate::tip_stats::TipAccumulator`] from its edges
//! (O(1) per interface, [`crate::cluster`]); everything else is computed once per window
//! from the record.

use micromath::F32Ext;

use crate::chord::{bin_lower, bin_upper, continuous_span, ChordStats, CHORD_BINS};
use crate::record::TipStats;

pub use crate::cluster::ClusterStats;

/// The probability `p = P(W < B)` that a bubble pairs with the next under random (Poisson)
/// arrivals: the water chord `W` after a bubble is exponential with the window's mean water
/// chord `mean_water` (frames), and the bubble chord `B` follows the window's bubble chord
/// histogram, so `p = E[1 − exp(−B / mean_water)]`. A bin's chord is its one integer when it
/// holds one, its geometric middle otherwise. `None` without bubble chords or without a
/// positive mean water chord. O(bins).
pub fn pair_probability(bubbles: &ChordStats, mean_water: f32) -> Option<f32> {
    pair_probability_by(bubbles, mean_water, crate::cluster::NearWake::CHORD)
}

/// [`pair_probability`] under the criterion `wake`: with a fixed time `T` (frames) the
/// exponential water chord gives `p = 1 − exp(−T / mean_water)` whatever the bubbles; with a
/// fraction `k` of the bubble's chord, `p = E[1 − exp(−k B / mean_water)]`. `None` without
/// bubble chords or without a positive mean water chord.
pub fn pair_probability_by(
    bubbles: &ChordStats,
    mean_water: f32,
    wake: crate::cluster::NearWake,
) -> Option<f32> {
    if bubbles.bins.iter().all(|&c| c == 0) || !(mean_water > 0.0 && mean_water.is_finite()) {
        return None;
    }
    if wake.frames > 0 {
        let p = 1.0 - F32Ext::exp(-(wake.frames as f32) / mean_water);
        return p.is_finite().then_some(p.clamp(0.0, 1.0));
    }
    let k = wake.chord_fraction();
    pair_probability_scaled(bubbles, mean_water / k)
}

/// `E[1 − exp(−B / mean_water)]` over the bubble chord histogram.
fn pair_probability_scaled(bubbles: &ChordStats, mean_water: f32) -> Option<f32> {
    if !(mean_water > 0.0 && mean_water.is_finite()) {
        return None;
    }
    // The chords (saturating), summed over the occupied bins as they are visited.
    let (mut sum, mut nb) = (0.0f32, 0u32);
    for (b, &c) in bubbles.bins.iter().enumerate().take(CHORD_BINS) {
        if c == 0 {
            continue;
        }
        nb = nb.saturating_add(c);
        let (lo, hi) = (bin_lower(b), bin_upper(b));
        let x = if hi - lo <= 1.0 {
            F32Ext::ceil(lo)
        } else {
            F32Ext::sqrt(lo * hi)
        };
        sum += c as f32 * (1.0 - F32Ext::exp(-x / mean_water));
    }
    if nb == 0 {
        return None;
    }
    let p = sum / nb as f32;
    p.is_finite().then_some(p.clamp(0.0, 1.0))
}

/// What random arrivals with the window's chord distributions would give (see the module
/// documentation), for pair probability `p` and bubble count rate `f_hz`.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct RandomClusters {
    /// `p`: probability that a bubble pairs with the next.
    pub pair_probability: f32,
    /// Fraction of bubbles in clusters, `1 − (1 − p)²`.
    pub clustered_fraction: f32,
    /// Clusters per second, `F p (1 − p)`.
    pub cluster_rate_hz: f32,
    /// Mean bubbles per cluster, `(2 − p)/(1 − p)` (`None` when `p = 1`).
    pub bubbles_per_cluster: Option<f32>,
}

impl RandomClusters {
    /// The reference for pair probability `p` (clamped to 0..=1) and count rate `f_hz`.
    pub fn new(p: f32, f_hz: f32) -> Self {
        let p = if p.is_finite() {
            p.clamp(0.0, 1.0)
        } else {
            0.0
        };
        let q = 1.0 - p;
        RandomClusters {
            pair_probability: p,
            clustered_fraction: 1.0 - q * q,
            cluster_rate_hz: f_hz * p * q,
            bubbles_per_cluster: (q > 0.0).then(|| (2.0 - p) / q),
        }
    }
}

/// `ln(1 + u)`: micromath's `ln` is a fast approximation that loses several per cent near
/// 1, so small arguments go through the series `ln(1 + u) = 2 atanh(u / (2 + u))` (four
/// terms: below 1e-5 for `|u| <= 0.5`).
fn ln_1p(u: f32) -> f32 {
    if F32Ext::abs(u) <= 0.5 {
        let z = u / (2.0 + u);
        let z2 = z * z;
        2.0 * z * (1.0 + z2 * (1.0 / 3.0 + z2 * (0.2 + z2 / 7.0)))
    } else {
        F32Ext::ln(1.0 + u)
    }
}

/// The `q`-quantile (0..=1) of a chord histogram, frames, for figures that need better than
/// the bin width ([`ChordStats::quantile`] interpolates geometrically inside a bin, within
/// a 19 % bin of error). Two corrections:
/// - integer chords: a chord of `n` frames stands for continuous chords about `n` (the
///   frame count between two edges is the continuous chord rounded up or down), so a bin
///   holding the integers `lo..hi` spans `lo − ½ .. hi − ½` (a continuity correction);
/// - the density inside the bin is taken as exponential, `∝ exp(k x)`, with `k` the slope
///   of the log density between the neighbouring bins (count over integer width), and the
///   quantile solved in closed form: `x = lo + ln(1 + f (e^{k w} − 1))/k`, `f` the fraction
///   of the bin's count below the quantile, `w` the bin's width. A flat density gives the
///   linear interpolation.
///
/// `None` when empty or `q` outside 0..=1. O(bins).
pub fn chord_quantile(s: &ChordStats, q: f32) -> Option<f32> {
    quantile_of(s, q, binned_chords(s))
}

/// [`chord_quantile`] at several `qs`, the histogram's count taken once.
pub fn chord_quantiles<const N: usize>(s: &ChordStats, qs: [f32; N]) -> [Option<f32>; N] {
    let total = binned_chords(s);
    qs.map(|q| quantile_of(s, q, total))
}

/// The chords in the bins: their saturating sum, as their exact sum (no u64 overflow for
/// 72 bins) capped.
fn binned_chords(s: &ChordStats) -> u32 {
    s.bins
        .iter()
        .map(|&c| c as u64)
        .sum::<u64>()
        .min(u32::MAX as u64) as u32
}

/// [`chord_quantile`] with the histogram's count `total`.
fn quantile_of(s: &ChordStats, q: f32, total: u32) -> Option<f32> {
    if total == 0 || !(0.0..=1.0).contains(&q) {
        return None;
    }
    let span = |b: usize| continuous_span(b, s.max);
    let density = |b: usize| -> Option<(f32, f32)> {
        let c = *s.bins.get(b)?;
        let (lo, hi) = span(b);
        (c > 0 && hi > lo).then(|| (c as f32 / (hi - lo), 0.5 * (lo + hi)))
    };
    let target = q * total as f32;
    let mut below = 0.0f32;
    for b in 0..CHORD_BINS {
        let c = s.bins[b];
        if c == 0 {
            continue;
        }
        let c = c as f32;
        if below + c < target && b + 1 < CHORD_BINS {
            below += c;
            continue;
        }
        let frac = ((target - below) / c).clamp(0.0, 1.0);
        let (lo, hi) = span(b);
        let lo = lo.max(s.min as f32 - 0.5);
        let hi = hi.min(s.max as f32 + 0.5).max(lo);
        let here = density(b);
        let prev = b.checked_sub(1).and_then(density);
        let next = density(b + 1);
        // The slope of the log density between two (density, middle) points.
        let slope = |a: (f32, f32), z: (f32, f32)| {
            let dx = z.1 - a.1;
            if dx > 0.0 {
                ln_1p(z.0 / a.0 - 1.0) / dx
            } else {
                0.0
            }
        };
        let k = match (prev, here, next) {
            (Some(a), _, Some(z)) => slope(a, z),
            (Some(a), Some(h), None) => slope(a, h),
            (None, Some(h), Some(z)) => slope(h, z),
            _ => 0.0,
        };
        let w = hi - lo;
        let kw = (k * w).clamp(-20.0, 20.0);
        let x = if F32Ext::abs(kw) < 1e-3 || w <= 0.0 {
            lo + frac * w
        } else {
            lo + ln_1p(frac * (F32Ext::exp(kw) - 1.0)) / kw * w
        };
        return x.is_finite().then_some(x.max(0.0));
    }
    None
}

/// The derived figures of one tip over one window.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Derived {
    /// Mean bubble chord length, mm.
    pub chord_length_mean_mm: Option<f32>,
    /// Median bubble chord length, mm ([`chord_quantile`]).
    pub chord_length_median_mm: Option<f32>,
    /// 90th percentile of the bubble chord lengths, mm.
    pub chord_length_p90_mm: Option<f32>,
    /// Specific interfacial area `4F/V`, 1/m.
    pub interfacial_area_per_m: Option<f32>,
    /// Sauter mean diameter `1.5 C V / F`, mm.
    pub sauter_diameter_mm: Option<f32>,
    /// Clusters per second.
    pub cluster_rate_hz: Option<f32>,
    /// Mean bubbles per cluster.
    pub bubbles_per_cluster: Option<f32>,
    /// Fraction of the judged bubbles that are in clusters.
    pub clustered_fraction: Option<f32>,
    /// The random-arrival reference of the cluster figures.
    pub random: Option<RandomClusters>,
    /// How far the pairs stand above random arrivals, in standard deviations:
    /// `(pairs − n p) / sqrt(n p (1 − p))` over the `n` judged bubbles (pairs of a random
    /// process are independent Bernoulli trials of probability `p`).
    pub grouping_z: Option<f32>,
}

/// Specific interfacial area `a = 4 F / V`, 1/m, for count rate `f_hz` and velocity `v_m_s`.
pub fn interfacial_area(f_hz: f32, v_m_s: f32) -> Option<f32> {
    let a = 4.0 * f_hz / F32Ext::abs(v_m_s);
    (f_hz >= 0.0 && a.is_finite()).then_some(a)
}

/// Sauter mean diameter `d = 1.5 C V / F`, metres.
pub fn sauter_diameter(c: f32, f_hz: f32, v_m_s: f32) -> Option<f32> {
    let d = 1.5 * c * F32Ext::abs(v_m_s) / f_hz;
    (f_hz > 0.0 && (0.0..=1.0).contains(&c) && d.is_finite()).then_some(d)
}

impl Derived {
    /// The figures of tip `tip` (sampled at `sample_rate` frames per second) with the
    /// window's interfacial velocity `v_m_s` (`None` for a single-tip probe or a failed
    /// correlation: the cluster figures need no velocity, the others do).
    pub fn of_tip(tip: &TipStats, sample_rate: f32, v_m_s: Option<f32>) -> Self {
        let v = v_m_s
            .filter(|v| v.is_finite() && *v != 0.0)
            .map(F32Ext::abs);
        let fs = sample_rate;
        let mm = |frames: Option<f32>| -> Option<f32> {
            let (f, v) = (frames?, v?);
            (fs > 0.0).then(|| f / fs * v * 1000.0)
        };
        let chords = &tip.bubble_chords;
        // The chord quantiles are worked out only when there is a velocity to turn them
        // into lengths.
        let [median, p90] = if v.is_some() {
            chord_quantiles(chords, [0.5, 0.9])
        } else {
            [None, None]
        };
        let f = tip.bubble_count_rate(fs);
        let c = tip.void_fraction();
        let cl = &tip.clusters;
        let secs = (fs > 0.0 && tip.frames > 0).then(|| tip.frames as f32 / fs);
        let random = f
            .zip(pair_probability_by(
                chords,
                tip.droplet_chords.mean().unwrap_or(0.0),
                cl.wake,
            ))
            .map(|(f, p)| RandomClusters::new(p, f));
        let grouping_z = random.and_then(|r| {
            let n = cl.judged as f32;
            let p = r.pair_probability;
            let var = n * p * (1.0 - p);
            (var > 0.0).then(|| (cl.pairs as f32 - n * p) / F32Ext::sqrt(var))
        });
        Derived {
            chord_length_mean_mm: v.and_then(|_| mm(chords.mean())),
            chord_length_median_mm: mm(median),
            chord_length_p90_mm: mm(p90),
            interfacial_area_per_m: f.zip(v).and_then(|(f, v)| interfacial_area(f, v)),
            sauter_diameter_mm: c
                .zip(f)
                .zip(v)
                .and_then(|((c, f), v)| sauter_diameter(c, f, v))
                .map(|d| d * 1000.0),
            cluster_rate_hz: secs.map(|s| cl.clusters as f32 / s),
            bubbles_per_cluster: (cl.clusters > 0)
                .then(|| cl.clustered as f32 / cl.clusters as f32),
            clustered_fraction: (cl.judged > 0)
                .then(|| (cl.clustered as f32 / cl.judged as f32).min(1.0)),
            random,
            grouping_z,
        }
    }
}
