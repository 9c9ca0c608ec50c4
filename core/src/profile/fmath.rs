//! f32 `exp`, `ln` and `sqrt` built on `micromath::F32Ext` and plain IEEE operations only,
//! so a Cortex-M4F and a host agree bit for bit, at close to full f32 precision.
//!
//! micromath's own functions are fast estimates: `sqrt` is a bit trick (within 5 %), `ln`
//! of `x < 1` goes through a bit-trick reciprocal (about 0.1 absolute error at 0.65, seen
//! when this module was written), `exp` is a 4-term series after reducing the argument to
//! `|r| < ln 2` (about 2e-3 relative at `r = -0.69`). A profile exponent within 1 % needs
//! better, hence:
//! - `exp(x) = exp(r/4)^4 · 2^k` with `k = round(x / ln 2)`, `r = x − k ln 2` (two-constant
//!   split of `ln 2`): micromath's series at `|r/4| < 0.087` is good to ~4e-8; measured
//!   worst relative error 5e-7 over `[−87, 88]`;
//! - `ln(x)`: micromath's estimate (of `1/x` for `x < 1`, by an IEEE division), then one
//!   Newton step `y += x exp(−y) − 1`; measured worst error 4e-7 · max(1, |ln x|) over
//!   `[1e-6, 1e3]`;
//! - `sqrt(x)`: micromath's estimate and three Newton steps.

use micromath::F32Ext;

/// `ln 2` split so that `k · LN2_HI` is exact for the `k` that occur (Cody-Waite).
const LN2_HI: f32 = 0.693_145_75;
const LN2_LO: f32 = 1.428_606_8e-6;

/// `2^k` for `k` in `-126..=127` (clamped), built from its bits.
fn pow2(k: i32) -> f32 {
    f32::from_bits(((k.clamp(-126, 127) + 127) as u32) << 23)
}

/// `e^x`; 0 below −104, infinity above 89, NaN for NaN.
pub(crate) fn exp(x: f32) -> f32 {
    if x.is_nan() {
        return x;
    }
    if x < -104.0 {
        return 0.0;
    }
    if x > 89.0 {
        return f32::INFINITY;
    }
    let k = F32Ext::floor(x * core::f32::consts::LOG2_E + 0.5);
    let r = (x - k * LN2_HI) - k * LN2_LO;
    let e = F32Ext::exp(0.25 * r);
    let e2 = e * e;
    let k = k as i32;
    let h = k / 2;
    // Two factors keep each power of two normal (results down to subnormals).
    e2 * e2 * pow2(h) * pow2(k - h)
}

/// Natural logarithm; NaN below 0, `ln(f32::MIN_POSITIVE)` at 0.
pub(crate) fn ln(x: f32) -> f32 {
    if x.is_nan() || x < 0.0 {
        return f32::NAN;
    }
    let x = x.max(f32::MIN_POSITIVE);
    let y = if x >= 1.0 {
        F32Ext::ln(x)
    } else {
        -F32Ext::ln(1.0 / x)
    };
    if !y.is_finite() {
        return y;
    }
    y + (x * exp(-y) - 1.0)
}

/// Square root; 0 for `x <= 0` or NaN.
pub(crate) fn sqrt(x: f32) -> f32 {
    if x.is_nan() || x <= 0.0 {
        return 0.0;
    }
    if x == f32::INFINITY {
        return x;
    }
    let mut y = F32Ext::sqrt(x);
    for _ in 0..3 {
        y = 0.5 * (y + x / y);
    }
    y
}
