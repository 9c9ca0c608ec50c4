//! The committed transient fixture (`fixtures/surge-b2`, made from
//! `fixtures/scenarios/surge_b2.toml` by fixtures/regenerate.sh) replays to its committed
//! expected files byte for byte (snapshot: a change of results must be intended and the
//! fixture regenerated), and its fronts agree with the truth file (Ritter's celerity).

use std::path::Path;

fn replay(out: &Path) {
    replay_with(out, "50ms");
}

fn replay_with(out: &Path, window: &str) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/surge-b2");
    let args = [
        "frothline".to_string(),
        "replay".into(),
        root.join("capture.wav").display().to_string(),
        "--layout".into(),
        root.join("layout.toml").display().to_string(),
        "--out".into(),
        out.display().to_string(),
        "--window".into(),
        window.into(),
        "--quiet".into(),
    ];
    frothline_host::cli::run(args).unwrap();
}

/// `--window bubbles:N` on a transient layout counts from each station's front, as fixed
/// windows do (the front-relative windows of `frothline_core::window`): every probe's first
/// row is the pre-front record, flagged `pre_front` and ending where its next row starts
/// at since_front 0; no later row is before the front. (Before, the first bubble window
/// ran from 0 across the front, since_front -0.252, unflagged.)
#[test]
fn bubble_windows_on_a_transient_layout_start_at_the_front() {
    let out = tempfile::tempdir().unwrap();
    replay_with(out.path(), "bubbles:40");
    let mut r = csv::Reader::from_path(out.path().join("windows.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |name: &str| h.iter().position(|c| c == name).unwrap();
    let (probe, start, end, since, flags) = (
        col("probe"),
        col("window_start_s"),
        col("window_end_s"),
        col("since_front_s"),
        col("flags"),
    );
    let mut rows: std::collections::BTreeMap<String, Vec<csv::StringRecord>> = Default::default();
    for rec in r.records() {
        let rec = rec.unwrap();
        rows.entry(rec[probe].to_string()).or_default().push(rec);
    }
    assert!(rows.len() >= 4, "{} probes", rows.len());
    for (name, rs) in &rows {
        assert!(rs.len() >= 3, "{name}: {} rows", rs.len());
        assert!(rs[0][flags].contains("pre_front"), "{name}: {:?}", &rs[0]);
        assert_eq!(&rs[0][start], "0", "{name}");
        assert_eq!(rs[0][end], rs[1][start], "{name}");
        let s1: f64 = rs[1][since].parse().unwrap();
        assert_eq!(s1, 0.0, "{name}: second row since_front {s1}");
        for r in &rs[1..] {
            assert!(!r[flags].contains("pre_front"), "{name}: {r:?}");
            assert!(r[since].parse::<f64>().unwrap() >= 0.0, "{name}: {r:?}");
        }
    }
}

#[test]
fn transient_fixture_reproduces_its_expected_files() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/surge-b2/expected");
    let out = tempfile::tempdir().unwrap();
    replay(out.path());
    for name in [
        "windows.csv",
        "profile.csv",
        "fronts.csv",
        "stations.csv",
        "flow.json",
        "chords.csv",
        "chord_lengths.csv",
    ] {
        let got = std::fs::read_to_string(out.path().join(name)).unwrap();
        let want = std::fs::read_to_string(root.join(name)).unwrap();
        assert_eq!(got.lines().count(), want.lines().count(), "{name}");
        for (i, (g, w)) in got.lines().zip(want.lines()).enumerate() {
            assert_eq!(g, w, "{name} line {} differs", i + 1);
        }
    }
}

/// The contract columns of DESIGN.md §3 lead profile.csv and fronts.csv; the station
/// arrivals lie within 1 ms of the truth (Ritter's celerity from the release), and the
/// report reads the folder.
#[test]
fn transient_fixture_matches_its_truth_and_the_contract() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/surge-b2");
    let mut p = csv::Reader::from_path(root.join("expected/profile.csv")).unwrap();
    let h: Vec<String> = p.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(
        &h[..10],
        [
            "station",
            "slice_start_s",
            "slice_end_s",
            "since_front_s",
            "y90_mm",
            "depth_averaged_void_fraction",
            "equivalent_depth_mm",
            "profile_exponent",
            "fit_rmse",
            "probes_used"
        ]
    );
    let mut f = csv::Reader::from_path(root.join("expected/fronts.csv")).unwrap();
    let h: Vec<String> = f.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(&h[..3], ["probe", "station", "arrival_s"]);
    let mut truth = csv::Reader::from_path(root.join("truth_fronts.csv")).unwrap();
    let want: Vec<f64> = truth
        .records()
        .map(|r| r.unwrap()[2].parse().unwrap())
        .collect();
    let mut st = csv::Reader::from_path(root.join("expected/stations.csv")).unwrap();
    let got: Vec<f64> = st
        .records()
        .map(|r| r.unwrap()[2].parse().unwrap())
        .collect();
    assert_eq!(got.len(), 2);
    for (g, w) in got.iter().zip(&want) {
        assert!((g - w).abs() < 1e-3, "arrival {g} vs {w}");
    }
    let run = frothline_host::report::input::read_run(
        &root.join("expected"),
        &indicatif::ProgressBar::hidden(),
    );
    let run = run.unwrap();
    assert!(run.is_transient());
    assert!(!run.profile.is_empty() && !run.fronts.is_empty());
    assert!(run.indicators.as_ref().and_then(|i| i.reynolds()).is_some());
}

/// The library's `replay::run` keeps every window record of a transient replay in its report
/// (the firmware's expected digest is made from them), one per row of the windows.csv it
/// writes; the command line keeps none (memory flat in the capture's length).
#[test]
fn a_library_transient_replay_keeps_its_records() {
    use frothline_host::offline::replay::{self, Keep};
    use frothline_host::offline::replay_common::ReplayArgs;
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/surge-b2");
    let dir = tempfile::tempdir().unwrap();
    let args = ReplayArgs {
        capture: root.join("capture.wav"),
        layout: root.join("layout.toml"),
        out: dir.path().join("out"),
        window: "50ms".parse().unwrap(),
        quiet: true,
        strict: false,
        levels: Default::default(),
    };
    let report = replay::run(&args).unwrap();
    let rows = std::fs::read_to_string(dir.path().join("out/windows.csv"))
        .unwrap()
        .lines()
        .count()
        - 1;
    assert!(rows > 0);
    assert_eq!(report.records.len(), rows);
    let totals_only = replay::run_with(&args, Keep::TotalsOnly).unwrap();
    assert!(totals_only.records.is_empty());
    assert_eq!(totals_only.totals.records, rows as u64);
}
