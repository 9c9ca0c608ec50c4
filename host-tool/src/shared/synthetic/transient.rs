//! A transient scenario: a dam-break surge reaching one or more stations of probes.
//!
//! # Model (invented generating values; the arrival times follow Ritter's solution)
//!
//! - **Arrival**: a reservoir of depth `d0` (`reservoir_depth_m`) released at `release_s`
//!   behind a dam at `dam_x_mm` sends a front over the dry bed at Ritter's (1892) ideal
//!   celerity `c = 2 sqrt(g d0)` ([`crate::shared::hydraulics::ritter_front_celerity`]); it reaches
//!   a station at `x` at `t_a = release_s + (x − dam_x) / c`. The front face is taken
//!   vertical at the station (every probe of a station is reached at `t_a`): a steep
//!   roller, and a profile that holds from the first instant.
//! - **Before the front** the tips are dry: `C = 1`, no bubbles. At `t_a` a tip is wetted
//!   (an air -> water interface exactly at `t_a`), then follows the flow. With
//!   `submerged = true` they sit in still water instead (`C = 0`, a bore over a still
//!   layer deeper than the array): at `t_a` the first air of the roller reaches them.
//! - **Behind the front**, with `tau = t − t_a`, the local void fraction at elevation `y`
//!   follows the power law of DESIGN.md §1 continued up to air:
//!   `C(y, tau) = min(1, 0.9 (y / Y90(tau))^n(tau))`, with
//!   `Y90(tau) = Y90_f + (Y90_0 − Y90_f) exp(−tau / T_y)` and
//!   `n(tau) = n_f + (n_0 − n_f) exp(−tau / T_n)`: a strongly aerated leading edge
//!   (`n_0 < 1`, `Cmean = 0.9 / (1 + n) > 0.45`) de-aerating towards `n_f`, so that
//!   `Cmean(tau)` decays roughly exponentially.
//! - **Bubble count rate** `F = 4 F_max C (1 − C)` (a parabola in C, peaking at `F_max` at
//!   `C = 0.5`; an invented closure of the usual shape), raised where needed so that neither
//!   mean chord (`C/F` in air, `(1 − C)/F` in water) exceeds `longest_mean_chord_s`: the
//!   generator reads the parameters at the start of each chord, and near `C = 0` or `1`
//!   the parabola alone would give chords longer than the flow takes to change.
//! - **Velocity** `V(tau) = V_f + (V_0 − V_f) exp(−tau / T_v)`, `V_0` the front celerity by
//!   default; turbulence intensity constant.
//! - **Dead probes** (by name) sit in air for the whole record.
//!
//! Probes are generated from `stations_x_mm` × `elevations_mm` (names `A1`, `A2`, … for the
//! first station, `B1`, … for the second, bottom up), single-tip except at the elevations in
//! `dual_tip_elevations_mm`; a scenario with `[transient]` must not list `[[probe]]`s.
//!
//! # Truth files
//!
//! - `truth_fronts.csv`: `station, x_mm, arrival_s, celerity_m_s`;
//! - `truth_profile.csv`: per station per slice of `slice_s` from the true arrival:
//!   `station, slice_start_s, slice_end_s, since_front_s, y90_mm, profile_exponent,
//!   depth_averaged_void_fraction, velocity_m_s, arrival_s` (the generating values averaged
//!   over the slice; `Cmean = 0.9 / (1 + n)` averaged likewise);
//! - `truth_windows.csv`: per probe per slice: `probe, station, window_start_s,
//!   window_end_s, since_front_s, void_fraction, bubble_count_rate_hz,
//!   interfacial_velocity_m_s, turbulence_intensity, void_fraction_realised` (model values
//!   averaged over the window, and the air fraction of the generated leading-tip
//!   intervals).

use super::flow::{FlowModel, LocalParams};
use super::intervals::{Interval, ProbeTruth};
use super::scenario::{Resolved, Scenario};
use super::transient_spec::AVERAGE_STEPS;
pub use super::transient_spec::{Generating, TransientSpec};

/// The flow one probe sees (a [`FlowModel`]).
#[derive(Debug, Clone)]
pub struct TransientFlow {
    /// The scenario's transient table.
    pub spec: TransientSpec,
    /// Arrival time at the probe, s (`None`: a dead probe, air throughout).
    pub arrival_s: Option<f64>,
    /// Elevation, mm.
    pub elevation_mm: f64,
}

impl FlowModel for TransientFlow {
    fn at(&self, t_s: f64) -> LocalParams {
        let v0 = self.spec.at(0.0).velocity_m_s;
        let dry = LocalParams {
            void_fraction: if self.spec.submerged { 0.0 } else { 1.0 },
            bubble_rate_hz: 0.0,
            velocity_m_s: v0,
            turbulence_intensity: self.spec.turbulence_intensity,
        };
        let Some(ta) = self.arrival_s.filter(|&ta| t_s >= ta) else {
            return dry;
        };
        let g = self.spec.at(t_s - ta);
        let c = g.void_fraction(self.elevation_mm);
        LocalParams {
            void_fraction: c,
            bubble_rate_hz: self.spec.bubble_rate_hz(c),
            velocity_m_s: g.velocity_m_s,
            turbulence_intensity: self.spec.turbulence_intensity,
        }
    }

    fn front_s(&self) -> Option<f64> {
        self.arrival_s
    }
}

/// One station's true front.
#[derive(Debug, Clone, PartialEq)]
pub struct FrontTruth {
    /// Station name (`S1`, `S2`, …, as the replay names them).
    pub station: String,
    /// Streamwise position, mm.
    pub x_mm: f64,
    /// Arrival time, s.
    pub arrival_s: f64,
    /// Ritter's celerity, m/s.
    pub celerity_m_s: f64,
}

/// The generating profile of one station over one slice.
#[derive(Debug, Clone, PartialEq)]
pub struct SliceTruth {
    /// Station name.
    pub station: String,
    /// Slice start, s.
    pub start_s: f64,
    /// Slice end, s.
    pub end_s: f64,
    /// Start minus the arrival, s.
    pub since_front_s: f64,
    /// Mean `Y90` over the slice, mm.
    pub y90_mm: f64,
    /// Mean exponent.
    pub n: f64,
    /// Mean `0.9 / (1 + n)`.
    pub mean_void_fraction: f64,
    /// Mean velocity, m/s.
    pub velocity_m_s: f64,
    /// The station's arrival, s.
    pub arrival_s: f64,
}

/// The generating values of one probe over one slice.
#[derive(Debug, Clone, PartialEq)]
pub struct WindowTruth {
    /// Probe name.
    pub probe: String,
    /// Station name.
    pub station: String,
    /// Window start, s.
    pub start_s: f64,
    /// Window end, s.
    pub end_s: f64,
    /// Start minus the arrival, s.
    pub since_front_s: f64,
    /// Model void fraction averaged over the window.
    pub void_fraction: f64,
    /// Model bubble count rate averaged over the window, Hz.
    pub bubble_count_rate_hz: f64,
    /// Model velocity averaged over the window, m/s.
    pub velocity_m_s: f64,
    /// Turbulence intensity.
    pub turbulence_intensity: f64,
    /// Air fraction of the generated leading-tip intervals in the window.
    pub void_fraction_realised: f64,
}

/// The truth of a transient capture.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TransientTruth {
    /// One per station.
    pub fronts: Vec<FrontTruth>,
    /// Per station per slice.
    pub slices: Vec<SliceTruth>,
    /// Per probe per slice.
    pub windows: Vec<WindowTruth>,
}

/// The name of station `index` (0-based, in increasing `x_mm`): `S1`, `S2`, … as
/// `frothline replay` names them (its probes are named by letter: `A1`, … at `S1`).
pub fn station_name(index: usize) -> String {
    format!("S{}", index + 1)
}

/// Air time of sorted, non-overlapping `intervals` within `[a, b]`, over `b − a`.
pub fn air_fraction(intervals: &[Interval], a: f64, b: f64) -> f64 {
    let mut air = 0.0;
    for iv in intervals {
        let (s, e) = (iv.start_s.max(a), iv.end_s.min(b));
        if e > s {
            air += e - s;
        }
    }
    air / (b - a)
}

/// The flow models of a transient scenario, one per resolved probe.
pub fn flows(spec: &TransientSpec, resolved: &Resolved) -> Vec<TransientFlow> {
    resolved
        .probes
        .iter()
        .map(|p| TransientFlow {
            spec: spec.clone(),
            arrival_s: (!spec.dead_probes.contains(&p.name)).then(|| spec.arrival_s(p.x_mm)),
            elevation_mm: p.elevation_mm,
        })
        .collect()
}

/// The truth tables of a transient capture (`truth`: the generated intervals, in probe
/// order).
pub fn truth(scenario: &Scenario, resolved: &Resolved, truth: &[ProbeTruth]) -> TransientTruth {
    let mut out = TransientTruth::default();
    let Some(spec) = &scenario.transient else {
        return out;
    };
    let end = scenario.duration_s;
    let mut stations: Vec<f64> = Vec::new();
    for p in &resolved.probes {
        if !stations.contains(&p.x_mm) {
            stations.push(p.x_mm);
        }
    }
    for (s, &x) in stations.iter().enumerate() {
        let name = station_name(s);
        let ta = spec.arrival_s(x);
        out.fronts.push(FrontTruth {
            station: name.clone(),
            x_mm: x,
            arrival_s: ta,
            celerity_m_s: spec.celerity_m_s(),
        });
        let mut k = 0usize;
        loop {
            let a = ta + k as f64 * spec.slice_s;
            let b = a + spec.slice_s;
            if b > end + 1e-12 || a < 0.0 && b <= 0.0 {
                break;
            }
            let tau = (a - ta, b - ta);
            let (g, cmean) = spec.average(tau.0, tau.1);
            out.slices.push(SliceTruth {
                station: name.clone(),
                start_s: a,
                end_s: b,
                since_front_s: tau.0,
                y90_mm: g.y90_mm,
                n: g.n,
                mean_void_fraction: cmean,
                velocity_m_s: g.velocity_m_s,
                arrival_s: ta,
            });
            for (p, t) in resolved.probes.iter().zip(truth) {
                if p.x_mm != x {
                    continue;
                }
                let flow = TransientFlow {
                    spec: spec.clone(),
                    arrival_s: (!spec.dead_probes.contains(&p.name)).then_some(ta),
                    elevation_mm: p.elevation_mm,
                };
                let (mut c, mut f, mut v) = (0.0, 0.0, 0.0);
                for j in 0..AVERAGE_STEPS {
                    let q = flow.at(a + (b - a) * (j as f64 + 0.5) / AVERAGE_STEPS as f64);
                    c += q.void_fraction;
                    f += q.bubble_rate_hz;
                    v += q.velocity_m_s;
                }
                let n = AVERAGE_STEPS as f64;
                out.windows.push(WindowTruth {
                    probe: p.name.clone(),
                    station: name.clone(),
                    start_s: a,
                    end_s: b,
                    since_front_s: tau.0,
                    void_fraction: c / n,
                    bubble_count_rate_hz: f / n,
                    velocity_m_s: v / n,
                    turbulence_intensity: spec.turbulence_intensity,
                    void_fraction_realised: air_fraction(&t.leading(), a, b),
                });
            }
            k += 1;
        }
    }
    out
}

fn csv_bytes(header: &[&str], rows: Vec<Vec<String>>) -> Result<Vec<u8>, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(header)?;
    for r in rows {
        w.write_record(r)?;
    }
    w.into_inner().map_err(|e| e.into_error().into())
}

/// `truth_fronts.csv`.
pub fn fronts_csv(t: &TransientTruth) -> Result<Vec<u8>, csv::Error> {
    csv_bytes(
        &["station", "x_mm", "arrival_s", "celerity_m_s"],
        t.fronts
            .iter()
            .map(|f| {
                vec![
                    f.station.clone(),
                    f.x_mm.to_string(),
                    f.arrival_s.to_string(),
                    f.celerity_m_s.to_string(),
                ]
            })
            .collect(),
    )
}

/// `truth_profile.csv`.
pub fn profile_csv(t: &TransientTruth) -> Result<Vec<u8>, csv::Error> {
    csv_bytes(
        &[
            "station",
            "slice_start_s",
            "slice_end_s",
            "since_front_s",
            "y90_mm",
            "profile_exponent",
            "depth_averaged_void_fraction",
            "velocity_m_s",
            "arrival_s",
        ],
        t.slices
            .iter()
            .map(|s| {
                vec![
                    s.station.clone(),
                    s.start_s.to_string(),
                    s.end_s.to_string(),
                    s.since_front_s.to_string(),
                    s.y90_mm.to_string(),
                    s.n.to_string(),
                    s.mean_void_fraction.to_string(),
                    s.velocity_m_s.to_string(),
                    s.arrival_s.to_string(),
                ]
            })
            .collect(),
    )
}

/// `truth_windows.csv`.
pub fn windows_csv(t: &TransientTruth) -> Result<Vec<u8>, csv::Error> {
    csv_bytes(
        &[
            "probe",
            "station",
            "window_start_s",
            "window_end_s",
            "since_front_s",
            "void_fraction",
            "bubble_count_rate_hz",
            "interfacial_velocity_m_s",
            "turbulence_intensity",
            "void_fraction_realised",
        ],
        t.windows
            .iter()
            .map(|w| {
                vec![
                    w.probe.clone(),
                    w.station.clone(),
                    w.start_s.to_string(),
                    w.end_s.to_string(),
                    w.since_front_s.to_string(),
                    w.void_fraction.to_string(),
                    w.bubble_count_rate_hz.to_string(),
                    w.velocity_m_s.to_string(),
                    w.turbulence_intensity.to_string(),
                    w.void_fraction_realised.to_string(),
                ]
            })
            .collect(),
    )
}
