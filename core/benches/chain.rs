//! Throughput of the chain, in channel-samples per second, on one core.
//!
//! Input: 16 channels at 40 kHz, 8 dual-tip probes in bubbly flow (void fraction about 0.3,
//! about 300 bubbles per second per tip, gamma chords, 3-sample ramps at the interfaces,
//! ADC noise), the trailing tips seeing the leading tips' bubbles about 3.3 ms later with a
//! 10 % transit-time spread; 2^19 frames (13 s, 16 MiB of samples) in memory.
//!
//! - `threshold_stats`: phase detection with fixed levels and tip statistics only (the 16
//!   channels as 16 single-tip probes: the same per-channel work without correlation);
//! - `full_chain_l256`: the 8 dual-tip probes with the correlation over 256 lag slots
//!   (`max_lag` 255), 50 ms windows;
//! - `full_chain_l256_1s_windows`: the same with 1 s windows.
//!
//! Run: `cargo bench -p frothline-core --bench chain -- --quick`.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use frothline_core::{
    Chain, ChainConfig, LevelSource, Polarity, ProbeConfig, TipConfig, WindowPolicy,
};
use rand::{rngs::StdRng, Rng, SeedableRng};
use rand_distr::{Distribution, Gamma, Normal};
use std::hint::black_box;

const FS: f64 = 40_000.0;
const FRAMES: usize = 1 << 19;
const CHANNELS: usize = 16;
const AIR: i16 = 24_000;
const WATER: i16 = 3_000;

/// One tip's air intervals (seconds): alternating gamma chords, C = 0.3, F = 300 Hz.
fn bubbles(rng: &mut StdRng, seconds: f64) -> Vec<(f64, f64)> {
    let (c, f, k) = (0.3, 300.0, 2.0);
    let ga = Gamma::new(k, c / f / k).unwrap();
    let gw = Gamma::new(k, (1.0 - c) / f / k).unwrap();
    let mut t = gw.sample(rng);
    let mut out = Vec::new();
    while t < seconds {
        let e = t + ga.sample(rng);
        out.push((t, e));
        t = e + gw.sample(rng);
    }
    out
}

/// Render intervals into counts: plateaux, 3-sample ramps, noise of 1 % of the swing.
fn render(intervals: &[(f64, f64)], rng: &mut StdRng) -> Vec<i16> {
    let mut x = vec![0f32; FRAMES];
    for &(s, e) in intervals {
        let (a, b) = ((s * FS) as usize, (e * FS) as usize);
        for (i, v) in x.iter_mut().enumerate().take(b.min(FRAMES)).skip(a) {
            let ramp = ((i - a + 1) as f32 / 3.0).min(((b - i) as f32 / 3.0).max(0.0));
            *v = v.max(ramp.min(1.0));
        }
    }
    let noise = Normal::new(0.0f32, 0.01).unwrap();
    x.iter()
        .map(|&p| {
            let p = p + noise.sample(rng);
            (WATER as f32 + p * (AIR - WATER) as f32) as i16
        })
        .collect()
}

fn signal() -> Vec<i16> {
    let mut rng = StdRng::seed_from_u64(1);
    let seconds = FRAMES as f64 / FS;
    let mut chans = Vec::new();
    for _ in 0..CHANNELS / 2 {
        let lead = bubbles(&mut rng, seconds);
        let delay = Normal::new(3.3e-3, 0.33e-3).unwrap();
        let trail: Vec<(f64, f64)> = lead
            .iter()
            .map(|&(s, e)| {
                let d: f64 = delay.sample(&mut rng);
                (s + d, e + d + rng.random_range(-2e-5..2e-5))
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

fn drain<const P: usize, const L: usize>(chain: &mut Chain<P, L>, samples: &[i16]) -> usize {
    let mut records = 0;
    let mut rest = samples;
    while !rest.is_empty() {
        let used = chain.push(rest);
        rest = &rest[used..];
        while let Some(r) = chain.poll() {
            black_box(&r);
            records += 1;
        }
    }
    while chain.finish().is_err() {
        while chain.poll().is_some() {
            records += 1;
        }
    }
    while chain.poll().is_some() {
        records += 1;
    }
    records
}

fn bench(c: &mut Criterion) {
    let samples = signal();
    let window = WindowPolicy::Frames((FS * 0.05) as u32);
    let mut g = c.benchmark_group("chain");
    g.throughput(Throughput::Elements(samples.len() as u64));
    g.sample_size(10);

    let mut single = ChainConfig::<16>::new(CHANNELS as u8, window);
    for ch in 0..CHANNELS {
        single.probes.push(ProbeConfig::single(tip(ch))).unwrap();
    }
    g.bench_function("threshold_stats", |b| {
        b.iter(|| {
            let mut chain = Chain::<16>::new(single.clone()).unwrap();
            black_box(drain(&mut chain, &samples))
        })
    });

    let mut dual = ChainConfig::<8>::new(CHANNELS as u8, window);
    for p in 0..CHANNELS / 2 {
        dual.probes
            .push(ProbeConfig::dual(tip(2 * p), tip(2 * p + 1), 255))
            .unwrap();
    }
    // Sanity: the correlation finds the 3.3 ms transit time (132 frames).
    {
        let mut chain = Chain::<8, 256>::new(dual.clone()).unwrap();
        chain.push(&samples[..CHANNELS * 40_000]);
        let r = chain.poll().unwrap();
        let lag = r.correlation.unwrap().peak_lag_frames.unwrap();
        assert!((lag - 132.0).abs() < 10.0, "lag {lag}");
    }
    g.bench_function("full_chain_l256", |b| {
        b.iter(|| {
            let mut chain = Chain::<8, 256>::new(dual.clone()).unwrap();
            black_box(drain(&mut chain, &samples))
        })
    });
    // The same with 1 s windows: the per-window O(L) work (coefficients, peak analysis)
    // shrinks 20-fold, what remains is the per-sample and per-interface cost.
    let mut long = dual.clone();
    long.window = WindowPolicy::Frames(FS as u32);
    g.bench_function("full_chain_l256_1s_windows", |b| {
        b.iter(|| {
            let mut chain = Chain::<8, 256>::new(long.clone()).unwrap();
            black_box(drain(&mut chain, &samples))
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
