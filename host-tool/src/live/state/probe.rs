//! One probe as the live view shows it: its latest window, running figures and strip
//! chart points, and the decoded window it is fed.

use crate::shared::probe_summary::{ProbeTally, WindowFigures};
use frothline_core::wire::quant::{from_fraction, from_micros};
use frothline_core::wire::WindowResult;
use frothline_core::Flags;
use std::collections::VecDeque;

/// One probe's latest window, as the live view shows it.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ProbeRow {
    /// Probe name (from the layout, or `p0`, `p1`, ...).
    pub name: String,
    /// Elevation above the bed, mm.
    pub elevation_mm: f64,
    /// Streamwise position, mm.
    pub x_mm: f64,
    /// Station index.
    pub station: u8,
    /// Void fraction.
    pub void_fraction: Option<f64>,
    /// Bubble count rate, Hz.
    pub bubble_rate_hz: Option<f64>,
    /// Interfacial velocity, m/s.
    pub velocity_m_s: Option<f64>,
    /// Turbulence intensity.
    pub turbulence_intensity: Option<f64>,
    /// Median bubble chord time, s.
    pub chord_median_s: Option<f64>,
    /// Cross-correlation peak coefficient.
    pub correlation_peak: Option<f64>,
    /// Bubbles in the latest window.
    pub bubbles: u32,
    /// Flags of the latest window.
    pub flags: Flags,
    /// End of the latest window, seconds of device time.
    pub window_end_s: Option<f64>,
    /// Windows received for this probe.
    pub windows: u64,
    /// Running figures of the current run (see [`crate::shared::probe_summary`]).
    pub tally: ProbeTally,
    /// The latest windows of the run for the strip chart: (end, s of device time; C, F, V).
    pub strip: VecDeque<(f64, [Option<f64>; 3])>,
    /// The latest tip-health report of this probe (wire kind 0x09).
    pub tips: Option<frothline_core::wire::TipReport>,
}

/// Windows per probe kept for the strip chart.
pub const STRIP_POINTS: usize = 600;

/// What the bottom-right panel shows (key `c` cycles it).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum StripView {
    /// The recent windows as a table of C.
    #[default]
    Table,
    /// C of every probe against device time.
    VoidFraction,
    /// F against device time.
    CountRate,
    /// V against device time.
    Velocity,
    /// Every tip's levels, swing and interfaces per second ([`crate::dashboard_tips`]).
    Tips,
}

impl StripView {
    /// The next view.
    pub fn next(self) -> StripView {
        match self {
            StripView::Table => StripView::VoidFraction,
            StripView::VoidFraction => StripView::CountRate,
            StripView::CountRate => StripView::Velocity,
            StripView::Velocity => StripView::Tips,
            StripView::Tips => StripView::Table,
        }
    }

    /// Index into the strip values and a name with unit (none for the table).
    pub fn quantity(self) -> Option<(usize, &'static str)> {
        match self {
            StripView::Table | StripView::Tips => None,
            StripView::VoidFraction => Some((0, "C [-]")),
            StripView::CountRate => Some((1, "F [Hz]")),
            StripView::Velocity => Some((2, "V [m/s]")),
        }
    }
}

impl ProbeRow {
    /// The worst relative half-width of the running C, F and (when measured) V, and
    /// whether all of them met `target`. None before any interval exists.
    pub fn convergence(&self, target: f64) -> Option<(f64, bool)> {
        let figures = [
            self.tally.void_fraction(),
            self.tally.count_rate_hz(),
            self.tally.velocity_m_s(),
        ];
        let mut worst: Option<f64> = None;
        let mut done = true;
        for (i, e) in figures.iter().enumerate() {
            let Some(e) = e else {
                // C and F are always expected; V only from dual-tip probes.
                if i < 2 {
                    done = false;
                }
                continue;
            };
            match e.relative_half_width() {
                Some(r) => worst = Some(worst.map_or(r, |w: f64| w.max(r))),
                None => done = false,
            }
            done &= e.converged(target);
        }
        worst.map(|w| (w, done))
    }
}

/// Decoded result of one probe window, device-independent.
#[derive(Clone, Debug, PartialEq)]
pub struct LiveWindow {
    /// Device id that sent it.
    pub device: u32,
    /// Probe index on that device.
    pub probe: usize,
    /// Window start, seconds of device time (frames when the rate is unknown).
    pub start_s: f64,
    /// Window end, seconds of device time.
    pub end_s: f64,
    /// Values as in [`ProbeRow`].
    pub void_fraction: Option<f64>,
    /// Bubble count rate, Hz.
    pub bubble_rate_hz: Option<f64>,
    /// Interfacial velocity, m/s.
    pub velocity_m_s: Option<f64>,
    /// Turbulence intensity.
    pub turbulence_intensity: Option<f64>,
    /// Median bubble chord, s.
    pub chord_median_s: Option<f64>,
    /// Correlation peak.
    pub correlation_peak: Option<f64>,
    /// Bubbles in the window.
    pub bubbles: u32,
    /// Flags.
    pub flags: Flags,
}

impl LiveWindow {
    /// The window's figures for the per-probe summary.
    pub fn figures(&self) -> WindowFigures {
        WindowFigures {
            duration_s: self.end_s - self.start_s,
            void_fraction: self.void_fraction,
            count_rate_hz: self.bubble_rate_hz,
            bubbles: Some(self.bubbles as f64),
            velocity_m_s: self.velocity_m_s,
            turbulence_intensity: self.turbulence_intensity,
            chord_median_s: self.chord_median_s,
            flags: self.flags,
            before_front: false,
        }
    }

    /// A wire window result of `device`, at `sample_rate_hz` (times in frames if unknown).
    pub fn from_wire(device: u16, w: &WindowResult, sample_rate_hz: Option<f64>) -> LiveWindow {
        let fs = sample_rate_hz.filter(|f| *f > 0.0).unwrap_or(1.0);
        LiveWindow {
            device: device as u32,
            probe: w.probe as usize,
            start_s: w.start as f64 / fs,
            end_s: (w.start + w.frames as u64) as f64 / fs,
            void_fraction: Some(w.void_fraction_value() as f64),
            bubble_rate_hz: Some(w.bubble_rate_hz() as f64),
            velocity_m_s: w.velocity_m_s().map(f64::from),
            turbulence_intensity: w.turbulence_intensity().map(f64::from),
            chord_median_s: w.chords.map(|c| from_micros(c.median) as f64),
            correlation_peak: w.correlation.map(|c| from_fraction(c.peak) as f64),
            bubbles: w.bubbles,
            flags: Flags(w.flags),
        }
    }
}
