//! Level drift in a surge replayed without levels in the layout: the replay checks every
//! tip's levels in each 1 s segment where the tip is steady enough to judge (both phases
//! behind the front; one phase before it and above the flow), and windows.csv says which
//! levels each window ended with.
//!
//! The reference is the generator's own signal model: each tip's nominal levels
//! (`Generator::tip_levels`) plus its linear drift `A t / T` (both levels move together;
//! `synth::render`), and its realised air fraction per window.

use frothline_host::synth::{DriftKind, Generator, Scenario};
use std::collections::HashMap;
use std::path::Path;

const DURATION_S: f64 = 4.0;

/// The built-in dam break (one station of ten probes, 5 to 95 mm), tips dry for 1.5 s
/// before the front, each tip with its own levels, noise of 180 counts, and a linear drift
/// of `drift` counts over the record.
fn surge(drift: f64) -> Scenario {
    let mut s = Scenario::builtin_transient();
    s.duration_s = DURATION_S;
    s.signal.tip_level_spread = 0.04;
    s.signal.noise_sigma_counts = 180.0;
    if drift != 0.0 {
        s.signal.drift.kind = DriftKind::Linear;
        s.signal.drift.amplitude_counts = drift;
    }
    let t = s.transient.as_mut().unwrap();
    t.release_s = 1.5;
    t.submerged = false;
    s
}

/// One windows.csv row.
struct Row {
    probe: String,
    end_s: f64,
    since_front_s: Option<f64>,
    void_fraction: f64,
    air: f64,
    water: f64,
    /// No levels (`levels_not_learnt`): the level columns are empty.
    unlearnt: bool,
    /// `levels_from = record_one_phase`: the tip showed one phase only.
    one_phase: bool,
}

/// Write the capture, replay it with the layout's levels removed (`frothline replay`,
/// defaults), and return the generator, the rows, and the nominal (water, air) levels of
/// each probe's leading tip.
fn replay(drift: f64, dir: &Path) -> (Generator, Vec<Row>, HashMap<String, (f64, f64)>) {
    let g = Generator::new(surge(drift), 41).unwrap();
    g.write_dir(dir, false).unwrap();
    let fixed = std::fs::read_to_string(dir.join("layout.toml")).unwrap();
    let bare: String = fixed
        .lines()
        .filter(|l| !l.contains("_level"))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(dir.join("bare.toml"), bare).unwrap();
    let out = dir.join("out");
    let args = [
        "frothline",
        "replay",
        &dir.join("capture.wav").display().to_string(),
        "--layout",
        &dir.join("bare.toml").display().to_string(),
        "--out",
        &out.display().to_string(),
        "--quiet",
    ]
    .map(String::from);
    frothline_host::cli::run(args.to_vec()).unwrap();
    let mut r = csv::Reader::from_path(out.join("windows.csv")).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (p, e, s, c, a, w) = (
        col("probe"),
        col("window_end_s"),
        col("since_front_s"),
        col("void_fraction"),
        col("air_level_counts"),
        col("water_level_counts"),
    );
    let from = col("levels_from");
    let rows = r
        .records()
        .map(|x| x.unwrap())
        .map(|x| Row {
            probe: x[p].to_string(),
            end_s: x[e].parse().unwrap(),
            since_front_s: x[s].parse().ok(),
            void_fraction: x[c].parse().unwrap_or(f64::NAN),
            air: x[a].parse().unwrap_or(f64::NAN),
            water: x[w].parse().unwrap_or(f64::NAN),
            unlearnt: x[a].is_empty(),
            one_phase: &x[from] == "record_one_phase",
        })
        .collect();
    let levels = g.tip_levels();
    let nominal = g
        .truth()
        .iter()
        .map(|t| (t.name.clone(), levels[t.leading_channel as usize]))
        .collect();
    (g, rows, nominal)
}

/// The drift the generator added at the middle of segment `k` (1 s segments), counts.
fn drift_at_segment(drift: f64, k: usize) -> f64 {
    drift * (k as f64 + 0.5) / DURATION_S
}

/// The 1 s segment whose levels a window ending at `end_s` ended with (its last frame's).
fn segment_of(end_s: f64) -> usize {
    (end_s - 1e-6).floor().max(0.0) as usize
}

#[test]
fn drifting_levels_are_followed_through_a_surge() {
    on_big_stack(|| {
        // 4000 counts over 4 s: the air levels (about 25000) stay clear of the rail.
        let drift = 4000.0;
        let tmp = tempfile::tempdir().unwrap();
        let (g, rows, nominal) = replay(drift, tmp.path());
        let truth = g.transient_truth(&g.truth());
        let mut by_segment: HashMap<(String, usize), f64> = HashMap::new();
        // The two tips above the flow (85 and 95 mm) see air only; spread by the drift
        // their one-phase histogram is too wide for the record rule, which leaves them
        // unlearnt (and says so). They are left out here.
        let learnt: Vec<&String> = nominal
            .keys()
            .filter(|p| rows.iter().any(|r| &&r.probe == p && !r.unlearnt))
            .collect();
        assert!(learnt.len() >= 8, "{} probes learnt", learnt.len());
        for r in rows.iter().filter(|r| !r.unlearnt) {
            let (water0, air0) = nominal[&r.probe];
            let k = segment_of(r.end_s);
            let d = drift_at_segment(drift, k);
            // The levels each window ended with: the nominal ones moved by the drift at
            // the middle of the window's segment, to within half of what the drift moves
            // in one segment (1000 counts): a segment's level is the drift's average over
            // the frames where that phase was seen, and the segment the front enters shows
            // water in its last part only. (The record's levels, kept throughout, would be
            // 1500 counts off in the first and the last segment.) A tip that shows air only measures its air level (its
            // water level is borrowed from the other tips' swing).
            // The water level is checked where the window is at least a fifth water: a tip
            // mostly in air (above Y90) meets water in short chords, whose level a coarse
            // histogram of one segment places poorly.
            let water_ok = r.one_phase
                || r.void_fraction.is_nan()
                || r.void_fraction >= 0.8
                || (r.water - (water0 + d)).abs() < 500.0;
            assert!(
                (r.air - (air0 + d)).abs() < 500.0 && water_ok,
                "{} ending {} s (segment {k}): levels {} / {} vs {} / {}",
                r.probe,
                r.end_s,
                r.air,
                r.water,
                air0 + d,
                water0 + d
            );
            by_segment.insert((r.probe.clone(), k), r.air);
        }
        // Every probe's air level rises from segment to segment by about the drift in one
        // second (1000 counts): the check moved the levels, it did not keep the record's.
        for probe in &learnt {
            for k in 2..4 {
                let (Some(a), Some(b)) = (
                    by_segment.get(&(probe.to_string(), k - 1)),
                    by_segment.get(&(probe.to_string(), k)),
                ) else {
                    panic!("{probe}: no window in segments {} and {k}", k - 1);
                };
                assert!((b - a - 1000.0).abs() < 300.0, "{probe}: {a} then {b}");
            }
        }
        // Per-window C after the front stays within 0.01 of the generator's realised air
        // fraction while the levels move.
        let mut checked = 0;
        for r in rows
            .iter()
            .filter(|r| !r.unlearnt && r.since_front_s.is_some_and(|s| s >= 0.0))
        {
            let since = r.since_front_s.unwrap();
            let Some(t) = truth
                .windows
                .iter()
                .find(|t| t.probe == r.probe && (t.since_front_s - since).abs() < 1e-6)
            else {
                continue;
            };
            assert!(
                (r.void_fraction - t.void_fraction_realised).abs() < 0.01,
                "{} at {since} s: C {} vs realised {}",
                r.probe,
                r.void_fraction,
                t.void_fraction_realised
            );
            checked += 1;
        }
        assert!(checked >= 40 * learnt.len(), "{checked} windows checked");
    });
}

#[test]
fn steady_levels_stay_where_they_are_through_a_surge() {
    on_big_stack(|| {
        let tmp = tempfile::tempdir().unwrap();
        let (_, rows, nominal) = replay(0.0, tmp.path());
        let mut range: HashMap<&str, (f64, f64)> = HashMap::new();
        for r in &rows {
            let (water0, air0) = nominal[&r.probe];
            // Without drift every window's levels are the nominal ones, to within what a
            // segment's histogram of noisy samples (180 counts) gives.
            let water_ok = r.one_phase || (r.water - water0).abs() < 150.0;
            assert!(
                (r.air - air0).abs() < 150.0 && water_ok,
                "{} ending {} s: levels {} / {} vs {air0} / {water0}",
                r.probe,
                r.end_s,
                r.air,
                r.water
            );
            let e = range.entry(&r.probe).or_insert((f64::MAX, f64::MIN));
            *e = (e.0.min(r.air), e.1.max(r.air));
        }
        for (probe, (lo, hi)) in range {
            assert!(hi - lo < 200.0, "{probe}: air level moved {lo} .. {hi}");
        }
    });
}

fn on_big_stack(f: impl FnOnce() + Send + 'static) {
    std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(f)
        .unwrap()
        .join()
        .unwrap();
}
