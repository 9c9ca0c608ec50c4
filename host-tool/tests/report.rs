//! `frothline report` on the committed fixtures: every file is written, SVGs are XML with the
//! expected series, PNGs decode at the asked size, the page links only existing files.
//!
//! Fixtures: `fixtures/report-example/` (an invented transient run, flume B2 run 14, made by
//! its `generate.py`) and `fixtures/steady-b2/expected/` (a real `frothline replay` output).

use frothline_host::report::{run, FigureStatus, ReportArgs, ReportError, ReportSummary};
use std::collections::HashMap;
use std::path::{Path, PathBuf};

fn fixture(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("..")
        .join("fixtures")
        .join(rel)
}

fn report(dir: &Path, out: &Path, f: impl FnOnce(&mut ReportArgs)) -> ReportSummary {
    let mut args = ReportArgs::new(dir);
    args.out = Some(out.to_path_buf());
    f(&mut args);
    run(&args).unwrap_or_else(|e| panic!("report of {}: {e}", dir.display()))
}

/// Series ids (`<g class="series" id="series-…">`) of an SVG, after checking it is XML.
fn svg_series(path: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(path).unwrap();
    let doc = roxmltree::Document::parse(&text)
        .unwrap_or_else(|e| panic!("{} is not XML: {e}", path.display()));
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    let ids: Vec<String> = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("series"))
        .map(|n| n.attribute("id").unwrap_or("").to_string())
        .collect();
    // every group holds something drawn
    for n in doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("series"))
    {
        assert!(
            n.children().any(|c| c.is_element()),
            "{}: empty series {:?}",
            path.display(),
            n.attribute("id")
        );
    }
    // no marker text survived
    assert!(!text.contains("@@frothline"), "{}", path.display());
    ids
}

fn png_size(path: &Path) -> (u32, u32) {
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    // not a blank image: some pixels are dark (text, axes)
    let dark = buf
        .chunks(info.color_type.samples())
        .filter(|p| p.iter().take(3).all(|&v| v < 100))
        .count();
    assert!(dark > 500, "{}: only {dark} dark pixels", path.display());
    (info.width, info.height)
}

/// Attribute values of `attr="…"` in the HTML.
fn html_refs(html: &str, attr: &str) -> Vec<String> {
    let pat = format!("{attr}=\"");
    html.match_indices(&pat)
        .map(|(i, _)| {
            let rest = &html[i + pat.len()..];
            rest[..rest.find('"').unwrap()].to_string()
        })
        .collect()
}

fn written(summary: &ReportSummary) -> HashMap<&'static str, (PathBuf, PathBuf, usize)> {
    summary
        .figures
        .iter()
        .filter_map(|f| match &f.status {
            FigureStatus::Written { svg, png, series } => {
                Some((f.stem, (svg.clone(), png.clone(), *series)))
            }
            FigureStatus::Skipped(_) => None,
        })
        .collect()
}

fn check_page(summary: &ReportSummary) -> String {
    let html = std::fs::read_to_string(&summary.html).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>") && html.trim_end().ends_with("</html>"));
    let refs: Vec<String> = html_refs(&html, "src")
        .into_iter()
        .chain(html_refs(&html, "href"))
        .collect();
    assert!(!refs.is_empty());
    for r in &refs {
        assert!(
            !r.contains("://") && !r.starts_with('/'),
            "non-relative reference {r}"
        );
        assert!(
            summary.out_dir.join(r).is_file(),
            "page references {r}, missing"
        );
    }
    // every figure written is shown
    for (svg, png, _) in written(summary).values() {
        let name = |p: &PathBuf| p.file_name().unwrap().to_string_lossy().into_owned();
        assert!(refs.contains(&name(svg)) && refs.contains(&name(png)));
    }
    html
}

#[test]
fn transient_example_produces_every_figure() {
    let out = tempfile::tempdir().unwrap();
    let s = report(&fixture("report-example"), out.path(), |_| {});
    assert!(s.transient);
    assert_eq!(s.probes, 5);
    assert_eq!(s.windows, 210);
    let figs = written(&s);
    assert_eq!(figs.len(), 5, "{:?}", s.figures);
    for f in s.files() {
        assert!(f.is_file(), "{} missing", f.display());
    }
    let mut series = HashMap::new();
    for (stem, (svg, png, n)) in &figs {
        assert_eq!(png_size(png), (800, 500), "{stem}");
        let ids = svg_series(svg);
        assert_eq!(ids.len(), *n, "{stem}");
        series.insert(*stem, ids);
    }
    // five slices: a fit and the window points for each
    let profile = &series["void_fraction_profile"];
    assert_eq!(profile.len(), 10, "{profile:?}");
    assert_eq!(
        profile
            .iter()
            .filter(|i| i.starts_with("series-profile-fit-"))
            .count(),
        5
    );
    // one station: slices and fit
    assert_eq!(
        series["void_fraction_decay"],
        ["series-decay-slices-S1", "series-decay-fit-S1"]
    );
    // V and Tu panels, five probes each
    let vt = &series["velocity_turbulence"];
    assert_eq!(vt.len(), 10);
    assert!(vt.contains(&"series-v-P1".to_string()) && vt.contains(&"series-tu-P5".to_string()));
    // chords.csv is present: one histogram per probe
    assert_eq!(series["chord_times"].len(), 5);
    // one series per probe and the all-probe envelope
    let cr = &series["count_rate_void_fraction"];
    assert_eq!(cr.len(), 6);
    assert_eq!(cr.last().unwrap(), "series-count-rate-envelope-all");

    let html = check_page(&s);
    // flow.json: the Reynolds number is computed (998.7 * 1.2 * 0.05 / 0.00108 = 5.5e4) and
    // below the default threshold
    assert!(s.low_reynolds);
    assert!(html.contains("Caution: low Reynolds number"));
    assert!(html.contains("5.55 × 10<sup>4</sup>"));
    // every flag raised is listed with its meaning; the unknown one is said to be unknown
    for flag in [
        "stuck",
        "levels_not_learnt",
        "short_chords",
        "partial_window",
        "trailing_stuck",
        "weak_correlation",
    ] {
        assert!(html.contains(&format!("<code>{flag}</code>")), "{flag}");
    }
    assert!(html.contains("Not known to this version"));
    // the unknown column was noticed, not fatal
    assert!(s.notes.iter().any(|n| n.contains("future_metric")));
}

#[test]
fn steady_fixture_skips_what_it_lacks_and_says_why() {
    let out = tempfile::tempdir().unwrap();
    let s = report(&fixture("steady-b2/expected"), out.path(), |_| {});
    assert!(!s.transient && !s.low_reynolds);
    assert_eq!(s.probes, 6);
    let figs = written(&s);
    let mut stems: Vec<&str> = figs.keys().copied().collect();
    stems.sort();
    assert_eq!(
        stems,
        [
            "chord_lengths",
            "chord_times",
            "count_rate_void_fraction",
            "derived_figures",
            "velocity_turbulence",
            "void_fraction_profile"
        ]
    );
    for (stem, (svg, png, n)) in &figs {
        assert_eq!(png_size(png), (800, 500), "{stem}");
        let ids = svg_series(svg);
        assert_eq!(ids.len(), *n, "{stem}");
        let expected = match *stem {
            // one per probe (means, or the pooled histograms of chords.csv)
            "void_fraction_profile" | "chord_times" => 6,
            // one pooled histogram per dual-tip probe (five of the six)
            "chord_lengths" => 5,
            // V and Tu panels, one series each per dual-tip probe (five of the six)
            "velocity_turbulence" => 10,
            // a and d per dual-tip probe (five), q_w and q_a, clusters per probe (six)
            "derived_figures" => 18,
            // one per probe and the envelope
            _ => 7,
        };
        assert_eq!(ids.len(), expected, "{stem}: {ids:?}");
    }
    let html = check_page(&s);
    let (stem, why) = ("void_fraction_decay", "steady run");
    let f = s.figures.iter().find(|f| f.stem == stem).unwrap();
    match &f.status {
        FigureStatus::Skipped(reason) => assert!(reason.contains(why), "{reason}"),
        other => panic!("{stem}: {other:?}"),
    }
    assert!(html.contains(&format!("id=\"{stem}\"")));
    // no flow indicators in this folder: no section, and the notes say which files were absent
    assert!(!html.contains("id=\"flow\""));
    assert!(html.contains("Read: windows.csv, chords.csv, chord_lengths.csv"));
    assert!(html.contains("not present: profile.csv, fronts.csv, flow.json"));
    // the levels_not_learnt windows are left out by default, and a replay that learnt the
    // levels from the record has none: every window is used
    assert_eq!(s.windows_used, s.windows);
    assert!(!html.contains("<code>levels_not_learnt</code>"));
}

#[test]
fn size_option_and_station_choice() {
    let out = tempfile::tempdir().unwrap();
    let s = report(&fixture("report-example"), out.path(), |a| {
        a.size = "640x400".parse().unwrap();
        a.times = vec![0.0, 1.0];
        a.station = Some("S1".into());
        a.exclude_flags = vec!["none".into()];
    });
    let figs = written(&s);
    assert_eq!(png_size(&figs["chord_times"].1), (640, 400));
    // two requested times: two fits and two sets of points
    assert_eq!(figs["void_fraction_profile"].2, 4);

    let mut args = ReportArgs::new(fixture("report-example"));
    args.out = Some(out.path().to_path_buf());
    args.station = Some("S9".into());
    let e = run(&args).unwrap_err();
    assert!(
        matches!(e, ReportError::Usage(_)) && e.to_string().contains("S1"),
        "{e}"
    );
}

/// A folder made of pieces of the example, to exercise the optional inputs.
fn scratch(files: &[(&str, String)]) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    for (name, text) in files {
        std::fs::write(dir.path().join(name), text).unwrap();
    }
    dir
}

fn example(name: &str) -> String {
    std::fs::read_to_string(fixture("report-example").join(name)).unwrap()
}

#[test]
fn decay_columns_given_by_the_writer_are_used() {
    let mut profile = String::new();
    for (i, line) in example("profile.csv").lines().enumerate() {
        profile.push_str(line);
        profile.push_str(if i == 0 {
            ",decay_c0,decay_cf,decay_tau_s,flags\n"
        } else {
            ",0.5,0.1,0.7,several_crossings\n"
        });
    }
    let dir = scratch(&[
        ("windows.csv", example("windows.csv")),
        ("profile.csv", profile),
    ]);
    let out = dir.path().join("out");
    let s = report(dir.path(), &out, |_| {});
    let html = std::fs::read_to_string(&s.html).unwrap();
    assert!(html.contains("given by profile.csv"));
    assert!(html.contains("<code>several_crossings</code>"));
    // no fronts.csv: the only station's probes are those with a time since the front
    let figs = written(&s);
    assert_eq!(figs["void_fraction_profile"].2, 10);
    // no chords.csv: percentile bars, one series per probe
    assert_eq!(figs["chord_times"].2, 5);
    // no flow.json: no caution
    assert!(!s.low_reynolds && !html.contains("Caution"));
}

#[test]
fn indicators_csv_without_low_reynolds() {
    let dir = scratch(&[
        ("windows.csv", example("windows.csv")),
        (
            "indicators.csv",
            "name,value,unit\nwater_temperature_c,21,degC\nreynolds_number,450000,\n".into(),
        ),
    ]);
    let out = dir.path().join("out");
    let s = report(dir.path(), &out, |_| {});
    assert!(!s.low_reynolds);
    let html = check_page(&s);
    assert!(html.contains("id=\"flow\"") && html.contains("4.5 × 10<sup>5</sup>"));
    assert!(!html.contains("Caution"));
    // transient windows without profile.csv: means per probe, no decay
    assert!(s.notes.iter().any(|n| n.contains("no profile.csv")));
    let decay = s
        .figures
        .iter()
        .find(|f| f.stem == "void_fraction_decay")
        .unwrap();
    assert!(matches!(decay.status, FigureStatus::Skipped(_)));
}

#[test]
fn a_truncated_last_row_is_left_out_and_a_bad_row_is_an_error() {
    let mut windows = example("windows.csv");
    windows.push_str("P1,4.2,4.3,3.0,0.0"); // cut while a live session was writing
    windows.push_str("5x\n");
    let dir = scratch(&[("windows.csv", windows.clone())]);
    let s = report(dir.path(), &dir.path().join("out"), |_| {});
    assert_eq!(s.windows, 210);
    assert!(
        s.notes.iter().any(|n| n.contains("last row")),
        "{:?}",
        s.notes
    );

    // the same bad cell followed by a good row is an error naming file, line and column
    windows.push_str("P1,4.3,4.4,3.1,0.01,0,,,,,0,,10,1500\n");
    let dir = scratch(&[("windows.csv", windows)]);
    let mut args = ReportArgs::new(dir.path());
    args.out = Some(dir.path().join("out"));
    let e = run(&args).unwrap_err().to_string();
    assert!(
        e.contains("windows.csv") && e.contains("line 212") && e.contains("void_fraction"),
        "{e}"
    );
}

#[test]
fn a_windows_csv_cut_mid_row_leaves_the_cut_row_out_with_a_note() {
    let full = example("windows.csv");
    let rows = full.lines().count() - 1;
    // Cut inside the last row: fewer cells than the header, no line break.
    let last_start = full.trim_end().rfind('\n').unwrap() + 1;
    let cut = &full[..last_start + 12];
    assert!(!cut.ends_with('\n'));
    let dir = scratch(&[("windows.csv", cut.to_string())]);
    let s = report(dir.path(), &dir.path().join("out"), |_| {});
    assert_eq!(s.windows, rows - 1);
    assert!(
        s.notes.iter().any(|n| n.contains("cut mid-row")),
        "{:?}",
        s.notes
    );
}

#[test]
fn a_folder_mixing_two_runs_is_refused_naming_the_odd_file() {
    let dir = scratch(&[
        ("windows.csv", example("windows.csv")),
        ("profile.csv", example("profile.csv")),
    ]);
    let listed = example("windows.csv").len();
    std::fs::write(
        dir.path().join("run.json"),
        format!(
            r#"{{"run_id": "1.0-1", "inputs": {{}}, "files": [{{"name": "windows.csv", "bytes": {listed}}}]}}"#
        ),
    )
    .unwrap();
    let mut args = ReportArgs::new(dir.path());
    args.out = Some(dir.path().join("out"));
    let e = run(&args).unwrap_err().to_string();
    assert!(
        e.contains("profile.csv") && e.contains("another run"),
        "{e}"
    );
}

#[test]
fn a_header_only_windows_csv_gives_a_page_that_says_why_nothing_is_drawn() {
    let header = example("windows.csv").lines().next().unwrap().to_string() + "\n";
    let dir = scratch(&[("windows.csv", header)]);
    let s = report(dir.path(), &dir.path().join("out"), |_| {});
    assert_eq!((s.probes, s.windows), (0, 0));
    assert!(s
        .figures
        .iter()
        .all(|f| matches!(f.status, FigureStatus::Skipped(_))));
    assert_eq!(s.files(), std::slice::from_ref(&s.html));
    check_page_without_figures(&s);
}

fn check_page_without_figures(s: &ReportSummary) {
    let html = std::fs::read_to_string(&s.html).unwrap();
    assert!(!html.contains("<img"));
    assert_eq!(html.matches("class=\"skipped\"").count(), 7);
}

#[test]
fn missing_windows_csv_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let e = run(&ReportArgs::new(dir.path())).unwrap_err();
    assert!(matches!(e, ReportError::NoWindows { .. }), "{e}");
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("windows.csv"));
}

/// Writes the example reports under `target/report-example/` and `target/report-steady-b2/`
/// for a person to look at (and for the README figure), or the report of the folder named
/// by `FROTHLINE_REPORT_DIR` into its `report/` subfolder:
/// `cargo test -p frothline-host --test report -- --ignored --nocapture`
#[test]
#[ignore = "writes into target/ for inspection"]
fn write_example_reports() {
    if let Some(dir) = std::env::var_os("FROTHLINE_REPORT_DIR") {
        let dir = PathBuf::from(dir);
        let mut args = ReportArgs::new(&dir);
        args.quiet = false;
        let start = std::time::Instant::now();
        run(&args).unwrap_or_else(|e| panic!("{e}"));
        println!("in {:.1} s", start.elapsed().as_secs_f64());
        return;
    }
    let target = Path::new(env!("CARGO_MANIFEST_DIR")).join("../target");
    for (dir, name) in [
        ("report-example", "report-example"),
        ("steady-b2/expected", "report-steady-b2"),
    ] {
        let out = target.join(name);
        let s = report(&fixture(dir), &out, |_| {});
        println!("{s}");
    }
}

/// A chord cell of 1e307 s (which used to hang the chord figure, its axis searching ticks
/// up to infinity) is refused, naming the file, the line and the column.
#[test]
fn a_chord_cell_of_1e307_is_refused_naming_the_cell() {
    for col in [
        "bubble_chord_mean_s",
        "bubble_chord_median_s",
        "bubble_chord_p10_s",
        "bubble_chord_p90_s",
    ] {
        let text = example("windows.csv");
        let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
        let header: Vec<&str> = lines[0].split(',').collect();
        let i = header.iter().position(|h| *h == col).unwrap();
        let mut cells: Vec<String> = lines[3].split(',').map(str::to_string).collect();
        cells[i] = "1e307".into();
        lines[3] = cells.join(",");
        let dir = scratch(&[("windows.csv", lines.join("\n") + "\n")]);
        let mut args = ReportArgs::new(dir.path());
        args.out = Some(dir.path().join("out"));
        let e = run(&args).unwrap_err().to_string();
        assert!(
            e.contains("windows.csv") && e.contains("line 4") && e.contains(col),
            "{e}"
        );
    }
}
