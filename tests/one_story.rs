//! One story from replay to report: the replay summary, the live view's end-of-session
//! figures and the report give the same per-probe C, F and V for the committed steady
//! fixture, because all three go through `probe_summary::ProbeTally` with one rule.
//!
//! The three paths see the windows in different forms: chain records (replay), the
//! quantised wire frames a device sends (live: C in 1e-4, F in 0.01 Hz, V in mm/s), and the
//! text of windows.csv (report, f32 digits). The tolerances are those quantisation steps.

use frothline_core::wire::WindowResult;
use frothline_host::live::state::{LiveState, LiveWindow};
use frothline_host::offline::replay::{probe_tallies, ReplayArgs};
use frothline_host::report::ReportArgs;
use std::path::PathBuf;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures/steady-b2")
        .join(name)
}

#[test]
fn replay_session_and_report_give_the_same_per_probe_figures() {
    // Host chains are built on the stack before they are boxed: run where the tool does.
    std::thread::Builder::new()
        .stack_size(frothline_host::cli::COMMAND_STACK)
        .spawn(same_figures)
        .unwrap()
        .join()
        .unwrap();
}

fn same_figures() {
    let dir = tempfile::tempdir().unwrap();
    let args = ReplayArgs {
        capture: fixture("capture.wav"),
        layout: fixture("layout.toml"),
        out: dir.path().to_path_buf(),
        window: "100ms".parse().unwrap(),
        quiet: true,
        // The simulated device learns its levels by the causal rule: so does this replay.
        levels: frothline_host::offline::record_levels::LevelRule::Device,
        strict: false,
    };
    let replay = frothline_host::offline::replay::run(&args).unwrap();
    let layout = &replay.layout;
    let fs = replay.sample_rate;
    let rule = frothline_host::shared::probe_summary::SummaryRule::default();
    let from_replay = probe_tallies(layout, fs, &replay.records, &rule);

    // The live path: each record as the wire frame a device sends, decoded by the view.
    let mut live = LiveState::new(&["sim".to_string()]);
    for r in &replay.records {
        let spacing = layout.probes[r.probe as usize]
            .tip_spacing_mm
            .map(|s| s as f32);
        let wire = WindowResult::from_probe_window_with_spacing(r, fs as f32, spacing);
        live.window(&LiveWindow::from_wire(1, &wire, Some(fs as f64)));
    }
    let from_live: Vec<_> = live.devices[&1]
        .probes
        .iter()
        .map(|p| p.tally.clone())
        .collect();

    // A mark of a live session shows in the report.
    let mut marks = frothline_host::shared::marks::MarksCsv::new(dir.path());
    marks
        .write(&frothline_host::shared::marks::Mark {
            run_number: 1,
            run_label: "flume-b2".into(),
            host_utc: "2026-12-02T07:00:00.000Z".into(),
            device_time_s: Some(0.75),
            note: "inflow valve <half>".into(),
        })
        .unwrap();
    let report = frothline_host::report::run(&ReportArgs::new(dir.path())).unwrap();
    let html = std::fs::read_to_string(&report.html).unwrap();
    assert!(html.contains("<h2 id=\"marks\">Marks</h2>"));
    assert!(html.contains("inflow valve &lt;half&gt;") && html.contains("flume-b2"));
    assert_eq!(report.probe_summaries.len(), layout.probes.len());

    let mut some_velocity_left_out = false;
    for (i, p) in layout.probes.iter().enumerate() {
        let (rp, lv) = (&from_replay[i], &from_live[i]);
        let (name, rs) = &report.probe_summaries[i];
        assert_eq!(name, &p.name);
        let m = |e: Option<frothline_host::shared::running_stats::Estimate>| e.map(|e| e.mean);
        let close = |what: &str, a: Option<f64>, b: Option<f64>, tol: f64| match (a, b) {
            (Some(a), Some(b)) => assert!((a - b).abs() <= tol, "{} {what}: {a} vs {b}", p.name),
            (None, None) => {}
            _ => panic!("{} {what}: {a:?} vs {b:?}", p.name),
        };
        assert_eq!((rp.windows, rp.used), (lv.windows, lv.used), "{}", p.name);
        assert_eq!(rp.used as usize, rs.used, "{}", p.name);
        assert_eq!(rp.velocity_used as usize, rs.velocity_used, "{}", p.name);
        close("C live", m(rp.void_fraction()), m(lv.void_fraction()), 5e-5);
        close("F live", m(rp.count_rate_hz()), m(lv.count_rate_hz()), 5e-3);
        close("V live", m(rp.velocity_m_s()), m(lv.velocity_m_s()), 5e-4);
        close("C report", m(rp.void_fraction()), rs.void_fraction, 1e-6);
        close("F report", m(rp.count_rate_hz()), rs.count_rate_hz, 1e-4);
        close("V report", m(rp.velocity_m_s()), rs.velocity_m_s, 1e-5);
        some_velocity_left_out |= rp.velocity_untrusted > 0;
    }
    // The fixture has windows whose velocity is untrusted: the rule was exercised.
    assert!(some_velocity_left_out);
}
