//! `frothline watch` killed with SIGKILL in the middle of a session: the archive reads back
//! up to its last complete chunk and decodes the frames it holds (every window result the
//! process printed, and each equal to replay's record for it), and an archive cut inside a
//! chunk reads up to the chunk before and says the tail is incomplete.
#![cfg(unix)]

use frothline_core::wire::WindowResult;
use frothline_host::live::device_sim::{self, wire_result, SimCapture, SimOptions};
use frothline_host::shared::archive::Tail;
use frothline_host::shared::session::Event;
use serialport::SerialPort;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

fn big_stack<F: FnOnce() + Send + 'static>(f: F) {
    // The chain is built on the stack before it is boxed: a debug build needs room.
    let h = std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(f)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

fn decode(
    archive: &Path,
) -> (
    Vec<WindowResult>,
    frothline_host::live::unpack::UnpackReport,
) {
    let mut got = Vec::new();
    let rep = frothline_host::live::unpack::unpack_with(archive, None, None, &mut |e| {
        if let Event::Window { result, .. } = e {
            got.push(*result);
        }
    })
    .unwrap();
    (got, rep)
}

#[test]
fn kill_9_leaves_an_archive_that_reads_back() {
    big_stack(kill_9);
}

fn kill_9() {
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("../fixtures/steady-b2");
    let (capture, layout) = (fixture.join("capture.wav"), fixture.join("layout.toml"));
    let window: frothline_host::shared::window_spec::WindowSpec = "100ms".parse().unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let replay =
        frothline_host::offline::replay::run(&frothline_host::offline::replay::ReplayArgs {
            capture: capture.clone(),
            layout: layout.clone(),
            out: tmp.path().join("replay"),
            window: window.clone(),
            quiet: true,
            levels: frothline_host::offline::record_levels::LevelRule::Device,
            strict: false,
        })
        .unwrap();
    let expected: Vec<WindowResult> = replay
        .records
        .iter()
        .map(|r| {
            let spacing = replay.layout.probes[r.probe as usize].tip_spacing_mm;
            wire_result(r, replay.sample_rate, spacing)
        })
        .collect();

    // A device in this process, in real time: the capture lasts 1.5 s.
    let cap = SimCapture::from_files(&capture, &layout, window).unwrap();
    let (mut master, slave) = serialport::TTYPort::pair().unwrap();
    master.set_timeout(Duration::from_millis(2)).unwrap();
    let path = slave.name().unwrap();
    let stop = Arc::new(AtomicBool::new(false));
    let opts = SimOptions {
        device: 3,
        baud: 115_200,
        speed: 1.0,
        autostart: false,
        repeat: false,
        ..SimOptions::default()
    };
    let sim = device_sim::spawn(cap, opts, master, stop.clone()).unwrap();

    let dir = tmp.path().join("session");
    let mut child = Command::new(env!("CARGO_BIN_EXE_frothline"))
        .args([
            "watch",
            "--plain",
            "--port",
            &path,
            "--start-run",
            "k9",
            "--archive",
        ])
        .arg(&dir)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let out = BufReader::new(child.stdout.take().unwrap());
    let mut printed = 0;
    let t0 = Instant::now();
    for line in out.lines() {
        let line = line.unwrap();
        if !line.starts_with('#') && line.contains(" probe ") {
            printed += 1;
        }
        // Mid-run: about a third of the records are through.
        if printed >= 30 || t0.elapsed() > Duration::from_secs(30) {
            break;
        }
    }
    child.kill().unwrap(); // SIGKILL
    let status = child.wait().unwrap();
    assert!(!status.success());
    stop.store(true, Ordering::Relaxed);
    sim.join().unwrap().unwrap();
    drop(slave);
    assert!(printed >= 30, "watch printed {printed} window lines");

    let archives: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "frothwire"))
        .collect();
    assert_eq!(archives.len(), 1, "{archives:?}");
    let archive = &archives[0];
    let (got, rep) = decode(archive);
    println!("{rep}");
    assert!(
        matches!(rep.tail, Tail::Clean | Tail::Incomplete(_)),
        "{:?}",
        rep.tail
    );
    // Every byte is archived before it is decoded and printed: the archive holds at least
    // the results the process printed, and they are replay's, in order.
    assert!(
        got.len() >= printed,
        "{} decoded, {printed} printed",
        got.len()
    );
    assert!(got.len() < expected.len(), "the kill landed mid-run");
    assert_eq!(got[..], expected[..got.len()]);
    assert_eq!(rep.session.lost(), 0);
    assert_eq!(rep.session.crc_failures(), 0);

    // The CSV rows the killed process left are whole rows (flushed batch by batch).
    let csv = std::fs::read_to_string(dir.join("windows.csv")).unwrap();
    let n = frothline_host::shared::windows_csv::COLUMNS.len()
        + frothline_host::shared::runs::RUN_COLUMNS.len();
    let rows: Vec<&str> = csv.lines().collect();
    assert!(rows.len() > 1);
    for r in &rows {
        assert_eq!(r.split(',').count(), n, "{r}");
    }

    // Cut the archive inside its last chunk: it reads up to the chunk before.
    let bytes = std::fs::read(archive).unwrap();
    let cut = tmp.path().join("cut.frothwire");
    std::fs::write(&cut, &bytes[..bytes.len() - 3]).unwrap();
    let (some, rep2) = decode(&cut);
    assert!(
        matches!(rep2.tail, Tail::Incomplete(n) if n > 0),
        "{:?}",
        rep2.tail
    );
    assert_eq!(rep2.chunks + 1, rep.chunks);
    assert!(some.len() <= got.len());
    assert_eq!(some[..], expected[..some.len()]);
    println!("{rep2}");
}
