//! Checks of the front detector on synthetic tip signals with a known front.
//!
//! The signals are built as phase sequences (known interface frames) and passed through
//! the core's own `PhaseDetector` with fixed levels, so the detector sees exactly what the
//! chain would give it. The truth is the frame at which the synthetic front starts.

use frothline_core::front::{
    front_celerity, front_celerity_frames, FrontConfig, FrontDetector, FrontRule, StationFlags,
    StationFront, TipFront,
};
use frothline_core::{
    DetectorConfig, Edge, EdgeSink, LevelSource, PhaseDetector, Polarity, TipConfig,
};
use proptest::prelude::*;
use rand::{rngs::StdRng, Rng, SeedableRng};

const FS: f32 = 40_000.0;
const AIR: i16 = 20_000;
const WATER: i16 = 2_000;

/// A single-channel phase signal: `true` = air.
fn render(phases: &[bool]) -> Vec<i16> {
    phases
        .iter()
        .map(|&a| if a { AIR } else { WATER })
        .collect()
}

/// Set frames `[from, to)` to `air`.
fn fill(p: &mut [bool], from: usize, to: usize, air: bool) {
    let to = to.min(p.len());
    for x in &mut p[from.min(to)..to] {
        *x = air;
    }
}

/// Bubbly flow from `from` on: water with bubbles of 0.5–3 ms every 2–8 ms (a roller
/// behind a front, C ~ 0.3); when `mostly_air`, the roles are swapped (a tip high in the
/// roller: air with droplets).
fn bubbly(p: &mut [bool], from: usize, mostly_air: bool, rng: &mut StdRng) {
    // `carrier` is the phase of the inclusions (true = air bubbles in water).
    let carrier = !mostly_air;
    fill(p, from, p.len(), !carrier);
    let ms = |x: f32| (x * FS / 1000.0) as usize;
    let mut at = from + ms(rng.random_range(1.0..3.0));
    while at < p.len() {
        let len = ms(rng.random_range(0.5..3.0)).max(1);
        fill(p, at, at + len, carrier);
        at += len + ms(rng.random_range(2.0..8.0));
    }
    // The front itself begins with 1 ms of water (the tips are dry before it).
    fill(p, from, from + ms(1.0), false);
}

fn tip_config() -> TipConfig {
    TipConfig {
        channel: 0,
        polarity: Polarity::AirHigh,
        levels: LevelSource::Fixed {
            air: AIR,
            water: WATER,
        },
    }
}

/// Run one tip through the phase detector and the front detector, in blocks of `sizes`
/// (cycled), calling `advance_to` after each block as the chain does.
fn detect(samples: &[i16], cfg: FrontConfig, sizes: &[usize]) -> TipFront {
    let mut phase = PhaseDetector::new(&tip_config(), &DetectorConfig::default(), cfg.before_air);
    let mut front = FrontDetector::new(cfg);
    let mut at = 0usize;
    let mut k = 0;
    while at < samples.len() {
        let end = (at + sizes[k % sizes.len()].max(1)).min(samples.len());
        k += 1;
        phase.process(&samples[at..end], 1, at as u64, &mut front);
        front.advance_to(end as u64, phase.is_air());
        at = end;
    }
    front.summary()
}

fn ms(x: f64) -> usize {
    (x * FS as f64 / 1000.0) as usize
}

#[test]
fn stray_droplet_before_the_front_does_not_trigger_it() {
    // A dry tip (air before the front) hit by two droplets of 0.4 ms 100 ms apart; the
    // front (water body) at 0.5 s.
    let n = ms(1000.0);
    let t0 = ms(500.0);
    let mut p = vec![true; n];
    fill(&mut p, ms(200.0), ms(200.4), false);
    fill(&mut p, ms(300.0), ms(300.4), false);
    fill(&mut p, t0, n, false);
    let cfg = FrontConfig::for_rate(FS, true);
    let f = detect(&render(&p), cfg, &[n]);
    assert_eq!(f.arrival, Some(t0 as u64));
    assert_eq!(f.rule, Some(FrontRule::Hold));
    assert_eq!(f.false_starts, 2);
    assert_eq!(f.first_interface, Some(ms(200.0) as u64));

    // The same with a wet tip before the front (a stray bubble) and an air front.
    let q: Vec<bool> = p.iter().map(|a| !a).collect();
    let f = detect(&render(&q), FrontConfig::for_rate(FS, false), &[n]);
    assert_eq!(f.arrival, Some(t0 as u64));
}

#[test]
fn front_into_bubbly_flow_found_within_one_millisecond() {
    // A roller behind the front at 0.4 s, low tip (water with bubbles: hold rule) and high
    // tip (air with droplets: burst rule), strays before it. 1 ms = 40 frames at 40 kHz.
    for seed in 0..20u64 {
        for mostly_air in [false, true] {
            let mut rng = StdRng::seed_from_u64(seed);
            let n = ms(800.0);
            let t0 = ms(400.0) + rng.random_range(0..400);
            let mut p = vec![true; n];
            fill(&mut p, ms(100.0), ms(100.3), false);
            bubbly(&mut p, t0, mostly_air, &mut rng);
            let f = detect(&render(&p), FrontConfig::for_rate(FS, true), &[n]);
            let a = f.arrival.expect("front found") as i64;
            assert!(
                (a - t0 as i64).abs() <= ms(1.0) as i64,
                "seed {seed}, mostly_air {mostly_air}: {a} vs {t0}"
            );
            assert_eq!(f.false_starts, 1, "seed {seed}");
        }
    }
}

/// A frothy nose: a dry tip meets the front as short water contacts (0.3 to 1 ms) 6 to
/// 15 ms apart, each followed by more air than the settle time, so the first contacts are
/// false starts and the sustained change comes later (burst or hold). The first contact is
/// the first of those contacts (analytic case: the frame where the synthetic front's first
/// water begins), and a stray droplet 100 ms ahead of the front stays out of it.
#[test]
fn first_contact_of_a_frothy_nose() {
    let mut late = 0;
    for seed in 0..20u64 {
        let mut rng = StdRng::seed_from_u64(seed);
        let n = ms(800.0);
        let t0 = ms(300.0) + rng.random_range(0..400);
        let mut p = vec![true; n];
        // A stray droplet well ahead.
        fill(&mut p, t0 - ms(100.0), t0 - ms(99.6), false);
        // The nose: a few sparse contacts.
        let mut at = t0;
        for _ in 0..4 {
            let len = ms(rng.random_range(0.3..1.0)).max(1);
            fill(&mut p, at, at + len, false);
            at += len + ms(rng.random_range(6.0..15.0));
        }
        // Then the body of the roller: water with bubbles.
        bubbly(&mut p, at, false, &mut rng);
        for sizes in [&[n][..], &[1usize, 997, 40, 4096][..]] {
            let f = detect(&render(&p), FrontConfig::for_rate(FS, true), sizes);
            let arrival = f.arrival.expect("front found");
            let first = f.first_contact.expect("first contact");
            assert_eq!(
                first, t0 as u64,
                "seed {seed}: first contact {first} vs {t0}"
            );
            assert!(arrival >= first, "seed {seed}: {arrival} vs {first}");
            late += (arrival > first + ms(5.0) as u64) as u32;
        }
    }
    // Most noses confirm only after false starts: the first contact is what moved.
    assert!(
        late >= 20,
        "{late} of 40 cases with a late confirmed arrival"
    );
    // A clean front: the first contact is the arrival.
    let n = ms(600.0);
    let mut p = vec![true; n];
    fill(&mut p, ms(300.0), n, false);
    let f = detect(&render(&p), FrontConfig::for_rate(FS, true), &[n]);
    assert_eq!(f.first_contact, f.arrival);
}

#[test]
fn burst_rule_fires_on_a_roller_that_never_holds_water() {
    // Droplets of 0.3 ms every 2 ms from t0: never 5 ms of water, six interfaces in 6 ms.
    let n = ms(300.0);
    let t0 = ms(100.0);
    let mut p = vec![true; n];
    let mut at = t0;
    while at < n {
        fill(&mut p, at, at + ms(0.3), false);
        at += ms(2.0);
    }
    let f = detect(&render(&p), FrontConfig::for_rate(FS, true), &[n]);
    assert_eq!(f.arrival, Some(t0 as u64));
    assert_eq!(f.rule, Some(FrontRule::Burst));
}

#[test]
fn station_with_a_probe_stuck_in_air_finds_the_front_and_flags_it() {
    let n = ms(600.0);
    let cfg = FrontConfig::for_rate(FS, true);
    let mut rng = StdRng::seed_from_u64(7);
    // Probe 0 (low) gets the front at 200 ms, probe 2 (high) at 230 ms, probe 1 is dead.
    let mut low = vec![true; n];
    bubbly(&mut low, ms(200.0), false, &mut rng);
    let mut high = vec![true; n];
    bubbly(&mut high, ms(230.0), true, &mut rng);
    let dead = vec![true; n];
    let tips: Vec<TipFront> = [&low, &dead, &high]
        .iter()
        .map(|p| detect(&render(p), cfg, &[4096]))
        .collect();
    let s = StationFront::combine(tips.iter().copied(), n as u64, ms(100.0) as u64);
    assert_eq!(s.arrival, Some(ms(200.0) as u64));
    assert_eq!(s.first_probe, Some(0));
    assert_eq!(s.probes, 3);
    assert_eq!(s.arrived, 0b101);
    assert_eq!(s.silent, 0b010);
    assert!(s.flags.contains(StationFlags::SILENT_PROBE));

    // Within the grace time the dead probe is not flagged yet.
    let early = StationFront::combine(tips.iter().copied(), ms(250.0) as u64, ms(100.0) as u64);
    assert_eq!(early.arrival, Some(ms(200.0) as u64));
    assert!(early.flags.is_empty(), "{:?}", early.flags);

    // Nothing arrived anywhere.
    let none = StationFront::combine([TipFront::default(); 2], 0, 0);
    assert!(none.flags.contains(StationFlags::NO_ARRIVAL));
    assert_eq!(none.arrival, None);
}

#[test]
fn celerity_between_two_stations() {
    // Ritter's dam-break front of 2 sqrt(g d0) with d0 = 0.1 m: 1.9806 m/s; stations 1 m
    // apart give a difference in arrival of 1/1.9806 s.
    let c = 2.0 * (9.80665f64 * 0.1).sqrt();
    let dt = 1.0 / c;
    let v = front_celerity(2.0, 1.0, 3.0, (1.0 + dt) as f32).unwrap() as f64;
    assert!((v - c).abs() < 1e-5 * c, "{v}");
    let frames = (dt * FS as f64).round() as u64;
    let v = front_celerity_frames(2000.0, 10_000, 3000.0, 10_000 + frames, FS).unwrap() as f64;
    assert!((v - c).abs() < 1e-3 * c, "{v}");
    assert_eq!(front_celerity(0.0, 1.0, 1.0, 1.0), None);
    assert_eq!(front_celerity_frames(0.0, 5, 1.0, 5, FS), None);
    assert_eq!(front_celerity_frames(0.0, 5, 1.0, 6, 0.0), None);
    // Frames the wrong way round give a negative celerity (front moving towards -x).
    assert!(front_celerity_frames(0.0, 6, 1000.0, 5, FS).unwrap() < 0.0);
}

#[test]
fn rules_can_be_switched_off_and_degenerate_input_is_harmless() {
    // Both rules off: never confirms.
    let off = FrontConfig {
        before_air: true,
        hold_frames: 0,
        burst_interfaces: 0,
        burst_frames: 0,
        settle_frames: 0,
        contact_gap_frames: 0,
    };
    let mut d = FrontDetector::new(off);
    for i in 0..100u64 {
        d.edge(Edge {
            frame: i * 3,
            to_air: i % 2 == 1,
        });
    }
    d.advance_to(u64::MAX, false);
    assert_eq!(d.arrival(), None);
    assert_eq!(d.summary().interfaces, 100);

    // Repeated edges of one direction, frames at the extremes: no panic, a defined result.
    let mut d = FrontDetector::new(FrontConfig {
        burst_interfaces: 255,
        ..FrontConfig::for_rate(f32::NAN, true)
    });
    for f in [u64::MAX, 0, u64::MAX, 3] {
        d.edge(Edge {
            frame: f,
            to_air: false,
        });
    }
    d.advance_to(0, true);
    d.advance_to(u64::MAX, false);
    let _ = d.summary();
}

/// A record with strays and a roller front, and its single-block result.
fn case(seed: u64, mostly_air: bool) -> Vec<i16> {
    let mut rng = StdRng::seed_from_u64(seed);
    let n = ms(300.0);
    let mut p = vec![true; n];
    let stray = ms(50.0) + rng.random_range(0..ms(50.0));
    fill(&mut p, stray, stray + ms(0.4), false);
    bubbly(
        &mut p,
        ms(150.0) + rng.random_range(0..ms(50.0)),
        mostly_air,
        &mut rng,
    );
    render(&p)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    #[test]
    fn arrival_does_not_depend_on_how_the_record_is_split(
        seed in 0u64..1000,
        mostly_air in any::<bool>(),
        sizes in prop::collection::vec(1usize..3000, 1..8),
    ) {
        let samples = case(seed, mostly_air);
        let cfg = FrontConfig::for_rate(FS, true);
        let whole = detect(&samples, cfg, &[samples.len()]);
        prop_assert!(whole.arrival.is_some());
        prop_assert_eq!(detect(&samples, cfg, &sizes), whole);
    }
}
