//! Two labelled runs with a mark in each, through `watch` over a real pseudo-terminal pair
//! against the simulated device playing the built-in dam-break surge: every live file
//! (windows.csv, marks.csv, fronts.csv, profile.csv) and the archive tell the runs apart,
//! and `unpack` of the archive writes the same files byte for byte.
#![cfg(unix)]

use frothline_host::live::device_sim::{self, SimCapture, SimOptions};
use frothline_host::live::watch::{self, Ui, WatchOptions};
use frothline_host::live::watch_control::Control;
use frothline_host::shared::archive::{ArchiveReader, ChunkKind};
use frothline_host::shared::session::Event;
use frothline_host::synth::Scenario;
use serialport::SerialPort;
use std::collections::BTreeSet;
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{mpsc, Arc};
use std::time::Duration;

fn big_stack<F: FnOnce() + Send + 'static>(f: F) {
    let h = std::thread::Builder::new()
        .stack_size(device_sim::THREAD_STACK)
        .spawn(f)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

const LABELS: [&str; 2] = ["flume-a", "flume-b"];
const NOTES: [&str; 2] = ["gate opened", "probe moved"];

#[test]
fn two_labelled_runs_with_marks_are_kept_apart_in_every_file() {
    big_stack(two_runs);
}

/// The rows of `dir/name` as (run_number, run_label) pairs, in file order.
fn runs_of(dir: &Path, name: &str) -> Vec<(String, String)> {
    let mut r = csv::Reader::from_path(dir.join(name)).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (num, label) = (col("run_number"), col("run_label"));
    r.records()
        .map(|x| x.unwrap())
        .map(|x| (x[num].to_string(), x[label].to_string()))
        .collect()
}

/// Every row of run 1 comes before every row of run 2, each with its own label, and both
/// runs have rows.
fn assert_runs_apart(rows: &[(String, String)], what: &str) {
    let firsts: Vec<_> = rows.iter().map(|(n, _)| n.as_str()).collect();
    let split = firsts.iter().position(|n| *n == "2").unwrap_or(rows.len());
    assert!(split > 0 && split < rows.len(), "{what}: rows of both runs");
    for (i, (n, l)) in rows.iter().enumerate() {
        let k = if i < split { 0 } else { 1 };
        assert_eq!(
            (n.as_str(), l.as_str()),
            (["1", "2"][k], LABELS[k]),
            "{what}: row {i}"
        );
    }
}

fn two_runs() {
    let tmp = tempfile::tempdir().unwrap();
    let live = tmp.path().join("live");
    let cap = SimCapture::from_scenario(&Scenario::builtin_transient(), "whole".parse().unwrap())
        .unwrap();
    let layout = cap.layout.clone();
    let layout_text = cap.layout_text.clone();
    let (mut master, slave) = serialport::TTYPort::pair().expect("a pseudo-terminal pair");
    master.set_timeout(Duration::from_millis(2)).unwrap();
    let path = slave.name().expect("slave name");
    let sim_stop = Arc::new(AtomicBool::new(false));
    let opts = SimOptions {
        device: 5,
        baud: 0,
        autostart: false,
        repeat: false,
        ..SimOptions::default()
    };
    let sim = device_sim::spawn(cap, opts, master, sim_stop.clone()).unwrap();

    let (tx, rx) = mpsc::channel();
    let stop = Arc::new(AtomicBool::new(false));
    let opts = WatchOptions {
        ports: vec![path],
        baud: 115_200,
        dir: Some(live.clone()),
        layout: Some(layout),
        layout_text: Some(layout_text),
        ui: Ui::Silent,
        duration: Some(Duration::from_secs(60)),
        startup: vec![],
        view: Default::default(),
        wait_for_port: false,
    };
    // The script: run 1 once the device has described itself; in each run, a mark once
    // the front and 8 windows came; then run 1 is ended and run 2 started; after run 2's
    // mark, 4 more windows and the session ends.
    let mut run = 0usize;
    let (mut fronts, mut windows, mut marked) = (0, 0, false);
    let mut started = false;
    let summary = {
        let stop2 = stop.clone();
        watch::run_controlled(
            opts,
            stop,
            &mut |e| match e {
                Event::Describe { .. } if !started => {
                    started = true;
                    tx.send(Control::StartRun(LABELS[0].into())).unwrap();
                }
                Event::RunStart { run: r, .. } => {
                    run = r.run as usize;
                    (fronts, windows, marked) = (0, 0, false);
                }
                Event::Front { .. } if run > 0 => fronts += 1,
                Event::Window { .. } if run > 0 && fronts > 0 => {
                    windows += 1;
                    if windows == 8 && !marked {
                        marked = true;
                        tx.send(Control::Mark(NOTES[run - 1].into())).unwrap();
                        if run == 1 {
                            tx.send(Control::StopRun).unwrap();
                            tx.send(Control::StartRun(LABELS[1].into())).unwrap();
                        }
                    }
                    if run == 2 && windows >= 12 {
                        stop2.store(true, Ordering::Relaxed);
                    }
                }
                Event::Reply { nack: Some(r), .. } => panic!("device refused a command: {r:?}"),
                _ => {}
            },
            rx,
        )
        .unwrap()
    };
    sim_stop.store(true, Ordering::Relaxed);
    sim.join().unwrap().unwrap();
    drop(slave);
    assert_eq!(run, 2, "two runs started");
    assert_eq!(summary.report.lost(), 0);

    // Every live file keeps the runs apart.
    assert_runs_apart(&runs_of(&live, "windows.csv"), "windows.csv");
    assert_runs_apart(&runs_of(&live, "fronts.csv"), "fronts.csv");
    assert_runs_apart(&runs_of(&live, "profile.csv"), "profile.csv");
    let marks = frothline_host::shared::marks::read(&live).unwrap();
    let got: Vec<_> = marks
        .iter()
        .map(|m| (m.run_number, m.run_label.as_str(), m.note.as_str()))
        .collect();
    assert_eq!(
        got,
        vec![(1, LABELS[0], NOTES[0]), (2, LABELS[1], NOTES[1])]
    );
    // A mark lies within its run's windows: the device time of the latest window received.
    assert!(marks
        .iter()
        .all(|m| m.device_time_s.is_some_and(|t| t > 0.0)));
    let files: BTreeSet<_> = summary
        .report
        .files
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    for f in ["windows.csv", "marks.csv", "fronts.csv", "profile.csv"] {
        assert!(
            files.contains(f),
            "{f} listed among the files written: {files:?}"
        );
    }

    // The archive: two run starts with their labels and two mark chunks.
    let (archive, _) = summary.report.archive.clone().unwrap();
    let mut r = ArchiveReader::open(&archive).unwrap();
    let mut mark_chunks = 0;
    while let Some(c) = r.next_chunk().unwrap() {
        mark_chunks += usize::from(c.kind == ChunkKind::Mark);
    }
    assert_eq!(mark_chunks, 2);
    let un = tmp.path().join("unpacked");
    let mut run_starts = Vec::new();
    frothline_host::live::unpack::unpack_with(&archive, Some(&un), None, &mut |e| {
        if let Event::RunStart { run, .. } = e {
            run_starts.push((run.run, run.label.to_string()));
        }
    })
    .unwrap();
    assert_eq!(
        run_starts,
        vec![(1, LABELS[0].to_string()), (2, LABELS[1].to_string())]
    );
    // unpack writes the same files (tips.csv too when a tip-health frame came; the
    // device's first health frame, at power-on, brings a device status).
    for f in [
        "windows.csv",
        "marks.csv",
        "fronts.csv",
        "profile.csv",
        "tips.csv",
        "status.csv",
    ] {
        if f == "tips.csv" && !live.join(f).exists() {
            continue;
        }
        let a = std::fs::read_to_string(live.join(f)).unwrap();
        let b = std::fs::read_to_string(un.join(f)).unwrap();
        assert_eq!(a, b, "{f} from the archive");
    }
}
