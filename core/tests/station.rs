//! Checks of a station chain (front detection, front-relative windows, profile slices,
//! decay) on deterministic synthetic tip signals with a known front and a known profile.
//!
//! Each tip's signal is a phase sequence rendered at two fixed levels, so the phase
//! detector sees exactly the phases built here. After the front a tip alternates water and
//! air in cycles of `CYCLE` frames whose air share follows the power law
//! `C(y) = min(1, 0.9 (y/Y90)^n)` (DESIGN.md §1), distributed over the cycles so that
//! every slice of whole cycles holds the target void fraction to 1/slice-length.

use frothline_core::front::{FrontRule, StationFlags};
use frothline_core::station::{FrontRecord, ProfileRecord, StationConfig};
use frothline_core::{
    Chain, ChainConfig, ConfigError, Flags, LevelSource, Polarity, ProbeConfig, ProbeWindow,
    TipConfig, WindowPolicy,
};

const FS: f32 = 40_000.0;
const AIR: i16 = 20_000;
const WATER: i16 = 2_000;
/// Frames of one water/air cycle after the front (2.5 ms: a roller at 400 Hz).
const CYCLE: usize = 100;
/// Delay ring of the test chains, samples.
const RING: usize = 1 << 14;

/// Few lag slots (single-tip probes): keeps the chain small on a test thread's stack.
const LAGS: usize = 16;
type StationChain = Chain<12, LAGS, RING>;

fn ms(x: f64) -> usize {
    (x * FS as f64 / 1000.0).round() as usize
}

/// Phases of a tip: air (dry) before `front`, then from `front` on cycles of water then
/// air with air shares `c(cycle start)`; `None` for a dead tip (air throughout).
fn tip_phases(n: usize, front: Option<usize>, c: impl Fn(usize) -> f64) -> Vec<bool> {
    let mut p = vec![true; n];
    let Some(t0) = front else {
        return p;
    };
    // Bresenham distribution of the air frames over the cycles: exact running share.
    let mut air_done = 0.0f64;
    let mut owed = 0.0f64;
    let mut at = t0;
    while at < n {
        let share = c(at).clamp(0.0, 1.0);
        owed += share * CYCLE as f64;
        let air = (owed - air_done).round().clamp(0.0, CYCLE as f64) as usize;
        air_done += air as f64;
        let water = CYCLE - air;
        for x in p.iter_mut().skip(at).take(water) {
            *x = false;
        }
        at += CYCLE;
    }
    p
}

/// Interleave per-tip phase sequences as counts.
fn interleave(tips: &[Vec<bool>]) -> Vec<i16> {
    let n = tips[0].len();
    (0..n)
        .flat_map(|i| tips.iter().map(move |t| if t[i] { AIR } else { WATER }))
        .collect()
}

fn station_config(elevations: &[f32], window: WindowPolicy, before_air: bool) -> ChainConfig<12> {
    let mut c = ChainConfig::new(elevations.len() as u8, window);
    c.initial_air = before_air;
    let fixed = LevelSource::Fixed {
        air: AIR,
        water: WATER,
    };
    let mut st = StationConfig::new(FS, before_air);
    st.reference_depth_m = 0.1;
    for (i, &y) in elevations.iter().enumerate() {
        c.probes
            .push(ProbeConfig::single(TipConfig {
                channel: i as u8,
                polarity: Polarity::AirHigh,
                levels: fixed,
            }))
            .unwrap();
        st.elevations_mm.push(y).unwrap();
    }
    c.station = Some(st);
    c
}

#[derive(Debug, Default, PartialEq)]
struct Out {
    windows: Vec<ProbeWindow<LAGS>>,
    fronts: Vec<FrontRecord>,
    profiles: Vec<ProfileRecord>,
}

fn drain(chain: &mut StationChain, out: &mut Out) {
    while let Some(r) = chain.poll() {
        out.windows.push(r);
    }
    while let Some(r) = chain.poll_front() {
        out.fronts.push(r);
    }
    while let Some(r) = chain.poll_profile() {
        out.profiles.push(r);
    }
}

/// Run a station chain over `samples` pushed in blocks of `sizes` (cycled).
fn run(cfg: ChainConfig<12>, samples: &[i16], sizes: &[usize]) -> Out {
    let mut chain = StationChain::with_delay_ring(cfg).expect("valid config");
    let mut out = Out::default();
    let mut at = 0;
    let mut k = 0;
    while at < samples.len() {
        let end = (at + sizes[k % sizes.len()].max(1)).min(samples.len());
        k += 1;
        let mut block = &samples[at..end];
        while !block.is_empty() {
            let used = chain.push(block);
            block = &block[used..];
            drain(&mut chain, &mut out);
        }
        at = end;
    }
    while chain.finish().is_err() {
        drain(&mut chain, &mut out);
    }
    drain(&mut chain, &mut out);
    out
}

fn station(out: &Out) -> frothline_core::station::StationArrival {
    out.fronts
        .iter()
        .find_map(|f| match f {
            FrontRecord::Station(s) => Some(*s),
            _ => None,
        })
        .expect("one station record")
}

/// Ten probes 10 mm apart from 5 mm, a power-law profile with n = 0.6 and Y90 = 50 mm
/// (Cmean = 0.9/1.6 = 0.5625, DESIGN.md §1), front at 300 ms.
fn power_law_case(n_exp: f64, y90: f64, t0: usize, frames: usize) -> (Vec<f32>, Vec<i16>) {
    let ys: Vec<f32> = (0..10).map(|i| 5.0 + 10.0 * i as f32).collect();
    let tips: Vec<Vec<bool>> = ys
        .iter()
        .map(|&y| {
            let c = (0.9 * (y as f64 / y90).powf(n_exp)).min(1.0);
            tip_phases(frames, Some(t0), |_| c)
        })
        .collect();
    (ys, interleave(&tips))
}

/// The first window starts at the front's first interface (the frame the synthetic front
/// begins), and every later window follows on without gaps; before it one pre-front record.
#[test]
fn first_window_starts_exactly_at_the_arrival() {
    let t0 = ms(300.0) + 17;
    let (ys, samples) = power_law_case(0.6, 50.0, t0, ms(800.0));
    let w = ms(50.0) as u32;
    let out = run(
        station_config(&ys, WindowPolicy::AfterFront { frames: w }, true),
        &samples,
        &[samples.len()],
    );
    let s = station(&out);
    assert_eq!(s.front.arrival, Some(t0 as u64));
    assert_eq!(s.origin, Some(t0 as u64));
    let first: Vec<&ProbeWindow<LAGS>> = out.windows.iter().filter(|r| r.probe == 0).collect();
    assert_eq!(first[0].start, 0);
    assert_eq!(first[0].end, t0 as u64);
    assert!(first[0].flags.contains(Flags::PRE_FRONT));
    assert_eq!(first[0].since_front, Some(-(t0 as i64)));
    assert_eq!(first[1].start, t0 as u64);
    assert_eq!(first[1].since_front, Some(0));
    for pair in first[1..].windows(2) {
        assert_eq!(pair[0].end, pair[1].start);
        assert_eq!(
            pair[1].since_front,
            Some((pair[1].start - t0 as u64) as i64)
        );
        assert!(!pair[0].flags.contains(Flags::PRE_FRONT));
    }
    assert!(first.last().unwrap().flags.contains(Flags::PARTIAL_WINDOW));
    // One profile per window after the front.
    assert_eq!(out.profiles.len(), first.len() - 1);
    assert_eq!(out.profiles[0].since_front, 0);
    // Probe records: the probes below Y90 confirm; those at C = 1 never see water.
    let arrived: Vec<u8> = out
        .fronts
        .iter()
        .filter_map(|f| match f {
            FrontRecord::Probe(p) => Some(p.probe),
            _ => None,
        })
        .collect();
    assert!(arrived.len() >= 5, "{arrived:?}");
    assert!(out.fronts.iter().all(|f| match f {
        FrontRecord::Probe(p) => p.arrival == t0 as u64 && !p.late,
        _ => true,
    }));
}

/// Bubble-count windows in a station chain count from the front as fixed ones do: one
/// pre-front record ending at the arrival, then windows from the arrival frame on, each
/// holding exactly `count` bubbles of the reference tip (the window ends at the frame of
/// its last bubble's closing interface, the definition in `frothline_core::window`), the
/// same for any split of the samples into pushes. (Before, the first bubble window ran
/// from frame 0 across the front.) The synthetic tip closes one air chord per cycle, at
/// the end of each cycle's air part; the dry tip's air before the front closes at the
/// arrival frame itself and counts in the first window, as in a fixed window.
#[test]
fn bubble_count_windows_start_at_the_arrival() {
    let t0 = ms(300.0) + 17;
    let (ys, samples) = power_law_case(0.6, 50.0, t0, ms(800.0));
    let count = 20;
    let policy = WindowPolicy::Bubbles {
        count,
        probe: 0,
        max_frames: None,
    };
    let out = run(
        station_config(&ys, policy, true),
        &samples,
        &[samples.len()],
    );
    let split = run(
        station_config(&ys, policy, true),
        &samples,
        &[777, 3001, 64],
    );
    assert_eq!(out, split);
    let first: Vec<&ProbeWindow<LAGS>> = out.windows.iter().filter(|r| r.probe == 0).collect();
    assert_eq!(first[0].start, 0);
    assert_eq!(first[0].end, t0 as u64);
    assert!(first[0].flags.contains(Flags::PRE_FRONT));
    assert_eq!(first[1].start, t0 as u64);
    assert_eq!(first[1].since_front, Some(0));
    assert!(!first[1].flags.contains(Flags::PRE_FRONT));
    let full = &first[1..first.len() - 1];
    assert!(full.len() >= 5, "{} full windows", full.len());
    for (k, w) in full.iter().enumerate() {
        assert_eq!(w.lead.bubbles, count, "window {k}");
        // The n-th chord after the arrival closes at the first frame of cycle n, and the
        // window's last frame is that interface frame.
        let closes = (k + 1) * count as usize - 1;
        let end = t0 + closes * CYCLE + 1;
        assert_eq!(w.end, end as u64, "window {k}");
    }
    for pair in first[1..].windows(2) {
        assert_eq!(pair[0].end, pair[1].start);
    }
    // One profile slice per window after the front, the first one at the arrival.
    assert_eq!(out.profiles.len(), first.len() - 1);
    assert_eq!(out.profiles[0].since_front, 0);
}

/// Analytic profile (DESIGN.md §1): the power law C = 0.9 (y/Y90)^n integrates to
/// Cmean = 0.9/(1+n). Points 10 mm apart, exact void fractions: Y90 within one probe
/// spacing, Cmean within 0.02 (trapezoidal rule over 10 mm steps, linear bed band), n
/// within 10 % (the fit uses the interpolated Y90), the power law the better model.
#[test]
fn exact_power_law_profile_is_recovered_in_every_slice() {
    for (n_exp, y90) in [(0.6, 50.0), (1.0, 62.0), (2.0, 80.0)] {
        let t0 = ms(200.0);
        let (ys, samples) = power_law_case(n_exp, y90, t0, ms(600.0));
        let out = run(
            station_config(
                &ys,
                WindowPolicy::AfterFront {
                    frames: ms(50.0) as u32,
                },
                true,
            ),
            &samples,
            &[4093],
        );
        let cmean = 0.9 / (1.0 + n_exp);
        assert!(out.profiles.len() >= 7);
        for p in out.profiles.iter().filter(|p| !p.partial) {
            let f = &p.fit;
            let y = f.y90_mm.expect("Y90 inside the array") as f64;
            assert!((y - y90).abs() < 10.0, "n {n_exp}: Y90 {y} vs {y90}");
            let c = f.mean_void_fraction.unwrap() as f64;
            assert!((c - cmean).abs() < 0.02, "n {n_exp}: Cmean {c} vs {cmean}");
            let n = f.power_law.unwrap().exponent as f64;
            assert!((n - n_exp).abs() < 0.1 * n_exp, "n {n} vs {n_exp}");
            assert_eq!(p.dead, 0);
            assert_eq!(p.used.count_ones() as u8, f.points_used);
        }
        // The decay tracker holds one point per full slice, all near the constant Cmean:
        // no decay to speak of.
        let last = out
            .profiles
            .iter()
            .rev()
            .find(|p| p.decay.is_some())
            .unwrap();
        assert!(last.decay_points >= 7);
    }
}

/// A stray droplet on a dry tip 100 ms before the front (0.4 ms of water) is a false
/// start, not the arrival; and with tips wet before an air front, a stray bubble likewise.
#[test]
fn stray_droplet_or_bubble_before_the_front_does_not_trigger_it() {
    let t0 = ms(400.0);
    let (ys, samples) = power_law_case(0.6, 50.0, t0, ms(700.0));
    let mut with_stray = samples.clone();
    let ch = ys.len();
    for i in ms(300.0)..ms(300.4) {
        with_stray[i * ch] = WATER;
    }
    let cfg = station_config(&ys, WindowPolicy::AfterFront { frames: 2000 }, true);
    let out = run(cfg, &with_stray, &[777]);
    assert_eq!(station(&out).front.arrival, Some(t0 as u64));
    let p0 = out
        .fronts
        .iter()
        .find_map(|f| match f {
            FrontRecord::Probe(p) if p.probe == 0 => Some(*p),
            _ => None,
        })
        .unwrap();
    assert_eq!(p0.false_starts, 1);

    // Wet before the front (phase before = water): the inverted signal, a stray bubble.
    let inverted: Vec<i16> = with_stray
        .iter()
        .map(|&x| if x == AIR { WATER } else { AIR })
        .collect();
    let cfg = station_config(&ys, WindowPolicy::AfterFront { frames: 2000 }, false);
    let out = run(cfg, &inverted, &[1000]);
    assert_eq!(station(&out).front.arrival, Some(t0 as u64));
}

/// A dead probe (tip stuck in air) low in the array: the station still finds the front
/// from the others, flags the probe silent, and the profile leaves it out (a tip above it
/// was reached by the water), so the fit is the one without it.
#[test]
fn dead_probe_is_flagged_and_left_out_of_the_profile() {
    let t0 = ms(250.0);
    let frames = ms(600.0);
    let ys: Vec<f32> = (0..10).map(|i| 5.0 + 10.0 * i as f32).collect();
    let dead = 2;
    let tips: Vec<Vec<bool>> = ys
        .iter()
        .enumerate()
        .map(|(i, &y)| {
            let c = (0.9 * (y as f64 / 50.0).powf(0.6)).min(1.0);
            tip_phases(frames, (i != dead).then_some(t0), |_| c)
        })
        .collect();
    let samples = interleave(&tips);
    let out = run(
        station_config(&ys, WindowPolicy::AfterFront { frames: 2000 }, true),
        &samples,
        &[3000],
    );
    let s = station(&out);
    assert_eq!(s.front.arrival, Some(t0 as u64));
    assert_ne!(s.front.silent & (1 << dead), 0);
    assert!(s.front.flags.contains(StationFlags::SILENT_PROBE));
    // Dead: silent while a probe above it was reached. The silent probes above Y90 (C = 1,
    // above the flow) are not dead.
    assert_eq!(s.dead, 1 << dead);
    assert_ne!(s.front.silent & (1 << 9), 0);
    assert!(out.profiles.len() > 5);
    for p in &out.profiles {
        // Every slice (50 ms) ends more than the rule's 20 ms after the probes above the
        // dead one were reached.
        assert_eq!(p.dead, 1 << dead, "slice {}", p.slice);
        assert_eq!(p.used & (1 << dead), 0);
        let c = p.fit.mean_void_fraction.unwrap();
        assert!((c - 0.5625).abs() < 0.02, "Cmean {c}");
    }
    // The probes above Y90 (C = 1, never wet) are above the flow, not dead.
    let top = out.profiles.last().unwrap();
    assert_ne!(top.used & (1 << 9), 0);
}

/// No front at all: one pre-front record per probe (not partial), no profile, a station
/// record saying no arrival.
#[test]
fn a_record_without_a_front_gives_one_pre_front_record() {
    let ys = [5.0f32, 15.0, 25.0];
    let tips: Vec<Vec<bool>> = ys.iter().map(|_| vec![true; 20_000]).collect();
    let out = run(
        station_config(&ys, WindowPolicy::AfterFront { frames: 2000 }, true),
        &interleave(&tips),
        &[999],
    );
    assert_eq!(out.windows.len(), 3);
    for r in &out.windows {
        assert!(r.flags.contains(Flags::PRE_FRONT));
        assert!(!r.flags.contains(Flags::PARTIAL_WINDOW));
        assert_eq!(r.since_front, None);
        assert_eq!((r.start, r.end), (0, 20_000));
    }
    assert!(out.profiles.is_empty());
    let s = station(&out);
    assert!(s.front.flags.contains(StationFlags::NO_ARRIVAL));
    assert_eq!(s.front.silent, 0b111);
}

/// A front at frame 0 leaves no pre-front record; windows start at 0.
#[test]
fn a_front_at_frame_zero_has_no_pre_front_record() {
    let (ys, samples) = power_law_case(1.0, 60.0, 0, ms(200.0));
    let out = run(
        station_config(&ys, WindowPolicy::AfterFront { frames: 2000 }, true),
        &samples,
        &[samples.len()],
    );
    assert_eq!(station(&out).front.arrival, Some(0));
    assert!(out
        .windows
        .iter()
        .all(|r| !r.flags.contains(Flags::PRE_FRONT)));
    assert_eq!(out.windows[0].start, 0);
    assert_eq!(out.windows[0].since_front, Some(0));
}

/// A tip that flickers for longer than the delay line before its front is confirmed: the
/// windows start at `confirmed_at - delay` (flagged late), `since_front` counts from the
/// true arrival.
#[test]
fn a_confirmation_later_than_the_delay_starts_late_and_says_so() {
    let frames = ms(500.0);
    let t0 = ms(100.0);
    // Water excursions of 4.5 ms every 8.9 ms (returns to air of 4.4 ms, shorter than the
    // 5 ms settle time: one change that never holds 5 ms; the burst rule is off) for
    // 150 ms, then water for good.
    let mut p = vec![true; frames];
    let mut at = t0;
    while at < t0 + ms(150.0) {
        for x in p.iter_mut().skip(at).take(ms(4.5)) {
            *x = false;
        }
        at += ms(8.9);
    }
    for x in p.iter_mut().skip(at) {
        *x = false;
    }
    let mut cfg = station_config(&[5.0], WindowPolicy::AfterFront { frames: 2000 }, true);
    let delay = cfg.station.as_ref().unwrap().delay_frames as u64;
    cfg.station.as_mut().unwrap().front.burst_interfaces = 0;
    let out = run(cfg, &interleave(&[p]), &[1234]);
    let probe = out
        .fronts
        .iter()
        .find_map(|f| match f {
            FrontRecord::Probe(p) => Some(*p),
            _ => None,
        })
        .unwrap();
    assert_eq!(probe.rule, FrontRule::Hold);
    assert_eq!(probe.arrival, t0 as u64);
    assert!(probe.confirmed_at - probe.arrival > delay);
    let s = station(&out);
    assert_eq!(s.front.arrival, Some(t0 as u64));
    let origin = probe.confirmed_at - delay;
    assert_eq!(s.origin, Some(origin));
    let first = &out.windows[1];
    assert_eq!(first.start, origin);
    assert!(first.flags.contains(Flags::LATE_FRONT_START));
    assert_eq!(first.since_front, Some((origin - t0 as u64) as i64));
}

/// The delay line changes when the statistics run, never what they are: a station chain
/// with fixed windows gives the records of a chain without a station (since_front aside).
#[test]
fn the_delay_line_does_not_change_the_statistics() {
    let (ys, samples) = power_law_case(0.8, 55.0, ms(123.0), ms(400.0));
    let window = WindowPolicy::Frames(1500);
    let with = run(station_config(&ys, window, true), &samples, &[2500, 7]);
    let mut plain_cfg = station_config(&ys, window, true);
    plain_cfg.station = None;
    let mut plain = Chain::<12, LAGS>::new(plain_cfg).unwrap();
    let mut recs = Vec::new();
    let mut rest = &samples[..];
    while !rest.is_empty() {
        let used = plain.push(rest);
        rest = &rest[used..];
        while let Some(r) = plain.poll() {
            recs.push(r);
        }
    }
    while plain.finish().is_err() {
        while let Some(r) = plain.poll() {
            recs.push(r);
        }
    }
    while let Some(r) = plain.poll() {
        recs.push(r);
    }
    assert_eq!(with.windows.len(), recs.len());
    for (a, b) in with.windows.iter().zip(&recs) {
        let mut a = a.clone();
        // Windows that closed after the front have since_front; earlier ones do not.
        assert_eq!(
            a.since_front.is_some(),
            a.end >= ms(123.0) as u64,
            "{}",
            a.start
        );
        a.since_front = None;
        assert_eq!(&a, b);
    }
    // Fixed windows after the arrival still give profile slices.
    assert!(with.profiles.iter().all(|p| p.since_front >= 0));
    assert!(!with.profiles.is_empty());
}

/// Configuration errors are reported, not panics.
#[test]
fn station_configuration_errors() {
    let ys = [5.0f32, 15.0];
    let mut cfg = station_config(&ys, WindowPolicy::AfterFront { frames: 100 }, true);
    cfg.station.as_mut().unwrap().elevations_mm.pop();
    assert_eq!(
        StationChain::with_delay_ring(cfg).err(),
        Some(ConfigError::BadStation)
    );
    let mut cfg = station_config(&ys, WindowPolicy::AfterFront { frames: 100 }, true);
    cfg.station = None;
    assert_eq!(
        StationChain::with_delay_ring(cfg).err(),
        Some(ConfigError::BadWindow)
    );
    let cfg = station_config(&ys, WindowPolicy::AfterFront { frames: 100 }, true);
    let need = (cfg.station.as_ref().unwrap().delay_frames + 1) * 2;
    assert_eq!(
        Chain::<12, LAGS>::new(cfg).err(),
        Some(ConfigError::DelayRingTooSmall { need })
    );
}
