//! The derived results of a correlation ([`CorrelationResult`]): Pearson coefficients from
//! the exact sums and the analysis of the cross- and auto-correlation functions.

use crate::flags::Flags;
use micromath::F32Ext;

/// Least cross-correlation half-width tau05, in units of the auto-correlation half-time
/// T05, at which Tu is a measure rather than an index ([`Flags::TU_INDEX`]; derivation in
/// the module documentation).
pub const TU_WIDTH_RATIO: f32 = 4.0;

/// The derived results of one probe's correlation over one window (lags in frames).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CorrelationResult {
    /// Largest lag computed, frames (the probe's `max_lag`, capped at the chain's `L - 1`).
    pub max_lag: u16,
    /// Lag of the cross-correlation peak, frames, refined below the sample (the transit
    /// time `T` is this over the sample rate; the velocity is tip spacing over `T`).
    pub peak_lag_frames: Option<f32>,
    /// Cross-correlation coefficient at the peak lag (the sampled maximum).
    pub peak_coefficient: Option<f32>,
    /// Second-highest local maximum over the highest (Keane and Adrian 1992); lower is
    /// better, 0 when there is no other peak.
    pub secondary_peak_ratio: Option<f32>,
    /// `T05`: lag at which the leading tip's auto-correlation falls to 0.5, frames.
    pub t05_frames: Option<f32>,
    /// `tau05`: half-width at half maximum of the cross-correlation peak, frames.
    pub tau05_frames: Option<f32>,
    /// `Tu = 0.851 sqrt(tau05^2 - T05^2) / T` (assumes Gaussian velocity fluctuations).
    pub turbulence_intensity: Option<f32>,
    /// Auto-correlation integral time scale (to the first zero crossing), frames.
    pub auto_integral_frames: Option<f32>,
    /// Cross-correlation integral time scale (from the peak to the next zero crossing),
    /// frames.
    pub cross_integral_frames: Option<f32>,
}

impl CorrelationResult {
    /// Transit time `T` between the tips, seconds, at `sample_rate_hz` frames per second.
    pub fn transit_time_s(&self, sample_rate_hz: f32) -> Option<f32> {
        let lag = self.peak_lag_frames.filter(|l| *l > 0.0 && l.is_finite())?;
        (sample_rate_hz > 0.0).then(|| lag / sample_rate_hz)
    }

    /// Interfacial velocity `V = spacing / T`, m/s, for tips `spacing_mm` apart. The one
    /// formula every consumer uses (device frames, host CSV), so they agree to the bit.
    pub fn velocity_m_s(&self, spacing_mm: f32, sample_rate_hz: f32) -> Option<f32> {
        let lag = self.peak_lag_frames.filter(|l| *l > 0.0 && l.is_finite())?;
        (spacing_mm > 0.0 && sample_rate_hz > 0.0).then(|| spacing_mm * 1e-3 * sample_rate_hz / lag)
    }

    /// No result: every value `None`.
    pub const fn none(max_lag: u16) -> Self {
        CorrelationResult {
            max_lag,
            peak_lag_frames: None,
            peak_coefficient: None,
            secondary_peak_ratio: None,
            t05_frames: None,
            tau05_frames: None,
            turbulence_intensity: None,
            auto_integral_frames: None,
            cross_integral_frames: None,
        }
    }
}

/// Pearson's coefficient of two binary sequences of `n` pairs with sums `sa`, `sb` and
/// product sum `sab`: the numerator `n sab - sa sb` and the variance terms `sa (n - sa)`,
/// `sb (n - sb)` exactly in integers (64-bit when they fit, else 128-bit: the same
/// integers either way), each rounded once to f32, then `r = num / sqrt(va vb)` through a
/// refined reciprocal square root.
pub fn pearson(n: u64, sa: u64, sb: u64, sab: u64) -> Option<f32> {
    let (num, va, vb) = pearson_parts(n, sa, sb, sab)?;
    let r = pearson_finish(num, va, vb);
    (!r.is_nan()).then_some(r)
}

/// The exact integer stage of [`pearson`], rounded to f32: numerator and the two
/// variance terms (`None` if the sums are inconsistent or overflow).
#[inline]
pub(super) fn pearson_parts(n: u64, sa: u64, sb: u64, sab: u64) -> Option<(f32, f32, f32)> {
    if n < 2 || sa > n || sb > n || sab > sa.min(sb) {
        return None;
    }
    if n <= SMALL_N as u64 {
        // All four are at most n here.
        pearson_parts_small(n as u32, sa as u32, sb as u32, sab as u32)
    } else if n <= 1 << 31 {
        let (n, sa, sb, sab) = (n as i64, sa as i64, sb as i64, sab as i64);
        Some((
            (n * sab - sa * sb) as f32,
            (sa * (n - sa)) as f32,
            (sb * (n - sb)) as f32,
        ))
    } else {
        let (n, sa, sb, sab) = (n as i128, sa as i128, sb as i128, sab as i128);
        let num = n.checked_mul(sab)?.checked_sub(sa.checked_mul(sb)?)?;
        let (va, vb) = (sa.checked_mul(n - sa)?, sb.checked_mul(n - sb)?);
        Some((num as f32, va as f32, vb as f32))
    }
}

/// Longest overlap whose integer stage fits 32-bit arithmetic: `n^2 < 2^31`.
pub(super) const SMALL_N: u32 = 46_340;

/// [`pearson_parts`] for `n <= SMALL_N`, in 32-bit integers: every product is below
/// `n^2 < 2^31`, so the integers are those of the 64-bit stage, and their rounding to f32
/// (a single instruction on a Cortex-M4F, a library call from 64 bits) is the same.
#[inline(always)]
fn pearson_parts_small(n: u32, sa: u32, sb: u32, sab: u32) -> Option<(f32, f32, f32)> {
    if !small_sums_consistent(n, sa, sb, sab) {
        return None;
    }
    let (n, sa, sb, sab) = (n as i32, sa as i32, sb as i32, sab as i32);
    Some((
        n.wrapping_mul(sab).wrapping_sub(sa.wrapping_mul(sb)) as f32,
        sa.wrapping_mul(n - sa) as f32,
        sb.wrapping_mul(n - sb) as f32,
    ))
}

/// True if `n <= SMALL_N` pairs (at least two) of two binary sequences can have the sums
/// `sa`, `sb` and product sum `sab` (tested without branches).
#[inline(always)]
fn small_sums_consistent(n: u32, sa: u32, sb: u32, sab: u32) -> bool {
    (2..=SMALL_N).contains(&n) & (sa <= n) & (sb <= n) & (sab <= sa.min(sb))
}

/// [`pearson_parts_small`] without branches, for a whole function: inconsistent sums give a
/// variance term of 0, so [`pearson_finish`] gives NaN for them, as for `None`.
#[inline(always)]
pub(super) fn pearson_parts_masked(n: u32, sa: u32, sb: u32, sab: u32) -> (f32, f32, f32) {
    let ok = small_sums_consistent(n, sa, sb, sab);
    let mask = (ok as i32).wrapping_neg();
    let (n, sa, sb, sab) = (n as i32, sa as i32, sb as i32, sab as i32);
    (
        n.wrapping_mul(sab).wrapping_sub(sa.wrapping_mul(sb)) as f32,
        (sa.wrapping_mul(n.wrapping_sub(sa)) & mask) as f32,
        sb.wrapping_mul(n.wrapping_sub(sb)) as f32,
    )
}

/// The float stage of [`pearson`] (NaN when a variance is zero): `num / sqrt(va vb)`, with
/// one reciprocal square root of the product when it is finite (always so for windows up to
/// 2^31 frames), else one per factor. Equal variances (always so at lag 0 of the
/// auto-correlation) take a plain division, so `R_aa(0)` is exactly 1.
#[inline(always)]
pub(super) fn pearson_finish(num: f32, va: f32, vb: f32) -> f32 {
    let prod = va * vb;
    let r = if va == vb {
        num / va
    } else if prod.is_finite() {
        num * rsqrt(prod)
    } else {
        num * rsqrt(va) * rsqrt(vb)
    };
    if va > 0.0 && vb > 0.0 {
        r.clamp(-1.0, 1.0)
    } else {
        f32::NAN
    }
}

/// [`pearson_finish`] for the terms of [`pearson_parts_masked`]: each is an `i32` rounded to
/// f32, so below 2^31 in magnitude, and their product (below 2^62) is always finite; the
/// branch for an infinite product is left out, the value is the same bit for bit.
/// Kept as the reference form of [`pearson_small`] in the tests.
#[cfg(test)]
#[inline(always)]
pub(super) fn pearson_finish_small(num: f32, va: f32, vb: f32) -> f32 {
    if va > 0.0 && vb > 0.0 {
        coefficient(num, va, vb)
    } else {
        f32::NAN
    }
}

/// `num / sqrt(va vb)` clamped to -1..=1, for positive variance terms whose product is
/// finite; equal terms take a plain division.
#[inline(always)]
fn coefficient(num: f32, va: f32, vb: f32) -> f32 {
    let r = if va == vb {
        num / va
    } else {
        num * rsqrt(va * vb)
    };
    r.clamp(-1.0, 1.0)
}

/// The coefficient of a lag from its exact sums: `pearson_finish_small` of
/// [`pearson_parts_masked`] (the tests' reference), bit for bit, with the sums'
/// consistency and the variances' signs tested once, in integers: NaN for inconsistent
/// sums or a zero variance, else the clamped coefficient. The float stage then runs only
/// for a defined coefficient, and a 32-bit core makes no float selects for the tests.
#[inline(always)]
pub(super) fn pearson_small(n: u32, sa: u32, sb: u32, sab: u32) -> f32 {
    let (defined, num, va, vb) = small_terms(n, sa, sb, sab);
    if !defined {
        return undefined();
    }
    coefficient(num as f32, va as f32, vb as f32)
}

/// The integer terms of a lag's coefficient from its exact sums (below 2^31 for sums of
/// at most [`SMALL_N`] frames): whether it is defined (consistent sums, both variance
/// terms positive: a positive i32 rounds to a positive f32, zero to zero), the numerator
/// `n S_ab - S_a S_b` and the variance terms `S_a (n - S_a)`, `S_b (n - S_b)`.
#[inline(always)]
fn small_terms(n: u32, sa: u32, sb: u32, sab: u32) -> (bool, i32, i32, i32) {
    let ok = small_sums_consistent(n, sa, sb, sab);
    let (n, sa, sb, sab) = (n as i32, sa as i32, sb as i32, sab as i32);
    let va = sa.wrapping_mul(n.wrapping_sub(sa));
    let vb = sb.wrapping_mul(n.wrapping_sub(sb));
    let num = n.wrapping_mul(sab).wrapping_sub(sa.wrapping_mul(sb));
    (ok & (va > 0) & (vb > 0), num, va, vb)
}

/// [`pearson_small`] without a branch: both forms of the coefficient computed and the
/// one that applies selected, NaN selected for an undefined lag; the same value bit for
/// bit (the same IEEE operations on the same operands). A loop over the lags of it has no
/// call and no branch, so a host compiler runs it in SIMD lanes; a 32-bit core without
/// them takes [`pearson_small`], which skips the work of the form not needed.
#[inline(always)]
pub(super) fn pearson_lane(n: u32, sa: u32, sb: u32, sab: u32) -> f32 {
    let (defined, num, va, vb) = small_terms(n, sa, sb, sab);
    let (num, fa, fb) = (num as f32, va as f32, vb as f32);
    let quotient = num / fa;
    // An undefined lag's terms may be negative: 1 in their place keeps the estimate's
    // integer step in range (its subtraction overflows for a negative operand).
    let product = num * rsqrt(if defined { fa * fb } else { 1.0 });
    let r = if fa == fb { quotient } else { product }.clamp(-1.0, 1.0);
    if defined {
        r
    } else {
        f32::NAN
    }
}

/// Whether the lag loops take [`pearson_lane`] (a 64-bit host, with SIMD lanes) or
/// [`pearson_small`] (a 32-bit core).
pub(super) const PEARSON_IN_LANES: bool = cfg!(target_pointer_width = "64");

/// The value of an undefined lag, marked as the rare path (the loops over the lags then
/// spend fewer instructions on the tests that can make a lag undefined).
#[cold]
fn undefined() -> f32 {
    f32::NAN
}

/// Reciprocal square root to full f32 precision: micromath's estimate (within 3.5 %)
/// refined by three Newton steps (multiplications only). Plain IEEE operations, so a
/// device and a host agree bit for bit.
#[inline]
fn rsqrt(x: f32) -> f32 {
    let mut y = F32Ext::invsqrt(x);
    // Three steps, written out (a loop of three is not unrolled at opt-level "s").
    y *= 1.5 - 0.5 * x * y * y;
    y *= 1.5 - 0.5 * x * y * y;
    y *= 1.5 - 0.5 * x * y * y;
    y
}

/// Square root to full f32 precision (0 for non-positive input), as `x / sqrt(x)`.
pub(super) fn sqrt(x: f32) -> f32 {
    if x.is_nan() || x <= 0.0 {
        return 0.0;
    }
    x * rsqrt(x)
}

fn at(r: &[f32], i: usize) -> f32 {
    r.get(i).copied().unwrap_or(f32::NAN)
}

/// Where `r` first falls to `level` walking from `from` by `step` (+1 or -1), linearly
/// interpolated; `None` if it does not within the defined lags.
fn crossing(r: &[f32], from: usize, level: f32, right: bool) -> Option<f32> {
    let mut prev = at(r, from);
    let mut i = from;
    loop {
        let next = if right {
            i.checked_add(1).filter(|&j| j < r.len())?
        } else {
            i.checked_sub(1)?
        };
        let v = at(r, next);
        if v.is_nan() || prev.is_nan() {
            return None;
        }
        if v <= level {
            let frac = if prev > v {
                ((prev - level) / (prev - v)).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let base = i as f32;
            return Some(if right { base + frac } else { base - frac });
        }
        prev = v;
        i = next;
    }
}

/// Integral of `r` from lag `from` to its first zero crossing after it.
fn integral_to_zero(r: &[f32], from: usize) -> Option<f32> {
    let mut sum = 0.0f32;
    let mut prev = at(r, from);
    if prev.is_nan() || prev <= 0.0 {
        return None;
    }
    let mut i = from + 1;
    while i < r.len() {
        let v = at(r, i);
        if v.is_nan() {
            return None;
        }
        if v <= 0.0 {
            let frac = prev / (prev - v);
            return Some(sum + 0.5 * prev * frac);
        }
        sum += 0.5 * (prev + v);
        prev = v;
        i += 1;
    }
    None
}

/// The derived quantities from the coefficient functions (NaN = undefined lag).
pub(super) fn analyse_functions(
    rab: &[f32],
    raa: &[f32],
    min_peak: f32,
) -> (CorrelationResult, Flags) {
    let lags = rab.len();
    let max_lag = lags.saturating_sub(1).min(u16::MAX as usize) as u16;
    let mut out = CorrelationResult::none(max_lag);
    let mut flags = Flags::NONE;

    // T05 and the auto integral scale need only the auto-correlation.
    out.t05_frames = crossing(raa, 0, 0.5, true);
    out.auto_integral_frames = integral_to_zero(raa, 0);

    // The first highest defined value: NaN never compares greater, and every defined
    // value is greater than -inf (the coefficients lie in -1..=1).
    let (mut k, mut r0) = (usize::MAX, f32::NEG_INFINITY);
    for (i, &v) in rab.iter().enumerate() {
        if v > r0 {
            (k, r0) = (i, v);
        }
    }
    let peak = (k != usize::MAX).then_some((k, r0));
    let Some((k, r0)) = peak else {
        flags |= Flags::NO_CORRELATION_PEAK | Flags::TU_UNDEFINED;
        return (out, flags);
    };
    out.peak_coefficient = Some(r0);
    flags.set_if(Flags::NO_CORRELATION_PEAK, r0 < min_peak);

    let (lag, x_left, x_right) = peak_lag_and_width(rab, k, r0, &mut out, &mut flags);

    if r0 > 0.0 {
        let lo = x_left.unwrap_or(-1.0);
        let hi = x_right.unwrap_or(lags as f32);
        let mut second = 0.0f32;
        // One pass with the neighbours carried along (NaN beyond the ends). The tests are
        // side-effect free, so their order is free: `v > second` first, which is false for
        // a NaN `v` and for most lags. For a defined `v`, "`left` is NaN or `v >= left`" is
        // `!(v < left)`.
        let (mut left, mut x) = (f32::NAN, 0.0f32);
        let rights = rab
            .iter()
            .skip(1)
            .copied()
            .chain(core::iter::once(f32::NAN));
        for (&v, right) in rab.iter().zip(rights) {
            // The negated comparisons are meant (true for an undefined neighbour), and no
            // shorter form keeps them so.
            #[allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]
            if v > second && !(x > lo && x < hi) && !(v < left) && !(v < right) {
                second = v;
            }
            left = v;
            // Lag numbers are exact in f32 (at most 2^16 lags).
            x += 1.0;
        }
        out.secondary_peak_ratio = Some((second / r0).min(1.0));
    }

    out.cross_integral_frames = integral_to_zero(rab, k);

    turbulence(&mut out, &mut flags, lag);
    (out, flags)
}

/// The interpolated peak lag (parabola through the peak and its neighbours) and the
/// half-height crossings either side of it, written into `out` with the peak's flags.
fn peak_lag_and_width(
    rab: &[f32],
    k: usize,
    r0: f32,
    out: &mut CorrelationResult,
    flags: &mut Flags,
) -> (f32, Option<f32>, Option<f32>) {
    let (rm, rp) = (
        k.checked_sub(1).map_or(f32::NAN, |j| at(rab, j)),
        at(rab, k + 1),
    );
    let lag = if rm.is_nan() || rp.is_nan() {
        *flags |= Flags::PEAK_AT_LAG_BOUNDARY;
        k as f32
    } else {
        let low = rm.min(rp);
        let delta = if r0 > low {
            ((rp - rm) / (2.0 * (r0 - low))).clamp(-0.5, 0.5)
        } else {
            0.0
        };
        k as f32 + delta
    };
    out.peak_lag_frames = Some(lag);

    let (x_left, x_right) = if r0 > 0.0 {
        (
            crossing(rab, k, 0.5 * r0, false),
            crossing(rab, k, 0.5 * r0, true),
        )
    } else {
        (None, None)
    };
    out.tau05_frames = match (x_left, x_right) {
        (Some(l), Some(r)) => Some(0.5 * (r - l)),
        (None, Some(r)) => Some(r - lag),
        _ => None,
    };
    (lag, x_left, x_right)
}

/// The turbulence intensity from the cross half-width and T05, with its flags.
fn turbulence(out: &mut CorrelationResult, flags: &mut Flags, lag: f32) {
    out.turbulence_intensity = match (out.tau05_frames, out.t05_frames) {
        (Some(w), Some(t05)) if lag > 0.0 && w >= t05 => {
            Some(0.851 * sqrt(w * w - t05 * t05) / lag)
        }
        _ => None,
    };
    flags.set_if(Flags::TU_UNDEFINED, out.turbulence_intensity.is_none());
    let index_only = match (out.turbulence_intensity, out.tau05_frames, out.t05_frames) {
        (Some(_), Some(w), Some(t05)) => w < TU_WIDTH_RATIO * t05,
        _ => false,
    };
    flags.set_if(Flags::TU_INDEX, index_only);
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The straightforward form of [`analyse_functions`] (its peak search and secondary
    /// peak written as in the definition).
    fn reference(rab: &[f32], raa: &[f32], min_peak: f32) -> (CorrelationResult, Flags) {
        let lags = rab.len();
        let max_lag = lags.saturating_sub(1).min(u16::MAX as usize) as u16;
        let mut out = CorrelationResult::none(max_lag);
        let mut flags = Flags::NONE;

        // T05 and the auto integral scale need only the auto-correlation.
        out.t05_frames = crossing(raa, 0, 0.5, true);
        out.auto_integral_frames = integral_to_zero(raa, 0);

        let mut peak: Option<(usize, f32)> = None;
        for (i, &v) in rab.iter().enumerate() {
            if !v.is_nan() && peak.is_none_or(|(_, p)| v > p) {
                peak = Some((i, v));
            }
        }
        let Some((k, r0)) = peak else {
            flags |= Flags::NO_CORRELATION_PEAK | Flags::TU_UNDEFINED;
            return (out, flags);
        };
        out.peak_coefficient = Some(r0);
        flags.set_if(Flags::NO_CORRELATION_PEAK, r0 < min_peak);

        let (lag, x_left, x_right) = peak_lag_and_width(rab, k, r0, &mut out, &mut flags);

        if r0 > 0.0 {
            let lo = x_left.unwrap_or(-1.0);
            let hi = x_right.unwrap_or(lags as f32);
            let mut second = 0.0f32;
            for (i, &v) in rab.iter().enumerate() {
                let x = i as f32;
                if v.is_nan() || (x > lo && x < hi) {
                    continue;
                }
                let left = i.checked_sub(1).map_or(f32::NAN, |j| at(rab, j));
                let right = at(rab, i + 1);
                let is_max = (left.is_nan() || v >= left) && (right.is_nan() || v >= right);
                if is_max && v > second {
                    second = v;
                }
            }
            out.secondary_peak_ratio = Some((second / r0).min(1.0));
        }

        out.cross_integral_frames = integral_to_zero(rab, k);

        turbulence(&mut out, &mut flags, lag);
        (out, flags)
    }

    fn same(a: Option<f32>, b: Option<f32>) -> bool {
        a.map(f32::to_bits) == b.map(f32::to_bits)
    }

    /// The lag coefficient with its tests in integers is the masked parts' coefficient,
    /// bit for bit: random sums, consistent or not, at every overlap size class.
    #[test]
    fn pearson_small_equals_the_masked_form() {
        let mut next = crate::test_rng::xorshift(0x9E37_79B9_7F4A_7C15);
        for case in 0..2_000_000u32 {
            let n = match case % 4 {
                0 => (next() % 8) as u32,
                1 => (next() % 300) as u32,
                2 => (next() % (SMALL_N as u64 + 10)) as u32,
                _ => next() as u32,
            };
            let pick = |r: u64| match r % 5 {
                0 => 0,
                1 => n,
                2 => n.wrapping_add(1),
                _ => (r >> 8) as u32 % n.saturating_add(2),
            };
            let (sa, sb) = (pick(next()), pick(next()));
            let sab = match next() % 4 {
                0 => sa.min(sb),
                1 => sa.min(sb).wrapping_add(1),
                _ => (next() as u32) % sa.min(sb).saturating_add(2),
            };
            let (num, va, vb) = pearson_parts_masked(n, sa, sb, sab);
            let want = pearson_finish_small(num, va, vb);
            let got = pearson_small(n, sa, sb, sab);
            assert_eq!(
                got.to_bits(),
                want.to_bits(),
                "case {case}: n {n} sa {sa} sb {sb} sab {sab}"
            );
            let lane = pearson_lane(n, sa, sb, sab);
            assert_eq!(
                lane.to_bits(),
                want.to_bits(),
                "lane form, case {case}: n {n} sa {sa} sb {sb} sab {sab}"
            );
        }
    }

    /// The analysis gives the results of its straightforward form, bit for bit, on random
    /// coefficient functions with undefined lags, ties and plateaus.
    #[test]
    fn analysis_equals_its_straightforward_form() {
        let mut next = crate::test_rng::xorshift(0x2545_F491_4F6C_DD1D);
        for case in 0..20_000u32 {
            let lags = 1 + (next() % 70) as usize;
            let mut rab = [0f32; 70];
            let mut raa = [0f32; 70];
            let (mut u, mut w) = (1.0f32, 1.0f32);
            for i in 0..lags {
                // Random walks on a coarse grid (ties), some lags undefined.
                u = (u + ((next() % 9) as f32 - 4.0) * 0.125).clamp(-1.0, 1.0);
                w = (w - ((next() % 5) as f32) * 0.0625).clamp(-1.0, 1.0);
                rab[i] = if next().is_multiple_of(23) {
                    f32::NAN
                } else {
                    u
                };
                raa[i] = if next().is_multiple_of(41) {
                    f32::NAN
                } else {
                    w
                };
            }
            let raa_len = if case % 3 == 0 {
                lags
            } else {
                (next() as usize % lags) + 1
            };
            let min_peak = 0.3;
            let (a, fa) = analyse_functions(&rab[..lags], &raa[..raa_len], min_peak);
            let (b, fb) = reference(&rab[..lags], &raa[..raa_len], min_peak);
            assert_eq!(fa, fb, "case {case}");
            assert_eq!(a.max_lag, b.max_lag, "case {case}");
            for (p, q) in [
                (a.peak_lag_frames, b.peak_lag_frames),
                (a.peak_coefficient, b.peak_coefficient),
                (a.secondary_peak_ratio, b.secondary_peak_ratio),
                (a.t05_frames, b.t05_frames),
                (a.tau05_frames, b.tau05_frames),
                (a.turbulence_intensity, b.turbulence_intensity),
                (a.auto_integral_frames, b.auto_integral_frames),
                (a.cross_integral_frames, b.cross_integral_frames),
            ] {
                assert!(same(p, q), "case {case}: {p:?} {q:?}");
            }
        }
    }
}
