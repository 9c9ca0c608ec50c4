//! The figures. Each is a small struct of borrowed data implementing [`Figure`]; the
//! decision to draw or skip a figure is taken in `report::run`, so a figure here always has
//! something to show.
//!
//! Conventions: elevation is vertical (as in the flow); one colour and marker per probe in
//! every figure; fits are lines, measurements are markers; at most [`MAX_POINTS`] window
//! markers per probe (evenly thinned beyond, said in the HTML).

use super::input::{Run, Slice, Window};
use super::render::{DrawError, Figure, Tagger};
use super::stats::{
    chord_histogram, envelope_fmax, power_law_curve, slice_void_fraction,
    slice_void_fraction_spread, DecayFit, ProbeSummary, Selection,
};
use super::style::{
    legend_line, marker_element, probe_colour, probe_marker, station_colour, time_colour, Marker,
    Sizes, FIT, GRID, INK, MUTED,
};
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Most window markers drawn per probe and figure.
pub const MAX_POINTS: usize = 1500;

/// What every figure reads.
#[derive(Clone, Copy)]
pub struct Ctx<'r> {
    /// The run.
    pub run: &'r Run,
    /// Per-probe summaries, in probe order.
    pub summaries: &'r [ProbeSummary],
    /// Windows entering means and fits.
    pub sel: Selection,
}

impl<'r> Ctx<'r> {
    /// Windows of probe `p` that enter means and fits.
    pub fn used(&self, p: usize) -> impl Iterator<Item = &'r Window> + 'r {
        let sel = self.sel;
        self.run
            .windows
            .iter()
            .filter(move |w| w.probe == p && sel.uses(w))
    }

    /// A probe's name for legends; with probes at several streamwise positions the
    /// position is added.
    pub fn probe_label(&self, p: usize) -> String {
        let probe = &self.run.probes[p];
        match (self.several_x(), probe.x_mm) {
            (true, Some(x)) => format!("{} (x = {} mm)", probe.name, fmt_num(x)),
            _ => probe.name.clone(),
        }
    }

    fn several_x(&self) -> bool {
        let xs: Vec<f64> = self.run.probes.iter().filter_map(|q| q.x_mm).collect();
        xs.iter().any(|&x| (x - xs[0]).abs() > 1e-9)
    }

    /// Elevations for drawing: probes sharing an elevation (at different streamwise
    /// positions) are drawn slightly apart, by 1.2 % of the highest elevation each.
    pub fn drawn_elevations(&self) -> Vec<Option<f64>> {
        let ys: Vec<Option<f64>> = self.run.probes.iter().map(|p| p.elevation_mm).collect();
        let top = ys.iter().flatten().fold(0.0f64, |a, &b| a.max(b));
        let step = 0.012 * top;
        let mut out = ys.clone();
        for (i, y) in ys.iter().enumerate() {
            let Some(y) = y else { continue };
            let same: Vec<usize> = (0..ys.len())
                .filter(|&j| ys[j].is_some_and(|v| (v - y).abs() < 1e-6))
                .collect();
            if same.len() > 1 {
                let k = same.iter().position(|&j| j == i).unwrap_or(0) as f64;
                out[i] = Some(y + (k - (same.len() - 1) as f64 / 2.0) * step);
            }
        }
        out
    }
}

/// A number with few digits for labels.
pub fn fmt_num(v: f64) -> String {
    let a = v.abs();
    let s = if a == 0.0 {
        "0".to_string()
    } else if a >= 100.0 {
        format!("{v:.0}")
    } else if a >= 10.0 {
        format!("{v:.1}")
    } else if a >= 1.0 {
        format!("{v:.2}")
    } else if a >= 0.01 {
        format!("{v:.3}")
    } else {
        format!("{v:.2e}")
    };
    if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// Round up to a round axis end: 1 to 2 in steps of 0.2, to 5 in steps of 0.5, to 10 in
/// steps of 1 (× 10^k).
fn nice_max(v: f64) -> f64 {
    if v.is_nan() || v <= 0.0 || !v.is_finite() {
        return 1.0;
    }
    let p = 10f64.powf(v.log10().floor());
    for m in [
        1.0, 1.2, 1.4, 1.6, 1.8, 2.0, 2.5, 3.0, 3.5, 4.0, 4.5, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0,
    ] {
        if v <= m * p * (1.0 + 1e-9) {
            return m * p;
        }
    }
    10.0 * p
}

/// Tick labels of linear axes: no trailing zeros (`120`, `0.25`).
fn tick(v: &f64) -> String {
    let r = (v * 1e6).round() / 1e6;
    let s = format!("{r}");
    if s == "-0" {
        "0".into()
    } else {
        s
    }
}

/// A legend position and the top of the y axis that keeps the data out of the legend box.
///
/// `points` are (x as a fraction 0..1 of the x axis, y in data units, y axis from 0);
/// `labels` the legend texts. Tries the upper corners in `corners` order and takes the
/// one that needs the least head room.
fn place_legend(
    s: &Sizes,
    y_label_px: f64,
    points: &[(f64, f64)],
    labels: &[String],
    corners: &[SeriesLabelPosition],
) -> (SeriesLabelPosition, f64) {
    let data_max = points.iter().map(|p| p.1).fold(0.0, f64::max);
    let plot_w = s.width as f64 - s.px(y_label_px + 38.0) as f64;
    let plot_h = s.height as f64 - s.px(22.0 + 24.0 + 54.0 + 24.0) as f64;
    let chars = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0) as f64;
    let box_w =
        (s.px(10.0 + 16.0) + s.px(28.0).max(26)) as f64 + chars * s.legend_px() as f64 * 0.6;
    let box_h = s.px(12.0) as f64 + labels.len() as f64 * (s.legend_px() as f64 * 1.45);
    let (wf, hf) = ((box_w / plot_w).min(1.0), (box_h / plot_h).min(0.9));
    let mut best: Option<(SeriesLabelPosition, f64)> = None;
    for corner in corners {
        let (x0, x1) = match corner {
            SeriesLabelPosition::UpperLeft => (0.0, wf + 0.02),
            _ => (1.0 - wf - 0.02, 1.0),
        };
        let under = points
            .iter()
            .filter(|p| p.0 >= x0 && p.0 <= x1)
            .map(|p| p.1)
            .fold(0.0, f64::max);
        let top = (under / (1.0 - hf - 0.04)).max(data_max * 1.06);
        if best.as_ref().is_none_or(|b| top < b.1 * 0.98) {
            best = Some((corner.clone(), top));
        }
    }
    let (pos, top) = best.unwrap_or((SeriesLabelPosition::UpperRight, data_max * 1.06));
    // When an upper corner would squash the data (the axis raised by more than a third to
    // clear the box), a free place at the bottom, where no point lies under the box, keeps
    // the data's own range.
    let plain_top = nice_max(data_max * 1.06);
    if top > 1.3 * data_max * 1.06 {
        let free = |x0: f64, x1: f64| {
            !points
                .iter()
                .any(|p| p.0 >= x0 && p.0 <= x1 && p.1 <= plain_top * (hf + 0.06))
        };
        let lower = [
            (
                SeriesLabelPosition::LowerMiddle,
                0.5 - wf / 2.0 - 0.02,
                0.5 + wf / 2.0 + 0.02,
            ),
            (SeriesLabelPosition::LowerRight, 1.0 - wf - 0.02, 1.0),
            (SeriesLabelPosition::LowerLeft, 0.0, wf + 0.02),
        ];
        if let Some((p, _, _)) = lower.into_iter().find(|(_, a, b)| free(*a, *b)) {
            return (p, plain_top);
        }
    }
    (pos, nice_max(top))
}

/// Points of a curve or a series, (x, y) in data units.
type Points = Vec<(f64, f64)>;

/// Keep at most `max` items, evenly spaced.
fn thin<T>(v: Vec<T>, max: usize) -> Vec<T> {
    if v.len() <= max {
        return v;
    }
    let stride = v.len().div_ceil(max);
    v.into_iter().step_by(stride).collect()
}

/// True when a probe has more used windows than [`MAX_POINTS`] (markers were thinned).
pub fn thinned(ctx: &Ctx, p: usize) -> bool {
    ctx.used(p).count() > MAX_POINTS
}

/// A chart builder in the report's style.
fn builder<'a, 'b, DB: DrawingBackend>(
    root: &'a DrawingArea<DB, Shift>,
    s: &Sizes,
    title: &str,
    y_label_px: f64,
) -> ChartBuilder<'a, 'b, DB> {
    let mut b = ChartBuilder::on(root);
    b.margin(s.px(12.0))
        .margin_right(s.px(26.0))
        .caption(title, s.title())
        .x_label_area_size(s.px(54.0))
        .y_label_area_size(s.px(y_label_px));
    b
}

macro_rules! mesh {
    ($chart:expr, $s:expr, $xd:expr, $yd:expr) => {
        $chart
            .configure_mesh()
            .x_desc($xd)
            .y_desc($yd)
            .axis_desc_style($s.axis_label())
            .label_style($s.tick())
            .bold_line_style(GRID)
            .light_line_style(TRANSPARENT)
            .axis_style(MUTED)
            .set_all_tick_mark_size($s.px(5.0))
            .x_label_formatter(&tick)
            .y_label_formatter(&tick)
    };
}

fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    s: &Sizes,
    pos: SeriesLabelPosition,
) -> Result<(), DrawError> {
    chart
        .configure_series_labels()
        .position(pos)
        .margin(s.px(10.0))
        // The keys are drawn 17 px long (style::LineKey): keep room for them at any scale.
        .legend_area_size(s.px(28.0).max(26))
        .background_style(WHITE.mix(0.88))
        .border_style(GRID)
        .label_font(s.legend())
        .draw()?;
    Ok(())
}

// ---------------------------------------------------------------------------------------
// Void fraction against elevation

/// Void fraction against elevation: power-law fits at chosen slices (transient) or
/// whole-record means per probe (steady).
pub struct ProfileFigure<'r> {
    /// Data.
    pub ctx: Ctx<'r>,
    /// Transient: the station and the slices to draw; steady: None.
    pub transient: Option<(String, Vec<&'r Slice>)>,
}

impl Figure for ProfileFigure<'_> {
    fn stem(&self) -> &'static str {
        "void_fraction_profile"
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        match &self.transient {
            Some((station, slices)) => self.draw_transient(root, s, tag, station, slices),
            None => self.draw_steady(root, s, tag),
        }
    }
}

impl ProfileFigure<'_> {
    fn draw_transient<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
        station: &str,
        slices: &[&Slice],
    ) -> Result<(), DrawError> {
        let run = self.ctx.run;
        let probes = run.station_probes(station);
        let curves: Vec<Vec<(f64, f64)>> = slices
            .iter()
            .map(|sl| {
                power_law_curve(
                    sl.y90_mm.unwrap_or(0.0),
                    sl.profile_exponent.unwrap_or(0.0),
                    f64::INFINITY,
                )
            })
            .collect();
        let points: Vec<Vec<(f64, f64)>> = slices
            .iter()
            .map(|sl| {
                probes
                    .iter()
                    .filter_map(|&p| {
                        let c = slice_void_fraction(run, self.ctx.sel, p, sl)?;
                        Some((c, run.probes[p].elevation_mm?))
                    })
                    .collect()
            })
            .collect();
        let labels: Vec<String> = slices
            .iter()
            .map(|sl| {
                format!(
                    "t = {} s   Y90 = {} mm, n = {}",
                    fmt_num(sl.since_front_s.unwrap_or(0.0)),
                    fmt_num(sl.y90_mm.unwrap_or(0.0)),
                    fmt_num(sl.profile_exponent.unwrap_or(0.0)),
                )
            })
            .chain([
                if run.windows.iter().any(|w| w.void_fraction_spread.is_some()) {
                    "windows over the slice, per probe; bars ±1 sd over the runs".to_string()
                } else {
                    "windows over the slice, per probe".to_string()
                },
            ])
            .collect();
        let all: Vec<(f64, f64)> = curves
            .iter()
            .flatten()
            .chain(points.iter().flatten())
            .copied()
            .collect();
        let (pos, y_top) = place_legend(
            s,
            72.0,
            &all,
            &labels,
            &[
                SeriesLabelPosition::UpperLeft,
                SeriesLabelPosition::UpperRight,
            ],
        );
        let title = format!("Void fraction profiles after the front, station {station}");
        let mut chart =
            builder(root, s, &title, 72.0).build_cartesian_2d(0.0..1.0f64, 0.0..y_top)?;
        mesh!(
            chart,
            s,
            "void fraction C (–)",
            "elevation above the bed y (mm)"
        )
        .draw()?;
        let r = s.marker();
        for (i, (sl, (curve, pts))) in slices.iter().zip(curves.iter().zip(&points)).enumerate() {
            let colour = time_colour(i, slices.len());
            let t = sl.since_front_s.unwrap_or(0.0);
            let width = s.line();
            tag.begin(root, &format!("profile-fit-t{t:.3}"))?;
            // The power law describes the flow below Y90 only: solid up to Y90, then a thin
            // dashed line where it would run on to C = 1 (the spray region above Y90).
            let y90 = sl.y90_mm.unwrap_or(0.0);
            let (below, above): (Points, Points) = curve.iter().partition(|p| p.1 <= y90);
            chart
                .draw_series(LineSeries::new(
                    below.iter().copied(),
                    colour.stroke_width(width),
                ))?
                .label(labels[i].clone())
                .legend(move |at| legend_line(at, colour, width, false));
            let above: Vec<(f64, f64)> = below.last().copied().into_iter().chain(above).collect();
            chart.draw_series(DashedLineSeries::new(
                above,
                s.px(5.0),
                s.px(4.0),
                colour.mix(0.45).stroke_width((width / 2).max(1)),
            ))?;
            tag.end(root)?;
            // Run-to-run spread of an ensemble: ±1 standard deviation of C as error bars.
            let bars: Vec<((f64, f64), f64)> = probes
                .iter()
                .filter_map(|&p| {
                    let c = slice_void_fraction(run, self.ctx.sel, p, sl)?;
                    let sd = slice_void_fraction_spread(run, self.ctx.sel, p, sl)?;
                    Some(((c, run.probes[p].elevation_mm?), sd))
                })
                .filter(|(_, sd)| *sd > 0.0 && sd.is_finite())
                .collect();
            if !bars.is_empty() {
                tag.begin(root, &format!("profile-spread-t{t:.3}"))?;
                let cap = (y_top * 0.008).max(1e-9);
                for ((c, y), sd) in &bars {
                    let (lo, hi) = ((c - sd).max(0.0), (c + sd).min(1.0));
                    let style = colour.mix(0.8).stroke_width((width / 2).max(1));
                    chart.draw_series([
                        PathElement::new(vec![(lo, *y), (hi, *y)], style),
                        PathElement::new(vec![(lo, y - cap), (lo, y + cap)], style),
                        PathElement::new(vec![(hi, y - cap), (hi, y + cap)], style),
                    ])?;
                }
                tag.end(root)?;
            }
            tag.begin(root, &format!("profile-windows-t{t:.3}"))?;
            let anno = chart.draw_series(
                pts.iter()
                    .map(|&pt| marker_element(pt, Marker::Circle, colour, r, true)),
            )?;
            if i + 1 == slices.len() {
                anno.label(labels[slices.len()].clone())
                    .legend(move |at| marker_element(at, Marker::Circle, MUTED, r, true));
            }
            tag.end(root)?;
        }
        legend(&mut chart, s, pos)
    }

    fn draw_steady<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        let run = self.ctx.run;
        let drawn = self.ctx.drawn_elevations();
        let rows: Vec<SteadyRow> = (0..run.probes.len())
            .filter_map(|p| {
                let sum = &self.ctx.summaries[p];
                let y = drawn[p]?;
                let c = sum.void_fraction?;
                let spread = sum.void_fraction_p10.zip(sum.void_fraction_p90);
                Some((p, c, y, spread))
            })
            .collect();
        let labels: Vec<String> = rows
            .iter()
            .map(|r| self.ctx.probe_label(r.0))
            .chain(["bar: 10th–90th percentile of windows".to_string()])
            .collect();
        let extent: Vec<(f64, f64)> = rows
            .iter()
            .flat_map(|&(_, c, y, spread)| {
                let (lo, hi) = spread.unwrap_or((c, c));
                [(lo, y), (c, y), (hi, y)]
            })
            .collect();
        let (pos, y_top) = place_legend(
            s,
            72.0,
            &extent,
            &labels,
            &[
                SeriesLabelPosition::UpperLeft,
                SeriesLabelPosition::UpperRight,
            ],
        );
        let mut chart = builder(root, s, "Void fraction profile, whole-record means", 72.0)
            .build_cartesian_2d(0.0..1.0f64, 0.0..y_top)?;
        mesh!(
            chart,
            s,
            "void fraction C (–)",
            "elevation above the bed y (mm)"
        )
        .draw()?;
        let r = s.marker() + 1;
        let cap = s.ipx(5.0);
        for (i, &(p, c, y, spread)) in rows.iter().enumerate() {
            let (colour, shape) = (probe_colour(p), probe_marker(p));
            tag.begin(root, &format!("profile-{}", run.probes[p].name))?;
            if let Some((lo, hi)) = spread {
                chart.draw_series([PathElement::new(
                    vec![(lo, y), (hi, y)],
                    colour.stroke_width(s.px(2.0)),
                )])?;
                for x in [lo, hi] {
                    chart.draw_series([EmptyElement::at((x, y))
                        + PathElement::new(vec![(0, -cap), (0, cap)], colour.stroke_width(2))])?;
                }
            }
            chart
                .draw_series([marker_element((c, y), shape, colour, r, true)])?
                .label(labels[i].clone())
                .legend(move |at| marker_element(at, shape, colour, r, true));
            tag.end(root)?;
        }
        if rows.iter().any(|r| r.3.is_some()) {
            chart
                .draw_series(std::iter::empty::<PathElement<(f64, f64)>>())?
                .label(labels[rows.len()].clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 17, y)], MUTED.stroke_width(2))
                });
        }
        legend(&mut chart, s, pos)
    }
}

// ---------------------------------------------------------------------------------------
// Depth-averaged void fraction against time since the front

/// One station of the decay figure.
pub struct DecayStation {
    /// Station name.
    pub station: String,
    /// (time since the front, depth-averaged void fraction).
    pub points: Vec<(f64, f64)>,
    /// Half-width of each point's 90 % interval (from profile.csv's `void_fraction_se`),
    /// drawn as an error bar; `None` (or a shorter list) draws none.
    pub intervals: Vec<Option<f64>>,
    /// The fit (given by the file or made here).
    pub fit: Option<DecayFit>,
    /// True when the fit came from profile.csv's decay columns.
    pub fit_from_file: bool,
}

/// Depth-averaged void fraction against time since the front, with the decay fit.
pub struct DecayFigure {
    /// One entry per station.
    pub stations: Vec<DecayStation>,
}

impl Figure for DecayFigure {
    fn stem(&self) -> &'static str {
        "void_fraction_decay"
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        let t_max = self
            .stations
            .iter()
            .flat_map(|st| st.points.iter())
            .map(|p| p.0)
            .fold(0.0, f64::max);
        let t_top = nice_max(t_max * 1.02);
        let mut extent: Vec<(f64, f64)> = Vec::new();
        let mut labels: Vec<String> = Vec::new();
        for st in &self.stations {
            extent.extend(st.points.iter().map(|p| (p.0 / t_top, p.1)));
            extent.extend(
                st.points
                    .iter()
                    .zip(&st.intervals)
                    .filter_map(|(p, h)| h.map(|h| (p.0 / t_top, p.1 + h))),
            );
            labels.push(slices_label(st));
            if let Some(fit) = st.fit {
                extent.extend((0..=50).map(|k| {
                    let t = t_max * k as f64 / 50.0;
                    (t / t_top, fit.at(t))
                }));
                labels.push(decay_label(st, &fit));
            }
        }
        let (pos, c_top) = place_legend(
            s,
            72.0,
            &extent,
            &labels,
            &[
                SeriesLabelPosition::UpperRight,
                SeriesLabelPosition::UpperLeft,
            ],
        );
        let mut chart = builder(
            root,
            s,
            "Depth-averaged void fraction after the front",
            72.0,
        )
        .build_cartesian_2d(0.0..t_top, 0.0..c_top.min(1.0))?;
        mesh!(
            chart,
            s,
            "time since the front t (s)",
            "depth-averaged void fraction Cmean (–)"
        )
        .draw()?;
        let r = s.marker();
        for (i, st) in self.stations.iter().enumerate() {
            let colour = station_colour(i);
            let bars: Vec<((f64, f64), f64)> = st
                .points
                .iter()
                .zip(&st.intervals)
                .filter_map(|(&p, h)| h.filter(|h| h.is_finite() && *h > 0.0).map(|h| (p, h)))
                .collect();
            if !bars.is_empty() {
                let cap = t_top * 0.004;
                let style = colour.mix(0.45).stroke_width(s.line().max(1));
                tag.begin(root, &format!("decay-intervals-{}", st.station))?;
                chart.draw_series(bars.iter().flat_map(|&((t, c), h)| {
                    let (lo, hi) = ((c - h).max(0.0), c + h);
                    [
                        PathElement::new(vec![(t, lo), (t, hi)], style),
                        PathElement::new(vec![(t - cap, lo), (t + cap, lo)], style),
                        PathElement::new(vec![(t - cap, hi), (t + cap, hi)], style),
                    ]
                }))?;
                tag.end(root)?;
            }
            tag.begin(root, &format!("decay-slices-{}", st.station))?;
            chart
                .draw_series(
                    st.points
                        .iter()
                        .map(|&pt| marker_element(pt, Marker::Circle, colour.mix(0.55), r, true)),
                )?
                .label(slices_label(st))
                .legend(move |at| marker_element(at, Marker::Circle, colour.mix(0.55), r, true));
            tag.end(root)?;
            if let Some(fit) = st.fit {
                let width = s.line() + 1;
                let curve = (0..=200).map(|k| {
                    let t = t_max * k as f64 / 200.0;
                    (t, fit.at(t))
                });
                tag.begin(root, &format!("decay-fit-{}", st.station))?;
                chart
                    .draw_series(LineSeries::new(curve, colour.stroke_width(width)))?
                    .label(decay_label(st, &fit))
                    .legend(move |at| legend_line(at, colour, width, false));
                tag.end(root)?;
            }
        }
        legend(&mut chart, s, pos)
    }
}

fn slices_label(st: &DecayStation) -> String {
    if st.intervals.iter().any(Option::is_some) {
        format!("station {}: profile slices, 90 % intervals", st.station)
    } else {
        format!("station {}: profile slices", st.station)
    }
}

fn decay_label(st: &DecayStation, fit: &DecayFit) -> String {
    format!(
        "{}: C0 = {}, Cf = {}, τ = {} s",
        if st.fit_from_file {
            "fit (profile.csv)"
        } else {
            "fit"
        },
        fmt_num(fit.c0),
        fmt_num(fit.cf),
        fmt_num(fit.tau_s)
    )
}

// ---------------------------------------------------------------------------------------
// Interfacial velocity and turbulence intensity against elevation

/// Interfacial velocity and turbulence intensity against elevation.
pub struct VelocityFigure<'r> {
    /// Data.
    pub ctx: Ctx<'r>,
    /// Draw the velocity panel.
    pub velocity: bool,
    /// Draw the turbulence intensity panel.
    pub turbulence: bool,
}

impl Figure for VelocityFigure<'_> {
    fn stem(&self) -> &'static str {
        "velocity_turbulence"
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        let panels: Vec<DrawingArea<DB, Shift>> = if self.velocity && self.turbulence {
            root.split_evenly((1, 2))
        } else {
            vec![root.clone()]
        };
        let mut k = 0;
        if self.velocity {
            self.panel(&panels[k], s, tag, true, true)?;
            k += 1;
        }
        if self.turbulence {
            self.panel(&panels[k], s, tag, false, k == 0)?;
        }
        Ok(())
    }
}

impl VelocityFigure<'_> {
    fn panel<DB: DrawingBackend>(
        &self,
        area: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
        velocity: bool,
        with_legend: bool,
    ) -> Result<(), DrawError> {
        let run = self.ctx.run;
        let get = |w: &Window| {
            if velocity {
                w.velocity_m_s
            } else {
                w.turbulence_intensity
            }
        };
        let mean = |p: usize| {
            let sum = &self.ctx.summaries[p];
            if velocity {
                sum.velocity_m_s
            } else {
                sum.turbulence_intensity
            }
        };
        let drawn = self.ctx.drawn_elevations();
        let probes: Vec<(usize, f64)> = (0..run.probes.len())
            .filter_map(|p| Some((p, drawn[p]?)))
            .filter(|&(p, _)| mean(p).is_some())
            .collect();
        let x_max = probes
            .iter()
            .flat_map(|&(p, _)| self.ctx.used(p).filter_map(get))
            .fold(0.0, f64::max);
        let y_top = nice_max(probes.iter().map(|p| p.1).fold(0.0, f64::max) * 1.12);
        let (title, xd, key) = if velocity {
            ("Interfacial velocity", "interfacial velocity V (m/s)", "v")
        } else {
            ("Turbulence intensity", "turbulence intensity Tu (–)", "tu")
        };
        let mut chart = builder(area, s, title, 66.0)
            .build_cartesian_2d(0.0..nice_max(x_max * 1.08), 0.0..y_top)?;
        mesh!(chart, s, xd, "elevation above the bed y (mm)")
            .x_labels(6)
            .draw()?;
        let r = s.marker() + 1;
        for &(p, y) in &probes {
            let (colour, shape) = (probe_colour(p), probe_marker(p));
            let dots: Vec<(f64, f64)> = thin(
                self.ctx.used(p).filter_map(get).map(|v| (v, y)).collect(),
                MAX_POINTS,
            );
            tag.begin(area, &format!("{key}-{}", run.probes[p].name))?;
            chart.draw_series(
                dots.iter()
                    .map(|&pt| Circle::new(pt, s.ipx(2.5), colour.mix(0.28).filled())),
            )?;
            let anno = chart.draw_series([marker_element(
                (mean(p).unwrap_or(0.0), y),
                shape,
                colour,
                r,
                true,
            )])?;
            if with_legend {
                anno.label(self.ctx.probe_label(p))
                    .legend(move |at| marker_element(at, shape, colour, r, true));
            }
            tag.end(area)?;
        }
        if with_legend {
            legend(&mut chart, s, SeriesLabelPosition::UpperLeft)?;
        }
        Ok(())
    }
}

// ---------------------------------------------------------------------------------------
// Bubble chord times

/// Bubble chord times per probe: pooled histograms (chords.csv) or percentile bars.
pub struct ChordFigure<'r> {
    /// Data.
    pub ctx: Ctx<'r>,
    /// True: histograms from chords.csv; false: bars from the window statistics.
    pub histograms: bool,
}

impl Figure for ChordFigure<'_> {
    fn stem(&self) -> &'static str {
        "chord_times"
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        if self.histograms {
            self.draw_histograms(root, s, tag)
        } else {
            self.draw_bars(root, s, tag)
        }
    }
}

fn no_label(_: &f64) -> String {
    String::new()
}

/// Values 1, 2 and 5 × 10^k within [lo, hi].
fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let mut out = Vec::new();
    if !(lo > 0.0 && hi > lo) {
        return out;
    }
    for k in (lo.log10().floor() as i32)..=(hi.log10().ceil() as i32) {
        for m in [1.0, 2.0, 5.0] {
            let v = m * 10f64.powi(k);
            if v >= lo && v <= hi {
                out.push(v);
            }
        }
    }
    out
}

/// (probe, C, drawn elevation, 10th and 90th percentiles of the window C).
type SteadyRow = (usize, f64, f64, Option<(f64, f64)>);

/// A histogram bin: (lower edge, upper edge, fraction).
type Bin = (f64, f64, f64);

type LogXChart<'a, DB> = ChartContext<'a, DB, Cartesian2d<LogCoord<f64>, RangedCoordf64>>;

/// The x axis of a logarithmic chart: grid lines, tick marks and labels at 1, 2 and 5 ×
/// 10^k, drawn here (plotters' own log axis labels each decade twice).
fn log_x_axis<DB: DrawingBackend>(
    chart: &mut LogXChart<'_, DB>,
    root: &DrawingArea<DB, Shift>,
    s: &Sizes,
    (lo, hi): (f64, f64),
    (y_lo, y_hi): (f64, f64),
) -> Result<(), DrawError> {
    let ticks = log_ticks(lo, hi);
    chart.draw_series(
        ticks
            .iter()
            .map(|&v| PathElement::new(vec![(v, y_lo), (v, y_hi)], GRID.stroke_width(1))),
    )?;
    let style = s.tick().pos(Pos::new(HPos::Center, VPos::Top));
    for &v in &ticks {
        let (x, y) = chart.backend_coord(&(v, y_lo));
        root.draw(&PathElement::new(
            vec![(x, y), (x, y + s.ipx(5.0))],
            MUTED.stroke_width(1),
        ))?;
        root.draw(&Text::new(fmt_num(v), (x, y + s.ipx(8.0)), style.clone()))?;
    }
    Ok(())
}

impl ChordFigure<'_> {
    fn draw_histograms<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        let run = self.ctx.run;
        // leading and trailing empty bins are left out: they would only draw along the axis
        let hists: Vec<(usize, Vec<Bin>)> = (0..run.probes.len())
            .map(|p| {
                let bins = chord_histogram(run, p);
                let first = bins.iter().position(|b| b.2 > 0.0).unwrap_or(bins.len());
                let last = bins.iter().rposition(|b| b.2 > 0.0).map_or(0, |i| i + 1);
                (p, bins[first..last.max(first)].to_vec())
            })
            .filter(|h| !h.1.is_empty())
            .collect();
        let nonzero = hists.iter().flat_map(|h| h.1.iter()).filter(|b| b.2 > 0.0);
        let lo = nonzero.clone().map(|b| b.0).fold(f64::INFINITY, f64::min) * 1e3;
        let hi = nonzero.map(|b| b.1).fold(0.0, f64::max) * 1e3;
        let f_max = hists
            .iter()
            .flat_map(|h| h.1.iter())
            .map(|b| b.2)
            .fold(0.0, f64::max);
        let (lo, hi) = (lo / 1.5, hi * 1.5);
        let (lo, hi) = if lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo {
            (lo, hi)
        } else {
            (0.1, 100.0)
        };
        let frac = |v: f64| (v / lo).ln() / (hi / lo).ln();
        let labels: Vec<String> = hists
            .iter()
            .map(|(p, _)| {
                let n: f64 = run
                    .chords
                    .iter()
                    .filter(|b| b.probe == *p)
                    .map(|b| b.count)
                    .sum();
                match self.ctx.summaries[*p].chord_median_s {
                    Some(m) => format!(
                        "{}: median {} ms, {} bubbles",
                        self.ctx.probe_label(*p),
                        fmt_num(m * 1e3),
                        n
                    ),
                    None => self.ctx.probe_label(*p),
                }
            })
            .collect();
        let extent: Vec<(f64, f64)> = hists
            .iter()
            .flat_map(|h| h.1.iter())
            .flat_map(|&(l, u, f)| [(frac(l * 1e3), f), (frac(u * 1e3), f)])
            .collect();
        let (pos, f_top) = place_legend(
            s,
            72.0,
            &extent,
            &labels,
            &[
                SeriesLabelPosition::UpperRight,
                SeriesLabelPosition::UpperLeft,
            ],
        );
        let _ = f_max;
        let mut chart = builder(root, s, "Bubble chord times, pooled after the front", 72.0)
            .build_cartesian_2d((lo..hi).log_scale(), 0.0..f_top)?;
        mesh!(
            chart,
            s,
            "bubble chord time (ms, logarithmic)",
            "fraction of bubbles per bin (–)"
        )
        .disable_x_mesh()
        .x_labels(0)
        .x_label_formatter(&no_label)
        .set_tick_mark_size(LabelAreaPosition::Bottom, 0)
        .draw()?;
        log_x_axis(&mut chart, root, s, (lo, hi), (0.0, f_top))?;
        let width = s.line();
        for (k, (p, bins)) in hists.iter().enumerate() {
            let colour = probe_colour(*p);
            let mut path = vec![(bins[0].0 * 1e3, 0.0)];
            for &(l, u, f) in bins {
                path.push((l * 1e3, f));
                path.push((u * 1e3, f));
            }
            path.push((bins[bins.len() - 1].1 * 1e3, 0.0));
            let label = labels[k].clone();
            tag.begin(root, &format!("chords-{}", run.probes[*p].name))?;
            chart
                .draw_series(LineSeries::new(path, colour.stroke_width(width)))?
                .label(label)
                .legend(move |at| legend_line(at, colour, width, false));
            tag.end(root)?;
        }
        legend(&mut chart, s, pos)
    }

    fn draw_bars<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        let run = self.ctx.run;
        let rows: Vec<(usize, &ProbeSummary)> = self
            .ctx
            .summaries
            .iter()
            .enumerate()
            .filter(|(_, sum)| {
                sum.chord_median_s.is_some_and(|v| v > 0.0)
                    || sum.chord_mean_s.is_some_and(|v| v > 0.0)
            })
            .collect();
        let values = rows.iter().flat_map(|(_, sum)| {
            [
                sum.chord_p10_s,
                sum.chord_p90_s,
                sum.chord_median_s,
                sum.chord_mean_s,
            ]
            .into_iter()
            .flatten()
            .filter(|v| *v > 0.0)
        });
        let lo = values.clone().fold(f64::INFINITY, f64::min) * 1e3 / 1.6;
        let hi = values.fold(0.0, f64::max) * 1e3 * 1.6;
        // A cell such as 1e307 s overflows to infinity in milliseconds; a log axis to
        // infinity never finishes its ticks, so such a range falls back to the default.
        let (lo, hi) = if lo.is_finite() && hi.is_finite() && hi > lo {
            (lo, hi)
        } else {
            (0.1, 100.0)
        };
        let several_x = self.ctx.several_x();
        let labels: Vec<String> = rows
            .iter()
            .map(|(p, _)| {
                let probe = &run.probes[*p];
                let mut l = probe.name.clone();
                if let Some(y) = probe.elevation_mm {
                    l.push_str(&format!("  y = {} mm", fmt_num(y)));
                }
                if let (true, Some(x)) = (several_x, probe.x_mm) {
                    l.push_str(&format!(", x = {} mm", fmt_num(x)));
                }
                l
            })
            .collect();
        let longest = labels.iter().map(|l| l.chars().count()).max().unwrap_or(4);
        let y_area = (longest as f64 * 8.4 + 24.0).max(72.0);
        let n = rows.len() as f64;

        // Title and a key row under it, drawn here so the plot keeps its full width.
        let title_h = s.ipx(34.0);
        let key_h = s.ipx(26.0);
        let w = s.width as i32;
        root.draw(&Text::new(
            "Bubble chord times per probe",
            (w / 2, s.ipx(10.0)),
            s.title().pos(Pos::new(HPos::Center, VPos::Top)),
        ))?;
        let key_y = s.ipx(10.0) + title_h;
        let text = s.legend().pos(Pos::new(HPos::Left, VPos::Center));
        let mut x = w / 2 - s.ipx(230.0);
        root.draw(&Rectangle::new(
            [
                (x, key_y - s.ipx(6.0)),
                (x + s.ipx(26.0), key_y + s.ipx(6.0)),
            ],
            MUTED.mix(0.35).filled(),
        ))?;
        root.draw(&Text::new(
            "10th to 90th percentile",
            (x + s.ipx(34.0), key_y),
            text.clone(),
        ))?;
        x += s.ipx(230.0);
        root.draw(&PathElement::new(
            vec![
                (x + s.ipx(6.0), key_y - s.ipx(8.0)),
                (x + s.ipx(6.0), key_y + s.ipx(8.0)),
            ],
            INK.stroke_width(s.px(4.0)),
        ))?;
        root.draw(&Text::new("median", (x + s.ipx(18.0), key_y), text.clone()))?;
        x += s.ipx(110.0);
        root.draw(&marker_element(
            (x + s.ipx(6.0), key_y),
            Marker::Diamond,
            INK,
            s.marker(),
            false,
        ))?;
        root.draw(&Text::new("mean", (x + s.ipx(20.0), key_y), text))?;

        let mut b = ChartBuilder::on(root);
        b.margin(s.px(12.0))
            .margin_top(s.px(12.0) + (title_h + key_h) as u32)
            .margin_right(s.px(26.0))
            .x_label_area_size(s.px(54.0))
            .y_label_area_size(s.px(y_area));
        let mut chart = b.build_cartesian_2d((lo..hi).log_scale(), -0.6..n - 0.4)?;
        let label_of = |v: &f64| {
            let i = v.round();
            if (v - i).abs() < 1e-6 && i >= 0.0 {
                labels.get(i as usize).cloned().unwrap_or_default()
            } else {
                String::new()
            }
        };
        mesh!(chart, s, "bubble chord time (ms, logarithmic)", "")
            .disable_x_mesh()
            .x_labels(0)
            .x_label_formatter(&no_label)
            .set_tick_mark_size(LabelAreaPosition::Bottom, 0)
            .y_label_formatter(&label_of)
            .y_labels(rows.len() + 1)
            .y_label_style(s.legend())
            .draw()?;
        log_x_axis(&mut chart, root, s, (lo, hi), (-0.6, n - 0.4))?;
        let half = 0.2;
        let r = s.marker();
        for (i, (p, sum)) in rows.iter().enumerate() {
            let (y, colour) = (i as f64, probe_colour(*p));
            tag.begin(root, &format!("chords-{}", run.probes[*p].name))?;
            let pos = |v: Option<f64>| v.filter(|v| *v > 0.0);
            if let (Some(a), Some(b)) = (pos(sum.chord_p10_s), pos(sum.chord_p90_s)) {
                let corners = [(a * 1e3, y - half), (b * 1e3, y + half)];
                chart.draw_series([
                    Rectangle::new(corners, colour.mix(0.3).filled()),
                    Rectangle::new(corners, colour.stroke_width(s.px(1.5))),
                ])?;
            }
            if let Some(m) = pos(sum.chord_median_s) {
                chart.draw_series([PathElement::new(
                    vec![(m * 1e3, y - half * 1.5), (m * 1e3, y + half * 1.5)],
                    colour.stroke_width(s.px(4.0)),
                )])?;
            }
            if let Some(m) = pos(sum.chord_mean_s) {
                chart.draw_series([marker_element(
                    (m * 1e3, y),
                    Marker::Diamond,
                    INK,
                    r,
                    false,
                )])?;
            }
            tag.end(root)?;
        }
        Ok(())
    }
}

// ---------------------------------------------------------------------------------------
// Bubble count rate against void fraction

/// Bubble count rate against void fraction, with parabolic envelopes.
pub struct CountRateFigure<'r> {
    /// Data.
    pub ctx: Ctx<'r>,
    /// The envelope fitted to every probe's windows together.
    pub fmax_all: Option<f64>,
}

impl Figure for CountRateFigure<'_> {
    fn stem(&self) -> &'static str {
        "count_rate_void_fraction"
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        let run = self.ctx.run;
        let pts: Vec<(usize, Vec<(f64, f64)>)> = (0..run.probes.len())
            .map(|p| {
                let v: Vec<(f64, f64)> = self
                    .ctx
                    .used(p)
                    .filter_map(|w| Some((w.void_fraction?, w.count_rate_hz?)))
                    .collect();
                (p, v)
            })
            .filter(|x| !x.1.is_empty())
            .collect();
        let parabola = |fmax: f64| {
            (0..=100).map(move |i| {
                let c = i as f64 / 100.0;
                (c, 4.0 * fmax * c * (1.0 - c))
            })
        };
        let mut labels: Vec<String> = pts
            .iter()
            .map(|(p, _)| match self.ctx.summaries[*p].fmax_hz {
                Some(f) => format!("{}: Fmax = {} Hz", self.ctx.probe_label(*p), fmt_num(f)),
                None => self.ctx.probe_label(*p),
            })
            .collect();
        if let Some(f) = self.fmax_all {
            labels.push(format!("all probes: Fmax = {} Hz", fmt_num(f)));
        }
        let extent: Vec<(f64, f64)> = pts
            .iter()
            .flat_map(|x| x.1.iter().copied())
            .chain(self.fmax_all.into_iter().flat_map(parabola))
            .chain(
                pts.iter()
                    .filter_map(|(p, _)| self.ctx.summaries[*p].fmax_hz)
                    .flat_map(parabola),
            )
            .collect();
        let (pos, f_top) = place_legend(
            s,
            72.0,
            &extent,
            &labels,
            &[
                SeriesLabelPosition::UpperRight,
                SeriesLabelPosition::UpperLeft,
            ],
        );
        // A legend that would squash the data (many probes) goes right of the plot.
        let data_top = nice_max(extent.iter().map(|p| p.1).fold(0.0, f64::max) * 1.06);
        let chars = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0) as f64;
        let outside_w = (s.px(44.0) as f64 + chars * s.px(14.0) as f64 * 0.6).ceil() as u32;
        let outside = f_top > 1.3 * data_top && (outside_w as f64) < s.width as f64 * 0.45;
        let f_top = if outside { data_top } else { f_top };
        let mut b = builder(root, s, "Bubble count rate against void fraction", 72.0);
        if outside {
            b.margin_right(s.px(20.0) + outside_w);
        }
        let mut chart = b.build_cartesian_2d(0.0..1.0f64, 0.0..f_top)?;
        mesh!(chart, s, "void fraction C (–)", "bubble count rate F (Hz)").draw()?;
        let r = s.marker();
        for (k, (p, v)) in pts.iter().enumerate() {
            let (colour, shape) = (probe_colour(*p), probe_marker(*p));
            let fmax = self.ctx.summaries[*p].fmax_hz;
            tag.begin(root, &format!("count-rate-{}", run.probes[*p].name))?;
            if let Some(fmax) = fmax {
                chart.draw_series(LineSeries::new(
                    parabola(fmax),
                    colour.mix(0.6).stroke_width(s.px(1.4)),
                ))?;
            }
            let label = labels[k].clone();
            // many windows: smaller, translucent markers so that density shows
            let dots = thin(v.clone(), MAX_POINTS);
            let (dot_r, alpha) = if dots.len() > 200 {
                (s.ipx(2.5), 0.3)
            } else {
                (r, 1.0)
            };
            chart
                .draw_series(
                    dots.into_iter()
                        .map(|pt| marker_element(pt, shape, colour.mix(alpha), dot_r, true)),
                )?
                .label(label)
                .legend(move |at| marker_element(at, shape, colour, r, true));
            tag.end(root)?;
        }
        if let Some(fmax) = self.fmax_all {
            let width = s.line() + 1;
            tag.begin(root, "count-rate-envelope-all")?;
            chart
                .draw_series(DashedLineSeries::new(
                    parabola(fmax),
                    s.px(10.0),
                    s.px(6.0),
                    FIT.stroke_width(width),
                ))?
                .label(labels[pts.len()].clone())
                .legend(move |at| legend_line(at, FIT, width, true));
            tag.end(root)?;
        }
        if !outside {
            return legend(&mut chart, s, pos);
        }
        // The keys and labels in a column right of the plot, from its top.
        let (w, _) = root.dim_in_pixel();
        let x0 = w as i32 - outside_w as i32 - s.px(6.0) as i32;
        let step = s.px(20.0) as i32;
        let y0 = chart.plotting_area().get_base_pixel().1 + step / 2;
        let text = s.legend().pos(Pos::new(HPos::Left, VPos::Center));
        for (k, label) in labels.iter().enumerate() {
            let y = y0 + k as i32 * step;
            let key = (x0 + s.px(12.0) as i32, y);
            match pts.get(k) {
                Some((p, _)) => root.draw(&marker_element(
                    key,
                    probe_marker(*p),
                    probe_colour(*p),
                    r,
                    true,
                ))?,
                None => root.draw(&legend_line(key, FIT, s.line() + 1, true))?,
            }
            root.draw(&Text::new(
                label.clone(),
                // Past the 17 px line key (style::LineKey) at any scale.
                (x0 + s.px(12.0) as i32 + s.px(24.0).max(22) as i32, y),
                text.clone(),
            ))?;
        }
        Ok(())
    }
}

/// The envelope fitted to every used window of every probe.
pub fn fmax_all(ctx: &Ctx) -> Option<f64> {
    envelope_fmax(
        (0..ctx.run.probes.len())
            .flat_map(|p| ctx.used(p))
            .filter_map(|w| Some((w.void_fraction?, w.count_rate_hz?))),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_for_labels() {
        assert_eq!(fmt_num(152.345), "152");
        assert_eq!(fmt_num(12.34), "12.3");
        assert_eq!(fmt_num(1.5), "1.5");
        assert_eq!(fmt_num(0.25), "0.25");
        assert_eq!(fmt_num(0.0), "0");
        assert_eq!(fmt_num(300.0), "300");
        assert_eq!(nice_max(0.83), 0.9);
        assert_eq!(nice_max(150.2), 160.0);
        assert_eq!(nice_max(117.0), 120.0);
        assert_eq!(nice_max(2.2), 2.5);
        assert_eq!(thin((0..10).collect::<Vec<_>>(), 4), vec![0, 3, 6, 9]);
    }
}
