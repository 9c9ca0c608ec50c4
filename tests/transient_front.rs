//! Surge fronts end to end: synthetic dam-break captures with a known generating profile
//! (`frothline_host::synth::transient`: arrivals from Ritter's celerity `2 sqrt(g d0)`, a
//! power-law void-fraction profile `C = min(1, 0.9 (y/Y90)^n)` with known `Y90(t)`, `n(t)`,
//! DESIGN.md §1) through the station chains of `frothline replay`, checked against the
//! generating values.
//!
//! One realisation of a 50 ms slice holds 10 to 30 bubbles per probe, so its void fractions
//! scatter by a few hundredths (`C (1 − C) / sqrt(N)` for gamma chords of shape 2, Cox 1962,
//! "Renewal Theory", ch. 7): single runs give Y90 within one probe spacing, but Cmean within
//! 0.02 and n within 10 % only for the ensemble of 10 runs (different seeds) aligned on the
//! front, which is what these tests check (the single-run figures are printed).

use frothline_core::profile::{fit_profile, ProfileConfig, ProfilePoint};
use frothline_core::Flags;
use frothline_host::offline::ensemble::Ensemble;
use frothline_host::offline::transient::{replay_capture, replay_samples, TransientRun};
use frothline_host::shared::layout::Layout;
use frothline_host::shared::rig::FullRecord;
use frothline_host::shared::window_spec::WindowSpec;
use frothline_host::synth::{output::layout_toml, Generator, Scenario, TransientTruth};
use std::path::Path;
use std::sync::OnceLock;

/// Runs of the built-in transient scenario for the ensemble checks.
const RUNS: u64 = 10;
/// Probe spacing of the built-in scenario, mm.
const SPACING_MM: f64 = 10.0;

struct Run {
    run: TransientRun,
    truth: TransientTruth,
    full: Vec<FullRecord>,
    layout: Layout,
}

/// `scenario` with `seed`, replayed in memory with 50 ms windows from the front, pushed in
/// pieces of `sizes` samples (`&[]`: whole blocks); with the full records when `keep`.
fn run_seed(scenario: &Scenario, seed: u64, sizes: &[usize], keep: bool) -> Run {
    let g = Generator::new(scenario.clone(), seed).unwrap();
    let cap = g.render_interleaved();
    let truth = g.transient_truth(&cap.truth);
    let layout = Layout::parse(
        &layout_toml(scenario, g.resolved(), &g.tip_levels()),
        Path::new("layout.toml"),
    )
    .unwrap();
    let mut full = Vec::new();
    let mut sink = |r: &FullRecord| full.push(r.clone());
    let run = replay_samples(
        &layout,
        &cap.samples,
        cap.channels as usize,
        cap.sample_rate_hz,
        &"50ms".parse::<WindowSpec>().unwrap(),
        sizes,
        if keep { Some(&mut sink) } else { None },
    )
    .unwrap();
    Run {
        run,
        truth,
        full,
        layout,
    }
}

/// The ten runs of the built-in scenario (seeds 1..=10), made once for all tests.
fn runs() -> &'static [Run] {
    static R: OnceLock<Vec<Run>> = OnceLock::new();
    R.get_or_init(|| {
        let s = Scenario::builtin_transient();
        (1..=RUNS)
            .map(|seed| run_seed(&s, seed, &[], true))
            .collect()
    })
}

fn ensemble() -> Ensemble {
    let r = runs();
    let mut e = Ensemble::new(&r[0].layout, r[0].run.sample_rate, r[0].run.policy).unwrap();
    for x in r {
        e.add_run(&x.run, &x.full).unwrap();
    }
    e
}

/// Truth: Ritter's celerity sets the arrival at each station; the detected arrival (first
/// interface of the sustained change, earliest probe) must lie within 1 ms of it, with noise,
/// two stations and the release at a different instant in each run.
#[test]
fn arrival_within_one_millisecond_at_every_station() {
    let mut s = Scenario::builtin_transient();
    s.duration_s = 0.9;
    let t = s.transient.as_mut().unwrap();
    t.stations_x_mm = vec![0.0, 500.0];
    t.elevations_mm = vec![5.0, 15.0, 25.0, 45.0];
    t.dual_tip_elevations_mm.clear();
    for seed in 0..6u64 {
        s.transient.as_mut().unwrap().release_s = 0.02 + 0.0137 * seed as f64;
        s.signal.noise_sigma_counts = 150.0 + 200.0 * seed as f64;
        let r = run_seed(&s, 100 + seed, &[], false);
        assert_eq!(r.truth.fronts.len(), 2);
        for (k, f) in r.truth.fronts.iter().enumerate() {
            let got = r.run.arrival_s(k).expect("front found");
            assert!(
                (got - f.arrival_s).abs() < 1e-3,
                "seed {seed}, station {k}: {got} vs {}",
                f.arrival_s
            );
            // The first window starts at the detected arrival.
            let first = r
                .run
                .windows
                .iter()
                .find(|w| {
                    w.since_front == Some(0)
                        && r.run.stations[k].probes.contains(&(w.probe as usize))
                })
                .expect("a window at the front");
            assert!((r.run.secs(first.start as f64) - got).abs() < 1e-9);
        }
        // Front celerity between the stations: Ritter's 2 sqrt(g d0) to the arrival
        // resolution (two arrivals within 1 ms over 0.25 s).
        let c = r.run.celerity_from_previous(1).unwrap();
        let want = r.truth.fronts[0].celerity_m_s;
        assert!((c - want).abs() < 0.01 * want, "celerity {c} vs {want}");
    }
}

/// The generating profile (power law with Y90(t), n(t); Cmean = 0.9/(1 + n), DESIGN.md §1)
/// is recovered in every slice once the front has passed: Y90 within one probe spacing in
/// every single run; Cmean within 0.02 and n within 10 % for the ensemble of ten runs.
#[test]
fn profile_slices_match_the_generating_profile() {
    let r = runs();
    let mut worst_single = (0.0f64, 0.0f64, 0.0f64);
    for x in r {
        let slices: Vec<_> = x.run.profiles.iter().filter(|(_, p)| !p.partial).collect();
        assert!(slices.len() >= 17, "{} slices", slices.len());
        for (k, (_, p)) in slices.iter().enumerate() {
            let t = &x.truth.slices[k];
            assert!((x.run.secs(p.since_front as f64) - t.since_front_s).abs() < 1e-3);
            let f = &p.fit;
            let dy = f.y90_mm.unwrap() as f64 - t.y90_mm;
            assert!(dy.abs() < SPACING_MM, "slice {k}: Y90 {dy:+.2} mm off");
            let dc = f.mean_void_fraction.unwrap() as f64 - t.mean_void_fraction;
            let dn = f.power_law.unwrap().exponent as f64 / t.n - 1.0;
            worst_single.0 = worst_single.0.max(dy.abs());
            worst_single.1 = worst_single.1.max(dc.abs());
            worst_single.2 = worst_single.2.max(dn.abs());
        }
    }
    println!(
        "single runs, worst over {RUNS} runs: Y90 {:.2} mm, Cmean {:.4}, n {:.1} %",
        worst_single.0,
        worst_single.1,
        worst_single.2 * 100.0
    );
    let e = ensemble();
    let truth = &r[0].truth;
    let mut worst = (0.0f64, 0.0f64, 0.0f64);
    let mut checked = 0;
    for s in e.slices() {
        let Some(t) = truth.slices.get(s.k as usize) else {
            continue; // the partial last slice
        };
        assert_eq!(s.runs, RUNS as usize);
        let f = &s.record.fit;
        let dy = f.y90_mm.unwrap() as f64 - t.y90_mm;
        let dc = f.mean_void_fraction.unwrap() as f64 - t.mean_void_fraction;
        let dn = f.power_law.unwrap().exponent as f64 / t.n - 1.0;
        assert!(dy.abs() < SPACING_MM, "slice {}: Y90 {dy:+.2}", s.k);
        assert!(dc.abs() < 0.02, "slice {}: Cmean {dc:+.4}", s.k);
        assert!(dn.abs() < 0.10, "slice {}: n {:+.1} %", s.k, dn * 100.0);
        worst = (
            worst.0.max(dy.abs()),
            worst.1.max(dc.abs()),
            worst.2.max(dn.abs()),
        );
        checked += 1;
    }
    assert!(checked >= 17);
    println!(
        "ensemble of {RUNS}: worst Y90 {:.2} mm, Cmean {:.4}, n {:.1} % over {checked} slices",
        worst.0,
        worst.1,
        worst.2 * 100.0
    );
    // The leading edge is strongly aerated (the generating n_0 = 0.6 < 1), and the decay
    // fit of the ensemble Cmean sees C0 > Cf.
    let first = &e.slices()[0];
    assert!(first.record.fit.mean_void_fraction.unwrap() > 0.45);
    let last = e
        .slices()
        .into_iter()
        .rev()
        .find(|s| !s.record.partial)
        .unwrap();
    let m = last.record.decay.unwrap().model.unwrap();
    assert!(m.initial > m.final_level + 0.15, "{m:?}");
}

/// Ensembles of repeated runs: per-window velocity from the merged correlation sums of
/// ten runs against the generating velocity, compared with the single runs' windows that
/// found a peak: the RMS relative error must shrink at least 2x. The ensemble void fraction
/// (mean over runs) must lie within 0.01 of the generating value realised by the runs'
/// intervals in every window, and within 4 standard errors of the flow model's value (the
/// renewal-process standard error `C (1 − C) sqrt(2 / (k N))`, shape k = 2, N bubbles of
/// all runs; Cox 1962).
#[test]
fn ensemble_of_ten_runs_sharpens_velocity_and_void_fraction() {
    let r = runs();
    let dual = r[0]
        .layout
        .probes
        .iter()
        .position(|p| p.trailing.is_some())
        .unwrap();
    let name = r[0].layout.probes[dual].name.clone();
    let spacing = r[0].layout.probes[dual].tip_spacing_mm.unwrap() as f32;
    let slice = 2000i64;
    let truth_of = |x: &Run, probe: &str, k: usize| {
        x.truth
            .windows
            .iter()
            .filter(|t| t.probe == probe)
            .nth(k)
            .cloned()
    };
    let mut single = Vec::new();
    for x in r {
        for w in &x.run.windows {
            let Some(sf) = w.since_front.filter(|&f| f >= 0) else {
                continue;
            };
            if w.probe as usize != dual || w.flags.contains(Flags::PARTIAL_WINDOW) {
                continue;
            }
            let bad = Flags::NO_CORRELATION_PEAK.0 | Flags::PEAK_AT_LAG_BOUNDARY.0;
            if w.flags.0 & bad != 0 {
                continue;
            }
            let Some(t) = truth_of(x, &name, (sf / slice) as usize) else {
                continue;
            };
            if let Some(v) = w
                .correlation
                .and_then(|c| c.velocity_m_s(spacing, 40_000.0))
            {
                single.push(v as f64 / t.velocity_m_s - 1.0);
            }
        }
    }
    let e = ensemble();
    let mut ens = Vec::new();
    let (mut vf_real, mut vf_model, mut n) = (0.0f64, 0.0f64, 0usize);
    for w in e.windows() {
        if w.k < 0 || w.record.flags.contains(Flags::PARTIAL_WINDOW) {
            continue;
        }
        let pname = &r[0].layout.probes[w.probe].name;
        let Some(t) = truth_of(&r[0], pname, w.k as usize) else {
            continue;
        };
        assert_eq!(w.runs, RUNS as usize);
        if w.probe == dual {
            let v = w.velocity_m_s.expect("ensemble velocity");
            ens.push(v / t.velocity_m_s - 1.0);
        }
        let realised: f64 = r
            .iter()
            .map(|x| {
                truth_of(x, pname, w.k as usize)
                    .unwrap()
                    .void_fraction_realised
            })
            .sum::<f64>()
            / RUNS as f64;
        let c = w.void_fraction.unwrap();
        assert!(
            (c - realised).abs() < 0.01,
            "{pname} window {}: C {c:.4} vs realised {realised:.4}",
            w.k
        );
        let cm = t.void_fraction;
        let bubbles = w.record.lead.bubbles.max(1) as f64;
        let se = (cm * (1.0 - cm) * (2.0 / (2.0 * bubbles)).sqrt()).max(1e-3);
        assert!(
            (c - cm).abs() < 4.0 * se + 0.003,
            "{pname} window {}: C {c:.4} vs model {cm:.4} (se {se:.4})",
            w.k
        );
        vf_real = vf_real.max((c - realised).abs());
        vf_model += (c - cm) * (c - cm);
        n += 1;
    }
    let rms = |v: &[f64]| (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt();
    let (rs, re) = (rms(&single), rms(&ens));
    println!(
        "velocity RMS relative error: single runs {rs:.4} ({} windows), ensemble {re:.4} ({} \
         windows), ratio {:.2}; void fraction: worst vs realised {vf_real:.4}, RMS vs model \
         {:.4} ({n} windows)",
        single.len(),
        ens.len(),
        rs / re,
        (vf_model / n as f64).sqrt()
    );
    assert!(ens.len() >= 17 && single.len() >= 100);
    assert!(rs >= 2.0 * re, "single {rs:.4} vs ensemble {re:.4}");
}

/// A station with one dead probe (tip stuck in air, low in the array): the front is still
/// found within 1 ms, the probe is flagged dead in fronts.csv and left out of every profile
/// slice (the water reached the probes above it); Y90 stays within one spacing.
#[test]
fn a_dead_probe_is_flagged_and_left_out() {
    let mut s = Scenario::builtin_transient();
    s.duration_s = 0.7;
    s.transient.as_mut().unwrap().dead_probes = vec!["A3".into()];
    let r = run_seed(&s, 5, &[], false);
    let f = &r.truth.fronts[0];
    assert!((r.run.arrival_s(0).unwrap() - f.arrival_s).abs() < 1e-3);
    let st = r.run.station_front(0).unwrap();
    assert_eq!(st.dead, 1 << 2);
    let rows = r.run.front_rows();
    let a3 = rows.iter().find(|row| row[0] == "A3").unwrap();
    assert!(a3[9].contains("dead"), "{a3:?}");
    assert_eq!(a3[2], "", "a dead probe has no arrival");
    for (k, (_, p)) in r.run.profiles.iter().enumerate() {
        // The probes above it were reached at the front, 50 ms before the first slice
        // ends, more than the 20 ms the rule waits: left out of every slice.
        assert_eq!(p.dead, 1 << 2, "slice {k}");
        assert_eq!(p.used & (1 << 2), 0);
        if let (Some(t), false) = (r.truth.slices.get(k), p.partial) {
            let y = p.fit.y90_mm.unwrap() as f64;
            assert!(
                (y - t.y90_mm).abs() < SPACING_MM,
                "slice {k}: Y90 {y} vs {}",
                t.y90_mm
            );
        }
    }
}

/// The same capture through `frothline replay` (the WAV file, whole blocks) and through a
/// device-like stream (the core fed in random block sizes, down to single samples) gives
/// identical profile, front and window records (design rule: results never depend on how
/// the samples arrive).
#[test]
fn replay_and_a_streamed_device_path_give_identical_records() {
    let mut s = Scenario::builtin_transient();
    s.duration_s = 0.6;
    let dir = tempfile::tempdir().unwrap();
    let g = Generator::new(s.clone(), 21).unwrap();
    g.write_dir(dir.path(), false).unwrap();
    let file = replay_capture(
        &dir.path().join("capture.wav"),
        &dir.path().join("layout.toml"),
        &"50ms".parse::<WindowSpec>().unwrap(),
        frothline_host::offline::record_levels::LevelRule::Device,
        None,
    )
    .unwrap();
    let sizes = [1usize, 7, 4096, 333, 11, 65_536, 2, 10_007, 123_457];
    let streamed = run_seed(&s, 21, &sizes, false).run;
    assert!(!file.profiles.is_empty());
    assert_eq!(file.profiles, streamed.profiles);
    assert_eq!(file.fronts, streamed.fronts);
    assert_eq!(file.windows, streamed.windows);
    // And the profile the core fitted is the fit of the windows' void fractions.
    let (_, p) = &file.profiles[3];
    let points: Vec<ProfilePoint> = file
        .windows
        .iter()
        .filter(|w| w.start == p.start)
        .map(|w| {
            ProfilePoint::with_sigma(
                file.layout.probes[w.probe as usize].elevation_mm as f32,
                w.lead.void_fraction().unwrap(),
                w.lead.void_fraction_sigma().unwrap(),
            )
        })
        .collect();
    assert_eq!(fit_profile(&points, &ProfileConfig::default()), p.fit);
}

/// `frothline ensemble` over a folder of two runs (the entry point cli.rs calls): the files
/// carry the contract columns first, then `runs` and the spreads.
#[test]
fn ensemble_command_writes_its_files() {
    let mut s = Scenario::builtin_transient();
    s.duration_s = 0.5;
    let runs = tempfile::tempdir().unwrap();
    for seed in [3u64, 4] {
        let g = Generator::new(s.clone(), seed).unwrap();
        g.write_dir(&runs.path().join(format!("run{seed}")), false)
            .unwrap();
    }
    let out = tempfile::tempdir().unwrap();
    let args = frothline_host::offline::ensemble::EnsembleArgs {
        captures: vec![runs.path().to_path_buf()],
        layout: runs.path().join("run3/layout.toml"),
        out: out.path().to_path_buf(),
        window: "50ms".parse().unwrap(),
        quiet: true,
    };
    let rep = frothline_host::offline::ensemble::run(&args).unwrap();
    assert_eq!(rep.captures.len(), 2);
    let mut w = csv::Reader::from_path(out.path().join("windows.csv")).unwrap();
    let h: Vec<String> = w.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(h[0], "probe");
    assert_eq!(h[3], "since_front_s");
    assert!(h.ends_with(&[
        "runs".to_string(),
        "void_fraction_spread".into(),
        "bubble_count_rate_spread_hz".into(),
        "interfacial_velocity_spread_m_s".into()
    ]));
    let runs_col = h.iter().position(|c| c == "runs").unwrap();
    assert!(w
        .records()
        .map(|r| r.unwrap())
        .any(|r| &r[runs_col] == "2" && &r[3] == "0"));
    let mut p = csv::Reader::from_path(out.path().join("profile.csv")).unwrap();
    let h: Vec<String> = p.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(&h[..2], ["station", "slice_start_s"]);
    assert!(h.contains(&"y90_spread_mm".to_string()));
    assert!(p.records().count() >= 4);
    assert!(out.path().join("fronts.csv").is_file() && out.path().join("flow.json").is_file());
    // The pooled chord times hold every bubble of the windows after the front, of both runs,
    // except, per probe and run, the one the front closes (the dry bed's air: a bubble with
    // no chord, since its start lies before the first window).
    let mut w = csv::Reader::from_path(out.path().join("windows.csv")).unwrap();
    let h = w.headers().unwrap().clone();
    let col = |name: &str| h.iter().position(|c| c == name).unwrap();
    let (probe, bubbles, flags, since) = (
        col("probe"),
        col("bubbles"),
        col("flags"),
        col("since_front_s"),
    );
    let mut after = std::collections::BTreeMap::<String, f64>::new();
    for r in w.records().map(|r| r.unwrap()) {
        let used = r[since].parse::<f64>().is_ok_and(|t| t >= 0.0)
            && !r[flags].contains("pre_front")
            && !r[flags].contains("levels_not_learnt");
        if used {
            *after.entry(r[probe].to_string()).or_default() += r[bubbles].parse::<f64>().unwrap();
        }
    }
    let mut pooled = std::collections::BTreeMap::<String, f64>::new();
    let mut c = csv::Reader::from_path(out.path().join("chords.csv")).unwrap();
    for r in c.records().map(|r| r.unwrap()) {
        *pooled.entry(r[0].to_string()).or_default() += r[3].parse::<f64>().unwrap();
    }
    assert!(after.values().sum::<f64>() > 100.0, "{after:?}");
    for (name, n) in &after {
        let got = pooled.get(name).copied().unwrap_or(0.0);
        assert!(
            got <= *n && *n - got <= 2.0,
            "{name}: chords.csv {got}, windows {n}"
        );
    }
    assert!(out.path().join("chord_lengths.csv").is_file());

    // The report draws the run-to-run spread of C as error bars on the profiles, and reads
    // the spread column (no "columns not used" note for it).
    let report =
        frothline_host::report::run(&frothline_host::report::ReportArgs::new(out.path())).unwrap();
    let svg = std::fs::read_to_string(report.out_dir.join("void_fraction_profile.svg")).unwrap();
    assert!(svg.contains("profile-spread"), "no error bars drawn");
    assert!(
        svg.contains("sd over the runs"),
        "the legend does not say what the bars are"
    );
    assert!(!report.notes.iter().any(|n| n.contains("not used")
        && n.split([':', ','])
            .any(|c| c.trim() == "void_fraction_spread")));
}
