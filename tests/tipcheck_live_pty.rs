//! `frothline tipcheck --port` against the simulated device over a pseudo-terminal pair:
//! the levels the device reports for every tip match the generator's nominal levels of
//! the synthetic capture (its truth), and `--set-levels` fixes each tip with a SetLevels
//! command that the device acknowledges and then reports as fixed (kind 0x0A).
#![cfg(unix)]

use frothline_host::live::device_sim::{self, SimCapture, SimOptions};
use frothline_host::live::tipcheck_live::LiveCheck;
use frothline_host::synth::{Generator, Scenario};
use serialport::SerialPort;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
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

/// `tipcheck --port` (listening `listen` s, with `--set-levels` if `set`) against the
/// simulated device playing `cap` on a pseudo-terminal; the report and the device's counters.
fn check_on_sim(
    cap: SimCapture,
    opts: SimOptions,
    layout: &std::path::Path,
    listen: f64,
    set: bool,
) -> (
    frothline_host::live::tipcheck_live::LiveReport,
    device_sim::SimStats,
) {
    let (mut master, slave) = serialport::TTYPort::pair().expect("a pseudo-terminal pair");
    master.set_timeout(Duration::from_millis(2)).unwrap();
    let path = slave.name().unwrap();
    let stop = Arc::new(AtomicBool::new(false));
    let sim = device_sim::spawn(cap, opts, master, stop.clone()).unwrap();
    let args = LiveCheck {
        baud: 115_200,
        listen,
        set_levels: set,
        layout: layout.to_path_buf(),
        tolerance: 0.05,
    };
    let report = frothline_host::live::tipcheck_live::run(&args, &path).unwrap();
    stop.store(true, Ordering::Relaxed);
    let stats = sim.join().unwrap().unwrap();
    drop(slave);
    (report, stats)
}

#[test]
fn a_live_tipcheck_reads_every_tip_and_sets_its_levels() {
    big_stack(live_tipcheck);
}

fn live_tipcheck() {
    let tmp = tempfile::tempdir().unwrap();
    let mut s = Scenario::builtin_default();
    s.duration_s = 2.0;
    s.sample_rate_hz = 20_000;
    let nominal = Generator::new(s.clone(), s.seed).unwrap().tip_levels();
    let cap = SimCapture::from_scenario(&s, "100ms".parse().unwrap()).unwrap();
    let layout_path = tmp.path().join("layout.toml");
    std::fs::write(&layout_path, &cap.layout_text).unwrap();
    let layout = cap.layout.clone();
    let opts = SimOptions {
        baud: 0,
        repeat: true,
        ..SimOptions::default()
    };
    let (report, stats) = check_on_sim(cap, opts, &layout_path, 2.5, true);

    // Every tip of every probe (4 dual-tip probes).
    assert_eq!(report.tips.len(), 8, "{report:?}");
    for t in &report.tips {
        let p = &layout.probes[t.probe_index as usize];
        let ch = if t.trailing {
            p.trailing.unwrap()
        } else {
            p.leading
        };
        let (water, air) = nominal[ch];
        let (a, w) = t.levels.expect("levels learnt");
        let swing = (air - water).abs();
        // The device learns the drifting signal's levels (drift 300 counts, sine): within
        // 5 % of the swing of the generator's nominal ones.
        assert!(
            (a as f64 - air).abs() < 0.05 * swing && (w as f64 - water).abs() < 0.05 * swing,
            "{} {}: device ({a}, {w}) vs nominal ({air}, {water})",
            t.probe,
            t.trailing
        );
        assert!(t.interfaces_per_s.is_some_and(|x| x > 0.0), "{t:?}");
        assert!(
            !t.flags.contains(&"stuck") && !t.flags.contains(&"small_swing"),
            "{t:?}"
        );
        assert_eq!(t.set, Some(None), "SetLevels acknowledged: {t:?}");
        // Read back from the levels-in-use frame the device sent after the SetLevels:
        // fixed, and equal to what was set (else the row is flagged not_kept).
        assert_eq!(t.fixed, Some(true), "{t:?}");
        assert!(!t.flags.contains(&"not_kept"), "{t:?}");
    }
    assert!(stats.acks >= 8, "{stats:?}");
    assert_eq!(stats.nacks, 0, "{stats:?}");
}

#[test]
fn a_device_outside_a_run_reports_the_levels_it_keeps() {
    big_stack(outside_a_run);
}

/// The calibration as a user does it before a run: `tipcheck --write` on a capture segment
/// fixes every tip's levels in the layout; a device configured from that layout, not
/// running (so closing no window and sending no tip-health report), answers `tipcheck
/// --port` with its levels-in-use frame: every tip fixed, at the layout's levels.
fn outside_a_run() {
    use frothline_host::offline::tipcheck::{self, TipcheckArgs};
    let tmp = tempfile::tempdir().unwrap();
    let mut s = Scenario::builtin_default();
    s.duration_s = 1.0;
    s.sample_rate_hz = 20_000;
    Generator::new(s.clone(), s.seed)
        .unwrap()
        .write_dir(tmp.path(), false)
        .unwrap();
    let capture = tmp.path().join("capture.wav");
    let layout_path = tmp.path().join("layout.toml");
    tipcheck::run(&TipcheckArgs {
        capture: Some(capture.clone()),
        port: None,
        baud: 115_200,
        listen: 1.0,
        set_levels: false,
        layout: layout_path.clone(),
        from: 0.0,
        to: None,
        tolerance: 0.05,
        write: true,
    })
    .unwrap();
    let cap = SimCapture::from_files(&capture, &layout_path, "100ms".parse().unwrap()).unwrap();
    let layout = cap.layout.clone();
    let opts = SimOptions {
        baud: 0,
        autostart: false,
        ..SimOptions::default()
    };
    let (report, _) = check_on_sim(cap, opts, &layout_path, 1.0, false);
    assert_eq!(report.tips.len(), 8, "{report:?}");
    for t in &report.tips {
        let fx = layout.probes[t.probe_index as usize]
            .tip_levels(t.trailing)
            .expect("written by tipcheck --write");
        let (a, w) = t.levels.expect("levels in use");
        assert_eq!(
            (a, w),
            (fx.air.round() as i16, fx.water.round() as i16),
            "{t:?}"
        );
        assert_eq!(t.fixed, Some(true), "{t:?}");
        assert_eq!(t.interfaces_per_s, None, "no window outside a run: {t:?}");
        assert!(t.flags.is_empty(), "{t:?}");
    }
}
