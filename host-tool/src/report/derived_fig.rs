//! The derived-figures page figure: interfacial area and Sauter diameter against elevation,
//! the unit-discharge integrands `(1 − C) V` and `C V` against elevation with the areas
//! under them (`q_w`, `q_a`), chord lengths against elevation, and the clustered fraction
//! against C beside what random arrivals would give.
//!
//! The per-probe values are means over the windows of each probe that carry the figure
//! (windows.csv columns of `frothline_core::derived`); `q_w`, `q_a` and the continuity error
//! are read from discharge.csv when the folder holds one.

use super::render::{DrawError, Figure, Tagger};
use super::style::{marker_element, probe_colour, probe_marker, Sizes, GRID, MUTED};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::collections::BTreeMap;
use std::path::Path;

/// Per-probe means of the derived columns.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ProbeDerived {
    /// Probe name.
    pub name: String,
    /// Elevation, mm.
    pub y_mm: f64,
    /// Void fraction.
    pub c: Option<f64>,
    /// Interfacial velocity, m/s.
    pub v: Option<f64>,
    /// Specific interfacial area, 1/m.
    pub a: Option<f64>,
    /// Sauter diameter, mm.
    pub d: Option<f64>,
    /// Median and p90 chord lengths, mm.
    pub chord: Option<(f64, f64)>,
    /// Clustered fraction, and the random-arrival reference.
    pub clustered: Option<(f64, f64)>,
}

/// The data of the figure.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct DerivedData {
    /// One entry per probe with an elevation, bottom up.
    pub probes: Vec<ProbeDerived>,
    /// From discharge.csv (first station): q_w total, q_a below + above Y90, continuity
    /// error.
    pub discharge: Option<(f64, f64, Option<f64>)>,
}

fn mean(v: &[f64]) -> Option<f64> {
    (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
}

/// Read the derived columns of `dir/windows.csv` (and `dir/discharge.csv`); `None` when
/// windows.csv has no derived column with a value.
pub fn read(dir: &Path) -> Option<DerivedData> {
    let mut rd = csv::Reader::from_path(dir.join("windows.csv")).ok()?;
    let hdr: Vec<String> = rd.headers().ok()?.iter().map(String::from).collect();
    let col = |name: &str| hdr.iter().position(|h| h == name);
    let (probe, elev) = (col("probe")?, col("elevation_mm")?);
    let keys = [
        "void_fraction",
        "interfacial_velocity_m_s",
        "interfacial_area_per_m",
        "sauter_diameter_mm",
        "bubble_chord_length_median_mm",
        "bubble_chord_length_p90_mm",
        "clustered_fraction",
        "random_clustered_fraction",
    ];
    let idx: Vec<Option<usize>> = keys.iter().map(|k| col(k)).collect();
    idx.iter().skip(2).flatten().next()?;
    let mut acc: BTreeMap<String, (f64, Vec<Vec<f64>>)> = BTreeMap::new();
    for rec in rd.records().flatten() {
        let name = rec.get(probe).unwrap_or_default().to_string();
        let Some(y) = rec.get(elev).and_then(|v| v.parse::<f64>().ok()) else {
            continue;
        };
        let e = acc
            .entry(name)
            .or_insert_with(|| (y, vec![Vec::new(); keys.len()]));
        for (k, i) in idx.iter().enumerate() {
            if let Some(v) = i
                .and_then(|i| rec.get(i))
                .and_then(|v| v.parse::<f64>().ok())
            {
                if v.is_finite() {
                    e.1[k].push(v);
                }
            }
        }
    }
    let mut probes: Vec<ProbeDerived> = acc
        .into_iter()
        .map(|(name, (y, v))| {
            let m: Vec<Option<f64>> = v.iter().map(|x| mean(x)).collect();
            ProbeDerived {
                name,
                y_mm: y,
                c: m[0],
                v: m[1],
                a: m[2],
                d: m[3],
                chord: m[4].zip(m[5]),
                clustered: m[6].zip(m[7]),
            }
        })
        .collect();
    probes.sort_by(|a, b| a.y_mm.total_cmp(&b.y_mm));
    if !probes
        .iter()
        .any(|p| p.a.is_some() || p.clustered.is_some())
    {
        return None;
    }
    Some(DerivedData {
        probes,
        discharge: read_discharge(dir),
    })
}

fn read_discharge(dir: &Path) -> Option<(f64, f64, Option<f64>)> {
    let mut rd = csv::Reader::from_path(dir.join("discharge.csv")).ok()?;
    let hdr: Vec<String> = rd.headers().ok()?.iter().map(String::from).collect();
    let rec = rd.records().flatten().next()?;
    let get = |name: &str| {
        let i = hdr.iter().position(|h| h == name)?;
        rec.get(i)?.parse::<f64>().ok()
    };
    let qa = get("q_air_m2_s")? + get("q_air_above_y90_m2_s").unwrap_or(0.0);
    Some((get("q_water_total_m2_s")?, qa, get("continuity_error")))
}

/// The figure: four panels.
pub struct DerivedFigure<'d> {
    /// Data.
    pub data: &'d DerivedData,
}

fn nice(v: f64) -> f64 {
    if !(v.is_finite() && v > 0.0) {
        return 1.0;
    }
    let e = 10f64.powf(v.log10().floor());
    [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * e)
        .find(|&x| x >= v)
        .unwrap_or(10.0 * e)
}

fn tick(v: &f64) -> String {
    let s = format!("{v:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s.is_empty() || s == "-0" {
        "0".into()
    } else {
        s.into()
    }
}

impl DerivedFigure<'_> {
    #[allow(clippy::too_many_arguments)]
    fn panel<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
        (key, title): (&str, &str),
        x_desc: &str,
        y_desc: &str,
        pts: &[(usize, f64, f64)],
        (x_max, y_max): (f64, f64),
    ) -> Result<
        ChartContext<
            '_,
            DB,
            Cartesian2d<
                plotters::coord::types::RangedCoordf64,
                plotters::coord::types::RangedCoordf64,
            >,
        >,
        DrawError,
    > {
        let mut chart = ChartBuilder::on(area)
            .margin(s.px(10.0))
            .margin_right(s.px(20.0))
            .caption(title, s.title())
            .x_label_area_size(s.px(48.0))
            .y_label_area_size(s.px(60.0))
            .build_cartesian_2d(0.0..x_max, 0.0..y_max)?;
        chart
            .configure_mesh()
            .x_desc(x_desc)
            .y_desc(y_desc)
            .axis_desc_style(s.axis_label())
            .label_style(s.tick())
            .bold_line_style(GRID)
            .light_line_style(TRANSPARENT)
            .axis_style(MUTED)
            .x_labels(5)
            .y_labels(6)
            .x_label_formatter(&tick)
            .y_label_formatter(&tick)
            .draw()?;
        let r = s.marker() + 1;
        for &(p, x, y) in pts {
            tag.begin(area, &format!("{key}-{}", self.data.probes[p].name))?;
            chart.draw_series([marker_element(
                (x, y),
                probe_marker(p),
                probe_colour(p),
                r,
                true,
            )])?;
            tag.end(area)?;
        }
        Ok(chart)
    }
}

impl Figure for DerivedFigure<'_> {
    fn stem(&self) -> &'static str {
        "derived_figures"
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        let panels = root.split_evenly((2, 2));
        let probes = &self.data.probes;
        let y_max = nice(probes.iter().map(|p| p.y_mm).fold(0.0, f64::max) * 1.08);
        let elev = "elevation above the bed y (mm)";
        // 1. a against elevation; 2. d and the chord lengths against elevation.
        let a: Vec<(usize, f64, f64)> = probes
            .iter()
            .enumerate()
            .filter_map(|(i, p)| Some((i, p.a?, p.y_mm)))
            .collect();
        let a_max = a.iter().map(|p| p.1).fold(0.0, f64::max);
        self.panel(
            &panels[0],
            s,
            tag,
            ("a", "a = 4F/V"),
            "specific interfacial area a (1/m)",
            elev,
            &a,
            (nice(a_max * 1.08), y_max),
        )?;
        let d: Vec<(usize, f64, f64)> = probes
            .iter()
            .enumerate()
            .filter_map(|(i, p)| Some((i, p.d?, p.y_mm)))
            .collect();
        let ch: Vec<(usize, f64, f64, f64)> = probes
            .iter()
            .enumerate()
            .filter_map(|(i, p)| Some((i, p.chord?.0, p.chord?.1, p.y_mm)))
            .collect();
        let d_max = d
            .iter()
            .map(|p| p.1)
            .chain(ch.iter().map(|c| c.2))
            .fold(0.0, f64::max);
        let mut chart = self.panel(
            &panels[1],
            s,
            tag,
            ("d", "d = 1.5CV/F; chord lengths"),
            "d (markers), chord median to p90 (bars) (mm)",
            elev,
            &d,
            (nice(d_max * 1.08), y_max),
        )?;
        for &(p, med, p90, y) in &ch {
            chart.draw_series([PathElement::new(
                vec![(med, y), (p90, y)],
                probe_colour(p).stroke_width(s.line()),
            )])?;
        }
        // 3. the discharge integrands and the areas under them
        let prof: Vec<(f64, f64, f64)> = probes
            .iter()
            .filter_map(|p| Some((p.y_mm, (1.0 - p.c?) * p.v?, p.c? * p.v?)))
            .collect();
        let x3 = prof.iter().map(|p| p.1.max(p.2)).fold(0.0, f64::max);
        let title = match self.data.discharge {
            Some((qw, qa, _)) => format!("q_w {qw:.3}, q_a {qa:.3} m²/s"),
            None => "q_w and q_a".into(),
        };
        let mut chart = self.panel(
            &panels[2],
            s,
            tag,
            ("q", &title),
            "(1 − C) V blue, C V orange (m/s)",
            elev,
            &[],
            (nice(x3 * 1.08), y_max),
        )?;
        let water = RGBColor(40, 100, 180);
        let air = RGBColor(220, 120, 30);
        for (k, colour) in [(1usize, water), (2, air)] {
            let mut poly: Vec<(f64, f64)> = vec![(0.0, 0.0)];
            poly.extend(prof.iter().map(|p| (if k == 1 { p.1 } else { p.2 }, p.0)));
            if let Some(last) = prof.last() {
                poly.push((0.0, last.0));
            }
            tag.begin(&panels[2], if k == 1 { "q_w" } else { "q_a" })?;
            chart.draw_series([Polygon::new(poly.clone(), colour.mix(0.25).filled())])?;
            chart.draw_series([PathElement::new(
                poly[1..poly.len() - 1].to_vec(),
                colour.stroke_width(s.line()),
            )])?;
            tag.end(&panels[2])?;
        }
        // 4. clusters against C with the random-arrival reference
        let cl: Vec<(usize, f64, f64, f64)> = probes
            .iter()
            .enumerate()
            .filter_map(|(i, p)| Some((i, p.c?, p.clustered?.0, p.clustered?.1)))
            .collect();
        let mut chart = self.panel(
            &panels[3],
            s,
            tag,
            ("clusters", "Clusters; random (rings)"),
            "void fraction C",
            "bubbles in clusters (fraction)",
            &cl.iter().map(|c| (c.0, c.1, c.2)).collect::<Vec<_>>(),
            (1.0, 1.0),
        )?;
        for &(p, c, _, f0) in &cl {
            chart.draw_series([Circle::new(
                (c, f0),
                s.ipx(5.0),
                probe_colour(p).stroke_width(2),
            )])?;
        }
        Ok(())
    }
}
