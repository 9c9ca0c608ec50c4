//! The simulated device's status frame (kind 0x0C): a supply voltage that wanders slowly
//! around its nominal value, and the time since power-up.
//!
//! A regulated 3.3 V rail read through a 12-bit converter moves by a few millivolts with
//! load and temperature, and its reading jitters by a count or two (about 1 mV per count
//! at 3.3 V / 4095): the simulated supply is the nominal value, a slow swing of ±6 mV over
//! five minutes, and ±2 mV of jitter that changes once a second. It is deterministic (a
//! hash of the second), so a test sees the same values on every run.

use frothline_core::wire::DeviceStatus;
use std::time::Duration;

/// Amplitude of the slow swing, mV.
const SWING_MV: f64 = 6.0;
/// Period of the slow swing.
const SWING_PERIOD_S: f64 = 300.0;
/// Largest jitter, mV (either side).
const JITTER_MV: i64 = 2;

/// The simulated supply `since_power_up` after power-up, mV.
pub fn simulated_supply(nominal_mv: u16, since_power_up: Duration) -> u16 {
    let t = since_power_up.as_secs_f64();
    let swing = SWING_MV * (std::f64::consts::TAU * t / SWING_PERIOD_S).sin();
    // SplitMix64 of the whole second: a reproducible jitter without a generator's state.
    let mut z = since_power_up.as_secs().wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    let jitter = (z % (2 * JITTER_MV as u64 + 1)) as i64 - JITTER_MV;
    let mv = f64::from(nominal_mv) + swing.round() + jitter as f64;
    mv.clamp(0.0, f64::from(u16::MAX)) as u16
}

/// The status the simulated device sends `since_power_up` (its own clock, at the speed of
/// its sample clock) after power-up. It has no field log: `logger` is None.
pub fn status(nominal_mv: Option<u16>, since_power_up: Duration) -> DeviceStatus {
    DeviceStatus {
        supply_mv: nominal_mv.map(|n| simulated_supply(n, since_power_up)),
        uptime_ms: u64::try_from(since_power_up.as_millis()).unwrap_or(u64::MAX),
        logger: None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_supply_stays_within_its_swing_and_jitter() {
        let mut seen = std::collections::BTreeSet::new();
        for s in 0..600 {
            let mv = simulated_supply(3_300, Duration::from_secs(s));
            assert!((3_292..=3_308).contains(&mv), "{mv} at {s} s");
            seen.insert(mv);
        }
        assert!(seen.len() > 5, "it moves: {seen:?}");
        assert_eq!(
            simulated_supply(3_300, Duration::from_millis(1_400)),
            simulated_supply(3_300, Duration::from_millis(1_400))
        );
        let st = status(None, Duration::from_millis(1_500));
        assert_eq!((st.supply_mv, st.uptime_ms), (None, 1_500));
    }
}
