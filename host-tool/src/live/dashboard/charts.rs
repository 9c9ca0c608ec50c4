//! The charts: C against elevation with the station's profile fit, Cmean against the time
//! since the front with the decay fit, and the axis and dataset helpers they share.

use super::probes::probe_rows;
use super::style::{title, ACCENT, DIM, WARN};
use crate::live::state::LiveState;
use ratatui::layout::{Constraint, Rect};
use ratatui::style::Style;
use ratatui::symbols::Marker;
use ratatui::text::Span;
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType};
use ratatui::Frame;

/// Chart points (x, y).
pub type Points = Vec<(f64, f64)>;

/// Points of a fitted curve drawn as a line.
const CURVE_POINTS: usize = 48;

/// The profile chart's data: the points (C, elevation mm) of the latest windows of the
/// shown station's probes, and the fitted curve C = 0.9 (y/Y90)^n from 0 to Y90 with
/// (Y90, n), when the station has a fit.
pub fn profile_chart_data(state: &LiveState) -> (Points, Option<(Points, f64, f64)>) {
    let shown = state.shown_station();
    let (device, station) = shown.map_or((None, None), |(k, _)| (Some(k.0), Some(k.1)));
    let points = probe_rows(state)
        .into_iter()
        .filter(|(d, p)| {
            device.is_none_or(|dev| dev == *d) && station.is_none_or(|s| s == p.station)
        })
        .filter_map(|(_, p)| Some((p.void_fraction?, p.elevation_mm)))
        .filter(|(c, y)| c.is_finite() && y.is_finite())
        .collect();
    let curve = shown.and_then(|(_, s)| {
        let p = s.profile.as_ref()?;
        let (y90, n) = (p.y90_mm?, p.exponent?);
        (y90 > 0.0 && n.is_finite()).then(|| {
            let line = (0..=CURVE_POINTS)
                .map(|i| {
                    let y = y90 * i as f64 / CURVE_POINTS as f64;
                    (0.9 * (y / y90).powf(n), y)
                })
                .collect();
            (line, y90, n)
        })
    });
    (points, curve)
}

pub(super) fn axis_labels(lo: f64, hi: f64, prec: usize) -> Vec<Span<'static>> {
    let mid = (lo + hi) / 2.0;
    [lo, mid, hi]
        .iter()
        .map(|v| Span::styled(format!("{v:.prec$}"), Style::default().fg(DIM)))
        .collect()
}

pub(super) fn draw_profile_chart(f: &mut Frame, area: Rect, state: &LiveState) {
    let (points, curve) = profile_chart_data(state);
    let ymax = points
        .iter()
        .map(|p| p.1)
        .chain(curve.as_ref().map(|c| c.1))
        .fold(1.0f64, f64::max)
        * 1.05;
    let head = match (&curve, state.shown_station()) {
        (Some((_, y90, n)), Some((k, s))) => {
            let p = s.profile.as_ref();
            let read = match p.and_then(|p| p.estimate) {
                Some("trapezoid") => " bad fit",
                Some("exponential") => " exp",
                _ => "",
            };
            format!(
                " C vs y S{} Y90 {y90:.1}{} n {n:.2}{}{read} ",
                k.1 + 1,
                plus_minus(p.and_then(|p| p.y90_se_mm), 1),
                plus_minus(p.and_then(|p| p.exponent_se), 2),
            )
        }
        (None, Some((k, _))) => format!(" C vs y S{}: no fit yet ", k.1 + 1),
        _ => " C vs elevation ".to_string(),
    };
    let chart = Chart::new(fit_and_points(
        curve.as_ref().map(|c| c.0.as_slice()),
        "C",
        &points,
    ))
    .block(Block::default().borders(Borders::ALL).title(title(&head)))
    .x_axis(
        Axis::default()
            .title(Span::styled("C", Style::default().fg(DIM)))
            .bounds([0.0, 1.0])
            .labels(axis_labels(0.0, 1.0, 1)),
    )
    .y_axis(
        Axis::default()
            .title(Span::styled("y mm", Style::default().fg(DIM)))
            .bounds([0.0, ymax])
            .labels(axis_labels(0.0, ymax, 0)),
    )
    .hidden_legend_constraints((Constraint::Ratio(0, 1), Constraint::Ratio(0, 1)));
    f.render_widget(chart, area);
}

/// The decay chart's data for the shown station: the points (time since the front s,
/// Cmean) and, when the host's fit has a model, its curve with (C0, Cf, tau s).
pub fn decay_chart_data(state: &LiveState) -> (Points, Option<(Points, f64, f64, f64)>) {
    let Some((_, s)) = state.shown_station() else {
        return (Vec::new(), None);
    };
    let points: Vec<(f64, f64)> = s
        .series
        .points()
        .map(|(t, c)| (t as f64, c as f64))
        .collect();
    let tmax = points.iter().map(|p| p.0).fold(0.0f64, f64::max);
    let curve = s.decay.and_then(|d| d.model).map(|m| {
        let (c0, cf, tau) = (m.initial as f64, m.final_level as f64, m.tau_s as f64);
        let line = (0..=CURVE_POINTS)
            .map(|i| {
                let t = tmax * i as f64 / CURVE_POINTS as f64;
                (t, cf + (c0 - cf) * (-t / tau.max(1e-9)).exp())
            })
            .collect();
        (line, c0, cf, tau)
    });
    (points, curve)
}

/// `±e` with `prec` decimals, or nothing.
fn plus_minus(se: Option<f64>, prec: usize) -> String {
    se.map_or(String::new(), |e| format!("±{e:.prec$}"))
}

pub(super) fn draw_decay(f: &mut Frame, area: Rect, state: &LiveState) {
    let (points, curve) = decay_chart_data(state);
    let tmax = points.iter().map(|p| p.0).fold(0.05f64, f64::max);
    // The latest slice's Cmean with its standard error.
    let latest = state
        .shown_station()
        .and_then(|(_, s)| s.profile.as_ref())
        .and_then(|p| {
            let c = p.mean_void_fraction?;
            Some(format!(" {c:.3}{}", plus_minus(p.mean_void_fraction_se, 3)))
        })
        .unwrap_or_default();
    // The fit in the title, the latest slice's Cmean on the y axis: both stay whole in a
    // third of an 80-column screen.
    let head = match &curve {
        Some((_, c0, cf, tau)) => format!(" Cmean fit: C0 {c0:.2} Cf {cf:.2} tau {tau:.2} s "),
        None => format!(" Cmean vs t-front: {} pts, no fit ", points.len()),
    };
    let chart = Chart::new(fit_and_points(
        curve.as_ref().map(|c| c.0.as_slice()),
        "Cmean",
        &points,
    ))
    .block(Block::default().borders(Borders::ALL).title(title(&head)))
    .x_axis(
        Axis::default()
            .title(Span::styled("t s", Style::default().fg(DIM)))
            .bounds([0.0, tmax])
            .labels(axis_labels(0.0, tmax, 2)),
    )
    .y_axis(
        Axis::default()
            .title(Span::styled(
                format!("Cmean{latest}"),
                Style::default().fg(DIM),
            ))
            .bounds([0.0, 1.0])
            .labels(axis_labels(0.0, 1.0, 1)),
    )
    .hidden_legend_constraints((Constraint::Ratio(0, 1), Constraint::Ratio(0, 1)));
    f.render_widget(chart, area);
}

/// A fitted curve (drawn first) and the measured points over it.
fn fit_and_points<'a>(
    fit: Option<&'a [(f64, f64)]>,
    points_name: &'static str,
    points: &'a [(f64, f64)],
) -> Vec<Dataset<'a>> {
    let mut sets = Vec::new();
    if let Some(line) = fit {
        sets.push(
            Dataset::default()
                .name("fit")
                .marker(Marker::Braille)
                .graph_type(GraphType::Line)
                .style(Style::default().fg(ACCENT))
                .data(line),
        );
    }
    sets.push(
        Dataset::default()
            .name(points_name)
            .marker(Marker::Dot)
            .graph_type(GraphType::Scatter)
            .style(Style::default().fg(WARN))
            .data(points),
    );
    sets
}
