use super::*;
use crate::shared::commands::{Command, CommandLog};
use frothline_core::wire::{Decoder, FeedResult, Frame, Kind, MAX_FRAME_BYTES};

fn big_stack<F: FnOnce() + Send + 'static>(f: F) {
    let h = std::thread::Builder::new()
        .stack_size(THREAD_STACK)
        .spawn(f)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

fn capture() -> SimCapture {
    let mut s = crate::shared::synthetic::Scenario::builtin_default();
    s.duration_s = 0.5;
    s.sample_rate_hz = 20_000;
    s.replicate(2);
    SimCapture::from_scenario(&s, "100ms".parse().unwrap()).unwrap()
}

/// Step the device by `secs` of wall time (in 10 ms steps from `t`), collecting frames.
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

#[test]
fn commands_are_answered_and_bad_ones_refused() {
    big_stack(|| {
        let t0 = Instant::now();
        let mut t = t0;
        let opts = SimOptions {
            autostart: false,
            baud: 0,
            ..SimOptions::default()
        };
        let mut d = SimDevice::new(capture(), opts, t0).unwrap();
        let mut dec: Decoder = Decoder::new();
        let first = step(&mut d, &mut t, 0.05, &mut dec);
        assert!(
            matches!(first[0].body, Body::Describe(_)),
            "describe at power on"
        );
        assert!(first.iter().any(|f| matches!(f.body, Body::Health(_))));
        let mut log = CommandLog::default();
        let last_sent = std::cell::RefCell::new(Vec::new());
        let mut send = |d: &mut SimDevice, c: Command| {
            let (seq, b) = log.encode(&c).unwrap();
            d.input(&b, t0);
            *last_sent.borrow_mut() = b;
            seq
        };
        // Not running yet: StopRun is refused.
        let s_stop = send(&mut d, Command::StopRun);
        // A zero-length window, and a re-learn of no probe, are bad arguments.
        let s_zero = send(&mut d, Command::SetWindow(WindowSetting::Frames(0)));
        let s_mask = send(&mut d, Command::Relearn(1 << 20));
        let s_desc = send(&mut d, Command::DescribeRequest);
        let s_start = send(&mut d, Command::StartRun("t".into()));
        // The same StartRun frame again (a host retrying): acked, not run again.
        let again = last_sent.borrow().clone();
        d.input(&again, t0);
        // A new StartRun during the run: already running, the run goes on.
        let s_second = send(&mut d, Command::StartRun("u".into()));
        let got = step(&mut d, &mut t, 0.05, &mut dec);
        assert_eq!(
            replies(&got),
            vec![
                (s_stop, Some(NackReason::NotRunning)),
                (s_zero, Some(NackReason::BadArgument)),
                (s_mask, Some(NackReason::BadArgument)),
                (s_desc, None),
                (s_start, None),
                (s_start, None),
                (s_second, Some(NackReason::AlreadyRunning)),
            ]
        );
        // One RunStart, before the Ack of its StartRun, labelled and dated by the host.
        let runs: Vec<(usize, &RunStart)> = got
            .iter()
            .enumerate()
            .filter_map(|(i, f)| match &f.body {
                Body::RunStart(r) => Some((i, r)),
                _ => None,
            })
            .collect();
        assert_eq!(runs.len(), 1, "{got:?}");
        let (at, run) = runs[0];
        assert_eq!((run.run, run.label.as_str()), (1, "t"));
        assert!(run.utc_ms.is_some_and(|ms| ms > 1_700_000_000_000));
        let ack_at = got
            .iter()
            .position(|f| matches!(&f.body, Body::Ack(a) if a.seq == s_start))
            .unwrap();
        assert!(at < ack_at);
        assert!(got.iter().any(|f| matches!(f.body, Body::Describe(_))));
        assert!(d.running());
        assert_eq!(d.stats().runs, 1);
        assert_eq!(d.stats().repeats, 1);

        // A frame of a device kind from the host id, a frame of an unknown kind, a
        // frame of version 1, a payload that does not parse, the device's own frame
        // echoed back (ignored), and line noise (unanswered).
        let mut buf = [0u8; MAX_FRAME_BYTES];
        let ack = Frame {
            device: 0xFFFF,
            seq: 900,
            body: Body::Ack(frothline_core::wire::Ack { seq: 1 }),
        };
        d.input(frothline_core::wire::encode(&ack, &mut buf).unwrap(), t);
        let raw = |payload: &[u8]| {
            let mut p = payload.to_vec();
            p.extend_from_slice(&frothline_core::wire::crc32(payload).to_le_bytes());
            cobs(&p)
        };
        d.input(&raw(&[2, 0xFF, 0xFF, 0x03, 0x7E, 0x85, 0x07]), t); // kind 0x7E, seq 901
        d.input(&raw(&[1, 0xFF, 0xFF, 0x03, 0x21, 0x86, 0x07]), t); // version 1, seq 902
        let set_window = Kind::SetWindow.code();
        d.input(&raw(&[2, 0xFF, 0xFF, 0x03, set_window, 0x87, 0x07, 9]), t); // variant 9
        let echo = Frame {
            device: 1,
            seq: 904,
            body: Body::StopRun,
        };
        d.input(frothline_core::wire::encode(&echo, &mut buf).unwrap(), t);
        d.input(&[0x55, 0x13, 0x00, 0xFF, 0xFF, 0x00], t);
        let got = step(&mut d, &mut t, 0.05, &mut dec);
        assert_eq!(
            replies(&got),
            vec![
                (900, Some(NackReason::UnknownCommand)),
                (901, Some(NackReason::UnknownCommand)),
                (902, Some(NackReason::UnsupportedVersion)),
                (903, Some(NackReason::Malformed)),
            ]
        );
        assert_eq!(d.stats().unreadable, 2);
        assert_eq!(d.stats().not_from_host, 1);
        assert!(d.running(), "no refused command stopped the run");

        // SetWindow rebuilds the chain: windows of 50 ms from here on, continuing the
        // run's sample clock.
        let s_win = send(&mut d, Command::SetWindow(WindowSetting::Frames(1000)));
        let got = step(&mut d, &mut t, 0.6, &mut dec);
        assert_eq!(replies(&got)[0], (s_win, None));
        let windows: Vec<WindowResult> = got
            .iter()
            .flat_map(|f| match &f.body {
                Body::Windows(w) => w.to_vec(),
                _ => vec![],
            })
            .collect();
        assert!(windows.iter().any(|w| w.frames == 1000));
        let mut starts: Vec<u64> = windows.iter().map(|w| w.start).collect();
        starts.dedup();
        assert!(starts.windows(2).all(|p| p[0] < p[1]), "{starts:?}");
        // The capture ended: the run is over, StopRun is refused again.
        assert!(!d.running());
        let s = send(&mut d, Command::StopRun);
        let got = step(&mut d, &mut t, 0.05, &mut dec);
        assert_eq!(replies(&got), vec![(s, Some(NackReason::NotRunning))]);
        assert_eq!(dec.stats().lost, 0);
    });
}

/// In a transient run the description gives the window actually streamed: windows of
/// 50 ms counted from the front (AfterFront), never Whole; after SetWindow the new one.
#[test]
fn a_transient_device_describes_the_window_it_streams() {
    big_stack(|| {
        let cap = crate::live::demo::transient_demo_capture(
            crate::shared::window_spec::WindowSpec::Whole,
        )
        .unwrap();
        let fs = cap.sample_rate;
        let t0 = Instant::now();
        let opts = SimOptions {
            baud: 0,
            ..SimOptions::default()
        };
        let mut d = SimDevice::new(cap, opts, t0).unwrap();
        let frames = (transient::DEFAULT_SLICE_S * fs as f64).round() as u32;
        assert_eq!(d.description().window, WindowSetting::AfterFront { frames });
        let mut log = CommandLog::default();
        let (_, b) = log
            .encode(&Command::SetWindow(WindowSetting::Frames(fs / 10)))
            .unwrap();
        d.input(&b, t0);
        assert_eq!(
            d.description().window,
            WindowSetting::AfterFront { frames: fs / 10 }
        );
    });
}

/// Line noise, cut and mutated command frames, in random chunks: the device never
/// panics, and replies only to frames whose CRC holds.
#[test]
fn random_input_never_crashes_the_device() {
    big_stack(|| {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(7);
        let t0 = Instant::now();
        let opts = SimOptions {
            baud: 0,
            ..SimOptions::default()
        };
        let mut d = SimDevice::new(capture(), opts, t0).unwrap();
        let mut log = CommandLog::default();
        let cmds = [
            Command::StartRun("x".into()),
            Command::StopRun,
            Command::SetWindow(WindowSetting::Frames(500)),
            Command::SetWindow(WindowSetting::Bubbles {
                count: 3,
                probe: 9,
                max_frames: None,
            }),
            Command::Relearn(u32::MAX),
            Command::DescribeRequest,
        ];
        let mut t = t0;
        let mut dec: Decoder = Decoder::new();
        let mut sent = 0u64;
        for i in 0..3000 {
            let mut bytes = if rng.random_bool(0.5) {
                let (_, b) = log.encode(&cmds[i % cmds.len()]).unwrap();
                sent += 1;
                b
            } else {
                (0..rng.random_range(0..40)).map(|_| rng.random()).collect()
            };
            if rng.random_bool(0.3) && !bytes.is_empty() {
                let k = rng.random_range(0..bytes.len());
                bytes[k] ^= 1 << rng.random_range(0..8);
            }
            d.input(&bytes, t);
            if i % 50 == 0 {
                step(&mut d, &mut t, 0.02, &mut dec);
            }
        }
        let s = d.stats();
        assert!(s.acks + s.nacks <= sent + 1500, "{s:?}");
        assert!(s.acks > 0 && s.unreadable > 0, "{s:?}");
    });
}

fn cobs(data: &[u8]) -> Vec<u8> {
    let mut out = vec![0u8];
    let mut code_at = 0;
    for &b in data {
        if b == 0 || out.len() - code_at == 0xFF {
            out[code_at] = (out.len() - code_at) as u8;
            code_at = out.len();
            out.push(0);
            if b == 0 {
                continue;
            }
        }
        out.push(b);
    }
    out[code_at] = (out.len() - code_at) as u8;
    out.push(0);
    out
}
