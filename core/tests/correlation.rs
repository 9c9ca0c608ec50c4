//! Checks of the dual-tip correlation (core/src/correlation.rs) against analytic values,
//! direct sums, an FFT reference and sampling theory.

use frothline_core::record::ProbeWindow;
use frothline_core::{
    Chain, ChainConfig, CorrelationSums, Flags, LevelSource, Polarity, ProbeConfig, TipConfig,
    WindowPolicy,
};
use rand::{rngs::StdRng, Rng, SeedableRng};
use rand_distr::{Distribution, Gamma, Normal};
use rustfft::{num_complex::Complex, FftPlanner};

const AIR: i16 = 20_000;
const WATER: i16 = 2_000;

fn tip(channel: u8) -> TipConfig {
    TipConfig {
        channel,
        polarity: Polarity::AirHigh,
        levels: LevelSource::Fixed {
            air: AIR,
            water: WATER,
        },
    }
}

fn dual_config(max_lag: u16, window: WindowPolicy) -> ChainConfig<2> {
    let mut c = ChainConfig::new(2, window);
    c.probes
        .push(ProbeConfig::dual(tip(0), tip(1), max_lag))
        .unwrap();
    c
}

fn interleave(a: &[bool], b: &[bool]) -> Vec<i16> {
    let level = |x: bool| if x { AIR } else { WATER };
    a.iter()
        .zip(b)
        .flat_map(|(&x, &y)| [level(x), level(y)])
        .collect()
}

/// Run a two-channel chain over the binary signals (one push, draining as needed).
fn run<const L: usize>(cfg: ChainConfig<2>, a: &[bool], b: &[bool]) -> Vec<ProbeWindow<L>> {
    let samples = interleave(a, b);
    let mut chain = Chain::<2, L>::new(cfg).expect("valid config");
    let mut out = Vec::new();
    let mut block = &samples[..];
    while !block.is_empty() {
        let used = chain.push(block);
        block = &block[used..];
        while let Some(r) = chain.poll() {
            out.push(r);
        }
    }
    while chain.finish().is_err() {
        while let Some(r) = chain.poll() {
            out.push(r);
        }
    }
    while let Some(r) = chain.poll() {
        out.push(r);
    }
    out
}

fn sums<const L: usize>(r: &ProbeWindow<L>) -> &CorrelationSums<L> {
    r.correlation_sums.as_ref().expect("dual-tip probe")
}

/// Render integer intervals [s, e) into a binary signal of `n` samples.
fn render_int(intervals: &[(i64, i64)], n: usize) -> Vec<bool> {
    let mut x = vec![false; n];
    for &(s, e) in intervals {
        for v in x
            .iter_mut()
            .take(e.clamp(0, n as i64) as usize)
            .skip(s.clamp(0, n as i64) as usize)
        {
            *v = true;
        }
    }
    x
}

/// Render continuous intervals (in sample units): sample i is air when s <= i < e, i.e.
/// samples ceil(s)..ceil(e).
fn render(intervals: &[(f64, f64)], n: usize) -> Vec<bool> {
    let int: Vec<(i64, i64)> = intervals
        .iter()
        .map(|&(s, e)| (s.ceil() as i64, e.ceil() as i64))
        .collect();
    render_int(&int, n)
}

/// Direct O(N L) sums of the definition (module documentation of correlation.rs):
/// S_ab(tau) = sum_{t < N - tau} a(t) b(t + tau), and the auto sums.
fn direct(a: &[bool], b: &[bool], lags: usize) -> (Vec<u64>, Vec<u64>) {
    let n = a.len();
    let mut cross = vec![0u64; lags];
    let mut auto = vec![0u64; lags];
    for tau in 0..lags.min(n) {
        for t in 0..n - tau {
            cross[tau] += (a[t] & b[t + tau]) as u64;
            auto[tau] += (a[t] & a[t + tau]) as u64;
        }
    }
    (cross, auto)
}

/// Correlation sums through the FFT (Wiener-Khinchin with zero padding, so the circular
/// correlation equals the linear one): sum_t x(t) y(t + tau) = IFFT(conj(X) Y)(tau).
fn fft_corr(x: &[bool], y: &[bool], lags: usize) -> Vec<f64> {
    let n = (x.len() + lags).next_power_of_two();
    let mut planner = FftPlanner::<f64>::new();
    let fwd = planner.plan_fft_forward(n);
    let inv = planner.plan_fft_inverse(n);
    let load = |s: &[bool]| {
        let mut v = vec![Complex::new(0.0, 0.0); n];
        for (o, &b) in v.iter_mut().zip(s) {
            o.re = b as u8 as f64;
        }
        v
    };
    let (mut fx, mut fy) = (load(x), load(y));
    fwd.process(&mut fx);
    fwd.process(&mut fy);
    let mut prod: Vec<Complex<f64>> = fx.iter().zip(&fy).map(|(a, b)| a.conj() * b).collect();
    inv.process(&mut prod);
    prod.iter().take(lags).map(|c| c.re / n as f64).collect()
}

/// Pearson's coefficient of the overlapping sequences, in f64 (the stated formula).
fn pearson(n: f64, sa: f64, sb: f64, sab: f64) -> f64 {
    (n * sab - sa * sb) / ((n * sa - sa * sa) * (n * sb - sb * sb)).sqrt()
}

fn count(x: &[bool]) -> u64 {
    x.iter().filter(|&&v| v).count() as u64
}

/// Length of the intersection of two sorted lists of disjoint intervals, the second one
/// shifted by -shift, both clipped to [lo, hi).
fn intersection(a: &[(i64, i64)], b: &[(i64, i64)], shift: i64, lo: i64, hi: i64) -> i64 {
    let (mut i, mut j, mut sum) = (0, 0, 0);
    while i < a.len() && j < b.len() {
        let (s1, e1) = a[i];
        let (s2, e2) = (b[j].0 - shift, b[j].1 - shift);
        let s = s1.max(s2).max(lo);
        let e = e1.min(e2).min(hi);
        sum += (e - s).max(0);
        if e1 < e2 {
            i += 1;
        } else {
            j += 1;
        }
    }
    sum
}

/// Sequential non-overlapping intervals with gamma gaps and chords (samples).
fn bubbles(rng: &mut StdRng, n: f64, gap: f64, chord: f64, shape: f64) -> Vec<(f64, f64)> {
    bubbles2(rng, n, gap, shape, chord, shape)
}

/// The same with separate gamma shapes for the gaps and the chords.
fn bubbles2(
    rng: &mut StdRng,
    n: f64,
    gap: f64,
    gap_shape: f64,
    chord: f64,
    shape: f64,
) -> Vec<(f64, f64)> {
    let g = Gamma::new(gap_shape, gap / gap_shape).unwrap();
    let c = Gamma::new(shape, chord / shape).unwrap();
    let mut out = Vec::new();
    let mut t = g.sample(rng);
    while t < n {
        let e = t + c.sample(rng).max(1.0);
        out.push((t, e));
        t = e + g.sample(rng).max(1.0);
    }
    out
}

/// Analytic case (the definition of the Pearson coefficient over interval sets): the
/// trailing tip sees every leading bubble exactly k samples later, plus bubbles of its own,
/// and the leading tip has bubbles of its own too. The cross sum at k is then the
/// intersection of the leading intervals with the trailing ones moved back by k, computed
/// here by an interval sweep, and the coefficient follows from the stated formula.
#[test]
fn integer_delay_with_extra_bubbles_gives_the_analytic_peak() {
    let n = 300_000usize;
    let k = 37i64;
    let mut rng = StdRng::seed_from_u64(21);
    let common: Vec<(i64, i64)> = bubbles(&mut rng, n as f64 - 200.0, 400.0, 30.0, 3.0)
        .iter()
        .map(|&(s, e)| (s as i64, e as i64))
        .filter(|&(s, e)| e > s)
        .collect();
    let mut lead = common.clone();
    let mut trail: Vec<(i64, i64)> = common.iter().map(|&(s, e)| (s + k, e + k)).collect();
    // Extra bubbles on each tip where they do not touch that tip's bubbles.
    for list in [&mut lead, &mut trail] {
        let mut occupied = render_int(list, n);
        for _ in 0..400 {
            let s = rng.random_range(1..n as i64 - 100);
            let e = s + rng.random_range(5..60);
            if occupied[(s - 1) as usize..=(e as usize)].iter().any(|&x| x) {
                continue;
            }
            occupied[s as usize..e as usize].fill(true);
            list.push((s, e));
        }
        list.sort();
    }
    let a = render_int(&lead, n);
    let b = render_int(&trail, n);
    let recs = run::<256>(dual_config(120, WindowPolicy::Whole), &a, &b);
    assert_eq!(recs.len(), 1);
    let r = &recs[0];
    let c = r.correlation.expect("correlation");
    let s = sums(r);

    let nk = n as i64 - k;
    let sab = intersection(&lead, &trail, k, 0, nk);
    let sa = intersection(&lead, &[(0, nk)], 0, 0, nk);
    let sb = intersection(&trail, &[(k, n as i64)], 0, k, n as i64);
    assert_eq!(s.cross[k as usize], sab as u64);
    assert_eq!(s.lead_sum(k as usize), Some(sa as u64));
    assert_eq!(s.trail_sum(k as usize), Some(sb as u64));
    let want = pearson(nk as f64, sa as f64, sb as f64, sab as f64);
    let got = c.peak_coefficient.unwrap() as f64;
    assert!(
        (got - want).abs() <= 1e-6 * want,
        "peak {got} vs analytic {want}"
    );
    let lag = c.peak_lag_frames.unwrap();
    assert!((lag - k as f32).abs() < 0.05, "peak lag {lag}");
    assert!(
        !r.flags.contains(Flags::NO_CORRELATION_PEAK)
            && !r.flags.contains(Flags::PEAK_AT_LAG_BOUNDARY),
        "flags {:?}",
        r.flags
    );
    // The correlator's own air totals agree with the tip statistics.
    assert_eq!(s.lead_air, r.lead.air_frames);
    assert_eq!(s.trail_air, r.trail.as_ref().unwrap().air_frames);
}

/// Sampling theory (expected sampled overlap of boxcars equals the continuous overlap, so
/// the sampled cross-correlation of a pure delay d is a tent with its apex at d): bubbles
/// rendered at sub-sample shifts recover the shift within 0.05 sample.
#[test]
fn fractional_delays_are_recovered_within_five_hundredths_of_a_sample() {
    let n = 2_000_000usize;
    let mut rng = StdRng::seed_from_u64(5);
    let lead = bubbles(&mut rng, n as f64 - 100.0, 150.0, 40.0, 4.0);
    let a = render(&lead, n);
    let mut worst = 0.0f64;
    for step in 0..10 {
        let d = 25.0 + step as f64 * 0.1;
        let trail: Vec<(f64, f64)> = lead.iter().map(|&(s, e)| (s + d, e + d)).collect();
        let b = render(&trail, n);
        let recs = run::<64>(dual_config(60, WindowPolicy::Whole), &a, &b);
        let lag = recs[0].correlation.unwrap().peak_lag_frames.unwrap() as f64;
        worst = worst.max((lag - d).abs());
        assert!((lag - d).abs() < 0.05, "delay {d}: peak at {lag}");
    }
    eprintln!("worst sub-sample error {worst:.4}");
}

/// Random telegraph signals cut into fixed windows (intervals open at the window edges are
/// clipped): every window's sums equal the direct O(N L) sums exactly, and the FFT
/// correlation (rustfft) to 1e-6 relative; the coefficients equal Pearson's formula in f64
/// to 1e-6 relative.
#[test]
fn sums_equal_direct_and_fft_correlations_on_random_signals() {
    let n = 180_000usize;
    let lags = 97usize;
    let mut rng = StdRng::seed_from_u64(77);
    let mut a = Vec::with_capacity(n);
    let mut air = true;
    while a.len() < n {
        let len = rng.random_range(1..300);
        a.extend(std::iter::repeat_n(air, len));
        air = !air;
    }
    a.truncate(n);
    // The trailing tip: the leading signal 13 samples later, with random flips.
    let mut b: Vec<bool> = (0..n).map(|i| i >= 13 && a[i - 13]).collect();
    let mut i = 0;
    while i < n {
        let len = rng.random_range(1..400);
        if rng.random_bool(0.3) {
            for v in b.iter_mut().skip(i).take(len) {
                *v = !*v;
            }
        }
        i += len + rng.random_range(200..2000);
    }
    let mut cfg = dual_config(lags as u16 - 1, WindowPolicy::Frames(50_000));
    cfg.initial_air = true;
    let recs = run::<128>(cfg, &a, &b);
    assert_eq!(recs.len(), 4);
    for r in &recs {
        let (s0, s1) = (r.start as usize, r.end as usize);
        let (wa, wb) = (&a[s0..s1], &b[s0..s1]);
        let s = sums(r);
        assert_eq!(s.lags(), lags);
        let (cross, auto) = direct(wa, wb, lags);
        assert_eq!(s.cross.as_slice(), cross.as_slice(), "window {s0}");
        assert_eq!(s.auto.as_slice(), auto.as_slice(), "window {s0}");
        let fc = fft_corr(wa, wb, lags);
        let fa = fft_corr(wa, wa, lags);
        let m = wa.len();
        for tau in 0..lags {
            let rel = |x: f64, y: f64| (x - y).abs() / y.abs().max(1.0);
            assert!(rel(s.cross[tau] as f64, fc[tau]) < 1e-6, "tau {tau}");
            assert!(rel(s.auto[tau] as f64, fa[tau]) < 1e-6, "tau {tau}");
            let sa = count(&wa[..m - tau]);
            let sb = count(&wb[tau..]);
            let sa2 = count(&wa[tau..]);
            assert_eq!(s.lead_sum(tau), Some(sa));
            assert_eq!(s.trail_sum(tau), Some(sb));
            assert_eq!(s.lead_lagged_sum(tau), Some(sa2));
            let nn = (m - tau) as f64;
            let want = pearson(nn, sa as f64, sb as f64, fc[tau].round());
            let got = s.cross_coefficient(tau).unwrap() as f64;
            assert!(
                (got - want).abs() <= 1e-6 * want.abs().max(1e-3),
                "R_ab({tau}) {got} vs {want}"
            );
            let want = pearson(nn, sa as f64, sa2 as f64, fa[tau].round());
            let got = s.auto_coefficient(tau).unwrap() as f64;
            assert!(
                (got - want).abs() <= 1e-6 * want.abs().max(1e-3),
                "R_aa({tau}) {got} vs {want}"
            );
        }
        assert_eq!(s.auto_coefficient(0), Some(1.0));
        // The batch computation behind the results is the accessors, bit for bit.
        let (mut bc, mut ba) = ([0f32; 128], [0f32; 128]);
        s.coefficients(&mut bc, &mut ba);
        for tau in 0..lags {
            let bits = |x: Option<f32>| x.unwrap_or(f32::NAN).to_bits();
            assert_eq!(
                bc[tau].to_bits(),
                bits(s.cross_coefficient(tau)),
                "tau {tau}"
            );
            assert_eq!(
                ba[tau].to_bits(),
                bits(s.auto_coefficient(tau)),
                "tau {tau}"
            );
        }
        let c = r.correlation.unwrap();
        assert_eq!(c.max_lag as usize, lags - 1);
        let lag = c.peak_lag_frames.unwrap();
        assert!((lag - 13.0).abs() < 0.5, "window {s0}: peak {lag}");
    }
}

/// Degenerate windows (design rule: defined output, flags, no panic): no bubble, all air,
/// one bubble, windows shorter than the lag range.
#[test]
fn degenerate_windows_give_defined_output_and_flags() {
    let n = 20_000;
    let none = Flags::NO_CORRELATION_PEAK | Flags::TU_UNDEFINED | Flags::FEW_BUBBLES;
    for (name, a, b) in [
        ("water", vec![false; n], vec![false; n]),
        ("air", vec![true; n], vec![true; n]),
        ("lead only", render_int(&[(100, 900)], n), vec![false; n]),
    ] {
        let recs = run::<256>(dual_config(200, WindowPolicy::Whole), &a, &b);
        let c = recs[0].correlation.expect(name);
        assert_eq!(c.peak_lag_frames, None, "{name}");
        assert_eq!(c.peak_coefficient, None, "{name}");
        assert_eq!(c.turbulence_intensity, None, "{name}");
        assert!(recs[0].flags.contains(none), "{name}: {:?}", recs[0].flags);
    }
    // One bubble on each tip, 30 samples apart: the peak is there, but flagged.
    let a = render_int(&[(1000, 1100)], n);
    let b = render_int(&[(1030, 1130)], n);
    let recs = run::<256>(dual_config(200, WindowPolicy::Whole), &a, &b);
    let c = recs[0].correlation.unwrap();
    assert!((c.peak_lag_frames.unwrap() - 30.0).abs() < 1e-3);
    assert!(recs[0].flags.contains(Flags::FEW_BUBBLES));
    // Windows of 1 and 3 frames over a busy signal: at most 2 lags defined.
    let a: Vec<bool> = (0..3000).map(|i| i % 7 < 3).collect();
    let b: Vec<bool> = (0..3000).map(|i| i % 5 < 2).collect();
    for w in [1, 3] {
        let recs = run::<256>(dual_config(200, WindowPolicy::Frames(w)), &a, &b);
        assert_eq!(recs.len(), 3000 / w as usize);
        for r in &recs {
            let c = r.correlation.unwrap();
            assert!(r.flags.contains(Flags::FEW_BUBBLES));
            if let Some(lag) = c.peak_lag_frames {
                assert!(lag <= 1.0);
                assert!(r.flags.contains(Flags::PEAK_AT_LAG_BOUNDARY));
            }
            assert_eq!(sums(r).lags(), 201);
            assert_eq!(sums(r).cross_coefficient(w as usize), None);
        }
    }
}

/// Keane and Adrian (1992): the secondary-peak ratio is the second correlation peak over
/// the first. Two bubble populations crossing the tips at two different delays, one twice
/// as numerous as the other, give two peaks whose heights are in that ratio (up to the
/// background, hence the loose margin).
#[test]
fn secondary_peak_ratio_of_two_populations() {
    let n = 600_000usize;
    let mut rng = StdRng::seed_from_u64(8);
    let all = bubbles(&mut rng, n as f64 - 300.0, 500.0, 25.0, 4.0);
    let (mut lead, mut trail) = (Vec::new(), Vec::new());
    for (i, &(s, e)) in all.iter().enumerate() {
        lead.push((s, e));
        let d = if i % 3 == 2 { 90.0 } else { 30.0 };
        trail.push((s + d, e + d));
    }
    let recs = run::<256>(
        dual_config(150, WindowPolicy::Whole),
        &render(&lead, n),
        &render(&trail, n),
    );
    let c = recs[0].correlation.unwrap();
    let lag = c.peak_lag_frames.unwrap();
    assert!((lag - 30.0).abs() < 0.5, "peak {lag}");
    let ratio = c.secondary_peak_ratio.unwrap();
    assert!((0.4..0.6).contains(&ratio), "ratio {ratio}");
    // A single population has no secondary peak worth the name.
    let trail: Vec<(f64, f64)> = all.iter().map(|&(s, e)| (s + 30.0, e + 30.0)).collect();
    let recs = run::<256>(
        dual_config(150, WindowPolicy::Whole),
        &render(&all, n),
        &render(&trail, n),
    );
    let ratio = recs[0].correlation.unwrap().secondary_peak_ratio.unwrap();
    assert!(ratio < 0.2, "ratio {ratio}");
}

/// The dual-tip turbulence method assumes Gaussian velocity fluctuations: bubbles whose
/// transit times are Gaussian with standard deviation Tu T should give back Tu (margin 15 %,
/// the accuracy the README claims). The method subtracts the widths in quadrature, which holds when both
/// peaks are Gaussian-like or the transit-time spread dominates the chord; so the bubbles
/// here are short (10 samples) next to the spread (10 to 40 samples), and Poisson-spaced
/// (a quasi-periodic spacing would put side lobes of negative correlation next to the peak
/// and narrow it). 13 000 bubbles keep the statistical scatter of T and tau05 well inside
/// the margin.
#[test]
fn gaussian_transit_times_give_their_turbulence_intensity() {
    let n = 4_000_000usize;
    let t_mean = 100.0;
    for tu in [0.1, 0.2, 0.3, 0.4] {
        let mut rng = StdRng::seed_from_u64(40 + (tu * 10.0) as u64);
        let lead = bubbles2(&mut rng, n as f64 - 400.0, 300.0, 1.0, 10.0, 4.0);
        let delay = Normal::<f64>::new(t_mean, tu * t_mean).unwrap();
        let trail: Vec<(f64, f64)> = lead
            .iter()
            .map(|&(s, e)| {
                let d: f64 = delay.sample(&mut rng);
                let d = d.max(1.0);
                (s + d, e + d)
            })
            .collect();
        let recs = run::<512>(
            dual_config(400, WindowPolicy::Whole),
            &render(&lead, n),
            &render(&trail, n),
        );
        let c = recs[0].correlation.unwrap();
        let got = c.turbulence_intensity.expect("Tu");
        eprintln!(
            "Tu {tu}: got {got:.3} (T {:?}, tau05 {:?}, T05 {:?})",
            c.peak_lag_frames, c.tau05_frames, c.t05_frames
        );
        assert!((got as f64 - tu).abs() < 0.15 * tu, "Tu {tu}: got {got}");
        assert!(!recs[0].flags.contains(Flags::TU_UNDEFINED));
    }
}

/// Adaptive windows (module documentation of window.rs): each window ends at the frame of
/// the reference tip's N-th bubble close, so every closed window holds exactly N bubbles
/// on that tip, and the windows tile the record.
#[test]
fn bubble_count_windows_hold_their_bubbles() {
    let n = 300_000usize;
    let mut rng = StdRng::seed_from_u64(3);
    let lead = bubbles(&mut rng, n as f64, 300.0, 30.0, 2.0);
    let trail: Vec<(f64, f64)> = lead.iter().map(|&(s, e)| (s + 12.3, e + 12.3)).collect();
    let (a, b) = (render(&lead, n), render(&trail, n));
    let policy = WindowPolicy::Bubbles {
        count: 50,
        probe: 0,
        max_frames: None,
    };
    let recs = run::<64>(dual_config(40, policy), &a, &b);
    assert!(recs.len() > 10);
    let mut at = 0;
    for (i, r) in recs.iter().enumerate() {
        assert_eq!(r.start, at);
        at = r.end;
        let last = i == recs.len() - 1;
        if !last {
            assert_eq!(r.lead.bubbles, 50);
            // The window's last frame is the first water frame after its 50th bubble.
            let e = r.end as usize - 1;
            assert!(a[e - 1] && !a[e], "window {i} ends off a bubble");
            assert!(!r.flags.contains(Flags::PARTIAL_WINDOW));
            let lag = r.correlation.unwrap().peak_lag_frames.unwrap();
            assert!((lag - 12.3).abs() < 0.5, "window {i}: lag {lag}");
        } else {
            assert!(r.lead.bubbles <= 50);
            assert!(r.flags.contains(Flags::PARTIAL_WINDOW));
        }
    }
    assert_eq!(at, n as u64);
    // A cap shorter than the bubble spacing closes windows by length.
    let capped = WindowPolicy::Bubbles {
        count: 50,
        probe: 0,
        max_frames: Some(1000),
    };
    let recs = run::<64>(dual_config(40, capped), &a, &b);
    assert!(recs.iter().all(|r| r.end - r.start <= 1000));
}

/// The lag range is capped at the chain's L - 1, and merged sums give the pooled Pearson
/// coefficient of all the overlapping frames (definition of CorrelationSums::merge).
#[test]
fn lag_cap_and_merged_sums() {
    let n = 40_000usize;
    let mut rng = StdRng::seed_from_u64(9);
    let lead = bubbles(&mut rng, n as f64, 200.0, 20.0, 2.0);
    let trail: Vec<(f64, f64)> = lead.iter().map(|&(s, e)| (s + 9.0, e + 9.0)).collect();
    let (a, b) = (render(&lead, n), render(&trail, n));
    let chain = Chain::<2, 16>::new(dual_config(1000, WindowPolicy::Whole)).unwrap();
    assert_eq!(chain.max_lag(0), Some(15));
    assert_eq!(Chain::<2, 16>::MAX_LAG, 15);
    let recs = run::<16>(dual_config(1000, WindowPolicy::Frames(10_000)), &a, &b);
    assert_eq!(recs.len(), 4);
    let mut merged = sums(&recs[0]).clone();
    for r in &recs[1..] {
        merged.merge(sums(r));
    }
    assert_eq!(merged.windows, 4);
    for tau in 0..16 {
        let (mut nn, mut sa, mut sb, mut sab) = (0u64, 0u64, 0u64, 0u64);
        for r in &recs {
            let (s0, s1) = (r.start as usize, r.end as usize);
            let (wa, wb) = (&a[s0..s1], &b[s0..s1]);
            let m = wa.len();
            nn += (m - tau) as u64;
            sa += count(&wa[..m - tau]);
            sb += count(&wb[tau..]);
            sab += (0..m - tau).filter(|&t| wa[t] & wb[t + tau]).count() as u64;
        }
        assert_eq!(merged.overlap(tau), nn);
        assert_eq!(merged.cross[tau], sab);
        let want = pearson(nn as f64, sa as f64, sb as f64, sab as f64);
        let got = merged.cross_coefficient(tau).unwrap() as f64;
        assert!((got - want).abs() <= 1e-6 * want.abs().max(1e-3));
    }
}
