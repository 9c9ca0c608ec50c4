//! Full windows (kind 0x0B, docs/wire-protocol.md): the streamer sends window results with
//! their extras once they are on, the older plain results first, and only when it keeps
//! extras for every queued result.

use frothline_core::wire::{
    decode, Body, Streamer, StreamerConfig, WindowExtras, WindowResult, MAX_FRAME_BYTES,
    MAX_FULL_WINDOWS_PER_FRAME, MAX_PROBES,
};

fn window(probe: u8, start: u64) -> WindowResult {
    WindowResult {
        probe,
        start,
        frames: 1_000,
        void_fraction: 100,
        bubble_rate: 0,
        bubbles: 0,
        chords: None,
        correlation: None,
        flags: 0,
    }
}

fn drain<const X: usize>(s: &mut Streamer<16, 8, MAX_PROBES, X>) -> Vec<Body> {
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
            decode(&mut v).unwrap().body
        })
        .collect()
}

fn config() -> StreamerConfig {
    StreamerConfig {
        link_bytes_per_s: 0,
        ..StreamerConfig::uart_8n1(3, 115_200, 20_000)
    }
}

#[test]
fn plain_results_go_first_then_full_windows_in_order() {
    let mut s: Streamer<16, 8, MAX_PROBES, 16> = Streamer::new(config());
    s.offer_window(window(0, 0));
    s.offer_window(window(1, 0));
    assert!(s.set_extras(true));
    let x = |d: u32| WindowExtras {
        droplet_chord_mean: Some(d),
        ..Default::default()
    };
    for k in 0..5u64 {
        s.offer_full(window(0, 1_000 * (k + 1)), x(k as u32));
    }
    let bodies = drain(&mut s);
    assert_eq!(bodies.len(), 3, "{bodies:?}");
    let Body::Windows(plain) = &bodies[0] else {
        panic!("{:?}", bodies[0])
    };
    assert_eq!(plain.len(), 2);
    let mut k = 0u64;
    for b in &bodies[1..] {
        let Body::FullWindows(fs) = b else {
            panic!("{b:?}")
        };
        assert!(fs.len() <= MAX_FULL_WINDOWS_PER_FRAME);
        for f in fs {
            assert_eq!(f.result.start, 1_000 * (k + 1));
            assert_eq!(f.extras.droplet_chord_mean, Some(k as u32));
            k += 1;
        }
    }
    assert_eq!(k, 5);
    // Off again: plain results.
    assert!(s.set_extras(false));
    s.offer_full(window(2, 9_000), x(9));
    assert!(matches!(&drain(&mut s)[..], [Body::Windows(w)] if w.len() == 1));
}

#[test]
fn a_full_queue_drops_a_result_with_its_extras() {
    let mut s: Streamer<16, 8, MAX_PROBES, 16> = Streamer::new(config());
    assert!(s.set_extras(true));
    for k in 0..20u64 {
        s.offer_full(
            window(0, k),
            WindowExtras {
                droplet_chord_mean: Some(k as u32),
                ..Default::default()
            },
        );
    }
    let mut seen = Vec::new();
    for b in drain(&mut s) {
        let Body::FullWindows(fs) = b else {
            panic!("{b:?}")
        };
        for f in fs {
            // Each result keeps its own extras.
            assert_eq!(f.extras.droplet_chord_mean, Some(f.result.start as u32));
            seen.push(f.result.start);
        }
    }
    assert_eq!(seen, (4..20).collect::<Vec<_>>(), "the 4 oldest dropped");
}

#[test]
fn a_streamer_without_room_for_extras_refuses_them() {
    let mut s: Streamer<16> = Streamer::new(config());
    assert!(!s.set_extras(true));
    assert!(!s.extras_on());
    s.offer_full(window(0, 0), WindowExtras::default());
    assert!(matches!(&drain(&mut s)[..], [Body::Windows(_)]));
}
