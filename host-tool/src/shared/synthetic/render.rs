//! Rendering air intervals into ADC samples, one channel at a time, in one pass.
//!
//! Model of one tip's signal, in counts:
//! `x(t) = W + f(t) (A - W) + d(t) + sigma n(t)`, rounded, clipped at the rails and at the
//! i16 range. `W` and `A` are the water and air levels (polarity applied), `d` the baseline
//! drift (the same offset on both levels), `n` white N(0, 1) noise, one draw per sample.
//! `f(t)` in [0, 1] is the air fraction of the tip's response: it slews linearly towards 1
//! at `1 / t_wa` (de-wetting) and towards 0 at `1 / t_rw` (wetting). Each ramp is centred on
//! its interface: it starts half a ramp time before the interface instant, so a complete
//! ramp crosses the mid-level exactly at the interface and a 50 % threshold recovers the true
//! interface times. A chord shorter than the ramps never reaches the full level (the slew
//! simply turns round). The signal is point-sampled at `t_n = n / fs`.
//!
//! The drift is evaluated exactly every [`DRIFT_KNOT_FRAMES`] frames and linearly
//! interpolated between (exact for linear drift; for a sine of period P the error is below
//! `amplitude (2 pi 1024 / (fs P))^2 / 8`, negligible for a slow drift). The knot grid is
//! absolute, so the output does not depend on the block size used to render it.

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, StandardNormal};

use super::intervals::Interval;
use super::scenario::{DriftKind, DriftSpec};

/// Spacing of the exact drift evaluations, frames.
pub const DRIFT_KNOT_FRAMES: u64 = 1024;

/// Everything one channel's renderer needs besides its air intervals.
#[derive(Debug, Clone, PartialEq)]
pub struct ChannelStyle {
    /// Water level, counts.
    pub water_counts: f64,
    /// Air level, counts.
    pub air_counts: f64,
    /// Noise standard deviation, counts.
    pub noise_sigma_counts: f64,
    /// Wetting (air -> water) ramp, s.
    pub wetting_time_s: f64,
    /// De-wetting (water -> air) ramp, s.
    pub dewetting_time_s: f64,
    /// Clipping rails, counts.
    pub rails: (f64, f64),
    /// Baseline drift.
    pub drift: DriftSpec,
    /// Record duration (for the linear drift and the default sine period), s.
    pub duration_s: f64,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
}

#[derive(Debug, Clone, Copy)]
struct Event {
    t: f64,
    to_air: bool,
}

/// Renders one channel block by block; blocks must be requested in order.
#[derive(Debug, Clone)]
pub struct ChannelRenderer {
    events: Vec<Event>,
    idx: usize,
    frac: f64,
    t_state: f64,
    target_air: bool,
    up_rate: f64,
    down_rate: f64,
    water: f64,
    span: f64,
    sigma: f64,
    rails: (f64, f64),
    drift_kind: DriftKind,
    drift_amp: f64,
    drift_omega: f64,
    drift_phase: f64,
    duration_s: f64,
    fs: f64,
    knot: u64,
    knot_d0: f64,
    knot_slope: f64,
    next_frame: u64,
    rng: StdRng,
}

fn rate(ramp_s: f64) -> f64 {
    if ramp_s > 0.0 {
        1.0 / ramp_s
    } else {
        f64::INFINITY
    }
}

impl ChannelRenderer {
    /// A renderer for sorted, non-overlapping air `intervals`, with noise (and the sine drift
    /// phase) drawn from `noise_seed`.
    pub fn new(intervals: &[Interval], style: &ChannelStyle, noise_seed: u64) -> Self {
        let mut rng = StdRng::seed_from_u64(noise_seed);
        let drift_phase = rng.random::<f64>() * std::f64::consts::TAU;
        let mut events = Vec::with_capacity(2 * intervals.len());
        let mut last = f64::NEG_INFINITY;
        for iv in intervals {
            let on = (iv.start_s - 0.5 * style.dewetting_time_s).max(last);
            let off = (iv.end_s - 0.5 * style.wetting_time_s).max(on);
            events.push(Event {
                t: on,
                to_air: true,
            });
            events.push(Event {
                t: off,
                to_air: false,
            });
            last = off;
        }
        let period = style.drift.period_s.unwrap_or(style.duration_s);
        let mut r = Self {
            events,
            idx: 0,
            frac: 0.0,
            t_state: f64::NEG_INFINITY,
            target_air: false,
            up_rate: rate(style.dewetting_time_s),
            down_rate: rate(style.wetting_time_s),
            water: style.water_counts,
            span: style.air_counts - style.water_counts,
            sigma: style.noise_sigma_counts,
            rails: style.rails,
            drift_kind: style.drift.kind,
            drift_amp: style.drift.amplitude_counts,
            drift_omega: std::f64::consts::TAU / period,
            drift_phase,
            duration_s: style.duration_s,
            fs: style.sample_rate_hz as f64,
            knot: u64::MAX,
            knot_d0: 0.0,
            knot_slope: 0.0,
            next_frame: 0,
            rng,
        };
        if let Some(first) = r.events.first() {
            r.t_state = first.t.min(0.0);
        }
        r
    }

    fn drift_at(&self, t: f64) -> f64 {
        match self.drift_kind {
            DriftKind::None => 0.0,
            DriftKind::Sine => self.drift_amp * (self.drift_omega * t + self.drift_phase).sin(),
            DriftKind::Linear => self.drift_amp * t / self.duration_s,
        }
    }

    fn drift_frame(&mut self, n: u64) -> f64 {
        if self.drift_kind == DriftKind::None {
            return 0.0;
        }
        let k = n / DRIFT_KNOT_FRAMES;
        if k != self.knot {
            let n0 = k * DRIFT_KNOT_FRAMES;
            let d0 = self.drift_at(n0 as f64 / self.fs);
            let d1 = self.drift_at((n0 + DRIFT_KNOT_FRAMES) as f64 / self.fs);
            self.knot = k;
            self.knot_d0 = d0;
            self.knot_slope = (d1 - d0) / DRIFT_KNOT_FRAMES as f64;
        }
        self.knot_d0 + self.knot_slope * (n - k * DRIFT_KNOT_FRAMES) as f64
    }

    #[inline]
    fn advance(&mut self, t: f64) {
        let dt = t - self.t_state;
        if dt > 0.0 {
            self.frac = if self.target_air {
                (self.frac + dt * self.up_rate).min(1.0)
            } else {
                (self.frac - dt * self.down_rate).max(0.0)
            };
            self.t_state = t;
        }
    }

    /// The next frame this renderer will produce.
    pub fn next_frame(&self) -> u64 {
        self.next_frame
    }

    /// Renders the next `out.len()` frames (starting at [`Self::next_frame`]).
    pub fn render(&mut self, out: &mut [i16]) {
        self.render_strided(out, 1, 0);
    }

    /// Renders the next frames into every `stride`-th element of `out` starting at `offset`
    /// (an interleaved block: `stride` = channels, `offset` = this channel).
    pub fn render_strided(&mut self, out: &mut [i16], stride: usize, offset: usize) {
        let lo = self.rails.0.max(i16::MIN as f64);
        let hi = self.rails.1.min(i16::MAX as f64);
        for slot in out.iter_mut().skip(offset).step_by(stride) {
            let n = self.next_frame;
            let t = n as f64 / self.fs;
            while let Some(ev) = self.events.get(self.idx) {
                if ev.t > t {
                    break;
                }
                let (et, to_air) = (ev.t, ev.to_air);
                self.advance(et);
                self.target_air = to_air;
                self.idx += 1;
            }
            self.advance(t);
            let mut x = self.water + self.frac * self.span + self.drift_frame(n);
            if self.sigma > 0.0 {
                let z: f64 = StandardNormal.sample(&mut self.rng);
                x += self.sigma * z;
            }
            *slot = x.round().clamp(lo, hi) as i16;
            self.next_frame += 1;
        }
    }
}

/// Renders `channels` renderers into one interleaved block of `frames` frames.
pub fn render_block(renderers: &mut [ChannelRenderer], frames: usize, out: &mut Vec<i16>) {
    let ch = renderers.len();
    out.clear();
    out.resize(frames * ch, 0);
    for (c, r) in renderers.iter_mut().enumerate() {
        r.render_strided(out, ch, c);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn style() -> ChannelStyle {
        ChannelStyle {
            water_counts: 1000.0,
            air_counts: 11000.0,
            noise_sigma_counts: 0.0,
            wetting_time_s: 20e-6,
            dewetting_time_s: 60e-6,
            rails: (-32768.0, 32767.0),
            drift: DriftSpec::default(),
            duration_s: 0.01,
            sample_rate_hz: 1_000_000,
        }
    }

    #[test]
    fn ramps_are_centred_and_have_the_set_durations() {
        let iv = [Interval {
            start_s: 2e-3,
            end_s: 5e-3,
        }];
        let mut r = ChannelRenderer::new(&iv, &style(), 7);
        let mut x = vec![0i16; 10_000];
        r.render(&mut x);
        let between = |a: usize, b: usize, lo: f64, hi: f64| {
            x[a..b]
                .iter()
                .filter(|&&v| (v as f64) > lo && (v as f64) < hi)
                .count()
        };
        // 10 % .. 90 % of a 10000-count step: 80 % of the ramp time at 1 MHz.
        assert!((between(0, 3500, 2000.0, 10000.0) as i64 - 48).abs() <= 1);
        assert!((between(3500, 10_000, 2000.0, 10000.0) as i64 - 16).abs() <= 1);
        // Mid-level crossings at the interface instants.
        let up = x.iter().position(|&v| v >= 6000).unwrap();
        let down = 3500 + x[3500..].iter().position(|&v| v <= 6000).unwrap();
        assert!((up as i64 - 2000).abs() <= 1, "{up}");
        assert!((down as i64 - 5000).abs() <= 1, "{down}");
    }

    #[test]
    fn block_size_does_not_change_the_output() {
        let iv = [
            Interval {
                start_s: 1e-3,
                end_s: 4e-3,
            },
            Interval {
                start_s: 6e-3,
                end_s: 6.01e-3,
            },
        ];
        let mut st = style();
        st.noise_sigma_counts = 30.0;
        st.drift = DriftSpec {
            kind: DriftKind::Sine,
            amplitude_counts: 500.0,
            period_s: Some(0.003),
        };
        let mut a = ChannelRenderer::new(&iv, &st, 3);
        let mut whole = vec![0i16; 10_000];
        a.render(&mut whole);
        let mut b = ChannelRenderer::new(&iv, &st, 3);
        let mut parts = Vec::new();
        for len in [1usize, 999, 3000, 6000] {
            let mut p = vec![0i16; len];
            b.render(&mut p);
            parts.extend(p);
        }
        assert_eq!(whole, parts);
    }
}
