//! A transient fixture over a pseudo-terminal: the simulated device runs one station chain
//! per station on `fixtures/surge-b2` and sends the front arrivals (kind 0x03) and profile
//! fits (kind 0x04) as urgent frames; the host's watch code must receive exactly those of
//! a host `transient` replay of the same capture (through `to_wire`), and its live session
//! must write fronts.csv and profile.csv.
#![cfg(unix)]

use frothline_core::wire::{FrontArrival, ProfileFit};
use frothline_core::FrontRecord;
use frothline_host::live::device_sim::{self, SimCapture, SimOptions};
use frothline_host::live::watch::{self, Startup, Ui, WatchOptions};
use frothline_host::offline::transient;
use frothline_host::shared::commands::Command;
use frothline_host::shared::session::Event;
use frothline_host::shared::window_spec::WindowSpec;
use serialport::SerialPort;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

fn fixture() -> (PathBuf, PathBuf) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/surge-b2");
    (root.join("capture.wav"), root.join("layout.toml"))
}

fn big_stack<F: FnOnce() + Send + 'static>(f: F) {
    let h = std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(f)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

/// The replay's probe arrivals and profile fits in wire form, sorted.
fn replay_wire() -> (Vec<FrontArrival>, Vec<ProfileFit>) {
    let (capture, layout) = fixture();
    let run = transient::replay_capture(
        &capture,
        &layout,
        &WindowSpec::Whole,
        frothline_host::offline::record_levels::LevelRule::Device,
        None,
    )
    .unwrap();
    let mut fronts: Vec<FrontArrival> = run
        .fronts
        .iter()
        .filter_map(|f| match &f.record {
            FrontRecord::Probe(p) => Some(p.to_wire(f.station as u8)),
            FrontRecord::Station(_) => None,
        })
        .collect();
    let mut profiles: Vec<ProfileFit> = run
        .profiles
        .iter()
        .map(|(s, p)| p.to_wire(*s as u8))
        .collect();
    sort(&mut fronts, &mut profiles);
    (fronts, profiles)
}

fn sort(fronts: &mut [FrontArrival], profiles: &mut [ProfileFit]) {
    fronts.sort_by_key(|f| (f.station, f.probe, f.frame));
    profiles.sort_by_key(|p| (p.station, p.slice_start));
}

#[test]
fn fronts_and_profiles_over_a_pty_equal_the_transient_replay() {
    big_stack(equal_to_replay);
}

fn equal_to_replay() {
    let (want_fronts, want_profiles) = replay_wire();
    assert!(!want_fronts.is_empty() && !want_profiles.is_empty());
    let tmp = tempfile::tempdir().unwrap();
    let (capture, layout) = fixture();
    let cap = SimCapture::from_files(&capture, &layout, WindowSpec::Whole).unwrap();
    assert!(cap.stations.is_some(), "a transient layout");
    let layout_doc = cap.layout.clone();
    let (mut master, slave) = serialport::TTYPort::pair().expect("a pseudo-terminal pair");
    master.set_timeout(Duration::from_millis(2)).unwrap();
    let path = slave.name().expect("slave name");
    let sim_stop = Arc::new(AtomicBool::new(false));
    let opts = SimOptions {
        device: 9,
        baud: 0,
        speed: 20.0,
        autostart: false,
        repeat: false,
        ..SimOptions::default()
    };
    let sim = device_sim::spawn(cap, opts, master, sim_stop.clone()).unwrap();

    let live = tmp.path().join("live");
    let stop = Arc::new(AtomicBool::new(false));
    let (mut fronts, mut profiles) = (Vec::new(), Vec::new());
    let (nf, np) = (want_fronts.len(), want_profiles.len());
    let opts = WatchOptions {
        ports: vec![path],
        baud: 115_200,
        dir: Some(live.clone()),
        layout: Some(layout_doc),
        layout_text: std::fs::read_to_string(&layout).ok(),
        ui: Ui::Silent,
        duration: Some(Duration::from_secs(120)),
        startup: vec![Startup::Now(Command::StartRun("surge".into()))],
        view: Default::default(),
        wait_for_port: false,
    };
    let summary = {
        let stop2 = stop.clone();
        watch::run_with(opts, stop, &mut |e| {
            match e {
                Event::Front { front, .. } => fronts.push(*front),
                Event::Profile { fit, .. } => profiles.push(*fit),
                Event::Reply { nack: Some(r), .. } => panic!("device refused a command: {r:?}"),
                _ => {}
            }
            if fronts.len() >= nf && profiles.len() >= np {
                stop2.store(true, Ordering::Relaxed);
            }
        })
        .unwrap()
    };
    sim_stop.store(true, Ordering::Relaxed);
    let _dev = sim.join().unwrap().unwrap();
    drop(slave);
    sort(&mut fronts, &mut profiles);
    println!(
        "{} fronts, {} profiles received ({nf} and {np} in the replay)",
        fronts.len(),
        profiles.len()
    );
    assert_eq!(fronts, want_fronts);
    assert_eq!(profiles, want_profiles);
    assert_eq!(summary.report.lost(), 0);

    let rows = |name: &str| {
        let text =
            std::fs::read_to_string(live.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        text.lines().count().saturating_sub(1)
    };
    assert_eq!(rows("fronts.csv"), nf, "a fronts.csv row per arrival");
    assert_eq!(rows("profile.csv"), np, "a profile.csv row per fit");
}
