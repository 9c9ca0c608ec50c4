//! Cost of the station stages (transient flows): the per-slice profile fit, the decay fit,
//! and a station chain against a plain chain.
//!
//! - `profile_fit_8_points`: one `fit_profile` of 8 points without standard errors (a
//!   power law, n = 1.2; one equal-weight pass per model);
//! - `profile_fit_6_points_weighted`: one `fit_profile` of a coarse station with standard
//!   errors, as a device slice gives them (six probes 11 mm apart, three below Y90 = 34 mm,
//!   n = 0.7; one equal-weight and two reweighted passes per model);
//! - `decay_fit_{20,128}_points`: one `DecayTracker::fit` over 20 / 128 slices;
//! - `chain_*`: 8 dual-tip probes (16 channels) at 40 kHz, 2^18 frames (6.6 s) in memory,
//!   tips dry until 0.1 s then bubbly (C from 0.1 at the lowest probe to 0.94 at the top,
//!   300 bubbles/s per tip, so Y90 lies inside the array), 50 ms windows
//!   (20 slices per second): `chain_plain` without a station (fixed 50 ms windows),
//!   `chain_station_profile` a station chain with front-relative windows and a profile fit
//!   per slice (decay fit off), `chain_station_profile_decay` the same with a decay fit at
//!   every slice.
//!
//! Run: `cargo bench -p frothline-core --bench station -- --quick`. The share of the fits
//! in the per-sample cost follows from the figures: 20 fits per second of signal against
//! the chain's time per second of signal.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use frothline_core::decay::DecayTracker;
use frothline_core::profile::{fit_profile, renewal_sigma, ProfileConfig, ProfilePoint};
use frothline_core::{
    Chain, ChainConfig, LevelSource, Polarity, ProbeConfig, StationConfig, TipConfig, WindowPolicy,
};
use rand::{rngs::StdRng, Rng, SeedableRng};
use rand_distr::{Distribution, Gamma, Normal};
use std::hint::black_box;

const FS: f64 = 40_000.0;
/// Void fractions of the coarse station of `profile_fit_6_points_weighted`.
const COARSE_C: [f32; 6] = [0.225227, 0.530996, 0.775882, 0.962872, 0.98, 0.99];
const FRAMES: usize = 1 << 18;
const CHANNELS: usize = 16;
const AIR: i16 = 24_000;
const WATER: i16 = 3_000;
const FRONT_S: f64 = 0.1;
const RING: usize = 1 << 16;

/// Air intervals of one tip from the front on: gamma chords, void fraction `c`,
/// F = 300 Hz.
fn bubbles(rng: &mut StdRng, seconds: f64, c: f64) -> Vec<(f64, f64)> {
    let (f, k) = (300.0, 2.0);
    let ga = Gamma::new(k, c / f / k).unwrap();
    let gw = Gamma::new(k, (1.0 - c) / f / k).unwrap();
    let mut t = FRONT_S + gw.sample(rng);
    let mut out = vec![(0.0, FRONT_S)];
    while t < seconds {
        let e = t + ga.sample(rng);
        out.push((t, e));
        t = e + gw.sample(rng);
    }
    out
}

fn render(intervals: &[(f64, f64)], rng: &mut StdRng) -> Vec<i16> {
    let mut x = vec![0f32; FRAMES];
    for &(s, e) in intervals {
        let (a, b) = ((s * FS) as usize, ((e * FS) as usize).min(FRAMES));
        for v in x.iter_mut().take(b).skip(a) {
            *v = 1.0;
        }
    }
    let noise = Normal::new(0.0f32, 0.01).unwrap();
    x.iter()
        .map(|&p| (WATER as f32 + (p + noise.sample(rng)) * (AIR - WATER) as f32) as i16)
        .collect()
}

fn signal() -> Vec<i16> {
    let mut rng = StdRng::seed_from_u64(1);
    let seconds = FRAMES as f64 / FS;
    let mut chans = Vec::new();
    for p in 0..CHANNELS / 2 {
        // C from 0.1 near the bed to 0.94 at the top probe: Y90 inside the array, so every
        // slice runs the whole fit (both models) and feeds the decay series.
        let lead = bubbles(&mut rng, seconds, 0.1 + 0.12 * p as f64);
        let trail: Vec<(f64, f64)> = lead
            .iter()
            .map(|&(s, e)| {
                let d = 3.3e-3 + rng.random_range(-3e-4..3e-4);
                (if s == 0.0 { 0.0 } else { s + d }, e + d)
            })
            .collect();
        chans.push(render(&lead, &mut rng));
        chans.push(render(&trail, &mut rng));
    }
    (0..FRAMES)
        .flat_map(|i| chans.iter().map(move |c| c[i]))
        .collect()
}

fn tip(channel: usize) -> TipConfig {
    TipConfig {
        channel: channel as u8,
        polarity: Polarity::AirHigh,
        levels: LevelSource::Fixed {
            air: AIR,
            water: WATER,
        },
    }
}

fn config(window: WindowPolicy, station: Option<u16>) -> ChainConfig<8> {
    let mut c = ChainConfig::<8>::new(CHANNELS as u8, window);
    c.initial_air = true;
    let mut st = StationConfig::new(FS as f32, true);
    for p in 0..CHANNELS / 2 {
        c.probes
            .push(ProbeConfig::dual(tip(2 * p), tip(2 * p + 1), 255))
            .unwrap();
        st.elevations_mm.push(5.0 + 10.0 * p as f32).unwrap();
    }
    if let Some(every) = station {
        st.decay_fit_every = every;
        c.station = Some(st);
    }
    c
}

fn run<const D: usize>(cfg: &ChainConfig<8>, samples: &[i16]) -> usize {
    let mut chain = Box::new(Chain::<8, 256, D>::with_delay_ring(cfg.clone()).unwrap());
    let mut n = 0;
    let mut rest = samples;
    let drain = |chain: &mut Chain<8, 256, D>, n: &mut usize| {
        while let Some(r) = chain.poll() {
            black_box(&r);
            *n += 1;
        }
        while let Some(p) = chain.poll_profile() {
            black_box(&p);
            *n += 1;
        }
        while chain.poll_front().is_some() {}
    };
    while !rest.is_empty() {
        let used = chain.push(rest);
        rest = &rest[used..];
        drain(&mut chain, &mut n);
    }
    while chain.finish().is_err() {
        drain(&mut chain, &mut n);
    }
    drain(&mut chain, &mut n);
    n
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("station");
    let points: Vec<ProfilePoint> = (0..8)
        .map(|i| {
            let y = 5.0 + 10.0 * i as f32;
            ProfilePoint::new(y, (0.9 * (y / 62.0).powf(1.2)).min(1.0))
        })
        .collect();
    let cfg = ProfileConfig::default();
    g.bench_function("profile_fit_8_points", |b| {
        b.iter(|| black_box(fit_profile(black_box(&points), &cfg)))
    });
    // 0.9 (y/34)^0.7 (at most 0.98) + 0.01 ((i mod 3) − 1), rounded: the same points as
    // the firmware's measure mode (firmware-example/src/mps2.rs).
    let coarse: Vec<ProfilePoint> = COARSE_C
        .iter()
        .enumerate()
        .map(|(i, &c)| {
            let y = 5.0 + 11.0 * i as f32;
            ProfilePoint::with_sigma(y, c, renewal_sigma(c, 20, Some(0.6), Some(0.8)))
        })
        .collect();
    g.bench_function("profile_fit_6_points_weighted", |b| {
        b.iter(|| black_box(fit_profile(black_box(&coarse), &cfg)))
    });
    for n in [20usize, 128] {
        let mut t = DecayTracker::<128>::new();
        for i in 0..n {
            let s = 0.025 + 0.05 * i as f32;
            let _ = t.push(s, 0.3 + 0.25 * (-s / 0.3).exp());
        }
        g.bench_function(format!("decay_fit_{n}_points"), |b| {
            b.iter(|| black_box(black_box(&t).fit(0.1)))
        });
    }

    let samples = signal();
    g.throughput(Throughput::Elements(samples.len() as u64));
    g.sample_size(10);
    let w = (FS * 0.05) as u32;
    let plain = config(WindowPolicy::Frames(w), None);
    g.bench_function("chain_plain", |b| b.iter(|| run::<0>(&plain, &samples)));
    let profile = config(WindowPolicy::AfterFront { frames: w }, Some(0));
    g.bench_function("chain_station_profile", |b| {
        b.iter(|| run::<RING>(&profile, &samples))
    });
    let decay = config(WindowPolicy::AfterFront { frames: w }, Some(1));
    g.bench_function("chain_station_profile_decay", |b| {
        b.iter(|| run::<RING>(&decay, &samples))
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
