//! Depth-averaged void fraction against time since the front, per station, with the
//! fitted exponential decay.

use super::super::render::{DrawError, Figure, Tagger};
use super::super::stats::DecayFit;
use super::super::style::{
    legend_line, marker_element, station_colour, Marker, Sizes, GRID, MUTED,
};
use super::chart::{builder, fmt_num, legend, mesh, nice_max, place_legend, tick};
use plotters::coord::Shift;
use plotters::prelude::*;

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
