//! Tests of the layout reader: keys, types, ranges, pairing rules, locations of errors.

use super::*;

const FILE: &str = "flume-b2-run14.toml";

fn parse(text: &str) -> Result<Layout, LayoutError> {
    Layout::parse(text, Path::new(FILE))
}

/// Parses `text`, expects an error on `key` at `line`, returns the message.
#[track_caller]
fn fails(text: &str, key: &str, line: usize) -> String {
    let err = parse(text).expect_err("layout should be rejected");
    let msg = err.to_string();
    assert!(msg.contains(FILE), "no file name in: {msg}");
    assert!(
        msg.contains(&format!("`{key}`")),
        "no key `{key}` in: {msg}"
    );
    assert!(
        msg.contains(&format!("line {line},")),
        "no line {line} in: {msg}"
    );
    assert_eq!(err.key(), Some(key), "{msg}");
    assert_eq!(err.location().map(|l| l.line), Some(line), "{msg}");
    msg
}

const FULL: &str = r#"# flume B2, 0.5 m wide, run 14
[flow]
kind = "transient"
phase_before_front = "water"
reference_depth_m = 0.08
water_temperature_c = 17.5

[detector]
threshold = 0.45
hysteresis = 0.1
learn_period_s = 0.5
rail_low = -32000
rail_high = 32000
min_swing = 64

[[probe]]
name = "A"
elevation_mm = 24.0
x_mm = 1500
leading = 0
trailing = 1
tip_spacing_mm = 6.0
air_is_high = true
air_level = 26000
water_level = 3000
max_lag_ms = 5.0

[[probe]]
name = "B"
elevation_mm = 12
x_mm = 1500
leading = 2
air_is_high = false

[[probe]]
name = "C"
elevation_mm = 6.0
x_mm = 3000.0
leading = 5
trailing = 4
tip_spacing_mm = 4.5
air_level = -0.2
water_level = 0.6
"#;

#[test]
fn full_layout() {
    let l = parse(FULL).unwrap();
    assert_eq!(l.flow.kind, FlowKind::Transient);
    assert_eq!(l.flow.phase_before_front, Phase::Water);
    assert_eq!(l.flow.reference_depth_m, Some(0.08));
    assert_eq!(l.flow.water_temperature_c, 17.5);
    let d = &l.detector;
    assert_eq!(
        (d.threshold, d.hysteresis, d.learn_period_s),
        (0.45, 0.1, 0.5)
    );
    assert_eq!(
        (d.rail_low, d.rail_high, d.min_swing),
        (Some(-32000.0), Some(32000.0), Some(64.0))
    );
    assert_eq!(l.probes.len(), 3);
    let a = &l.probes[0];
    assert_eq!(a.name, "A");
    assert_eq!((a.elevation_mm, a.x_mm), (24.0, 1500.0));
    assert_eq!(
        (a.leading, a.trailing, a.tip_spacing_mm),
        (0, Some(1), Some(6.0))
    );
    assert!(a.air_is_high);
    assert_eq!(
        a.levels,
        Some(FixedLevels {
            air: 26000.0,
            water: 3000.0
        })
    );
    assert_eq!(a.max_lag_ms, Some(5.0));
    let src = a.source.unwrap();
    assert_eq!(
        (
            src.table.line,
            src.leading.line,
            src.trailing.map(|t| t.line)
        ),
        (16, 20, Some(21))
    );
    let b = &l.probes[1];
    assert_eq!((b.trailing, b.tip_spacing_mm, b.levels), (None, None, None));
    assert!(!b.air_is_high);
    // Polarity inferred from the levels.
    assert!(!l.probes[2].air_is_high);
    assert_eq!(l.stations(), vec![(1500.0, vec![1, 0]), (3000.0, vec![2])]);
    assert_eq!(l.tip_channels(), vec![0, 1, 2, 4, 5]);
    l.check_channels(6, Path::new(FILE)).unwrap();
}

#[test]
fn minimal_layout_defaults() {
    let l = parse(
        "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"P1\"\nelevation_mm = 0\nleading = 3\n",
    )
    .unwrap();
    assert_eq!(
        l.flow,
        Flow {
            kind: FlowKind::Steady,
            phase_before_front: Phase::Air,
            reference_depth_m: None,
            water_temperature_c: 20.0,
            discharge_m2_s: None,
        }
    );
    assert_eq!(l.detector, DetectorSettings::default());
    let p = &l.probes[0];
    assert_eq!(
        (p.x_mm, p.leading, p.trailing, p.air_is_high),
        (0.0, 3, None, true)
    );
    assert_eq!(l.stations(), vec![(0.0, vec![0])]);
    assert_eq!(l.tip_channels(), vec![3]);
}

#[test]
fn inline_tables_and_dotted_keys_are_accepted() {
    let l = parse(
        "flow.kind = \"steady\"\nprobe = [{ name = \"A\", elevation_mm = 1, leading = 0 }]\n",
    )
    .unwrap();
    assert_eq!(l.probes[0].name, "A");
}

#[test]
fn serialises() {
    let l = parse(FULL).unwrap();
    let s = toml::to_string(&l).unwrap();
    assert!(s.contains("kind = \"transient\""), "{s}");
    assert!(!s.contains("source"), "{s}");
}

const MIN: &str =
    "[flow]\nkind = \"steady\"\n\n[[probe]]\nname = \"A\"\nelevation_mm = 10\nleading = 0\n";

#[test]
fn syntax_error() {
    let err = parse("[flow]\nkind = \"steady\"\n[[probe]\nname = \"A\"\n").unwrap_err();
    let msg = err.to_string();
    assert!(matches!(err, LayoutError::Syntax { .. }), "{msg}");
    assert!(msg.contains(FILE) && msg.contains("line 3,"), "{msg}");
    let err = parse("[flow]\nkind = steady\n").unwrap_err();
    assert!(err.to_string().contains("line 2,"), "{err}");
}

#[test]
fn unknown_keys() {
    let m = fails(&format!("{MIN}trailling = 1\n"), "probe[0].trailling", 8);
    assert!(m.contains("unknown key") && m.contains("`trailing`"), "{m}");
    fails("[flow]\nkind = \"steady\"\nspeed = 3\n", "flow.speed", 3);
    fails(
        &format!("{MIN}[detector]\nthreshhold = 0.5\n"),
        "detector.threshhold",
        9,
    );
    fails(&format!("{MIN}\n[probes]\n"), "probes", 9);
    let text = format!("{MIN}[[probe]]\nname = \"B\"\nelevation_mm = 10\nleading = 1\nx = 2\n");
    fails(&text, "probe[1].x", 12);
}

#[test]
fn missing_keys() {
    let m = fails(
        "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"A\"\nleading = 0\n",
        "probe[0].elevation_mm",
        3,
    );
    assert!(m.contains("missing"), "{m}");
    let text = format!("{MIN}[[probe]]\nname = \"B\"\nelevation_mm = 10\n");
    fails(&text, "probe[1].leading", 8);
    fails("[flow]\nphase_before_front = \"air\"\n", "flow.kind", 1);
    let err = parse("[[probe]]\nname = \"A\"\nelevation_mm = 1\nleading = 0\n").unwrap_err();
    assert_eq!(err.key(), Some("flow"), "{err}");
}

#[test]
fn wrong_types() {
    let m = fails(
        &MIN.replace("elevation_mm = 10", "elevation_mm = \"10\""),
        "probe[0].elevation_mm",
        6,
    );
    assert!(m.contains("expected a number"), "{m}");
    fails(
        &MIN.replace("leading = 0", "leading = 1.5"),
        "probe[0].leading",
        7,
    );
    fails(&MIN.replace("name = \"A\"", "name = 7"), "probe[0].name", 5);
    fails(
        &format!("{MIN}air_is_high = \"yes\"\n"),
        "probe[0].air_is_high",
        8,
    );
    fails("[flow]\nkind = 3\n", "flow.kind", 2);
    let m = fails(
        "[flow]\nkind = \"steady\"\n[probe]\nname = \"A\"\n",
        "probe",
        3,
    );
    assert!(m.contains("[[probe]]"), "{m}");
}

#[test]
fn out_of_range_values() {
    let m = fails("[flow]\nkind = \"stationary\"\n", "flow.kind", 2);
    assert!(m.contains("\"steady\" or \"transient\""), "{m}");
    fails(
        &MIN.replace(
            "kind = \"steady\"",
            "kind = \"transient\"\nphase_before_front = \"foam\"",
        ),
        "flow.phase_before_front",
        3,
    );
    fails(
        &MIN.replace(
            "kind = \"steady\"",
            "kind = \"steady\"\nreference_depth_m = 0",
        ),
        "flow.reference_depth_m",
        3,
    );
    fails(
        &MIN.replace(
            "kind = \"steady\"",
            "kind = \"steady\"\nwater_temperature_c = nan",
        ),
        "flow.water_temperature_c",
        3,
    );
    fails(
        &MIN.replace("elevation_mm = 10", "elevation_mm = -1"),
        "probe[0].elevation_mm",
        6,
    );
    fails(
        &MIN.replace("leading = 0", "leading = -1"),
        "probe[0].leading",
        7,
    );
    fails(&format!("{MIN}x_mm = inf\n"), "probe[0].x_mm", 8);
    fails(
        &format!("{MIN}trailing = 1\ntip_spacing_mm = 0\n"),
        "probe[0].tip_spacing_mm",
        9,
    );
    fails(
        &format!("{MIN}trailing = 1\ntip_spacing_mm = 5\nmax_lag_ms = -2\n"),
        "probe[0].max_lag_ms",
        10,
    );
    fails(
        &format!("{MIN}[detector]\nthreshold = 1.0\n"),
        "detector.threshold",
        9,
    );
    fails(
        &format!("{MIN}[detector]\nlearn_period_s = 0\n"),
        "detector.learn_period_s",
        9,
    );
    fails(
        &format!("{MIN}[detector]\nmin_swing = 0\n"),
        "detector.min_swing",
        9,
    );
    fails(
        &format!("{MIN}[detector]\nrail_low = 100\nrail_high = 100\n"),
        "detector.rail_high",
        10,
    );
}

#[test]
fn hysteresis_band_must_fit() {
    // 2 min(0.5, 0.5) = 1: 0.99 fits, 1.0 does not.
    parse(&format!("{MIN}[detector]\nhysteresis = 0.99\n")).unwrap();
    parse(&format!("{MIN}[detector]\nhysteresis = 0\n")).unwrap();
    fails(
        &format!("{MIN}[detector]\nhysteresis = 1.0\n"),
        "detector.hysteresis",
        9,
    );
    fails(
        &format!("{MIN}[detector]\nhysteresis = -0.1\n"),
        "detector.hysteresis",
        9,
    );
    // Threshold 0.1 leaves room for a band below 0.2; the default 0.2 does not fit.
    fails(
        &format!("{MIN}[detector]\nthreshold = 0.1\n"),
        "detector.threshold",
        9,
    );
    parse(&format!(
        "{MIN}[detector]\nthreshold = 0.1\nhysteresis = 0.15\n"
    ))
    .unwrap();
}

#[test]
fn trailing_and_spacing_go_together() {
    let m = fails(&format!("{MIN}trailing = 1\n"), "probe[0].trailing", 8);
    assert!(m.contains("tip_spacing_mm"), "{m}");
    let m = fails(
        &format!("{MIN}tip_spacing_mm = 5\n"),
        "probe[0].tip_spacing_mm",
        8,
    );
    assert!(m.contains("no `trailing`"), "{m}");
    fails(&format!("{MIN}max_lag_ms = 4\n"), "probe[0].max_lag_ms", 8);
}

#[test]
fn channel_used_twice() {
    let m = fails(
        &format!("{MIN}trailing = 0\ntip_spacing_mm = 5\n"),
        "probe[0].trailing",
        8,
    );
    assert!(
        m.contains("channel 0") && m.contains("probe[0].leading") && m.contains("(line 7)"),
        "{m}"
    );
    let text = format!(
        "{MIN}trailing = 1\ntip_spacing_mm = 5\n\n[[probe]]\nname = \"B\"\nelevation_mm = 20\nleading = 2\ntrailing = 1\ntip_spacing_mm = 5\n"
    );
    let m = fails(&text, "probe[1].trailing", 15);
    assert!(
        m.contains("probe[0].trailing") && m.contains("(line 8)"),
        "{m}"
    );
}

#[test]
fn duplicate_names() {
    let text = format!("{MIN}\n[[probe]]\nname = \"A\"\nelevation_mm = 20\nleading = 1\n");
    let m = fails(&text, "probe[1].name", 10);
    assert!(
        m.contains("\"A\"") && m.contains("probe[0]") && m.contains("(line 4)"),
        "{m}"
    );
    fails(
        &MIN.replace("name = \"A\"", "name = \"\""),
        "probe[0].name",
        5,
    );
    fails(
        &MIN.replace("name = \"A\"", "name = \" A\""),
        "probe[0].name",
        5,
    );
}

/// Each tip's own level pair; the probe's pair stays accepted; mixing them, a pair for
/// a missing trailing tip, half pairs and pairs that read air on opposite sides are
/// refused with the key named.
#[test]
fn per_tip_levels() {
    const DUAL: &str = "trailing = 1\ntip_spacing_mm = 5\n";
    let l = parse(&format!(
        "{MIN}{DUAL}leading_air_level = 26000\nleading_water_level = 3000\n\
         trailing_air_level = 25100\ntrailing_water_level = 3400\n"
    ))
    .unwrap();
    let p = &l.probes[0];
    assert_eq!(
        p.tip_levels(false),
        Some(FixedLevels {
            air: 26000.0,
            water: 3000.0
        })
    );
    assert_eq!(
        p.tip_levels(true),
        Some(FixedLevels {
            air: 25100.0,
            water: 3400.0
        })
    );
    assert!(p.air_is_high);
    // Only the trailing tip fixed: the leading tip learns.
    let l = parse(&format!(
        "{MIN}{DUAL}trailing_air_level = -2000\ntrailing_water_level = 9000\n"
    ))
    .unwrap();
    assert_eq!(l.probes[0].tip_levels(false), None);
    assert!(!l.probes[0].air_is_high);
    // The probe's pair applies to both tips.
    let l = parse(&format!(
        "{MIN}{DUAL}air_level = 26000\nwater_level = 3000\n"
    ))
    .unwrap();
    assert_eq!(l.probes[0].tip_levels(true), l.probes[0].tip_levels(false));
    let m = fails(
        &format!("{MIN}{DUAL}air_level = 26000\nwater_level = 3000\nleading_air_level = 1\nleading_water_level = 2\n"),
        "probe[0].leading_water_level",
        13,
    );
    assert!(m.contains("not both"), "{m}");
    let m = fails(
        &format!("{MIN}trailing_air_level = 26000\ntrailing_water_level = 3000\n"),
        "probe[0].trailing_water_level",
        9,
    );
    assert!(m.contains("no `trailing` tip"), "{m}");
    let m = fails(
        &format!("{MIN}{DUAL}trailing_air_level = 26000\n"),
        "probe[0].trailing_air_level",
        10,
    );
    assert!(m.contains("trailing_water_level"), "{m}");
    let m = fails(
        &format!(
            "{MIN}{DUAL}leading_air_level = 26000\nleading_water_level = 3000\n\
                  trailing_air_level = 3000\ntrailing_water_level = 26000\n"
        ),
        "probe[0].trailing_water_level",
        13,
    );
    assert!(m.contains("other side"), "{m}");
    let m = fails(
        &format!("{MIN}{DUAL}air_is_high = false\ntrailing_air_level = 26000\ntrailing_water_level = 3000\n"),
        "probe[0].air_is_high",
        10,
    );
    assert!(m.contains("contradicts trailing_air_level"), "{m}");
}

#[test]
fn level_pairs() {
    let m = fails(
        &format!("{MIN}air_level = 26000\n"),
        "probe[0].air_level",
        8,
    );
    assert!(m.contains("water_level"), "{m}");
    fails(
        &format!("{MIN}water_level = 3000\n"),
        "probe[0].water_level",
        8,
    );
    fails(
        &format!("{MIN}air_level = 3000\nwater_level = 3000\n"),
        "probe[0].water_level",
        9,
    );
    let m = fails(
        &format!("{MIN}air_is_high = true\nair_level = 3000\nwater_level = 26000\n"),
        "probe[0].air_is_high",
        8,
    );
    assert!(m.contains("contradicts"), "{m}");
}

#[test]
fn zero_probes() {
    let err = parse("[flow]\nkind = \"steady\"\n").unwrap_err();
    assert_eq!(err.key(), Some("probe"));
    assert_eq!(err.problem(), Some(&Problem::NoProbes));
    let msg = err.to_string();
    assert!(msg.contains(FILE) && msg.contains("[[probe]]"), "{msg}");
    let err = parse("probe = []\n[flow]\nkind = \"steady\"\n").unwrap_err();
    assert_eq!(err.problem(), Some(&Problem::NoProbes));
}

#[test]
fn channels_beyond_the_capture() {
    let l = parse(FULL).unwrap();
    let err = l.check_channels(5, Path::new(FILE)).unwrap_err();
    let msg = err.to_string();
    assert_eq!(err.key(), Some("probe[2].leading"), "{msg}");
    assert!(
        msg.contains("line 39,") && msg.contains("channel 5") && msg.contains("5 channels"),
        "{msg}"
    );
    let err = l.check_channels(2, Path::new(FILE)).unwrap_err();
    assert_eq!(err.key(), Some("probe[1].leading"));
    let mut l = parse(FULL).unwrap();
    l.probes[0].trailing = Some(9);
    let err = l.check_channels(6, Path::new(FILE)).unwrap_err();
    assert!(
        err.to_string().contains("probe[0].trailing") && err.to_string().contains("line 21,"),
        "{err}"
    );
    // Built in code: no line, still a message.
    l.probes[0].source = None;
    let err = l.check_channels(6, Path::new(FILE)).unwrap_err();
    assert_eq!(err.location(), None);
    assert!(
        err.to_string()
            .starts_with(&format!("{FILE}: key `probe[0].trailing`")),
        "{err}"
    );
}

#[test]
fn io_error_names_the_path() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("absent.toml");
    let err = Layout::load(&path).unwrap_err();
    assert!(matches!(err, LayoutError::Io { .. }));
    assert!(err.to_string().contains("absent.toml"), "{err}");
    std::fs::write(&path, MIN).unwrap();
    assert_eq!(Layout::load(&path).unwrap().probes.len(), 1);
}

fn layout_of(probes: usize) -> String {
    let mut t = String::from("[flow]\nkind = \"steady\"\n");
    for i in 0..probes {
        t.push_str(&format!(
            "\n[[probe]]\nname = \"P{i}\"\nelevation_mm = 10.0\nleading = {}\n\
             trailing = {}\ntip_spacing_mm = 5.0\n",
            2 * i,
            2 * i + 1
        ));
    }
    t
}

/// Validation work grows linearly with the number of probes: the bytes scanned to
/// locate keys, counted (not timed), for 100 and 800 probes, stay within a constant of
/// the text length (a scan from the start of the text per key grows as its square).
#[test]
fn validation_scans_linearly_in_the_number_of_probes() {
    for n in [100, 800] {
        let text = layout_of(n);
        let (r, scanned) = Layout::parse_counting(&text, Path::new("big.toml"));
        assert_eq!(r.unwrap().probes.len(), n);
        assert!(
            scanned <= 2 * text.len(),
            "{n} probes: {scanned} of {}",
            text.len()
        );
    }
    // One long line of inline tables: still linear.
    let mut text = String::from("probe = [");
    for i in 0..800 {
        text.push_str(&format!(
            "{{name = \"P{i}\", elevation_mm = 1.0, leading = {i}}}, "
        ));
    }
    text.push_str("]\n[flow]\nkind = \"steady\"\n");
    let (r, scanned) = Layout::parse_counting(&text, Path::new("line.toml"));
    assert_eq!(r.unwrap().probes.len(), 800);
    assert!(scanned <= 2 * text.len(), "{scanned} of {}", text.len());
}

#[test]
fn limits_are_checked_before_the_probes() {
    let e = parse(&layout_of(MAX_LAYOUT_PROBES + 1))
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("key `probe`") && e.contains("at most 1024"),
        "{e}"
    );
    let big = "#".repeat(MAX_LAYOUT_BYTES as usize + 1);
    let e = parse(&big).unwrap_err();
    assert!(matches!(e, LayoutError::TooLarge { .. }), "{e}");
    // load() refuses by the file size, before reading.
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("huge.toml");
    std::fs::File::create(&p)
        .unwrap()
        .set_len(10 << 20)
        .unwrap();
    let e = Layout::load(&p).unwrap_err().to_string();
    assert!(
        e.contains("huge.toml") && e.contains("10485760 bytes"),
        "{e}"
    );
}

#[test]
fn extreme_geometry_is_refused_naming_the_key() {
    let base = layout_of(1);
    let cases = [
        (
            "tip_spacing_mm = 5.0",
            "tip_spacing_mm = 1e300",
            "probe[0].tip_spacing_mm",
        ),
        (
            "elevation_mm = 10.0",
            "elevation_mm = 1e300",
            "probe[0].elevation_mm",
        ),
        (
            "elevation_mm = 10.0",
            "elevation_mm = 10.0\nx_mm = 1e30",
            "probe[0].x_mm",
        ),
        (
            "elevation_mm = 10.0",
            "elevation_mm = 10.0\nx_mm = -1e300",
            "probe[0].x_mm",
        ),
    ];
    for (from, to, key) in cases {
        let e = parse(&base.replace(from, to)).unwrap_err();
        assert_eq!(e.key(), Some(key), "{e}");
        assert!(e.location().is_some(), "{e}");
    }
}

#[test]
fn probes_within_the_station_tolerance_form_one_station_ordered_by_elevation() {
    let mut t = layout_of(3);
    t = t.replacen(
        "elevation_mm = 10.0",
        "elevation_mm = 30.0\nx_mm = 600.0000001",
        1,
    );
    t = t.replacen(
        "elevation_mm = 10.0\n",
        "elevation_mm = 20.0\nx_mm = 600.0\n",
        1,
    );
    t = t.replacen(
        "elevation_mm = 10.0\n",
        "elevation_mm = 5.0\nx_mm = 601.5\n",
        1,
    );
    let l = parse(&t).unwrap();
    let st = l.stations();
    assert_eq!(st.len(), 2, "{st:?}");
    assert_eq!(st[0], (600.0, vec![1, 0]));
    assert_eq!(st[1], (601.5, vec![2]));
}

#[test]
fn location_counts_characters() {
    let text = "a\nbé = 1\n";
    let at = Location::of_offset(text, text.find('=').unwrap());
    assert_eq!(at, Location { line: 2, column: 4 });
    assert_eq!(Location::of_offset(text, 1000).line, 3);
    assert_eq!(Location::of_offset("", 0), Location { line: 1, column: 1 });
}

/// The near-wake keys: one or the other, in range, each error naming its key and line.
#[test]
fn near_wake_keys() {
    let with = |keys: &str| format!("{MIN}\n[detector]\n{keys}\n");
    let l = parse(&with("near_wake_ms = 1.5")).unwrap();
    assert_eq!(l.detector.near_wake_ms, Some(1.5));
    assert_eq!(l.detector.near_wake_chord_fraction, None);
    let l = parse(&with("near_wake_chord_fraction = 0.5")).unwrap();
    assert_eq!(l.detector.near_wake_chord_fraction, Some(0.5));
    // MIN has 7 lines, a blank one, then [detector] on line 9.
    fails(&with("near_wake_ms = 0"), "detector.near_wake_ms", 10);
    fails(
        &with("near_wake_chord_fraction = 1e9"),
        "detector.near_wake_chord_fraction",
        10,
    );
    let m = fails(
        &with("near_wake_ms = 1\nnear_wake_chord_fraction = 0.5"),
        "detector.near_wake_chord_fraction",
        11,
    );
    assert!(m.contains("not both"), "{m}");
}

/// A layout typed by hand with a required key left out is told what to write there.
#[test]
fn a_missing_required_key_says_what_to_write() {
    let cases = [
        (
            "[[probe]]\nname = \"P1\"\nelevation_mm = 0\nleading = 3\n",
            "flow",
            "kind = \"steady\"",
        ),
        (
            "[flow]\n[[probe]]\nname = \"P1\"\nelevation_mm = 0\nleading = 3\n",
            "flow.kind",
            "kind = \"transient\"",
        ),
        (
            "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"P1\"\nleading = 3\n",
            "probe[0].elevation_mm",
            "height above the bed",
        ),
    ];
    for (text, key, hint) in cases {
        let e = parse(text).unwrap_err().to_string();
        assert!(e.contains(&format!("`{key}`")), "{e}");
        assert!(e.contains("required key is missing"), "{e}");
        assert!(e.contains(hint), "{e}");
    }
}
