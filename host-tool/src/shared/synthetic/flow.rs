//! The local generating parameters of a probe, as a function of time.
//!
//! The interval generator never reads the scenario directly: it asks a [`FlowModel`] for the
//! parameters at the current time each time it draws a chord or a bubble velocity. A steady
//! flow is a constant [`LocalParams`]; a transient flow (a front passing a station, a decaying
//! aerated region) is any type, or closure wrapped in [`FnFlow`], that returns the parameters
//! at time `t`.
//!
//! Parameters are read at the start of each chord, so they should vary slowly compared with
//! one chord (a chord drawn at `t` keeps the mean it had at `t`). Degenerate values are
//! allowed and mean "hold a phase": `void_fraction >= 1` holds air, `void_fraction <= 0` holds
//! water, and `bubble_rate_hz <= 0` keeps whatever phase the tip is in; the generator then
//! re-reads the model every [`HOLD_STEP_S`].

/// How often a model in a degenerate state (all air, all water, no bubbles) is re-read.
pub const HOLD_STEP_S: f64 = 1.0e-3;

/// Local generating parameters of one probe at one instant.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LocalParams {
    /// Void fraction C (time fraction in air), 0..=1.
    pub void_fraction: f64,
    /// Bubble count rate F, bubbles per second (air-water interface pairs per second).
    pub bubble_rate_hz: f64,
    /// Mean interfacial velocity V, m/s (> 0).
    pub velocity_m_s: f64,
    /// Turbulence intensity Tu: per-bubble velocity V_i = V (1 + Tu xi), xi ~ N(0, 1).
    pub turbulence_intensity: f64,
}

impl LocalParams {
    /// Mean air (bubble) chord time C/F in seconds; `None` when F <= 0.
    pub fn mean_air_chord_s(&self) -> Option<f64> {
        (self.bubble_rate_hz > 0.0).then(|| self.void_fraction / self.bubble_rate_hz)
    }

    /// Mean water (droplet) chord time (1-C)/F in seconds; `None` when F <= 0.
    pub fn mean_water_chord_s(&self) -> Option<f64> {
        (self.bubble_rate_hz > 0.0).then(|| (1.0 - self.void_fraction) / self.bubble_rate_hz)
    }
}

/// Source of the local generating parameters of one probe, at time `t_s` (seconds from the
/// start of the record; negative times occur during the discarded warm-up).
pub trait FlowModel: Send + Sync {
    /// Parameters at time `t_s`.
    fn at(&self, t_s: f64) -> LocalParams;

    /// The instant a front reaches the probe, if the model has one: the generator holds the
    /// phase before it (air when `void_fraction >= 0.5` at the start, water otherwise) up
    /// to exactly this time and starts the flow there with an interface into the other
    /// phase (a dry tip is wetted at the front), instead of switching at the next
    /// [`HOLD_STEP_S`] re-read. `None` (the default): no front.
    fn front_s(&self) -> Option<f64> {
        None
    }
}

/// A steady flow: the same parameters at every instant.
impl FlowModel for LocalParams {
    fn at(&self, _t_s: f64) -> LocalParams {
        *self
    }
}

/// Wraps a closure `Fn(t_s) -> LocalParams` as a [`FlowModel`].
///
/// ```
/// use frothline_host::shared::synthetic::{FnFlow, FlowModel, LocalParams};
/// let front = FnFlow(|t: f64| LocalParams {
///     void_fraction: if t < 1.0 { 1.0 } else { 0.3 },
///     bubble_rate_hz: 80.0,
///     velocity_m_s: 2.0,
///     turbulence_intensity: 0.2,
/// });
/// assert_eq!(front.at(0.5).void_fraction, 1.0);
/// ```
pub struct FnFlow<F>(pub F);

impl<F> FlowModel for FnFlow<F>
where
    F: Fn(f64) -> LocalParams + Send + Sync,
{
    fn at(&self, t_s: f64) -> LocalParams {
        (self.0)(t_s)
    }
}
