//! The report's chart style shared by every figure: number and tick labels, round axis
//! ends, legend placement, marker thinning, the chart builder and the mesh.

use super::super::render::DrawError;
use super::super::style::{Sizes, GRID};
use plotters::coord::Shift;
use plotters::prelude::*;

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
pub(super) fn nice_max(v: f64) -> f64 {
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
pub(super) fn tick(v: &f64) -> String {
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
pub(super) fn place_legend(
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
pub(super) type Points = Vec<(f64, f64)>;

/// Keep at most `max` items, evenly spaced.
pub(super) fn thin<T>(v: Vec<T>, max: usize) -> Vec<T> {
    if v.len() <= max {
        return v;
    }
    let stride = v.len().div_ceil(max);
    v.into_iter().step_by(stride).collect()
}

/// A chart builder in the report's style.
pub(super) fn builder<'a, 'b, DB: DrawingBackend>(
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
pub(super) use mesh;

pub(super) fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
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
