//! Bad input to `frothline replay`: every case gives an error that names what is wrong (the
//! file, key or line), and no output file is left looking complete.

use std::fs;
use std::path::{Path, PathBuf};

fn write_wav(path: &Path, channels: u16, frames: usize) {
    let spec = hound::WavSpec {
        channels,
        sample_rate: 20_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for i in 0..frames * channels as usize {
        w.write_sample(if (i / channels as usize) % 50 < 20 {
            20_000i16
        } else {
            2_000
        })
        .unwrap();
    }
    w.finalize().unwrap();
}

const GOOD_LAYOUT: &str = r#"[flow]
kind = "steady"

[[probe]]
name = "P1"
elevation_mm = 20.0
leading = 0
trailing = 1
tip_spacing_mm = 5.0
"#;

struct Case {
    dir: tempfile::TempDir,
}

impl Case {
    fn new(layout: &str, channels: u16) -> Case {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("layout.toml"), layout).unwrap();
        write_wav(&dir.path().join("capture.wav"), channels, 4000);
        Case { dir }
    }
    fn p(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }
    fn args(&self, extra: &[&str]) -> Vec<String> {
        let mut a: Vec<String> = ["frothline", "replay"]
            .iter()
            .map(|s| s.to_string())
            .collect();
        for p in [
            self.p("capture.wav"),
            "--layout".into(),
            self.p("layout.toml"),
            "--out".into(),
            self.p("out"),
        ] {
            a.push(p.display().to_string());
        }
        a.extend(extra.iter().map(|s| s.to_string()));
        a
    }
    /// Run replay; return the error text (panics if it succeeded).
    fn replay_error(&self) -> String {
        let out = self.p("out");
        let err =
            frothline_host::cli::run(self.args(&["--quiet"])).expect_err("replay should fail");
        assert!(err.exit_code() != 0);
        assert!(
            !out.join("windows.csv").exists(),
            "a failed replay left windows.csv"
        );
        err.to_string()
    }
}

#[test]
fn good_case_runs() {
    let c = Case::new(GOOD_LAYOUT, 2);
    let out = c.p("out");
    frothline_host::cli::run(c.args(&["--quiet"])).unwrap();
    assert!(out.join("windows.csv").exists());
    assert!(!out.join("windows.csv.partial").exists());
}

#[test]
fn channel_beyond_the_file_is_named() {
    let c = Case::new(GOOD_LAYOUT, 1);
    let e = c.replay_error();
    assert!(
        e.contains("probe[0].trailing") && e.contains("line 8"),
        "{e}"
    );
    assert!(e.contains('1'), "{e}");
}

#[test]
fn unknown_key_is_named_with_its_line() {
    let c = Case::new(
        &GOOD_LAYOUT.replace(
            "tip_spacing_mm = 5.0",
            "tip_spacing_mm = 5.0\ntip_colour = \"red\"",
        ),
        2,
    );
    let e = c.replay_error();
    assert!(e.contains("tip_colour") && e.contains("line 10"), "{e}");
}

#[test]
fn missing_key_is_named() {
    let c = Case::new(&GOOD_LAYOUT.replace("elevation_mm = 20.0\n", ""), 2);
    let e = c.replay_error();
    assert!(e.contains("elevation_mm"), "{e}");
}

#[test]
fn trailing_tip_without_spacing_is_named() {
    let c = Case::new(&GOOD_LAYOUT.replace("tip_spacing_mm = 5.0\n", ""), 2);
    let e = c.replay_error();
    assert!(
        e.contains("tip_spacing_mm") && e.contains("probe[0]"),
        "{e}"
    );
}

#[test]
fn two_probes_on_one_channel_are_named() {
    let layout =
        format!("{GOOD_LAYOUT}\n[[probe]]\nname = \"P2\"\nelevation_mm = 40.0\nleading = 1\n");
    let c = Case::new(&layout, 2);
    let e = c.replay_error();
    assert!(
        e.contains("probe[1].leading") && e.contains("line 14"),
        "{e}"
    );
}

#[test]
fn toml_syntax_error_gives_a_line() {
    let c = Case::new(&GOOD_LAYOUT.replace("leading = 0", "leading = = 0"), 2);
    let e = c.replay_error();
    assert!(e.contains("layout.toml") && e.contains("line 7"), "{e}");
}

#[test]
fn truncated_wav_under_strict_is_an_error_naming_the_file_after_writing_the_results() {
    let c = Case::new(GOOD_LAYOUT, 2);
    let wav = c.p("capture.wav");
    let bytes = fs::read(&wav).unwrap();
    fs::write(&wav, &bytes[..bytes.len() / 2 + 1]).unwrap();
    let e = frothline_host::cli::run(c.args(&["--quiet", "--strict"]))
        .expect_err("--strict fails on a cut capture");
    assert_eq!(e.exit_code(), 2);
    let e = e.to_string();
    assert!(e.contains("capture.wav"), "{e}");
    assert!(e.to_lowercase().contains("truncated"), "{e}");
    assert!(c.p("out").join("windows.csv").exists());
}

#[test]
fn non_pcm_or_garbage_wav_is_an_error() {
    let c = Case::new(GOOD_LAYOUT, 2);
    fs::write(c.p("capture.wav"), b"RIFF\x10\x00\x00\x00WAVEjunkjunkjunk").unwrap();
    let e = c.replay_error();
    assert!(e.contains("capture.wav"), "{e}");
    fs::write(c.p("capture.wav"), b"this is not audio").unwrap();
    let e = c.replay_error();
    assert!(e.contains("capture.wav"), "{e}");
}

#[test]
fn bad_window_is_a_usage_error() {
    let c = Case::new(GOOD_LAYOUT, 2);
    let e = frothline_host::cli::run(c.args(&["--window", "5min"]))
        .unwrap_err()
        .to_string();
    assert!(e.contains("5min"), "{e}");
}

/// A port that cannot be opened at the start is an error with a hint, and no session
/// folder is filled with empty files; argument errors carry one `error:` prefix (the binary
/// adds it, so the message itself must not start with one).
#[test]
fn a_missing_port_is_an_error_with_a_hint() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("session");
    let e = frothline_host::cli::run([
        "frothline",
        "watch",
        "--port",
        "/dev/frothline-no-such-port",
        "--plain",
        "--duration",
        "1",
        "--archive",
        out.to_str().unwrap(),
    ])
    .unwrap_err();
    let text = e.to_string();
    assert!(text.contains("/dev/frothline-no-such-port"), "{text}");
    assert!(text.contains("frothline ports"), "{text}");
    assert!(text.contains("--wait-for-port"), "{text}");
    assert_eq!(e.exit_code(), 2);
    assert!(!out.exists(), "a session folder was made");
    let e = frothline_host::cli::run(["frothline", "replay"]).unwrap_err();
    assert!(!e.to_string().starts_with("error:"), "{e}");
}

/// `report --exclude-flags` with a misspelt flag is refused before anything is read, and
/// the message lists the flag names.
#[test]
fn a_misspelt_exclude_flag_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let e = frothline_host::cli::run([
        "frothline",
        "report",
        dir.path().to_str().unwrap(),
        "--exclude-flags",
        "few_bubble",
    ])
    .unwrap_err();
    let text = e.to_string();
    assert!(
        text.contains("--exclude-flags") && text.contains("`few_bubble`"),
        "{text}"
    );
    assert!(text.contains("few_bubbles"), "{text}");
    assert_eq!(e.exit_code(), 2);
}

/// A chord_lengths.csv edited by hand (no manifest): a bin with a negative edge is refused
/// naming the file and the line (as the last row it is taken for a cut and dropped with a
/// note); one with a probe windows.csv does not have is left out with a note; no panic.
#[test]
fn a_broken_chord_lengths_file_names_itself() {
    let src = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/steady-b2/expected");
    let dir = tempfile::tempdir().unwrap();
    for name in ["windows.csv", "chords.csv"] {
        std::fs::copy(src.join(name), dir.path().join(name)).unwrap();
    }
    let lengths = "probe,elevation_mm,bin_lower_mm,bin_upper_mm,count\n\
                   B2-1,8,0.5,0.6,3\nB2-1,8,-0.6,0.7,2\nB2-1,8,0.7,0.8,1\n";
    std::fs::write(dir.path().join("chord_lengths.csv"), lengths).unwrap();
    let out = dir.path().join("report");
    let args = |out: &std::path::Path| {
        [
            "frothline".to_string(),
            "report".into(),
            dir.path().display().to_string(),
            "--out".into(),
            out.display().to_string(),
        ]
    };
    let e = frothline_host::cli::run(args(&out)).unwrap_err();
    let text = e.to_string();
    assert!(
        text.contains("chord_lengths.csv") && text.contains("line 3"),
        "{text}"
    );
    let lengths = "probe,elevation_mm,bin_lower_mm,bin_upper_mm,count\n\
                   B2-1,8,0.5,0.6,3\nX9,8,0.5,0.6,2\n";
    std::fs::write(dir.path().join("chord_lengths.csv"), lengths).unwrap();
    let hidden = indicatif::ProgressBar::hidden();
    let run = frothline_host::report::input::read_run(dir.path(), &hidden).unwrap();
    assert_eq!(run.chord_lengths.len(), 1);
    assert!(
        run.notes
            .iter()
            .any(|n| n.contains("chord_lengths.csv") && n.contains("X9")),
        "{:?}",
        run.notes
    );
    frothline_host::cli::run(args(&out)).unwrap();
    assert!(out.join("chord_lengths.png").is_file());
}
