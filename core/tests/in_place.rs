//! Chains built in place ([`GenericChain::empty`] + [`GenericChain::configure`]) against
//! chains built by value ([`Chain::new`], [`Chain::with_delay_ring`]), re-configured chains
//! against fresh ones, and lean chains ([`LeanChain`], no raw sums in the records) against
//! full ones: the records must be the same, bit for bit (the lean chain's without their
//! sums). The samples are synthetic: plateaux of random lengths at two levels per tip, a
//! trailing tip that sees its leading tip's signal a few frames later, and for the station
//! chains a front that reaches each probe at its own frame.

use core::mem::size_of;
use frothline_core::station::{FrontRecord, ProfileRecord, StationConfig};
use frothline_core::{
    Chain, ChainConfig, ConfigError, CorrelationSums, GenericChain, LeanChain, LevelSource,
    Polarity, ProbeConfig, ProbeWindow, TipConfig, WindowPolicy,
};
use rand::{rngs::StdRng, Rng, SeedableRng};
use std::sync::Mutex;

const FS: f32 = 40_000.0;
const AIR: i16 = 20_000;
const WATER: i16 = 2_000;
const LAGS: usize = 64;
const RING: usize = 16_384;
/// The trailing tips see their leading tip's signal this many frames later.
const TRANSIT: usize = 7;

type Steady = Chain<4, LAGS>;
type Station = Chain<4, LAGS, RING>;
type LeanStation = GenericChain<4, LAGS, RING, 0, 1>;
/// Chains that queue one record (the rest of a window's records built as they are polled).
type ShallowStation = GenericChain<4, LAGS, RING, 4, 1, 1>;
type ShallowLean = GenericChain<4, LAGS, 0, 0, 0, 1>;

/// Everything a chain gives.
#[derive(Debug, Default, PartialEq)]
struct Out {
    windows: Vec<ProbeWindow<LAGS>>,
    fronts: Vec<FrontRecord>,
    profiles: Vec<ProfileRecord>,
}

impl Out {
    /// The same records without their raw correlation sums.
    fn without_sums(mut self) -> Self {
        for w in &mut self.windows {
            w.correlation_sums = None;
        }
        self
    }
}

/// Plateaux of random lengths (20..400 frames) alternating between air and water.
fn plateaux(rng: &mut StdRng, frames: usize) -> Vec<i16> {
    let mut out = Vec::with_capacity(frames);
    let mut air = rng.random::<bool>();
    while out.len() < frames {
        let len = rng.random_range(20..400);
        let noise = rng.random_range(-300i16..300);
        let level = if air { AIR } else { WATER } + noise;
        out.extend(std::iter::repeat_n(level, len.min(frames - out.len())));
        air = !air;
    }
    out
}

/// `channels` interleaved channels: probe 0 reads 0 (leading) and 1 (trailing), probe 1
/// reads 2 (leading) and 3 (trailing), probe 2 reads 4; channels beyond are noise no tip
/// reads. With `fronts`, each probe's tips are dry (air) until its front.
fn signal(seed: u64, frames: usize, channels: usize, fronts: Option<[usize; 3]>) -> Vec<i16> {
    let mut rng = StdRng::seed_from_u64(seed);
    let mut chans: Vec<Vec<i16>> = (0..channels).map(|_| plateaux(&mut rng, frames)).collect();
    if let Some(fronts) = fronts {
        for (c, probe) in [(0, 0), (2, 1), (4, 2)] {
            for x in chans[c].iter_mut().take(fronts[probe].min(frames)) {
                *x = AIR;
            }
        }
    }
    for (lead, trail) in [(0, 1), (2, 3)] {
        let delayed: Vec<i16> = (0..frames)
            .map(|i| match i.checked_sub(TRANSIT) {
                Some(j) => chans[lead][j],
                None if fronts.is_some() => AIR,
                None => WATER,
            })
            .collect();
        chans[trail] = delayed;
    }
    (0..frames)
        .flat_map(|i| chans.iter().map(move |ch| ch[i]))
        .collect()
}

fn tip(channel: u8, levels: LevelSource) -> TipConfig {
    TipConfig {
        channel,
        polarity: Polarity::AirHigh,
        levels,
    }
}

/// Two dual-tip probes (learnt levels, one with `max_lag` beyond the chain's lags) and a
/// single-tip probe with fixed levels.
fn steady_config(channels: u8, window: WindowPolicy) -> ChainConfig<4> {
    let mut c = ChainConfig::new(channels, window);
    c.detector.learn_period = 2048;
    let fixed = LevelSource::Fixed {
        air: AIR,
        water: WATER,
    };
    let learnt = LevelSource::Learnt;
    c.probes
        .push(ProbeConfig::dual(tip(0, learnt), tip(1, learnt), 40))
        .unwrap();
    c.probes
        .push(ProbeConfig::dual(tip(2, fixed), tip(3, learnt), 500))
        .unwrap();
    c.probes.push(ProbeConfig::single(tip(4, fixed))).unwrap();
    c
}

/// The steady configuration as one station, tips dry before the front.
fn station_config(channels: u8, window: WindowPolicy) -> ChainConfig<4> {
    let mut c = steady_config(channels, window);
    c.initial_air = true;
    let mut st = StationConfig::new(FS, true);
    st.grace_frames = 1500;
    for y in [10.0, 30.0, 20.0] {
        st.elevations_mm.push(y).unwrap();
    }
    c.station = Some(st);
    c
}

/// Push `samples` in blocks of `sizes` (cycled), draining every queue after each push,
/// then finish.
fn run<const P: usize, const D: usize, const S: usize, const T: usize, const Q: usize>(
    chain: &mut GenericChain<P, LAGS, D, S, T, Q>,
    samples: &[i16],
    sizes: &[usize],
) -> Out {
    let mut out = Out::default();
    let drain = |chain: &mut GenericChain<P, LAGS, D, S, T, Q>, out: &mut Out| {
        while let Some(r) = chain.poll() {
            out.windows.push(r);
        }
        while let Some(r) = chain.poll_front() {
            out.fronts.push(r);
        }
        while let Some(r) = chain.poll_profile() {
            out.profiles.push(r);
        }
    };
    let mut at = 0;
    let mut k = 0;
    while at < samples.len() {
        let end = (at + sizes[k % sizes.len()].max(1)).min(samples.len());
        k += 1;
        let mut block = &samples[at..end];
        while !block.is_empty() {
            let used = chain.push(block);
            block = &block[used..];
            drain(chain, &mut out);
        }
        at = end;
    }
    while chain.finish().is_err() {
        drain(chain, &mut out);
    }
    drain(chain, &mut out);
    out
}

/// Run half of `samples` through `chain` without draining or finishing: the chain is left
/// with queued records, a partial frame and state mid-window.
fn use_partly<const P: usize, const D: usize, const S: usize, const T: usize>(
    chain: &mut GenericChain<P, LAGS, D, S, T>,
    samples: &[i16],
) {
    let half = samples.len() / 2 + 3;
    let _ = chain.push(&samples[..half]);
}

const SIZES: [usize; 5] = [1, 4093, 77, 16_000, 5];

fn windows() -> [WindowPolicy; 3] {
    [
        WindowPolicy::Frames(1500),
        WindowPolicy::Bubbles {
            count: 25,
            probe: 0,
            max_frames: Some(5000),
        },
        WindowPolicy::Whole,
    ]
}

/// Both paths of the chain: 6 channels run tip by tip (with the shared run buffer), 8
/// channels frame-major on 64-bit hosts.
const CHANNELS: [u8; 2] = [6, 8];

#[test]
fn a_chain_configured_in_place_gives_the_records_of_new() {
    for channels in CHANNELS {
        let samples = signal(1, 20_000, channels as usize, None);
        for window in windows() {
            let cfg = steady_config(channels, window);
            let mut by_value = Steady::new(cfg.clone()).unwrap();
            let want = run(&mut by_value, &samples, &SIZES);
            assert!(want
                .windows
                .iter()
                .any(|w| w.correlation.is_some_and(|c| c.peak_lag_frames.is_some())));
            assert!(want
                .windows
                .iter()
                .all(|w| w.correlation_sums.is_some() == (w.probe < 2)));
            let mut in_place = Box::new(Steady::empty());
            in_place.configure(cfg).unwrap();
            assert_eq!(run(&mut *in_place, &samples, &SIZES), want, "{window:?}");
        }
    }
}

#[test]
fn a_station_chain_configured_in_place_gives_the_records_of_with_delay_ring() {
    for channels in CHANNELS {
        let samples = signal(2, 24_000, channels as usize, Some([6000, 9000, 7500]));
        for window in [
            WindowPolicy::AfterFront { frames: 1200 },
            WindowPolicy::Frames(2000),
        ] {
            let cfg = station_config(channels, window);
            let mut by_value = Box::new(Station::with_delay_ring(cfg.clone()).unwrap());
            let want = run(&mut *by_value, &samples, &SIZES);
            assert!(want
                .fronts
                .iter()
                .any(|f| matches!(f, FrontRecord::Station(_))));
            assert!(!want.profiles.is_empty());
            let mut in_place = Box::new(Station::empty());
            in_place.configure(cfg).unwrap();
            assert_eq!(run(&mut *in_place, &samples, &SIZES), want, "{window:?}");
        }
    }
}

#[test]
fn a_reconfigured_chain_gives_the_records_of_a_fresh_one() {
    let channels = 6;
    let steady = signal(3, 20_000, channels, None);
    let surge = signal(4, 24_000, channels, Some([5000, 8000, 6500]));
    let station_cfg = station_config(channels as u8, WindowPolicy::AfterFront { frames: 1000 });
    let steady_cfg = steady_config(channels as u8, WindowPolicy::Frames(1200));
    let fresh_station = run(
        &mut *Box::new(Station::with_delay_ring(station_cfg.clone()).unwrap()),
        &surge,
        &SIZES,
    );
    let fresh_steady = run(
        &mut *Box::new(Station::with_delay_ring(steady_cfg.clone()).unwrap()),
        &steady,
        &SIZES,
    );

    let mut chain = Box::new(Station::empty());
    // Used mid-record (queued records, a partial frame, a station mid-front), then
    // configured again.
    chain.configure(station_cfg.clone()).unwrap();
    use_partly(&mut *chain, &surge);
    assert!(chain.pending_samples() > 0 || chain.frames() > 0);
    chain.configure(station_cfg.clone()).unwrap();
    assert_eq!((chain.frames(), chain.pending_samples()), (0, 0));
    assert_eq!(run(&mut *chain, &surge, &SIZES), fresh_station);
    // Finished, then configured for a steady record (the station goes), then for the
    // station again.
    chain.configure(steady_cfg.clone()).unwrap();
    assert_eq!(chain.arrival(), None);
    assert_eq!(run(&mut *chain, &steady, &SIZES), fresh_steady);
    use_partly(&mut *chain, &steady);
    chain.configure(station_cfg).unwrap();
    assert_eq!(run(&mut *chain, &surge, &SIZES), fresh_station);
}

#[test]
fn lean_chains_give_the_records_without_their_sums() {
    for channels in CHANNELS {
        let samples = signal(5, 20_000, channels as usize, None);
        for window in windows() {
            let cfg = steady_config(channels, window);
            let full = run(&mut Steady::new(cfg.clone()).unwrap(), &samples, &SIZES);
            let mut lean = Box::new(LeanChain::<4, LAGS>::empty());
            lean.configure(cfg).unwrap();
            let got = run(&mut *lean, &samples, &SIZES);
            assert!(got.windows.iter().all(|w| w.correlation_sums.is_none()));
            assert_eq!(got, full.without_sums(), "{window:?}");
        }
        let surge = signal(6, 24_000, channels as usize, Some([6000, 9000, 7500]));
        let cfg = station_config(channels, WindowPolicy::AfterFront { frames: 1200 });
        let full = run(
            &mut *Box::new(Station::with_delay_ring(cfg.clone()).unwrap()),
            &surge,
            &SIZES,
        );
        let mut lean = Box::new(LeanStation::with_delay_ring(cfg).unwrap());
        assert_eq!(run(&mut *lean, &surge, &SIZES), full.without_sums());
    }
}

#[test]
fn poll_lean_gives_the_records_of_poll_without_their_sums() {
    // A chain that keeps the sums: poll_lean must give them up in step with the queue.
    let samples = signal(8, 20_000, 6, None);
    let cfg = steady_config(6, WindowPolicy::Frames(1500));
    let mut a = Steady::new(cfg.clone()).unwrap();
    let mut b = Steady::new(cfg).unwrap();
    let (mut full, mut lean) = (Vec::new(), Vec::new());
    for block in samples.chunks(777) {
        let mut rest = block;
        while !rest.is_empty() {
            let used = a.push(rest);
            rest = &rest[used..];
            while let Some(r) = a.poll() {
                full.push(r.without_sums::<1>());
            }
        }
        let mut rest = block;
        while !rest.is_empty() {
            let used = b.push(rest);
            rest = &rest[used..];
            while let Some(r) = b.poll_lean() {
                lean.push(r);
            }
        }
    }
    assert!(full.iter().any(|r| r.correlation.is_some()));
    assert_eq!(lean, full);
    // poll_lean_with lends the same records where they lie (a record type of no lag slots).
    let mut c = Steady::new(steady_config(6, WindowPolicy::Frames(1500))).unwrap();
    let mut lent = Vec::new();
    for block in samples.chunks(777) {
        let mut rest = block;
        while !rest.is_empty() {
            let used = c.push(rest);
            rest = &rest[used..];
            while c
                .poll_lean_with(|r| lent.push(r.without_sums::<1>()))
                .is_some()
            {}
        }
    }
    assert_eq!(lent, full);
}

#[test]
fn an_empty_chain_takes_nothing_and_a_bad_configuration_leaves_it_as_it_was() {
    // A static chain: `empty` is a const fn.
    static CHAIN: Mutex<LeanChain<4, LAGS>> = Mutex::new(LeanChain::empty());
    let mut chain = CHAIN.lock().unwrap();
    let samples = signal(7, 3000, 6, None);
    assert_eq!(chain.push(&samples), 0);
    assert!(chain.poll().is_none());
    assert!(chain.poll_front().is_none());
    assert_eq!(chain.max_lag(0), None);
    assert!(chain.config().probes.is_empty());
    assert!(chain.config().validate().is_err());

    let mut bad = steady_config(6, WindowPolicy::Frames(500));
    bad.detector.threshold = 1.5;
    assert_eq!(chain.configure(bad), Err(ConfigError::BadThreshold));
    assert_eq!(chain.push(&samples), 0);
    // A lean chain has no delay ring, so no station.
    let station = station_config(6, WindowPolicy::Frames(500));
    assert!(matches!(
        chain.configure(station.clone()),
        Err(ConfigError::DelayRingTooSmall { .. })
    ));
    // ... nor does a chain with a ring and no station slot.
    let mut no_slot = Box::new(GenericChain::<4, LAGS, RING, 4, 0>::empty());
    assert_eq!(no_slot.configure(station), Err(ConfigError::BadStation));

    let good = steady_config(6, WindowPolicy::Frames(500));
    chain.configure(good.clone()).unwrap();
    let want = run(&mut Steady::new(good.clone()).unwrap(), &samples, &SIZES);
    assert_eq!(run(&mut *chain, &samples, &SIZES), want.without_sums());
    // A bad configuration leaves a configured chain configured.
    assert_eq!(
        chain.configure(ChainConfig::new(6, WindowPolicy::Whole)),
        Err(ConfigError::NoProbes)
    );
    assert_eq!(chain.config(), &good);
}

/// The memory of the firmware's chain shape (8 dual-tip probes, 64 lags), printed
/// (`cargo test -p frothline-core --test in_place -- --nocapture`): a lean chain holds
/// no sums (28 L bytes per record) and no station.
#[test]
fn memory_of_the_chains() {
    let full = size_of::<Chain<8, 64>>();
    let lean = size_of::<LeanChain<8, 64>>();
    let record = size_of::<ProbeWindow<64>>();
    let sums = size_of::<CorrelationSums<64>>();
    let correlator = size_of::<frothline_core::Correlator<64>>();
    let run_buffer = size_of::<frothline_core::RunBuffer>();
    println!(
        "Chain<8, 64> {full} B, LeanChain<8, 64> {lean} B, ProbeWindow<64> {record} B \
         (sums {sums} B), Correlator<64> {correlator} B, RunBuffer {run_buffer} B (one per chain)"
    );
    assert!(lean + 8 * sums <= full);
    // The correlator holds no run buffer of its own.
    assert!(correlator < 40 * 64);
}

/// A chain whose queue holds one record builds a window's records as they are polled: the
/// records, fronts and profiles are those of a chain that queues a whole window, bit for bit,
/// whatever the block sizes (also blocks of one sample, and a finish with records to build).
#[test]
fn a_chain_that_queues_one_record_gives_the_records_of_a_full_queue() {
    for channels in CHANNELS {
        let samples = signal(5, 20_000, channels as usize, None);
        for window in windows() {
            let cfg = steady_config(channels, window);
            let want = run(&mut Steady::new(cfg.clone()).unwrap(), &samples, &SIZES);
            assert!(!want.windows.is_empty(), "{window:?}");
            let mut shallow = Box::new(ShallowLean::empty());
            shallow.configure(cfg.clone()).unwrap();
            let got = run(&mut *shallow, &samples, &SIZES);
            assert_eq!(got, want.without_sums(), "{window:?}");
        }
        let samples = signal(6, 24_000, channels as usize, Some([6000, 9000, 7500]));
        for window in [
            WindowPolicy::AfterFront { frames: 1200 },
            WindowPolicy::Frames(2000),
        ] {
            let cfg = station_config(channels, window);
            let want = run(
                &mut *Box::new(Station::with_delay_ring(cfg.clone()).unwrap()),
                &samples,
                &SIZES,
            );
            assert!(!want.profiles.is_empty());
            let mut shallow = Box::new(ShallowStation::empty());
            shallow.configure(cfg).unwrap();
            assert_eq!(
                run(&mut *shallow, &samples, &[1, 700, 3]),
                want,
                "{window:?}"
            );
        }
    }
}

/// A one-record queue applies back-pressure at each window end: `push` stops there with
/// one record waiting, and goes on once it is polled.
#[test]
fn a_one_record_queue_stops_push_until_polled() {
    let channels = 6;
    let samples = signal(7, 6_000, channels, None);
    let mut chain = Box::new(ShallowLean::empty());
    chain
        .configure(steady_config(channels as u8, WindowPolicy::Frames(1500)))
        .unwrap();
    let used = chain.push(&samples);
    assert_eq!(used, 1500 * channels, "push stops at the first window end");
    assert_eq!(chain.push(&samples[used..]), 0, "nothing more until polled");
    let first = chain.poll().unwrap();
    assert_eq!((first.probe, first.end), (0, 1500));
    assert_eq!(
        chain.push(&samples[used..]),
        0,
        "the window's next record waits"
    );
    let mut probes = vec![first.probe];
    while let Some(r) = chain.poll() {
        probes.push(r.probe);
    }
    assert_eq!(probes, (0..probes.len() as u8).collect::<Vec<_>>());
    assert!(probes.len() > 1);
    assert!(chain.push(&samples[used..]) > 0);
}
