//! Bubble count rate against void fraction, with parabolic envelopes.

use super::super::render::{DrawError, Figure, Tagger};
use super::super::style::{
    legend_line, marker_element, probe_colour, probe_marker, Sizes, FIT, GRID, MUTED,
};
use super::chart::{builder, fmt_num, legend, mesh, nice_max, place_legend, thin, tick};
use super::ctx::{Ctx, MAX_POINTS};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

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
