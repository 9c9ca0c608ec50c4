//! Levels learnt from the record (the replay's default) against the binary truth of a
//! synthetic capture whose tips each have their own levels, with drift and noise, and no
//! levels in the layout.
//!
//! The reference is the generator's own binary phase signal (its `*_realised` columns:
//! the void fraction and bubble count of the air intervals it drew), which is outside the
//! signal chain: the chain only sees the rendered samples.

use frothline_host::synth::{DriftKind, Generator, Scenario};
use std::collections::HashMap;
use std::path::Path;

/// A steady capture: the built-in four dual-tip probes, 6 s at 40 kHz, each tip's levels
/// moved by up to 5 % of the swing, a sine drift of 400 counts and noise of 180 counts.
fn scenario() -> Scenario {
    let mut s = Scenario::builtin_default();
    s.duration_s = 6.0;
    s.signal.tip_level_spread = 0.05;
    s.signal.noise_sigma_counts = 180.0;
    s.signal.drift.kind = DriftKind::Sine;
    s.signal.drift.amplitude_counts = 400.0;
    s
}

fn replay(dir: &Path, layout: &Path, out: &Path, extra: &[&str]) {
    let mut args = vec![
        "frothline".to_string(),
        "replay".into(),
        dir.join("capture.wav").display().to_string(),
        "--layout".into(),
        layout.display().to_string(),
        "--out".into(),
        out.display().to_string(),
        "--quiet".into(),
    ];
    args.extend(extra.iter().map(|s| s.to_string()));
    frothline_host::cli::run(args).unwrap();
}

/// Per probe: (C over the record, F over the record, every window's flags).
fn whole_record(out: &Path) -> HashMap<String, (f64, f64, Vec<String>)> {
    let mut r = csv::Reader::from_path(out.join("windows.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (p, a, b, c, f, fl) = (
        col("probe"),
        col("window_start_s"),
        col("window_end_s"),
        col("void_fraction"),
        col("bubble_count_rate_hz"),
        col("flags"),
    );
    let mut acc: HashMap<String, (f64, f64, f64, Vec<String>)> = HashMap::new();
    for row in r.records() {
        let row = row.unwrap();
        let span = row[b].parse::<f64>().unwrap() - row[a].parse::<f64>().unwrap();
        let e = acc.entry(row[p].to_string()).or_default();
        e.0 += row[c].parse::<f64>().unwrap() * span;
        e.1 += row[f].parse::<f64>().unwrap() * span;
        e.2 += span;
        e.3.push(row[fl].to_string());
    }
    acc.into_iter()
        .map(|(k, (cs, fs, t, flags))| (k, (cs / t, fs / t, flags)))
        .collect()
}

fn truth(dir: &Path) -> HashMap<String, (f64, f64)> {
    let mut r = csv::Reader::from_path(dir.join("truth.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (p, c, f) = (
        col("probe"),
        col("void_fraction_realised"),
        col("bubble_count_rate_hz_realised"),
    );
    r.records()
        .map(|row| {
            let row = row.unwrap();
            (
                row[p].to_string(),
                (row[c].parse().unwrap(), row[f].parse().unwrap()),
            )
        })
        .collect()
}

/// Whole-record C within 0.002 of the binary truth and F within 0.5 %, levels not given;
/// the replay with the generator's per-tip levels fixed agrees within 0.001; the device's
/// causal rule loses its first learning period (flagged), the record rule loses nothing.
#[test]
fn learnt_from_the_record_matches_the_binary_truth() {
    let tmp = tempfile::tempdir().unwrap();
    let (learnt_dir, fixed_dir) = (tmp.path().join("learnt"), tmp.path().join("fixed"));
    Generator::new(scenario(), 9)
        .unwrap()
        .write_dir(&learnt_dir, false)
        .unwrap();
    let mut fixed = scenario();
    fixed.signal.fixed_levels = true;
    Generator::new(fixed, 9)
        .unwrap()
        .write_dir(&fixed_dir, false)
        .unwrap();
    let layout_fixed = std::fs::read_to_string(fixed_dir.join("layout.toml")).unwrap();
    assert!(
        layout_fixed.contains("trailing_air_level"),
        "{layout_fixed}"
    );
    let layout_learnt = std::fs::read_to_string(learnt_dir.join("layout.toml")).unwrap();
    assert!(!layout_learnt.contains("level"), "{layout_learnt}");

    let want = truth(&learnt_dir);
    let out = tmp.path().join("out");
    replay(&learnt_dir, &learnt_dir.join("layout.toml"), &out, &[]);
    let got = whole_record(&out);
    let out_fixed = tmp.path().join("out-fixed");
    replay(&learnt_dir, &fixed_dir.join("layout.toml"), &out_fixed, &[]);
    let got_fixed = whole_record(&out_fixed);
    let out_device = tmp.path().join("out-device");
    replay(
        &learnt_dir,
        &learnt_dir.join("layout.toml"),
        &out_device,
        &["--levels", "device"],
    );
    let got_device = whole_record(&out_device);
    assert_eq!(got.len(), 4);
    for (probe, &(c_true, f_true)) in &want {
        let (c, f, flags) = &got[probe];
        assert!(
            (c - c_true).abs() < 0.002,
            "{probe}: C {c} vs truth {c_true}"
        );
        assert!(
            (f / f_true - 1.0).abs() < 0.005,
            "{probe}: F {f} vs truth {f_true}"
        );
        assert!(
            flags.iter().all(|f| !f.contains("levels_not_learnt")),
            "{flags:?}"
        );
        let (cf, _, _) = &got_fixed[probe];
        assert!(
            (c - cf).abs() < 0.001,
            "{probe}: C {c} learnt vs {cf} fixed"
        );
        let (_, _, dflags) = &got_device[probe];
        assert!(
            dflags.iter().any(|f| f.contains("levels_not_learnt")),
            "{dflags:?}"
        );
    }
}

/// A default `replay` followed by a default `report` uses every window of a steady
/// capture (the report leaves out `levels_not_learnt` windows, and none is left).
#[test]
fn default_replay_then_report_uses_every_window() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("cap");
    let mut s = scenario();
    s.duration_s = 2.0;
    Generator::new(s, 4)
        .unwrap()
        .write_dir(&dir, false)
        .unwrap();
    let out = tmp.path().join("out");
    replay(&dir, &dir.join("layout.toml"), &out, &["--window", "100ms"]);
    let summary =
        frothline_host::report::run(&frothline_host::report::ReportArgs::new(&out)).unwrap();
    assert_eq!(summary.windows, 4 * 20);
    assert_eq!(summary.windows_used, summary.windows);
}

/// A strong linear drift (both levels rise by 6000 counts, a quarter of the swing, over the
/// record): the replay re-learns the levels every second (`DRIFT_SEGMENT_S`), so C stays
/// within 0.002 of the binary truth, and windows.csv shows the levels each window used
/// rising with the drift.
#[test]
fn levels_follow_a_slow_drift() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("cap");
    let mut s = scenario();
    s.signal.drift.kind = DriftKind::Linear;
    s.signal.drift.amplitude_counts = 6000.0;
    Generator::new(s, 12)
        .unwrap()
        .write_dir(&dir, false)
        .unwrap();
    let out = tmp.path().join("out");
    replay(&dir, &dir.join("layout.toml"), &out, &["--window", "1s"]);
    let want = truth(&dir);
    let got = whole_record(&out);
    for (probe, &(c_true, _)) in &want {
        let (c, _, _) = &got[probe];
        assert!(
            (c - c_true).abs() < 0.002,
            "{probe}: C {c} vs truth {c_true}"
        );
    }
    // The air level of the first probe in each window: it rises by about 1000 counts a
    // second (the drift's rate), window after window.
    let mut r = csv::Reader::from_path(out.join("windows.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (p, air) = (col("probe"), col("air_level_counts"));
    let levels: Vec<f64> = r
        .records()
        .map(|x| x.unwrap())
        .filter(|x| &x[p] == "bed")
        .map(|x| x[air].parse().unwrap())
        .collect();
    assert_eq!(levels.len(), 6);
    for w in levels.windows(2) {
        let step = w[1] - w[0];
        assert!((step - 1000.0).abs() < 150.0, "{levels:?}");
    }
}

/// With per-segment levels, the probes split over worker threads give exactly the records
/// of one chain (the schedule is applied at the same frames in every worker).
#[test]
fn level_schedule_is_the_same_on_one_chain_and_on_workers() {
    std::thread::Builder::new()
        .stack_size(256 << 20)
        .spawn(|| {
            use frothline_host::offline::record_levels::{learn_with, learning_tips};
            use frothline_host::offline::replay::{
                drive_parallel_with, drive_with, open_rig, with_record_levels, LevelSchedule,
            };
            let tmp = tempfile::tempdir().unwrap();
            let dir = tmp.path().join("cap");
            let mut s = scenario();
            s.duration_s = 3.5;
            Generator::new(s, 2)
                .unwrap()
                .write_dir(&dir, false)
                .unwrap();
            let (cap_path, layout_path) = (dir.join("capture.wav"), dir.join("layout.toml"));
            let bar = indicatif::ProgressBar::hidden();
            let run = |workers: usize| {
                let window = "70ms".parse().unwrap();
                let (mut cap, layout, chain) = open_rig(&cap_path, &layout_path, window).unwrap();
                let tips = learning_tips(chain.config(), |i| i);
                let learnt = learn_with(&cap_path, &tips, 64, true).unwrap();
                assert_eq!(learnt.segment_count(), 4);
                let schedule = LevelSchedule::from_record(&learnt).unwrap();
                let chain = with_record_levels(chain, &learnt, &layout, &layout_path).unwrap();
                let mut out = Vec::new();
                if workers == 1 {
                    let mut chain = chain;
                    drive_with(&mut cap, &mut chain, Some(&schedule), &bar, |r| {
                        out.push(r);
                        Ok(())
                    })
                    .unwrap();
                } else {
                    drive_parallel_with(&mut cap, chain, Some(&schedule), workers, &bar, |r| {
                        out.push(r);
                        Ok(())
                    })
                    .unwrap();
                }
                out
            };
            let one = run(1);
            assert_eq!(one, run(2));
            assert_eq!(one, run(3));
        })
        .unwrap()
        .join()
        .unwrap();
}
