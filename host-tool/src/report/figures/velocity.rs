//! Interfacial velocity and turbulence intensity against elevation.

use super::super::input::Window;
use super::super::render::{DrawError, Figure, Tagger};
use super::super::style::{marker_element, probe_colour, probe_marker, Sizes, GRID, MUTED};
use super::chart::{builder, legend, mesh, nice_max, thin, tick};
use super::ctx::{Ctx, MAX_POINTS};
use plotters::coord::Shift;
use plotters::prelude::*;

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
