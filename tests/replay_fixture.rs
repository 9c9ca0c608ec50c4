//! The committed fixture replays to its committed expected output, byte for byte (snapshot:
//! a change of results must be intended and the fixture regenerated with
//! fixtures/regenerate.sh).

use std::path::Path;

#[test]
fn steady_fixture_reproduces_its_expected_files() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/steady-b2");
    let out = tempfile::tempdir().unwrap();
    let args = [
        "frothline".to_string(),
        "replay".into(),
        root.join("capture.wav").display().to_string(),
        "--layout".into(),
        root.join("layout.toml").display().to_string(),
        "--out".into(),
        out.path().display().to_string(),
        "--window".into(),
        "100ms".into(),
        "--quiet".into(),
    ];
    frothline_host::cli::run(args).unwrap();
    for name in ["windows.csv", "chords.csv", "chord_lengths.csv"] {
        let got = std::fs::read_to_string(out.path().join(name)).unwrap();
        let want = std::fs::read_to_string(root.join("expected").join(name)).unwrap();
        assert_eq!(got.lines().count(), want.lines().count(), "{name}");
        for (i, (g, w)) in got.lines().zip(want.lines()).enumerate() {
            assert_eq!(g, w, "{name} line {} differs", i + 1);
        }
    }
}

/// The fixture's truth file (generator side) and the replay agree on the whole-record void
/// fraction of every probe: the levels are learnt from the record, so every window counts.
#[test]
fn steady_fixture_matches_its_truth() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/steady-b2");
    let mut truth = csv::Reader::from_path(root.join("truth.csv")).unwrap();
    let headers = truth.headers().unwrap().clone();
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    let (ci, cp) = (col("void_fraction_realised"), col("probe"));
    let mut want = std::collections::HashMap::new();
    for r in truth.records() {
        let r = r.unwrap();
        want.insert(r[cp].to_string(), r[ci].parse::<f64>().unwrap());
    }
    let mut got = csv::Reader::from_path(root.join("expected/windows.csv")).unwrap();
    let mut sums: std::collections::HashMap<String, (f64, f64)> = Default::default();
    for r in got.records() {
        let r = r.unwrap();
        assert!(!r[11].contains("levels_not_learnt"), "{r:?}");
        let span: f64 = r[2].parse::<f64>().unwrap() - r[1].parse::<f64>().unwrap();
        let e = sums.entry(r[0].to_string()).or_default();
        e.0 += r[4].parse::<f64>().unwrap() * span;
        e.1 += span;
    }
    assert_eq!(sums.len(), want.len());
    for (probe, (cs, t)) in sums {
        let c = cs / t;
        let w = want[&probe];
        // The binary truth of the same record: what is left is the thresholding of the
        // ramps and the noise (a few 1e-4 here).
        assert!((c - w).abs() < 0.002, "probe {probe}: C {c} vs truth {w}");
    }
}

/// The probes split over worker threads give exactly the records of one chain, in the same
/// order (the parallel replay must not change results).
#[test]
fn parallel_replay_equals_one_chain() {
    // Host chains are built on the stack before they are boxed: give them room.
    std::thread::Builder::new()
        .stack_size(256 << 20)
        .spawn(parallel_replay_body)
        .unwrap()
        .join()
        .unwrap();
}

fn parallel_replay_body() {
    use frothline_host::offline::replay::{drive, drive_parallel, open_rig};
    use frothline_host::shared::window_spec::WindowSpec;
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/steady-b2");
    for window in [WindowSpec::Whole, WindowSpec::Duration(0.07)] {
        let (mut cap, _, mut chain) = open_rig(
            &root.join("capture.wav"),
            &root.join("layout.toml"),
            window.clone(),
        )
        .unwrap();
        let bar = indicatif::ProgressBar::hidden();
        let mut one = Vec::new();
        drive(&mut cap, &mut chain, &bar, |r| {
            one.push(r);
            Ok(())
        })
        .unwrap();
        for workers in [2, 3] {
            let (mut cap, _, chain) = open_rig(
                &root.join("capture.wav"),
                &root.join("layout.toml"),
                window.clone(),
            )
            .unwrap();
            let mut many = Vec::new();
            drive_parallel(&mut cap, chain, workers, &bar, |r| {
                many.push(r);
                Ok(())
            })
            .unwrap();
            assert_eq!(one, many, "{workers} workers, window {window:?}");
        }
    }
}

#[test]
fn replay_on_threads_writes_the_files_of_one_thread() {
    // Host chains are built on the stack before they are boxed: give them room.
    std::thread::Builder::new()
        .stack_size(256 << 20)
        .spawn(threads_body)
        .unwrap()
        .join()
        .unwrap();
}

/// Every file of a replay folder, `run.json` without its run id (which names the run).
fn folder_files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut files: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let path = e.unwrap().path();
            let name = path.file_name().unwrap().to_string_lossy().into_owned();
            let mut bytes = std::fs::read(&path).unwrap();
            if name == "run.json" {
                let text = String::from_utf8(bytes).unwrap();
                let kept: Vec<&str> = text.lines().filter(|l| !l.contains("\"run_id\"")).collect();
                bytes = kept.join("\n").into_bytes();
            }
            (name, bytes)
        })
        .collect();
    files.sort();
    files
}

fn threads_body() {
    use frothline_host::offline::record_levels::LevelRule;
    use frothline_host::offline::replay::{run_threads, Keep, ReplayArgs};
    use frothline_host::shared::window_spec::WindowSpec;
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/steady-b2");
    for window in [WindowSpec::Duration(0.07), WindowSpec::Whole] {
        let replay = |threads: usize| {
            let out = tempfile::tempdir().unwrap();
            let args = ReplayArgs {
                capture: root.join("capture.wav"),
                layout: root.join("layout.toml"),
                out: out.path().to_path_buf(),
                window: window.clone(),
                quiet: true,
                levels: LevelRule::Record,
                strict: false,
            };
            run_threads(&args, Keep::TotalsOnly, threads).unwrap();
            folder_files(out.path())
        };
        let one = replay(1);
        assert!(one.iter().any(|(name, _)| name == "windows.csv"));
        for threads in [2, 3] {
            let many = replay(threads);
            let names = |f: &[(String, Vec<u8>)]| f.iter().map(|x| x.0.clone()).collect::<Vec<_>>();
            assert_eq!(
                names(&one),
                names(&many),
                "{threads} threads, window {window:?}"
            );
            for ((name, a), (_, b)) in one.iter().zip(&many) {
                assert!(
                    a == b,
                    "{name} differs on {threads} threads, window {window:?}"
                );
            }
        }
    }
}
