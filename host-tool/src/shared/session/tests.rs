//! Tests of a session: frames in, events, CSV rows and archive out.

use super::*;
use frothline_core::wire::{encode, ChordTimes, Frame, FrontArrival, ProbeLayout, MAX_FRAME_BYTES};

fn describe(device: u16) -> Frame {
    let mut d = DeviceDescription {
        firmware: Default::default(),
        sample_rate_millihz: 20_000_000,
        channels: 2,
        window: WindowSetting::Frames(2000),
        probes: Default::default(),
    };
    let _ = d.firmware.push_str("t-1");
    let _ = d.probes.push(ProbeLayout {
        station: 0,
        leading: 0,
        trailing: None,
        elevation: 125,
        x: 0,
    });
    Frame {
        device,
        seq: 0,
        body: Body::Describe(d),
    }
}

fn window(i: u64) -> WindowResult {
    WindowResult {
        probe: 0,
        start: i * 2000,
        frames: 2000,
        void_fraction: 1234,
        bubble_rate: 4567,
        bubbles: 9,
        chords: Some(ChordTimes {
            mean: 1500,
            median: 1200,
            p10: 300,
            p90: 3000,
        }),
        correlation: None,
        flags: 0,
    }
}

fn enc(f: &Frame) -> Vec<u8> {
    let mut buf = [0u8; MAX_FRAME_BYTES];
    encode(f, &mut buf).unwrap().to_vec()
}

/// Frames of protocol version 1 are skipped and said so, once, with what to do.
#[test]
fn version_1_frames_are_refused_with_a_clear_message() {
    let mut s = Session::new(SessionOptions {
        ports: vec!["old".into()],
        ..Default::default()
    })
    .unwrap();
    // The version-1 Ack of the version-1 spec, three times (seq 305 each: repeats).
    let v1 = [
        0x0b, 0x01, 0x07, 0x30, 0xb1, 0x02, 0x29, 0x7e, 0x38, 0x8d, 0x8c, 0x00,
    ];
    let events = s.received(0, 1, &v1.repeat(3)).unwrap();
    let lines: Vec<String> = events
        .iter()
        .filter_map(|e| describe_event(e, &["old".to_string()]))
        .collect();
    assert!(
        lines[0].contains("protocol version 1 skipped: this build reads version 2"),
        "{lines:?}"
    );
    let r = s.finish().unwrap();
    let w = r.version_warnings();
    assert_eq!(w.len(), 1);
    assert!(w[0].contains("3 frame(s) of protocol version 1"), "{w:?}");
}

/// A layout naming fewer probes than the device describes: the summary says so, and
/// which probes fall back to p-names.
#[test]
fn a_layout_with_fewer_probes_than_the_device_is_reported() {
    let layout = Layout::parse(
        "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"A\"\nelevation_mm = 1.0\nleading = 0\n",
        std::path::Path::new("one.toml"),
    )
    .unwrap();
    let mut s = Session::new(SessionOptions {
        ports: vec!["test".into()],
        layout: Some(layout),
        ..Default::default()
    })
    .unwrap();
    let mut f = describe(3);
    if let Body::Describe(d) = &mut f.body {
        for leading in 1..4 {
            let _ = d.probes.push(ProbeLayout {
                station: 0,
                leading,
                trailing: None,
                elevation: 125,
                x: 0,
            });
        }
    }
    s.received(0, 1, &enc(&f)).unwrap();
    s.received(0, 2, &enc(&f)).unwrap();
    let r = s.finish().unwrap();
    assert_eq!(r.layout_mismatches.len(), 1, "{:?}", r.layout_mismatches);
    let line = r.results_line("-");
    assert!(
        line.contains("device 3 describes 4 probes, the layout names 1") && line.contains("p1.."),
        "{line}"
    );
}

/// A stream of frames with faults at the host: some frames dropped whole, some
/// corrupted (a byte flipped), garbage inserted, one duplicated. No corrupted frame may
/// be accepted, the lost count must equal the dropped plus corrupted frames (their
/// sequence numbers are missing), and every frame after a fault must be read.
#[test]
fn faults_between_device_and_host() {
    let dir = tempfile::tempdir().unwrap();
    let archive = ArchiveWriter::create_in(dir.path(), 1).unwrap();
    let mut s = Session::with_archive(
        SessionOptions {
            ports: vec!["test".into()],
            out_dir: Some(dir.path().to_path_buf()),
            ..Default::default()
        },
        Some(archive),
    )
    .unwrap();
    let mut stream = enc(&describe(3));
    let mut sent = Vec::new();
    let mut dropped = 0u64;
    let mut corrupted = 0u64;
    for i in 1..=300u64 {
        let f = Frame {
            device: 3,
            seq: i as u16,
            body: Body::window(window(i)),
        };
        let mut bytes = enc(&f);
        match i % 17 {
            5 => {
                dropped += 1;
                continue;
            }
            9 => {
                corrupted += 1;
                let k = bytes.len() / 2;
                bytes[k] ^= 0x10;
                if bytes[k] == 0 {
                    bytes[k] = 0x77;
                }
                stream.extend_from_slice(&bytes);
                continue;
            }
            // Garbage ended by a delimiter: rejected on its own, costs no frame.
            12 => stream.extend_from_slice(&[0x13, 0x37, 0x00, 0xAA, 0x00]),
            // Sent twice: the repeat is ignored.
            14 => stream.extend_from_slice(&bytes),
            _ => {}
        }
        stream.extend_from_slice(&bytes);
        sent.push(window(i));
    }
    let mut got = Vec::new();
    for chunk in stream.chunks(37) {
        for e in s.received(0, 1, chunk).unwrap() {
            if let Event::Window { result, .. } = e {
                got.push(result);
            }
        }
    }
    let r = s.finish().unwrap();
    assert_eq!(got, sent, "only intact frames, each once");
    assert_eq!(r.lost(), dropped + corrupted);
    assert_eq!(r.ports[0].decoder.duplicates, 300 / 17);
    let d = r.ports[0].decoder;
    assert_eq!(
        d.crc_failures + d.malformed + d.bad_framing,
        corrupted + 2 * (300 / 17)
    );
    let csv = std::fs::read_to_string(dir.path().join("windows.csv")).unwrap();
    assert_eq!(csv.lines().count(), 1 + sent.len());
    let first: Vec<&str> = csv.lines().nth(1).unwrap().split(',').collect();
    assert_eq!(
        &first[..7],
        &["p0", "0.1", "0.2", "", "0.1234", "45.67", "0.0015"]
    );
    assert_eq!(first[12], "12.5");
}

/// The probes of one front arrive one after the other; times since the front count
/// from the first of them (where the core starts the station's windows), and an
/// arrival long after is a new front (common practice, no source).
#[test]
fn times_since_the_front_count_from_the_earliest_probe_of_each_front() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = Session::new(SessionOptions {
        ports: vec!["a".into()],
        out_dir: Some(dir.path().to_path_buf()),
        ..Default::default()
    })
    .unwrap();
    let mut seq = 0u16;
    let mut send = |s: &mut Session, body: Body| {
        seq += 1;
        let f = Frame {
            device: 4,
            seq,
            body,
        };
        s.received(0, 0, &enc(&f)).unwrap();
    };
    send(&mut s, describe(4).body);
    let front = |probe: u8, frame: u64| {
        Body::Front(FrontArrival {
            probe,
            station: 0,
            frame,
        })
    };
    let at = |start: u64| {
        let mut w = window(0);
        w.start = start;
        Body::window(w)
    };
    // First front: probe 0 at frame 1000, probe 1 at 1300 (20 kHz).
    send(&mut s, front(0, 1000));
    send(&mut s, front(1, 1300));
    send(&mut s, at(1000));
    send(&mut s, at(3000));
    // A second front 5 s later.
    send(&mut s, front(0, 101_000));
    send(&mut s, at(101_000));
    s.finish().unwrap();
    let csv = std::fs::read_to_string(dir.path().join("windows.csv")).unwrap();
    let since: Vec<&str> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(3).unwrap())
        .collect();
    assert_eq!(since, ["0", "0.1", "0"]);
}

#[test]
fn windows_before_the_description_are_held_then_written_with_times() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = Session::new(SessionOptions {
        ports: vec!["a".into(), "b".into()],
        out_dir: Some(dir.path().to_path_buf()),
        ..Default::default()
    })
    .unwrap();
    let w = Frame {
        device: 9,
        seq: 5,
        body: Body::window(window(2)),
    };
    s.received(1, 0, &enc(&w)).unwrap();
    let mut d = describe(9);
    d.seq = 6;
    s.received(1, 0, &enc(&d)).unwrap();
    let r = s.finish().unwrap();
    assert_eq!(r.windows_without_times, 0);
    let csv = std::fs::read_to_string(dir.path().join("windows.csv")).unwrap();
    let row: Vec<&str> = csv.lines().nth(1).unwrap().split(',').collect();
    assert_eq!(&row[..3], &["d9.p0", "0.2", "0.3"]);
}
