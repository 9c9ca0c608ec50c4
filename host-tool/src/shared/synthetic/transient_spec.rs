//! The `[transient]` table of a scenario and the generating values it gives at each time
//! since the front: the parameters of the dam-break model of [`super::transient`], which
//! describes the model and generates the flows and truth files from them.

use serde::{Deserialize, Serialize};

use super::SynthError;

/// Sub-steps per slice when averaging the generating values over it.
pub(crate) const AVERAGE_STEPS: usize = 200;

/// The `[transient]` table of a scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct TransientSpec {
    /// Reservoir depth `d0`, m: Ritter's celerity `2 sqrt(g d0)`; also the layout's
    /// `reference_depth_m`.
    pub reservoir_depth_m: f64,
    /// Streamwise position of the dam, mm.
    pub dam_x_mm: f64,
    /// Release (gate opening) time, s from the start of the record.
    pub release_s: f64,
    /// Stations: streamwise positions, mm.
    pub stations_x_mm: Vec<f64>,
    /// Probe elevations of every station, mm, bottom up.
    pub elevations_mm: Vec<f64>,
    /// Elevations whose probes have two tips (the others one).
    pub dual_tip_elevations_mm: Vec<f64>,
    /// Probes (by generated name) stuck in air for the whole record.
    pub dead_probes: Vec<String>,
    /// `Y90` at the leading edge, mm.
    pub y90_front_mm: f64,
    /// `Y90` long behind the front, mm.
    pub y90_final_mm: f64,
    /// Time constant of `Y90`, s.
    pub y90_time_s: f64,
    /// Power-law exponent at the leading edge (below 1: `Cmean > 0.45`).
    pub n_front: f64,
    /// Exponent long behind the front.
    pub n_final: f64,
    /// Time constant of the exponent, s.
    pub n_time_s: f64,
    /// Peak bubble count rate (at `C = 0.5`), Hz.
    pub bubble_rate_max_hz: f64,
    /// Velocity at the front, m/s (default: the front celerity).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub velocity_front_m_s: Option<f64>,
    /// Velocity long behind the front, m/s.
    pub velocity_final_m_s: f64,
    /// Time constant of the velocity, s.
    pub velocity_time_s: f64,
    /// Turbulence intensity.
    pub turbulence_intensity: f64,
    /// Length of the truth slices, s.
    pub slice_s: f64,
    /// Longest mean chord time (air or water), s: bounds the chords near `C = 0` and `1`.
    pub longest_mean_chord_s: f64,
    /// The tips sit in still water before the front (and dead probes stay there), instead
    /// of in air over a dry bed.
    pub submerged: bool,
}

impl Default for TransientSpec {
    fn default() -> Self {
        TransientSpec {
            reservoir_depth_m: 0.1,
            dam_x_mm: -400.0,
            release_s: 0.05,
            stations_x_mm: vec![0.0],
            elevations_mm: (0..10).map(|i| 5.0 + 10.0 * i as f64).collect(),
            dual_tip_elevations_mm: Vec::new(),
            dead_probes: Vec::new(),
            y90_front_mm: 50.0,
            y90_final_mm: 75.0,
            y90_time_s: 0.3,
            n_front: 0.6,
            n_final: 2.0,
            n_time_s: 0.25,
            bubble_rate_max_hz: 600.0,
            velocity_front_m_s: None,
            velocity_final_m_s: 1.2,
            velocity_time_s: 0.5,
            turbulence_intensity: 0.15,
            slice_s: 0.05,
            longest_mean_chord_s: 0.02,
            submerged: false,
        }
    }
}

/// The generating values at time `tau` since the front.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Generating {
    /// `Y90`, mm.
    pub y90_mm: f64,
    /// Power-law exponent.
    pub n: f64,
    /// Velocity, m/s.
    pub velocity_m_s: f64,
}

impl Generating {
    /// The depth-averaged void fraction of the power law, `0.9 / (1 + n)`.
    pub fn mean_void_fraction(&self) -> f64 {
        0.9 / (1.0 + self.n)
    }

    /// Local void fraction at `y_mm`.
    pub fn void_fraction(&self, y_mm: f64) -> f64 {
        if y_mm <= 0.0 {
            return 0.0;
        }
        (0.9 * (y_mm / self.y90_mm).powf(self.n)).min(1.0)
    }
}

impl TransientSpec {
    /// The bubble count rate at void fraction `c` (0 at `c = 0` or `1`), Hz.
    pub fn bubble_rate_hz(&self, c: f64) -> f64 {
        if !(c > 0.0 && c < 1.0) {
            return 0.0;
        }
        let t = self.longest_mean_chord_s;
        (4.0 * self.bubble_rate_max_hz * c * (1.0 - c))
            .max(c / t)
            .max((1.0 - c) / t)
    }

    /// Ritter's front celerity, m/s.
    pub fn celerity_m_s(&self) -> f64 {
        crate::shared::hydraulics::ritter_front_celerity(self.reservoir_depth_m).unwrap_or(f64::NAN)
    }

    /// Arrival time at station `x_mm`, s.
    pub fn arrival_s(&self, x_mm: f64) -> f64 {
        self.release_s + (x_mm - self.dam_x_mm) * 1e-3 / self.celerity_m_s()
    }

    /// The generating values `tau` seconds after the front.
    pub fn at(&self, tau: f64) -> Generating {
        let tau = tau.max(0.0);
        let relax = |a: f64, b: f64, t: f64| b + (a - b) * (-tau / t).exp();
        let v0 = self
            .velocity_front_m_s
            .unwrap_or_else(|| self.celerity_m_s());
        Generating {
            y90_mm: relax(self.y90_front_mm, self.y90_final_mm, self.y90_time_s),
            n: relax(self.n_front, self.n_final, self.n_time_s),
            velocity_m_s: relax(v0, self.velocity_final_m_s, self.velocity_time_s),
        }
    }

    /// The generating values averaged over `tau` in `[a, b]` (midpoint rule).
    pub fn average(&self, a: f64, b: f64) -> (Generating, f64) {
        let mut sum = (0.0, 0.0, 0.0, 0.0);
        for k in 0..AVERAGE_STEPS {
            let t = a + (b - a) * (k as f64 + 0.5) / AVERAGE_STEPS as f64;
            let g = self.at(t);
            sum.0 += g.y90_mm;
            sum.1 += g.n;
            sum.2 += g.velocity_m_s;
            sum.3 += g.mean_void_fraction();
        }
        let k = AVERAGE_STEPS as f64;
        (
            Generating {
                y90_mm: sum.0 / k,
                n: sum.1 / k,
                velocity_m_s: sum.2 / k,
            },
            sum.3 / k,
        )
    }

    /// Check the values (keys named as in the file).
    pub fn validate(&self) -> Result<(), SynthError> {
        let bad = |key: &str, reason: String| SynthError::Invalid {
            key: format!("transient.{key}"),
            reason,
        };
        let pos = |key: &str, x: f64| {
            if x.is_finite() && x > 0.0 {
                Ok(())
            } else {
                Err(bad(key, format!("must be positive and finite, got {x}")))
            }
        };
        pos("reservoir_depth_m", self.reservoir_depth_m)?;
        pos("y90_front_mm", self.y90_front_mm)?;
        pos("y90_final_mm", self.y90_final_mm)?;
        pos("y90_time_s", self.y90_time_s)?;
        pos("n_front", self.n_front)?;
        pos("n_final", self.n_final)?;
        pos("n_time_s", self.n_time_s)?;
        pos("bubble_rate_max_hz", self.bubble_rate_max_hz)?;
        pos("velocity_final_m_s", self.velocity_final_m_s)?;
        pos("velocity_time_s", self.velocity_time_s)?;
        pos("slice_s", self.slice_s)?;
        pos("longest_mean_chord_s", self.longest_mean_chord_s)?;
        if let Some(v) = self.velocity_front_m_s {
            pos("velocity_front_m_s", v)?;
        }
        for (key, x) in [
            ("dam_x_mm", self.dam_x_mm),
            ("release_s", self.release_s),
            ("turbulence_intensity", self.turbulence_intensity),
        ] {
            if !x.is_finite() {
                return Err(bad(key, format!("must be finite, got {x}")));
            }
        }
        if self.stations_x_mm.is_empty() || self.stations_x_mm.len() > 26 {
            return Err(bad("stations_x_mm", "give 1 to 26 stations".into()));
        }
        if self.elevations_mm.is_empty() || self.elevations_mm.len() > 32 {
            return Err(bad("elevations_mm", "give 1 to 32 elevations".into()));
        }
        if self
            .elevations_mm
            .iter()
            .any(|y| !(y.is_finite() && *y > 0.0))
        {
            return Err(bad("elevations_mm", "elevations must be positive".into()));
        }
        if self
            .stations_x_mm
            .iter()
            .any(|&x| !(x.is_finite() && x > self.dam_x_mm))
        {
            return Err(bad(
                "stations_x_mm",
                "stations must lie downstream of the dam (x > dam_x_mm)".into(),
            ));
        }
        Ok(())
    }
}
