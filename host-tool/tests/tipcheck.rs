//! `frothline tipcheck` on synthetic captures whose tips' levels, noise and interface ramps
//! are known, and its write into a commented layout (golden file).
//!
//! References: the generator's per-tip levels and noise; its interface ramps are linear
//! over `wetting_time_us` / `dewetting_time_us`, so the 10 %-90 % time of an interface is
//! 0.8 of the ramp (analytic case).

use frothline_host::offline::tipcheck::{check, write_levels, TipcheckArgs};
use frothline_host::synth::{Generator, Scenario};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};
use std::path::{Path, PathBuf};

const SCENARIO: &str = r#"
duration_s = 3.0
sample_rate_hz = 40000
seed = 5
[signal]
noise_sigma_counts = 150.0
wetting_time_us = 500.0
dewetting_time_us = 1000.0
tip_level_spread = 0.04
[[probe]]
name = "P1"
elevation_mm = 20.0
void_fraction = 0.3
bubble_rate_hz = 40.0
velocity_m_s = 1.5
"#;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../fixtures/tipcheck")
}

fn capture(dir: &Path, scenario: &Scenario) -> Generator {
    let g = Generator::new(scenario.clone(), scenario.seed).unwrap();
    g.write_dir(dir, false).unwrap();
    g
}

fn args(dir: &Path, layout: &Path) -> TipcheckArgs {
    TipcheckArgs {
        capture: Some(dir.join("capture.wav")),
        port: None,
        baud: 115_200,
        listen: 5.0,
        set_levels: false,
        layout: layout.to_path_buf(),
        from: 0.0,
        to: None,
        tolerance: 0.05,
        write: false,
    }
}

#[test]
fn measures_levels_noise_and_interface_times() {
    let tmp = tempfile::tempdir().unwrap();
    let s = Scenario::from_toml_str(SCENARIO).unwrap();
    let g = capture(tmp.path(), &s);
    let nominal = g.tip_levels();
    let r = check(&args(tmp.path(), &fixtures().join("layout.toml"))).unwrap();
    assert_eq!(r.tips.len(), 2);
    for t in &r.tips {
        let (water, air) = nominal[t.channel];
        let (a, w) = t.levels.unwrap();
        let swing = air - water;
        // Within 0.2 % of the swing (the long ramps pull the mode means slightly).
        assert!((a - air).abs() < 0.002 * swing, "{t:?} vs {air}");
        assert!((w - water).abs() < 0.002 * swing, "{t:?} vs {water}");
        let (an, wn) = t.noise.unwrap();
        assert!(
            (an / 150.0 - 1.0).abs() < 0.15 && (wn / 150.0 - 1.0).abs() < 0.15,
            "{t:?}"
        );
        // 10-90 %: 0.8 of the ramps, to a tenth of a sample (25 us at 40 kHz).
        assert!((t.drying_s.unwrap() - 0.8e-3).abs() < 2.5e-6, "{t:?}");
        assert!((t.wetting_s.unwrap() - 0.4e-3).abs() < 2.5e-6, "{t:?}");
        assert!(t.interfaces > 100, "{t:?}");
        assert!(t.flags.is_empty(), "{t:?}");
    }
}

#[test]
fn flags_moved_levels_high_noise_and_one_phase() {
    let tmp = tempfile::tempdir().unwrap();
    let mut s = Scenario::from_toml_str(SCENARIO).unwrap();
    s.signal.noise_sigma_counts = 2600.0;
    s.seed = 6;
    capture(tmp.path(), &s);
    let layout = tmp.path().join("moved.toml");
    let text = std::fs::read_to_string(fixtures().join("layout.toml"))
        .unwrap()
        .replace("air_level = 26000", "air_level = 23000");
    std::fs::write(&layout, text).unwrap();
    let r = check(&args(tmp.path(), &layout)).unwrap();
    for t in &r.tips {
        assert!(t.flags.contains(&"high_noise"), "{t:?}");
        assert!(t.flags.contains(&"moved"), "{t:?}");
    }
    // Nothing but air on every tip (a capture written sample by sample): no levels,
    // flagged.
    let dir = tmp.path().join("dry");
    std::fs::create_dir_all(&dir).unwrap();
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 40_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(dir.join("capture.wav"), spec).unwrap();
    let mut rng = StdRng::seed_from_u64(3);
    let noise = Normal::new(25_000.0f64, 150.0).unwrap();
    for _ in 0..2 * 40_000 {
        w.write_sample(noise.sample(&mut rng).round() as i16)
            .unwrap();
    }
    w.finalize().unwrap();
    let r = check(&args(&dir, &fixtures().join("layout.toml"))).unwrap();
    assert!(
        r.tips.iter().all(|t| t.flags == ["not_learnt"]),
        "{:?}",
        r.tips
    );
}

/// From a capture segment into a commented layout: the tips' own pairs replace the shared
/// pair at its place, every comment and the order of the other keys stay (golden file).
#[test]
fn writes_levels_keeping_comments_golden() {
    let tmp = tempfile::tempdir().unwrap();
    let s = Scenario::from_toml_str(SCENARIO).unwrap();
    capture(tmp.path(), &s);
    let layout = tmp.path().join("layout.toml");
    std::fs::copy(fixtures().join("layout.toml"), &layout).unwrap();
    let mut a = args(tmp.path(), &layout);
    a.from = 0.5;
    a.to = Some(2.5);
    a.write = true;
    frothline_host::offline::tipcheck::run(&a).unwrap();
    let got = std::fs::read_to_string(&layout).unwrap();
    let want = std::fs::read_to_string(fixtures().join("layout.expected.toml")).unwrap();
    assert_eq!(got, want);
    // Written again over its own output: the per-tip keys are updated in place.
    let again = write_levels(&got, &check(&a).unwrap().tips).unwrap();
    assert_eq!(again, want);
}
