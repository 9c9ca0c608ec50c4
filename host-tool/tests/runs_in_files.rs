//! Two runs of one device in one session: every live row (windows.csv, fronts.csv) carries
//! its run number and label, the second run's rows (whose device times start again at 0)
//! cannot be confused with the first's, and `unpack` of the session archive writes the same
//! files byte for byte.

use frothline_core::wire::{
    encode, Ack, Body, DeviceDescription, Frame, FrontArrival, ProbeLayout, RunStart, WindowResult,
    WindowSetting, MAX_FRAME_BYTES,
};
use frothline_host::shared::commands::Command;
use frothline_host::shared::session::{Session, SessionOptions};
use std::collections::HashSet;

fn enc(f: &Frame) -> Vec<u8> {
    let mut buf = [0u8; MAX_FRAME_BYTES];
    encode(f, &mut buf).unwrap().to_vec()
}

fn description() -> Body {
    let mut d = DeviceDescription {
        firmware: Default::default(),
        sample_rate_millihz: 20_000_000,
        channels: 1,
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
    Body::Describe(d)
}

fn window(i: u64) -> WindowResult {
    WindowResult {
        probe: 0,
        start: i * 2000,
        frames: 2000,
        void_fraction: 1234,
        bubble_rate: 4567,
        bubbles: 9,
        chords: None,
        correlation: None,
        flags: 0,
    }
}

#[test]
fn two_runs_are_told_apart_in_every_live_file_and_unpack_agrees() {
    let dir = tempfile::tempdir().unwrap();
    let archive = dir.path().join("session.frothwire");
    let t0 = 1_796_191_038_000_000u64;
    let writer = frothline_host::shared::archive::ArchiveWriter::create(&archive, t0).unwrap();
    let mut s = Session::with_archive(
        SessionOptions {
            ports: vec!["sim".into()],
            out_dir: Some(dir.path().join("live")),
            ..Default::default()
        },
        Some(writer),
    )
    .unwrap();
    s.opened(0, t0).unwrap();
    let mut seq = 0u16;
    let mut from_device = |s: &mut Session, t: u64, body: Body| {
        let f = Frame {
            device: 1,
            seq,
            body,
        };
        seq += 1;
        s.received(0, t, &enc(&f)).unwrap();
    };
    from_device(&mut s, t0 + 1000, description());
    for (k, label) in ["run-a", "run-b"].into_iter().enumerate() {
        let t = t0 + (k as u64 + 1) * 10_000_000;
        let (cmd_seq, bytes) = s
            .encode_command(0, &Command::StartRun(label.into()))
            .unwrap();
        s.sent(0, t, &bytes).unwrap();
        // A version-2 device reports the run it started, then acknowledges the command.
        from_device(
            &mut s,
            t + 4_000,
            Body::RunStart(RunStart {
                run: k as u32 + 1,
                label: label.try_into().unwrap(),
                uptime_frames: 0,
                utc_ms: Some(t / 1000),
            }),
        );
        from_device(&mut s, t + 5_000, Body::Ack(Ack { seq: cmd_seq }));
        // The device clock starts again with each run: the same window times recur.
        from_device(
            &mut s,
            t + 10_000,
            Body::Front(FrontArrival {
                probe: 0,
                station: 0,
                frame: 500,
            }),
        );
        for i in 0..3 {
            from_device(&mut s, t + 100_000 * (i + 1), Body::window(window(i)));
        }
    }
    s.finish().unwrap();

    let rows = |path: &std::path::Path| -> (Vec<String>, Vec<Vec<String>>) {
        let mut r = csv::Reader::from_path(path).unwrap();
        let head = r.headers().unwrap().iter().map(String::from).collect();
        let rows = r
            .records()
            .map(|x| x.unwrap().iter().map(String::from).collect())
            .collect();
        (head, rows)
    };
    let live = dir.path().join("live");
    let (head, windows) = rows(&live.join("windows.csv"));
    let col = |name: &str| head.iter().position(|h| h == name).unwrap();
    assert_eq!(windows.len(), 6);
    let runs: Vec<(&str, &str)> = windows
        .iter()
        .map(|r| (r[col("run_number")].as_str(), r[col("run_label")].as_str()))
        .collect();
    assert_eq!(&runs[..3], &[("1", "run-a"); 3]);
    assert_eq!(&runs[3..], &[("2", "run-b"); 3]);
    // (run, window start) names a row: nothing overlaps although the times recur.
    let keys: HashSet<(String, String)> = windows
        .iter()
        .map(|r| {
            (
                r[col("run_number")].clone(),
                r[col("window_start_s")].clone(),
            )
        })
        .collect();
    assert_eq!(keys.len(), windows.len());
    assert_eq!(windows[0][col("host_utc")], "2026-12-02T05:57:28.100Z");
    let (fh, fronts) = rows(&live.join("fronts.csv"));
    let fc = |name: &str| fh.iter().position(|h| h == name).unwrap();
    assert_eq!(fronts.len(), 2);
    assert_eq!(fronts[0][fc("run_label")], "run-a");
    assert_eq!(fronts[1][fc("run_label")], "run-b");

    // The archive decoded again gives the same files.
    let again = dir.path().join("again");
    frothline_host::live::unpack::unpack_with(&archive, Some(&again), None, &mut |_| {}).unwrap();
    for f in ["windows.csv", "fronts.csv"] {
        assert_eq!(
            std::fs::read_to_string(live.join(f)).unwrap(),
            std::fs::read_to_string(again.join(f)).unwrap(),
            "{f}"
        );
    }
}
