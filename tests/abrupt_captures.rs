//! Captures whose recorder stopped abruptly: a data chunk cut short, a header that declares
//! 0 or 0xFFFFFFFF data bytes (never finished), a capture with no frame at all. The results
//! up to the cut are written and the last window is flagged; a capture without frames is an
//! error. Expected values are counted from the samples written (analytic: the void fraction
//! of a square wave is its duty cycle).

use frothline_host::offline::replay::{run, Keep, ReplayArgs};
use std::fs;
use std::path::{Path, PathBuf};

/// A square wave per channel: air (20000 counts) for 20 of every 50 frames, water
/// (2000) otherwise: void fraction 0.4 exactly.
fn wav_bytes(channels: u16, frames: usize) -> Vec<u8> {
    let spec = hound::WavSpec {
        channels,
        sample_rate: 20_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut cur = std::io::Cursor::new(Vec::new());
    let mut w = hound::WavWriter::new(&mut cur, spec).unwrap();
    for i in 0..frames * channels as usize {
        let v = if (i / channels as usize) % 50 < 20 {
            20_000i16
        } else {
            2_000
        };
        w.write_sample(v).unwrap();
    }
    w.finalize().unwrap();
    cur.into_inner()
}

const LAYOUT: &str = r#"[flow]
kind = "steady"

[[probe]]
name = "P1"
elevation_mm = 20.0
leading = 0
trailing = 1
tip_spacing_mm = 5.0
air_level = 20000
water_level = 2000
"#;

struct Case {
    dir: tempfile::TempDir,
}

impl Case {
    fn new(wav: &[u8]) -> Case {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("layout.toml"), LAYOUT).unwrap();
        fs::write(dir.path().join("capture.wav"), wav).unwrap();
        Case { dir }
    }
    fn p(&self, n: &str) -> PathBuf {
        self.dir.path().join(n)
    }
    fn args(&self, strict: bool) -> ReplayArgs {
        ReplayArgs {
            capture: self.p("capture.wav"),
            layout: self.p("layout.toml"),
            out: self.p("out"),
            window: "10ms".parse().unwrap(),
            quiet: true,
            strict,
            levels: Default::default(),
        }
    }
}

/// Runs `f` on a thread with a large stack: a host chain is built on the stack before it is
/// boxed, more than a test thread's 2 MiB in a debug build.
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

fn replay(
    a: &ReplayArgs,
) -> Result<frothline_host::offline::replay::ReplayReport, frothline_host::shared::error::HostError>
{
    big_stack(|| run(a))
}

fn rows(dir: &Path) -> Vec<csv::StringRecord> {
    let mut r = csv::Reader::from_path(dir.join("windows.csv")).unwrap();
    r.records().map(Result::unwrap).collect()
}

fn col(dir: &Path, name: &str) -> usize {
    let mut r = csv::Reader::from_path(dir.join("windows.csv")).unwrap();
    r.headers().unwrap().iter().position(|h| h == name).unwrap()
}

/// Sets the data chunk length field (bytes 40..44 of hound's 44-byte header).
fn with_data_len(mut wav: Vec<u8>, len: u32) -> Vec<u8> {
    assert_eq!(&wav[36..40], b"data");
    wav[40..44].copy_from_slice(&len.to_le_bytes());
    wav
}

#[test]
fn truncated_capture_keeps_results_up_to_the_cut_and_flags_the_last_window() {
    let full = wav_bytes(2, 4000);
    // 2500 whole frames and half a frame more.
    let c = Case::new(&full[..44 + 2500 * 4 + 2]);
    let rep = replay(&c.args(false)).expect("a cut capture is replayed up to the cut");
    assert_eq!(rep.frames, 2500);
    let w = rep.abrupt_end.expect("a warning");
    assert!(w.contains("capture.wav") && w.contains("2500"), "{w}");
    let out = c.p("out");
    let rows = rows(&out);
    // 10 ms = 200 frames: 12 whole windows and one of 100 frames.
    assert_eq!(rows.len(), 13);
    let flags = col(&out, "flags");
    assert!(rows[12][flags].contains("capture_cut"), "{:?}", &rows[12]);
    assert!(rows[..12].iter().all(|r| !r[flags].contains("capture_cut")));
    let c_col = col(&out, "void_fraction");
    let c0: f64 = rows[0][c_col].parse().unwrap();
    assert!((c0 - 0.4).abs() < 1e-6, "{c0}");
    // The same frames in a complete file give the same rows, but for the flag.
    let whole = Case::new(&wav_bytes(2, 2500));
    replay(&whole.args(false)).unwrap();
    let good = self::rows(&whole.p("out"));
    assert_eq!(good.len(), rows.len());
    for (a, b) in good.iter().zip(&rows) {
        assert_eq!(a[c_col], b[c_col]);
    }
}

#[test]
fn truncated_capture_under_strict_fails_after_writing_the_results() {
    let full = wav_bytes(2, 4000);
    let c = Case::new(&full[..44 + 1000 * 4]);
    let e = replay(&c.args(true)).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("frame 1000"), "{e}");
    assert_eq!(rows(&c.p("out")).len(), 5);
}

#[test]
fn header_declaring_ffffffff_data_bytes_is_read_to_the_end_of_the_file() {
    let c = Case::new(&with_data_len(wav_bytes(2, 3000), 0xFFFF_FFFF));
    let rep = replay(&c.args(false)).unwrap();
    assert_eq!(rep.frames, 3000);
    let w = rep.abrupt_end.expect("a warning");
    assert!(w.contains("unfinished") && w.contains("0xFFFFFFFF"), "{w}");
    let out = c.p("out");
    let rows = rows(&out);
    assert_eq!(rows.len(), 15);
    assert!(rows[14][col(&out, "flags")].contains("capture_cut"));
}

#[test]
fn header_declaring_zero_data_bytes_is_read_to_the_end_of_the_file() {
    let c = Case::new(&with_data_len(wav_bytes(2, 3000), 0));
    let rep = replay(&c.args(false)).unwrap();
    assert_eq!(rep.frames, 3000);
    assert!(rep.abrupt_end.unwrap().contains("0x00000000"));
    assert_eq!(rows(&c.p("out")).len(), 15);
    // --strict refuses it, naming the header.
    let e = replay(&c.args(true)).unwrap_err().to_string();
    assert!(e.contains("unfinished header"), "{e}");
}

#[test]
fn capture_without_frames_is_an_error_not_a_summary() {
    let c = Case::new(&wav_bytes(2, 0));
    let e = replay(&c.args(false)).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    let e = e.to_string();
    assert!(
        e.contains("capture.wav") && e.contains("no sample frame"),
        "{e}"
    );
    assert!(!c.p("out").join("windows.csv").exists());
}

#[test]
fn replay_totals_only_matches_the_records_it_no_longer_keeps() {
    let c = Case::new(&wav_bytes(2, 4000));
    let kept = replay(&c.args(false)).unwrap();
    let lean =
        big_stack(|| frothline_host::offline::replay::run_with(&c.args(false), Keep::TotalsOnly))
            .unwrap();
    assert!(lean.records.is_empty());
    assert_eq!(kept.records.len() as u64, lean.totals.records);
    assert_eq!(
        kept.totals.probes[0].air_frames,
        lean.totals.probes[0].air_frames
    );
    // The second run into the same folder says it replaced the first one's file.
    let note = "an earlier run's output in this folder was replaced (windows.csv, chords.csv, \
                chord_lengths.csv)\n";
    let lean_text = frothline_host::offline::replay::summary_table(&lean);
    assert!(lean_text.contains(note), "{lean_text}");
    assert_eq!(
        frothline_host::offline::replay::summary_table(&kept),
        lean_text.replace(note, "")
    );
}

#[test]
fn a_capture_wider_than_64_channels_is_refused_with_its_true_count() {
    let c = Case::new(&wav_bytes(300, 10));
    let e = replay(&c.args(false)).unwrap_err().to_string();
    assert!(
        e.contains("capture.wav") && e.contains("300 channels") && e.contains("at most 64"),
        "{e}"
    );
    assert!(!e.contains("layout.toml"), "{e}");
}

/// The surge fixture with its two stations' x_mm swapped: the front reaches the station
/// listed downstream first, a negative celerity, flagged in stations.csv and the summary.
#[test]
fn stations_in_the_wrong_order_are_flagged() {
    let fx = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/surge-b2");
    let dir = tempfile::tempdir().unwrap();
    let text = fs::read_to_string(fx.join("layout.toml"))
        .unwrap()
        .replace("x_mm = 0.0", "x_mm = TMP")
        .replace("x_mm = 600.0", "x_mm = 0.0")
        .replace("x_mm = TMP", "x_mm = 600.0");
    fs::write(dir.path().join("layout.toml"), text).unwrap();
    let args = ReplayArgs {
        capture: fx.join("capture.wav"),
        layout: dir.path().join("layout.toml"),
        out: dir.path().join("out"),
        window: "50ms".parse().unwrap(),
        quiet: true,
        strict: false,
        levels: Default::default(),
    };
    let (run, _) = big_stack(|| frothline_host::offline::transient::run(&args)).unwrap();
    assert!(run.celerity_from_previous(1).unwrap() < 0.0);
    assert!(run.arrived_before_previous(1) && !run.arrived_before_previous(0));
    let stations = fs::read_to_string(dir.path().join("out/stations.csv")).unwrap();
    assert!(
        stations.contains(frothline_host::offline::transient::REVERSED_ARRIVAL),
        "{stations}"
    );
    let text = frothline_host::offline::transient::summary(&run, None);
    assert!(text.contains("before the one upstream"), "{text}");
    // The fixture as committed raises no such flag.
    let args = ReplayArgs {
        layout: fx.join("layout.toml"),
        out: dir.path().join("good"),
        ..args
    };
    let (run, _) = big_stack(|| frothline_host::offline::transient::run(&args)).unwrap();
    assert!(!run.arrived_before_previous(1));
}
