//! The device's command responder against the command rules of docs/wire-protocol.md
//! section 7: one answer per command frame, idempotent sequence numbers, already running,
//! not running, unknown kind, unsupported version, malformed bodies, frames not from the
//! host id; and golden vectors of every command answer.

use frothline_core::wire::{
    self, crc32, encode, Ack, Body, CommandTarget, Frame, Nack, NackReason, Reply, Responder,
    StartRun, WindowSetting, HOST_ID, MAX_FRAME_BYTES,
};

/// A device that records what it was asked to do.
#[derive(Default)]
struct Target {
    running: bool,
    log: Vec<String>,
}

impl CommandTarget for Target {
    fn running(&self) -> bool {
        self.running
    }
    fn start_run(&mut self, cmd: &StartRun) -> Result<(), NackReason> {
        self.running = true;
        self.log.push(format!("start {}", cmd.label));
        Ok(())
    }
    fn stop_run(&mut self) -> Result<(), NackReason> {
        self.running = false;
        self.log.push("stop".into());
        Ok(())
    }
    fn set_window(&mut self, s: WindowSetting) -> Result<(), NackReason> {
        if s == WindowSetting::Frames(0) {
            return Err(NackReason::BadArgument);
        }
        self.log.push(format!("window {s:?}"));
        Ok(())
    }
    fn relearn(&mut self, probes: u32) -> Result<(), NackReason> {
        self.log.push(format!("relearn {probes:#x}"));
        Ok(())
    }
    fn describe(&mut self) -> Result<(), NackReason> {
        self.log.push("describe".into());
        Ok(())
    }
}

fn frame(seq: u16, body: Body) -> Vec<u8> {
    let mut buf = [0u8; MAX_FRAME_BYTES];
    encode(
        &Frame {
            device: HOST_ID,
            seq,
            body,
        },
        &mut buf,
    )
    .unwrap()
    .to_vec()
}

/// A frame from raw payload bytes (header and body), CRC and COBS added.
fn raw(payload: &[u8]) -> Vec<u8> {
    let mut data = payload.to_vec();
    data.extend_from_slice(&crc32(payload).to_le_bytes());
    let mut out = vec![0u8];
    let mut code_at = 0;
    for &b in &data {
        if b == 0 {
            out[code_at] = (out.len() - code_at) as u8;
            code_at = out.len();
            out.push(0);
            continue;
        }
        out.push(b);
    }
    out[code_at] = (out.len() - code_at) as u8;
    out.push(0);
    out
}

fn feed(r: &mut Responder, t: &mut Target, bytes: &[u8]) -> Vec<Reply> {
    bytes.iter().filter_map(|&b| r.feed(b, t)).collect()
}

fn start(label: &str) -> Body {
    Body::StartRun(StartRun {
        label: label.try_into().unwrap(),
        utc_ms: Some(1_796_194_800_000),
    })
}

fn ack(seq: u16) -> Reply {
    Reply::Ack(Ack { seq })
}

fn nack(seq: u16, reason: NackReason) -> Reply {
    Reply::Nack(Nack { seq, reason })
}

#[test]
fn every_rule_gives_its_answer() {
    let (mut r, mut t) = (Responder::new(), Target::default());
    // Not running: StopRun is refused.
    assert_eq!(
        feed(&mut r, &mut t, &frame(1, Body::StopRun)),
        [nack(1, NackReason::NotRunning)]
    );
    // StartRun runs; the same frame again (same seq, same bytes) is acked, not executed.
    let s = frame(2, start("a"));
    assert_eq!(feed(&mut r, &mut t, &s), [ack(2)]);
    assert_eq!(feed(&mut r, &mut t, &s), [ack(2)]);
    assert_eq!(t.log, ["start a"]);
    // A new StartRun while running: already running, the run goes on.
    assert_eq!(
        feed(&mut r, &mut t, &frame(3, start("b"))),
        [nack(3, NackReason::AlreadyRunning)]
    );
    assert!(t.running);
    // A repeated Nack is the same Nack.
    assert_eq!(
        feed(&mut r, &mut t, &frame(3, start("b"))),
        [nack(3, NackReason::AlreadyRunning)]
    );
    // The same seq with other bytes is a new command (a host that restarted its numbering).
    assert_eq!(
        feed(&mut r, &mut t, &frame(3, Body::DescribeRequest)),
        [ack(3)]
    );
    // A bad argument is the target's verdict.
    assert_eq!(
        feed(
            &mut r,
            &mut t,
            &frame(4, Body::SetWindow(WindowSetting::Frames(0)))
        ),
        [nack(4, NackReason::BadArgument)]
    );
    // Unknown kind (0x7E), a set-levels command (0x26) without its body, and a device kind
    // (Ack).
    assert_eq!(
        feed(&mut r, &mut t, &raw(&[2, 0xFF, 0xFF, 0x03, 0x7E, 5])),
        [nack(5, NackReason::UnknownCommand)]
    );
    assert_eq!(
        feed(&mut r, &mut t, &raw(&[2, 0xFF, 0xFF, 0x03, 0x26, 6])),
        [nack(6, NackReason::Malformed)]
    );
    assert_eq!(
        feed(&mut r, &mut t, &frame(7, Body::Ack(Ack { seq: 1 }))),
        [nack(7, NackReason::UnknownCommand)]
    );
    // Version 1 and version 3: unsupported version (the header is read all the same).
    assert_eq!(
        feed(&mut r, &mut t, &raw(&[1, 0xFF, 0xFF, 0x03, 0x21, 8])),
        [nack(8, NackReason::UnsupportedVersion)]
    );
    assert_eq!(
        feed(&mut r, &mut t, &raw(&[3, 0xFF, 0xFF, 0x03, 0x21, 9])),
        [nack(9, NackReason::UnsupportedVersion)]
    );
    // Malformed: a trailing byte after StopRun, a 17-byte label, window variant 9.
    assert_eq!(
        feed(&mut r, &mut t, &raw(&[2, 0xFF, 0xFF, 0x03, 0x21, 10, 0x00])),
        [nack(10, NackReason::Malformed)]
    );
    let mut long = vec![2, 0xFF, 0xFF, 0x03, 0x20, 11, 17];
    long.extend_from_slice(b"0123456789abcdefg");
    long.push(0);
    assert_eq!(
        feed(&mut r, &mut t, &raw(&long)),
        [nack(11, NackReason::Malformed)]
    );
    assert_eq!(
        feed(&mut r, &mut t, &raw(&[2, 0xFF, 0xFF, 0x03, 0x22, 12, 9])),
        [nack(12, NackReason::Malformed)]
    );
    // Not from the host id: the device's own frame echoed back is ignored, unanswered.
    let mut buf = [0u8; MAX_FRAME_BYTES];
    let echo = encode(
        &Frame {
            device: 1,
            seq: 13,
            body: Body::StopRun,
        },
        &mut buf,
    )
    .unwrap()
    .to_vec();
    assert!(feed(&mut r, &mut t, &echo).is_empty());
    // Line noise, a cut frame and a bit flip: unanswered.
    let mut flipped = frame(14, Body::StopRun);
    flipped[3] ^= 0x10;
    assert!(feed(&mut r, &mut t, &[0x55, 0x13, 0x00, 0xFF, 0x00]).is_empty());
    assert!(feed(&mut r, &mut t, &flipped).is_empty());
    assert!(feed(&mut r, &mut t, &[0x42; 100]).is_empty());
    assert!(
        feed(&mut r, &mut t, &[0x00]).is_empty(),
        "oversize run, then its delimiter"
    );
    // Relearn, then StopRun.
    assert_eq!(
        feed(
            &mut r,
            &mut t,
            &frame(15, Body::Relearn(wire::Relearn { probes: 0b101 }))
        ),
        [ack(15)]
    );
    assert_eq!(feed(&mut r, &mut t, &frame(16, Body::StopRun)), [ack(16)]);
    assert_eq!(t.log, ["start a", "describe", "relearn 0x5", "stop"]);
    let st = r.stats();
    assert_eq!(st.not_from_host, 1);
    assert_eq!(st.unreadable, 4);
    assert_eq!(st.repeats, 2);
    assert_eq!(
        st.executed,
        4 + 1,
        "the four carried out and the refused window"
    );
}

#[test]
fn a_repeat_is_recognised_across_a_sequence_wrap() {
    let (mut r, mut t) = (Responder::new(), Target::default());
    assert_eq!(
        feed(&mut r, &mut t, &frame(65535, start("w"))),
        [ack(65535)]
    );
    assert_eq!(
        feed(&mut r, &mut t, &frame(65535, start("w"))),
        [ack(65535)]
    );
    assert_eq!(feed(&mut r, &mut t, &frame(0, Body::StopRun)), [ack(0)]);
    assert_eq!(t.log, ["start w", "stop"]);
}

/// Every command answer of the spec (section 8), from device 7 at sequence numbers 400..,
/// as bytes on the wire, from `golden_v2.txt` (also read by tests/python_reference.rs).
fn golden_answers() -> Vec<(&'static str, &'static str)> {
    include_str!("golden_v2.txt")
        .lines()
        .filter_map(|l| l.strip_prefix("answer "))
        .map(|l| l.split_once(' ').unwrap())
        .collect()
}

#[test]
fn golden_vectors_of_every_command_answer() {
    let replies = [
        ack(2),
        nack(2, NackReason::UnknownCommand),
        nack(2, NackReason::BadArgument),
        nack(2, NackReason::Busy),
        nack(2, NackReason::NotRunning),
        nack(2, NackReason::AlreadyRunning),
        nack(2, NackReason::UnsupportedVersion),
        nack(2, NackReason::Malformed),
    ];
    let mut buf = [0u8; MAX_FRAME_BYTES];
    let golden = golden_answers();
    assert_eq!(golden.len(), replies.len());
    for (i, (reply, (name, want))) in replies.iter().zip(golden).enumerate() {
        let f = Frame {
            device: 7,
            seq: 400 + i as u16,
            body: reply.body(),
        };
        let got: String = encode(&f, &mut buf)
            .unwrap()
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        println!("answer {name} {got}");
        if std::env::var_os("PRINT_GOLDEN").is_none() {
            assert_eq!(got, want, "{name}");
        }
    }
}

/// SetExtras (kind 0x28): a device that cannot send full windows (this target implements no
/// `set_extras`) refuses it as a command it does not carry out; a body that is no bool is
/// malformed (docs/wire-protocol.md, section 8).
#[test]
fn set_extras_is_refused_by_a_device_without_full_windows() {
    let (mut r, mut t) = (Responder::new(), Target::default());
    assert_eq!(
        feed(
            &mut r,
            &mut t,
            &frame(
                1,
                Body::SetExtras(frothline_core::wire::SetExtras { on: true })
            )
        ),
        [nack(1, NackReason::UnknownCommand)]
    );
    assert_eq!(
        feed(&mut r, &mut t, &raw(&[2, 0xFF, 0xFF, 0x03, 0x28, 2, 2])),
        [nack(2, NackReason::Malformed)]
    );
}
