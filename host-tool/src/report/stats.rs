//! Per-probe summaries and the small fits the report draws.
//!
//! - Whole-record means: void fraction weighted by window length; bubble count rate as
//!   bubbles over time; mean chord weighted by bubbles; chord median and deciles either
//!   pooled from `chords.csv` (exact up to the bin width) or, without it, bubble-weighted
//!   means of the window values (an approximation: quantiles do not average); interfacial
//!   velocity, turbulence intensity and correlation peak weighted by bubbles.
//! - Parabolic envelope F = 4 Fmax C (1 − C): linear least squares in Fmax,
//!   Fmax = Σ F g / Σ g² with g = 4 C (1 − C).
//! - Decay of the depth-averaged void fraction, C(t) = Cf + (C0 − Cf) exp(−t/τ): for a given
//!   τ the model is linear in (Cf, C0 − Cf), solved exactly; τ is searched on a logarithmic
//!   grid, then refined by golden-section search.
//! - Power-law profile C = 0.9 (y/Y90)^n, drawn from a slice's Y90 and n.

use super::input::{ChordBin, Run, Slice, Window};
use crate::shared::probe_summary::{ProbeTally, SummaryRule, WindowFigures};
use frothline_core::Flags;

/// Which windows enter means and fits.
#[derive(Debug, Clone, Copy)]
pub struct Selection {
    /// Windows carrying any of these flag bits are left out.
    pub excluded_flags: u64,
    /// The per-probe summary rule (the same flags, as core flags, and the velocity rule).
    pub rule: SummaryRule,
}

impl Selection {
    /// True if `w` enters means and fits: none of the excluded flags, and not before the
    /// front (windows of a transient run with a negative time since the front are left out).
    pub fn uses(&self, w: &Window) -> bool {
        w.flags & self.excluded_flags == 0 && w.since_front_s.is_none_or(|t| t >= 0.0)
    }
}

/// A weighted mean under construction.
#[derive(Debug, Default, Clone, Copy)]
struct WMean {
    sum: f64,
    weight: f64,
}

impl WMean {
    fn add(&mut self, v: Option<f64>, w: f64) {
        if let Some(v) = v {
            if w > 0.0 {
                self.sum += v * w;
                self.weight += w;
            }
        }
    }
    fn get(self) -> Option<f64> {
        (self.weight > 0.0).then(|| self.sum / self.weight)
    }
}

/// Where the chord median and deciles of a summary come from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ChordSource {
    /// Pooled histogram of chords.csv.
    Histogram,
    /// Bubble-weighted means of window values (approximate).
    Windows,
}

/// Whole-record figures of one probe.
#[derive(Debug, Clone)]
#[allow(missing_docs)]
pub struct ProbeSummary {
    /// Rows of windows.csv for the probe.
    pub windows: usize,
    /// Rows that entered the means.
    pub used: usize,
    pub void_fraction: Option<f64>,
    /// 10th and 90th percentiles of the window void fractions.
    pub void_fraction_p10: Option<f64>,
    pub void_fraction_p90: Option<f64>,
    pub count_rate_hz: Option<f64>,
    pub bubbles: f64,
    pub chord_mean_s: Option<f64>,
    pub chord_median_s: Option<f64>,
    pub chord_p10_s: Option<f64>,
    pub chord_p90_s: Option<f64>,
    pub chord_source: ChordSource,
    /// Over the used windows whose velocity is trusted (see [`crate::shared::probe_summary`]).
    pub velocity_m_s: Option<f64>,
    pub turbulence_intensity: Option<f64>,
    /// Used windows that entered V and Tu.
    pub velocity_used: usize,
    pub correlation_peak: Option<f64>,
    /// Parabolic envelope fitted to this probe's windows.
    pub fmax_hz: Option<f64>,
    /// (flag bit, windows raising it), over every window of the probe.
    pub flag_counts: Vec<(usize, usize)>,
}

/// Summaries of every probe of `run`, in probe order.
pub fn summarise(run: &Run, sel: Selection) -> Vec<ProbeSummary> {
    (0..run.probes.len())
        .map(|p| summarise_probe(run, sel, p))
        .collect()
}

fn summarise_probe(run: &Run, sel: Selection, p: usize) -> ProbeSummary {
    let all: Vec<&Window> = run.windows.iter().filter(|w| w.probe == p).collect();
    let used: Vec<&Window> = all.iter().copied().filter(|w| sel.uses(w)).collect();
    let (mut chord, mut med, mut p10, mut p90) = Default::default();
    let mut peak = WMean::default();
    let mut bubbles = 0.0;
    for w in &used {
        bubbles += w.bubbles.unwrap_or(0.0);
        let nb = w.bubbles.unwrap_or(1.0);
        add_all(
            [
                (&mut chord, w.chord_mean_s),
                (&mut med, w.chord_median_s),
                (&mut p10, w.chord_p10_s),
                (&mut p90, w.chord_p90_s),
                (&mut peak, w.correlation_peak),
            ],
            nb,
        );
    }
    // C, F, V and Tu: the per-probe summary shared with replay and the live view.
    let mut tally = ProbeTally::new();
    for w in &all {
        tally.add(&window_figures(run, w), &sel.rule);
    }
    let mean = |e: Option<crate::shared::running_stats::Estimate>| e.map(|e| e.mean);
    let mut cs: Vec<f64> = used.iter().filter_map(|w| w.void_fraction).collect();
    cs.sort_by(f64::total_cmp);
    let hist: Vec<(f64, f64, f64)> = run
        .chords
        .iter()
        .filter(|b| b.probe == p)
        .map(|b| (b.lower, b.upper, b.count))
        .collect();
    let (chord_source, chord_median_s, chord_p10_s, chord_p90_s) =
        if hist.iter().map(|b| b.2).sum::<f64>() > 0.0 {
            (
                ChordSource::Histogram,
                histogram_quantile(&hist, 0.5),
                histogram_quantile(&hist, 0.1),
                histogram_quantile(&hist, 0.9),
            )
        } else {
            (ChordSource::Windows, med.get(), p10.get(), p90.get())
        };
    let mut flag_counts: Vec<(usize, usize)> = Vec::new();
    for bit in 0..run.flag_names.len() {
        let n = all.iter().filter(|w| w.flags & (1 << bit) != 0).count();
        if n > 0 {
            flag_counts.push((bit, n));
        }
    }
    ProbeSummary {
        windows: all.len(),
        used: tally.used as usize,
        void_fraction: mean(tally.void_fraction()),
        void_fraction_p10: quantile_sorted(&cs, 0.1),
        void_fraction_p90: quantile_sorted(&cs, 0.9),
        count_rate_hz: mean(tally.count_rate_hz()),
        bubbles,
        chord_mean_s: chord.get(),
        chord_median_s,
        chord_p10_s,
        chord_p90_s,
        chord_source,
        velocity_m_s: mean(tally.velocity_m_s()),
        turbulence_intensity: mean(tally.turbulence_intensity()),
        velocity_used: tally.velocity_used as usize,
        correlation_peak: peak.get(),
        fmax_hz: envelope_fmax(
            used.iter()
                .filter_map(|w| Some((w.void_fraction?, w.count_rate_hz?))),
        ),
        flag_counts,
    }
}

/// The core flags of a report window (names this version does not know map to none).
pub fn core_flags(run: &Run, bits: u64) -> Flags {
    let mut f = Flags::NONE;
    for (i, name) in run.flag_names.iter().enumerate() {
        if bits & (1 << i) != 0 {
            if let Some((flag, _)) = Flags::NAMES.iter().find(|(_, n)| n == name) {
                f |= *flag;
            }
        }
    }
    f
}

/// A windows.csv row as the per-probe summary's input.
fn window_figures(run: &Run, w: &Window) -> WindowFigures {
    WindowFigures {
        duration_s: w.duration_s().unwrap_or(1.0),
        void_fraction: w.void_fraction,
        count_rate_hz: w.count_rate_hz,
        bubbles: w.bubbles,
        velocity_m_s: w.velocity_m_s,
        turbulence_intensity: w.turbulence_intensity,
        chord_median_s: w.chord_median_s,
        flags: core_flags(run, w.flags),
        before_front: w.since_front_s.is_some_and(|t| t < 0.0),
    }
}

fn add_all<const N: usize>(items: [(&mut WMean, Option<f64>); N], weight: f64) {
    for (m, v) in items {
        m.add(v, weight);
    }
}

/// Linear-interpolated quantile of sorted values.
pub fn quantile_sorted(v: &[f64], q: f64) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    let pos = q.clamp(0.0, 1.0) * (v.len() - 1) as f64;
    let (i, frac) = (pos.floor() as usize, pos - pos.floor());
    let hi = v[(i + 1).min(v.len() - 1)];
    Some(v[i] + frac * (hi - v[i]))
}

/// Quantile of a histogram `(lower, upper, count)` with positive edges, interpolated
/// log-uniformly inside the bin (the bins of chord times are logarithmic).
pub fn histogram_quantile(bins: &[(f64, f64, f64)], q: f64) -> Option<f64> {
    let mut bins: Vec<(f64, f64, f64)> = bins.to_vec();
    bins.sort_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = bins.iter().map(|b| b.2).sum();
    if total <= 0.0 {
        return None;
    }
    let target = q.clamp(0.0, 1.0) * total;
    let mut acc = 0.0;
    for &(lo, hi, n) in &bins {
        if n > 0.0 && acc + n >= target {
            let frac = ((target - acc) / n).clamp(0.0, 1.0);
            return Some(lo * (hi / lo).powf(frac));
        }
        acc += n;
    }
    bins.last().map(|b| b.1)
}

/// Least-squares Fmax of F = 4 Fmax C (1 − C) over `(C, F)` points; None with fewer than
/// three usable points or no point with 0 < C < 1.
pub fn envelope_fmax(points: impl Iterator<Item = (f64, f64)>) -> Option<f64> {
    let (mut fg, mut gg, mut n) = (0.0, 0.0, 0);
    for (c, f) in points {
        if !(0.0..=1.0).contains(&c) || !f.is_finite() {
            continue;
        }
        let g = 4.0 * c * (1.0 - c);
        fg += f * g;
        gg += g * g;
        n += 1;
    }
    (n >= 3 && gg > 1e-9).then(|| fg / gg)
}

/// A fitted (or given) exponential decay C(t) = Cf + (C0 − Cf) exp(−t/τ).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DecayFit {
    /// Value at the front, t = 0.
    pub c0: f64,
    /// Value long after the front.
    pub cf: f64,
    /// Time constant, s.
    pub tau_s: f64,
    /// Root-mean-square residual over the points (None when given by the file).
    pub rmse: Option<f64>,
    /// False when τ ran to the end of the search range (the decay is not resolved by the
    /// record: it looks linear or flat).
    pub resolved: bool,
}

impl DecayFit {
    /// The model at time `t` since the front.
    pub fn at(&self, t: f64) -> f64 {
        self.cf + (self.c0 - self.cf) * (-t / self.tau_s).exp()
    }
}

/// For a given τ, the least-squares (Cf, C0 − Cf) and the sum of squared residuals.
fn decay_linear(pts: &[(f64, f64)], tau: f64) -> Option<(f64, f64, f64)> {
    let n = pts.len() as f64;
    let xs: Vec<f64> = pts.iter().map(|p| (-p.0 / tau).exp()).collect();
    let mx = xs.iter().sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (x, p) in xs.iter().zip(pts) {
        sxy += (x - mx) * (p.1 - my);
        sxx += (x - mx) * (x - mx);
    }
    if sxx < 1e-12 {
        return None;
    }
    let b = sxy / sxx;
    let a = my - b * mx;
    let sse = xs
        .iter()
        .zip(pts)
        .map(|(x, p)| (p.1 - a - b * x).powi(2))
        .sum();
    Some((a, b, sse))
}

/// Fit C(t) = Cf + (C0 − Cf) exp(−t/τ) to `(t, C)` points with t ≥ 0 the time since the front.
/// None with fewer than four points or a time span of zero.
pub fn fit_decay(pts: &[(f64, f64)]) -> Option<DecayFit> {
    if pts.len() < 4 {
        return None;
    }
    let t_min = pts.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    let t_max = pts.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
    let span = t_max - t_min.min(0.0);
    if span <= 0.0 {
        return None;
    }
    // log10(τ) over [span/100, 10 span]
    let (lo, hi) = ((span / 100.0).log10(), (span * 10.0).log10());
    const STEPS: usize = 120;
    let sse_at = |lt: f64| decay_linear(pts, 10f64.powf(lt)).map_or(f64::INFINITY, |r| r.2);
    let grid: Vec<f64> = (0..=STEPS)
        .map(|i| lo + (hi - lo) * i as f64 / STEPS as f64)
        .collect();
    let best = (0..grid.len()).min_by(|&a, &b| sse_at(grid[a]).total_cmp(&sse_at(grid[b])))?;
    if !sse_at(grid[best]).is_finite() {
        return None;
    }
    // golden-section refinement between the grid neighbours
    let (mut a, mut b) = (grid[best.saturating_sub(1)], grid[(best + 1).min(STEPS)]);
    let phi = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..60 {
        let (x1, x2) = (b - phi * (b - a), a + phi * (b - a));
        if sse_at(x1) < sse_at(x2) {
            b = x2;
        } else {
            a = x1;
        }
    }
    let lt = 0.5 * (a + b);
    let tau = 10f64.powf(lt);
    let (cf, amp, sse) = decay_linear(pts, tau)?;
    Some(DecayFit {
        c0: cf + amp,
        cf,
        tau_s: tau,
        rmse: Some((sse / pts.len() as f64).sqrt()),
        resolved: best > 0 && best < STEPS,
    })
}

/// Points of the power-law profile C = 0.9 (y/Y90)^n from y = 0 up to C = 1 (or `y_top`),
/// as (C, y) pairs.
pub fn power_law_curve(y90_mm: f64, n: f64, y_top: f64) -> Vec<(f64, f64)> {
    if !(y90_mm > 0.0 && n > 0.0) {
        return Vec::new();
    }
    let y_c1 = y90_mm * (1.0f64 / 0.9).powf(1.0 / n);
    let y_end = y_c1.min(y_top);
    (0..=120)
        .map(|i| {
            let y = y_end * i as f64 / 120.0;
            ((0.9 * (y / y90_mm).powf(n)).min(1.0), y)
        })
        .collect()
}

/// The slices of `station` to draw: nearest to each of `times` (s since the front), or, with
/// no times, up to `max` slices spread evenly over the record. Only slices with Y90 and n.
pub fn pick_slices<'r>(run: &'r Run, station: &str, times: &[f64], max: usize) -> Vec<&'r Slice> {
    let mut cands: Vec<&Slice> = run
        .profile
        .iter()
        .filter(|s| {
            s.station == station
                && s.y90_mm.is_some_and(|v| v > 0.0)
                && s.profile_exponent.is_some_and(|v| v > 0.0)
                && s.since_front_s.is_some_and(|t| t >= 0.0)
        })
        .collect();
    cands.sort_by(|a, b| {
        a.since_front_s
            .unwrap()
            .total_cmp(&b.since_front_s.unwrap())
    });
    let mut out: Vec<&Slice> = Vec::new();
    if cands.is_empty() {
        return out;
    }
    if times.is_empty() {
        let k = max.min(cands.len()).max(1);
        for i in 0..k {
            let idx = if k == 1 {
                0
            } else {
                i * (cands.len() - 1) / (k - 1)
            };
            out.push(cands[idx]);
        }
    } else {
        for &t in times {
            let s = cands
                .iter()
                .min_by(|a, b| {
                    (a.since_front_s.unwrap() - t)
                        .abs()
                        .total_cmp(&(b.since_front_s.unwrap() - t).abs())
                })
                .unwrap();
            out.push(s);
        }
    }
    out.dedup_by(|a, b| std::ptr::eq(*a, *b));
    out
}

/// Void fraction of probe `p` over the slice: the overlap-weighted mean of its windows that
/// overlap [start, end]; without slice bounds, the window nearest in time since the front.
pub fn slice_void_fraction(run: &Run, sel: Selection, p: usize, s: &Slice) -> Option<f64> {
    let ws = run
        .windows
        .iter()
        .filter(|w| w.probe == p && w.flags & sel.excluded_flags == 0);
    if let (Some(a), Some(b)) = (s.start_s, s.end_s) {
        let mut m = WMean::default();
        for w in ws {
            if let (Some(ws), Some(we)) = (w.start_s, w.end_s) {
                let overlap = (we.min(b) - ws.max(a)).max(0.0);
                m.add(w.void_fraction, overlap);
            }
        }
        m.get()
    } else {
        let t = s.since_front_s?;
        ws.filter_map(|w| Some(((w.since_front_s? - t).abs(), w.void_fraction?)))
            .min_by(|a, b| a.0.total_cmp(&b.0))
            .map(|x| x.1)
    }
}

/// The run-to-run spread of C of probe `p` over slice `s` (an ensemble's windows), weighted
/// like [`slice_void_fraction`]; none for a single run.
pub fn slice_void_fraction_spread(run: &Run, sel: Selection, p: usize, s: &Slice) -> Option<f64> {
    let (a, b) = (s.start_s?, s.end_s?);
    let mut m = WMean::default();
    for w in run
        .windows
        .iter()
        .filter(|w| w.probe == p && w.flags & sel.excluded_flags == 0)
    {
        if let (Some(ws), Some(we)) = (w.start_s, w.end_s) {
            m.add(w.void_fraction_spread, (we.min(b) - ws.max(a)).max(0.0));
        }
    }
    m.get()
}

/// Normalised histogram of chord times of probe `p`: (lower, upper, fraction of bubbles).
pub fn chord_histogram(run: &Run, p: usize) -> Vec<(f64, f64, f64)> {
    normalised_bins(&run.chords, p)
}

/// The pooled chord-length histogram of probe `p` (chord_lengths.csv), mm, each bin's count
/// as a fraction of the probe's chords.
pub fn chord_length_histogram(run: &Run, p: usize) -> Vec<(f64, f64, f64)> {
    normalised_bins(&run.chord_lengths, p)
}

/// The bins of probe `p`, sorted, each count as a fraction of the probe's total.
fn normalised_bins(bins: &[ChordBin], p: usize) -> Vec<(f64, f64, f64)> {
    let mut bins: Vec<(f64, f64, f64)> = bins
        .iter()
        .filter(|b| b.probe == p)
        .map(|b| (b.lower, b.upper, b.count))
        .collect();
    bins.sort_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = bins.iter().map(|b| b.2).sum();
    if total <= 0.0 {
        return Vec::new();
    }
    bins.iter().map(|&(l, u, n)| (l, u, n / total)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn envelope_recovers_fmax_of_exact_parabola() {
        let pts = (1..10).map(|i| {
            let c = i as f64 / 10.0;
            (c, 4.0 * 150.0 * c * (1.0 - c))
        });
        let f = envelope_fmax(pts).unwrap();
        assert!((f - 150.0).abs() < 1e-9, "{f}");
        assert_eq!(envelope_fmax([(0.5, 100.0)].into_iter()), None);
        // C = 0 and C = 1 carry no information on Fmax
        assert_eq!(
            envelope_fmax([(0.0, 0.0), (1.0, 0.0), (0.0, 0.0)].into_iter()),
            None
        );
    }

    #[test]
    fn decay_fit_recovers_an_exact_exponential() {
        let truth = DecayFit {
            c0: 0.48,
            cf: 0.16,
            tau_s: 0.6,
            rmse: None,
            resolved: true,
        };
        let pts: Vec<(f64, f64)> = (0..30)
            .map(|i| {
                let t = i as f64 * 0.1;
                (t, truth.at(t))
            })
            .collect();
        let fit = fit_decay(&pts).unwrap();
        assert!((fit.tau_s - 0.6).abs() < 1e-4, "{fit:?}");
        assert!((fit.c0 - 0.48).abs() < 1e-5 && (fit.cf - 0.16).abs() < 1e-5);
        assert!(fit.resolved && fit.rmse.unwrap() < 1e-6);
        assert!(fit_decay(&pts[..3]).is_none());
    }

    #[test]
    fn a_straight_line_is_not_a_resolved_decay() {
        let pts: Vec<(f64, f64)> = (0..10).map(|i| (i as f64, 0.5 - 0.01 * i as f64)).collect();
        let fit = fit_decay(&pts).unwrap();
        assert!(!fit.resolved, "{fit:?}");
    }

    #[test]
    fn power_law_integrates_to_its_depth_average() {
        // DESIGN.md §1: C = 0.9 (y/Y90)^n gives Cmean = 0.9/(1+n) over [0, Y90].
        let (y90, n) = (100.0, 1.5);
        let curve = power_law_curve(y90, n, y90);
        let mut integral = 0.0;
        for w in curve.windows(2) {
            integral += 0.5 * (w[0].0 + w[1].0) * (w[1].1 - w[0].1);
        }
        assert!((integral / y90 - 0.9 / (1.0 + n)).abs() < 1e-3);
        let full = power_law_curve(y90, n, 1e9);
        let top = full.last().unwrap();
        assert!((top.0 - 1.0).abs() < 1e-9 && top.1 > y90);
    }

    #[test]
    fn quantiles() {
        assert_eq!(quantile_sorted(&[1.0, 2.0, 3.0, 4.0, 5.0], 0.5), Some(3.0));
        assert_eq!(quantile_sorted(&[1.0, 2.0], 0.5), Some(1.5));
        assert_eq!(quantile_sorted(&[], 0.5), None);
        // two equal log bins [1,10) and [10,100): the median is their common edge
        let bins = [(1.0, 10.0, 5.0), (10.0, 100.0, 5.0)];
        assert!((histogram_quantile(&bins, 0.5).unwrap() - 10.0).abs() < 1e-9);
        assert!((histogram_quantile(&bins, 0.25).unwrap() - 10f64.sqrt()).abs() < 1e-9);
    }
}
