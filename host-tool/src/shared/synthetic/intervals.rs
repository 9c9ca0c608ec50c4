//! Continuous-time ground truth: the air intervals each tip of a probe sees.
//!
//! The leading tip follows an alternating renewal process: air (bubble) and water (droplet)
//! chord times are independent and gamma-distributed with shape `k` and means C/F and
//! (1-C)/F, read from the [`FlowModel`] at the start of each chord. The trailing tip sees
//! every leading bubble, delayed by `spacing / V_i` with the same chord time, unless it misses
//! it (probability `p_miss`), plus extra bubbles that passed beside the leading tip (a Poisson
//! process at rate `extra_rate_ratio * F`). Overlapping trailing intervals are merged.

use rand::Rng;
use rand_distr::{Distribution, Exp1, Gamma, StandardNormal};

use super::flow::{FlowModel, LocalParams, HOLD_STEP_S};

/// Lower bound on a per-bubble velocity, as a fraction of the local mean velocity.
pub const MIN_VELOCITY_FRACTION: f64 = 0.05;

/// One air interval on one tip, seconds from the start of the record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Interval {
    /// Water -> air interface (the tip de-wets: bubble arrival).
    pub start_s: f64,
    /// Air -> water interface (the tip re-wets: bubble departure).
    pub end_s: f64,
}

impl Interval {
    /// Duration (chord time) in seconds.
    pub fn duration_s(&self) -> f64 {
        self.end_s - self.start_s
    }
}

/// One bubble as seen by the leading tip.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bubble {
    /// Air interval at the leading tip.
    pub interval: Interval,
    /// The bubble's own velocity V_i, m/s.
    pub velocity_m_s: f64,
    /// Delay leading -> trailing (`spacing / V_i`) if the trailing tip saw this bubble;
    /// `None` for a miss or a single-tip probe.
    pub lag_s: Option<f64>,
}

/// How the two tips of one probe relate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TipPairSpec {
    /// Leading -> trailing streamwise distance in metres; `None` for a single-tip probe.
    pub tip_spacing_m: Option<f64>,
    /// Gamma shape `k` of both chord distributions (1 = exponential).
    pub chord_shape: f64,
    /// Probability that the trailing tip misses a leading bubble.
    pub p_miss: f64,
    /// Rate of extra trailing-only bubbles as a fraction of F.
    pub extra_rate_ratio: f64,
    /// Particle grouping: the fraction of bubbles followed by a water chord in their near
    /// wake (see [`generate_leading_grouped`]); 0 for none.
    pub grouping: f64,
}

/// Ground truth of one probe.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeTruth {
    /// Probe name (from the scenario).
    pub name: String,
    /// WAV channel of the leading tip.
    pub leading_channel: u16,
    /// WAV channel of the trailing tip, if any.
    pub trailing_channel: Option<u16>,
    /// Leading-tip bubbles in time order (air intervals do not overlap).
    pub bubbles: Vec<Bubble>,
    /// Trailing-tip air intervals, sorted and merged; `None` for a single-tip probe.
    pub trailing: Option<Vec<Interval>>,
}

impl ProbeTruth {
    /// Leading-tip air intervals in time order.
    pub fn leading(&self) -> Vec<Interval> {
        self.bubbles.iter().map(|b| b.interval).collect()
    }

    /// `(channel, air intervals)` for each tip, leading first.
    pub fn tips(&self) -> Vec<(u16, Vec<Interval>)> {
        let mut v = vec![(self.leading_channel, self.leading())];
        if let (Some(ch), Some(iv)) = (self.trailing_channel, &self.trailing) {
            v.push((ch, iv.clone()));
        }
        v
    }
}

/// Sorts intervals by start and merges overlapping or touching ones, in place.
pub fn merge_intervals(v: &mut Vec<Interval>) {
    v.sort_by(|a, b| a.start_s.total_cmp(&b.start_s));
    let mut out: Vec<Interval> = Vec::with_capacity(v.len());
    for iv in v.drain(..) {
        match out.last_mut() {
            Some(last) if iv.start_s <= last.end_s => last.end_s = last.end_s.max(iv.end_s),
            _ => out.push(iv),
        }
    }
    *v = out;
}

/// Unit-mean gamma sampler with shape `k` (scale 1/k).
fn unit_gamma(k: f64) -> Gamma<f64> {
    Gamma::new(k, 1.0 / k).expect("chord shape validated > 0")
}

fn clamp01(x: f64) -> f64 {
    x.clamp(0.0, 1.0)
}

/// Draws the leading-tip alternating renewal process on `[start_s, end_s)`.
///
/// The initial phase is air with probability C(start_s); callers start well before the record
/// (a warm-up that is later ignored) so the state at t = 0 is close to stationary. The last
/// interval may end after `end_s`.
pub fn generate_leading<R: Rng + ?Sized>(
    flow: &dyn FlowModel,
    chord_shape: f64,
    start_s: f64,
    end_s: f64,
    rng: &mut R,
) -> Vec<Interval> {
    generate_leading_grouped(flow, chord_shape, 0.0, start_s, end_s, rng)
}

/// Mean of the near-wake water chord as a fraction of the bubble chord before it: uniform
/// on `GROUPED_GAP`.
const GROUPED_GAP: std::ops::Range<f64> = 0.05..0.5;

/// [`generate_leading`] with particle grouping: after each bubble, with probability
/// `grouping`, the water chord is drawn uniformly between 5 % and 50 % of that bubble's
/// chord (the next bubble rides in its near wake); the other water chords keep the gamma
/// shape with their mean raised so that the mean water chord stays `(1 − C)/F` (C and F are
/// kept). With `grouping = 0` no extra random number is drawn (the same stream as
/// [`generate_leading`] always gave).
pub fn generate_leading_grouped<R: Rng + ?Sized>(
    flow: &dyn FlowModel,
    chord_shape: f64,
    grouping: f64,
    start_s: f64,
    end_s: f64,
    rng: &mut R,
) -> Vec<Interval> {
    let grouping = if grouping.is_finite() {
        grouping.clamp(0.0, 0.95)
    } else {
        0.0
    };
    let short_mean = 0.5 * (GROUPED_GAP.start + GROUPED_GAP.end);
    let mut last_air = 0.0f64;
    let unit = unit_gamma(chord_shape);
    let mut out = Vec::new();
    let mut t = start_s;
    let p0 = flow.at(t);
    let mut in_air;
    let mut air_start = t;
    match flow.front_s().filter(|&tf| tf > start_s && tf.is_finite()) {
        Some(tf) => {
            // The phase before the front, held to exactly `tf`; the flow starts there in the
            // other phase (unless the model still holds the old phase at `tf`).
            in_air = p0.void_fraction >= 0.5;
            t = tf.min(end_s);
            let c = flow.at(t).void_fraction;
            let still_held = if in_air { c >= 1.0 } else { c <= 0.0 };
            if t < end_s && !still_held {
                if in_air {
                    out.push(Interval {
                        start_s: air_start,
                        end_s: t,
                    });
                } else {
                    air_start = t;
                }
                in_air = !in_air;
            }
        }
        None => in_air = rng.random_bool(clamp01(p0.void_fraction)),
    }
    while t < end_s {
        let p = flow.at(t);
        let c = p.void_fraction;
        let f = p.bubble_rate_hz;
        if f.is_nan() || f <= 0.0 || c <= 0.0 || c >= 1.0 {
            let want_air = if c >= 1.0 {
                true
            } else if c <= 0.0 {
                false
            } else {
                in_air
            };
            if want_air != in_air {
                if in_air {
                    out.push(Interval {
                        start_s: air_start,
                        end_s: t,
                    });
                } else {
                    air_start = t;
                }
                in_air = want_air;
            }
            t += HOLD_STEP_S;
            continue;
        }
        let mean = if in_air { c / f } else { (1.0 - c) / f };
        if !in_air && grouping > 0.0 && last_air > 0.0 {
            if rng.random_bool(grouping) {
                t += last_air * rng.random_range(GROUPED_GAP);
            } else {
                let rest = (mean - grouping * short_mean * c / f) / (1.0 - grouping);
                t += rest.max(0.1 * mean) * unit.sample(rng);
            }
        } else {
            t += mean * unit.sample(rng);
        }
        if in_air {
            last_air = t - air_start;
            out.push(Interval {
                start_s: air_start,
                end_s: t,
            });
        } else {
            air_start = t;
        }
        in_air = !in_air;
    }
    if in_air {
        out.push(Interval {
            start_s: air_start,
            end_s: t,
        });
    }
    out
}

/// Draws a per-bubble velocity V (1 + Tu xi), at least [`MIN_VELOCITY_FRACTION`] V.
fn bubble_velocity<R: Rng + ?Sized>(p: &LocalParams, rng: &mut R) -> f64 {
    let xi: f64 = StandardNormal.sample(rng);
    let v = p.velocity_m_s * (1.0 + p.turbulence_intensity * xi);
    v.max(MIN_VELOCITY_FRACTION * p.velocity_m_s)
}

/// Extra trailing-only bubbles: Poisson arrivals at `ratio * F(t)`, chords as at the leading
/// tip.
fn generate_extras<R: Rng + ?Sized>(
    flow: &dyn FlowModel,
    chord_shape: f64,
    ratio: f64,
    start_s: f64,
    end_s: f64,
    rng: &mut R,
) -> Vec<Interval> {
    let mut out = Vec::new();
    if ratio.is_nan() || ratio <= 0.0 {
        return out;
    }
    let unit = unit_gamma(chord_shape);
    let mut t = start_s;
    while t < end_s {
        let p = flow.at(t);
        let rate = ratio * p.bubble_rate_hz;
        let chord = match p.mean_air_chord_s() {
            Some(m) if rate > 0.0 && p.void_fraction > 0.0 => m,
            _ => {
                t += HOLD_STEP_S;
                continue;
            }
        };
        let gap: f64 = Exp1.sample(rng);
        t += gap / rate;
        if t >= end_s {
            break;
        }
        let d = chord * unit.sample(rng);
        out.push(Interval {
            start_s: t,
            end_s: t + d,
        });
    }
    out
}

/// Generates the ground truth of one probe on `[start_s, end_s)`.
///
/// Random numbers are drawn in a fixed order (leading process, then per-bubble velocity and
/// miss decision, then extras), so one seeded `rng` gives one result.
pub fn generate_probe<R: Rng + ?Sized>(
    spec: &TipPairSpec,
    flow: &dyn FlowModel,
    start_s: f64,
    end_s: f64,
    rng: &mut R,
) -> (Vec<Bubble>, Option<Vec<Interval>>) {
    let leading =
        generate_leading_grouped(flow, spec.chord_shape, spec.grouping, start_s, end_s, rng);
    let mut bubbles = Vec::with_capacity(leading.len());
    let mut trailing = spec
        .tip_spacing_m
        .map(|_| Vec::with_capacity(leading.len()));
    for iv in leading {
        let p = flow.at(iv.start_s);
        let v = bubble_velocity(&p, rng);
        let mut lag_s = None;
        if let (Some(spacing), Some(tr)) = (spec.tip_spacing_m, trailing.as_mut()) {
            let missed = rng.random_bool(clamp01(spec.p_miss));
            if !missed {
                let lag = spacing / v;
                lag_s = Some(lag);
                tr.push(Interval {
                    start_s: iv.start_s + lag,
                    end_s: iv.end_s + lag,
                });
            }
        }
        bubbles.push(Bubble {
            interval: iv,
            velocity_m_s: v,
            lag_s,
        });
    }
    if let Some(tr) = trailing.as_mut() {
        tr.extend(generate_extras(
            flow,
            spec.chord_shape,
            spec.extra_rate_ratio,
            start_s,
            end_s,
            rng,
        ));
        merge_intervals(tr);
    }
    (bubbles, trailing)
}

/// Warm-up before t = 0 so the process is near stationary at the start of the record:
/// twenty mean cycles 1/F at t = 0 (from 10 ms to 60 s).
pub fn warm_up_s(flow: &dyn FlowModel) -> f64 {
    let p = flow.at(0.0);
    if p.bubble_rate_hz > 0.0 {
        (20.0 / p.bubble_rate_hz).clamp(0.01, 60.0)
    } else {
        0.01
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn merge_joins_overlaps_and_sorts() {
        let mut v = vec![
            Interval {
                start_s: 3.0,
                end_s: 4.0,
            },
            Interval {
                start_s: 0.0,
                end_s: 1.0,
            },
            Interval {
                start_s: 0.5,
                end_s: 2.0,
            },
            Interval {
                start_s: 2.0,
                end_s: 2.5,
            },
        ];
        merge_intervals(&mut v);
        assert_eq!(
            v,
            vec![
                Interval {
                    start_s: 0.0,
                    end_s: 2.5
                },
                Interval {
                    start_s: 3.0,
                    end_s: 4.0
                }
            ]
        );
    }

    #[test]
    fn degenerate_flows_hold_a_phase() {
        use rand::SeedableRng;
        let mut rng = rand::rngs::StdRng::seed_from_u64(1);
        let all_air = LocalParams {
            void_fraction: 1.0,
            bubble_rate_hz: 50.0,
            velocity_m_s: 2.0,
            turbulence_intensity: 0.1,
        };
        let v = generate_leading(&all_air, 2.0, 0.0, 1.0, &mut rng);
        assert_eq!(v.len(), 1);
        assert_eq!(v[0].start_s, 0.0);
        assert!(v[0].end_s >= 1.0);
        let no_air = LocalParams {
            void_fraction: 0.0,
            ..all_air
        };
        assert!(generate_leading(&no_air, 2.0, 0.0, 1.0, &mut rng).is_empty());
    }
}
