//! Bad input about levels, through the `frothline` binary: every case gives a message that
//! names the file, the probe (or key) and the tip, and flags in windows.csv, never a
//! silently empty or wrong result.
//!
//! The captures are written here sample by sample (hound), so each tip's signal is known:
//! a two-level tip, a tip that never leaves air, a tip whose swing is below its noise.

use rand::{rngs::StdRng, Rng, SeedableRng};
use rand_distr::{Distribution, Normal};
use std::path::Path;
use std::process::{Command, Output};

const FS: u32 = 40_000;

fn frothline(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_frothline"))
        .args(args)
        .output()
        .unwrap()
}

/// A 16-bit capture of `frames` frames at `fs`: channels 0 and 1 a probe in bubbly flow
/// (air 25 000, water 3 000, noise 150), channel 2 a tip that never leaves air, channel 3 a
/// tip with a swing of 150 counts under noise of 400.
fn write_capture(path: &Path, fs: u32, frames: usize) {
    let spec = hound::WavSpec {
        channels: 4,
        sample_rate: fs,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    let mut rng = StdRng::seed_from_u64(7);
    let noise = Normal::new(0.0, 150.0).unwrap();
    let big = Normal::new(0.0, 400.0).unwrap();
    let mut air = false;
    let mut left = 0usize;
    for _ in 0..frames {
        if left == 0 {
            air = !air;
            left = rng.random_range(40..400);
        }
        left -= 1;
        let level: f64 = if air { 25_000.0 } else { 3_000.0 };
        let small: f64 = if air { 10_150.0 } else { 10_000.0 };
        for x in [
            level + noise.sample(&mut rng),
            level + noise.sample(&mut rng),
            25_000.0 + noise.sample(&mut rng),
            small + big.sample(&mut rng),
        ] {
            w.write_sample(x.round() as i16).unwrap();
        }
    }
    w.finalize().unwrap();
}

const LAYOUT: &str = "[flow]\nkind = \"steady\"\n\n\
[[probe]]\nname = \"P1\"\nelevation_mm = 10\nleading = 0\ntrailing = 1\ntip_spacing_mm = 5\n\n\
[[probe]]\nname = \"DRY\"\nelevation_mm = 90\nleading = 2\n\n\
[[probe]]\nname = \"FOUL\"\nelevation_mm = 50\nleading = 3\n";

fn column(csv_text: &str, name: &str) -> Vec<(String, String)> {
    let mut lines = csv_text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let i = header.iter().position(|h| *h == name).unwrap();
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[0].to_string(), f[i].to_string())
        })
        .collect()
}

#[test]
fn one_phase_and_buried_swing_are_named_and_flagged() {
    let dir = tempfile::tempdir().unwrap();
    let cap = dir.path().join("c.wav");
    write_capture(&cap, FS, 80_000);
    let layout = dir.path().join("l.toml");
    std::fs::write(&layout, LAYOUT).unwrap();
    let out = dir.path().join("out");
    let o = frothline(&[
        "replay",
        cap.to_str().unwrap(),
        "--layout",
        layout.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--window",
        "0.5s",
        "--quiet",
    ]);
    assert!(o.status.success(), "{o:?}");
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("probe `DRY`, leading tip (channel 2): shows air only"),
        "{err}"
    );
    assert!(
        err.contains("probe `FOUL`, leading tip (channel 3): no clear air and water levels"),
        "{err}"
    );
    assert!(!err.contains("`P1`"), "{err}");
    let csv = std::fs::read_to_string(out.join("windows.csv")).unwrap();
    for (probe, from) in column(&csv, "levels_from") {
        let want = match probe.as_str() {
            "P1" => "record",
            "DRY" => "record_one_phase",
            _ => "",
        };
        assert_eq!(from, want, "{probe}");
    }
    for (k, (probe, flags)) in column(&csv, "flags").into_iter().enumerate() {
        assert_eq!(
            flags.contains("levels_not_learnt"),
            probe == "FOUL",
            "{probe}: {flags}"
        );
        // The record starts in water (a steady flow's initial phase): the dry tip's
        // first window holds its only interface, the later ones none.
        if probe == "DRY" && k >= 3 {
            assert!(flags.contains("stuck"), "{flags}");
        }
    }
}

#[test]
fn levels_outside_the_sample_range_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let cap = dir.path().join("c.wav");
    write_capture(&cap, FS, 4_000);
    let layout = dir.path().join("l.toml");
    let text = LAYOUT.replace(
        "name = \"DRY\"\nelevation_mm = 90\nleading = 2\n",
        "name = \"DRY\"\nelevation_mm = 90\nleading = 2\nair_level = 1e9\nwater_level = 3000\n",
    );
    std::fs::write(&layout, text).unwrap();
    let o = frothline(&[
        "replay",
        cap.to_str().unwrap(),
        "--layout",
        layout.to_str().unwrap(),
        "--out",
        dir.path().join("out").to_str().unwrap(),
    ]);
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("l.toml, line 15, column 13: key `probe[1].air_level`")
            && err.contains("outside the capture's sample range -32768..=32767"),
        "{err}"
    );
    assert!(!dir.path().join("out/windows.csv").exists());
}

#[test]
fn levels_that_contradict_the_polarity_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let cap = dir.path().join("c.wav");
    write_capture(&cap, FS, 4_000);
    let layout = dir.path().join("l.toml");
    let text = LAYOUT.replace(
        "tip_spacing_mm = 5\n",
        "tip_spacing_mm = 5\nair_is_high = true\ntrailing_air_level = 3000\ntrailing_water_level = 25000\n",
    );
    std::fs::write(&layout, text).unwrap();
    let o = frothline(&[
        "replay",
        cap.to_str().unwrap(),
        "--layout",
        layout.to_str().unwrap(),
        "--out",
        dir.path().join("out").to_str().unwrap(),
    ]);
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("key `probe[0].air_is_high`")
            && err.contains("contradicts trailing_air_level = 3000"),
        "{err}"
    );
}

/// A learning period too short to hold a histogram: 1e-9 s, or the default 0.2 s in a
/// 1 Hz file. Refused where the tips learn during the record (the device's rule); the
/// record rule does not need it.
#[test]
fn learning_period_too_short() {
    let dir = tempfile::tempdir().unwrap();
    let fast = dir.path().join("fast.wav");
    write_capture(&fast, FS, 8_000);
    let slow = dir.path().join("slow.wav");
    write_capture(&slow, 1, 2_000);
    let short = dir.path().join("short.toml");
    std::fs::write(
        &short,
        LAYOUT.replacen(
            "\n\n[[probe]]",
            "\n[detector]\nlearn_period_s = 1e-9\n\n[[probe]]",
            1,
        ),
    )
    .unwrap();
    let plain = dir.path().join("plain.toml");
    std::fs::write(&plain, LAYOUT).unwrap();
    for (cap, layout, what) in [
        (&fast, &short, "1e-9 s"),
        (&slow, &plain, "0.2 s is 2.000e-1 frames at 1 Hz"),
    ] {
        let run = |rule: &str| {
            frothline(&[
                "replay",
                cap.to_str().unwrap(),
                "--layout",
                layout.to_str().unwrap(),
                "--out",
                dir.path().join("out").to_str().unwrap(),
                "--quiet",
                "--levels",
                rule,
            ])
        };
        let o = run("device");
        assert!(!o.status.success(), "{what}");
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(
            err.contains("key `detector.learn_period_s`") && err.contains("at least 64 frames"),
            "{what}: {err}"
        );
        let o = run("record");
        assert!(o.status.success(), "{what}: {o:?}");
    }
}
