//! The device status (kind 0x0C) end to end over a pseudo-terminal: a simulated device
//! with a low supply streams it with every health frame; the host's watch session
//! decodes it, the live view's state holds it (what the dashboard draws), and status.csv
//! gets a row per status, listed with the session's files.
#![cfg(unix)]

use frothline_host::live::device_sim::{self, SimCapture, SimOptions};
use frothline_host::live::state::LiveState;
use frothline_host::live::watch::{self, Startup, Ui, WatchOptions};
use frothline_host::shared::commands::Command;
use frothline_host::shared::session::Event;
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

#[test]
fn the_live_state_gets_the_supply_and_status_csv_its_rows() {
    // A host chain is built on the stack before it is boxed: a big stack for debug builds.
    std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(status_over_a_pty)
        .unwrap()
        .join()
        .unwrap();
}

fn status_over_a_pty() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/steady-b2");
    let cap = SimCapture::from_files(
        &root.join("capture.wav"),
        &root.join("layout.toml"),
        "100ms".parse().unwrap(),
    )
    .unwrap();
    let (mut master, slave) = serialport::TTYPort::pair().expect("a pseudo-terminal pair");
    use serialport::SerialPort;
    master.set_timeout(Duration::from_millis(2)).unwrap();
    let path = slave.name().unwrap();
    let opts = SimOptions {
        device: 42,
        baud: 0,
        speed: 1.0,
        autostart: false,
        repeat: false,
        health_every: Duration::from_millis(200),
        // Below the 3.0 V threshold: the view marks it low.
        supply_mv: Some(2_900),
        ..SimOptions::default()
    };
    let sim_stop = Arc::new(AtomicBool::new(false));
    let sim = device_sim::spawn(cap, opts, master, sim_stop.clone()).unwrap();

    let tmp = tempfile::tempdir().unwrap();
    let live_dir = tmp.path().join("live");
    let stop = Arc::new(AtomicBool::new(false));
    let mut live = LiveState::new(std::slice::from_ref(&path));
    let mut statuses = Vec::new();
    let wopts = WatchOptions {
        ports: vec![path],
        baud: 115_200,
        dir: Some(live_dir.clone()),
        layout: None,
        layout_text: None,
        ui: Ui::Silent,
        duration: Some(Duration::from_secs(30)),
        startup: vec![Startup::Now(Command::StartRun("status".into()))],
        view: Default::default(),
        wait_for_port: false,
    };
    let summary = {
        let stop2 = stop.clone();
        watch::run_with(wopts, stop, &mut |e| {
            live.apply(e, Instant::now(), &|_, i| format!("p{i}"));
            if let Event::Status { device, status, .. } = e {
                assert_eq!(*device, 42);
                statuses.push(*status);
                if statuses.len() >= 4 {
                    stop2.store(true, Ordering::Relaxed);
                }
            }
        })
        .unwrap()
    };
    sim_stop.store(true, Ordering::Relaxed);
    sim.join().unwrap().unwrap();
    drop(slave);

    assert!(statuses.len() >= 4, "{statuses:?}");
    // The uptime grows by about the health period from one status to the next.
    for w in statuses.windows(2) {
        let d = w[1].uptime_ms as i64 - w[0].uptime_ms as i64;
        assert!(
            (100..=1_000).contains(&d),
            "uptime step {d} ms: {statuses:?}"
        );
    }
    for s in &statuses {
        let mv = s.supply_mv.expect("the simulated device reports a supply");
        assert!((2_892..=2_908).contains(&mv), "{mv} mV");
        assert!(s.logger.is_none(), "the simulated device has no field log");
    }
    let d = &live.devices[&42];
    let shown = d.status.expect("the live state holds the latest status");
    assert_eq!(Some(shown), statuses.last().copied());
    assert!(frothline_host::shared::status_csv::supply_low(&shown));
    assert!(d.status_at.is_some());

    // status.csv: a row per status, listed with the session's files.
    let csv_path = live_dir.join("status.csv");
    assert!(
        summary.report.files.contains(&csv_path),
        "{:?}",
        summary.report.files
    );
    let text = std::fs::read_to_string(&csv_path).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        frothline_host::shared::status_csv::columns().join(",")
    );
    let rows: Vec<&str> = lines.collect();
    assert!(rows.len() >= statuses.len(), "{text}");
    assert!(rows.iter().all(|r| r.starts_with("42,")), "{text}");
    for r in &rows {
        let cells: Vec<&str> = r.split(',').collect();
        let v: f64 = cells[2].parse().unwrap();
        assert!((2.892..=2.908).contains(&v), "{r}");
        assert_eq!(&cells[3..5], ["true", "none"], "{r}");
    }
}
