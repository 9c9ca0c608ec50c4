//! The live terminal dashboard (ratatui): probe rows, a vertical void-fraction profile, a
//! scrolling history and link health, drawn from a [`LiveState`].

use crate::live::{LiveState, ProbeRow};
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

fn cell(v: Option<f64>, prec: usize) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v:.prec$}"),
        _ => "-".into(),
    }
}

/// Draw the whole dashboard.
pub fn draw(f: &mut Frame, state: &LiveState, now: Instant) {
    let area = f.area();
    let rows = Layout::default()
        .direction(Direction::Vertical)
        .constraints([
            Constraint::Length(3),
            Constraint::Min(8),
            Constraint::Length(8),
            Constraint::Length(1),
        ])
        .split(area);
    draw_link(f, rows[0], state, now);
    let mid = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Percentage(64), Constraint::Percentage(36)])
        .split(rows[1]);
    draw_probes(f, mid[0], state);
    draw_profile(f, mid[1], state);
    draw_history(f, rows[2], state);
    f.render_widget(
        Paragraph::new(Line::from(Span::styled(
            SAFETY_LINE,
            Style::default().fg(Color::DarkGray),
        ))),
        rows[3],
    );
}

fn draw_link(f: &mut Frame, area: Rect, state: &LiveState, now: Instant) {
    let mut spans = Vec::new();
    for l in &state.links {
        let age = l
            .age_s(now)
            .map_or("never".to_string(), |a| format!("{a:.1} s ago"));
        let status = if l.connected {
            Span::styled("up", Style::default().fg(Color::Green))
        } else {
            Span::styled(
                "DOWN",
                Style::default().fg(Color::Red).add_modifier(Modifier::BOLD),
            )
        };
        spans.push(Span::styled(
            format!("{} ", l.port),
            Style::default().add_modifier(Modifier::BOLD),
        ));
        spans.push(status);
        let lost_style = if l.lost + l.crc_failures > 0 {
            Style::default().fg(WARN)
        } else {
            Style::default()
        };
        spans.push(Span::raw(format!(
            "  {:.1} frames/s  last {age}  ",
            l.frames_per_s(now)
        )));
        spans.push(Span::styled(
            format!(
                "lost {}  crc fail {}  malformed {}  reconnects {}   ",
                l.lost, l.crc_failures, l.malformed, l.reconnects
            ),
            lost_style,
        ));
    }
    for (id, d) in &state.devices {
        let run = d.run_label.as_deref().unwrap_or("idle");
        spans.push(Span::raw(format!(
            "| device {id} fw {} {} Hz run {run} dropped {} ",
            d.firmware, d.sample_rate_hz, d.health.samples_dropped
        )));
    }
    let p = Paragraph::new(Line::from(spans)).block(
        Block::default()
            .borders(Borders::ALL)
            .title(Span::styled(" link ", Style::default().fg(ACCENT))),
    );
    f.render_widget(p, area);
}

fn probe_rows(state: &LiveState) -> Vec<(u32, &ProbeRow)> {
    let mut v: Vec<(u32, &ProbeRow)> = state
        .devices
        .iter()
        .flat_map(|(id, d)| d.probes.iter().map(move |p| (*id, p)))
        .collect();
    v.sort_by(|a, b| b.1.elevation_mm.total_cmp(&a.1.elevation_mm));
    v
}

fn draw_probes(f: &mut Frame, area: Rect, state: &LiveState) {
    let header = Row::new([
        "probe", "y mm", "C", "F Hz", "V m/s", "Tu", "chord ms", "R peak", "flags",
    ])
    .style(Style::default().fg(ACCENT).add_modifier(Modifier::BOLD));
    let rows: Vec<Row> = probe_rows(state)
        .into_iter()
        .map(|(_, p)| {
            let flags: Vec<&str> = p.flags.names().collect();
            let style = if p.flags.is_empty() {
                Style::default()
            } else {
                Style::default().fg(WARN)
            };
            Row::new(vec![
                Cell::from(p.name.clone()),
                Cell::from(format!("{:.1}", p.elevation_mm)),
                Cell::from(cell(p.void_fraction, 3)),
                Cell::from(cell(p.bubble_rate_hz, 1)),
                Cell::from(cell(p.velocity_m_s, 2)),
                Cell::from(cell(p.turbulence_intensity, 2)),
                Cell::from(cell(p.chord_median_s.map(|s| s * 1e3), 2)),
                Cell::from(cell(p.correlation_peak, 2)),
                Cell::from(Span::styled(
                    if flags.is_empty() {
                        "-".to_string()
                    } else {
                        flags.join(" ")
                    },
                    style,
                )),
            ])
        })
        .collect();
    let widths = [
        Constraint::Length(8),
        Constraint::Length(6),
        Constraint::Length(6),
        Constraint::Length(7),
        Constraint::Length(6),
        Constraint::Length(5),
        Constraint::Length(8),
        Constraint::Length(6),
        Constraint::Min(10),
    ];
    let t = Table::new(rows, widths).header(header).block(
        Block::default().borders(Borders::ALL).title(Span::styled(
            " probes (top first) ",
            Style::default().fg(ACCENT),
        )),
    );
    f.render_widget(t, area);
}

fn draw_profile(f: &mut Frame, area: Rect, state: &LiveState) {
    let points: Vec<(f64, f64)> = probe_rows(state)
        .into_iter()
        .filter_map(|(_, p)| p.void_fraction.map(|c| (c, p.elevation_mm)))
        .collect();
    let ymax = points.iter().map(|p| p.1).fold(10.0f64, f64::max) * 1.1;
    let data = vec![
        Dataset::default()
            .marker(Marker::Braille)
            .graph_type(GraphType::Line)
            .style(Style::default().fg(Color::DarkGray))
            .data(&points),
        Dataset::default()
            .marker(Marker::Block)
            .graph_type(GraphType::Scatter)
            .style(Style::default().fg(ACCENT))
            .data(&points),
    ];
    let chart = Chart::new(data)
        .legend_position(None)
        .block(Block::default().borders(Borders::ALL).title(Span::styled(
            " void fraction profile ",
            Style::default().fg(ACCENT),
        )))
        .x_axis(
            Axis::default()
                .title("C")
                .bounds([0.0, 1.0])
                .labels(["0", "0.5", "1"]),
        )
        .y_axis(Axis::default().title("y mm").bounds([0.0, ymax]).labels([
            "0".to_string(),
            format!("{:.0}", ymax / 2.0),
            format!("{ymax:.0}"),
        ]));
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
        .map(|l| Line::raw(l.clone()))
        .collect();
    let p = Paragraph::new(lines).block(Block::default().borders(Borders::ALL).title(
        Span::styled(" recent windows ", Style::default().fg(ACCENT)),
    ));
    f.render_widget(p, area);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::live::LiveWindow;
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;

    #[test]
    fn dashboard_shows_probe_rows_and_link_health() {
        let mut s = LiveState::new(&["/dev/ttyUSB0".to_string()]);
        s.links[0].connected = true;
        s.links[0].lost = 3;
        let now = Instant::now();
        s.links[0].frame(now);
        for (i, (name, y)) in [("B2-1", 8.0), ("B2-3", 45.0)].iter().enumerate() {
            let d = s.device(7);
            d.firmware = "0.1.0".into();
            d.probes.push(ProbeRow {
                name: name.to_string(),
                elevation_mm: *y,
                ..Default::default()
            });
            s.window(&LiveWindow {
                device: 7,
                probe: i,
                start_s: 0.0,
                end_s: 0.05,
                void_fraction: Some(0.1 + 0.3 * i as f64),
                bubble_rate_hz: Some(80.0),
                velocity_m_s: Some(2.4),
                turbulence_intensity: Some(0.2),
                chord_median_s: Some(0.0012),
                correlation_peak: Some(0.7),
                bubbles: 4,
                flags: frothline_core::Flags::NONE,
            });
        }
        let mut term = Terminal::new(TestBackend::new(140, 30)).unwrap();
        term.draw(|f| draw(f, &s, now)).unwrap();
        let buf = term.backend().buffer();
        let text: String = buf.content().iter().map(|c| c.symbol()).collect();
        for y in 0..buf.area.height {
            let line: String = (0..buf.area.width)
                .map(|x| buf[(x, y)].symbol().to_string())
                .collect();
            println!("{line}");
        }
        for want in [
            "B2-1",
            "B2-3",
            "0.400",
            "lost 3",
            "/dev/ttyUSB0",
            "void fraction profile",
            "recent windows",
            "local codes",
        ] {
            assert!(text.contains(want), "dashboard lacks {want:?}");
        }
    }
}
