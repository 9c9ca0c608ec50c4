//! Bubble chords per probe: pooled histograms of chord times or chord lengths on a
//! logarithmic axis, or chord-time percentile bars.

use super::super::render::{DrawError, Figure, Tagger};
use super::super::stats::{
    chord_histogram, chord_length_histogram, histogram_quantile, ProbeSummary,
};
use super::super::style::{
    legend_line, marker_element, probe_colour, Marker, Sizes, GRID, INK, MUTED,
};
use super::chart::{builder, fmt_num, legend, mesh, place_legend, tick};
use super::ctx::Ctx;
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Which chord figure.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ChordQuantity {
    /// Chord times: pooled histograms (chords.csv), else percentile bars from the windows.
    Times {
        /// True: histograms from chords.csv; false: bars from the window statistics.
        histograms: bool,
    },
    /// Chord lengths per elevation: pooled histograms (chord_lengths.csv).
    Lengths,
}

/// Bubble chords per probe.
pub struct ChordFigure<'r> {
    /// Data.
    pub ctx: Ctx<'r>,
    /// What is drawn.
    pub quantity: ChordQuantity,
}

impl Figure for ChordFigure<'_> {
    fn stem(&self) -> &'static str {
        match self.quantity {
            ChordQuantity::Times { .. } => "chord_times",
            ChordQuantity::Lengths => "chord_lengths",
        }
    }

    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        s: &Sizes,
        tag: &Tagger,
    ) -> Result<(), DrawError> {
        match self.quantity {
            ChordQuantity::Times { histograms: false } => self.draw_bars(root, s, tag),
            _ => self.draw_histograms(root, s, tag),
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
        let lengths = self.quantity == ChordQuantity::Lengths;
        // drawn unit per file unit: ms per s for times, mm as they are for lengths
        let (scale, unit) = if lengths { (1.0, "mm") } else { (1e3, "ms") };
        let source = if lengths {
            &run.chord_lengths
        } else {
            &run.chords
        };
        // Lengths: one line per elevation, bottom to top.
        let mut order: Vec<usize> = (0..run.probes.len()).collect();
        if lengths {
            order.sort_by(|&a, &b| {
                let y = |p: usize| run.probes[p].elevation_mm.unwrap_or(f64::INFINITY);
                y(a).total_cmp(&y(b))
            });
        }
        // leading and trailing empty bins are left out: they would only draw along the axis
        let hists: Vec<(usize, Vec<Bin>)> = order
            .into_iter()
            .map(|p| {
                let bins = if lengths {
                    chord_length_histogram(run, p)
                } else {
                    chord_histogram(run, p)
                };
                let first = bins.iter().position(|b| b.2 > 0.0).unwrap_or(bins.len());
                let last = bins.iter().rposition(|b| b.2 > 0.0).map_or(0, |i| i + 1);
                (p, bins[first..last.max(first)].to_vec())
            })
            .filter(|h| !h.1.is_empty())
            .collect();
        let nonzero = hists.iter().flat_map(|h| h.1.iter()).filter(|b| b.2 > 0.0);
        let lo = nonzero.clone().map(|b| b.0).fold(f64::INFINITY, f64::min) * scale;
        let hi = nonzero.map(|b| b.1).fold(0.0, f64::max) * scale;
        let (lo, hi) = (lo / 1.5, hi * 1.5);
        let (lo, hi) = if lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo {
            (lo, hi)
        } else {
            (0.1, 100.0)
        };
        let frac = |v: f64| (v / lo).ln() / (hi / lo).ln();
        let labels: Vec<String> = hists
            .iter()
            .map(|(p, bins)| {
                let n: f64 = source
                    .iter()
                    .filter(|b| b.probe == *p)
                    .map(|b| b.count)
                    .sum();
                let name = match (lengths, run.probes[*p].elevation_mm) {
                    (true, Some(y)) => {
                        let probe = &run.probes[*p];
                        match (self.ctx.several_x(), probe.x_mm) {
                            (true, Some(x)) => format!(
                                "{} (x = {} mm, y = {} mm)",
                                probe.name,
                                fmt_num(x),
                                fmt_num(y)
                            ),
                            _ => format!("{} (y = {} mm)", probe.name, fmt_num(y)),
                        }
                    }
                    _ => self.ctx.probe_label(*p),
                };
                let median = if lengths {
                    histogram_quantile(bins, 0.5)
                } else {
                    self.ctx.summaries[*p].chord_median_s
                };
                match median {
                    Some(m) => format!(
                        "{name}: median {} {unit}, {} bubbles",
                        fmt_num(m * scale),
                        fmt_num(n.round())
                    ),
                    None => name,
                }
            })
            .collect();
        let extent: Vec<(f64, f64)> = hists
            .iter()
            .flat_map(|h| h.1.iter())
            .flat_map(|&(l, u, f)| [(frac(l * scale), f), (frac(u * scale), f)])
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
        let (what, x_label) = if lengths {
            (
                "Bubble chord lengths per elevation",
                "bubble chord length (mm, logarithmic)",
            )
        } else {
            ("Bubble chord times", "bubble chord time (ms, logarithmic)")
        };
        let when = if run.is_transient() {
            "after the front"
        } else {
            "over the run"
        };
        let title = format!("{what}, pooled {when}");
        let mut chart =
            builder(root, s, &title, 72.0).build_cartesian_2d((lo..hi).log_scale(), 0.0..f_top)?;
        mesh!(chart, s, x_label, "fraction of bubbles per bin (–)")
            .disable_x_mesh()
            .x_labels(0)
            .x_label_formatter(&no_label)
            .set_tick_mark_size(LabelAreaPosition::Bottom, 0)
            .draw()?;
        log_x_axis(&mut chart, root, s, (lo, hi), (0.0, f_top))?;
        let width = s.line();
        let tag_stem = if lengths { "chord-lengths" } else { "chords" };
        for (k, (p, bins)) in hists.iter().enumerate() {
            let colour = probe_colour(*p);
            let mut path = vec![(bins[0].0 * scale, 0.0)];
            let mut last_upper = bins[0].0;
            for &(l, u, f) in bins {
                // a run of empty bins (not in the file) drops to zero between its neighbours
                if l > last_upper * (1.0 + 1e-9) {
                    path.push((last_upper * scale, 0.0));
                    path.push((l * scale, 0.0));
                }
                path.push((l * scale, f));
                path.push((u * scale, f));
                last_upper = u;
            }
            path.push((bins[bins.len() - 1].1 * scale, 0.0));
            let label = labels[k].clone();
            tag.begin(root, &format!("{tag_stem}-{}", run.probes[*p].name))?;
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
