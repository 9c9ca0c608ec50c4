//! Property tests that generate bad input rather than list it: WAV files with random
//! headers, truncation points and data-size fields; layouts made of random TOML over the
//! schema's keys with random values (extreme floats included); windows.csv files with
//! random cells, extreme floats and rows cut short, for `report`.
//!
//! Each property: no panic; work bounded by a count that is checked (frames read against
//! the bytes present, columns scanned against the text length), never by a clock; and
//! either an error that names the input or an output that agrees with the undamaged input
//! up to the damage.

use frothline_host::shared::capture::Capture;
use frothline_host::shared::layout::{Layout, MAX_ABS_X_MM, MAX_ELEVATION_MM, MAX_TIP_SPACING_MM};
use proptest::prelude::*;
use std::path::Path;

// ---------------------------------------------------------------------------------------
// WAV files

/// A 16-bit PCM WAV of `frames` frames of `channels` channels (sample = a counter).
fn wav(channels: u16, frames: usize) -> (Vec<u8>, Vec<i16>) {
    let samples: Vec<i16> = (0..frames * channels as usize)
        .map(|i| (i as i32 * 7919 % 65_536 - 32_768) as i16)
        .collect();
    let spec = hound::WavSpec {
        channels,
        sample_rate: 20_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut cur = std::io::Cursor::new(Vec::new());
    let mut w = hound::WavWriter::new(&mut cur, spec).unwrap();
    for &s in &samples {
        w.write_sample(s).unwrap();
    }
    w.finalize().unwrap();
    (cur.into_inner(), samples)
}

/// Offset of the first data byte (hound writes an extensible header beyond 2 channels).
fn data_start(bytes: &[u8]) -> usize {
    bytes.windows(4).position(|w| w == b"data").unwrap() + 8
}

/// Reads every frame a capture hands back, in blocks of `block` frames; the error, if any.
fn read_all(mut c: Capture, block: usize) -> (Vec<i16>, Option<String>, Capture) {
    let mut all = Vec::new();
    let mut buf = Vec::new();
    // A bound on the calls: one per block of the file's frames, plus the end.
    let bound = c.frames_in_file() / block as u64 + 3;
    for _ in 0..bound {
        match c.read_frames(&mut buf, block) {
            Ok(0) => return (all, None, c),
            Ok(n) => {
                assert_eq!(buf.len(), n * c.channels());
                all.extend_from_slice(&buf);
            }
            Err(e) => return (all, Some(e.to_string()), c),
        }
    }
    panic!("the reader did not reach the end within {bound} calls");
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    /// A good file cut at any byte: the frames before the cut are the undamaged file's,
    /// then either the end (cut on a whole frame at the declared end) or an error naming
    /// the file; with `end_at_cut`, the cut is a plain end and is reported by `cut()`.
    #[test]
    fn a_wav_cut_anywhere_reads_the_frames_before_the_cut(
        channels in 1u16..6, frames in 0usize..300, cut_frac in 0.0f64..1.0, block in 1usize..64,
        lenient: bool,
    ) {
        let (bytes, samples) = wav(channels, frames);
        let start = data_start(&bytes);
        let cut = start + ((bytes.len() - start) as f64 * cut_frac) as usize;
        let name = Path::new("cut.wav");
        let mut c = Capture::from_bytes(name, bytes[..cut].to_vec()).unwrap();
        if lenient {
            c.end_at_cut();
        }
        let (got, err, c) = read_all(c, block);
        let whole = (cut - start) / (2 * channels as usize);
        prop_assert_eq!(&got[..], &samples[..whole * channels as usize]);
        if let Some(e) = err {
            prop_assert!(!lenient);
            prop_assert!(e.contains("cut.wav") && e.contains(&format!("frame {whole}")), "{}", e);
        }
        if lenient && whole < frames {
            prop_assert_eq!(c.cut().map(|x| x.frame), Some(whole as u64));
        }
    }

    /// Any data-size field: no panic; the frames read are a prefix of the samples present
    /// (the declared size, or the whole file for the unfinished-header values 0 and
    /// 0xFFFFFFFF), never more than the file holds.
    #[test]
    fn any_data_size_field_reads_a_prefix_of_the_samples(
        channels in 1u16..4, frames in 1usize..200,
        declared in prop_oneof![Just(0u32), Just(u32::MAX), any::<u32>(), 0u32..2000],
    ) {
        let (mut bytes, samples) = wav(channels, frames);
        let start = data_start(&bytes);
        bytes[start - 4..start].copy_from_slice(&declared.to_le_bytes());
        let mut c = Capture::from_bytes(Path::new("size.wav"), bytes).unwrap();
        c.end_at_cut();
        let unfinished = c.unfinished_header().is_some();
        let (got, err, _) = read_all(c, 17);
        prop_assert!(err.is_none());
        let frame_bytes = 2 * channels as usize;
        let expect = if unfinished {
            frames
        } else {
            (declared as usize / frame_bytes).min(frames)
        };
        prop_assert_eq!(&got[..], &samples[..expect * channels as usize]);
        prop_assert_eq!(unfinished, matches!(declared, 0 | u32::MAX));
    }

    /// Random bytes over the header (any of its first 44 bytes, any values), then random
    /// truncation: no panic; an error names the file; an accepted file reads whole frames,
    /// never more than its bytes hold.
    #[test]
    fn random_header_damage_is_refused_by_name_or_read_within_the_file(
        damage in prop::collection::vec((0usize..44, any::<u8>()), 1..8),
        keep in 0usize..2000, frames in 0usize..200,
    ) {
        let (mut bytes, _) = wav(2, frames);
        assert_eq!(data_start(&bytes), 44);
        for (i, v) in damage {
            bytes[i] = v;
        }
        bytes.truncate(keep.min(bytes.len()));
        let len = bytes.len();
        match Capture::from_bytes(Path::new("hdr.wav"), bytes) {
            Err(e) => prop_assert!(e.to_string().contains("hdr.wav"), "{}", e),
            Ok(c) => {
                let ch = c.channels();
                let (got, err, _) = read_all(c, 13);
                prop_assert!(got.len() <= len);
                prop_assert_eq!(got.len() % ch, 0);
                if let Some(e) = err {
                    prop_assert!(e.contains("hdr.wav"), "{}", e);
                }
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// Layouts

/// A float a hostile or careless file may hold.
fn any_float() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("nan".to_string()),
        Just("inf".to_string()),
        Just("-inf".to_string()),
        Just("1e300".to_string()),
        Just("-1e300".to_string()),
        Just("1e-300".to_string()),
        Just("0.0".to_string()),
        Just("-0.0".to_string()),
        Just("1.7976931348623157e308".to_string()),
        (-1e6f64..1e6).prop_map(|v| format!("{v:?}")),
        (0.0f64..200.0).prop_map(|v| format!("{v:?}")),
    ]
}

/// A value of any TOML type.
fn any_value() -> impl Strategy<Value = String> {
    prop_oneof![
        4 => any_float(),
        2 => (-3i64..70_000).prop_map(|v| v.to_string()),
        1 => any::<i64>().prop_map(|v| v.to_string()),
        1 => Just("true".to_string()),
        1 => "[a-zA-Z0-9 _-]{0,12}".prop_map(|s| format!("{s:?}")),
        1 => Just("\"steady\"".to_string()),
        1 => Just("\"transient\"".to_string()),
        1 => Just("\"air\"".to_string()),
        1 => Just("[1, 2]".to_string()),
    ]
}

const FLOW_KEYS: &[&str] = &[
    "kind",
    "phase_before_front",
    "reference_depth_m",
    "water_temperature_c",
    "colour",
];
const DETECTOR_KEYS: &[&str] = &[
    "threshold",
    "hysteresis",
    "learn_period_s",
    "min_swing",
    "rail_low",
    "rail_high",
    "min_bubbles",
    "window",
];
const PROBE_KEYS: &[&str] = &[
    "name",
    "elevation_mm",
    "x_mm",
    "leading",
    "trailing",
    "tip_spacing_mm",
    "air_is_high",
    "air_level",
    "water_level",
    "max_lag_ms",
    "spare",
];

fn table(keys: &'static [&'static str]) -> impl Strategy<Value = String> {
    prop::collection::vec((prop::sample::select(keys), any_value()), 0..8).prop_map(|kv| {
        kv.into_iter()
            .map(|(k, v)| format!("{k} = {v}\n"))
            .collect()
    })
}

/// A probe table: usually the required keys with sane values, then random keys over them.
fn probe(i: usize) -> impl Strategy<Value = String> {
    (any::<bool>(), table(PROBE_KEYS)).prop_map(move |(base, extra)| {
        let mut t = String::from("\n[[probe]]\n");
        if base {
            t.push_str(&format!(
                "name = \"P{i}\"\nelevation_mm = {}.0\nleading = {}\n",
                10 * i,
                2 * i
            ));
        }
        t.push_str(&extra);
        t
    })
}

fn layout_text() -> impl Strategy<Value = String> {
    (
        table(FLOW_KEYS),
        prop::option::of(table(DETECTOR_KEYS)),
        prop::collection::vec(0usize..1, 0..5),
    )
        .prop_flat_map(|(flow, det, probes)| {
            let n = probes.len();
            (Just(flow), Just(det), (0..n).map(probe).collect::<Vec<_>>())
        })
        .prop_map(|(flow, det, probes)| {
            let mut t = format!("[flow]\n{flow}");
            if let Some(d) = det {
                t.push_str(&format!("\n[detector]\n{d}"));
            }
            for p in probes {
                t.push_str(&p);
            }
            t
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 512, ..ProptestConfig::default() })]

    /// Random TOML over the schema's keys: no panic; an error names the file (and a line
    /// when it is about a key); an accepted layout keeps every documented bound.
    #[test]
    fn random_layouts_are_refused_by_name_or_within_bounds(text in layout_text()) {
        match Layout::parse(&text, Path::new("rand.toml")) {
            Err(e) => {
                let m = e.to_string();
                prop_assert!(m.starts_with("rand.toml"), "{}", m);
                if e.key().is_some() && e.key() != Some("probe") && e.key() != Some("flow") {
                    prop_assert!(e.location().is_some() || m.contains("missing"), "{}", m);
                }
            }
            Ok(l) => {
                for p in &l.probes {
                    prop_assert!(p.elevation_mm.is_finite() && p.elevation_mm <= MAX_ELEVATION_MM);
                    prop_assert!(p.x_mm.abs() <= MAX_ABS_X_MM);
                    if let Some(s) = p.tip_spacing_mm {
                        prop_assert!(s > 0.0 && s <= MAX_TIP_SPACING_MM);
                    }
                }
                let _ = l.stations();
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// windows.csv for report

const HEADER: &str = "probe,window_start_s,window_end_s,since_front_s,void_fraction,\
bubble_count_rate_hz,bubble_chord_mean_s,interfacial_velocity_m_s,correlation_peak,\
turbulence_intensity,bubbles,flags,elevation_mm,x_mm,bubble_chord_median_s,\
bubble_chord_p10_s,bubble_chord_p90_s";

/// A cell of a windows.csv: a plausible number, an extreme one, junk or empty.
fn cell() -> impl Strategy<Value = String> {
    prop_oneof![
        6 => (0.0f64..1.0).prop_map(|v| format!("{v}")),
        1 => Just("1e307".to_string()),
        1 => Just("-1e307".to_string()),
        1 => Just("1.7976931348623157e308".to_string()),
        1 => Just("5e-324".to_string()),
        1 => Just("NaN".to_string()),
        1 => Just("inf".to_string()),
        1 => Just(String::new()),
        1 => Just("x1".to_string()),
    ]
}

fn row(i: usize) -> impl Strategy<Value = String> {
    (prop::collection::vec(cell(), 16), 0usize..3).prop_map(move |(cells, probe)| {
        let mut r = vec![format!("P{probe}")];
        r.extend(cells);
        // Window times that increase, mostly.
        if !r[1].starts_with('x') {
            r[1] = format!("{}", i as f64 * 0.1);
            r[2] = format!("{}", i as f64 * 0.1 + 0.1);
        }
        r[11] = String::new();
        r.join(",")
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    /// Random cells, extreme floats, a last row cut at a random byte: `report` either
    /// draws its page or refuses with an error naming windows.csv; no panic, no hang (the
    /// case count is small because each case draws every figure).
    #[test]
    fn report_survives_random_windows_csv(
        rows in (1usize..12).prop_flat_map(|n| (0..n).map(row).collect::<Vec<_>>()),
        cut_frac in prop::option::of(0.0f64..1.0),
    ) {
        let mut text = format!("{HEADER}\n{}\n", rows.join("\n"));
        if let Some(f) = cut_frac {
            let last = text.trim_end().rfind('\n').unwrap_or(0) + 1;
            let at = last + ((text.len() - last) as f64 * f) as usize;
            text.truncate(at);
        }
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("windows.csv"), &text).unwrap();
        let mut args = frothline_host::report::ReportArgs::new(dir.path());
        args.out = Some(dir.path().join("out"));
        match frothline_host::report::run(&args) {
            Ok(s) => prop_assert!(s.html.exists()),
            Err(e) => prop_assert!(e.to_string().contains("windows.csv"), "{}", e),
        }
    }
}
