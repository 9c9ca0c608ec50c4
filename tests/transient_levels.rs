//! Surges replayed with no levels in the layout: the levels are learnt from the record
//! (the span after the front shows both phases) and the record is processed from its first
//! frame, so the first slice after the front is as good as with fixed levels.
//!
//! References outside the chain: the generator's binary air intervals (first contact of
//! each tip, realised void fraction per window), Ritter's celerity for the arrival at the
//! station (Ritter 1892, the ideal dam break over a dry bed: the front runs at 2 sqrt(g d0)),
//! and the generating power-law profile's Y90 per slice.

use frothline_core::FrontRecord;
use frothline_host::offline::record_levels::LevelRule;
use frothline_host::offline::transient::{replay_capture, TransientRun};
use frothline_host::shared::window_spec::WindowSpec;
use frothline_host::synth::{Generator, Scenario};
use std::path::Path;

/// The built-in dam break (one station of ten probes, 5 to 95 mm) after `quiet_s` seconds
/// of tips dry (or, `submerged`, in still water), each tip with its own levels, noise of
/// 180 counts.
fn surge(quiet_s: f64, submerged: bool) -> Scenario {
    let mut s = Scenario::builtin_transient();
    s.duration_s = quiet_s + 1.0;
    s.signal.tip_level_spread = 0.04;
    s.signal.noise_sigma_counts = 180.0;
    let t = s.transient.as_mut().unwrap();
    t.release_s = quiet_s;
    t.submerged = submerged;
    s
}

fn replay(dir: &Path, layout: &str, rule: LevelRule) -> TransientRun {
    let w: WindowSpec = "50ms".parse().unwrap();
    replay_capture(&dir.join("capture.wav"), &dir.join(layout), &w, rule, None).unwrap()
}

/// Tips dry for 5 s before the front (a logger waiting for a bore).
#[test]
fn dry_bed_surge_without_levels() {
    on_big_stack(|| {
        check_surge(surge(5.0, false), 31);
    });
}

/// Tips in still water for 2 s before the front.
#[test]
fn pre_submerged_surge_without_levels() {
    on_big_stack(|| {
        check_surge(surge(2.0, true), 32);
    });
}

/// A frothy front: probes 11 mm apart from 5 mm, the nose about 60 % air at 16 mm with
/// bubbles at about 150 Hz (power law with n = 0.35 at the front, Fmax = 150 Hz). The
/// probes below Y90 still arrive within 1 ms of their first contact, though their
/// sustained change (the confirmed arrival) comes later at some of them.
#[test]
fn frothy_front_arrivals_are_first_contacts() {
    on_big_stack(|| {
        let mut s = surge(0.5, false);
        let t = s.transient.as_mut().unwrap();
        t.elevations_mm = (0..9).map(|i| 5.0 + 11.0 * i as f64).collect();
        t.dual_tip_elevations_mm.clear();
        t.n_front = 0.35;
        t.bubble_rate_max_hz = 150.0;
        let late = check_surge(s, 33);
        assert!(late >= 1, "no probe confirmed late: the case is not frothy");
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

/// Replay `scenario`'s capture without levels in the layout and check it against the
/// generator's truth (see the module documentation). Returns how many probes below Y90
/// had their confirmed arrival more than 1 ms after their first contact.
fn check_surge(scenario: Scenario, seed: u64) -> usize {
    let submerged = scenario.transient.as_ref().unwrap().submerged;
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    let g = Generator::new(scenario, seed).unwrap();
    g.write_dir(dir, false).unwrap();
    let truth = g.transient_truth(&g.truth());
    let probes = g.truth();
    // The same layout without its levels: what a user writes first.
    let fixed = std::fs::read_to_string(dir.join("layout.toml")).unwrap();
    assert!(fixed.contains("leading_air_level"), "{fixed}");
    let bare: String = fixed
        .lines()
        .filter(|l| !l.contains("_level"))
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(dir.join("bare.toml"), bare).unwrap();
    let learnt = replay(dir, "bare.toml", LevelRule::Record);
    let with_fixed = replay(dir, "layout.toml", LevelRule::Record);

    // Station arrival within 1 ms of the generator's (Ritter's celerity).
    let arrival = learnt.arrival_s(0).expect("front found");
    let want = truth.fronts[0].arrival_s;
    assert!((arrival - want).abs() < 1e-3, "arrival {arrival} vs {want}");
    assert_eq!(with_fixed.arrival_s(0), Some(arrival));

    // Per-window C from the first slice after the front: within 0.01 of the generator's
    // realised air fraction of the window.
    let name =
        |w: &frothline_core::ProbeWindow<4>| learnt.layout.probes[w.probe as usize].name.clone();
    let mut checked = 0;
    for w in learnt
        .windows
        .iter()
        .filter(|w| w.since_front.is_some_and(|s: i64| s >= 0))
    {
        if w.flags.contains(frothline_core::Flags::PARTIAL_WINDOW) {
            continue;
        }
        let since = learnt.secs(w.since_front.unwrap() as f64);
        let t = truth
            .windows
            .iter()
            .find(|t| t.probe == name(w) && (t.since_front_s - since).abs() < 1e-6)
            .unwrap_or_else(|| panic!("no truth window for {} at {since}", name(w)));
        let c = w.lead.void_fraction().unwrap() as f64;
        assert!(
            (c - t.void_fraction_realised).abs() < 0.01,
            "{} at {since} s: C {c} vs realised {}",
            name(w),
            t.void_fraction_realised
        );
        assert!(
            !w.flags.contains(frothline_core::Flags::LEVELS_NOT_LEARNT),
            "{} at {since}: {:?}",
            name(w),
            w.flags
        );
        checked += 1;
    }
    // 0.8 s of flow after the front: 15 whole windows per probe.
    let n_probes = learnt.layout.probes.len();
    assert!(checked >= 14 * n_probes, "{checked} windows checked");

    // Probe arrivals within 1 ms of the tip's first contact with the front (first water on
    // a dry tip, first air on a submerged one), for the probes below the first slice's Y90.
    let y90 = truth.slices[0].y90_mm;
    let mut arrivals = 0;
    let mut late = 0;
    for f in &learnt.fronts {
        let FrontRecord::Probe(p) = &f.record else {
            continue;
        };
        let spec = &learnt.layout.probes[p.probe as usize];
        if spec.elevation_mm >= y90 {
            continue;
        }
        let first_contact = probes
            .iter()
            .find(|t| t.name == spec.name)
            .and_then(|t| {
                t.leading()
                    .first()
                    .map(|i| if submerged { i.start_s } else { i.end_s })
            })
            .unwrap();
        let got = learnt.secs(p.first_contact as f64);
        assert!(
            (got - first_contact).abs() < 1e-3,
            "{} at {} mm: arrival {got} vs first contact {first_contact}",
            spec.name,
            spec.elevation_mm
        );
        arrivals += 1;
        late += (learnt.secs(p.arrival as f64) - first_contact > 1e-3) as usize;
    }
    // Y90 of the first slice is 50 mm: the probes at 5 to 45 mm.
    let below = learnt
        .layout
        .probes
        .iter()
        .filter(|p| p.elevation_mm < y90)
        .count();
    assert_eq!(arrivals, below);

    // A profile in every slice where the array spans Y90 (top probe at 95 mm).
    let top = learnt
        .layout
        .probes
        .iter()
        .map(|p| p.elevation_mm)
        .fold(0.0, f64::max);
    let mut slices = 0;
    for (_, p) in &learnt.profiles {
        let since = learnt.secs(p.since_front as f64);
        let Some(t) = truth
            .slices
            .iter()
            .find(|t| (t.since_front_s - since).abs() < 1e-6)
        else {
            continue;
        };
        if t.y90_mm < top - 10.0 && !p.partial {
            assert!(p.fit.y90_mm.is_some(), "slice at {since} s: {p:?}");
            slices += 1;
        }
    }
    assert!(slices >= 12, "{slices} slices");
    late
}
