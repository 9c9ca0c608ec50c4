//! The cost measurements of mode `measure`: the chain's streaming in variants (learnt or
//! fixed levels, with or without trailing tips, practical settings), the level learner's
//! parts and the profile fit, each printed as a `fw.` line for `scripts/firmware-measure.sh`.

use crate::acquire::Clock;
use crate::capture;
use crate::config::{FwChain, BLOCK_FRAMES, BLOCK_SAMPLES};
use crate::replay::ReplaySource;
use crate::source::SampleSource;

/// The level learner's two costs on the capture's first channel: feeding it (every
/// `LEARN_STRIDE`-th frame of the capture, ten times) and deciding a period (ten times).
#[inline(never)]
pub(super) fn measure_learning<C: Clock>(clock: &C) {
    use frothline_core::levels::LevelLearner;
    let ch = capture::CHANNELS as usize;
    let mut block = [0i16; BLOCK_SAMPLES];
    let mut l = LevelLearner::new();
    let mut src = ReplaySource::new(capture::SAMPLES, ch);
    let n = src.fill(&mut block[..BLOCK_FRAMES * ch]).unwrap_or(0);
    l.observe(&block[..n * ch], ch, 0, 0);
    l.range_from_seen();
    const REPS: u32 = 10;
    let t0 = clock.now();
    for _ in 0..REPS {
        l.observe(core::hint::black_box(&block[..n * ch]), ch, 0, 0);
    }
    let observe = clock.now().wrapping_sub(t0);
    let t0 = clock.now();
    let mut modes = 0;
    for _ in 0..REPS {
        let d = core::hint::black_box(&l).decide_with_min_class(64, 2);
        modes += matches!(d, frothline_core::levels::Learnt::Modes { .. }) as u32;
    }
    let decide = clock.now().wrapping_sub(t0);
    // One tip's detector over the whole capture, learning and with fixed levels.
    let mut detect = [0u32; 2];
    for (k, fixed) in [false, true].into_iter().enumerate() {
        let mut tip = capture::PROBE_CONFIGS[0].leading;
        if fixed {
            tip.levels = frothline_core::LevelSource::Fixed {
                air: 26000,
                water: 3000,
            };
        }
        let mut d = frothline_core::PhaseDetector::new(&tip, &capture::DETECTOR, false);
        let mut src = ReplaySource::new(capture::SAMPLES, ch);
        let mut at = 0u64;
        loop {
            let n = src.fill(&mut block[..BLOCK_FRAMES * ch]).unwrap_or(0);
            if n == 0 {
                break;
            }
            let t0 = clock.now();
            d.process(&block[..n * ch], ch, at, &mut ());
            detect[k] += clock.now().wrapping_sub(t0);
            at += n as u64;
        }
    }
    // One probe's lag analysis at a window close: a correlator of the firmware's lags over
    // a 1000-frame window of 20 bubbles of 12 frames, the trailing tip 5 frames behind.
    let (mut close, mut sums_t, mut analyse_t) = (0u32, 0u32, 0u32);
    {
        use frothline_core::{Correlator, Edge, EdgeSink, Flags};
        let mut c = Correlator::<{ crate::config::LAGS }>::new(60, 0, false, false);
        for rep in 0..REPS as u64 {
            let base = rep * 1000;
            for b in 0..20u64 {
                let t = base + b * 50 + 3;
                for (at, to_air) in [(t, true), (t + 12, false)] {
                    c.lead_in_order().edge(Edge { frame: at, to_air });
                    c.trail_in_order().edge(Edge {
                        frame: at + 5,
                        to_air,
                    });
                }
            }
            let mut flags = Flags::NONE;
            let t0 = clock.now();
            if rep % 2 == 0 {
                let r = c.close_analysed(base + 1000, 0.3, &mut flags);
                close += clock.now().wrapping_sub(t0);
                core::hint::black_box(r);
            } else {
                let sums = c.close(base + 1000, &mut flags);
                let t1 = clock.now();
                sums_t += t1.wrapping_sub(t0);
                let r = sums.analyse(0.3);
                analyse_t += clock.now().wrapping_sub(t1);
                core::hint::black_box(r);
            }
        }
    }
    report!(
        "fw.lag_analysis closes={} ticks={} close_ticks={} analyse_ticks={}",
        REPS / 2,
        close,
        sums_t,
        analyse_t
    );
    report!(
        "fw.learning frames={} reps={} observe_ticks={} decide_ticks={} modes={} detect_learnt_ticks={} detect_fixed_ticks={}",
        n,
        REPS,
        observe,
        decide,
        modes,
        detect[0],
        detect[1]
    );
}

/// Fits timed by [`measure_profile_fit`].
const PROFILE_FITS: u32 = 200;

/// The per-slice cost of a station: timer ticks of [`PROFILE_FITS`] profile fits of a
/// coarse station with standard errors (six probes 11 mm apart, three below Y90; the
/// points of the core's `profile_fit_6_points_weighted` bench) and of eight points
/// without (`profile_fit_8_points`).
#[inline(never)]
pub(super) fn measure_profile_fit<C: Clock>(clock: &C) {
    use frothline_core::profile::{fit_profile, renewal_sigma, ProfileConfig, ProfilePoint};
    const COARSE_C: [f32; 6] = [0.225227, 0.530996, 0.775882, 0.962872, 0.98, 0.99];
    const EIGHT_C: [f32; 8] = [
        0.043867, 0.163939, 0.302622, 0.453163, 0.612671, 0.779485, 0.952508, 1.0,
    ];
    let cfg = ProfileConfig::default();
    let mut coarse = [ProfilePoint::new(0.0, 0.0); 6];
    for (i, (p, &c)) in coarse.iter_mut().zip(&COARSE_C).enumerate() {
        let y = 5.0 + 11.0 * i as f32;
        *p = ProfilePoint::with_sigma(y, c, renewal_sigma(c, 20, Some(0.6), Some(0.8)));
    }
    let mut eight = [ProfilePoint::new(0.0, 0.0); 8];
    for (i, (p, &c)) in eight.iter_mut().zip(&EIGHT_C).enumerate() {
        *p = ProfilePoint::new(5.0 + 10.0 * i as f32, c);
    }
    for (name, pts) in [("weighted_6", &coarse[..]), ("plain_8", &eight[..])] {
        let t0 = clock.now();
        for _ in 0..PROFILE_FITS {
            core::hint::black_box(fit_profile(core::hint::black_box(pts), &cfg));
        }
        let dt = clock.now().wrapping_sub(t0);
        report!(
            "fw.profile_fit points={} fits={} ticks={}",
            name,
            PROFILE_FITS,
            dt
        );
    }
}

/// Variants of the capture's configuration for [`measure_streaming`].
#[derive(Clone, Copy, PartialEq, Eq)]
pub(super) enum Variant {
    /// One window over the whole record, levels as configured (learnt).
    Whole,
    /// ... and fixed levels (no learning).
    WholeFixed,
    /// ... and no trailing tips (no correlation; 8 tips instead of 16).
    WholeFixedLeading,
    /// Settings of a practical run: 50 ms windows, the default 0.2 s learning period,
    /// learnt levels, over the capture played [`PRACTICAL_REPEATS`] times (1.02 s). The
    /// blocks of the first learning period (the tips have no levels yet and learn on every
    /// 4th frame) are timed apart: a run's cost with learning done and levels tracked is
    /// that of the blocks after it.
    Practical,
    /// ... with fixed levels: what the practical run costs without its learners.
    PracticalFixed,
}

/// Plays of the capture in [`Variant::Practical`].
const PRACTICAL_REPEATS: usize = 17;

/// The chain's streaming cost alone: the capture again through a chain with one window
/// over the whole record (no window closes until the end), blocks decoded before timing.
#[inline(never)]
pub(super) fn measure_streaming<C: Clock>(chain: &mut FwChain, clock: &C, variant: Variant) {
    let Ok(mut cfg) = capture::chain_config() else {
        return;
    };
    cfg.window = frothline_core::WindowPolicy::Whole;
    let mut repeats = 1;
    // Frames timed apart at the start (the first learning period, practical variant).
    let mut first_period = 0usize;
    if matches!(variant, Variant::Practical | Variant::PracticalFixed) {
        first_period = (capture::SAMPLE_RATE_HZ / 5) as usize;
        cfg.window = frothline_core::WindowPolicy::Frames(capture::SAMPLE_RATE_HZ / 20);
        cfg.detector.learn_period = capture::SAMPLE_RATE_HZ / 5;
        repeats = PRACTICAL_REPEATS;
    }
    let fixed = frothline_core::LevelSource::Fixed {
        air: 26000,
        water: 3000,
    };
    let mut tips = 0;
    for p in cfg.probes.iter_mut() {
        if !matches!(variant, Variant::Whole | Variant::Practical) {
            p.leading.levels = fixed;
            if let Some(t) = p.trailing.as_mut() {
                t.levels = fixed;
                if t.polarity == frothline_core::Polarity::AirLow {
                    t.levels = frothline_core::LevelSource::Fixed {
                        air: 3000,
                        water: 26000,
                    };
                }
            }
            if p.leading.polarity == frothline_core::Polarity::AirLow {
                p.leading.levels = frothline_core::LevelSource::Fixed {
                    air: 3000,
                    water: 26000,
                };
            }
        }
        if variant == Variant::WholeFixedLeading {
            p.trailing = None;
        }
        tips += 1 + p.trailing.is_some() as usize;
    }
    // In place again: a chain built by value would need its size in stack.
    if chain.configure(cfg).is_err() {
        return;
    }
    let mut block = [0i16; BLOCK_SAMPLES];
    let ch = capture::CHANNELS as usize;
    let mut push = 0u64;
    let mut frames = 0usize;
    let (mut first_push, mut first_frames) = (0u64, 0usize);
    for _ in 0..repeats {
        let mut src = ReplaySource::new(capture::SAMPLES, ch);
        loop {
            let n = src.fill(&mut block[..BLOCK_FRAMES * ch]).unwrap_or(0);
            if n == 0 {
                break;
            }
            let mut rest = &block[..n * ch];
            while !rest.is_empty() {
                let t0 = clock.now();
                let used = chain.push(rest);
                // A poll builds the window's next record (the chain queues one): timed
                // with the push; the records are dropped where they lie (what is done
                // with them is the pipeline's records share).
                while chain.poll_lean_with(|_| ()).is_some() {}
                let dt = clock.now().wrapping_sub(t0) as u64;
                if first_frames < first_period {
                    first_push += dt;
                    first_frames += used / ch;
                } else {
                    push += dt;
                    frames += used / ch;
                }
                rest = &rest[used..];
            }
        }
    }
    let t0 = clock.now();
    while chain.finish().is_err() {
        while chain.poll_lean_with(|_| ()).is_some() {}
    }
    while chain.poll_lean_with(|_| ()).is_some() {}
    let close = clock.now().wrapping_sub(t0) as u64;
    report!(
        "fw.streaming variant={} frames={} channels={} tips={} push_ticks={} finish_ticks={} first_period_frames={} first_period_ticks={}",
        match variant {
            Variant::Whole => "whole",
            Variant::WholeFixed => "whole-fixed",
            Variant::WholeFixedLeading => "whole-fixed-leading",
            Variant::Practical => "practical",
            Variant::PracticalFixed => "practical-fixed",
        },
        frames,
        ch,
        tips,
        push,
        close,
        first_frames,
        first_push
    );
}
