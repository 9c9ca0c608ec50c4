//! What the live view knows of one station of a transient flow: its latest profile fit,
//! front and decay series.

use frothline_core::decay::{DecayFit, DecayTracker};
use frothline_core::wire::quant::{from_exponent, from_fraction, from_spacing};
use frothline_core::wire::{FrontArrival, ProfileFit, PROFILE_ESTIMATES};

/// Points of a station's decay series (Cmean against time since the front) kept and fitted.
pub const DECAY_POINTS: usize = 256;

/// A station's latest profile fit, as received (kind 0x04).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LiveProfile {
    /// Slice start, seconds of device time.
    pub start_s: f64,
    /// Slice end, seconds of device time.
    pub end_s: f64,
    /// Slice start minus the station's front, s (when the front is known).
    pub since_front_s: Option<f64>,
    /// Elevation where C = 0.9, mm.
    pub y90_mm: Option<f64>,
    /// Depth-averaged void fraction over 0..Y90.
    pub mean_void_fraction: Option<f64>,
    /// Power-law exponent n of C = 0.9 (y/Y90)^n.
    pub exponent: Option<f64>,
    /// RMSE of the power-law fit.
    pub rmse: Option<f64>,
    /// Probes that contributed.
    pub probes_used: u8,
    /// Which estimate Y90 and Cmean are (`power_law`, `exponential`, `trapezoid`).
    pub estimate: Option<&'static str>,
    /// Standard error of Y90, mm.
    pub y90_se_mm: Option<f64>,
    /// Standard error of Cmean.
    pub mean_void_fraction_se: Option<f64>,
    /// Standard error of n.
    pub exponent_se: Option<f64>,
}

/// What the live view knows of one station of a transient flow.
#[derive(Clone, Debug, Default)]
pub struct StationLive {
    /// The front arrival at the station: the earliest probe arrival, frames of device time.
    pub front_frame: Option<u64>,
    /// The same, seconds of device time.
    pub front_s: Option<f64>,
    /// Probe arrivals received: (probe index, device time, s).
    pub arrivals: Vec<(usize, f64)>,
    /// The latest profile fit.
    pub profile: Option<LiveProfile>,
    /// Profile fits received.
    pub profiles: u64,
    /// Cmean against time since the front, s.
    pub series: DecayTracker<DECAY_POINTS>,
    /// The host's decay fit of [`StationLive::series`] (refitted at each profile).
    pub decay: Option<DecayFit>,
    /// Start frame of the latest profile's slice.
    pub last_slice: Option<u64>,
}

impl StationLive {
    /// Take a front arrival (`fs`: the device's sample rate, Hz).
    pub fn front(&mut self, f: &FrontArrival, fs: f64) {
        // A front before the latest slice: the device's clock went back (a new run).
        if self.last_slice.is_some_and(|t| f.frame < t) {
            *self = StationLive::default();
        }
        let s = f.frame as f64 / fs;
        self.arrivals.push((f.probe as usize, s));
        if self.front_frame.is_none_or(|t| f.frame < t) {
            self.front_frame = Some(f.frame);
            self.front_s = Some(s);
        }
    }

    /// Take a profile fit: the latest fit, and a point of the decay series (then refit).
    pub fn profile(&mut self, p: &ProfileFit, fs: f64) {
        // A slice before the latest one: a new run; its series starts again.
        if self.last_slice.is_some_and(|t| p.slice_start <= t) {
            self.series.clear();
            self.decay = None;
        }
        self.last_slice = Some(p.slice_start);
        let since = self
            .front_frame
            .map(|f| (p.slice_start as f64 - f as f64) / fs);
        let fit = LiveProfile {
            start_s: p.slice_start as f64 / fs,
            end_s: (p.slice_start + p.slice_frames as u64) as f64 / fs,
            since_front_s: since,
            y90_mm: p.y90.map(|v| v as f64 / 10.0),
            mean_void_fraction: p.mean_void_fraction.map(|q| from_fraction(q) as f64),
            exponent: p.exponent.map(|q| from_exponent(q) as f64),
            rmse: p.fit_rmse.map(|q| from_fraction(q) as f64),
            probes_used: p.probes_used,
            estimate: PROFILE_ESTIMATES
                .get(p.estimate as usize)
                .copied()
                .filter(|&e| e != "none"),
            y90_se_mm: p.y90_se.map(|q| from_spacing(q) as f64),
            mean_void_fraction_se: p.mean_void_fraction_se.map(|q| from_fraction(q) as f64),
            exponent_se: p.exponent_se.map(|q| from_exponent(q) as f64),
        };
        if let (Some(t), Some(c)) = (since, fit.mean_void_fraction) {
            if self.series.push(t as f32, c as f32).is_ok() {
                self.decay = Some(self.series.fit(f32::NAN));
            }
        }
        self.profile = Some(fit);
        self.profiles += 1;
    }
}
