//! Tests of the record rule: analytic histograms of two and one levels.

use frothline_core::Polarity;

use super::{from_histogram, RecordLevels, TipLevels, TipOutcome};

/// Two Gaussian levels: the learnt levels are the means within a small fraction of the
/// noise, and the class noise is the Gaussian's sigma (analytic case: a mixture of two
/// well-separated normal distributions).
#[test]
fn two_gaussian_levels() {
    use rand::{rngs::StdRng, Rng, SeedableRng};
    use rand_distr::{Distribution, Normal};
    let mut rng = StdRng::seed_from_u64(5);
    let mut hist = vec![0u32; 1 << 16];
    let (water, air, sigma) = (3120.0f64, 25480.0f64, 150.0f64);
    for _ in 0..200_000 {
        let base = if rng.random::<f64>() < 0.3 {
            air
        } else {
            water
        };
        let x = Normal::new(base, sigma).unwrap().sample(&mut rng).round() as i16;
        hist[(x as u16 ^ 0x8000) as usize] += 1;
    }
    let TipOutcome::Learnt {
        levels,
        air_noise,
        water_noise,
    } = from_histogram(&hist, Polarity::AirHigh, 64)
    else {
        panic!("not learnt");
    };
    assert!((levels.air as f64 - air).abs() < 20.0, "{levels:?}");
    assert!((levels.water as f64 - water).abs() < 20.0, "{levels:?}");
    assert!((air_noise as f64 / sigma - 1.0).abs() < 0.05, "{air_noise}");
    assert!(
        (water_noise as f64 / sigma - 1.0).abs() < 0.05,
        "{water_noise}"
    );
    // Air low: the same levels, swapped.
    let TipOutcome::Learnt { levels: l2, .. } = from_histogram(&hist, Polarity::AirLow, 64) else {
        panic!("not learnt");
    };
    assert_eq!((l2.air, l2.water), (levels.water, levels.air));
}

fn gaussian_hist(parts: &[(f64, f64, usize)], seed: u64) -> Vec<u32> {
    use rand::{rngs::StdRng, SeedableRng};
    use rand_distr::{Distribution, Normal};
    let mut rng = StdRng::seed_from_u64(seed);
    let mut hist = vec![0u32; 1 << 16];
    for &(mean, sigma, n) in parts {
        let d = Normal::new(mean, sigma).unwrap();
        for _ in 0..n {
            let x = d.sample(&mut rng).round() as i16;
            hist[(x as u16 ^ 0x8000) as usize] += 1;
        }
    }
    hist
}

/// A tip in air but for a few droplets keeps its own air level and borrows the median
/// swing of the tips that learnt both (analytic case: its water level is its air level
/// minus that swing); a tip noisier than the others by far is not given levels.
#[test]
fn one_phase_tip_borrows_the_median_swing() {
    let polarities = [Polarity::AirHigh; 5];
    let mut hists = vec![
        gaussian_hist(&[(3000.0, 150.0, 30_000), (26000.0, 150.0, 30_000)], 1),
        gaussian_hist(&[(3400.0, 150.0, 30_000), (25600.0, 150.0, 30_000)], 2),
        gaussian_hist(&[(2800.0, 150.0, 30_000), (26300.0, 150.0, 30_000)], 3),
        // Air only, with 10 strided samples of water: too rare to learn.
        gaussian_hist(&[(25800.0, 150.0, 50_000), (3000.0, 150.0, 10)], 4),
        // One broad mode, 20 times the others' noise.
        gaussian_hist(&[(15000.0, 3000.0, 50_000)], 5),
    ];
    let mut levels = RecordLevels {
        tips: hists
            .iter()
            .enumerate()
            .map(|(i, h)| TipLevels {
                probe: i,
                trailing: false,
                channel: i as u8,
                outcome: from_histogram(h, Polarity::AirHigh, 64),
            })
            .collect(),
        ..Default::default()
    };
    assert!(matches!(levels.tips[3].outcome, TipOutcome::Unclear { .. }));
    levels.borrow_swing(&hists, &polarities);
    let TipOutcome::Borrowed {
        levels: l,
        in_air,
        swing,
        from_tips,
        ..
    } = levels.tips[3].outcome
    else {
        panic!("{:?}", levels.tips[3]);
    };
    assert!(in_air);
    assert_eq!(from_tips, 3);
    // Swings 23000, 22200, 23500: the median is 23000.
    assert!((swing - 23000.0).abs() < 30.0, "{swing}");
    assert!((l.air - 25800.0).abs() < 10.0, "{l:?}");
    assert!((l.water - (l.air - swing)).abs() < 1e-3, "{l:?}");
    assert!(matches!(levels.tips[4].outcome, TipOutcome::Unclear { .. }));
    let names: Vec<String> = (0..5).map(|i| format!("P{i}")).collect();
    let w = levels.warnings(&names, 64);
    assert_eq!(w.len(), 2, "{w:?}");
    assert!(
        w[0].contains("probe `P3`, leading tip (channel 3): shows air only"),
        "{}",
        w[0]
    );
    assert!(
        w[1].contains("probe `P4`") && w[1].contains("buried in noise"),
        "{}",
        w[1]
    );
    hists.clear();
}

/// One phase only (a dry tip): never learnt, and told apart from a buried swing.
#[test]
fn one_phase_and_unclear() {
    let mut hist = vec![0u32; 1 << 16];
    for x in 25000i16..25040 {
        hist[(x as u16 ^ 0x8000) as usize] = 500;
    }
    assert_eq!(
        from_histogram(&hist, Polarity::AirHigh, 64),
        TipOutcome::OnePhase {
            min: 25000,
            max: 25039
        }
    );
    // A flat spread of 4000 counts: no two levels in it.
    let mut flat = vec![0u32; 1 << 16];
    for x in 20000i16..24000 {
        flat[(x as u16 ^ 0x8000) as usize] = 50;
    }
    assert!(matches!(
        from_histogram(&flat, Polarity::AirHigh, 64),
        TipOutcome::Unclear { .. }
    ));
    assert_eq!(
        from_histogram(&vec![0u32; 1 << 16], Polarity::AirHigh, 64),
        TipOutcome::Empty
    );
}

/// A drift segment's own levels are used, unless its split lies inside one phase of the
/// record's levels (a tip in water for the whole segment, its mains hum split in two):
/// there the record's levels hold. A segment whose levels moved by most of the swing (a
/// re-zeroed conditioner) keeps its own. (Analytic case.)
#[test]
fn a_segment_split_inside_one_phase_is_not_its_levels() {
    use frothline_core::levels::Levels;
    let levels = |air, water| Levels { air, water };
    let (record, hum) = (levels(26000.0, 3000.0), levels(3143.0, 2856.0));
    let (drifted, shifted) = (levels(25500.0, 3300.0), levels(30000.0, 16000.0));
    let learnt = RecordLevels {
        tips: vec![TipLevels {
            probe: 0,
            trailing: false,
            channel: 0,
            outcome: TipOutcome::Learnt {
                levels: record,
                air_noise: 150.0,
                water_noise: 150.0,
            },
        }],
        segments: vec![vec![Some(hum), Some(drifted), None, Some(shifted)]],
        segment_frames: 40_000,
        segment_one_phase: Vec::new(),
    };
    assert_eq!(learnt.levels_in_segment(0, 0), Some(record));
    assert_eq!(learnt.levels_in_segment(0, 1), Some(drifted));
    assert_eq!(learnt.levels_in_segment(0, 2), Some(record));
    assert_eq!(learnt.levels_in_segment(0, 3), Some(shifted));
}
