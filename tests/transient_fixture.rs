//! The committed transient fixture (`fixtures/surge-b2`, made from
//! `fixtures/scenarios/surge_b2.toml` by fixtures/regenerate.sh) replays to its committed
//! expected files byte for byte (snapshot: a change of results must be intended and the
//! fixture regenerated), and its fronts agree with the truth file (Ritter's celerity).

use std::path::Path;

fn replay(out: &Path) {
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
        "50ms".into(),
        "--quiet".into(),
    ];
    frothline_host::cli::run(args).unwrap();
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
