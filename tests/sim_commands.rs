//! Commands to the simulated device, driven step by step without a port: a re-learn keeps
//! the window grid, and SetLevels fixes one tip's levels (and refuses bad ones).
//!
//! The expectations follow the command rules of docs/wire-protocol.md, section 8 (an Ack
//! for a command carried out, a Nack `bad_argument` for arguments the device cannot use),
//! and the arithmetic of fixed-length windows: window k of a run spans frames
//! [k n, (k + 1) n).

use frothline_core::wire::{Body, Decoder, FeedResult, Frame, NackReason, SetLevels};
use frothline_core::{Flags, LevelSource, Polarity};
use frothline_host::live::device_sim::{SimCapture, SimDevice, SimOptions, THREAD_STACK};
use frothline_host::shared::commands::{Command, CommandLog};
use frothline_host::synth::Scenario;
use std::time::{Duration, Instant};

fn big_stack<F: FnOnce() + Send + 'static>(f: F) {
    let h = std::thread::Builder::new()
        .stack_size(THREAD_STACK)
        .spawn(f)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

/// The built-in steady scenario, 20 kHz, for `secs`, with 100 ms windows.
fn capture(secs: f64) -> SimCapture {
    let mut s = Scenario::builtin_default();
    s.duration_s = secs;
    s.sample_rate_hz = 20_000;
    SimCapture::from_scenario(&s, "100ms".parse().unwrap()).unwrap()
}

/// Step the device by `secs` of wall time in 10 ms steps from `t`, collecting its frames.
fn step(d: &mut SimDevice, t: &mut Instant, secs: f64, dec: &mut Decoder) -> Vec<Frame> {
    let mut frames = Vec::new();
    let mut out = Vec::new();
    for _ in 0..(secs / 0.01).round() as usize {
        *t += Duration::from_millis(10);
        d.advance(*t);
        out.clear();
        d.output(*t, &mut out);
        let mut rest = &out[..];
        while !rest.is_empty() {
            let r = dec.feed(rest);
            rest = r.remaining();
            if let FeedResult::Frame { frame, .. } = r {
                frames.push(frame);
            }
        }
    }
    frames
}

fn replies(frames: &[Frame]) -> Vec<(u16, Option<NackReason>)> {
    frames
        .iter()
        .filter_map(|f| match &f.body {
            Body::Ack(a) => Some((a.seq, None)),
            Body::Nack(n) => Some((n.seq, Some(n.reason))),
            _ => None,
        })
        .collect()
}

fn opts() -> SimOptions {
    SimOptions {
        baud: 0,
        ..SimOptions::default()
    }
}

#[test]
fn relearn_keeps_window_times_on_the_run_grid() {
    big_stack(|| {
        let t0 = Instant::now();
        let mut t = t0;
        let mut d = SimDevice::new(capture(1.0), opts(), t0).unwrap();
        let mut dec = Decoder::new();
        // 0.25 s into the run: the re-learn arrives in the middle of the third window.
        let mut frames = step(&mut d, &mut t, 0.25, &mut dec);
        let mut log = CommandLog::default();
        let (seq, bytes) = log.encode(&Command::Relearn(u32::MAX)).unwrap();
        d.input(&bytes, t);
        frames.extend(step(&mut d, &mut t, 1.0, &mut dec));
        assert_eq!(replies(&frames), vec![(seq, None)]);
        let n = 2_000u64; // 100 ms at 20 kHz
        let probe0: Vec<_> = frames
            .iter()
            .filter_map(|f| match &f.body {
                Body::Windows(w) => Some(w.iter().filter(|r| r.probe == 0).cloned()),
                _ => None,
            })
            .flatten()
            .collect();
        // Ten windows over 1 s, each on the grid, none cut short by the re-learn.
        assert_eq!(probe0.len(), 10, "{probe0:?}");
        for (k, r) in probe0.iter().enumerate() {
            assert_eq!((r.start, r.frames as u64), (k as u64 * n, n), "window {k}");
            assert_eq!(r.flags & Flags::PARTIAL_WINDOW.0, 0, "window {k}");
        }
        // The windows after the re-learn learn their levels again (flagged until learnt).
        let learning = Flags::LEVELS_NOT_LEARNT.0;
        assert_eq!(probe0[2].flags & learning, 0, "{:?}", probe0[2]);
        assert_ne!(probe0[3].flags & learning, 0, "{:?}", probe0[3]);
    });
}

#[test]
fn set_levels_fixes_one_tip_and_refuses_bad_levels() {
    big_stack(|| {
        let t0 = Instant::now();
        let mut t = t0;
        let cap = capture(0.5);
        let trailing = cap.config.probes[1].trailing.expect("a dual-tip probe");
        // A level pair in the tip's polarity.
        let (air, water) = match trailing.polarity {
            Polarity::AirHigh => (3000, -3000),
            _ => (-3000, 3000),
        };
        let mut d = SimDevice::new(cap, opts(), t0).unwrap();
        let mut dec = Decoder::new();
        step(&mut d, &mut t, 0.05, &mut dec);
        let before = d.tip_levels();
        let probes = before.len() as u8;
        let nudge = if air > water { 1 } else { -1 };
        let mut log = CommandLog::default();
        let mut send = |d: &mut SimDevice, l: SetLevels| {
            let (seq, b) = log.encode(&Command::SetLevels(l)).unwrap();
            d.input(&b, t);
            seq
        };
        let set = |probe, trailing, air, water| SetLevels {
            probe,
            trailing,
            air,
            water,
        };
        let good = send(&mut d, set(1, true, air - 7 * nudge, water + 5 * nudge));
        let no_probe = send(&mut d, set(probes, false, air, water));
        let equal = send(&mut d, set(1, true, air, air));
        let swapped = send(&mut d, set(1, true, water, air));
        let got = step(&mut d, &mut t, 0.05, &mut dec);
        assert_eq!(
            replies(&got),
            vec![
                (good, None),
                (no_probe, Some(NackReason::BadArgument)),
                (equal, Some(NackReason::BadArgument)),
                (swapped, Some(NackReason::BadArgument)),
            ]
        );
        let after = d.tip_levels();
        assert_eq!(
            after[1].1,
            Some(LevelSource::Fixed {
                air: air - 7 * nudge,
                water: water + 5 * nudge
            })
        );
        // Nothing else moved: the refused commands left their tips alone.
        for (p, (b, a)) in before.iter().zip(&after).enumerate() {
            if p != 1 {
                assert_eq!(b, a, "probe {p}");
            }
        }
        assert_eq!(
            before[1].0, after[1].0,
            "the leading tip of probe 1 kept its levels"
        );
        // The device keeps running and keeps sending windows.
        let later = step(&mut d, &mut t, 0.3, &mut dec);
        assert!(later.iter().any(|f| matches!(f.body, Body::Windows(_))));
        assert!(d.running());
    });
}
