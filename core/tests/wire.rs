//! Wire frames: golden vectors, round trips, size bounds, the streaming decoder under
//! chunking, garbage and fault injection, the streamer under a link budget, and a soak run.
//!
//! The soak run is ignored by default:
//! `cargo test --release -p frothline-core --test wire -- --ignored soak --nocapture`
//! (`WIRE_SOAK_INPUTS` sets the number of inputs, default 1 000 000).

use frothline_core::logbook::LoggerState;
use frothline_core::wire::{
    self, crc32, decode, encode, quant, Ack, Body, ChordTimes, Correlation, CorrelationTimes,
    Decoder, DeviceDescription, FeedResult, Frame, FrontArrival, FullWindow, FullWindows, Health,
    Kind, LevelsInUse, LogChunk, Nack, NackReason, ProbeLayout, ProbeLevels, ProfileFit, ReadLog,
    Relearn, RunStart, SeqCheck, SetClock, SetExtras, SetLevels, StartRun, Streamer,
    StreamerConfig, TipHealth, TipLevels, TipReport, TipSetting, TipState, TrailingTip,
    TrailingWindow, WindowExtras, WindowResult, WindowSetting, Windows, LABEL_BYTES,
    MAX_FRAME_BYTES, MAX_FULL_WINDOWS_PER_FRAME, MAX_PROBES, MAX_TIPS_PER_FRAME,
    MAX_WINDOWS_PER_FRAME,
};
use frothline_core::wire::{DeviceStatus, LoggerStatus};
use proptest::prelude::*;
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use std::collections::BTreeSet;

// ---------------------------------------------------------------------------------------
// Helpers
// ---------------------------------------------------------------------------------------

fn enc(f: &Frame) -> Vec<u8> {
    let mut buf = [0u8; MAX_FRAME_BYTES];
    encode(f, &mut buf).expect("encode").to_vec()
}

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

fn unhex(s: &str) -> Vec<u8> {
    let s: String = s.chars().filter(|c| !c.is_whitespace()).collect();
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

fn label(s: &str) -> heapless::String<LABEL_BYTES> {
    heapless::String::try_from(s).unwrap()
}

/// Feed `bytes` in chunks of the given sizes (cycled); collect every event.
fn feed_all(dec: &mut Decoder, bytes: &[u8], chunks: &[usize]) -> Vec<(Frame, SeqCheck)> {
    let mut out = Vec::new();
    let mut pos = 0;
    let mut k = 0;
    while pos < bytes.len() {
        let n = chunks[k % chunks.len()].max(1).min(bytes.len() - pos);
        k += 1;
        let mut window = &bytes[pos..pos + n];
        pos += n;
        while !window.is_empty() {
            window = match dec.feed(window) {
                FeedResult::Consumed => break,
                FeedResult::Frame {
                    frame,
                    seq,
                    remaining,
                } => {
                    out.push((frame, seq));
                    remaining
                }
                other => other.remaining(),
            };
        }
    }
    out
}

fn typical_window(probe: u8) -> WindowResult {
    // 20 kHz sampling, 50 ms windows, one minute into a run; 100 Hz bubbles of about 1 ms.
    WindowResult {
        probe,
        start: 1_200_000,
        frames: 1000,
        void_fraction: quant::fraction(0.25 + 0.05 * probe as f32),
        bubble_rate: quant::rate(100.0 + probe as f32),
        bubbles: 5,
        chords: Some(ChordTimes {
            mean: 1200,
            median: 1100,
            p10: 400,
            p90: 2100,
        }),
        correlation: Some(Correlation {
            velocity: quant::velocity(2.5),
            peak: quant::fraction(0.82),
            turbulence: Some(quant::fraction(0.15)),
        }),
        flags: 0,
    }
}

/// One frame of every kind, with ordinary values.
fn sample_frames() -> Vec<Frame> {
    let dev = |seq: u16, body: Body| Frame {
        device: 7,
        seq,
        body,
    };
    let host = |seq: u16, body: Body| Frame {
        device: wire::HOST_ID,
        seq,
        body,
    };
    let mut probes = heapless::Vec::new();
    probes
        .push(ProbeLayout {
            station: 0,
            leading: 0,
            trailing: Some(TrailingTip {
                channel: 1,
                spacing: quant::spacing(6.0),
            }),
            elevation: quant::length(12.0),
            x: 0,
        })
        .unwrap();
    probes
        .push(ProbeLayout {
            station: 1,
            leading: 2,
            trailing: None,
            elevation: quant::length(25.0),
            x: quant::length(-150.0),
        })
        .unwrap();
    let mut one = Windows::new();
    one.push(WindowResult {
        probe: 0,
        start: 40_000,
        frames: 1000,
        void_fraction: 2500,
        bubble_rate: 10_000,
        bubbles: 5,
        chords: Some(ChordTimes {
            mean: 1200,
            median: 1100,
            p10: 400,
            p90: 2100,
        }),
        correlation: Some(Correlation {
            velocity: 2500,
            peak: 8200,
            turbulence: Some(1500),
        }),
        flags: 0,
    })
    .unwrap();
    one.push(WindowResult {
        probe: 1,
        start: 40_000,
        frames: 1000,
        void_fraction: 0,
        bubble_rate: 0,
        bubbles: 0,
        chords: None,
        correlation: None,
        flags: 1,
    })
    .unwrap();
    vec![
        dev(
            300,
            Body::Describe(DeviceDescription {
                firmware: label("fl-0.1.0"),
                sample_rate_millihz: quant::sample_rate(20_000.0),
                channels: 3,
                window: WindowSetting::Frames(1000),
                probes,
            }),
        ),
        dev(301, Body::Windows(one.clone())),
        dev(
            302,
            Body::Front(FrontArrival {
                probe: 1,
                station: 0,
                frame: 123_456,
            }),
        ),
        dev(
            303,
            Body::Profile(ProfileFit {
                station: 0,
                slice_start: 100_000,
                slice_frames: 2000,
                probes_used: 6,
                y90: Some(850),
                mean_void_fraction: Some(4300),
                equivalent_depth: Some(485),
                exponent: Some(1100),
                fit_rmse: Some(120),
                flags: 0,
                estimate: 1,
                y90_se: Some(62),
                mean_void_fraction_se: Some(95),
                exponent_se: Some(140),
                equivalent_depth_se: Some(48),
            }),
        ),
        dev(
            304,
            Body::Health(Health {
                samples_dropped: 0,
                saturated_samples: 12,
                tips_stuck: 0b100,
                buffer_high_water: 512,
                windows_dropped: 3,
                frames_dropped: 1,
                uptime_frames: 1_200_000,
            }),
        ),
        dev(
            305,
            Body::RunStart(RunStart {
                run: 2,
                label: label("run-07"),
                uptime_frames: 1_200_000,
                // 2026-12-02T07:00:00Z
                utc_ms: Some(1_796_194_800_000),
            }),
        ),
        host(
            1,
            Body::StartRun(StartRun {
                label: label("run-07"),
                utc_ms: Some(1_796_194_800_000),
            }),
        ),
        host(2, Body::StopRun),
        host(3, Body::SetWindow(WindowSetting::Frames(1000))),
        host(4, Body::Relearn(Relearn { probes: 0b11 })),
        host(5, Body::DescribeRequest),
        dev(306, Body::Ack(Ack { seq: 41 })),
        dev(
            307,
            Body::Nack(Nack {
                seq: 42,
                reason: NackReason::Busy,
            }),
        ),
        host(
            6,
            Body::SetLevels(SetLevels {
                probe: 2,
                trailing: true,
                air: 25_100,
                water: -3_000,
            }),
        ),
        host(
            7,
            Body::SetClock(SetClock {
                utc_ms: 1_700_000_000_123,
            }),
        ),
        host(8, Body::ReadLog(ReadLog { offset: 4096 })),
        dev(
            308,
            Body::LogChunk(LogChunk {
                offset: 4096,
                total: 65536,
                data: heapless::Vec::from_slice(&[0x47, 0x4C, 0x4C, 0x46, 0x01, 0x00, 0xFF])
                    .unwrap(),
            }),
        ),
        dev(
            308,
            Body::Derived(
                [
                    frothline_core::wire::DerivedResult {
                        probe: 1,
                        start: 4000,
                        chord_lengths: Some(frothline_core::wire::ChordLengths {
                            mean: 412,
                            median: 305,
                            p90: 890,
                        }),
                        interfacial_area: Some(1725),
                        sauter_diameter: Some(3480),
                        judged: 60,
                        pairs: 9,
                        clusters: 7,
                        clustered: 16,
                        random_pair_probability: Some(1420),
                    },
                    frothline_core::wire::DerivedResult {
                        probe: 2,
                        start: 4000,
                        ..Default::default()
                    },
                ]
                .into_iter()
                .collect(),
            ),
        ),
        dev(308, Body::TipHealth(sample_tip_health())),
        dev(309, Body::Levels(sample_levels())),
        dev(310, Body::FullWindows(sample_full_windows(&one))),
        host(9, Body::SetExtras(SetExtras { on: true })),
        dev(311, Body::DeviceStatus(sample_status())),
    ]
}

/// A device status: supply 3284 mV, 93.45 s since power-up, the field logger capturing
/// with 17 results to go, 12 KiB of a 60 KiB log written.
fn sample_status() -> DeviceStatus {
    DeviceStatus {
        supply_mv: Some(3_284),
        uptime_ms: 93_450,
        logger: Some(LoggerStatus {
            state: LoggerState::Capturing { remaining: 17 },
            used_bytes: 12_288,
            capacity_bytes: 61_440,
        }),
    }
}

/// The two results of the sample Windows frame with their extras: the dual-tip probe's
/// droplet chord 900 µs, trailing C 0.24 and F 98 Hz, both tips' levels, and its
/// correlation's time scales (T 2400 µs, secondary peak 0.31, T0.5 300 µs, τ0.5 700 µs,
/// integral times 650 and 280 µs); the single-tip probe's learnt levels only.
fn sample_full_windows(ws: &Windows) -> FullWindows {
    let mut v = FullWindows::new();
    v.push(FullWindow {
        result: ws[0],
        extras: WindowExtras {
            droplet_chord_mean: Some(900),
            trailing: Some(TrailingWindow {
                void_fraction: 2400,
                bubble_rate: 9_800,
            }),
            levels: Some(TipLevels {
                air: 25_100,
                water: -3_000,
            }),
            trailing_levels: Some(TipLevels {
                air: 24_000,
                water: -2_500,
            }),
            correlation: Some(CorrelationTimes {
                transit: Some(2_400),
                secondary_peak_ratio: Some(3_100),
                t05: Some(300),
                tau05: Some(700),
                auto_integral: Some(650),
                cross_integral: Some(280),
            }),
        },
    })
    .unwrap();
    v.push(FullWindow {
        result: ws[1],
        extras: WindowExtras {
            levels: Some(TipLevels {
                air: 30_000,
                water: 1_000,
            }),
            ..Default::default()
        },
    })
    .unwrap();
    v
}

/// Levels in use of two probes: a dual-tip probe whose leading tip has fixed levels
/// (25100 / -3000) and whose trailing tip learnt 24000 / -2500, and a single-tip probe that
/// has learnt none.
fn sample_levels() -> LevelsInUse {
    let mut v = LevelsInUse::new();
    v.push(ProbeLevels {
        leading: TipSetting {
            levels: Some(TipLevels {
                air: 25_100,
                water: -3_000,
            }),
            fixed: true,
        },
        trailing: Some(TipSetting {
            levels: Some(TipLevels {
                air: 24_000,
                water: -2_500,
            }),
            fixed: false,
        }),
    })
    .unwrap();
    v.push(ProbeLevels {
        leading: TipSetting {
            levels: None,
            fixed: false,
        },
        trailing: None,
    })
    .unwrap();
    v
}

/// Tip health of two probes: a dual-tip probe switching (levels 25100 / -3000, 18
/// interfaces, 9 bubbles, C 0.3 on the leading tip), and a single-tip probe that has not
/// learnt its levels and sits in one phase (flags stuck | levels_not_learnt).
fn sample_tip_health() -> TipHealth {
    let tip = |levels, interfaces, bubbles, void_fraction, flags| TipState {
        levels,
        interfaces,
        bubbles,
        void_fraction,
        flags,
    };
    let mut v = TipHealth::new();
    v.push(TipReport {
        probe: 0,
        start: 40_000,
        frames: 4_000,
        leading: tip(
            Some(TipLevels {
                air: 25_100,
                water: -3_000,
            }),
            18,
            9,
            3_000,
            0,
        ),
        trailing: Some(tip(
            Some(TipLevels {
                air: 24_000,
                water: -2_500,
            }),
            16,
            8,
            2_900,
            0,
        )),
    })
    .unwrap();
    v.push(TipReport {
        probe: 1,
        start: 40_000,
        frames: 4_000,
        leading: tip(None, 0, 0, 0, 0b11),
        trailing: None,
    })
    .unwrap();
    v
}

/// The largest instance of every kind: every varint at its longest, every option set,
/// every container full.
fn largest_frames() -> Vec<Frame> {
    let full = |n: usize| {
        let mut s = heapless::String::<LABEL_BYTES>::new();
        for _ in 0..n {
            s.push('w').unwrap();
        }
        s
    };
    let layout = ProbeLayout {
        station: u8::MAX,
        leading: u8::MAX,
        trailing: Some(TrailingTip {
            channel: u8::MAX,
            spacing: u16::MAX,
        }),
        elevation: i32::MIN,
        x: i32::MIN,
    };
    let win = WindowResult {
        probe: u8::MAX,
        start: u64::MAX,
        frames: u32::MAX,
        void_fraction: u16::MAX,
        bubble_rate: u32::MAX,
        bubbles: u32::MAX,
        chords: Some(ChordTimes {
            mean: u32::MAX,
            median: u32::MAX,
            p10: u32::MAX,
            p90: u32::MAX,
        }),
        correlation: Some(Correlation {
            velocity: i16::MIN,
            peak: u16::MAX,
            turbulence: Some(u16::MAX),
        }),
        flags: u32::MAX,
    };
    let f = |body| Frame {
        device: u16::MAX,
        seq: u16::MAX,
        body,
    };
    vec![
        f(Body::Describe(DeviceDescription {
            firmware: full(LABEL_BYTES),
            sample_rate_millihz: u32::MAX,
            channels: u8::MAX,
            window: WindowSetting::Bubbles {
                count: u32::MAX,
                probe: u8::MAX,
                max_frames: Some(u32::MAX),
            },
            probes: core::iter::repeat_n(layout, MAX_PROBES).collect(),
        })),
        f(Body::Windows(
            core::iter::repeat_n(win, MAX_WINDOWS_PER_FRAME).collect(),
        )),
        f(Body::Front(FrontArrival {
            probe: u8::MAX,
            station: u8::MAX,
            frame: u64::MAX,
        })),
        f(Body::Profile(ProfileFit {
            station: u8::MAX,
            slice_start: u64::MAX,
            slice_frames: u32::MAX,
            probes_used: u8::MAX,
            y90: Some(u32::MAX),
            mean_void_fraction: Some(u16::MAX),
            equivalent_depth: Some(u32::MAX),
            exponent: Some(u16::MAX),
            fit_rmse: Some(u16::MAX),
            flags: u32::MAX,
            estimate: u8::MAX,
            y90_se: Some(u16::MAX),
            mean_void_fraction_se: Some(u16::MAX),
            exponent_se: Some(u16::MAX),
            equivalent_depth_se: Some(u16::MAX),
        })),
        f(Body::Health(Health {
            samples_dropped: u64::MAX,
            saturated_samples: u64::MAX,
            tips_stuck: u64::MAX,
            buffer_high_water: u32::MAX,
            windows_dropped: u32::MAX,
            frames_dropped: u32::MAX,
            uptime_frames: u64::MAX,
        })),
        f(Body::RunStart(RunStart {
            run: u32::MAX,
            label: full(LABEL_BYTES),
            uptime_frames: u64::MAX,
            utc_ms: Some(u64::MAX),
        })),
        f(Body::StartRun(StartRun {
            label: full(LABEL_BYTES),
            utc_ms: Some(u64::MAX),
        })),
        f(Body::StopRun),
        f(Body::SetWindow(WindowSetting::Bubbles {
            count: u32::MAX,
            probe: u8::MAX,
            max_frames: Some(u32::MAX),
        })),
        f(Body::Relearn(Relearn { probes: u32::MAX })),
        f(Body::DescribeRequest),
        f(Body::SetLevels(SetLevels {
            probe: u8::MAX,
            trailing: true,
            air: i16::MIN,
            water: i16::MIN,
        })),
        f(Body::Ack(Ack { seq: u16::MAX })),
        f(Body::Nack(Nack {
            seq: u16::MAX,
            reason: NackReason::Other(u8::MAX),
        })),
        f(Body::SetClock(SetClock { utc_ms: u64::MAX })),
        f(Body::DeviceStatus(DeviceStatus {
            supply_mv: Some(u16::MAX),
            uptime_ms: u64::MAX,
            logger: Some(LoggerStatus {
                state: LoggerState::Capturing {
                    remaining: u32::MAX,
                },
                used_bytes: u32::MAX,
                capacity_bytes: u32::MAX,
            }),
        })),
        f(Body::SetExtras(SetExtras { on: true })),
        f(Body::FullWindows({
            let levels = Some(TipLevels {
                air: i16::MIN,
                water: i16::MIN,
            });
            let extras = WindowExtras {
                droplet_chord_mean: Some(u32::MAX),
                trailing: Some(TrailingWindow {
                    void_fraction: u16::MAX,
                    bubble_rate: u32::MAX,
                }),
                levels,
                trailing_levels: levels,
                correlation: Some(CorrelationTimes {
                    transit: Some(u32::MAX),
                    secondary_peak_ratio: Some(u16::MAX),
                    t05: Some(u32::MAX),
                    tau05: Some(u32::MAX),
                    auto_integral: Some(u32::MAX),
                    cross_integral: Some(u32::MAX),
                }),
            };
            (0..MAX_FULL_WINDOWS_PER_FRAME)
                .map(|_| FullWindow {
                    result: win,
                    extras,
                })
                .collect()
        })),
        f(Body::ReadLog(ReadLog { offset: u32::MAX })),
        f(Body::LogChunk(LogChunk {
            offset: u32::MAX,
            total: u32::MAX,
            data: heapless::Vec::from_slice(&[0xFF; wire::LOG_CHUNK_BYTES]).unwrap(),
        })),
        f(Body::Derived(
            std::iter::repeat_n(
                frothline_core::wire::DerivedResult {
                    probe: u8::MAX,
                    start: u64::MAX,
                    chord_lengths: Some(frothline_core::wire::ChordLengths {
                        mean: u32::MAX,
                        median: u32::MAX,
                        p90: u32::MAX,
                    }),
                    interfacial_area: Some(u32::MAX),
                    sauter_diameter: Some(u32::MAX),
                    judged: u32::MAX,
                    pairs: u32::MAX,
                    clusters: u32::MAX,
                    clustered: u32::MAX,
                    random_pair_probability: Some(u16::MAX),
                },
                8,
            )
            .collect(),
        )),
        f(Body::Levels({
            let tip = TipSetting {
                levels: Some(TipLevels {
                    air: i16::MIN,
                    water: i16::MIN,
                }),
                fixed: true,
            };
            (0..MAX_PROBES)
                .map(|_| ProbeLevels {
                    leading: tip,
                    trailing: Some(tip),
                })
                .collect()
        })),
        f(Body::TipHealth({
            let tip = TipState {
                levels: Some(TipLevels {
                    air: i16::MIN,
                    water: i16::MIN,
                }),
                interfaces: u32::MAX,
                bubbles: u32::MAX,
                void_fraction: u16::MAX,
                flags: u32::MAX,
            };
            let r = TipReport {
                probe: u8::MAX,
                start: u64::MAX,
                frames: u32::MAX,
                leading: tip,
                trailing: Some(tip),
            };
            let mut v = TipHealth::new();
            for _ in 0..MAX_TIPS_PER_FRAME {
                v.push(r).unwrap();
            }
            v
        })),
    ]
}

// ---------------------------------------------------------------------------------------
// An independent reference decoder (no crate code): COBS, bitwise CRC-32, header fields.
// It checks the crate against the spec in docs/wire-protocol.md.
// ---------------------------------------------------------------------------------------

fn ref_cobs_decode(enc: &[u8]) -> Option<Vec<u8>> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < enc.len() {
        let code = enc[i] as usize;
        if code == 0 || i + code > enc.len() {
            return None;
        }
        out.extend_from_slice(&enc[i + 1..i + code]);
        i += code;
        if code < 0xFF && i < enc.len() {
            out.push(0);
        }
    }
    Some(out)
}

fn ref_crc32(data: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in data {
        crc ^= b as u32;
        for _ in 0..8 {
            crc = if crc & 1 != 0 {
                (crc >> 1) ^ 0xEDB8_8320
            } else {
                crc >> 1
            };
        }
    }
    !crc
}

fn ref_varint(b: &[u8], pos: &mut usize) -> u64 {
    let mut v = 0u64;
    let mut shift = 0;
    loop {
        let byte = b[*pos];
        *pos += 1;
        v |= ((byte & 0x7F) as u64) << shift;
        if byte & 0x80 == 0 {
            return v;
        }
        shift += 7;
    }
}

/// (version, device, kind, seq, body bytes) of a valid frame, per the spec.
fn ref_parse(frame: &[u8]) -> (u8, u16, u8, u16, Vec<u8>) {
    assert_eq!(
        *frame.last().unwrap(),
        0,
        "frame must end with the delimiter"
    );
    let body = &frame[..frame.len() - 1];
    assert!(!body.contains(&0), "no zero inside a COBS frame");
    let data = ref_cobs_decode(body).expect("cobs");
    let (payload, crc) = data.split_at(data.len() - 4);
    assert_eq!(
        ref_crc32(payload),
        u32::from_le_bytes(crc.try_into().unwrap())
    );
    let mut p = 0;
    let version = payload[p];
    p += 1;
    let device = ref_varint(payload, &mut p) as u16;
    let kind = payload[p];
    p += 1;
    let seq = ref_varint(payload, &mut p) as u16;
    (version, device, kind, seq, payload[p..].to_vec())
}

// ---------------------------------------------------------------------------------------
// Golden vectors
// ---------------------------------------------------------------------------------------

/// Expected encodings of `sample_frames()`, in order. Produced once by the encoder and
/// checked by hand against docs/wire-protocol.md (the Ack frame byte by byte, see
/// `golden_ack_by_hand`) and by the reference decoder above.
/// The golden vectors of `sample_frames()`, in order, from `golden_v2.txt`. Produced once
/// by the encoder and checked by hand against docs/wire-protocol.md (the Ack frame byte by
/// byte, see `golden_ack_by_hand`) and by the reference decoder above.
fn golden() -> Vec<(Kind, &'static str)> {
    include_str!("golden_v2.txt")
        .lines()
        .filter_map(|l| l.strip_prefix("frame "))
        .map(|l| {
            let (name, hex) = l.split_once(' ').unwrap();
            let kind = Kind::ALL
                .into_iter()
                .find(|k| format!("{k:?}") == name)
                .unwrap_or_else(|| panic!("kind {name}"));
            (kind, hex)
        })
        .collect()
}

#[test]
fn print_encodings() {
    // `--nocapture` shows the encodings (used once to produce GOLDEN).
    for f in sample_frames() {
        println!("{:?}: {}", f.body.kind(), hex(&enc(&f)));
    }
    for f in largest_frames() {
        println!("largest {:?}: {}", f.body.kind(), hex(&enc(&f)));
    }
}

#[test]
fn golden_vectors_for_every_kind() {
    let frames = sample_frames();
    let golden = golden();
    assert_eq!(frames.len(), golden.len());
    let mut kinds = BTreeSet::new();
    for (f, (kind, want)) in frames.iter().zip(golden) {
        assert_eq!(f.body.kind(), kind);
        kinds.insert(kind.code());
        let got = enc(f);
        assert_eq!(hex(&got), want, "{kind:?}");
        let mut bytes = unhex(want);
        assert_eq!(decode(&mut bytes).as_ref(), Ok(f), "{kind:?}");
        let (version, device, code, seq, _) = ref_parse(&got);
        assert_eq!(
            (version, device, code, seq),
            (wire::PROTOCOL_VERSION, f.device, kind.code(), f.seq)
        );
    }
    assert_eq!(kinds.len(), Kind::ALL.len(), "every kind has a vector");
}

/// SetLevels { probe 2, trailing, air 25100, water -3000 } from the host (id 0xFFFF), seq 6,
/// worked by hand from docs/wire-protocol.md: body 02 | 01 | air zigzag 50200 -> varint
/// 98 88 03 | water zigzag 5999 -> varint ef 2e.
#[test]
fn golden_set_levels_by_hand() {
    let f = &sample_frames()[13];
    let (version, device, kind, seq, body) = ref_parse(&enc(f));
    assert_eq!((version, device, kind, seq), (2, 0xFFFF, 0x26, 6));
    assert_eq!(body, [0x02, 0x01, 0x98, 0x88, 0x03, 0xEF, 0x2E]);
}

/// The levels in use of `sample_levels()` from device 7, seq 309, worked by hand from
/// docs/wire-protocol.md: count 02 | probe 0: leading Some 01, air zigzag 50200 -> 98 88 03,
/// water zigzag 5999 -> ef 2e, fixed 01; trailing Some 01, Some 01, air zigzag 48000 ->
/// 80 f7 02, water zigzag 4999 -> 87 27, fixed 00 | probe 1: levels None 00, fixed 00,
/// trailing None 00.
#[test]
fn golden_levels_by_hand() {
    let f = sample_frames()
        .into_iter()
        .find(|f| f.body.kind() == Kind::Levels)
        .unwrap();
    let (version, device, kind, seq, body) = ref_parse(&enc(&f));
    assert_eq!((version, device, kind, seq), (2, 7, 0x0A, 309));
    assert_eq!(
        body,
        [
            0x02, 0x01, 0x98, 0x88, 0x03, 0xEF, 0x2E, 0x01, 0x01, 0x01, 0x80, 0xF7, 0x02, 0x87,
            0x27, 0x00, 0x00, 0x00, 0x00
        ]
    );
}

/// The device status of `sample_status()` from device 7, seq 311, worked by hand from
/// docs/wire-protocol.md: supply Some 01, 3284 = 25 * 128 + 84 -> d4 19 | uptime 93450 =
/// (5 * 128 + 90) * 128 + 10 -> 8a da 05 | logger Some 01, state variant 2 (capturing) 02,
/// remaining 17 -> 11, used 12288 = 96 * 128 -> 80 60, capacity 61440 = (3 * 128 + 96) *
/// 128 -> 80 e0 03.
#[test]
fn golden_device_status_by_hand() {
    let f = sample_frames()
        .into_iter()
        .find(|f| f.body.kind() == Kind::DeviceStatus)
        .unwrap();
    let (version, device, kind, seq, body) = ref_parse(&enc(&f));
    assert_eq!((version, device, kind, seq), (2, 7, 0x0C, 311));
    assert_eq!(
        body,
        [0x01, 0xD4, 0x19, 0x8A, 0xDA, 0x05, 0x01, 0x02, 0x11, 0x80, 0x60, 0x80, 0xE0, 0x03]
    );
    // A device without a supply measurement or a logger: 00 | uptime | 00.
    let bare = Frame {
        device: 7,
        seq: 311,
        body: Body::DeviceStatus(DeviceStatus {
            supply_mv: None,
            uptime_ms: 1_000,
            logger: None,
        }),
    };
    assert_eq!(ref_parse(&enc(&bare)).4, [0x00, 0xE8, 0x07, 0x00]);
}

/// SetExtras { on } from the host, seq 9, worked by hand from docs/wire-protocol.md: the
/// body is one bool byte, 01.
#[test]
fn golden_set_extras_by_hand() {
    let f = sample_frames()
        .into_iter()
        .find(|f| f.body.kind() == Kind::SetExtras)
        .unwrap();
    let (version, device, kind, seq, body) = ref_parse(&enc(&f));
    assert_eq!((version, device, kind, seq), (2, 0xFFFF, 0x28, 9));
    assert_eq!(body, [0x01]);
}

/// SetClock { utc_ms 1 700 000 000 123 } from the host, seq 7, worked by hand from
/// docs/wire-protocol.md: the body is the LEB128 varint of the milliseconds, 7 bits at a
/// time from the lowest: fb d0 95 ff bc 31.
#[test]
fn golden_set_clock_by_hand() {
    let f = &sample_frames()[14];
    let (version, device, kind, seq, body) = ref_parse(&enc(f));
    assert_eq!((version, device, kind, seq), (2, 0xFFFF, 0x25, 7));
    assert_eq!(body, [0xFB, 0xD0, 0x95, 0xFF, 0xBC, 0x31]);
}

#[test]
fn golden_ack_by_hand() {
    // Ack { seq: 41 } from device 7, sequence number 306:
    //   version 02 | device 7 -> varint 07 | kind Ack 30 | seq 306 = 0x132 -> varint b2 02
    //   | body: Ack.seq 41 -> varint 29
    // CRC-32/ISO-HDLC of those 6 bytes = 0x085ff489 (zlib.crc32 agrees) -> 89 f4 5f 08.
    let payload = [0x02, 0x07, 0x30, 0xB2, 0x02, 0x29];
    assert_eq!(ref_crc32(&payload), 0x085F_F489);
    let crc = ref_crc32(&payload);
    assert_eq!(crc, crc32(&payload));
    // No zero byte in payload ++ crc here, so COBS is one block: length+1, the bytes, 00.
    let mut data = payload.to_vec();
    data.extend_from_slice(&crc.to_le_bytes());
    assert!(!data.contains(&0));
    let mut want = vec![data.len() as u8 + 1];
    want.extend_from_slice(&data);
    want.push(0);
    assert_eq!(hex(&want), "0b020730b2022989f45f0800");
    let f = Frame {
        device: 7,
        seq: 306,
        body: Body::Ack(Ack { seq: 41 }),
    };
    assert_eq!(enc(&f), want);
    assert_eq!(hex(&want), golden()[11].1);
}

/// The worked example of docs/wire-protocol.md, byte for byte.
#[test]
fn doc_worked_example() {
    let Body::Windows(two) = sample_frames()[1].body.clone() else {
        unreachable!()
    };
    let mut w = Windows::new();
    w.push(two[0]).unwrap();
    let f = Frame {
        device: 7,
        seq: 301,
        body: Body::Windows(w),
    };
    let want = "07020702ad02011cc0b802e807c413904e0501b009cc089003b410018827884001dc0b\
                056f6e391f00";
    assert_eq!(hex(&enc(&f)), want);
    let payload = unhex(
        "020702ad0201 00 c0b802 e807 c413 904e 05 01 b009 cc08 9003 b410 01 8827 8840 01 dc0b 00",
    );
    assert_eq!(crc32(&payload), 0x1F39_6E6F);
    let mut b = unhex(want);
    assert_eq!(decode(&mut b), Ok(f));
}

#[test]
fn body_layouts_follow_the_spec() {
    // Spot checks of body bytes against the field tables of the spec.
    let frames = sample_frames();
    let body = |i: usize| ref_parse(&enc(&frames[i])).4;
    // Front: probe u8, station u8, frame varint 123456 = c0 c4 07.
    assert_eq!(body(2), vec![0x01, 0x00, 0xC0, 0xC4, 0x07]);
    // SetWindow Frames(1000): variant index 1, then varint 1000 = e8 07.
    assert_eq!(body(8), vec![0x01, 0xE8, 0x07]);
    // StopRun: empty body.
    assert_eq!(body(7), Vec::<u8>::new());
    // Nack: seq 42, reason Busy = 3.
    assert_eq!(body(12), vec![0x2A, 0x03]);
    // RunStart: run 2, label "run-07" (len 6), uptime 1200000 = 80 9f 49, Some(utc).
    let r = body(5);
    assert_eq!(&r[..11], b"\x02\x06run-07\x80\x9f\x49");
    assert_eq!(r[11], 0x01);
    // Health: ..., windows_dropped 3, frames_dropped 1, uptime 1200000.
    let h = body(4);
    assert_eq!(&h[h.len() - 5..], &[0x03, 0x01, 0x80, 0x9F, 0x49]);
    // Windows, second entry: probe 1, start 40000 = c0 b8 02, frames 1000 = e8 07, C 0,
    // rate 0, bubbles 0, chords None, correlation None, flags 1.
    let w = body(1);
    assert_eq!(w[0], 2, "two entries");
    assert_eq!(
        &w[w.len() - 12..],
        &[0x01, 0xC0, 0xB8, 0x02, 0xE8, 0x07, 0x00, 0x00, 0x00, 0x00, 0x00, 0x01]
    );
    // Describe: firmware "fl-0.1.0" = len 8 then ASCII.
    let d = body(0);
    assert_eq!(&d[..9], b"\x08fl-0.1.0");
}

// ---------------------------------------------------------------------------------------
// Round trips and bounds
// ---------------------------------------------------------------------------------------

#[test]
fn round_trips_of_samples_and_largest() {
    for f in sample_frames().into_iter().chain(largest_frames()) {
        let mut bytes = enc(&f);
        assert!(bytes.len() <= MAX_FRAME_BYTES);
        assert_eq!(decode(&mut bytes), Ok(f));
    }
}

#[test]
fn max_size_bound_holds_for_every_kind_at_its_largest() {
    let frames = largest_frames();
    assert_eq!(frames.len(), Kind::ALL.len());
    let mut largest = 0;
    for f in &frames {
        let n = enc(f).len();
        println!("{:?}: largest frame {n} bytes", f.body.kind());
        assert!(
            n <= MAX_FRAME_BYTES,
            "{:?}: {n} > {MAX_FRAME_BYTES}",
            f.body.kind()
        );
        largest = largest.max(n);
    }
    println!(
        "MAX_FRAME_BYTES = {MAX_FRAME_BYTES}, largest encoded = {largest}, \
         MAX_PAYLOAD_BYTES = {}",
        wire::MAX_PAYLOAD_BYTES
    );
    // The bound is tight: postcard's MaxSize is exact for these types, COBS adds
    // at most len/254 + 1.
    assert!(
        MAX_FRAME_BYTES - largest <= 2,
        "{MAX_FRAME_BYTES} vs {largest}"
    );
    // A buffer one byte short of an encoding fails cleanly.
    for f in &frames {
        let n = enc(f).len();
        let mut buf = vec![0u8; n - 1];
        assert_eq!(encode(f, &mut buf), Err(wire::WireError::BufferTooSmall));
    }
}

#[test]
fn unknown_kind_and_version_are_reported_with_their_header() {
    let mut payload = vec![wire::PROTOCOL_VERSION, 0x05, 0x7E, 0x09];
    payload.extend_from_slice(&crc32(&payload).to_le_bytes());
    let mut cobs = vec![payload.len() as u8 + 1];
    cobs.extend_from_slice(&payload);
    cobs.push(0);
    let mut dec: Decoder = Decoder::new();
    match dec.feed(&cobs) {
        FeedResult::Unsupported { header, seq, .. } => {
            assert_eq!((header.device, header.kind, header.seq), (5, 0x7E, 9));
            assert_eq!(seq, SeqCheck::First);
        }
        other => panic!("{other:?}"),
    }
    // A version-1 frame (the Ack of the version-1 spec's golden vectors) is refused with
    // its header: a version-2 decoder does not read version 1.
    let mut v1 = unhex("0b010730b102297e388d8c00");
    assert_eq!(
        decode(&mut v1.clone()).map_err(|e| e.to_string()),
        Err(
            "frame of protocol version 1 from device 7: this build reads version 2 only \
             (update the device's firmware or the host tool so both speak the same version)"
                .to_string()
        )
    );
    let mut v3 = vec![3u8, 0x05, 0x02, 0x0A];
    v3.extend_from_slice(&crc32(&v3).to_le_bytes());
    let mut cobs = vec![v3.len() as u8 + 1];
    cobs.extend_from_slice(&v3);
    cobs.push(0);
    match dec.feed(&cobs) {
        FeedResult::Unsupported { header, seq, .. } => {
            assert_eq!(header.version, 3);
            assert_eq!(seq, SeqCheck::InOrder);
        }
        other => panic!("{other:?}"),
    }
    assert!(matches!(dec.feed(&v1), FeedResult::Unsupported { .. }));
    v1.clear();
    assert_eq!(dec.stats().unsupported, 3);
    assert_eq!(dec.stats().other_version, 2);
    assert_eq!(dec.stats().last_other_version, 1);
}

#[test]
fn trailing_bytes_and_bad_fields_are_malformed() {
    // Append a byte to the body and fix the CRC: the CRC passes, the payload has a tail.
    let payload = [0x02, 0x07, 0x30, 0xAC, 0x02, 0x29, 0x00];
    let mut d = payload.to_vec();
    d.extend_from_slice(&crc32(&payload).to_le_bytes());
    assert_eq!(wire::decode_unstuffed(&d), Err(wire::WireError::Malformed));
    // A WindowSetting variant index 9 does not exist.
    let payload = [0x02, 0x07, 0x22, 0x01, 0x09];
    let mut d = payload.to_vec();
    d.extend_from_slice(&crc32(&payload).to_le_bytes());
    assert_eq!(wire::decode_unstuffed(&d), Err(wire::WireError::Malformed));
    // A firmware string longer than 16 bytes.
    let mut payload = vec![0x02, 0x07, 0x01, 0x01, 17];
    payload.extend_from_slice(&[b'a'; 17]);
    payload.extend_from_slice(&[0x01, 0x01, 0x00, 0x00]);
    let mut d = payload.clone();
    d.extend_from_slice(&crc32(&payload).to_le_bytes());
    assert_eq!(wire::decode_unstuffed(&d), Err(wire::WireError::Malformed));
    // A run label of 17 bytes.
    let mut payload = vec![0x02, 0xFF, 0xFF, 0x03, 0x20, 0x01, 17];
    payload.extend_from_slice(&[b'a'; 17]);
    payload.push(0x00);
    let mut d = payload.clone();
    d.extend_from_slice(&crc32(&payload).to_le_bytes());
    assert_eq!(wire::decode_unstuffed(&d), Err(wire::WireError::Malformed));
    // A u16 varint that overflows its type: seq = ff ff 07 (0x1fffff).
    let payload = [0x02, 0x07, 0x30, 0xFF, 0xFF, 0x07, 0x29];
    let mut d = payload.to_vec();
    d.extend_from_slice(&crc32(&payload).to_le_bytes());
    assert_eq!(wire::decode_unstuffed(&d), Err(wire::WireError::Malformed));
}

// ---------------------------------------------------------------------------------------
// Streaming decoder
// ---------------------------------------------------------------------------------------

fn stream_of(n: usize) -> (Vec<Frame>, Vec<u8>) {
    let mut frames = Vec::new();
    let mut bytes = Vec::new();
    let samples = sample_frames();
    for i in 0..n {
        let mut f = samples[i % samples.len()].clone();
        f.device = 1;
        f.seq = i as u16;
        bytes.extend_from_slice(&enc(&f));
        frames.push(f);
    }
    (frames, bytes)
}

#[test]
fn decoder_one_byte_at_a_time() {
    let (frames, bytes) = stream_of(50);
    let mut dec: Decoder = Decoder::new();
    let got = feed_all(&mut dec, &bytes, &[1]);
    assert_eq!(
        got.iter().map(|(f, _)| f.clone()).collect::<Vec<_>>(),
        frames
    );
    assert_eq!(got[0].1, SeqCheck::First);
    assert!(got[1..].iter().all(|(_, s)| *s == SeqCheck::InOrder));
    assert_eq!(dec.stats().frames, 50);
    assert_eq!(dec.stats().bytes_discarded, 0);
}

#[test]
fn decoder_in_random_chunks() {
    let (frames, bytes) = stream_of(500);
    let mut rng = StdRng::seed_from_u64(11);
    for _ in 0..20 {
        let chunks: Vec<usize> = (0..64).map(|_| rng.random_range(1..200)).collect();
        let mut dec: Decoder = Decoder::new();
        let got = feed_all(&mut dec, &bytes, &chunks);
        assert_eq!(got.len(), frames.len());
        assert!(got.iter().zip(&frames).all(|((a, _), b)| a == b));
        assert_eq!(dec.stats().lost, 0);
    }
}

#[test]
fn decoder_resynchronises_after_garbage_between_frames() {
    let (frames, _) = stream_of(200);
    let mut rng = StdRng::seed_from_u64(12);
    let mut bytes = Vec::new();
    for f in &frames {
        // Garbage that ends with a delimiter costs no frame.
        let n = rng.random_range(0..30);
        bytes.extend((0..n).map(|_| rng.random::<u8>()));
        bytes.push(0);
        bytes.extend_from_slice(&enc(f));
    }
    let mut dec: Decoder = Decoder::new();
    let got = feed_all(&mut dec, &bytes, &[7, 1, 64, 3]);
    assert_eq!(got.len(), frames.len());
    assert!(got.iter().zip(&frames).all(|((a, _), b)| a == b));
    assert!(dec.stats().bytes_discarded > 0);
    assert_eq!(dec.stats().lost, 0);
}

#[test]
fn garbage_without_delimiter_costs_exactly_the_next_frame() {
    let (frames, _) = stream_of(3);
    let mut bytes = enc(&frames[0]);
    bytes.extend_from_slice(&[0x13, 0x37, 0xFF]);
    bytes.extend_from_slice(&enc(&frames[1]));
    bytes.extend_from_slice(&enc(&frames[2]));
    let mut dec: Decoder = Decoder::new();
    let got = feed_all(&mut dec, &bytes, &[1000]);
    assert_eq!(got.len(), 2);
    assert_eq!(got[1].0, frames[2]);
    assert_eq!(got[1].1, SeqCheck::Gap(1));
    assert_eq!(dec.stats().lost, 1);
    let st = dec.stats();
    assert_eq!(st.crc_failures + st.malformed + st.bad_framing, 1);
}

// ---------------------------------------------------------------------------------------
// Fault injection: 10 000 frames through a lossy link
// ---------------------------------------------------------------------------------------

#[derive(Default, Debug)]
struct Injected {
    dropped: usize,
    corrupted: usize,
    duplicated: usize,
    garbage: usize,
    bursts: usize,
}

#[test]
fn fault_injection_on_ten_thousand_frames() {
    const N: usize = 10_000;
    let mut rng = StdRng::seed_from_u64(0xF207_11E5);
    let samples = sample_frames();
    let mut sent = Vec::with_capacity(N);
    for i in 0..N {
        // Mostly window results, as on a real link.
        let body = if i % 10 < 7 {
            let mut w = typical_window((i % 8) as u8);
            w.start = (i as u64 / 8) * 1000;
            w.void_fraction = rng.random_range(0..=10_000);
            Body::window(w)
        } else {
            samples[i % samples.len()].body.clone()
        };
        sent.push(Frame {
            device: 1,
            seq: i as u16,
            body,
        });
    }

    // Build the faulty byte stream, and predict from it which frames must come through:
    // a frame arrives iff its bytes are intact and the byte before it is a delimiter.
    let mut inj = Injected::default();
    let mut stream = Vec::new();
    let mut expected = BTreeSet::new();
    let mut garbage_before = Vec::new();
    let mut faulty = vec![false; N];
    for (i, f) in sent.iter().enumerate() {
        let bytes = enc(f);
        let r: f64 = rng.random();
        if r < 0.01 {
            inj.dropped += 1;
            faulty[i] = true;
            continue;
        }
        if (0.03..0.04).contains(&r) {
            inj.garbage += 1;
            faulty[i] = true;
            garbage_before.push(i);
            let n = rng.random_range(1..=40);
            stream.extend((0..n).map(|_| rng.random::<u8>()));
        }
        if (0.04..0.042).contains(&r) {
            inj.bursts += 1;
            faulty[i] = true;
            garbage_before.push(i);
            stream.extend((0..MAX_FRAME_BYTES + 100).map(|_| rng.random_range(1..=255u8)));
        }
        let clean_start = stream.last().is_none_or(|&b| b == 0);
        if (0.01..0.02).contains(&r) {
            inj.corrupted += 1;
            faulty[i] = true;
            let mut bad = bytes.clone();
            for _ in 0..rng.random_range(1..=3) {
                let at = rng.random_range(0..bad.len());
                bad[at] ^= 1 << rng.random_range(0..8);
            }
            stream.extend_from_slice(&bad);
            continue;
        }
        stream.extend_from_slice(&bytes);
        if clean_start {
            expected.insert(i);
        }
        if (0.02..0.025).contains(&r) {
            inj.duplicated += 1;
            stream.extend_from_slice(&bytes);
        }
    }

    let mut dec: Decoder = Decoder::new();
    let chunks: Vec<usize> = (0..997).map(|_| rng.random_range(1..300)).collect();
    let got = feed_all(&mut dec, &stream, &chunks);

    // Zero corrupted frames accepted: every frame is exactly the one sent with its number.
    let mut received = BTreeSet::new();
    let mut dups = 0;
    for (f, check) in &got {
        assert_eq!(f, &sent[f.seq as usize], "accepted a corrupted frame");
        if *check == SeqCheck::Duplicate {
            dups += 1;
        } else {
            assert!(received.insert(f.seq as usize));
        }
    }
    assert_eq!(received, expected, "the frames that came through");
    assert_eq!(dups, inj.duplicated);
    assert_eq!(dec.stats().duplicates as usize, inj.duplicated);
    assert_eq!(dec.stats().stale, 0);

    // Lost-frame count equals what was injected: every frame that did not come through,
    // between the first and the last that did.
    let first = *received.first().unwrap();
    let last = *received.last().unwrap();
    let missing = (first..=last).filter(|i| !received.contains(i)).count();
    assert_eq!(dec.stats().lost as usize, missing);
    let killed_by_neighbour = (first..=last)
        .filter(|i| !received.contains(i) && !faulty[*i])
        .count();
    println!(
        "injected {inj:?}; lost {} = faulted {} + intact frames run into by a corrupted \
         delimiter {killed_by_neighbour}; decoder {:?}",
        dec.stats().lost,
        missing - killed_by_neighbour,
        dec.stats()
    );
    assert_eq!(
        missing - killed_by_neighbour,
        (first..=last).filter(|i| faulty[*i]).count()
    );

    // Resynchronisation within one frame: after garbage before frame i, frame i + 1 comes
    // through whenever it was itself sent clean.
    let mut checked = 0;
    for &i in &garbage_before {
        if i + 1 < N && !faulty[i + 1] {
            assert!(
                received.contains(&(i + 1)),
                "no resync after garbage before frame {i}"
            );
            checked += 1;
        }
    }
    assert!(checked > 50, "{checked}");
    assert!(dec.stats().oversize as usize >= inj.bursts);
    assert!(inj.dropped > 50 && inj.corrupted > 50 && inj.duplicated > 20);
}

// ---------------------------------------------------------------------------------------
// Properties
// ---------------------------------------------------------------------------------------

fn arb_window() -> impl Strategy<Value = WindowResult> {
    (
        any::<u8>(),
        any::<u64>(),
        any::<u32>(),
        any::<u16>(),
        any::<u32>(),
        any::<u32>(),
        proptest::option::of(any::<[u32; 4]>()),
        proptest::option::of((
            any::<i16>(),
            any::<u16>(),
            proptest::option::of(any::<u16>()),
        )),
        any::<u32>(),
    )
        .prop_map(
            |(probe, start, frames, c, f, n, ch, co, flags)| WindowResult {
                probe,
                start,
                frames,
                void_fraction: c,
                bubble_rate: f,
                bubbles: n,
                chords: ch.map(|[mean, median, p10, p90]| ChordTimes {
                    mean,
                    median,
                    p10,
                    p90,
                }),
                correlation: co.map(|(velocity, peak, turbulence)| Correlation {
                    velocity,
                    peak,
                    turbulence,
                }),
                flags,
            },
        )
}

fn arb_label() -> impl Strategy<Value = heapless::String<LABEL_BYTES>> {
    "[a-zA-Z0-9 ._-]{0,16}".prop_map(|s| heapless::String::try_from(s.as_str()).unwrap())
}

fn arb_setting() -> impl Strategy<Value = WindowSetting> {
    prop_oneof![
        Just(WindowSetting::Whole),
        any::<u32>().prop_map(WindowSetting::Frames),
        (
            any::<u32>(),
            any::<u8>(),
            proptest::option::of(any::<u32>())
        )
            .prop_map(|(count, probe, max_frames)| WindowSetting::Bubbles {
                count,
                probe,
                max_frames
            }),
        any::<u32>().prop_map(|frames| WindowSetting::AfterFront { frames }),
    ]
}

fn arb_body() -> impl Strategy<Value = Body> {
    let layout = (
        any::<u8>(),
        any::<u8>(),
        proptest::option::of((any::<u8>(), any::<u16>())),
        any::<i32>(),
        any::<i32>(),
    )
        .prop_map(|(station, leading, t, elevation, x)| ProbeLayout {
            station,
            leading,
            trailing: t.map(|(channel, spacing)| TrailingTip { channel, spacing }),
            elevation,
            x,
        });
    prop_oneof![
        (
            arb_label(),
            any::<u32>(),
            any::<u8>(),
            arb_setting(),
            proptest::collection::vec(layout, 0..=MAX_PROBES)
        )
            .prop_map(|(firmware, sr, channels, window, probes)| Body::Describe(
                DeviceDescription {
                    firmware,
                    sample_rate_millihz: sr,
                    channels,
                    window,
                    probes: probes.into_iter().collect(),
                }
            )),
        proptest::collection::vec(arb_window(), 0..=MAX_WINDOWS_PER_FRAME)
            .prop_map(|ws| Body::Windows(ws.into_iter().collect())),
        (any::<u8>(), any::<u8>(), any::<u64>()).prop_map(|(probe, station, frame)| {
            Body::Front(FrontArrival {
                probe,
                station,
                frame,
            })
        }),
        (
            (any::<u8>(), any::<u64>(), any::<u32>(), any::<u8>()),
            (
                proptest::option::of(any::<u32>()),
                proptest::option::of(any::<u16>()),
                proptest::option::of(any::<u32>()),
                proptest::option::of(any::<u16>()),
                proptest::option::of(any::<u16>()),
                any::<u32>()
            ),
            (
                any::<u8>(),
                proptest::option::of(any::<u16>()),
                proptest::option::of(any::<u16>()),
                proptest::option::of(any::<u16>()),
                proptest::option::of(any::<u16>()),
            )
        )
            .prop_map(
                |((station, slice_start, slice_frames, probes_used), o, u)| {
                    Body::Profile(ProfileFit {
                        station,
                        slice_start,
                        slice_frames,
                        probes_used,
                        y90: o.0,
                        mean_void_fraction: o.1,
                        equivalent_depth: o.2,
                        exponent: o.3,
                        fit_rmse: o.4,
                        flags: o.5,
                        estimate: u.0,
                        y90_se: u.1,
                        mean_void_fraction_se: u.2,
                        exponent_se: u.3,
                        equivalent_depth_se: u.4,
                    })
                }
            ),
        (
            any::<u64>(),
            any::<u64>(),
            any::<u64>(),
            any::<u32>(),
            any::<u32>(),
            any::<u32>(),
            any::<u64>()
        )
            .prop_map(|(a, b, c, d, e, g, f)| Body::Health(Health {
                samples_dropped: a,
                saturated_samples: b,
                tips_stuck: c,
                buffer_high_water: d,
                windows_dropped: e,
                frames_dropped: g,
                uptime_frames: f,
            })),
        (
            any::<u32>(),
            arb_label(),
            any::<u64>(),
            proptest::option::of(any::<u64>())
        )
            .prop_map(
                |(run, label, uptime_frames, utc_ms)| Body::RunStart(RunStart {
                    run,
                    label,
                    uptime_frames,
                    utc_ms
                })
            ),
        (arb_label(), proptest::option::of(any::<u64>()))
            .prop_map(|(label, utc_ms)| Body::StartRun(StartRun { label, utc_ms })),
        Just(Body::StopRun),
        arb_setting().prop_map(Body::SetWindow),
        any::<u32>().prop_map(|probes| Body::Relearn(Relearn { probes })),
        Just(Body::DescribeRequest),
        (any::<u8>(), any::<bool>(), any::<i16>(), any::<i16>()).prop_map(
            |(probe, trailing, air, water)| Body::SetLevels(SetLevels {
                probe,
                trailing,
                air,
                water
            })
        ),
        any::<u64>().prop_map(|utc_ms| Body::SetClock(SetClock { utc_ms })),
        any::<u32>().prop_map(|offset| Body::ReadLog(ReadLog { offset })),
        (
            any::<u32>(),
            any::<u32>(),
            proptest::collection::vec(any::<u8>(), 0..=wire::LOG_CHUNK_BYTES)
        )
            .prop_map(|(offset, total, d)| Body::LogChunk(LogChunk {
                offset,
                total,
                data: heapless::Vec::from_slice(&d).unwrap(),
            })),
        any::<u16>().prop_map(|seq| Body::Ack(Ack { seq })),
        (
            proptest::option::of(any::<u16>()),
            any::<u64>(),
            proptest::option::of((0u32..3, any::<u32>(), any::<u32>(), any::<u32>()))
        )
            .prop_map(
                |(supply_mv, uptime_ms, logger)| Body::DeviceStatus(DeviceStatus {
                    supply_mv,
                    uptime_ms,
                    logger: logger.map(|(s, remaining, used_bytes, capacity_bytes)| LoggerStatus {
                        state: match s {
                            0 => LoggerState::Idle,
                            1 => LoggerState::Armed,
                            _ => LoggerState::Capturing { remaining },
                        },
                        used_bytes,
                        capacity_bytes,
                    }),
                })
            ),
        (any::<u16>(), any::<u8>()).prop_map(|(seq, r)| Body::Nack(Nack {
            seq,
            reason: NackReason::from_code(r)
        })),
    ]
}

fn arb_frame() -> impl Strategy<Value = Frame> {
    (any::<u16>(), any::<u16>(), arb_body()).prop_map(|(device, seq, body)| Frame {
        device,
        seq,
        body,
    })
}

/// Frames the spec's reference procedure accepts in `bytes` (split at every 0x00).
fn ref_accepts(bytes: &[u8]) -> usize {
    bytes
        .split(|&b| b == 0)
        .filter(|seg| {
            let Some(d) = ref_cobs_decode(seg) else {
                return false;
            };
            d.len() >= 8
                && ref_crc32(&d[..d.len() - 4])
                    == u32::from_le_bytes(d[d.len() - 4..].try_into().unwrap())
        })
        .count()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(512))]

    #[test]
    fn any_frame_round_trips_within_the_bound(f in arb_frame()) {
        let bytes = enc(&f);
        prop_assert!(bytes.len() <= MAX_FRAME_BYTES);
        let mut b = bytes.clone();
        prop_assert_eq!(decode(&mut b), Ok(f.clone()));
        let mut dec: Decoder = Decoder::new();
        let got = feed_all(&mut dec, &bytes, &[1]);
        prop_assert_eq!(got.len(), 1);
        prop_assert_eq!(&got[0].0, &f);
    }

    #[test]
    fn arbitrary_bytes_never_panic_and_yield_only_crc_valid_frames(
        data in proptest::collection::vec(any::<u8>(), 0..3000),
        chunks in proptest::collection::vec(1usize..400, 1..8),
    ) {
        let mut dec: Decoder = Decoder::new();
        let got = feed_all(&mut dec, &data, &chunks);
        // A frame is yielded only where the reference check finds a valid CRC.
        prop_assert!(got.len() <= ref_accepts(&data));
        for (f, _) in &got {
            let mut b = enc(f);
            prop_assert_eq!(decode(&mut b), Ok(f.clone()));
        }
        let s = dec.stats();
        prop_assert!(s.bytes_discarded <= data.len() as u64);
    }

    #[test]
    fn mutated_streams_yield_only_frames_that_were_sent(
        frames in proptest::collection::vec(arb_frame(), 1..12),
        seed in any::<u64>(),
        mutations in 0usize..12,
    ) {
        let mut rng = StdRng::seed_from_u64(seed);
        let mut bytes: Vec<u8> = frames.iter().flat_map(enc).collect();
        for _ in 0..mutations {
            if bytes.is_empty() {
                break;
            }
            let at = rng.random_range(0..bytes.len());
            match rng.random_range(0..4) {
                0 => bytes[at] ^= 1 << rng.random_range(0..8),
                1 => { bytes.remove(at); }
                2 => bytes.insert(at, rng.random()),
                _ => {
                    let end = (at + rng.random_range(1..20)).min(bytes.len());
                    let copy = bytes[at..end].to_vec();
                    bytes.splice(at..at, copy);
                }
            }
        }
        let mut dec: Decoder = Decoder::new();
        let chunks: Vec<usize> = (0..16).map(|_| rng.random_range(1..100)).collect();
        for (f, _) in feed_all(&mut dec, &bytes, &chunks) {
            prop_assert!(frames.contains(&f), "accepted a frame never sent: {:?}", f);
        }
    }
}

// ---------------------------------------------------------------------------------------
// Frame sizes, link load and the streamer
// ---------------------------------------------------------------------------------------

const LINK_8N1_115200: f64 = 11_520.0;

#[test]
fn frame_sizes_and_link_load() {
    let one = Frame {
        device: 1,
        seq: 40_000,
        body: Body::window(typical_window(3)),
    };
    let single = enc(&one).len();
    let packed = Frame {
        device: 1,
        seq: 40_000,
        body: Body::Windows((0..8).map(typical_window).collect()),
    };
    let eight = enc(&packed).len();
    let per_probe_frames = 8.0 * 20.0 * single as f64;
    let packed_frames = 20.0 * eight as f64;
    println!(
        "typical window result: {single} bytes alone in a frame; 8 probes x 20 windows/s as \
         single frames = {per_probe_frames} B/s = {:.1} % of 115200 8N1",
        100.0 * per_probe_frames / LINK_8N1_115200
    );
    println!(
        "8 results packed in one frame: {eight} bytes ({:.1} per result); 20 frames/s = \
         {packed_frames} B/s = {:.1} % of the link",
        eight as f64 / 8.0,
        100.0 * packed_frames / LINK_8N1_115200
    );
    assert!(packed_frames <= 0.5 * LINK_8N1_115200);
    println!(
        "memory (this target): Decoder {} B, Streamer<64> {} B, Frame {} B, WindowResult {} B",
        std::mem::size_of::<Decoder>(),
        std::mem::size_of::<Streamer<64>>(),
        std::mem::size_of::<Frame>(),
        std::mem::size_of::<WindowResult>()
    );
}

fn describe() -> Body {
    sample_frames().remove(0).body
}

/// Run a device for `seconds`: 8 probes x `rate` windows/s, a health frame each second, a
/// front now and then; the streamer feeds a link of `link` bytes/s polled every 100 µs with
/// a 64-byte FIFO. Returns the host's frames, the streamer and the decoder.
fn run_link(seconds: u64, rate: u64, baud: u32) -> (Vec<Frame>, Streamer<64>, Decoder, u64) {
    run_link_with(seconds, rate, baud, false)
}

/// A typical window's derived figures (C 0.25, F 100 Hz, V 2.5 m/s: chord lengths of about
/// 3 mm, a = 160 1/m, d = 9.4 mm, 5 bubbles judged), as a device sends them beside the
/// window result.
fn typical_derived(probe: u8, start: u64) -> frothline_core::wire::DerivedResult {
    frothline_core::wire::DerivedResult {
        probe,
        start,
        chord_lengths: Some(frothline_core::wire::ChordLengths {
            mean: 3_000,
            median: 2_750,
            p90: 5_250,
        }),
        interfacial_area: Some(1_600),
        sauter_diameter: Some(9_375),
        judged: 5,
        pairs: 1,
        clusters: 1,
        clustered: 2,
        random_pair_probability: Some(1_800),
    }
}

/// A typical tip-health report of a dual-tip probe (levels ±25000 counts, 10 interfaces).
fn typical_tips(probe: u8, start: u64) -> TipReport {
    let tip = TipState {
        levels: Some(TipLevels {
            air: 25_000,
            water: 3_000,
        }),
        interfaces: 10,
        bubbles: 5,
        void_fraction: 2_500,
        flags: 0,
    };
    TipReport {
        probe,
        start,
        frames: 1_000,
        leading: tip,
        trailing: Some(tip),
    }
}

/// [`run_link`]; with `device_stream` every window result also brings its derived figures
/// (kind 0x08) and its probe's tip-health report (kind 0x09, sent after each health frame),
/// and each health frame a device status (kind 0x0C), as the firmware and the simulated
/// device send them.
fn run_link_with(
    seconds: u64,
    rate: u64,
    baud: u32,
    device_stream: bool,
) -> (Vec<Frame>, Streamer<64>, Decoder, u64) {
    let mut s = Streamer::<64>::new(StreamerConfig::uart_8n1(9, baud, 1_000_000));
    let mut dec: Decoder = Decoder::new();
    let mut host = Vec::new();
    let mut wire_bytes = 0u64;
    s.offer(describe());
    let step = 100u64;
    let window_us = 1_000_000 / rate;
    let mut next_window = window_us;
    let mut k = 0u64;
    let mut t = 0u64;
    let end = seconds * 1_000_000;
    // Offer for `seconds`, then drain for two more.
    while t <= end + 2_000_000 {
        if t <= end && t >= next_window {
            for p in 0..8u8 {
                let mut w = typical_window(p);
                w.start = k * 1000;
                s.offer(Body::window(w));
                if device_stream {
                    s.offer_derived(typical_derived(p, w.start));
                    s.offer_tips(typical_tips(p, w.start));
                }
            }
            k += 1;
            next_window += window_us;
        }
        if t.is_multiple_of(1_000_000) && t > 0 && t <= end {
            s.offer(Body::Health(Health {
                uptime_frames: t / 50,
                ..Health::default()
            }));
            if device_stream {
                s.offer_status(DeviceStatus {
                    supply_mv: Some(3_300),
                    uptime_ms: t / 1_000,
                    logger: None,
                });
            }
        }
        if t.is_multiple_of(3_300_000) && t <= end {
            s.offer(Body::Front(FrontArrival {
                probe: 0,
                station: 0,
                frame: t / 50,
            }));
        }
        let mut room = 64usize;
        while let Some(bytes) = s.poll(t, room) {
            room -= bytes.len();
            wire_bytes += bytes.len() as u64;
            let mut rest = bytes;
            while !rest.is_empty() {
                let r = dec.feed(rest);
                rest = r.remaining();
                if let FeedResult::Frame { frame, .. } = r {
                    host.push(frame);
                }
            }
            if room == 0 {
                break;
            }
        }
        t += step;
    }
    (host, s, dec, wire_bytes)
}

#[test]
fn streamer_keeps_up_with_8_probes_at_20_windows_per_second_on_115200() {
    let (host, s, dec, bytes) = run_link(30, 20, 115_200);
    let load = bytes as f64 / 30.0 / LINK_8N1_115200;
    println!(
        "streamer at 115200: {} frames, {} results, {bytes} bytes in 30 s = {:.1} % of the \
         link; {:?}",
        host.len(),
        s.stats().windows_sent,
        100.0 * load,
        s.stats()
    );
    assert_eq!(s.stats().windows_dropped, 0);
    assert_eq!(dec.stats().lost, 0);
    assert_eq!(s.stats().windows_sent, 8 * 20 * 30);
    assert!(load <= 0.5, "load {load}");
    // The description is the first frame (the power-on marker), then the front offered at
    // t = 0 (urgent) before any result.
    assert!(matches!(host[0].body, Body::Describe(_)));
    assert_eq!(host[0].seq, 0);
    assert!(matches!(host[1].body, Body::Front(_)));
    let healths = host
        .iter()
        .filter(|f| matches!(f.body, Body::Health(_)))
        .count();
    assert!(healths >= 29);
}

/// The whole stream of a device at 8 probes x 20 windows/s: window results, their derived
/// figures and the tip health, on 115200 baud (the figures of docs/wire-protocol.md,
/// section 12).
#[test]
fn a_device_stream_with_derived_figures_fits_115200() {
    let (host, s, dec, bytes) = run_link_with(30, 20, 115_200, true);
    let load = bytes as f64 / 30.0 / LINK_8N1_115200;
    let count = |k: Kind| host.iter().filter(|f| f.body.kind() == k).count();
    println!(
        "device stream at 115200: {} frames ({} Windows, {} Derived, {} TipHealth, {} \
         DeviceStatus), {bytes} bytes in 30 s = {:.0} B/s = {:.1} % of the link; {:?}",
        host.len(),
        count(Kind::Windows),
        count(Kind::Derived),
        count(Kind::TipHealth),
        count(Kind::DeviceStatus),
        bytes as f64 / 30.0,
        100.0 * load,
        s.stats()
    );
    assert_eq!(s.stats().windows_dropped, 0);
    assert_eq!(dec.stats().lost, 0);
    assert!(count(Kind::Derived) > 0 && count(Kind::TipHealth) > 0);
    assert_eq!(count(Kind::DeviceStatus), 30, "one status per health frame");
    assert!(load <= 1.0, "load {load}");
}

#[test]
fn streamer_overloaded_drops_oldest_windows_and_says_so() {
    // 9600 baud = 960 B/s against ~5 kB/s of results: most windows must go.
    let (host, s, dec, _) = run_link(10, 20, 9600);
    let st = s.stats();
    println!("streamer at 9600: {st:?}");
    assert!(st.windows_dropped > 0);
    assert_eq!(dec.stats().lost, 0, "streamer drops leave no sequence gap");
    // Every health frame and front made it; the last health reports the drops up to then.
    let healths: Vec<&Health> = host
        .iter()
        .filter_map(|f| match &f.body {
            Body::Health(h) => Some(h),
            _ => None,
        })
        .collect();
    assert!(healths.len() >= 9, "{}", healths.len());
    assert!(healths
        .windows(2)
        .all(|w| w[0].windows_dropped <= w[1].windows_dropped));
    let reported = healths.last().unwrap().windows_dropped;
    assert!(reported > 0 && reported <= st.windows_dropped);
    let fronts = host
        .iter()
        .filter(|f| matches!(f.body, Body::Front(_)))
        .count();
    assert_eq!(fronts, 4); // t = 0, 3.3, 6.6, 9.9 s
                           // Results sent plus dropped plus still queued equal results offered.
    let offered = 8 * 20 * 10;
    assert_eq!(
        st.windows_sent + st.windows_dropped as u64 + s.queued_windows() as u64,
        offered
    );
    // What arrived is the newest data: window starts only increase.
    let starts: Vec<u64> = host
        .iter()
        .filter_map(|f| match &f.body {
            Body::Windows(ws) => Some(ws.iter().map(|w| w.start).collect::<Vec<_>>()),
            _ => None,
        })
        .flatten()
        .collect();
    assert!(starts.windows(2).all(|w| w[0] <= w[1]));
}

#[test]
fn records_convert_to_window_results() {
    use frothline_core::{
        Chain, ChainConfig, LevelSource, Polarity, ProbeConfig, TipConfig, WindowPolicy,
    };
    let mut cfg = ChainConfig::<1>::new(1, WindowPolicy::Frames(1000));
    cfg.probes
        .push(ProbeConfig::single(TipConfig {
            channel: 0,
            polarity: Polarity::AirHigh,
            levels: LevelSource::Fixed {
                air: 1000,
                water: 0,
            },
        }))
        .unwrap();
    let mut chain: Chain<1> = Chain::new(cfg).unwrap();
    // Bubbles of 20 samples every 100 samples: C = 0.2, 10 bubbles per 1000 frames.
    let samples: Vec<i16> = (0..1000)
        .map(|i| {
            if (50..70).contains(&(i % 100)) {
                1000
            } else {
                0
            }
        })
        .collect();
    assert_eq!(chain.push(&samples), 1000);
    let rec = chain.poll().expect("one window");
    let w = WindowResult::from_probe_window(&rec, 20_000.0);
    assert_eq!((w.start, w.frames, w.bubbles), (0, 1000, 10));
    assert_eq!(w.void_fraction, 2000);
    assert_eq!(w.bubble_rate, quant::rate(200.0));
    assert_eq!(w.chords.unwrap().mean, 1000, "20 samples at 20 kHz = 1 ms");
    assert!(w.correlation.is_none());
    assert!((w.void_fraction_value() - 0.2).abs() < 1e-6);
}

// ---------------------------------------------------------------------------------------
// Soak
// ---------------------------------------------------------------------------------------

#[test]
#[ignore = "soak run: cargo test --release --test wire -- --ignored soak --nocapture"]
fn soak_decoder_with_random_inputs() {
    let n: u64 = std::env::var("WIRE_SOAK_INPUTS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1_000_000);
    let mut rng = StdRng::seed_from_u64(0x50A4);
    let valid: Vec<Vec<u8>> = sample_frames()
        .iter()
        .chain(largest_frames().iter())
        .map(enc)
        .collect();
    let originals: Vec<Frame> = sample_frames()
        .into_iter()
        .chain(largest_frames())
        .collect();
    let t0 = std::time::Instant::now();
    let (mut bytes_total, mut accepted) = (0u64, 0u64);
    let mut input = Vec::with_capacity(4096);
    for _ in 0..n {
        input.clear();
        let mutated = rng.random_bool(0.5);
        if mutated {
            for _ in 0..rng.random_range(1..4) {
                input.extend_from_slice(&valid[rng.random_range(0..valid.len())]);
            }
            for _ in 0..rng.random_range(0..6) {
                let at = rng.random_range(0..input.len());
                match rng.random_range(0..3) {
                    0 => input[at] ^= 1 << rng.random_range(0..8),
                    1 => {
                        input.remove(at);
                    }
                    _ => input.insert(at, rng.random()),
                }
                if input.is_empty() {
                    break;
                }
            }
        } else {
            let len = rng.random_range(0..256);
            input.extend((0..len).map(|_| rng.random::<u8>()));
        }
        bytes_total += input.len() as u64;
        let mut dec: Decoder = Decoder::new();
        let chunk = rng.random_range(1..64);
        for (f, _) in feed_all(&mut dec, &input, &[chunk]) {
            accepted += 1;
            assert!(
                originals.contains(&f),
                "soak accepted a frame never sent: {f:?}"
            );
        }
    }
    let dt = t0.elapsed();
    println!(
        "soak: {n} inputs, {bytes_total} bytes, {accepted} frames accepted (all genuine), \
         no panic, in {:.2} s",
        dt.as_secs_f64()
    );
}

// ---------------------------------------------------------------------------------------
// The sequence state machine of docs/wire-protocol.md section 9
// ---------------------------------------------------------------------------------------

fn seq_frame(seq: u16, describe: bool) -> Vec<u8> {
    let body = if describe {
        sample_frames()[0].body.clone()
    } else {
        Body::Ack(Ack { seq: 1 })
    };
    enc(&Frame {
        device: 9,
        seq,
        body,
    })
}

fn checks(dec: &mut Decoder, seqs: &[(u16, bool)]) -> Vec<SeqCheck> {
    let mut bytes = Vec::new();
    for &(s, d) in seqs {
        bytes.extend_from_slice(&seq_frame(s, d));
    }
    feed_all(dec, &bytes, &[1000])
        .into_iter()
        .map(|(_, c)| c)
        .collect()
}

#[test]
fn a_power_on_describe_restarts_the_numbering_from_any_number() {
    // A device at 40000 restarts: its first frame is a Describe with seq 0. Read as a gap
    // it would be 25535 frames lost; the state machine calls it a restart.
    let mut dec: Decoder = Decoder::new();
    let got = checks(
        &mut dec,
        &[(39_999, false), (40_000, false), (0, true), (1, false)],
    );
    assert_eq!(
        got,
        [
            SeqCheck::First,
            SeqCheck::InOrder,
            SeqCheck::Restarted,
            SeqCheck::InOrder
        ]
    );
    assert_eq!(
        (dec.stats().lost, dec.stats().restarts, dec.stats().stale),
        (0, 1, 0)
    );
}

#[test]
fn a_far_jump_is_held_in_doubt_until_the_next_frame() {
    let mut dec: Decoder = Decoder::new();
    // A stray far ahead (d = 9999 >= MAX_GAP), then the old numbering goes on: one stale.
    let got = checks(&mut dec, &[(100, false), (10_100, false), (101, false)]);
    assert_eq!(got, [SeqCheck::First, SeqCheck::Stale, SeqCheck::InOrder]);
    assert_eq!(
        (dec.stats().lost, dec.stats().stale, dec.stats().restarts),
        (0, 1, 0)
    );
    // A jump followed by its successor: the sender restarted (no loss counted), and the
    // first of the two is no longer counted stale. Across the wrap: 65535 then 0.
    let got = checks(&mut dec, &[(65_535, false), (0, false), (1, false)]);
    assert_eq!(
        got,
        [SeqCheck::Stale, SeqCheck::Restarted, SeqCheck::InOrder]
    );
    assert_eq!(
        (dec.stats().lost, dec.stats().stale, dec.stats().restarts),
        (0, 1, 1)
    );
    // Below MAX_GAP a jump is loss.
    let got = checks(&mut dec, &[(4_096, false)]);
    assert_eq!(got, [SeqCheck::Gap(4094)]);
    assert_eq!(wire::decoder::MAX_GAP, 4096);
    // A repeat is a duplicate and leaves the state alone.
    let got = checks(&mut dec, &[(4_096, false), (4_097, false)]);
    assert_eq!(got, [SeqCheck::Duplicate, SeqCheck::InOrder]);
}
