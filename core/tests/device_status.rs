//! The device status frame (kind 0x0C, docs/wire-protocol.md): the streamer sends it right
//! after the health frame, a newer one replacing a queued one; the supply voltage from an
//! internal reference reading.

use frothline_core::logbook::LoggerState;
use frothline_core::wire::device_status::supply_from_reference;
use frothline_core::wire::{
    decode, Body, Decoder, DeviceStatus, FeedResult, Health, LoggerStatus, Streamer,
    StreamerConfig, TipLevels, TipReport, TipState, WindowResult,
};

fn status(uptime_ms: u64, state: LoggerState) -> DeviceStatus {
    DeviceStatus {
        supply_mv: Some(3_300),
        uptime_ms,
        logger: Some(LoggerStatus {
            state,
            used_bytes: 4_096,
            capacity_bytes: 61_440,
        }),
    }
}

fn window(probe: u8) -> WindowResult {
    WindowResult {
        probe,
        start: 0,
        frames: 1000,
        void_fraction: 2500,
        bubble_rate: 10_000,
        bubbles: 5,
        chords: None,
        correlation: None,
        flags: 0,
    }
}

fn tips(probe: u8) -> TipReport {
    let tip = TipState {
        levels: Some(TipLevels {
            air: 25_000,
            water: -3_000,
        }),
        interfaces: 10,
        bubbles: 5,
        void_fraction: 2500,
        flags: 0,
    };
    TipReport {
        probe,
        start: 0,
        frames: 1000,
        leading: tip,
        trailing: None,
    }
}

/// Every frame the streamer sends, in order.
fn drain(s: &mut Streamer<16>) -> Vec<Body> {
    let mut dec: Decoder = Decoder::new();
    let mut out = Vec::new();
    let mut t = 0;
    while !s.is_idle() {
        t += 1;
        let Some(bytes) = s.poll(t, 64) else { continue };
        let mut rest = bytes;
        while !rest.is_empty() {
            let r = dec.feed(rest);
            rest = r.remaining();
            if let FeedResult::Frame { frame, .. } = r {
                out.push(frame.body);
            }
        }
    }
    out
}

#[test]
fn status_follows_health_and_precedes_tip_health_and_windows() {
    let mut s: Streamer<16> = Streamer::new(StreamerConfig {
        device: 3,
        link_bytes_per_s: 0,
        ticks_per_s: 1,
        burst_bytes: 64,
    });
    s.offer_window(window(0));
    s.offer_tips(tips(0));
    // Offered before the health frame, and replaced by a newer one: only the newer goes.
    s.offer_status(status(900, LoggerState::Idle));
    s.offer_status(status(1_000, LoggerState::Armed));
    s.offer_health(Health::default());
    let kinds: Vec<_> = drain(&mut s).iter().map(|b| b.kind()).collect();
    use frothline_core::wire::Kind;
    assert_eq!(
        kinds,
        [
            Kind::Health,
            Kind::DeviceStatus,
            Kind::TipHealth,
            Kind::Windows
        ]
    );
    assert_eq!(s.stats().replaced, 1);
    // The status on its own (a device that sends it without a health frame) goes too.
    s.offer_status(status(2_000, LoggerState::Capturing { remaining: 3 }));
    match drain(&mut s).as_slice() {
        [Body::DeviceStatus(d)] => {
            assert_eq!(d.uptime_ms, 2_000);
            assert_eq!(d.logger_state_name(), "capturing");
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn frame_size_of_a_typical_status() {
    // A field logger a minute and a half after power-up, capturing (the golden vector's
    // status): 25 bytes on the wire; once a second that is 25 B/s, 0.2 % of a 115 200-baud
    // 8N1 link.
    let f = frothline_core::wire::Frame {
        device: 7,
        seq: 311,
        body: Body::DeviceStatus(status(93_450, LoggerState::Capturing { remaining: 17 })),
    };
    let mut buf = [0u8; frothline_core::wire::MAX_FRAME_BYTES];
    let n = frothline_core::wire::encode(&f, &mut buf).unwrap().len();
    println!("device status frame: {n} bytes");
    assert!(n <= 26, "{n}");
    assert_eq!(decode(&mut buf[..n]).map(|g| g.body), Ok(f.body));
    assert_eq!(
        DeviceStatus::default().logger_state_name(),
        "none",
        "no logger"
    );
}

/// VDDA from the internal reference, as the STM32F4 reference manual (RM0383, section on
/// the internal reference voltage) gives it: VDDA = 3.3 V x VREFINT_CAL / VREFINT_DATA,
/// the calibration value taken at VDDA = 3.3 V; and from the datasheet's nominal
/// VREFINT = 1.21 V (DS10314) against the 12-bit full scale: VDDA = 1.21 V x 4095 / raw.
#[test]
fn supply_from_the_internal_reference() {
    // A reading equal to the calibration value: the supply is the calibration's 3.3 V.
    assert_eq!(supply_from_reference(3_300, 1_500, 1_500), Some(3_300));
    // A higher reading means a lower supply: 3.3 V x 1500 / 1650 = 3.0 V.
    assert_eq!(supply_from_reference(3_300, 1_500, 1_650), Some(3_000));
    // Nominal: 1210 mV x 4095 / 1502 = 3298.97 -> 3299 mV.
    assert_eq!(supply_from_reference(1_210, 4_095, 1_502), Some(3_299));
    // No conversion, and a reading so small the supply overflows u16 millivolts.
    assert_eq!(supply_from_reference(1_210, 4_095, 0), None);
    assert_eq!(supply_from_reference(1_210, 4_095, 1), None);
}
