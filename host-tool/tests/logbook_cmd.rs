//! `frothline logbook`: flash images written by the core's own `Logbook` and `FieldLogger`
//! over a RAM NOR flash, read back into windows.csv and a summary; and the errors of
//! images that are not logs.

use embedded_storage::nor_flash::{ErrorType, NorFlash, NorFlashErrorKind, ReadNorFlash};
use frothline_core::logbook::{FieldLogger, Logbook, MAX_RECORD_BYTES};
use frothline_core::wire::{
    self, Body, ChordTimes, DeviceDescription, Frame, FrontArrival, Health, ProbeLayout,
    WindowResult, WindowSetting, Windows, MAX_FRAME_BYTES,
};
use frothline_host::field::logbook::{read_image, LogbookArgs, LogbookReport};
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use std::collections::VecDeque;
use std::path::{Path, PathBuf};
use std::process::Command;

// ---------------------------------------------------------------------------------------
// A RAM NOR flash (common practice, no source): erase sets a page to 0xFF, a write can only
// clear bits (the new byte is old AND written), and every byte is programmed at most once
// between two erases.

struct RamFlash<const PAGE: usize, const W: usize> {
    mem: Vec<u8>,
}

impl<const PAGE: usize, const W: usize> RamFlash<PAGE, W> {
    fn erased(pages: usize) -> Self {
        RamFlash {
            mem: vec![0xFF; pages * PAGE],
        }
    }
}

impl<const PAGE: usize, const W: usize> ErrorType for RamFlash<PAGE, W> {
    type Error = NorFlashErrorKind;
}

impl<const PAGE: usize, const W: usize> ReadNorFlash for RamFlash<PAGE, W> {
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), NorFlashErrorKind> {
        let o = offset as usize;
        let src = self
            .mem
            .get(o..o + bytes.len())
            .ok_or(NorFlashErrorKind::OutOfBounds)?;
        bytes.copy_from_slice(src);
        Ok(())
    }

    fn capacity(&self) -> usize {
        self.mem.len()
    }
}

impl<const PAGE: usize, const W: usize> NorFlash for RamFlash<PAGE, W> {
    const WRITE_SIZE: usize = W;
    const ERASE_SIZE: usize = PAGE;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), NorFlashErrorKind> {
        let (a, b) = (from as usize, to as usize);
        if !a.is_multiple_of(PAGE) || !b.is_multiple_of(PAGE) || a > b || b > self.mem.len() {
            return Err(NorFlashErrorKind::NotAligned);
        }
        self.mem[a..b].fill(0xFF);
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), NorFlashErrorKind> {
        let o = offset as usize;
        if !o.is_multiple_of(W)
            || !bytes.len().is_multiple_of(W)
            || o + bytes.len() > self.mem.len()
        {
            return Err(NorFlashErrorKind::NotAligned);
        }
        let dst = &mut self.mem[o..o + bytes.len()];
        assert!(
            dst.iter().all(|&b| b == 0xFF),
            "write over programmed bytes at {o} (NOR: once between erases)"
        );
        for (m, w) in dst.iter_mut().zip(bytes) {
            *m &= w;
        }
        Ok(())
    }
}

// ---------------------------------------------------------------------------------------
// Frames, as a device sends them (core/tests/wire.rs, core/tests/logbook.rs).

const DEVICE: u16 = 7;
const FS_HZ: f64 = 20_000.0;

fn enc(f: &Frame) -> Vec<u8> {
    let mut buf = [0u8; MAX_FRAME_BYTES];
    wire::encode(f, &mut buf).unwrap().to_vec()
}

fn describe(seq: u16) -> Frame {
    let mut d = DeviceDescription {
        firmware: Default::default(),
        sample_rate_millihz: (FS_HZ * 1000.0) as u32,
        channels: 3,
        window: WindowSetting::Frames(1000),
        probes: Default::default(),
    };
    d.firmware.push_str("field-1").unwrap();
    for (station, elevation) in [(0u8, 120i32), (0, 250)] {
        d.probes
            .push(ProbeLayout {
                station,
                leading: station,
                trailing: None,
                elevation,
                x: 0,
            })
            .unwrap();
    }
    Frame {
        device: DEVICE,
        seq,
        body: Body::Describe(d),
    }
}

/// The window results of result frame `seq`: one per probe, values that differ per frame.
fn results(seq: u16) -> Vec<WindowResult> {
    let s = seq as u64;
    (0..2u8)
        .map(|probe| WindowResult {
            probe,
            start: s * 1000,
            frames: 1000,
            void_fraction: ((s * 37 + probe as u64 * 1000) % 10_000) as u16,
            bubble_rate: (s * 11 + probe as u64) as u32,
            bubbles: (s % 50) as u32 + probe as u32,
            chords: (!s.is_multiple_of(3)).then_some(ChordTimes {
                mean: 1000 + s as u32,
                median: 900,
                p10: 300,
                p90: 2000,
            }),
            correlation: None,
            flags: 0,
        })
        .collect()
}

fn result_frame(seq: u16) -> Frame {
    let mut w = Windows::new();
    for r in results(seq) {
        w.push(r).unwrap();
    }
    Frame {
        device: DEVICE,
        seq,
        body: Body::Windows(w),
    }
}

fn front_frame(seq: u16) -> Frame {
    Frame {
        device: DEVICE,
        seq,
        body: Body::Front(FrontArrival {
            probe: 0,
            station: 0,
            frame: seq as u64 * 1000,
        }),
    }
}

fn health_frame(seq: u16) -> Frame {
    Frame {
        device: DEVICE,
        seq,
        body: Body::Health(Health {
            samples_dropped: 0,
            saturated_samples: 3,
            tips_stuck: 0,
            buffer_high_water: 100,
            windows_dropped: 0,
            frames_dropped: 0,
            uptime_frames: seq as u64 * 1000,
        }),
    }
}

/// A field log and what was written to it.
struct Built {
    image: Vec<u8>,
    /// Window results of the logged frames, in log order.
    windows: Vec<WindowResult>,
    /// Records appended, fronts and health frames among them.
    records: usize,
    fronts: usize,
    healths: usize,
    /// The image just before the last append.
    before_last: Vec<u8>,
}

const PRE_TRIGGER: usize = 4;
const CAPTURE: u32 = 6;

/// A device's field log: a description, then `cycles` of (10 results while armed, a
/// front, the capture, a health frame). The logged frames are modelled from the logger's
/// documented behaviour (the last `PRE_TRIGGER` armed results, the front, `CAPTURE`
/// results) so the test does not trust the logger for what it expects. As a device does,
/// the room of a capture is erased ahead while armed, before each front (a capture never
/// erases). `strip`: the records are logged without their 0x00 delimiter.
fn build<const PAGE: usize, const W: usize>(pages: usize, cycles: usize, strip: bool) -> Built {
    let mut log = Logbook::mount(RamFlash::<PAGE, W>::erased(pages)).unwrap();
    let mut fl: FieldLogger<PRE_TRIGGER> = FieldLogger::new(CAPTURE);
    let bytes = |f: &Frame| {
        let mut b = enc(f);
        if strip {
            assert_eq!(b.pop(), Some(0));
        }
        b
    };
    let mut seq = 0u16;
    let mut next = || {
        seq += 1;
        seq
    };
    let mut windows = Vec::new();
    let (mut records, mut fronts, mut healths) = (0, 0, 0);
    let mut before_last = Vec::new();
    log.append(&bytes(&describe(next()))).unwrap();
    records += 1;
    // Room for the ring, the front and the capture, in frames of the longest kind.
    let longest = bytes(&result_frame(u16::MAX)).len();
    fl.set_reserve(PRE_TRIGGER as u32 + 1 + CAPTURE, longest);
    fl.arm();
    for _ in 0..cycles {
        assert!(fl.prepare(&mut log).unwrap(), "no room for a capture");
        let mut ring: VecDeque<u16> = VecDeque::new();
        for _ in 0..10 {
            let s = next();
            fl.result(&bytes(&result_frame(s)), &mut log).unwrap();
            ring.push_back(s);
            if ring.len() > PRE_TRIGGER {
                ring.pop_front();
            }
        }
        let f = next();
        fl.front_detected(&bytes(&front_frame(f)), &mut log)
            .unwrap();
        for s in ring {
            windows.extend(results(s));
            records += 1;
        }
        records += 1;
        fronts += 1;
        for _ in 0..CAPTURE {
            let s = next();
            fl.result(&bytes(&result_frame(s)), &mut log).unwrap();
            windows.extend(results(s));
            records += 1;
        }
        log.append(&bytes(&health_frame(next()))).unwrap();
        records += 1;
        healths += 1;
    }
    // A last result frame, appended on its own (the test of a cut append cuts this one).
    let mem = log.into_inner().mem;
    before_last.clone_from(&mem);
    let mut log = Logbook::mount(RamFlash::<PAGE, W> { mem }).unwrap();
    let s = next();
    log.append(&bytes(&result_frame(s))).unwrap();
    windows.extend(results(s));
    records += 1;
    assert_eq!(fl.stats().logged as usize + 1 + healths + 1, records);
    Built {
        image: log.into_inner().mem,
        windows,
        records,
        fronts,
        healths,
        before_last,
    }
}

// ---------------------------------------------------------------------------------------
// Running the command.

fn write_image(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

fn args(image: &Path, out: &Path) -> LogbookArgs {
    LogbookArgs {
        port: None,
        baud: 921_600,
        image: Some(image.to_path_buf()),
        out: out.to_path_buf(),
        layout: None,
        page_bytes: None,
        write_unit: None,
        quiet: true,
    }
}

/// `frothline logbook IMAGE --out OUT EXTRA...` through the CLI entry point.
fn cli(
    image: &Path,
    out: &Path,
    extra: &[&str],
) -> Result<(), frothline_host::shared::error::HostError> {
    let mut a: Vec<String> = vec![
        "frothline".into(),
        "logbook".into(),
        image.display().to_string(),
        "--out".into(),
        out.display().to_string(),
        "--quiet".into(),
    ];
    a.extend(extra.iter().map(|s| s.to_string()));
    frothline_host::cli::run(a)
}

/// The real binary: (exit code, stdout, stderr).
fn binary(image: &Path, out: &Path, extra: &[&str]) -> (Option<i32>, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_frothline"))
        .arg("logbook")
        .arg(image)
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .unwrap();
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

fn csv_rows(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let mut r = csv::Reader::from_path(path).unwrap();
    let header = r.headers().unwrap().iter().map(str::to_string).collect();
    let rows = r
        .records()
        .map(|x| x.unwrap().iter().map(str::to_string).collect())
        .collect();
    (header, rows)
}

fn num(s: &str) -> f64 {
    s.parse()
        .unwrap_or_else(|_| panic!("`{s}` is not a number"))
}

fn close(got: &str, want: f64, what: &str, i: usize) {
    let g = num(got);
    assert!(
        (g - want).abs() <= 1e-6 * want.abs().max(1.0),
        "row {i} {what}: {g} != {want}"
    );
}

/// windows.csv rows against the window results, value by value: the units are those of
/// docs/wire-protocol.md (fractions in 1e-4, rates in 0.01 Hz, chords in µs, times from
/// the sample clock). `timed`: the device description is in the log.
fn check_windows(csv: &Path, want: &[WindowResult], timed: bool) {
    let (header, rows) = csv_rows(csv);
    assert_eq!(
        header[..12],
        frothline_host::shared::windows_csv::COLUMNS[..12]
    );
    assert_eq!(rows.len(), want.len(), "rows of {}", csv.display());
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let (c_start, c_end) = (col("window_start_s"), col("window_end_s"));
    let (c_vf, c_rate) = (col("void_fraction"), col("bubble_count_rate_hz"));
    let (c_chord, c_bubbles) = (col("bubble_chord_mean_s"), col("bubbles"));
    for (i, (row, w)) in rows.iter().zip(want).enumerate() {
        assert_eq!(row[0], format!("p{}", w.probe), "row {i} probe");
        if timed {
            close(&row[c_start], w.start as f64 / FS_HZ, "start", i);
            close(
                &row[c_end],
                (w.start + w.frames as u64) as f64 / FS_HZ,
                "end",
                i,
            );
        } else {
            assert_eq!(row[c_start], "", "row {i}: no sample rate, no time");
        }
        close(&row[c_vf], w.void_fraction as f64 / 1e4, "void fraction", i);
        close(&row[c_rate], w.bubble_rate as f64 / 100.0, "rate", i);
        match w.chords {
            Some(c) => close(&row[c_chord], c.mean as f64 / 1e6, "chord", i),
            None => assert_eq!(row[c_chord], "", "row {i} chord"),
        }
        assert_eq!(row[c_bubbles], w.bubbles.to_string(), "row {i} bubbles");
    }
}

// ---------------------------------------------------------------------------------------

#[test]
fn field_log_reads_back_into_windows_csv_in_order() {
    let b = build::<4096, 4>(16, 12, false);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "field.bin", &b.image);
    let out = dir.path().join("out");
    cli(&img, &out, &[]).unwrap();
    check_windows(&out.join("windows.csv"), &b.windows, true);
    // The fronts: one row each, at the arrival frame's time.
    let (_, fronts) = csv_rows(&out.join("fronts.csv"));
    assert_eq!(fronts.len(), b.fronts);
    // The summary: every record read, every frame decoded, by kind.
    let r = read_image(&args(&img, &dir.path().join("again"))).unwrap();
    assert_eq!(r.records as usize, b.records);
    assert!(!r.recovered_cut);
    assert_eq!(r.kinds.get("describe"), Some(&1));
    assert_eq!(r.kinds.get("front").copied(), Some(b.fronts as u64));
    assert_eq!(r.kinds.get("health").copied(), Some(b.healths as u64));
    let windows_frames = b.records - 1 - b.fronts - b.healths;
    assert_eq!(r.kinds.get("windows").copied(), Some(windows_frames as u64));
    let d = r.session.ports[0].decoder;
    assert_eq!((d.crc_failures, d.malformed), (0, 0));
    // Between captures the results are not logged: sequence gaps, one per capture after
    // the first (6 armed results left the ring unlogged each time).
    assert_eq!(r.session.seq_gaps.len(), 12);
    assert!(r.session.seq_gaps.iter().all(|g| g.missing == 6));
    assert!(r.pages_found >= 3, "{} pages used", r.pages_found);
}

fn detects<const PAGE: usize, const W: usize>(pages: usize) -> LogbookReport {
    let b = build::<PAGE, W>(pages, 10, false);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "field.bin", &b.image);
    let out = dir.path().join("out");
    let r = read_image(&args(&img, &out)).unwrap();
    assert_eq!(r.geometry.page_bytes, PAGE, "page of a {PAGE}/{W} image");
    // Write units 1, 2 and 4 lay a log out the same (the core pads to 4 bytes at least);
    // ties go to the larger unit.
    assert_eq!(
        r.geometry.write_unit,
        W.max(4),
        "unit of a {PAGE}/{W} image"
    );
    assert!(r.detected);
    assert_eq!(r.records as usize, b.records);
    assert_eq!(r.pages as usize, pages);
    assert!(r.pages_found >= 2, "the image should use several pages");
    check_windows(&out.join("windows.csv"), &b.windows, true);
    // The given geometry reads the same.
    let out2 = dir.path().join("given");
    let (p, w) = (PAGE.to_string(), W.to_string());
    cli(&img, &out2, &["--page-bytes", &p, "--write-unit", &w]).unwrap();
    check_windows(&out2.join("windows.csv"), &b.windows, true);
    r
}

#[test]
fn geometry_is_detected_from_the_image() {
    detects::<4096, 4>(16);
    detects::<2048, 8>(16);
    detects::<1024, 1>(32);
    detects::<8192, 16>(8);
}

#[test]
fn a_cut_last_append_reads_every_committed_record_and_says_so() {
    let b = build::<4096, 4>(16, 6, false);
    // The last append's commit word: the last byte it changed ends it (the word is
    // programmed last; 0x0C is its last byte, not 0xFF). Back to erased: the power was cut
    // before the commit word was written (common practice, no source).
    let last = (0..b.image.len())
        .rev()
        .find(|&i| b.image[i] != b.before_last[i])
        .unwrap();
    let mut image = b.image.clone();
    image[last - 3..=last].fill(0xFF);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "cut.bin", &image);
    let out = dir.path().join("out");
    let r = read_image(&args(&img, &out)).unwrap();
    assert!(r.recovered_cut, "the cut head page is reported");
    assert_eq!(r.records as usize, b.records - 1);
    let committed = &b.windows[..b.windows.len() - 2];
    check_windows(&out.join("windows.csv"), committed, true);
    let (code, stdout, stderr) = binary(&img, &dir.path().join("bin"), &[]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(
        stdout.contains("head page: CUT by a power loss"),
        "{stdout}"
    );
    assert!(stdout.contains("4096-byte pages"), "{stdout}");
    // The uncut image says clean.
    let img = write_image(dir.path(), "whole.bin", &b.image);
    let (code, stdout, _) = binary(&img, &dir.path().join("bin2"), &[]);
    assert_eq!(code, Some(0));
    assert!(stdout.contains("head page: clean"), "{stdout}");
    assert!(
        stdout.contains(&format!("{} committed records read", b.records)),
        "{stdout}"
    );
}

#[test]
fn a_recycled_ring_reads_the_newest_records_in_order() {
    // 4 pages of 1 KiB: 3 hold records; far more is logged than they hold.
    let b = build::<1024, 4>(4, 20, false);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "ring.bin", &b.image);
    let out = dir.path().join("out");
    let r = read_image(&args(&img, &out)).unwrap();
    assert_eq!(r.geometry.page_bytes, 1024);
    assert!(
        (r.records as usize) < b.records / 2,
        "{} of {} records: the ring should have recycled",
        r.records,
        b.records
    );
    // The description went with the oldest page: no times, but the values, in order, are
    // the newest results logged.
    let (_, rows) = csv_rows(&out.join("windows.csv"));
    assert!(rows.len() >= 10, "{} rows", rows.len());
    let newest = &b.windows[b.windows.len() - rows.len()..];
    check_windows(&out.join("windows.csv"), newest, false);
    assert_eq!(r.session.windows_without_times as usize, rows.len());
}

#[test]
fn records_without_a_delimiter_read_the_same() {
    let b = build::<2048, 4>(16, 8, true);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "nodelim.bin", &b.image);
    let out = dir.path().join("out");
    let r = read_image(&args(&img, &out)).unwrap();
    assert_eq!(r.records_without_delimiter as usize, b.records);
    assert_eq!(r.records as usize, b.records);
    check_windows(&out.join("windows.csv"), &b.windows, true);
}

fn err_text(image: &Path, out: &Path, extra: &[&str]) -> (u8, String) {
    let e = cli(image, out, extra).expect_err("should fail");
    (e.exit_code(), e.to_string())
}

#[test]
fn images_that_are_not_logs_fail_with_clear_messages() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    // Missing file.
    let (code, msg) = err_text(&dir.path().join("nope.bin"), &out, &[]);
    assert_eq!(code, 2);
    assert!(msg.contains("cannot read flash image"), "{msg}");
    // Empty file.
    let empty = write_image(dir.path(), "empty.bin", &[]);
    let (code, msg) = err_text(&empty, &out, &[]);
    assert_eq!(code, 2);
    assert!(msg.contains("empty"), "{msg}");
    // Random garbage (deterministic seed): no page header anywhere.
    let mut rng = StdRng::seed_from_u64(0xF1E1D);
    let garbage: Vec<u8> = (0..64 * 1024).map(|_| rng.random()).collect();
    let junk = write_image(dir.path(), "junk.bin", &garbage);
    let (code, msg) = err_text(&junk, &out, &[]);
    assert_eq!(code, 2);
    assert!(msg.starts_with("no field-log pages found"), "{msg}");
    let (code, _, stderr) = binary(&junk, &out, &[]);
    assert_eq!(code, Some(2), "{stderr}");
    assert!(
        stderr.starts_with("error: no field-log pages found"),
        "{stderr}"
    );
    assert!(!stderr.contains("panicked"), "{stderr}");
    // Erased flash: no page either.
    let erased = write_image(dir.path(), "erased.bin", &vec![0xFF; 32 * 1024]);
    let (_, msg) = err_text(&erased, &out, &[]);
    assert!(msg.starts_with("no field-log pages found"), "{msg}");
    // A length that is no whole number of pages: a dump cut short.
    let b = build::<4096, 4>(8, 2, false);
    let mut short = b.image.clone();
    short.truncate(b.image.len() - 100);
    let cut = write_image(dir.path(), "short.bin", &short);
    let (code, msg) = err_text(&cut, &out, &[]);
    assert_eq!(code, 2);
    assert!(msg.contains("not a multiple of any page size"), "{msg}");
    let odd = write_image(dir.path(), "odd.bin", &b.image[..b.image.len() - 1024]);
    let (_, msg) = err_text(&odd, &out, &["--page-bytes", "4096"]);
    assert!(
        msg.contains("not a whole number of 4096-byte pages"),
        "{msg}"
    );
}

#[test]
fn a_given_geometry_the_log_cannot_use_is_refused() {
    let b = build::<4096, 4>(8, 6, false);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "field.bin", &b.image);
    let out = dir.path().join("out");
    // 256-byte pages cannot hold the largest record: the core refuses the geometry.
    const { assert!(MAX_RECORD_BYTES > 256) };
    let (code, msg) = err_text(&img, &out, &["--page-bytes", "256", "--write-unit", "4"]);
    assert_eq!(code, 2);
    assert!(
        msg.contains("cannot be read with 256-byte pages and a 4-byte write unit"),
        "{msg}"
    );
    // The whole image as one page: fewer than two pages.
    let (_, msg) = err_text(&img, &out, &["--page-bytes", "32768"]);
    assert!(
        msg.contains("cannot be read with 32768-byte pages"),
        "{msg}"
    );
    // Values outside what the flash traits are built for.
    let (_, msg) = err_text(&img, &out, &["--page-bytes", "3000"]);
    assert!(
        msg.contains("--page-bytes 3000: not a supported page size"),
        "{msg}"
    );
    let (_, msg) = err_text(&img, &out, &["--write-unit", "3"]);
    assert!(
        msg.contains("--write-unit 3: not a supported write unit"),
        "{msg}"
    );
    // A wrong but usable geometry is read as given (fewer records) and reported as given.
    let mut a = args(&img, &dir.path().join("given"));
    a.page_bytes = Some(2048);
    a.write_unit = Some(4);
    let r = read_image(&a).unwrap();
    assert!(!r.detected);
    assert_eq!(r.geometry.page_bytes, 2048);
    assert!((r.records as usize) < b.records);
}

#[test]
fn geometry_ties_go_to_the_smaller_page_then_the_larger_unit() {
    // One cycle fits in the first KiB of page 0: every page size from 1 KiB to half the
    // image reads the same records, and units 1, 2 and 4 lay them out the same.
    let b = build::<4096, 4>(8, 1, false);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "small.bin", &b.image);
    let out = dir.path().join("out");
    let r = read_image(&args(&img, &out)).unwrap();
    assert_eq!(r.records as usize, b.records);
    assert_eq!((r.geometry.page_bytes, r.geometry.write_unit), (1024, 4));
    assert_eq!(r.same_records_pages, [1024, 2048, 4096, 8192, 16384]);
    assert!(r
        .to_string()
        .contains("pages of 1024 to 16384 B read the same"));
    check_windows(&out.join("windows.csv"), &b.windows, true);
}

/// A 16 x 4 KiB log dumped with 0xFF padding to 17 MiB (a dump of the whole flash chip,
/// larger than the core's 4096-page limit for 4 KiB pages) is read as 4 KiB pages: every
/// record, and no power-loss cut reported (it used to be read as 8 KiB pages, losing
/// records and reporting a cut head page).
#[test]
fn an_oversized_erased_padding_keeps_the_page_size_of_the_log() {
    let b = build::<4096, 4>(16, 10, false);
    let mut image = b.image.clone();
    image.resize(17 << 20, 0xFF);
    let dir = tempfile::tempdir().unwrap();
    let img = write_image(dir.path(), "padded.bin", &image);
    let out = dir.path().join("out");
    let r = read_image(&args(&img, &out)).unwrap();
    assert_eq!(r.geometry.page_bytes, 4096);
    assert_eq!(r.records as usize, b.records);
    assert!(!r.recovered_cut);
    check_windows(&out.join("windows.csv"), &b.windows, true);
}

// ---------------------------------------------------------------------------------------
// Random damage at random offsets (property test).

/// The undamaged field log of the property below and its records, built once.
fn undamaged() -> &'static (Vec<u8>, Vec<Vec<u8>>) {
    static LOG: std::sync::OnceLock<(Vec<u8>, Vec<Vec<u8>>)> = std::sync::OnceLock::new();
    LOG.get_or_init(|| {
        let b = build::<4096, 4>(16, 6, false);
        let g = frothline_host::field::flash_image::Geometry {
            page_bytes: 4096,
            write_unit: 4,
        };
        let r = frothline_host::field::flash_image::read_log(&b.image, g).unwrap();
        assert_eq!(r.records.len(), b.records);
        (b.image, r.records)
    })
}

/// One kind of damage: bytes XORed with a non-zero value, a stretch erased (0xFF, a page
/// erase or a cut write), or a stretch zeroed (programmed over).
#[derive(Clone, Debug)]
enum Damage {
    Flip { at: usize, xor: u8 },
    Erase { at: usize, len: usize },
    Zero { at: usize, len: usize },
}

fn damage() -> impl proptest::strategy::Strategy<Value = Damage> {
    use proptest::prelude::*;
    let n: usize = 16 * 4096;
    prop_oneof![
        (0..n, 1u8..=255).prop_map(|(at, xor)| Damage::Flip { at, xor }),
        (0..n, 1usize..600).prop_map(|(at, len)| Damage::Erase { at, len }),
        (0..n, 1usize..600).prop_map(|(at, len)| Damage::Zero { at, len }),
    ]
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig { cases: 128, ..Default::default() })]

    /// A flash image with random damage at random offsets: the reader never panics and
    /// either refuses the image by name or reads records that are all records of the
    /// undamaged log, in its order (each record carries a CRC-32, so a damaged one is
    /// dropped, not read wrong: the log's format, `frothline_core::logbook`), never more
    /// of them; `logbook` (geometry detection, CSV) ends with its files or an error naming
    /// the image.
    #[test]
    fn a_flash_image_damaged_at_random_reads_a_subsequence_of_its_records(
        hits in proptest::collection::vec(damage(), 1..6),
    ) {
        let (image, records) = undamaged();
        let mut img = image.clone();
        for d in &hits {
            let (at, len, f): (usize, usize, Box<dyn Fn(u8) -> u8>) = match *d {
                Damage::Flip { at, xor } => (at, 1, Box::new(move |b| b ^ xor)),
                Damage::Erase { at, len } => (at, len, Box::new(|_| 0xFF)),
                Damage::Zero { at, len } => (at, len, Box::new(|_| 0)),
            };
            let end = (at + len).min(img.len());
            for b in &mut img[at..end] {
                *b = f(*b);
            }
        }
        let g = frothline_host::field::flash_image::Geometry { page_bytes: 4096, write_unit: 4 };
        if let Ok(r) = frothline_host::field::flash_image::read_log(&img, g) {
            proptest::prop_assert!(r.records.len() <= records.len());
            // A subsequence of the undamaged records, in order.
            let mut from = 0;
            for rec in &r.records {
                let at = records[from..].iter().position(|x| x == rec);
                proptest::prop_assert!(at.is_some(), "a record not in the undamaged log");
                from += at.unwrap() + 1;
            }
        }
        let dir = tempfile::tempdir().unwrap();
        let path = write_image(dir.path(), "damaged.bin", &img);
        match read_image(&args(&path, &dir.path().join("out"))) {
            Ok(r) => proptest::prop_assert!(r.records as usize <= records.len()),
            Err(e) => {
                let msg = e.to_string();
                proptest::prop_assert!(msg.contains("damaged.bin"), "{}", msg);
            }
        }
    }
}
