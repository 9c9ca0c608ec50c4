//! Fixed-point units of the wire, and the conversion of chain records into bodies.
//!
//! Every quantiser rounds to the nearest step and saturates at the ends of its integer type;
//! NaN maps to 0 (the `as` casts of Rust saturate and send NaN to 0, so nothing here can
//! panic or wrap). Units:
//!
//! | quantity                          | unit      | type |
//! |-----------------------------------|-----------|------|
//! | fraction (C, peak, Tu, rmse)      | 1e-4      | u16  |
//! | rate                              | 0.01 Hz   | u32  |
//! | sample rate                       | 0.001 Hz  | u32  |
//! | time (chords)                     | 1 µs      | u32  |
//! | velocity                          | 1 mm/s    | i16  |
//! | length (elevation, x, Y90, depth) | 0.1 mm    | i32/u32 |
//! | tip spacing                       | 0.01 mm   | u16  |
//! | profile exponent                  | 1e-3      | u16  |

use crate::record::ProbeWindow;
use crate::station::{ProbeArrival, ProfileRecord};
use crate::wire::frame::{ChordTimes, Correlation, WindowResult};

/// Steps per unit of a fraction.
pub const FRACTION_SCALE: f32 = 10_000.0;
/// Steps per hertz of a rate.
pub const RATE_SCALE: f32 = 100.0;
/// Steps per hertz of a sample rate.
pub const SAMPLE_RATE_SCALE: f32 = 1_000.0;
/// Steps per second of a time.
pub const TIME_SCALE: f32 = 1_000_000.0;
/// Steps per m/s of a velocity.
pub const VELOCITY_SCALE: f32 = 1_000.0;
/// Steps per millimetre of a length.
pub const LENGTH_SCALE: f32 = 10.0;
/// Steps per millimetre of a tip spacing.
pub const SPACING_SCALE: f32 = 100.0;
/// Steps per unit of a profile exponent.
pub const EXPONENT_SCALE: f32 = 1_000.0;

#[inline]
fn unsigned(x: f32, scale: f32) -> f32 {
    // NaN fails the comparison and becomes 0; +0.5 then truncation rounds to nearest.
    if x > 0.0 {
        x * scale + 0.5
    } else {
        0.0
    }
}

#[inline]
fn signed(x: f32, scale: f32) -> f32 {
    // Round half away from zero; the cast truncates toward zero and saturates.
    let y = x * scale;
    if y >= 0.0 {
        y + 0.5
    } else {
        y - 0.5
    }
}

/// A fraction (0..=1, e.g. void fraction, correlation peak, Tu) -> 1e-4 steps.
pub fn fraction(x: f32) -> u16 {
    unsigned(x, FRACTION_SCALE) as u16
}

/// A level in ADC counts -> whole counts (rounded half away from zero, saturating).
pub fn counts(x: f32) -> i16 {
    signed(x, 1.0) as i16
}

/// 1e-4 steps -> fraction.
pub fn from_fraction(q: u16) -> f32 {
    q as f32 / FRACTION_SCALE
}

/// A rate in Hz -> 0.01 Hz steps.
pub fn rate(hz: f32) -> u32 {
    unsigned(hz, RATE_SCALE) as u32
}

/// 0.01 Hz steps -> Hz.
pub fn from_rate(q: u32) -> f32 {
    q as f32 / RATE_SCALE
}

/// A sample rate in Hz -> millihertz.
pub fn sample_rate(hz: f32) -> u32 {
    unsigned(hz, SAMPLE_RATE_SCALE) as u32
}

/// Millihertz -> Hz.
pub fn from_sample_rate(q: u32) -> f32 {
    (q as f64 / SAMPLE_RATE_SCALE as f64) as f32
}

/// A duration of `samples` at `sample_rate_hz` -> microseconds (0 for a bad rate).
pub fn micros_from_samples(samples: f32, sample_rate_hz: f32) -> u32 {
    if sample_rate_hz > 0.0 {
        unsigned(samples / sample_rate_hz, TIME_SCALE) as u32
    } else {
        0
    }
}

/// Microseconds -> seconds.
pub fn from_micros(q: u32) -> f32 {
    q as f32 / TIME_SCALE
}

/// A velocity in m/s -> mm/s (signed, saturating at ±32.767 m/s).
pub fn velocity(m_s: f32) -> i16 {
    signed(m_s, VELOCITY_SCALE) as i16
}

/// mm/s -> m/s.
pub fn from_velocity(q: i16) -> f32 {
    q as f32 / VELOCITY_SCALE
}

/// A length in mm -> 0.1 mm steps (signed).
pub fn length(mm: f32) -> i32 {
    signed(mm, LENGTH_SCALE) as i32
}

/// A length in mm that cannot be negative -> 0.1 mm steps.
pub fn length_unsigned(mm: f32) -> u32 {
    unsigned(mm, LENGTH_SCALE) as u32
}

/// 0.1 mm steps -> mm.
pub fn from_length(q: i32) -> f32 {
    q as f32 / LENGTH_SCALE
}

/// A tip spacing in mm -> 0.01 mm steps.
pub fn spacing(mm: f32) -> u16 {
    unsigned(mm, SPACING_SCALE) as u16
}

/// 0.01 mm steps -> mm.
pub fn from_spacing(q: u16) -> f32 {
    q as f32 / SPACING_SCALE
}

/// A profile exponent -> 1e-3 steps.
pub fn exponent(n: f32) -> u16 {
    unsigned(n, EXPONENT_SCALE) as u16
}

/// 1e-3 steps -> exponent.
pub fn from_exponent(q: u16) -> f32 {
    q as f32 / EXPONENT_SCALE
}

impl WindowResult {
    /// The wire form of a chain record, at `sample_rate_hz` frames per second.
    ///
    /// The correlation fields stay empty here (the velocity needs the tip spacing, which the
    /// record does not carry): the caller fills them in. A window longer than `u32::MAX`
    /// frames saturates.
    pub fn from_probe_window<const L: usize>(
        rec: &ProbeWindow<L>,
        sample_rate_hz: f32,
    ) -> WindowResult {
        let lead = &rec.lead;
        let c = &lead.bubble_chords;
        let us = |samples: Option<f32>| micros_from_samples(samples.unwrap_or(0.0), sample_rate_hz);
        let chords = (c.count > 0).then(|| ChordTimes {
            mean: us(c.mean()),
            median: us(c.median()),
            p10: us(c.quantile(0.1)),
            p90: us(c.quantile(0.9)),
        });
        WindowResult {
            probe: rec.probe,
            start: rec.start,
            frames: u32::try_from(rec.end.saturating_sub(rec.start)).unwrap_or(u32::MAX),
            void_fraction: fraction(lead.void_fraction().unwrap_or(0.0)),
            bubble_rate: rate(lead.bubble_count_rate(sample_rate_hz).unwrap_or(0.0)),
            bubbles: lead.bubbles,
            chords,
            correlation: None,
            flags: rec.flags.0,
        }
    }

    /// [`from_probe_window`](Self::from_probe_window) with the correlation filled in for a
    /// dual-tip probe whose tips are `spacing_mm` apart: velocity from
    /// [`CorrelationResult::velocity_m_s`](crate::CorrelationResult::velocity_m_s), peak
    /// coefficient and Tu. No peak (or no spacing) leaves the correlation empty.
    pub fn from_probe_window_with_spacing<const L: usize>(
        rec: &ProbeWindow<L>,
        sample_rate_hz: f32,
        spacing_mm: Option<f32>,
    ) -> WindowResult {
        let mut w = Self::from_probe_window(rec, sample_rate_hz);
        w.correlation = rec.correlation.as_ref().and_then(|c| {
            let v = c.velocity_m_s(spacing_mm?, sample_rate_hz)?;
            Some(Correlation {
                velocity: velocity(v),
                peak: fraction(c.peak_coefficient?),
                turbulence: c.turbulence_intensity.map(fraction),
            })
        });
        w
    }

    /// Void fraction (0..=1).
    pub fn void_fraction_value(&self) -> f32 {
        from_fraction(self.void_fraction)
    }

    /// Bubble count rate, Hz.
    pub fn bubble_rate_hz(&self) -> f32 {
        from_rate(self.bubble_rate)
    }

    /// Interfacial velocity, m/s.
    pub fn velocity_m_s(&self) -> Option<f32> {
        self.correlation.map(|c| from_velocity(c.velocity))
    }

    /// Turbulence intensity.
    pub fn turbulence_intensity(&self) -> Option<f32> {
        self.correlation
            .and_then(|c| c.turbulence)
            .map(from_fraction)
    }
}

// The station's records in wire form: the wire depends on the chain's records, never the
// other way round.

impl ProfileRecord {
    /// The wire form (kind 0x04) of this record for station `station`.
    pub fn to_wire(&self, station: u8) -> crate::wire::ProfileFit {
        use crate::profile::ProfileModel;
        let fit = &self.fit;
        let e = &fit.errors;
        crate::wire::ProfileFit {
            station,
            slice_start: self.start,
            slice_frames: u32::try_from(self.end.saturating_sub(self.start)).unwrap_or(u32::MAX),
            probes_used: fit.points_used,
            y90: fit.y90_mm.map(length_unsigned),
            mean_void_fraction: fit.mean_void_fraction.map(fraction),
            equivalent_depth: fit.equivalent_depth_mm.map(length_unsigned),
            exponent: fit.power_law.map(|p| exponent(p.exponent)),
            fit_rmse: fit.power_law.map(|p| fraction(p.rmse)),
            flags: fit.flags.0 as u32,
            estimate: match fit.estimate {
                None => 0,
                Some(ProfileModel::PowerLaw) => 1,
                Some(ProfileModel::Exponential) => 2,
                Some(ProfileModel::Trapezoid) => 3,
            },
            y90_se: e.y90_mm.map(spacing),
            mean_void_fraction_se: e.mean_void_fraction.map(fraction),
            exponent_se: e.shape.map(exponent),
            equivalent_depth_se: e.equivalent_depth_mm.map(spacing),
        }
    }
}

impl ProbeArrival {
    /// The wire form (kind 0x03) of this arrival for station `station`.
    pub fn to_wire(&self, station: u8) -> crate::wire::FrontArrival {
        crate::wire::FrontArrival {
            probe: self.probe,
            station,
            frame: self.arrival,
        }
    }
}

// ---------------------------------------------------------------------------------------
// Tip health (kind 0x09) from window records
// ---------------------------------------------------------------------------------------

impl crate::wire::tip_health::TipState {
    /// The state of a tip from its window statistics.
    pub fn from_stats(t: &crate::record::TipStats) -> Self {
        crate::wire::tip_health::TipState {
            levels: t.levels.map(|l| crate::wire::tip_health::TipLevels {
                air: counts(l.air),
                water: counts(l.water),
            }),
            interfaces: t.bubbles.saturating_add(t.droplets),
            bubbles: t.bubbles,
            void_fraction: fraction(t.void_fraction().unwrap_or(0.0)),
            flags: t.flags.0,
        }
    }
}

impl crate::wire::tip_health::TipReport {
    /// The report of a window record.
    pub fn from_probe_window<const L: usize>(r: &crate::record::ProbeWindow<L>) -> Self {
        crate::wire::tip_health::TipReport {
            probe: r.probe,
            start: r.start,
            frames: u32::try_from(r.end.saturating_sub(r.start)).unwrap_or(u32::MAX),
            leading: crate::wire::tip_health::TipState::from_stats(&r.lead),
            trailing: r
                .trail
                .as_ref()
                .map(crate::wire::tip_health::TipState::from_stats),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantisers_round_and_saturate() {
        assert_eq!(fraction(0.5), 5000);
        assert_eq!(fraction(0.12345), 1235);
        assert_eq!(fraction(-1.0), 0);
        assert_eq!(fraction(f32::NAN), 0);
        assert_eq!(fraction(1e9), u16::MAX);
        assert_eq!(rate(123.456), 12346);
        assert_eq!(rate(f32::INFINITY), u32::MAX);
        assert_eq!(velocity(2.5), 2500);
        assert_eq!(velocity(-2.5004), -2500);
        assert_eq!(velocity(1e6), i16::MAX);
        assert_eq!(velocity(-1e6), i16::MIN);
        assert_eq!(velocity(f32::NAN), 0);
        assert_eq!(micros_from_samples(20.0, 20_000.0), 1000);
        assert_eq!(micros_from_samples(20.0, 0.0), 0);
        assert_eq!(length(-12.34), -123);
        assert_eq!(spacing(6.0), 600);
        assert_eq!(sample_rate(20_000.0), 20_000_000);
        assert!((from_sample_rate(20_000_000) - 20_000.0).abs() < 1e-3);
    }

    #[test]
    fn a_tip_state_counts_both_interfaces_and_rounds_its_levels() {
        let t = crate::record::TipStats {
            frames: 10_000,
            air_frames: 3_000,
            bubbles: 9,
            droplets: 8,
            levels: Some(crate::levels::Levels {
                air: 25_100.4,
                water: -2_999.5,
            }),
            flags: crate::Flags::SATURATED,
            ..crate::record::TipStats::ZERO
        };
        let s = crate::wire::tip_health::TipState::from_stats(&t);
        // Levels rounded to the nearest count, half away from zero (spec, TipLevels).
        assert_eq!(
            s.levels,
            Some(crate::wire::tip_health::TipLevels {
                air: 25_100,
                water: -3_000
            })
        );
        assert_eq!(s.levels.unwrap().swing(), 28_100);
        // Air -> water (bubbles closed) plus water -> air (droplets closed).
        assert_eq!((s.interfaces, s.bubbles), (17, 9));
        assert_eq!(s.void_fraction, 3_000);
        assert_eq!(s.flags, crate::Flags::SATURATED.0);
        // 17 interfaces in 10 000 frames at 40 kHz (0.25 s): 68 per second.
        assert_eq!(s.interfaces_per_s(10_000, 40_000.0), Some(68.0));
        assert_eq!(s.interfaces_per_s(0, 40_000.0), None);
        // A tip sitting in one phase: no interface, no levels yet, no division by zero.
        let dead = crate::wire::tip_health::TipState::from_stats(&crate::record::TipStats::ZERO);
        assert_eq!(
            (dead.interfaces, dead.levels, dead.void_fraction),
            (0, None, 0)
        );
    }
}
