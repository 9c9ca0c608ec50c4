//! The reference decoder printed in docs/wire-protocol.md (section 14, extracted from the
//! page itself) and the project's own Python decoder (tests/python/decode_frames.py) must
//! reach the Rust decoder's verdict on every input: the golden vectors of every kind and
//! command answer, the frame streams of the two fixtures played by the simulated device
//! (window results compared integer for integer), and mutated frames whose CRC is valid
//! (a byte replaced, inserted or deleted, varints pushed past their type, frames over the
//! size limit). Run by tests/python/check_decoders.py.
//!
//! Needs python3 (standard library only). Without it the test is skipped with a message,
//! except under CI (`CI` set), where it fails.

use frothline_core::wire::{self, Body, Decoder, FeedResult, WindowResult, MAX_FRAME_BYTES};
use frothline_host::live::device_sim::{SimCapture, SimDevice, SimOptions, THREAD_STACK};
use serde_json::{json, Value};
use std::io::Write;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn python() -> bool {
    Command::new("python3")
        .arg("--version")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success())
}

/// COBS of `data` with the delimiter (the encoding of the spec's section 1).
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

fn with_crc(payload: &[u8]) -> Vec<u8> {
    let mut d = payload.to_vec();
    d.extend_from_slice(&wire::crc32(payload).to_le_bytes());
    cobs(&d)
}

fn window_json(w: &WindowResult) -> Value {
    json!({
        "probe": w.probe, "start": w.start, "frames": w.frames,
        "void_fraction": w.void_fraction, "bubble_rate": w.bubble_rate, "bubbles": w.bubbles,
        "chords": w.chords.map(|c| json!([c.mean, c.median, c.p10, c.p90])),
        "correlation": w.correlation.map(|c| json!([c.velocity, c.peak, c.turbulence])),
        "flags": w.flags,
    })
}

fn tip_json(t: &frothline_core::wire::TipState) -> Value {
    json!({
        "levels": t.levels.map(|l| json!({"air": l.air, "water": l.water})),
        "interfaces": t.interfaces, "bubbles": t.bubbles,
        "void_fraction": t.void_fraction, "flags": t.flags,
    })
}

fn tip_report_json(r: &frothline_core::wire::TipReport) -> Value {
    json!({
        "probe": r.probe, "start": r.start, "frames": r.frames,
        "leading": tip_json(&r.leading), "trailing": r.trailing.as_ref().map(tip_json),
    })
}

fn tip_setting_json(t: &frothline_core::wire::TipSetting) -> Value {
    json!({
        "levels": t.levels.map(|l| json!({"air": l.air, "water": l.water})),
        "fixed": t.fixed,
    })
}

fn probe_levels_json(p: &frothline_core::wire::ProbeLevels) -> Value {
    json!({
        "leading": tip_setting_json(&p.leading),
        "trailing": p.trailing.as_ref().map(tip_setting_json),
    })
}

fn extras_json(x: &frothline_core::wire::WindowExtras) -> Value {
    let levels = |l: Option<frothline_core::wire::TipLevels>| {
        l.map(|l| json!({"air": l.air, "water": l.water}))
    };
    json!({
        "droplet_chord_mean": x.droplet_chord_mean,
        "trailing": x.trailing.map(|t| json!({
            "void_fraction": t.void_fraction, "bubble_rate": t.bubble_rate,
        })),
        "levels": levels(x.levels),
        "trailing_levels": levels(x.trailing_levels),
        "correlation": x.correlation.map(|c| json!({
            "transit": c.transit, "secondary_peak_ratio": c.secondary_peak_ratio,
            "t05": c.t05, "tau05": c.tau05,
            "auto_integral": c.auto_integral, "cross_integral": c.cross_integral,
        })),
    })
}

fn status_json(d: &frothline_core::wire::DeviceStatus) -> Value {
    json!({
        "supply_mv": d.supply_mv,
        "uptime_ms": d.uptime_ms,
        "logger": d.logger.map(|l| {
            let mut v = json!({
                "state": frothline_core::wire::device_status::state_name(l.state),
                "used_bytes": l.used_bytes,
                "capacity_bytes": l.capacity_bytes,
            });
            if let frothline_core::logbook::LoggerState::Capturing { remaining } = l.state {
                v["remaining"] = json!(remaining);
            }
            v
        }),
    })
}

/// The Rust verdict on one frame (`frame` = its bytes with the delimiter).
fn case(frame: &[u8]) -> Value {
    let mut dec: Decoder = Decoder::new();
    let hex: String = frame[..frame.len() - 1]
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    match dec.feed(frame) {
        FeedResult::Frame { frame, .. } => {
            let mut v = json!({"hex": hex, "rust": "frame", "code": frame.body.kind().code(),
                               "seq": frame.seq});
            if let Body::Windows(ws) = &frame.body {
                v["windows"] = Value::Array(ws.iter().map(window_json).collect());
            }
            if let Body::TipHealth(ts) = &frame.body {
                v["tips"] = Value::Array(ts.iter().map(tip_report_json).collect());
            }
            if let Body::FullWindows(fs) = &frame.body {
                v["full"] = Value::Array(
                    fs.iter()
                        .map(|f| json!({"result": window_json(&f.result), "extras": extras_json(&f.extras)}))
                        .collect(),
                );
            }
            if let Body::Levels(ls) = &frame.body {
                v["levels"] = Value::Array(ls.iter().map(probe_levels_json).collect());
            }
            if let Body::DeviceStatus(d) = &frame.body {
                v["status"] = status_json(d);
            }
            v
        }
        FeedResult::Unsupported { header, .. } => {
            json!({"hex": hex, "rust": "unsupported", "code": header.kind, "seq": header.seq})
        }
        _ => json!({"hex": hex, "rust": "rejected"}),
    }
}

/// The bytes a simulated device sends over a whole play of a fixture (stepped, no port).
fn fixture_stream(name: &str) -> Vec<u8> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(name);
    let cap = SimCapture::from_files(
        &root.join("capture.wav"),
        &root.join("layout.toml"),
        "100ms".parse().unwrap(),
    )
    .unwrap();
    let frames = cap.frames() as f64 / cap.sample_rate as f64;
    let opts = SimOptions {
        baud: 0,
        speed: 1.0,
        ..SimOptions::default()
    };
    let t0 = Instant::now();
    let mut d = SimDevice::new(cap, opts, t0).unwrap();
    let mut out = Vec::new();
    let steps = (frames / 0.01) as u64 + 300;
    for k in 1..=steps {
        let t = t0 + Duration::from_millis(10 * k);
        d.advance(t);
        d.output(t, &mut out);
    }
    out
}

/// A small xorshift generator: the mutations are reproducible without a dependency.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

/// The payload of a valid frame (COBS decoded as in the spec's section 1, CRC cut off).
fn payload_of(frame: &[u8]) -> Vec<u8> {
    let enc = &frame[..frame.len() - 1];
    let (mut out, mut i) = (Vec::new(), 0);
    while i < enc.len() {
        let c = enc[i] as usize;
        out.extend_from_slice(&enc[i + 1..i + c]);
        i += c;
        if c < 0xFF && i < enc.len() {
            out.push(0);
        }
    }
    out.truncate(out.len() - 4);
    out
}

fn cases() -> (Vec<Value>, usize) {
    let mut cases = Vec::new();
    // Golden vectors of every kind and command answer.
    let golden = include_str!("../core/tests/golden_v2.txt");
    let mut originals: Vec<Vec<u8>> = Vec::new();
    for line in golden.lines().filter(|l| !l.starts_with('#')) {
        let hex = line.rsplit(' ').next().unwrap();
        let bytes: Vec<u8> = (0..hex.len())
            .step_by(2)
            .map(|i| u8::from_str_radix(&hex[i..i + 2], 16).unwrap())
            .collect();
        cases.push(case(&bytes));
        originals.push(bytes);
    }
    // The fixture streams, frame by frame.
    let mut windows = 0;
    for name in ["steady-b2", "surge-b2"] {
        let stream = fixture_stream(name);
        for piece in stream.split(|&b| b == 0).filter(|p| !p.is_empty()) {
            let mut f = piece.to_vec();
            f.push(0);
            let c = case(&f);
            windows += c["windows"].as_array().map_or(0, Vec::len);
            cases.push(c);
            if originals.len() < 400 {
                originals.push(f);
            }
        }
    }
    // Mutations with a valid CRC.
    let mut rng = Rng(0x2545_F491_4F6C_DD1D);
    for i in 0..20_000 {
        let base = &originals[i % originals.len()];
        let mut p = payload_of(base);
        match rng.below(5) {
            0 => {
                let k = rng.below(p.len());
                p[k] = rng.next() as u8;
            }
            1 => {
                let k = rng.below(p.len() + 1);
                p.insert(k, rng.next() as u8);
            }
            2 if p.len() > 1 => {
                let k = rng.below(p.len());
                p.remove(k);
            }
            3 => {
                // A varint pushed to its longest form and past it: continuation bytes.
                let k = 1 + rng.below(p.len() - 1);
                for j in k..(k + 1 + rng.below(4)).min(p.len()) {
                    p[j] |= 0x80;
                }
            }
            _ => {
                let k = rng.below(p.len());
                p[k] = 0xFF;
            }
        }
        cases.push(case(&with_crc(&p)));
    }
    // Header seq ff ff 07 overflows a u16 (the example of the spec's section 3).
    cases.push(case(&with_crc(&[2, 7, 0x30, 0xFF, 0xFF, 0x07, 0x29])));
    // Over the size limit: the largest Windows frame (545 bytes, accepted) with its
    // result count written as a non-minimal 5-byte u32 varint (88 80 80 80 00 = 8), which
    // every part of it allows but the size: 549 bytes, refused by every decoder.
    let largest = WindowResult {
        probe: u8::MAX,
        start: u64::MAX,
        frames: u32::MAX,
        void_fraction: u16::MAX,
        bubble_rate: u32::MAX,
        bubbles: u32::MAX,
        chords: Some(wire::ChordTimes {
            mean: u32::MAX,
            median: u32::MAX,
            p10: u32::MAX,
            p90: u32::MAX,
        }),
        correlation: Some(wire::Correlation {
            velocity: i16::MIN,
            peak: u16::MAX,
            turbulence: Some(u16::MAX),
        }),
        flags: u32::MAX,
    };
    let frame = wire::Frame {
        device: u16::MAX,
        seq: u16::MAX,
        body: Body::Windows(std::iter::repeat_n(largest, 8).collect()),
    };
    let mut buf = [0u8; MAX_FRAME_BYTES];
    let at_limit = wire::encode(&frame, &mut buf).unwrap().to_vec();
    assert_eq!(at_limit.len(), MAX_FRAME_BYTES);
    let c = case(&at_limit);
    assert_eq!(c["rust"], "frame");
    cases.push(c);
    let mut p = payload_of(&at_limit);
    assert_eq!(p[8], 8, "the result count follows the 8-byte header");
    p.splice(8..9, [0x88, 0x80, 0x80, 0x80, 0x00]);
    let over = with_crc(&p);
    assert!(over.len() > MAX_FRAME_BYTES);
    let c = case(&over);
    assert_eq!(c["rust"], "rejected");
    cases.push(c);
    (cases, windows)
}

#[test]
fn the_spec_reference_decoder_and_the_test_decoder_agree_with_rust() {
    if !python() {
        let msg = "python3 not found";
        if std::env::var_os("CI").is_some() {
            panic!("{msg} (required under CI)");
        }
        eprintln!("SKIPPED: {msg}");
        return;
    }
    let h = std::thread::Builder::new()
        .stack_size(THREAD_STACK)
        .spawn(run)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

fn run() {
    let (cases, windows) = cases();
    let rejected = cases.iter().filter(|c| c["rust"] == "rejected").count();
    let frames = cases.iter().filter(|c| c["rust"] == "frame").count();
    assert!(
        windows > 100,
        "the fixture streams carry window results ({windows})"
    );
    assert!(
        rejected > 1000 && frames > 1000,
        "{rejected} rejected, {frames} accepted"
    );
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/python/check_decoders.py");
    let mut child = Command::new("python3")
        .arg(&script)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::inherit())
        .spawn()
        .unwrap();
    {
        let mut stdin = child.stdin.take().unwrap();
        for c in &cases {
            writeln!(stdin, "{c}").unwrap();
        }
    }
    let out = child.wait_with_output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    println!("{text}");
    let summary: Value = serde_json::from_str(text.trim()).unwrap();
    assert_eq!(summary["summary"]["cases"], cases.len());
    let all_windows: usize = cases
        .iter()
        .map(|c| c["windows"].as_array().map_or(0, Vec::len))
        .sum();
    assert_eq!(summary["summary"]["windows"], all_windows);
    assert_eq!(summary["summary"]["mismatches"], 0);
    assert!(out.status.success());
}
