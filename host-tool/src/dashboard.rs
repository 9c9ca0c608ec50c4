//! The live terminal dashboard (ratatui), drawn from a [`LiveState`]:
//!
//! ```text
//! links and devices   status (UP / DOWN / OPENING / QUIET), frames/s, bytes/s and share of
//!                     the link, age of the last frame, lost frames, CRC failures; per device
//!                     firmware, sample rate, window, run, device-reported health
//! probes (top first)  y, C, F, V, Tu, median chord, correlation peak, bubbles, flags
//! C profile           a bar per probe at its elevation (the rows keep the elevation order);
//!                     in a transient flow, a chart of C against elevation of the latest
//!                     windows with the station's latest fit C = 0.9 (y/Y90)^n
//! events | windows    command replies, link events, gaps; one line per analysis window;
//!                     once a front arrived, between them Cmean against the time since the
//!                     front with the host's decay fit C(t) = Cf + (C0 - Cf) exp(-t/tau)
//! keys, safety line
//! ```

use crate::live::{LinkHealth, LiveState, ProbeRow};
use frothline_core::Flags;
use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{
    Axis, Block, Borders, Cell, Chart, Dataset, GraphType, Paragraph, Row, Table,
};
use ratatui::Frame;
use std::time::Instant;

/// The one-line safety reminder shown under the dashboard.
pub const SAFETY_LINE: &str =
    "Near fast water: work in pairs, isolated (SELV) supplies behind RCDs; follow site rules and local codes.";

const ACCENT: Color = Color::Cyan;
const WARN: Color = Color::Yellow;
const BAD: Color = Color::Red;
const GOOD: Color = Color::Green;
const DIM: Color = Color::DarkGray;

fn num(v: Option<f64>, width: usize, prec: usize) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v:>width$.prec$}"),
        _ => format!("{:>width$}", "-"),
    }
}

fn title(s: &str) -> Span<'_> {
    Span::styled(s, Style::default().fg(ACCENT).add_modifier(Modifier::BOLD))
}

/// Short words for the flags, for the probe table (the CSV files carry the full names).
pub fn short_flag(name: &str) -> &str {
    match name {
        "stuck" => "stuck",
        "levels_not_learnt" => "learning",
        "saturated" => "saturated",
        "short_chords" => "short-chords",
        "partial_window" => "partial",
        "trailing_stuck" => "trail-stuck",
        "no_correlation_peak" => "no-peak",
        "peak_at_lag_boundary" => "lag-edge",
        "few_bubbles" => "few-bubbles",
        "tu_undefined" => "no-Tu",
        "correlation_overflow" => "overflow",
        other => other,
    }
}

fn flag_words(f: Flags) -> String {
    let v: Vec<&str> = f.names().map(short_flag).collect();
    if v.is_empty() {
        "ok".into()
    } else {
        v.join(" ")
    }
}

fn bytes_text(b: f64) -> String {
    if b >= 1e6 {
        format!("{:.2} MB", b / 1e6)
    } else if b >= 1e3 {
        format!("{:.2} kB", b / 1e3)
    } else {
        format!("{b:.0} B")
    }
}

/// Draw the whole dashboard.
pub fn draw(f: &mut Frame, state: &LiveState, now: Instant) {
    let area = f.area();
    let head = (2 + 2 * state.links.len() + 2 * state.devices.len()).clamp(4, 14) as u16;
    let front = state
        .shown_station()
        .is_some_and(|(_, s)| s.front_s.is_some());
    let rows = Layout::default()
        .direction(Direction::Vertical)
        .constraints([
            Constraint::Length(head),
            Constraint::Min(7),
            Constraint::Length(if front { 13 } else { 9 }),
            Constraint::Length(1),
            Constraint::Length(1),
        ])
        .split(area);
    draw_links(f, rows[0], state, now);
    let profile_w = (area.width / 3).clamp(28, 44);
    let mid = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Min(40), Constraint::Length(profile_w)])
        .split(rows[1]);
    draw_probes(f, mid[0], state);
    if state.stations.is_empty() {
        draw_profile(f, mid[1], state);
    } else {
        draw_profile_chart(f, mid[1], state);
    }
    if front {
        let bottom = Layout::default()
            .direction(Direction::Horizontal)
            .constraints([
                Constraint::Percentage(30),
                Constraint::Percentage(36),
                Constraint::Percentage(34),
            ])
            .split(rows[2]);
        draw_history(f, bottom[0], state);
        draw_decay(f, bottom[1], state);
        draw_recent(f, bottom[2], state);
    } else {
        let bottom = Layout::default()
            .direction(Direction::Horizontal)
            .constraints([Constraint::Percentage(58), Constraint::Percentage(42)])
            .split(rows[2]);
        draw_history(f, bottom[0], state);
        draw_recent(f, bottom[1], state);
    }
    let keys = if state.keys_help.is_empty() {
        String::new()
    } else {
        format!(" keys: {}", state.keys_help)
    };
    f.render_widget(
        Paragraph::new(Line::from(Span::styled(keys, Style::default().fg(ACCENT)))),
        rows[3],
    );
    f.render_widget(
        Paragraph::new(Line::from(Span::styled(
            format!(" {SAFETY_LINE}"),
            Style::default().fg(DIM),
        ))),
        rows[4],
    );
}

fn link_status(l: &LinkHealth, now: Instant) -> Span<'static> {
    let bold = Modifier::BOLD;
    if !l.ever_opened {
        Span::styled("OPENING", Style::default().fg(WARN).add_modifier(bold))
    } else if !l.connected {
        Span::styled("DOWN   ", Style::default().fg(BAD).add_modifier(bold))
    } else if l
        .age_s(now)
        .is_none_or(|a| a > crate::live::QUIET_AFTER.as_secs_f64())
    {
        Span::styled("QUIET  ", Style::default().fg(WARN).add_modifier(bold))
    } else {
        Span::styled("UP     ", Style::default().fg(GOOD).add_modifier(bold))
    }
}

fn draw_links(f: &mut Frame, area: Rect, state: &LiveState, now: Instant) {
    let mut lines = Vec::new();
    let name_w = state
        .links
        .iter()
        .map(|l| l.port.chars().count())
        .max()
        .unwrap_or(4);
    for l in &state.links {
        let age = match l.age_s(now) {
            Some(a) => format!("last frame {a:>5.1} s ago"),
            None => "no frame yet".to_string(),
        };
        let mut first = vec![
            Span::styled(
                format!("{:<name_w$}  ", l.port),
                Style::default().add_modifier(Modifier::BOLD),
            ),
            link_status(l, now),
        ];
        if l.ever_opened && !l.connected {
            first.push(Span::styled(
                format!(" port lost, reopening every second  {age}"),
                Style::default().fg(BAD),
            ));
        } else {
            let load = l.load(now).map_or(String::new(), |x| {
                format!(" ({:>4.1} % of {} Bd)", x * 100.0, l.baud)
            });
            first.push(Span::raw(format!(
                " {:>6.1} frames/s  {:>9}/s{load}  {age}",
                l.frames_per_s(now),
                bytes_text(l.bytes_per_s(now)),
            )));
        }
        lines.push(Line::from(first));
        let trouble = l.lost + l.crc_failures + l.malformed > 0;
        let style = if trouble {
            Style::default().fg(WARN)
        } else {
            Style::default().fg(DIM)
        };
        lines.push(Line::from(Span::styled(
            format!(
                "{:<name_w$}  frames {}  lost {}  CRC failures {}  malformed {}  discarded {}  link drops {}",
                "",
                l.frames,
                l.lost,
                l.crc_failures,
                l.malformed,
                bytes_text(l.bytes_discarded as f64),
                l.reconnects
            ),
            style,
        )));
    }
    for (id, d) in &state.devices {
        let port = state.links.get(d.port).map_or("?", |l| l.port.as_str());
        let run = match (d.running, &d.run_label) {
            (Some(true), Some(l)) => format!("run \"{l}\" running"),
            (Some(true), None) => "run running".into(),
            (Some(false), _) => "run stopped".into(),
            (None, _) => "run state not known".into(),
        };
        lines.push(Line::from(vec![
            Span::styled(
                format!("device {id}"),
                Style::default().fg(ACCENT).add_modifier(Modifier::BOLD),
            ),
            Span::raw(format!(
                " on {port}: firmware {}, {} Hz, window {}, {run}",
                if d.firmware.is_empty() {
                    "?"
                } else {
                    &d.firmware
                },
                d.sample_rate_hz,
                if d.window.is_empty() { "?" } else { &d.window },
            )),
        ]));
        let h = &d.health;
        let uptime = if d.sample_rate_hz > 0 {
            format!("{:.1} s", h.uptime_frames as f64 / d.sample_rate_hz as f64)
        } else {
            "?".into()
        };
        let bad = h.samples_dropped + h.frames_dropped > 0 || h.tips_stuck > 0;
        let text = match d.health_at {
            None => "  health: no report yet".to_string(),
            Some(_) => format!(
                "  health: dropped {} samples, {} frames  saturated {}  stuck tips {}  buffer peak {} samples  uptime {uptime}",
                h.samples_dropped, h.frames_dropped, h.saturated, h.tips_stuck, h.buffer_high_water
            ),
        };
        lines.push(Line::from(Span::styled(
            text,
            if bad {
                Style::default().fg(WARN)
            } else {
                Style::default().fg(DIM)
            },
        )));
    }
    let p = Paragraph::new(lines).block(
        Block::default()
            .borders(Borders::ALL)
            .title(title(" links and devices ")),
    );
    f.render_widget(p, area);
}

/// Probe rows of every device, highest first.
pub fn probe_rows(state: &LiveState) -> Vec<(u32, &ProbeRow)> {
    let mut v: Vec<(u32, &ProbeRow)> = state
        .devices
        .iter()
        .flat_map(|(id, d)| d.probes.iter().map(move |p| (*id, p)))
        .collect();
    v.sort_by(|a, b| b.1.elevation_mm.total_cmp(&a.1.elevation_mm));
    v
}

/// Columns of the probe table: header, width, and right alignment.
const PROBE_COLUMNS: [(&str, u16, bool); 10] = [
    ("probe", 10, false),
    ("y [mm]", 6, true),
    ("C [-]", 6, true),
    ("F [Hz]", 7, true),
    ("V [m/s]", 7, true),
    ("Tu [-]", 6, true),
    ("chord [ms]", 10, true),
    ("R peak", 6, true),
    ("bubbles", 7, true),
    ("flags", 8, false),
];

fn fit(s: String, w: u16, right: bool) -> String {
    let w = w as usize;
    let s: String = s.chars().take(w).collect();
    if right {
        format!("{s:>w$}")
    } else {
        format!("{s:<w$}")
    }
}

/// Which probe columns fit in `width` cells: the less important ones go first (bubbles,
/// correlation peak, chord, Tu, ...), so a narrow terminal loses columns instead of cutting
/// numbers. Column indices into `PROBE_COLUMNS`, in order.
pub fn probe_columns_that_fit(width: u16) -> Vec<usize> {
    // Lower keeps longer; the flags column (last) takes the rest of the width.
    const KEEP: [u8; 10] = [0, 0, 0, 1, 2, 4, 5, 6, 7, 3];
    let mut cols: Vec<usize> = (0..PROBE_COLUMNS.len()).collect();
    let need =
        |cols: &[usize]| -> u16 { cols.iter().map(|&i| PROBE_COLUMNS[i].1 + 1).sum::<u16>() };
    while need(&cols) > width + 1 && cols.len() > 3 {
        let drop = cols
            .iter()
            .enumerate()
            .max_by_key(|(_, &i)| (KEEP[i], i))
            .map(|(k, _)| k)
            .unwrap_or(0);
        cols.remove(drop);
    }
    cols
}

fn draw_probes(f: &mut Frame, area: Rect, state: &LiveState) {
    let cols = probe_columns_that_fit(area.width.saturating_sub(2));
    let last = PROBE_COLUMNS.len() - 1;
    let header = Row::new(cols.iter().map(|&i| {
        let (h, w, r) = PROBE_COLUMNS[i];
        Cell::from(fit(h.to_string(), w, r))
    }))
    .style(Style::default().fg(ACCENT).add_modifier(Modifier::BOLD));
    let multi = state.devices.len() > 1;
    let rows: Vec<Row> = probe_rows(state)
        .into_iter()
        .map(|(id, p)| {
            let style = if p.flags.is_empty() {
                Style::default().fg(GOOD)
            } else {
                Style::default().fg(WARN)
            };
            let name = if multi && !p.name.starts_with('d') {
                format!("{id}:{}", p.name)
            } else {
                p.name.clone()
            };
            let v = [
                name,
                num(Some(p.elevation_mm), 6, 1),
                num(p.void_fraction, 6, 3),
                num(p.bubble_rate_hz, 7, 1),
                num(p.velocity_m_s, 7, 2),
                num(p.turbulence_intensity, 6, 2),
                num(p.chord_median_s.map(|s| s * 1e3), 10, 3),
                num(p.correlation_peak, 6, 2),
                if p.windows > 0 {
                    format!("{:>7}", p.bubbles)
                } else {
                    format!("{:>7}", "-")
                },
            ];
            let cells: Vec<Cell> = cols
                .iter()
                .map(|&i| {
                    if i == last {
                        Cell::from(Span::styled(
                            if p.windows > 0 {
                                flag_words(p.flags)
                            } else {
                                "waiting".into()
                            },
                            style,
                        ))
                    } else {
                        let (_, w, r) = PROBE_COLUMNS[i];
                        Cell::from(fit(v[i].clone(), w, r))
                    }
                })
                .collect();
            Row::new(cells)
        })
        .collect();
    let widths: Vec<Constraint> = cols
        .iter()
        .map(|&i| {
            let w = PROBE_COLUMNS[i].1;
            if i == last {
                Constraint::Min(w)
            } else {
                Constraint::Length(w)
            }
        })
        .collect();
    let t = Table::new(rows, widths)
        .header(header)
        .column_spacing(1)
        .block(
            Block::default()
                .borders(Borders::ALL)
                .title(title(if area.width >= 74 {
                    " probes: latest window, highest first (chord = median bubble chord) "
                } else {
                    " probes: latest window, highest first "
                })),
        );
    f.render_widget(t, area);
}

/// Eighths of a block for bar ends.
const EIGHTHS: [&str; 8] = ["", "▏", "▎", "▍", "▌", "▋", "▊", "▉"];

fn bar(c: f64, width: usize) -> String {
    let c = c.clamp(0.0, 1.0);
    let eighths = (c * width as f64 * 8.0).round() as usize;
    let mut s = "█".repeat(eighths / 8);
    s.push_str(EIGHTHS[eighths % 8]);
    s
}

/// The profile panel's lines for an inner area of `width` x `height`: one bar of C per
/// probe at the row of its elevation (highest at the top), the elevation as the row label,
/// and a C axis from 0 to 1 at the bottom.
pub fn profile_lines(state: &LiveState, width: usize, height: usize) -> Vec<Line<'static>> {
    let probes: Vec<(f64, Option<f64>)> = probe_rows(state)
        .into_iter()
        .filter(|(_, p)| p.elevation_mm.is_finite())
        .map(|(_, p)| (p.elevation_mm, p.void_fraction))
        .collect();
    let label_w = 7;
    let value_w = 6;
    let bar_w = width.saturating_sub(label_w + value_w + 1).max(4);
    let plot_rows = height.saturating_sub(2).max(1);
    let mut grid: Vec<Option<(f64, Option<f64>)>> = vec![None; plot_rows];
    let ymax = probes.iter().map(|p| p.0).fold(0.0f64, f64::max);
    let ymin = probes.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    for &(y, c) in &probes {
        let span = (ymax - ymin.min(0.0)).max(1e-9);
        let want = (((ymax - y) / span) * (plot_rows - 1) as f64).round() as usize;
        let want = want.min(plot_rows - 1);
        // Next free row downwards, else upwards (two probes at one elevation).
        let row = (want..plot_rows)
            .chain((0..want).rev())
            .find(|&r| grid[r].is_none());
        if let Some(r) = row {
            grid[r] = Some((y, c));
        }
    }
    let mut lines = Vec::new();
    for cell in grid {
        match cell {
            Some((y, c)) => lines.push(Line::from(vec![
                Span::raw(format!("{y:>5.1} ┤")),
                Span::styled(
                    format!("{:<bar_w$}", c.map_or(String::new(), |c| bar(c, bar_w))),
                    Style::default().fg(ACCENT),
                ),
                Span::raw(format!(" {}", num(c, value_w - 1, 2))),
            ])),
            None => lines.push(Line::raw(format!("{:>5} │", ""))),
        }
    }
    let mut axis = "─".repeat(bar_w);
    let mid = bar_w / 2;
    axis.replace_range(
        axis.char_indices().nth(mid).map_or(0, |(i, _)| i)
            ..axis
                .char_indices()
                .nth(mid + 1)
                .map_or(axis.len(), |(i, _)| i),
        "┬",
    );
    lines.push(Line::raw(format!("{:>5} └{axis}┤", "mm")));
    let mut labels = format!("{:>6}0", "");
    labels.push_str(&" ".repeat(mid.saturating_sub(1)));
    labels.push_str("0.5");
    labels.push_str(&" ".repeat(bar_w.saturating_sub(mid + 2)));
    labels.push_str("1 C");
    lines.push(Line::raw(labels));
    lines
}

fn draw_profile(f: &mut Frame, area: Rect, state: &LiveState) {
    let inner_w = area.width.saturating_sub(2) as usize;
    let inner_h = area.height.saturating_sub(2) as usize;
    let p = Paragraph::new(profile_lines(state, inner_w, inner_h)).block(
        Block::default()
            .borders(Borders::ALL)
            .title(title(" void fraction C vs elevation ")),
    );
    f.render_widget(p, area);
}

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

fn axis_labels(lo: f64, hi: f64, prec: usize) -> Vec<Span<'static>> {
    let mid = (lo + hi) / 2.0;
    [lo, mid, hi]
        .iter()
        .map(|v| Span::styled(format!("{v:.prec$}"), Style::default().fg(DIM)))
        .collect()
}

fn draw_profile_chart(f: &mut Frame, area: Rect, state: &LiveState) {
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
                " C vs y, S{}: Y90 {y90:.1}{} mm  n {n:.2}{}{read} ",
                k.1 + 1,
                plus_minus(p.and_then(|p| p.y90_se_mm), 1),
                plus_minus(p.and_then(|p| p.exponent_se), 2),
            )
        }
        (None, Some((k, _))) => format!(" C vs y, S{}: no fit yet ", k.1 + 1),
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

fn draw_decay(f: &mut Frame, area: Rect, state: &LiveState) {
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
    let head = match &curve {
        Some((_, c0, cf, tau)) => {
            format!(" Cmean{latest}: C0 {c0:.2} Cf {cf:.2} tau {tau:.3} s ")
        }
        None => format!(" Cmean{latest} vs t-front: {} pts, no fit ", points.len()),
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
            .bounds([0.0, 1.0])
            .labels(axis_labels(0.0, 1.0, 1)),
    )
    .hidden_legend_constraints((Constraint::Ratio(0, 1), Constraint::Ratio(0, 1)));
    f.render_widget(chart, area);
}

fn draw_history(f: &mut Frame, area: Rect, state: &LiveState) {
    let n = area.height.saturating_sub(2) as usize;
    let lines: Vec<Line> = state
        .history
        .iter()
        .rev()
        .take(n)
        .rev()
        .map(|l| {
            let style = if l.contains("DOWN") || l.contains("NACK") || l.contains("lost") {
                Style::default().fg(WARN)
            } else {
                Style::default()
            };
            Line::from(Span::styled(l.clone(), style))
        })
        .collect();
    let p = Paragraph::new(lines).block(
        Block::default()
            .borders(Borders::ALL)
            .title(title(" events (host time since start) ")),
    );
    f.render_widget(p, area);
}

fn draw_recent(f: &mut Frame, area: Rect, state: &LiveState) {
    let n = area.height.saturating_sub(3) as usize;
    let multi = state.devices.len() > 1;
    // Column heads: the probe names of the device of the newest window.
    let names: Vec<String> = state
        .recent
        .back()
        .and_then(|r| state.devices.get(&r.device))
        .map(|d| d.probes.iter().map(|p| p.name.clone()).collect())
        .unwrap_or_default();
    let mut head = format!("{:>9}", "end [s]");
    if multi {
        head.push_str(&format!(" {:>5}", "dev"));
    }
    for name in &names {
        let short: String = name
            .chars()
            .rev()
            .take(6)
            .collect::<Vec<_>>()
            .into_iter()
            .rev()
            .collect();
        head.push_str(&format!(" {short:>6}"));
    }
    let mut lines = vec![Line::from(Span::styled(
        head,
        Style::default().fg(ACCENT).add_modifier(Modifier::BOLD),
    ))];
    for r in state.recent.iter().rev().take(n).rev() {
        let mut s = format!("{:>9.2}", r.end_s);
        if multi {
            s.push_str(&format!(" {:>5}", r.device));
        }
        for c in &r.void_fraction {
            s.push_str(&format!(" {}", num(*c, 6, 3)));
        }
        let style = if r.flags.is_empty() {
            Style::default()
        } else {
            Style::default().fg(DIM)
        };
        lines.push(Line::from(Span::styled(s, style)));
    }
    let p = Paragraph::new(lines).block(
        Block::default()
            .borders(Borders::ALL)
            .title(title(" recent windows: C per probe ")),
    );
    f.render_widget(p, area);
}

/// The dashboard of `state` as text lines, `width` x `height` (for tests and snapshots).
pub fn render_text(state: &LiveState, now: Instant, width: u16, height: u16) -> Vec<String> {
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;
    let mut term = match Terminal::new(TestBackend::new(width, height)) {
        Ok(t) => t,
        Err(e) => match e {},
    };
    if term.draw(|f| draw(f, state, now)).is_err() {
        return Vec::new();
    }
    let buf = term.backend().buffer();
    (0..buf.area.height)
        .map(|y| {
            (0..buf.area.width)
                .map(|x| buf[(x, y)].symbol().to_string())
                .collect::<String>()
        })
        .collect()
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::session::Event;
    use frothline_core::wire::{
        Ack, ChordTimes, Correlation, DeviceDescription, Health, Kind, ProbeLayout, TrailingTip,
        WindowResult, WindowSetting,
    };
    use std::time::Duration;

    fn state(now: Instant) -> LiveState {
        let ports = vec!["/dev/ttyUSB0".to_string()];
        let mut s = LiveState::new(&ports);
        s.started = Some(now - Duration::from_secs(12));
        s.keys_help = "q quit  s start run  e end run  r relearn  d describe".into();
        s.links[0].baud = 115_200;
        let names = ["B2-1", "B2-2", "B2-3", "B2-4"];
        let name = |_: u16, i: usize| names[i].to_string();
        s.apply(&Event::LinkUp { port: 0 }, now, &name);
        let mut desc = DeviceDescription {
            firmware: Default::default(),
            sample_rate_millihz: 20_000_000,
            channels: 8,
            window: WindowSetting::Frames(2000),
            probes: Default::default(),
        };
        let _ = desc.firmware.push_str("sim-0.1.0");
        for (i, y) in [80, 250, 450, 650].into_iter().enumerate() {
            let _ = desc.probes.push(ProbeLayout {
                station: 0,
                leading: 2 * i as u8,
                trailing: Some(TrailingTip {
                    channel: 2 * i as u8 + 1,
                    spacing: 600,
                }),
                elevation: y,
                x: 0,
            });
        }
        s.apply(
            &Event::Describe {
                port: 0,
                device: 7,
                desc,
            },
            now,
            &name,
        );
        s.pending_labels.insert((0, 1), "flume-3".into());
        s.apply(
            &Event::Sent {
                port: 0,
                seq: 1,
                kind: Kind::StartRun,
            },
            now,
            &name,
        );
        s.apply(
            &Event::Reply {
                port: 0,
                device: 7,
                seq: 1,
                command: Some(Kind::StartRun),
                nack: None,
            },
            now,
            &name,
        );
        let cs = [0.05, 0.2, 0.5, 0.8];
        for k in 0..6u64 {
            for (i, c) in cs.iter().enumerate() {
                let w = WindowResult {
                    probe: i as u8,
                    start: k * 2000,
                    frames: 2000,
                    void_fraction: (c * 10_000.0) as u16,
                    bubble_rate: 8_000 + 1000 * i as u32,
                    bubbles: 8 + i as u32,
                    chords: Some(ChordTimes {
                        mean: 900,
                        median: 700,
                        p10: 200,
                        p90: 2000,
                    }),
                    correlation: Some(Correlation {
                        velocity: 2400 + 100 * i as i16,
                        peak: 7100,
                        turbulence: Some(1800),
                    }),
                    flags: if i == 0 && k == 5 { 1 << 8 } else { 0 },
                };
                s.apply(
                    &Event::Window {
                        port: 0,
                        device: 7,
                        result: w,
                    },
                    now,
                    &name,
                );
                s.link_batch(0, now, 120, 1, None);
            }
        }
        s.apply(
            &Event::Health {
                port: 0,
                device: 7,
                health: Health {
                    uptime_frames: 240_000,
                    buffer_high_water: 512,
                    ..Default::default()
                },
            },
            now,
            &name,
        );
        s.links[0].lost = 3;
        s.apply(
            &Event::SeqGap {
                port: 0,
                device: 7,
                seq: 40,
                missing: 3,
            },
            now,
            &name,
        );
        let _ = Ack { seq: 0 };
        s
    }

    #[test]
    fn dashboard_shows_probe_rows_and_link_health() {
        let now = Instant::now();
        let s = state(now);
        // A narrow terminal stays readable (columns cut at the right, never shifted).
        let narrow = render_text(&s, now, 100, 30);
        println!("{}", narrow.join("\n"));
        assert!(narrow
            .iter()
            .any(|l| l.contains("B2-4") && l.contains("  65.0  0.800   110.0    2.70")));
        let lines = render_text(&s, now, 132, 34);
        println!("{}", lines.join("\n"));
        let text = lines.join("\n");
        for want in [
            "B2-1",
            "B2-4",
            "0.800",
            "lost 3",
            "/dev/ttyUSB0",
            "UP",
            "% of 115200 Bd",
            "frames/s",
            "last frame",
            "run \"flume-3\" running",
            "ACK start-run #1",
            "3 frame(s) lost",
            "C vs elevation",
            "chord [ms]",
            "few-bubbles",
            "local codes",
            "q quit",
        ] {
            assert!(text.contains(want), "dashboard lacks {want:?}");
        }
        // The probe table lists the highest probe first, columns aligned.
        let row = |name: &str| lines.iter().position(|l| l.contains(name)).unwrap();
        assert!(row("B2-4") < row("B2-1"));
        let col = |name: &str, v: &str| {
            let l = &lines[row(name)];
            l.find(v).unwrap()
        };
        assert_eq!(col("B2-4", "0.800") + 1, col("B2-1", "0.050") + 1);
    }

    #[test]
    fn a_lost_port_shows_down() {
        let now = Instant::now();
        let mut s = state(now);
        s.apply(
            &Event::LinkDown {
                port: 0,
                reason: "device unplugged".into(),
            },
            now,
            &|_, i| format!("p{i}"),
        );
        let text = render_text(&s, now + Duration::from_secs(5), 132, 34).join("\n");
        println!("{text}");
        assert!(text.contains("DOWN"));
        assert!(text.contains("port lost, reopening every second"));
    }

    /// A transient flow: one station of five probes, a front, profile fits behind it.
    fn transient_state(now: Instant) -> LiveState {
        use frothline_core::wire::quant::{exponent, fraction, spacing};
        use frothline_core::wire::{FrontArrival, ProfileFit};
        let ports = vec!["/dev/pts/3".to_string()];
        let mut s = LiveState::new(&ports);
        s.started = Some(now - Duration::from_secs(3));
        s.links[0].baud = 115_200;
        let name = |_: u16, i: usize| format!("A{}", i + 1);
        s.apply(&Event::LinkUp { port: 0 }, now, &name);
        let mut desc = DeviceDescription {
            firmware: Default::default(),
            sample_rate_millihz: 40_000_000,
            channels: 6,
            window: WindowSetting::Whole,
            probes: Default::default(),
        };
        let elevations = [8.0f32, 24.0, 40.0, 56.0, 72.0];
        for (i, y) in elevations.iter().enumerate() {
            let _ = desc.probes.push(ProbeLayout {
                station: 0,
                leading: i as u8,
                trailing: None,
                elevation: frothline_core::wire::quant::length(*y),
                x: 0,
            });
        }
        s.apply(
            &Event::Describe {
                port: 0,
                device: 1,
                desc,
            },
            now,
            &name,
        );
        let front = 20_000u64;
        for p in 0..5u8 {
            let f = FrontArrival {
                probe: p,
                station: 0,
                frame: front + 40 * p as u64,
            };
            s.apply(
                &Event::Front {
                    port: 0,
                    device: 1,
                    front: f,
                },
                now,
                &name,
            );
        }
        let (y90, n) = (62.0f32, 0.7f32);
        for k in 0..14u64 {
            let start = front + 2000 * k;
            for (i, y) in elevations.iter().enumerate() {
                let c = (0.9 * (y / y90).powf(n)).min(1.0) + 0.02 * ((i + k as usize) % 3) as f32;
                let w = WindowResult {
                    probe: i as u8,
                    start,
                    frames: 2000,
                    void_fraction: fraction(c.min(1.0)),
                    bubble_rate: 0,
                    bubbles: 40,
                    chords: None,
                    correlation: None,
                    flags: 0,
                };
                s.apply(
                    &Event::Window {
                        port: 0,
                        device: 1,
                        result: w,
                    },
                    now,
                    &name,
                );
            }
            let t = (2000 * k) as f32 / 40_000.0;
            let cmean = 0.22 + 0.35 * (-t / 0.12).exp();
            let fit = ProfileFit {
                station: 0,
                slice_start: start,
                slice_frames: 2000,
                probes_used: 5,
                y90: Some((y90 * 10.0) as u32),
                mean_void_fraction: Some(fraction(cmean)),
                equivalent_depth: Some(400),
                exponent: Some(exponent(n)),
                fit_rmse: Some(fraction(0.012)),
                flags: 0,
                estimate: 1,
                y90_se: Some(spacing(0.8)),
                mean_void_fraction_se: Some(fraction(0.011)),
                exponent_se: Some(exponent(0.06)),
                equivalent_depth_se: Some(spacing(0.5)),
            };
            s.apply(
                &Event::Profile {
                    port: 0,
                    device: 1,
                    fit,
                },
                now,
                &name,
            );
        }
        s
    }

    #[test]
    fn transient_dashboard_shows_the_profile_fit_and_the_decay() {
        let now = Instant::now();
        let s = transient_state(now);
        let st = &s.stations[&(1, 0)];
        assert_eq!(st.front_frame, Some(20_000));
        assert_eq!(st.series.len(), 14);
        let m = st.decay.and_then(|d| d.model).expect("a decay model");
        assert!((m.tau_s - 0.12).abs() < 0.02, "{m:?}");
        assert!((m.initial - 0.57).abs() < 0.02 && (m.final_level - 0.22).abs() < 0.02);
        let (points, curve) = profile_chart_data(&s);
        assert_eq!(points.len(), 5);
        let (line, y90, n) = curve.expect("a profile curve");
        assert!((y90 - 62.0).abs() < 0.1 && (n - 0.7).abs() < 0.01);
        assert_eq!(line.last().map(|p| p.1), Some(y90));
        let lines = render_text(&s, now, 132, 42);
        println!("{}", lines.join("\n"));
        let text = lines.join("\n");
        for want in [
            "Y90 62.0±0.8 mm",
            "n 0.70±0.06",
            "±0.011:",
            "C0 0.57",
            "Cf 0.22",
            "tau 0.12",
        ] {
            assert!(text.contains(want), "missing {want:?}");
        }
        // Without a front the decay panel is not shown.
        let mut steady = transient_state(now);
        steady.stations.clear();
        let text = render_text(&steady, now, 132, 42).join("\n");
        assert!(!text.contains("Cmean"));
    }
}
