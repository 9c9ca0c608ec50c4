//! Tests of the whole generator: determinism, statistics, signal shape and written files.

use super::*;

fn one_probe(c: f64, f: f64, v: f64) -> Scenario {
    let mut s = Scenario::builtin_default();
    s.probes = vec![ProbeSpec::new("P", 20.0, c, f, v)];
    s
}

fn quiet(mut s: Scenario) -> Scenario {
    s.signal.noise_sigma_counts = 0.0;
    s.signal.drift = DriftSpec::default();
    s
}

fn mean_sd(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let m = x.iter().sum::<f64>() / n;
    let v = x.iter().map(|a| (a - m) * (a - m)).sum::<f64>() / (n - 1.0);
    (m, v.sqrt())
}

#[test]
fn same_seed_same_capture_other_seed_other_capture() {
    let mut s = Scenario::builtin_default();
    s.duration_s = 0.5;
    let a = render_interleaved(&s, 11).unwrap();
    let b = render_interleaved(&s, 11).unwrap();
    let c = render_interleaved(&s, 12).unwrap();
    assert_eq!(a, b);
    assert_ne!(a.samples, c.samples);
    assert_eq!(a.samples.len(), 20_000 * 8);
}

#[test]
fn adding_probes_leaves_existing_ones_unchanged() {
    let mut s = Scenario::builtin_default();
    s.duration_s = 0.2;
    let a = render_interleaved(&s, 3).unwrap();
    s.replicate(6);
    let b = render_interleaved(&s, 3).unwrap();
    assert_eq!(b.channels, 12);
    for c in 0..8 {
        assert!(a.channel(c).eq(b.channel(c)), "channel {c}");
    }
}

/// Realised C and F against the targets, with tolerances from the renewal-process CLT.
///
/// Cycle = air + water chord, mean 1/F, variance (C^2 + (1-C)^2) / (k F^2). Over a record T
/// the count N has variance T sigma^2 / mu^3 = T F (C^2 + (1-C)^2) / k, so
/// sd(F_hat) = sqrt(F (C^2 + (1-C)^2) / (k T)). The air time is a renewal-reward sum with
/// per-cycle reward deviation A - C X of variance 2 C^2 (1-C)^2 / (k F^2), so
/// sd(C_hat) = sqrt(2 C^2 (1-C)^2 / (k F T)). The mean chord of N bubbles has
/// sd (C/F) / sqrt(k N). We accept 5 standard deviations (plus a small allowance for the
/// edge bubbles, which are O(1/N)).
#[test]
fn realised_void_fraction_and_count_rate_match_targets() {
    let t = 200.0;
    for (i, &(c, f, k)) in [
        (0.05, 30.0, 2.0),
        (0.5, 120.0, 2.0),
        (0.8, 75.0, 1.0),
        (0.3, 60.0, 4.0),
    ]
    .iter()
    .enumerate()
    {
        let mut s = one_probe(c, f, 2.5);
        s.duration_s = t;
        s.probes[0].chord_shape = Some(k);
        let truth = generate_tip_intervals(&s, 100 + i as u64).unwrap();
        let r = realised_stats(&truth[0].leading(), t);
        let sd_f = (f * (c * c + (1.0 - c) * (1.0 - c)) / (k * t)).sqrt();
        let sd_c = (2.0 * c * c * (1.0 - c) * (1.0 - c) / (k * f * t)).sqrt();
        let n = r.bubbles as f64;
        let sd_chord = (c / f) / (k * n).sqrt();
        let edge = 2.0 / (f * t);
        assert!(
            (r.bubble_count_rate_hz - f).abs() < 5.0 * sd_f + f * edge,
            "C={c} F={f}: F realised {} (sd {sd_f})",
            r.bubble_count_rate_hz
        );
        assert!(
            (r.void_fraction - c).abs() < 5.0 * sd_c + edge,
            "C={c} F={f}: C realised {} (sd {sd_c})",
            r.void_fraction
        );
        let chord = r.bubble_chord_mean_s.unwrap();
        assert!(
            (chord - c / f).abs() < 5.0 * sd_chord,
            "chord {chord} vs {}",
            c / f
        );
    }
}

#[test]
fn chord_shape_sets_the_chord_dispersion() {
    // Gamma(k): coefficient of variation 1/sqrt(k).
    for k in [1.0, 4.0] {
        let mut s = one_probe(0.4, 100.0, 2.0);
        s.duration_s = 100.0;
        s.probes[0].chord_shape = Some(k);
        let truth = generate_tip_intervals(&s, 5).unwrap();
        let d: Vec<f64> = truth[0]
            .leading()
            .iter()
            .map(Interval::duration_s)
            .collect();
        let (m, sd) = mean_sd(&d);
        assert!(
            (sd / m - 1.0 / f64::sqrt(k)).abs() < 0.05,
            "k={k}: cv {}",
            sd / m
        );
    }
}

/// Leading -> trailing delays: mean spacing / V up to the Jensen term, since
/// E[1 / (1 + Tu xi)] = 1 + Tu^2 + 3 Tu^4 + ... The per-bubble delay has sd about
/// (S/V) Tu, so over ~20000 bubbles the mean is known to ~1e-3 relative.
#[test]
fn trailing_delay_mean_is_spacing_over_velocity() {
    let (c, f, v, tu, spacing_mm) = (0.3, 100.0, 2.5, 0.1, 6.0);
    let mut s = one_probe(c, f, v);
    s.duration_s = 200.0;
    s.probes[0].turbulence_intensity = Some(tu);
    s.probes[0].tip_spacing_mm = Some(spacing_mm);
    let truth = generate_tip_intervals(&s, 9).unwrap().remove(0);
    let expected = spacing_mm * 1e-3 / v;
    let lags: Vec<f64> = truth.bubbles.iter().filter_map(|b| b.lag_s).collect();
    let (m, sd) = mean_sd(&lags);
    let jensen = 1.0 + tu * tu + 3.0 * tu.powi(4);
    assert!(
        (m / expected - jensen).abs() < 0.005,
        "mean lag {m} vs {expected}"
    );
    assert!((sd / expected - tu).abs() < 0.01, "lag sd {sd}");

    // Seen fraction 1 - p_miss (binomial, 5 sd).
    let n = truth.bubbles.len() as f64;
    let seen = lags.len() as f64 / n;
    assert!((seen - 0.9).abs() < 5.0 * (0.09 / n).sqrt(), "seen {seen}");

    // Every seen bubble is in the trailing record, shifted, with its chord.
    let tr = truth.trailing.as_ref().unwrap();
    for b in truth.bubbles.iter().filter(|b| b.lag_s.is_some()).take(500) {
        let st = b.interval.start_s + b.lag_s.unwrap();
        let en = b.interval.end_s + b.lag_s.unwrap();
        let i = tr.partition_point(|iv| iv.end_s < en);
        assert!(tr[i].start_s <= st + 1e-12 && tr[i].end_s >= en - 1e-12);
    }
    // Misses and extras balance: trailing C close to leading C.
    let ct = realised_stats(tr, s.duration_s).void_fraction;
    assert!((ct - c).abs() < 0.02, "trailing C {ct}");
}

/// The delay also shows in the rendered signals: the cross-correlation of the thresholded
/// tips peaks at spacing / V (to a sample or two).
#[test]
fn rendered_cross_correlation_peaks_at_the_transit_time() {
    let mut s = quiet(one_probe(0.3, 100.0, 2.5));
    s.duration_s = 2.0;
    let cap = render_interleaved(&s, 4).unwrap();
    let mid = (3000.0 + 26000.0) / 2.0;
    let bin = |c: u16| -> Vec<f64> {
        cap.channel(c)
            .map(|x| if x as f64 > mid { 1.0 } else { 0.0 })
            .collect()
    };
    let (a, b) = (bin(0), bin(1));
    let n = a.len();
    let (best, _) = (0..200usize)
        .map(|lag| (lag, (0..n - lag).map(|i| a[i] * b[i + lag]).sum::<f64>()))
        .fold((0, f64::MIN), |acc, x| if x.1 > acc.1 { x } else { acc });
    let expected = 6e-3 / 2.5 * 40_000.0; // 96 samples
    assert!(
        (best as f64 - expected).abs() <= 3.0,
        "peak at {best}, expected {expected}"
    );
}

#[test]
fn polarity_swap_mirrors_the_signal_about_the_mid_level() {
    let mut s = quiet(one_probe(0.4, 80.0, 2.0));
    s.duration_s = 0.5;
    let hi = render_interleaved(&s, 21).unwrap();
    s.probes[0].air_is_high = Some(false);
    let lo = render_interleaved(&s, 21).unwrap();
    let sum = s.signal.low_counts + s.signal.high_counts;
    let mut in_air = 0;
    for (a, b) in hi.samples.iter().zip(&lo.samples) {
        assert!(
            (*a as i32 + *b as i32 - sum).abs() <= 1,
            "{a} + {b} != {sum}"
        );
        in_air += (*a as i32 > sum / 2) as usize;
    }
    assert!(in_air > 0 && in_air < hi.samples.len());
}

#[test]
fn thresholded_signal_reproduces_the_realised_void_fraction() {
    let mut s = one_probe(0.5, 120.0, 2.5);
    s.duration_s = 5.0;
    s.signal.noise_sigma_counts = 300.0;
    let cap = render_interleaved(&s, 8).unwrap();
    let mid = 14_500;
    let air = cap.channel(0).filter(|&x| x > mid).count() as f64 / cap.frames as f64;
    let truth = realised_stats(&cap.truth[0].leading(), s.duration_s).void_fraction;
    // Centred ramps: the mid-level crossings sit on the interfaces; point sampling adds
    // about one sample period per chord of rounding, noise near crossings a little more.
    assert!(
        (air - truth).abs() < 0.005,
        "signal C {air} vs truth {truth}"
    );
}

#[test]
fn ramps_take_the_configured_times() {
    let mut s = quiet(one_probe(0.5, 100.0, 2.0));
    s.probes[0].tips = Some(1);
    s.duration_s = 0.5;
    s.sample_rate_hz = 1_000_000;
    let cap = render_interleaved(&s, 2).unwrap();
    let x: Vec<i16> = cap.channel(0).collect();
    let (lo, hi) = (3000.0 + 0.1 * 23000.0, 3000.0 + 0.9 * 23000.0);
    // Count intermediate samples on rising and on falling edges separately.
    let (mut up, mut down) = (0usize, 0usize);
    for w in x.windows(2) {
        let v = w[1] as f64;
        if v > lo && v < hi {
            if w[1] > w[0] {
                up += 1;
            } else {
                down += 1;
            }
        }
    }
    let ivs: Vec<Interval> = cap.truth[0]
        .leading()
        .into_iter()
        .filter(|iv| iv.start_s > 1e-3 && iv.end_s < 0.499)
        .collect();
    let n = ivs.len() as f64;
    assert!(n > 20.0);
    // 10 % .. 90 %: 80 % of the ramp at 1 MHz: 48 samples de-wetting, 16 wetting.
    let per_up = up as f64 / n;
    let per_down = down as f64 / n;
    assert!(
        (per_up - 48.0).abs() < 2.0,
        "de-wetting {per_up} samples per edge"
    );
    assert!(
        (per_down - 16.0).abs() < 1.5,
        "wetting {per_down} samples per edge"
    );
}

#[test]
fn noise_and_drift_show_in_sample_statistics() {
    let mut s = one_probe(0.1, 20.0, 2.0);
    s.probes[0].tips = Some(1);
    s.duration_s = 4.0;
    s.signal.noise_sigma_counts = 100.0;
    s.signal.drift = DriftSpec {
        kind: DriftKind::Linear,
        amplitude_counts: 800.0,
        period_s: None,
    };
    let cap = render_interleaved(&s, 6).unwrap();
    let x: Vec<i16> = cap.channel(0).collect();
    let ivs = cap.truth[0].leading();
    let fs = 40_000.0;
    let guard = 200e-6;
    // Water samples well away from any interface, residual after removing the drift.
    let mut resid = Vec::new();
    let mut j = 0;
    for (n, &v) in x.iter().enumerate() {
        let t = n as f64 / fs;
        while j < ivs.len() && ivs[j].end_s + guard < t {
            j += 1;
        }
        let near = j < ivs.len() && t > ivs[j].start_s - guard;
        if !near {
            resid.push(v as f64 - 3000.0 - 800.0 * t / s.duration_s);
        }
    }
    let (m, sd) = mean_sd(&resid);
    assert!(resid.len() > 100_000);
    assert!(m.abs() < 3.0, "residual mean {m}");
    assert!((sd - 100.0).abs() < 2.0, "noise sd {sd}");
}

#[test]
fn clipping_rails_bound_the_samples() {
    let mut s = one_probe(0.5, 100.0, 2.0);
    s.duration_s = 0.2;
    s.signal.rail_high_counts = 20_000;
    s.signal.noise_sigma_counts = 500.0;
    let cap = render_interleaved(&s, 1).unwrap();
    assert_eq!(cap.samples.iter().copied().max(), Some(20_000));
}

#[test]
fn custom_flow_models_plug_in() {
    // A front: all air until 0.5 s, then C = 0.2.
    let mut s = one_probe(0.2, 80.0, 2.0);
    s.duration_s = 2.0;
    let mut g = Generator::new(s, 3).unwrap();
    g.set_flow(
        0,
        Box::new(FnFlow(|t: f64| LocalParams {
            void_fraction: if t < 0.5 { 1.0 } else { 0.2 },
            bubble_rate_hz: 80.0,
            velocity_m_s: 2.0,
            turbulence_intensity: 0.1,
        })),
    );
    let truth = g.truth().remove(0);
    let first = truth.leading()[0];
    assert!(
        first.start_s <= 0.0 && (first.end_s - 0.5).abs() < 0.05,
        "{first:?}"
    );
    let late = realised_stats(
        &truth
            .leading()
            .into_iter()
            .filter(|iv| iv.start_s > 0.6)
            .collect::<Vec<_>>(),
        2.0,
    );
    assert!(late.void_fraction < 0.35);
}

/// Mirror of the layout format (DESIGN section 2) with unknown keys rejected.
mod layout_mirror {
    use serde::Deserialize;

    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    pub struct Layout {
        pub flow: Flow,
        pub detector: Option<Detector>,
        pub probe: Vec<Probe>,
    }
    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    pub struct Flow {
        pub kind: String,
        pub water_temperature_c: f64,
    }
    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    pub struct Detector {
        pub threshold: f64,
        pub hysteresis: f64,
    }
    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    pub struct Probe {
        pub name: String,
        pub elevation_mm: f64,
        pub x_mm: f64,
        pub leading: u16,
        pub trailing: Option<u16>,
        pub tip_spacing_mm: Option<f64>,
        pub air_is_high: bool,
        pub air_level: Option<i32>,
        pub water_level: Option<i32>,
    }
}

#[test]
fn written_files_read_back() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = Scenario::builtin_default();
    s.duration_s = 0.3;
    s.probes[1].tips = Some(1);
    s.probes[2].air_is_high = Some(false);
    s.signal.fixed_levels = true;
    s.detector = Some(DetectorSpec {
        threshold: 0.5,
        hysteresis: 0.2,
    });
    let g = Generator::new(s.clone(), 77).unwrap();
    let sum = g.write_dir(dir.path(), true).unwrap();
    assert_eq!((sum.channels, sum.frames, sum.probes), (7, 12_000, 4));

    // WAV: channels, rate, format, and the same samples as the in-memory render.
    let mut r = hound::WavReader::open(&sum.wav).unwrap();
    let spec = r.spec();
    assert_eq!(
        (spec.channels, spec.sample_rate, spec.bits_per_sample),
        (7, 40_000, 16)
    );
    assert_eq!(spec.sample_format, hound::SampleFormat::Int);
    let back: Vec<i16> = r.samples::<i16>().map(Result::unwrap).collect();
    assert_eq!(back, g.render_interleaved().samples);

    // Layout: exactly the documented keys.
    let text = std::fs::read_to_string(&sum.layout).unwrap();
    let lay: layout_mirror::Layout = toml::from_str(&text).unwrap();
    assert_eq!(lay.flow.kind, "steady");
    assert_eq!(lay.flow.water_temperature_c, 20.0);
    let det = lay.detector.unwrap();
    assert_eq!((det.threshold, det.hysteresis), (0.5, 0.2));
    assert_eq!(lay.probe.len(), 4);
    let b = &lay.probe[1];
    assert_eq!(
        (b.name.as_str(), b.leading, b.trailing, b.tip_spacing_mm),
        ("low", 2, None, None)
    );
    let c = &lay.probe[2];
    assert_eq!(
        (c.leading, c.trailing, c.tip_spacing_mm),
        (3, Some(4), Some(6.0))
    );
    assert_eq!(
        (c.air_is_high, c.air_level, c.water_level),
        (false, Some(3000), Some(26000))
    );
    assert_eq!((lay.probe[3].elevation_mm, lay.probe[3].x_mm), (85.0, 0.0));

    // Truth: header, one row per probe, realised values from the leading tip.
    let mut rd = csv::Reader::from_path(&sum.truth).unwrap();
    let hdr: Vec<String> = rd.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(hdr, TRUTH_COLUMNS);
    let rows: Vec<csv::StringRecord> = rd.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), 4);
    let truth = g.truth();
    let st = realised_stats(&truth[0].leading(), 0.3);
    assert_eq!(rows[0][6].parse::<f64>().unwrap(), st.void_fraction);
    assert_eq!(rows[0][9].parse::<usize>().unwrap(), st.bubbles);
    assert_eq!(&rows[1][10], "", "single tip: no trailing values");

    // Intervals and the effective scenario.
    let n_iv = csv::Reader::from_path(sum.intervals.unwrap())
        .unwrap()
        .records()
        .count();
    assert!(n_iv > 0);
    let again = Scenario::load(&sum.scenario).unwrap();
    assert_eq!(again, Scenario { seed: 77, ..s });
}

#[test]
fn example_scenario_fixture_parses_and_resolves() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../fixtures/scenarios/steady_b2.toml"
    );
    let s = Scenario::load(std::path::Path::new(path)).unwrap();
    let r = s.resolve().unwrap();
    assert!(r.channels >= 2);
}

/// Throughput of the full path (intervals, rendering, WAV streaming) for a 16-channel,
/// 45 s, 40 kHz capture. Prints the timing; run with
/// `cargo test --release -p frothline-host --lib shared::synthetic::tests::throughput -- --ignored --nocapture`.
#[test]
#[ignore = "timing run, prints only"]
fn throughput_16_channels_45_s() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = Scenario::builtin_default();
    s.duration_s = 45.0;
    s.replicate(8);
    let g = Generator::new(s, 1).unwrap();
    let t0 = std::time::Instant::now();
    let truth = g.truth();
    let t1 = t0.elapsed();
    let sum = g.write_dir(dir.path(), false).unwrap();
    let t2 = t0.elapsed();
    let samples = sum.frames * sum.channels as u64;
    let bubbles: usize = truth.iter().map(|t| t.bubbles.len()).sum();
    println!(
        "{} channels x {} frames = {samples} samples ({bubbles} leading bubbles): \
         intervals {:.3} s, total with WAV {:.3} s ({:.1} Msamples/s)",
        sum.channels,
        sum.frames,
        t1.as_secs_f64(),
        t2.as_secs_f64(),
        samples as f64 / t2.as_secs_f64() / 1e6
    );
}
