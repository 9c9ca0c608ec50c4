//! An independent decoder, written in Python from docs/wire-protocol.md alone
//! (tests/python/decode_frames.py: pyserial, COBS, zlib.crc32, varints), reads a live
//! pseudo-terminal fed by the simulated device and must decode the same window results as
//! `frothline replay` gives for the capture, after the wire's quantisation.
//!
//! Needs python3 with pyserial (`python3 -m pip install pyserial`). Without them the test is
//! skipped with a message, except under CI (`CI` set), where it fails.
#![cfg(unix)]

use frothline_core::wire::{ChordTimes, Correlation, WindowResult};
use frothline_host::live::device_sim::{self, wire_result, SimCapture, SimOptions};
use frothline_host::shared::commands::{Command, CommandLog};
use serde_json::Value;
use serialport::SerialPort;
use std::io::{BufRead, BufReader, Write};
use std::path::Path;
use std::process::{Command as Process, Stdio};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

fn python_with_pyserial() -> bool {
    Process::new("python3")
        .args(["-c", "import serial"])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success())
}

fn result_of(v: &Value) -> WindowResult {
    let u = |k: &str| v[k].as_u64().unwrap_or_else(|| panic!("{k} in {v}"));
    let chords = v["chords"].as_array().map(|c| {
        let c: Vec<u32> = c.iter().map(|x| x.as_u64().unwrap() as u32).collect();
        ChordTimes {
            mean: c[0],
            median: c[1],
            p10: c[2],
            p90: c[3],
        }
    });
    let correlation = v["correlation"].as_array().map(|c| Correlation {
        velocity: c[0].as_i64().unwrap() as i16,
        peak: c[1].as_u64().unwrap() as u16,
        turbulence: c[2].as_u64().map(|t| t as u16),
    });
    WindowResult {
        probe: u("probe") as u8,
        start: u("start"),
        frames: u("frames") as u32,
        void_fraction: u("void_fraction") as u16,
        bubble_rate: u("bubble_rate") as u32,
        bubbles: u("bubbles") as u32,
        chords,
        correlation,
        flags: u("flags") as u32,
    }
}

#[test]
fn the_python_decoder_reads_the_same_window_results() {
    if !python_with_pyserial() {
        let msg =
            "python3 with pyserial not found: install it with `python3 -m pip install pyserial`";
        if std::env::var_os("CI").is_some() {
            panic!("{msg} (required under CI)");
        }
        eprintln!("SKIPPED: {msg}");
        return;
    }
    // The chain is built on the stack before it is boxed: give the work a large stack.
    let h = std::thread::Builder::new()
        .stack_size(64 << 20)
        .spawn(run)
        .unwrap();
    if let Err(e) = h.join() {
        std::panic::resume_unwind(e);
    }
}

fn run() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let fixture = root.join("fixtures/steady-b2");
    let (capture, layout) = (fixture.join("capture.wav"), fixture.join("layout.toml"));
    let tmp = tempfile::tempdir().unwrap();
    let replay =
        frothline_host::offline::replay::run(&frothline_host::offline::replay::ReplayArgs {
            capture: capture.clone(),
            layout: layout.clone(),
            out: tmp.path().to_path_buf(),
            window: "100ms".parse().unwrap(),
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

    let cap = SimCapture::from_files(&capture, &layout, "100ms".parse().unwrap()).unwrap();
    let (mut master, mut slave) = serialport::TTYPort::pair().unwrap();
    master.set_timeout(Duration::from_millis(2)).unwrap();
    let path = slave.name().unwrap();
    let stop = Arc::new(AtomicBool::new(false));
    let opts = SimOptions {
        device: 5,
        baud: 0,
        speed: 10.0,
        autostart: false,
        repeat: false,
        ..SimOptions::default()
    };
    let sim = device_sim::spawn(cap, opts, master, stop.clone()).unwrap();

    let script = root.join("tests/python/decode_frames.py");
    let mut child = Process::new("python3")
        .arg(&script)
        .arg(&path)
        .args(["--count", &expected.len().to_string(), "--timeout", "60"])
        .stdout(Stdio::piped())
        .stderr(Stdio::inherit())
        .spawn()
        .unwrap();
    let mut lines = BufReader::new(child.stdout.take().unwrap()).lines();
    let first: Value = serde_json::from_str(&lines.next().unwrap().unwrap()).unwrap();
    assert_eq!(first["ready"], Value::Bool(true));
    // The port is open on the Python side (pyserial flushed what the device sent at power
    // on): ask for the description and start the run. Written into the slave end, the
    // commands reach the device on the master end.
    let mut log = CommandLog::default();
    let (_, describe_req) = log.encode(&Command::DescribeRequest).unwrap();
    let (seq, bytes) = log.encode(&Command::StartRun("py".into())).unwrap();
    slave.write_all(&describe_req).unwrap();
    slave.write_all(&bytes).unwrap();

    let mut got = Vec::new();
    let mut describe = None;
    let mut acked = false;
    let mut summary = None;
    for line in lines {
        let v: Value = serde_json::from_str(&line.unwrap()).unwrap();
        if let Some(s) = v.get("summary") {
            summary = Some(s.clone());
            continue;
        }
        assert_eq!(v["device"], 5);
        match v["kind"].as_str().unwrap() {
            "windows" => got.extend(v["body"].as_array().unwrap().iter().map(result_of)),
            "describe" => describe = Some(v["body"].clone()),
            "ack" => acked |= v["body"]["seq"] == seq,
            "nack" => panic!("the device refused: {v}"),
            _ => {}
        }
    }
    let status = child.wait().unwrap();
    stop.store(true, Ordering::Relaxed);
    sim.join().unwrap().unwrap();
    drop(slave);
    assert!(status.success(), "the Python decoder failed");
    let summary = summary.expect("summary line");
    println!("python decoder: {summary}");
    assert_eq!(summary["crc_or_malformed"], 0);
    assert_eq!(summary["lost"], 0);
    assert!(acked, "the StartRun command was acknowledged");
    let d = describe.expect("a device description");
    assert_eq!(d["sample_rate_millihz"], 20_000_000);
    assert_eq!(d["channels"], 11);
    assert_eq!(d["probes"].as_array().unwrap().len(), 6);
    assert_eq!(d["probes"][4]["elevation"], 900, "B2-5 at 90.0 mm");
    assert_eq!(d["probes"][4]["trailing"]["spacing"], 800, "8 mm tips");
    assert_eq!(d["probes"][5]["station"], 1, "B3-3 stands downstream");
    assert_eq!(got.len(), expected.len());
    for (i, (g, e)) in got.iter().zip(&expected).enumerate() {
        assert_eq!(g, e, "window result {i}");
    }
}
