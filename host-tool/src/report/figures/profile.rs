//! Void fraction against elevation: power-law fits at chosen slices or whole-record
//! means per probe.

use super::super::input::Slice;
use super::super::render::{DrawError, Figure, Tagger};
use super::super::stats::{power_law_curve, slice_void_fraction, slice_void_fraction_spread};
use super::super::style::{
    legend_line, marker_element, probe_colour, probe_marker, time_colour, Marker, Sizes, GRID,
    MUTED,
};
use super::chart::{builder, fmt_num, legend, mesh, place_legend, tick, Points};
use super::ctx::Ctx;
use plotters::coord::Shift;
use plotters::prelude::*;

/// (probe, C, drawn elevation, 10th and 90th percentiles of the window C).
type SteadyRow = (usize, f64, f64, Option<(f64, f64)>);

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
