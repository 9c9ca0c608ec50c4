//! End to end over a real pseudo-terminal pair: a simulated device on the master side runs
//! the core chain on the committed fixture and streams frames; the host's watch code reads
//! the slave side. The decoded window results must equal `frothline replay`'s records on
//! the same capture after the wire's quantisation, record for record; the archive must
//! decode to the same results and the same windows.csv; and an unplugged device must show
//! as a link gap after which the host reopens the port and carries on.
#![cfg(unix)]

use frothline_core::wire::WindowResult;
use frothline_host::live::device_sim::{self, wire_result, SimCapture, SimOptions};
use frothline_host::live::watch::{self, Startup, Ui, WatchOptions};
use frothline_host::offline::replay::{self, ReplayArgs};
use frothline_host::shared::commands::Command;
use frothline_host::shared::session::Event;
use frothline_host::shared::window_spec::WindowSpec;
use serialport::SerialPort;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

fn fixture() -> (PathBuf, PathBuf) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/steady-b2");
    (root.join("capture.wav"), root.join("layout.toml"))
}

/// Run `f` on a thread with a large stack: a host chain (32 probes, 256 correlation lags)
/// is built on the stack before it is boxed, which overflows a test thread's 2 MiB in a
/// debug build.
fn big_stack<F: FnOnce() + Send + 'static>(f: F) {
    let h = std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(f)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

fn window() -> WindowSpec {
    "100ms".parse().unwrap()
}

/// Replay's records of the fixture, and their wire form as the device sends them.
fn replay_wire(
    out: &Path,
) -> (
    Vec<frothline_host::shared::rig::HostRecord>,
    Vec<WindowResult>,
    u32,
) {
    let (capture, layout) = fixture();
    let r = replay::run(&ReplayArgs {
        capture,
        layout,
        out: out.to_path_buf(),
        window: window(),
        quiet: true,
        levels: frothline_host::offline::record_levels::LevelRule::Device,
        strict: false,
    })
    .unwrap();
    let wire = r
        .records
        .iter()
        .map(|rec| {
            wire_result(
                rec,
                r.sample_rate,
                r.layout.probes[rec.probe as usize].tip_spacing_mm,
            )
        })
        .collect();
    (r.records, wire, r.sample_rate)
}

fn pty() -> (serialport::TTYPort, serialport::TTYPort, String) {
    let (mut master, slave) = serialport::TTYPort::pair().expect("a pseudo-terminal pair");
    master.set_timeout(Duration::from_millis(2)).unwrap();
    let name = slave.name().expect("slave name");
    (master, slave, name)
}

fn sim_opts(speed: f64) -> SimOptions {
    SimOptions {
        device: 42,
        baud: 0,
        speed,
        autostart: false,
        repeat: false,
        ..SimOptions::default()
    }
}

#[test]
fn device_to_host_over_a_pty_equals_replay_record_for_record() {
    big_stack(|| equal_to_replay(false));
}

/// With `--extras` (SetExtras, kind 0x0B full windows) the live windows.csv also holds the
/// columns a window result leaves out, equal to replay's to the wire's resolution.
#[test]
fn full_windows_fill_the_columns_replay_writes() {
    big_stack(|| equal_to_replay(true));
}

fn equal_to_replay(extras: bool) {
    let tmp = tempfile::tempdir().unwrap();
    let (records, expected, fs) = replay_wire(&tmp.path().join("replay"));
    let (capture, layout) = fixture();
    let cap = SimCapture::from_files(&capture, &layout, window()).unwrap();
    let layout_doc = cap.layout.clone();
    let (master, slave, path) = pty();
    let sim_stop = Arc::new(AtomicBool::new(false));
    let sim = device_sim::spawn(cap, sim_opts(10.0), master, sim_stop.clone()).unwrap();

    let live = tmp.path().join("live");
    let stop = Arc::new(AtomicBool::new(false));
    let mut got: Vec<WindowResult> = Vec::new();
    let mut acks = 0;
    let n = expected.len();
    let opts = WatchOptions {
        ports: vec![path],
        baud: 115_200,
        dir: Some(live.clone()),
        layout: Some(layout_doc.clone()),
        layout_text: std::fs::read_to_string(&layout).ok(),
        ui: Ui::Silent,
        duration: Some(Duration::from_secs(60)),
        startup: if extras {
            vec![
                Startup::Now(Command::SetExtras(true)),
                Startup::Now(Command::StartRun("e2e".into())),
            ]
        } else {
            vec![Startup::Now(Command::StartRun("e2e".into()))]
        },
        view: Default::default(),
        wait_for_port: false,
    };
    let t0 = Instant::now();
    let summary = {
        let stop2 = stop.clone();
        watch::run_with(opts, stop, &mut |e| match e {
            Event::Window { device, result, .. } => {
                assert_eq!(*device, 42);
                got.push(*result);
                if got.len() >= n {
                    stop2.store(true, Ordering::Relaxed);
                }
            }
            Event::Reply { nack: None, .. } => acks += 1,
            Event::Reply { nack: Some(r), .. } => panic!("device refused a command: {r:?}"),
            _ => {}
        })
        .unwrap()
    };
    let elapsed = t0.elapsed();
    sim_stop.store(true, Ordering::Relaxed);
    let dev = sim.join().unwrap().unwrap();
    drop(slave);
    println!(
        "{} records in {elapsed:.2?}; device sent {} frames, {} bytes ({:.1} B per frame)",
        got.len(),
        dev.frames_sent,
        dev.bytes_sent,
        dev.bytes_sent as f64 / dev.frames_sent.max(1) as f64
    );

    assert_eq!(got.len(), records.len(), "every record arrived");
    for (i, (rec, w)) in records.iter().zip(&got).enumerate() {
        // The core's conversion, correlation aside (the device fills it in from the
        // record's correlation and the tip spacing).
        let mut bare = *w;
        bare.correlation = None;
        assert_eq!(
            WindowResult::from_probe_window(rec, fs as f32),
            bare,
            "record {i} (probe {}, start {})",
            rec.probe,
            rec.start
        );
        assert_eq!(expected[i], *w, "record {i} with its correlation");
    }
    assert!(
        got.iter().any(|w| w.correlation.is_some()),
        "dual-tip probes carry their correlation"
    );
    assert!(acks >= 2, "DescribeRequest and StartRun acknowledged");
    assert_eq!(summary.report.lost(), 0);
    assert_eq!(summary.report.crc_failures(), 0);
    assert_eq!(dev.windows_dropped, 0);

    // The archive decodes to the same results and the same CSV rows.
    let (archive, _) = summary.report.archive.clone().unwrap();
    let mut again = Vec::new();
    let un = tmp.path().join("unpacked");
    let rep = frothline_host::live::unpack::unpack_with(&archive, Some(&un), None, &mut |e| {
        if let Event::Window { result, .. } = e {
            again.push(*result);
        }
    })
    .unwrap();
    assert_eq!(again, got);
    assert_eq!(rep.tail, frothline_host::shared::archive::Tail::Clean);
    let a = std::fs::read_to_string(live.join("windows.csv")).unwrap();
    let b = std::fs::read_to_string(un.join("windows.csv")).unwrap();
    assert_eq!(
        a, b,
        "unpack names the probes from the layout kept in the archive"
    );
    assert!(a.lines().nth(1).unwrap().starts_with("B2-1,0,0.1,"));
    assert_eq!(a.lines().count(), 1 + records.len());
    compare_with_replay_csv(
        &live.join("windows.csv"),
        &tmp.path().join("replay/windows.csv"),
        extras,
    );
}

/// The live windows.csv against replay's, column by column, to the wire's resolution (half
/// a step of its unit); cells the wire does not carry are empty in the live file.
fn compare_with_replay_csv(live: &Path, replay: &Path, extras: bool) {
    let read = |p: &Path| {
        let mut r = csv::Reader::from_path(p).unwrap();
        let head: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
        let rows: Vec<Vec<String>> = r
            .records()
            .map(|x| x.unwrap().iter().map(String::from).collect())
            .collect();
        (head, rows)
    };
    let (h1, live) = read(live);
    let (h2, replay) = read(replay);
    // The live file has the replay's columns, then the run columns.
    let runs = frothline_host::shared::runs::RUN_COLUMNS;
    assert_eq!(h1[..h2.len()], h2[..], "same columns");
    assert_eq!(h1[h2.len()..], runs[..], "then the run columns");
    assert_eq!(live.len(), replay.len());
    let col = |name: &str| h1.iter().position(|h| h == name).unwrap();
    let exact = [
        "probe",
        "window_start_s",
        "window_end_s",
        "bubbles",
        "flags",
        "elevation_mm",
        "x_mm",
    ];
    let mut close = vec![
        ("void_fraction", 0.5e-4),
        ("bubble_count_rate_hz", 0.5e-2),
        ("bubble_chord_mean_s", 0.5e-6),
        ("bubble_chord_median_s", 0.5e-6),
        ("interfacial_velocity_m_s", 0.5e-3),
        ("correlation_peak", 0.5e-4),
        ("turbulence_intensity", 0.5e-4),
        // From the quantised Tu: the correction's slope (about 1) times half a step.
        ("turbulence_intensity_skew_corrected", 1.5e-4),
    ];
    if extras {
        close.extend([
            ("droplet_chord_mean_s", 0.5e-6),
            ("trailing_void_fraction", 0.5e-4),
            ("trailing_bubble_count_rate_hz", 0.5e-2),
            ("air_level_counts", 0.5),
            ("water_level_counts", 0.5),
            ("trailing_air_level_counts", 0.5),
            ("trailing_water_level_counts", 0.5),
            ("transit_time_s", 0.5e-6),
            ("secondary_peak_ratio", 0.5e-4),
            ("t05_s", 0.5e-6),
            ("tau05_s", 0.5e-6),
            ("auto_integral_time_s", 0.5e-6),
            ("cross_integral_time_s", 0.5e-6),
        ]);
    }
    // The live transit time is s / V from the sent velocity: relative to V's resolution.
    let transit = col("transit_time_s");
    for (i, (l, r)) in live.iter().zip(&replay).enumerate() {
        let v = &r[col("interfacial_velocity_m_s")];
        if !v.is_empty() && !extras {
            let (a, b): (f64, f64) = (l[transit].parse().unwrap(), r[transit].parse().unwrap());
            let v: f64 = v.parse().unwrap();
            // dT/T = dV/V, with dV half a step of 1 mm/s.
            assert!(
                (a - b).abs() <= b * 0.5e-3 / v * 1.01 + 1e-9,
                "row {i} transit: {a} vs {b}"
            );
        }
        for name in exact {
            assert_eq!(l[col(name)], r[col(name)], "row {i} {name}");
        }
        for &(name, tol) in &close {
            let (a, b) = (&l[col(name)], &r[col(name)]);
            assert_eq!(a.is_empty(), b.is_empty(), "row {i} {name}: {a:?} vs {b:?}");
            if !a.is_empty() {
                let (x, y): (f64, f64) = (a.parse().unwrap(), b.parse().unwrap());
                assert!(
                    (x - y).abs() <= tol * 1.001 + 1e-9,
                    "row {i} {name}: {x} vs {y}"
                );
            }
        }
    }
}

#[test]
fn an_unplugged_device_is_a_gap_then_the_port_is_reopened() {
    big_stack(unplug_and_reopen);
}

fn unplug_and_reopen() {
    let tmp = tempfile::tempdir().unwrap();
    let (capture, layout) = fixture();
    let cap = SimCapture::from_files(&capture, &layout, window()).unwrap();
    // The host watches a symbolic link to the pseudo-terminal, the way a udev name such as
    // /dev/serial/by-id/... points at a USB serial device; re-plugging repoints it.
    let (master, slave, pts) = pty();
    let path = tmp.path().join("ttyPROBE").display().to_string();
    std::os::unix::fs::symlink(&pts, &path).unwrap();
    let sim_stop = Arc::new(AtomicBool::new(false));
    let mut opts = sim_opts(2.0);
    opts.autostart = true;
    opts.repeat = true;
    let sim = device_sim::spawn(cap.clone(), opts.clone(), master, sim_stop.clone()).unwrap();
    let mut slave = Some(slave);
    let mut sim = Some(sim);

    let stop = Arc::new(AtomicBool::new(false));
    let mut phase = 0;
    let mut windows_after = 0;
    let mut downs = 0;
    let mut second: Option<(
        std::thread::JoinHandle<_>,
        serialport::TTYPort,
        Arc<AtomicBool>,
    )> = None;
    let watch_opts = WatchOptions {
        ports: vec![path.clone()],
        baud: 115_200,
        dir: Some(tmp.path().to_path_buf()),
        layout: None,
        layout_text: None,
        ui: Ui::Silent,
        duration: Some(Duration::from_secs(30)),
        startup: vec![],
        view: Default::default(),
        wait_for_port: false,
    };
    let t0 = Instant::now();
    let summary = {
        let stop2 = stop.clone();
        watch::run_with(watch_opts, stop, &mut |e| match (phase, e) {
            (0, Event::Window { .. }) => {
                // Unplug: the device and its end of the pair go away.
                phase = 1;
                sim_stop.store(true, Ordering::Relaxed);
                let _ = sim.take().unwrap().join();
                slave.take();
            }
            (1, Event::LinkDown { .. }) => {
                downs += 1;
                phase = 2;
                // Plug a device in again: a new pair behind the same name.
                let (master, slave2, pts2) = pty();
                let tmp_link = format!("{path}.new");
                std::os::unix::fs::symlink(&pts2, &tmp_link).unwrap();
                std::fs::rename(&tmp_link, &path).unwrap();
                let stop3 = Arc::new(AtomicBool::new(false));
                let h =
                    device_sim::spawn(cap.clone(), opts.clone(), master, stop3.clone()).unwrap();
                second = Some((h, slave2, stop3));
            }
            (2, Event::Window { .. }) => {
                windows_after += 1;
                if windows_after >= 6 {
                    stop2.store(true, Ordering::Relaxed);
                }
            }
            _ => {}
        })
        .unwrap()
    };
    if let Some((h, _slave, s)) = second.take() {
        s.store(true, Ordering::Relaxed);
        let _ = h.join();
    }
    assert_eq!(downs, 1);
    assert_eq!(summary.report.link_gaps.len(), 1);
    assert!(
        windows_after >= 6,
        "results again after the port was reopened"
    );
    assert!(
        t0.elapsed() < Duration::from_secs(10),
        "reopened within seconds"
    );
    // The archive holds the gap and both connections.
    let (archive, _) = summary.report.archive.clone().unwrap();
    let rep = frothline_host::live::unpack::unpack_with(&archive, None, None, &mut |_| {}).unwrap();
    assert_eq!(rep.session.link_gaps.len(), 1);
    println!("{rep}");
}

#[test]
fn two_devices_on_two_ports_are_told_apart() {
    big_stack(two_devices);
}

fn two_devices() {
    let tmp = tempfile::tempdir().unwrap();
    let (capture, layout) = fixture();
    let cap = SimCapture::from_files(&capture, &layout, window()).unwrap();
    let mut sims = Vec::new();
    let mut slaves = Vec::new();
    let mut ports = Vec::new();
    let stop_sims = Arc::new(AtomicBool::new(false));
    for id in [11u16, 12] {
        let (master, slave, path) = pty();
        let opts = SimOptions {
            device: id,
            autostart: true,
            speed: 5.0,
            ..sim_opts(5.0)
        };
        sims.push(device_sim::spawn(cap.clone(), opts, master, stop_sims.clone()).unwrap());
        slaves.push(slave);
        ports.push(path);
    }
    let stop = Arc::new(AtomicBool::new(false));
    let mut per_device = std::collections::BTreeMap::<(usize, u16), usize>::new();
    let opts = WatchOptions {
        ports,
        baud: 115_200,
        dir: Some(tmp.path().to_path_buf()),
        layout: Some(
            SimCapture::from_files(&capture, &layout, window())
                .unwrap()
                .layout,
        ),
        layout_text: None,
        ui: Ui::Silent,
        duration: Some(Duration::from_secs(30)),
        startup: vec![],
        view: Default::default(),
        wait_for_port: false,
    };
    let summary = {
        let stop2 = stop.clone();
        watch::run_with(opts, stop, &mut |e| {
            if let Event::Window { port, device, .. } = e {
                *per_device.entry((*port, *device)).or_default() += 1;
                if per_device.len() == 2 && per_device.values().all(|&n| n >= 24) {
                    stop2.store(true, Ordering::Relaxed);
                }
            }
        })
        .unwrap()
    };
    stop_sims.store(true, Ordering::Relaxed);
    for s in sims {
        s.join().unwrap().unwrap();
    }
    let keys: Vec<(usize, u16)> = per_device.keys().copied().collect();
    assert_eq!(keys, vec![(0, 11), (1, 12)]);
    assert_eq!(summary.report.lost(), 0);
    let csv = std::fs::read_to_string(tmp.path().join("windows.csv")).unwrap();
    assert!(
        csv.contains("\nd11.B2-1,"),
        "rows of device 11 are prefixed"
    );
    assert!(
        csv.contains("\nd12.B3-3,"),
        "rows of device 12 are prefixed"
    );
}

/// At 4800 Bd (480 bytes/s) a read returns a byte or a few: the archive gathers reads for
/// `watch::GATHER` before it writes a chunk, so the archive stays within twice the bytes
/// received (it was 20 times with a chunk per read).
#[test]
fn the_archive_at_4800_baud_is_at_most_twice_the_bytes_received() {
    big_stack(archive_at_4800);
}

fn archive_at_4800() {
    let tmp = tempfile::tempdir().unwrap();
    let (capture, layout) = fixture();
    let cap = SimCapture::from_files(&capture, &layout, window()).unwrap();
    let (master, slave, path) = pty();
    let sim_stop = Arc::new(AtomicBool::new(false));
    let opts = SimOptions {
        baud: 4800,
        speed: 1.0,
        autostart: true,
        repeat: true,
        ..sim_opts(1.0)
    };
    let sim = device_sim::spawn(cap, opts, master, sim_stop.clone()).unwrap();
    let dir = tmp.path().join("slow");
    let watch_opts = WatchOptions {
        ports: vec![path],
        baud: 4800,
        dir: Some(dir.clone()),
        layout: None,
        layout_text: None,
        ui: Ui::Silent,
        duration: Some(Duration::from_secs(8)),
        startup: vec![],
        view: Default::default(),
        wait_for_port: false,
    };
    let summary =
        watch::run_with(watch_opts, Arc::new(AtomicBool::new(false)), &mut |_| {}).unwrap();
    sim_stop.store(true, Ordering::Relaxed);
    sim.join().unwrap().unwrap();
    drop(slave);
    let received = summary.report.ports[0].bytes;
    let (archive, size) = summary.report.archive.clone().expect("an archive");
    let ratio = size as f64 / received as f64;
    println!(
        "4800 Bd, 8 s: {received} bytes received, archive {} = {size} bytes, {ratio:.2} x",
        archive.display()
    );
    assert!(received > 2500, "{received} bytes in 8 s at 480 B/s");
    assert!(ratio <= 2.0, "archive {size} bytes for {received} received");
    // The archive decodes to the frames the session decoded.
    let rep = frothline_host::live::unpack::unpack_with(&archive, None, None, &mut |_| {}).unwrap();
    assert_eq!(rep.session.frames(), summary.report.frames());
    assert!(rep.damage.is_empty());
}

/// Two watch sessions started in the same second into one folder: two archives (the
/// second named `-2`), and the second's CSV files in a subfolder named after its archive,
/// so neither overwrites the other's windows.csv.
#[test]
fn two_sessions_in_one_folder_in_the_same_second_share_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("shared");
    let (_m1, _s1, p1) = pty();
    let (_m2, _s2, p2) = pty();
    let session = |port: String, dir: PathBuf| {
        std::thread::spawn(move || {
            let opts = WatchOptions {
                ports: vec![port],
                baud: 115_200,
                dir: Some(dir),
                layout: None,
                layout_text: None,
                ui: Ui::Silent,
                duration: Some(Duration::from_millis(1500)),
                startup: vec![],
                view: Default::default(),
                wait_for_port: false,
            };
            watch::run_with(opts, Arc::new(AtomicBool::new(false)), &mut |_| {}).unwrap()
        })
    };
    let a = session(p1, dir.clone());
    std::thread::sleep(Duration::from_millis(100));
    let b = session(p2, dir.clone());
    let (a, b) = (a.join().unwrap(), b.join().unwrap());
    let (pa, pb) = (a.report.archive.unwrap().0, b.report.archive.unwrap().0);
    assert_ne!(pa, pb);
    let (ca, cb) = (a.report.files[0].clone(), b.report.files[0].clone());
    assert_eq!(
        ca,
        dir.join("windows.csv"),
        "the first session holds the folder"
    );
    let stem = pb.file_stem().unwrap();
    assert_eq!(cb, dir.join(stem).join("windows.csv"));
    assert!(stem.to_string_lossy().ends_with("-2") || pa.file_stem() != pb.file_stem());
    assert!(ca.exists() && cb.exists());
    assert!(
        !dir.join(watch::LOCK_FILE).exists(),
        "the lock goes with its session"
    );
}
