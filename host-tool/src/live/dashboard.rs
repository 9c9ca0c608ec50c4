//! The live terminal dashboard (ratatui), drawn from a [`LiveState`]:
//!
//! ```text
//! links and devices   status (UP / DOWN / OPENING / QUIET), frames/s, bytes/s and share of
//!                     the link, age of the last frame, lost frames, CRC failures; per device
//!                     its status first (supply voltage, LOW below 3.0 V, time since
//!                     power-up, field logger state), then firmware, sample rate, window,
//!                     run, device-reported health (one line per link and device on short
//!                     terminals)
//! probes (top first)  running figures of the run: C, F, V, Tu, chord median with 95 %
//!                     batch-means intervals, windows used, convergence against the target;
//!                     then the latest window's C and flags (CSV flag names)
//! C profile           a bar per probe at its elevation (the rows keep the elevation order);
//!                     in a transient flow, a chart of C against elevation of the latest
//!                     windows with the station's latest fit C = 0.9 (y/Y90)^n
//! events | windows    command replies, link events, gaps, fronts (rate-limited profile
//!                     lines, no protocol chatter unless asked); one line per analysis
//!                     window; once a front arrived, between them Cmean against the time
//!                     since the front with the host's decay fit C(t) = Cf + (C0 - Cf) exp(-t/tau)
//! keys, safety line
//! ```
//!
//! Space goes to the panels in proportion to what they hold; whatever does not fit is
//! marked `+N more` (the probe table pages with PgUp/PgDn), nothing is dropped silently.

mod charts;
mod probes;
mod profile;
mod status;
mod style;
#[cfg(test)]
mod tests;

pub use charts::{decay_chart_data, profile_chart_data, Points};
pub use probes::{probe_columns_that_fit, probe_page, probe_rows};
pub use profile::profile_lines;

use crate::live::state::{LinkHealth, LiveState};
use charts::{axis_labels, draw_decay, draw_profile_chart};
use probes::{draw_probes, probe_table_height};
use profile::draw_profile;
use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph};
use ratatui::Frame;
use std::time::Instant;
use style::{bytes_text, num, title, ACCENT, BAD, DIM, GOOD, WARN};

/// The one-line safety reminder shown under the dashboard.
pub const SAFETY_LINE: &str =
    "Near fast water: work in pairs, isolated (SELV) supplies behind RCDs; follow site rules and local codes.";

/// Draw the whole dashboard.
pub fn draw(f: &mut Frame, state: &LiveState, now: Instant) {
    let area = f.area();
    let front = state
        .shown_station()
        .is_some_and(|(_, s)| s.front_s.is_some());
    // Heights: the head in full (two lines per link and device) when there is room, else
    // one line each; the probe table as tall as its rows (it pages when cut); the events
    // and windows panes take the rest, at least 5 rows.
    let avail = area.height.saturating_sub(2);
    let full_head = (2 + 2 * state.links.len() + 2 * state.devices.len()) as u16;
    let compact_head = (2 + state.links.len() + state.devices.len()) as u16;
    let probes_need = probe_table_height(state).max(if front { 12 } else { 8 });
    let bottom_min = 5u16;
    let compact = full_head + probes_need + bottom_min > avail;
    let head = if compact { compact_head } else { full_head }
        .min(avail / 3)
        .max(3);
    let probes_h = probes_need
        .min(avail.saturating_sub(head + bottom_min))
        .max(4);
    let rows = Layout::default()
        .direction(Direction::Vertical)
        .constraints([
            Constraint::Length(head),
            Constraint::Length(probes_h),
            Constraint::Min(bottom_min),
            Constraint::Length(1),
            Constraint::Length(1),
        ])
        .split(area);
    draw_links(f, rows[0], state, now, compact);
    let profile_w = (area.width / 4).clamp(24, 44);
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
                Constraint::Percentage(38),
                Constraint::Percentage(30),
                Constraint::Percentage(32),
            ])
            .split(rows[2]);
        draw_history(f, bottom[0], state);
        draw_decay(f, bottom[1], state);
        draw_recent_or_strip(f, bottom[2], state);
    } else {
        let bottom = Layout::default()
            .direction(Direction::Horizontal)
            .constraints([Constraint::Percentage(58), Constraint::Percentage(42)])
            .split(rows[2]);
        draw_history(f, bottom[0], state);
        draw_recent_or_strip(f, bottom[1], state);
    }
    let keys = match &state.prompt {
        Some(p) => Line::from(vec![
            Span::styled(
                format!(" {}", p.question()),
                Style::default().fg(WARN).add_modifier(Modifier::BOLD),
            ),
            Span::raw(format!("{}_", p.text)),
        ]),
        None if state.keys_help.is_empty() => Line::from(""),
        None => Line::from(Span::styled(
            format!(" keys: {}", state.keys_help),
            Style::default().fg(ACCENT),
        )),
    };
    f.render_widget(Paragraph::new(keys), rows[3]);
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
        .is_none_or(|a| a > crate::live::state::QUIET_AFTER.as_secs_f64())
    {
        Span::styled("QUIET  ", Style::default().fg(WARN).add_modifier(bold))
    } else {
        Span::styled("UP     ", Style::default().fg(GOOD).add_modifier(bold))
    }
}

fn draw_links(f: &mut Frame, area: Rect, state: &LiveState, now: Instant, compact: bool) {
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
            // The age of the last frame first: on a narrow terminal the line is cut at
            // the right, and a silent link is what the technician must see.
            first.push(Span::raw(format!(
                " {age}  {:>6.1} frames/s  {:>9}/s{load}",
                l.frames_per_s(now),
                bytes_text(l.bytes_per_s(now)),
            )));
        }
        if compact {
            first.push(Span::styled(
                format!("  lost {}  CRC {}", l.lost, l.crc_failures),
                if l.lost + l.crc_failures + l.malformed > 0 {
                    Style::default().fg(WARN)
                } else {
                    Style::default().fg(DIM)
                },
            ));
            lines.push(Line::from(first));
            continue;
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
                "{:<name_w$}  frames {}  lost {}  CRC failures {}  link drops {}  malformed {}  discarded {}",
                "",
                l.frames,
                l.lost,
                l.crc_failures,
                l.reconnects,
                l.malformed,
                bytes_text(l.bytes_discarded as f64)
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
        let mut spans = vec![Span::styled(
            format!("device {id}"),
            Style::default().fg(ACCENT).add_modifier(Modifier::BOLD),
        )];
        if let Some(s) = &d.status {
            spans.extend(status::status_spans(s));
            spans.push(Span::raw(" |"));
        }
        // The run and its window before the description that does not change (cut first
        // on a narrow terminal).
        spans.push(Span::raw(format!(
            " {run}, window {}, {} Hz, firmware {} on {port}",
            if d.window.is_empty() { "?" } else { &d.window },
            d.sample_rate_hz,
            if d.firmware.is_empty() {
                "?"
            } else {
                &d.firmware
            },
        )));
        lines.push(Line::from(spans));
        let h = &d.health;
        if compact {
            if h.tips_stuck > 0 || h.samples_dropped + h.frames_dropped > 0 {
                if let Some(last) = lines.last_mut() {
                    last.spans.push(Span::styled(
                        format!(
                            "  {} STUCK tip(s), dropped {} samples, {} frames",
                            h.tips_stuck, h.samples_dropped, h.frames_dropped
                        ),
                        Style::default().fg(WARN),
                    ));
                }
            }
            continue;
        }
        let uptime = if d.sample_rate_hz > 0 {
            format!("{:.1} s", h.uptime_frames as f64 / d.sample_rate_hz as f64)
        } else {
            "?".into()
        };
        let bad = h.samples_dropped + h.frames_dropped > 0 || h.tips_stuck > 0;
        let text = match d.health_at {
            None => "  health: no report yet".to_string(),
            Some(_) => format!(
                "  health: {} tips {}  dropped {} samples, {} frames  saturated {}  buffer peak {} samples  uptime {uptime}",
                if h.tips_stuck > 0 { "STUCK" } else { "stuck" },
                h.tips_stuck, h.samples_dropped, h.frames_dropped, h.saturated,
                h.buffer_high_water
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

fn draw_history(f: &mut Frame, area: Rect, state: &LiveState) {
    let n = area.height.saturating_sub(2) as usize;
    let hidden = state.history.len().saturating_sub(n);
    let lines: Vec<Line> = state
        .history
        .iter()
        .rev()
        .take(n)
        .rev()
        .map(|l| {
            let style = if l.contains("DOWN")
                || l.contains("NACK")
                || l.contains("lost")
                || l.contains("supply LOW")
            {
                Style::default().fg(WARN)
            } else {
                Style::default()
            };
            Line::from(Span::styled(l.clone(), style))
        })
        .collect();
    let mut block = Block::default()
        .borders(Borders::ALL)
        .title(title(" events (host s) "));
    if hidden > 0 || state.events_suppressed > 0 {
        let mut what = Vec::new();
        if hidden > 0 {
            what.push(format!("+{hidden} older"));
        }
        if state.events_suppressed > 0 {
            what.push(format!("{} routine hidden", state.events_suppressed));
        }
        block = block.title_bottom(Span::styled(
            format!(" {} ", what.join(", ")),
            Style::default().fg(DIM),
        ));
    }
    let p = Paragraph::new(lines).block(block);
    f.render_widget(p, area);
}

fn draw_recent_or_strip(f: &mut Frame, area: Rect, state: &LiveState) {
    if state.strip_view == crate::live::state::StripView::Tips {
        return crate::live::dashboard_tips::draw_tips(f, area, state);
    }
    match state.strip_view.quantity() {
        None => draw_recent(f, area, state),
        Some((k, name)) => draw_strip(f, area, state, k, name),
    }
}

/// Colours of the strip chart's probes (the legend names them, so colour is not the only
/// cue).
const STRIP_COLOURS: [Color; 8] = [
    Color::Cyan,
    Color::Yellow,
    Color::Green,
    Color::Magenta,
    Color::LightRed,
    Color::LightBlue,
    Color::White,
    Color::LightGreen,
];

/// The strip chart's series: (probe name, points (device time s, value)), highest probe
/// first, for quantity `k` (0 C, 1 F, 2 V).
pub fn strip_data(state: &LiveState, k: usize) -> Vec<(String, Points)> {
    probe_rows(state)
        .into_iter()
        .map(|(_, p)| {
            let pts = p
                .strip
                .iter()
                .filter_map(|(t, v)| Some((*t, v.get(k).copied().flatten()?)))
                .filter(|(t, v)| t.is_finite() && v.is_finite())
                .collect();
            (p.name.clone(), pts)
        })
        .collect()
}

fn draw_strip(f: &mut Frame, area: Rect, state: &LiveState, k: usize, name: &str) {
    let series = strip_data(state, k);
    let (mut t0, mut t1, mut vmax) = (f64::INFINITY, f64::NEG_INFINITY, 0.0f64);
    for (_, pts) in &series {
        for &(t, v) in pts {
            t0 = t0.min(t);
            t1 = t1.max(t);
            vmax = vmax.max(v);
        }
    }
    if !t0.is_finite() {
        (t0, t1) = (0.0, 1.0);
    }
    let t1 = t1.max(t0 + 1e-3);
    let vmax = if k == 0 { 1.0 } else { (vmax * 1.1).max(1e-3) };
    let sets: Vec<Dataset> = series
        .iter()
        .enumerate()
        .map(|(i, (n, pts))| {
            Dataset::default()
                .name(n.clone())
                .marker(Marker::Braille)
                .graph_type(GraphType::Line)
                .style(Style::default().fg(STRIP_COLOURS[i % STRIP_COLOURS.len()]))
                .data(pts)
        })
        .collect();
    let head = format!(" strip: {name} vs device time (c: next) ");
    let chart = Chart::new(sets)
        .block(Block::default().borders(Borders::ALL).title(title(&head)))
        .x_axis(
            Axis::default()
                .bounds([t0, t1])
                .labels(axis_labels(t0, t1, 1)),
        )
        .y_axis(Axis::default().bounds([0.0, vmax]).labels(axis_labels(
            0.0,
            vmax,
            if k == 1 { 0 } else { 1 },
        )))
        .legend_position(Some(ratatui::widgets::LegendPosition::TopLeft))
        .hidden_legend_constraints((Constraint::Ratio(1, 1), Constraint::Ratio(1, 1)));
    f.render_widget(chart, area);
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
    // As many probe columns as fit; the rest is counted in the head.
    let inner = area.width.saturating_sub(2) as usize;
    let fixed = 9 + if multi { 6 } else { 0 };
    let mut shown = inner.saturating_sub(fixed) / 7;
    if shown < names.len() {
        shown = inner.saturating_sub(fixed + 8) / 7;
    }
    let more = names.len().saturating_sub(shown);
    for name in names.iter().take(shown) {
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
    if more > 0 {
        head.push_str(&format!(" +{more} more"));
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
        for c in r.void_fraction.iter().take(shown) {
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
            .title(title(" recent windows: C (c: strip chart) ")),
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
