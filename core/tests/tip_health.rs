//! The streamer's tip-health policy (docs/wire-protocol.md, section 11): the latest report
//! of each probe, sent after a health frame, before window results, 6 per frame.

use frothline_core::wire::{
    decode, Body, Health, Streamer, StreamerConfig, TipLevels, TipReport, TipState, WindowResult,
    MAX_FRAME_BYTES, MAX_TIPS_PER_FRAME,
};

fn report(probe: u8, start: u64, interfaces: u32) -> TipReport {
    TipReport {
        probe,
        start,
        frames: 2_000,
        leading: TipState {
            levels: Some(TipLevels {
                air: 3_000,
                water: -3_000,
            }),
            interfaces,
            bubbles: interfaces / 2,
            void_fraction: 2_500,
            flags: 0,
        },
        trailing: None,
    }
}

fn window(probe: u8) -> WindowResult {
    WindowResult {
        probe,
        start: 0,
        frames: 2_000,
        void_fraction: 0,
        bubble_rate: 0,
        bubbles: 0,
        chords: None,
        correlation: None,
        flags: 0,
    }
}

/// Every frame the streamer has, decoded, in order (no rate limit).
fn drain(s: &mut Streamer<16, 8>) -> Vec<Body> {
    let mut bytes = Vec::new();
    while let Some(b) = s.poll(0, MAX_FRAME_BYTES) {
        bytes.extend_from_slice(b);
    }
    bytes
        .split_mut(|&b| b == 0)
        .filter(|f| !f.is_empty())
        .map(|f| {
            let mut v = f.to_vec();
            v.push(0);
            decode(&mut v).expect("a valid frame").body
        })
        .collect()
}

#[test]
fn tip_reports_wait_for_a_health_frame_and_the_latest_of_a_probe_wins() {
    let mut s: Streamer<16, 8> = Streamer::new(StreamerConfig {
        device: 3,
        link_bytes_per_s: 0,
        ticks_per_s: 1_000_000,
        burst_bytes: 64,
    });
    for p in 0..8 {
        s.offer_tips(report(p, 0, 10));
    }
    s.offer_tips(report(3, 2_000, 40));
    s.offer_window(window(0));
    // No health frame yet: the window goes, the reports wait.
    let first = drain(&mut s);
    assert!(matches!(first.as_slice(), [Body::Windows(_)]), "{first:?}");
    s.offer_health(Health::default());
    s.offer_window(window(1));
    let got = drain(&mut s);
    let kinds: Vec<_> = got.iter().map(|b| b.kind()).collect();
    assert_eq!(
        kinds,
        vec![
            frothline_core::wire::Kind::Health,
            frothline_core::wire::Kind::TipHealth,
            frothline_core::wire::Kind::TipHealth,
            frothline_core::wire::Kind::Windows,
        ]
    );
    let (Body::TipHealth(a), Body::TipHealth(b)) = (&got[1], &got[2]) else {
        unreachable!()
    };
    assert_eq!(a.len(), MAX_TIPS_PER_FRAME);
    let probes: Vec<u8> = a.iter().chain(b.iter()).map(|r| r.probe).collect();
    assert_eq!(
        probes,
        (0..8).collect::<Vec<u8>>(),
        "every probe once, lowest first"
    );
    assert_eq!(
        a[3],
        report(3, 2_000, 40),
        "the later window of probe 3 replaced the first"
    );
    // Sent reports are gone: the next health frame carries only what came since.
    s.offer_tips(report(5, 4_000, 12));
    s.offer_health(Health::default());
    let again = drain(&mut s);
    assert_eq!(again.len(), 2);
    assert!(matches!(&again[1], Body::TipHealth(v) if v.len() == 1 && v[0].probe == 5));
    assert!(s.is_idle());
}
