//! The correction from the published turbulence intensity to the intensity of Gaussian
//! velocity fluctuations.

/// The published turbulence intensity `0.851 sqrt(tau05^2 - T05^2) / T` that Gaussian
/// velocity fluctuations of intensity 0, 0.025, ..., 0.6 produce, when the transit time is
/// `spacing / V` with `V ~ N(V0, (Tu V0)^2)`. The transit time is then skewed (slow bubbles
/// take much longer), its mode falls below `spacing / V0` and the published estimate reads
/// low: 0.32 for a true 0.4. Computed for this table from the exact transit-time density
/// `p(u) ~ exp(-(1/u - 1)^2 / (2 Tu^2)) / u^2` (an analytic case: mode and half-maximum
/// crossings found numerically on a fine grid).
const TU_PUBLISHED_OF_GAUSSIAN: [f32; 25] = [
    0.00000, 0.02502, 0.04990, 0.07447, 0.09861, 0.12217, 0.14504, 0.16711, 0.18831, 0.20857,
    0.22786, 0.24614, 0.26342, 0.27971, 0.29504, 0.30944, 0.32295, 0.33562, 0.34749, 0.35861,
    0.36904, 0.37882, 0.38799, 0.39660, 0.40469,
];
/// Step of the true intensity between entries of [`TU_PUBLISHED_OF_GAUSSIAN`].
const TU_TABLE_STEP: f32 = 0.025;

/// The turbulence intensity of Gaussian velocity fluctuations that would give the published
/// estimate `published` (inverts `TU_PUBLISHED_OF_GAUSSIAN` by linear interpolation).
/// Use it where fluctuations are large (above about 0.2 the published formula reads more
/// than 5 % low); `None` beyond the table (a published value above 0.405, true Tu > 0.6) or
/// for a negative or non-finite input.
pub fn tu_for_gaussian_velocity(published: f32) -> Option<f32> {
    if !published.is_finite() || published < 0.0 {
        return None;
    }
    let t = &TU_PUBLISHED_OF_GAUSSIAN;
    for i in 1..t.len() {
        if published <= t[i] {
            let frac = (published - t[i - 1]) / (t[i] - t[i - 1]);
            return Some(((i - 1) as f32 + frac) * TU_TABLE_STEP);
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_intensities_are_unchanged_and_large_ones_corrected() {
        // For small fluctuations the transit time is Gaussian too and the published formula
        // is exact (0.851 = 1/sqrt(2 ln 2) turns a half width into a standard deviation).
        let small = tu_for_gaussian_velocity(0.05).unwrap();
        assert!((small - 0.05).abs() < 0.001, "{small}");
        let big = tu_for_gaussian_velocity(0.32295).unwrap();
        assert!((big - 0.4).abs() < 1e-4, "{big}");
        assert_eq!(tu_for_gaussian_velocity(0.5), None);
        assert_eq!(tu_for_gaussian_velocity(f32::NAN), None);
        assert_eq!(tu_for_gaussian_velocity(-0.1), None);
    }
}
