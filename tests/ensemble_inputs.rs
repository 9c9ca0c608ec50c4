//! `frothline ensemble` over the committed surge fixture: a capture given twice or a run
//! without frames is refused by name; the record before the front carries the same
//! `since_front_s` as the replay of each run writes; numbers are written with the digits of
//! the core's f32 results.

use frothline_host::offline::ensemble::{run, EnsembleArgs};
use std::path::{Path, PathBuf};

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures/surge-b2")
        .join(name)
}

fn big_stack<T: Send>(f: impl FnOnce() -> T + Send) -> T {
    std::thread::scope(|s| {
        std::thread::Builder::new()
            .stack_size(64 << 20)
            .spawn_scoped(s, f)
            .unwrap()
            .join()
            .unwrap()
    })
}

fn args(captures: Vec<PathBuf>, out: &Path) -> EnsembleArgs {
    EnsembleArgs {
        captures,
        layout: fixture("layout.toml"),
        out: out.to_path_buf(),
        window: "50ms".parse().unwrap(),
        quiet: true,
    }
}

#[test]
fn the_same_capture_twice_is_refused_naming_both() {
    let dir = tempfile::tempdir().unwrap();
    let copy = dir.path().join("copy.wav");
    std::fs::copy(fixture("capture.wav"), &copy).unwrap();
    let e = big_stack(|| {
        run(&args(
            vec![fixture("capture.wav"), copy.clone()],
            dir.path(),
        ))
    })
    .unwrap_err()
    .to_string();
    assert!(e.contains("copy.wav") && e.contains("same capture"), "{e}");
}

#[test]
fn a_run_without_frames_is_refused_naming_it() {
    let dir = tempfile::tempdir().unwrap();
    let bytes = std::fs::read(fixture("capture.wav")).unwrap();
    let start = bytes.windows(4).position(|w| w == b"data").unwrap() + 8;
    let mut empty = bytes[..start].to_vec();
    empty[start - 4..start].copy_from_slice(&0u32.to_le_bytes());
    let p = dir.path().join("empty.wav");
    std::fs::write(&p, empty).unwrap();
    let e = big_stack(|| run(&args(vec![fixture("capture.wav"), p.clone()], dir.path())))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("empty.wav") && e.contains("no sample frame"),
        "{e}"
    );
}

fn rows(path: &Path) -> (csv::StringRecord, Vec<csv::StringRecord>) {
    let mut r = csv::Reader::from_path(path).unwrap();
    let h = r.headers().unwrap().clone();
    (h, r.records().map(Result::unwrap).collect())
}

#[test]
fn pre_front_rows_agree_with_the_replay_and_numbers_have_f32_digits() {
    let dir = tempfile::tempdir().unwrap();
    // Two distinct runs: the fixture, and the fixture with its last tenth cut off.
    let bytes = std::fs::read(fixture("capture.wav")).unwrap();
    let cut = dir.path().join("cut.wav");
    std::fs::write(&cut, &bytes[..bytes.len() * 9 / 10]).unwrap();
    let out = dir.path().join("ens");
    big_stack(|| run(&args(vec![fixture("capture.wav"), cut.clone()], &out))).unwrap();
    let replay_out = dir.path().join("replay");
    big_stack(|| {
        frothline_host::offline::replay::run(&frothline_host::offline::replay::ReplayArgs {
            capture: fixture("capture.wav"),
            layout: fixture("layout.toml"),
            out: replay_out.clone(),
            window: "50ms".parse().unwrap(),
            quiet: true,
            strict: false,
            levels: Default::default(),
        })
    })
    .unwrap();
    let (h, ens) = rows(&out.join("windows.csv"));
    let (_, rep) = rows(&replay_out.join("windows.csv"));
    let col = |n: &str| h.iter().position(|c| c == n).unwrap();
    let (since, flags, probe) = (col("since_front_s"), col("flags"), col("probe"));
    let pre: Vec<&csv::StringRecord> = ens
        .iter()
        .filter(|r| r[flags].contains("pre_front"))
        .collect();
    assert!(!pre.is_empty());
    for r in pre {
        let want = rep
            .iter()
            .find(|x| x[probe] == r[probe] && x[flags].contains("pre_front"))
            .unwrap();
        let (a, b): (f64, f64) = (r[since].parse().unwrap(), want[since].parse().unwrap());
        // Both runs share the front arrival to within a window; the replay of one run
        // and the ensemble's mean agree to well below a window length.
        assert!(
            a < -0.06 && (a - b).abs() < 0.02,
            "{} {a} vs {b}",
            &r[probe]
        );
    }
    for r in &ens {
        let c = &r[col("void_fraction")];
        let digits = c.trim_start_matches(['-', '0', '.']).replace('.', "");
        assert!(digits.len() <= 9, "void fraction written as {c}");
    }
}

/// The ensemble's files are one output set: a `run.json` manifest names the run, its layout
/// and captures, and lists every file with its size; an earlier run's file that the ensemble
/// does not write (stations.csv) is removed; a symlink in the folder is replaced, not
/// followed; a failing ensemble leaves the folder as it was. (Checks against the manifest
/// format the project defines, and the file system itself.)
#[test]
fn the_files_are_written_as_one_set_with_a_manifest() {
    use frothline_host::shared::output_set::Manifest;
    let dir = tempfile::tempdir().unwrap();
    let bytes = std::fs::read(fixture("capture.wav")).unwrap();
    let cut = dir.path().join("cut.wav");
    std::fs::write(&cut, &bytes[..bytes.len() * 9 / 10]).unwrap();
    let out = dir.path().join("ens");
    std::fs::create_dir(&out).unwrap();
    std::fs::write(out.join("stations.csv"), "an earlier transient run\n").unwrap();
    let victim = dir.path().join("victim.txt");
    std::fs::write(&victim, "keep me").unwrap();
    #[cfg(unix)]
    std::os::unix::fs::symlink(&victim, out.join("windows.csv")).unwrap();
    let rep = big_stack(|| run(&args(vec![fixture("capture.wav"), cut.clone()], &out))).unwrap();
    assert_eq!(std::fs::read_to_string(&victim).unwrap(), "keep me");
    assert!(!out.join("stations.csv").exists());
    assert!(rep.committed.removed.contains(&"stations.csv".to_string()));
    let m = Manifest::read(&out).unwrap().expect("run.json");
    assert_eq!(m.run_id, rep.committed.run_id);
    let names: Vec<&str> = m.files.iter().map(|(n, _)| n.as_str()).collect();
    assert_eq!(
        names,
        [
            "windows.csv",
            "profile.csv",
            "fronts.csv",
            "flow.json",
            "chords.csv",
            "chord_lengths.csv"
        ]
    );
    for n in names {
        m.check(&out, n).unwrap();
        assert!(!std::fs::symlink_metadata(out.join(n))
            .unwrap()
            .file_type()
            .is_symlink());
    }
    let role = |k: &str| {
        m.inputs
            .iter()
            .find(|(r, _)| r == k)
            .map(|(_, p)| p.clone())
    };
    assert_eq!(
        role("layout"),
        Some(fixture("layout.toml").display().to_string())
    );
    assert_eq!(
        role("capture 1"),
        Some(fixture("capture.wav").display().to_string())
    );
    assert_eq!(role("capture 2"), Some(cut.display().to_string()));
    // No staging folder is left behind.
    let left: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(left.is_empty(), "{left:?}");

    // A failing ensemble (a run without frames) leaves the folder as it was.
    let before: Vec<(String, Vec<u8>)> = snapshot(&out);
    let start = bytes.windows(4).position(|w| w == b"data").unwrap() + 8;
    let mut empty = bytes[..start].to_vec();
    empty[start - 4..start].copy_from_slice(&0u32.to_le_bytes());
    let p = dir.path().join("empty.wav");
    std::fs::write(&p, empty).unwrap();
    assert!(big_stack(|| run(&args(vec![fixture("capture.wav"), p.clone()], &out))).is_err());
    assert_eq!(snapshot(&out), before);
}

fn snapshot(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}
