//! The live terminal dashboard (ratatui), drawn from a [`LiveState`]:
//!
//! ```text
//! links and devices   status (UP / DOWN / OPENING / QUIET), frames/s, bytes/s and share of
//!                     the link, age of the last frame, lost frames, CRC failures; per device
//!                     firmware, sample rate, window, run, device-reported health (one line
//!                     per link and device on short terminals)
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

use crate::live::state::{LinkHealth, LiveState, ProbeRow};
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

/// The latest window's flags with the CSV names; a stuck tip in capitals first, so it
/// reads without colour.
fn flag_words(f: Flags) -> String {
    let mut v: Vec<String> = Vec::new();
    for name in f.names() {
        match name {
            "stuck" | "trailing_stuck" => v.insert(0, name.to_uppercase()),
            _ => v.push(name.to_string()),
        }
    }
    if v.is_empty() {
        "ok".into()
    } else {
        v.join(" ")
    }
}

/// True if the flags say a tip stopped switching.
fn tip_stuck(f: Flags) -> bool {
    f.contains(Flags::STUCK) || f.contains(Flags::TRAILING_STUCK)
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

/// Rows of the probe table: borders, header and one line per probe.
fn probe_table_height(state: &LiveState) -> u16 {
    (probe_rows(state).len() as u16).saturating_add(3)
}

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
            first.push(Span::raw(format!(
                " {:>6.1} frames/s  {:>9}/s{load}  {age}",
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
                "  health: dropped {} samples, {} frames  saturated {}  {} tips {}  buffer peak {} samples  uptime {uptime}",
                h.samples_dropped, h.frames_dropped, h.saturated,
                if h.tips_stuck > 0 { "STUCK" } else { "stuck" },
                h.tips_stuck, h.buffer_high_water
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

/// Columns of the probe table: header, width, and right alignment. The running figures
/// of the run come first; `last C` and `flags` are the latest window's.
const PROBE_COLUMNS: [(&str, u16, bool); 11] = [
    ("probe", 8, false),
    ("y [mm]", 6, true),
    ("C ±95%", 11, true),
    ("F [Hz] ±95%", 11, true),
    ("V [m/s]", 9, true),
    ("Tu [-]", 9, true),
    ("chord ms", 8, true),
    ("windows", 7, true),
    ("conv", 8, false),
    ("last C", 6, true),
    ("flags", 8, false),
];

fn fit(s: String, w: u16, right: bool) -> String {
    let w = w as usize;
    let s: String = if s.chars().count() > w && w > 1 {
        s.chars().take(w - 1).chain(['…']).collect()
    } else {
        s
    };
    if right {
        format!("{s:>w$}")
    } else {
        format!("{s:<w$}")
    }
}

/// Which probe columns fit in `width` cells: the less important ones go first (chord,
/// windows, Tu, last C, ...), so a narrow terminal loses columns instead of cutting
/// numbers. Column indices into `PROBE_COLUMNS`, in order.
pub fn probe_columns_that_fit(width: u16) -> Vec<usize> {
    // Lower keeps longer; the flags column (last) takes the rest of the width.
    const KEEP: [u8; 11] = [0, 2, 0, 1, 2, 4, 6, 5, 1, 3, 1];
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

/// `0.446±0.055`, or the mean alone before an interval exists.
fn running(e: Option<crate::shared::running_stats::Estimate>, prec: usize) -> String {
    crate::shared::probe_summary::estimate_text(e, 1.0, prec)
}

/// The convergence cell: `done 3%` once C, F (and V) met the target, else the worst
/// relative half-width; `-` before any interval.
fn convergence_text(p: &ProbeRow, target: f64) -> String {
    use crate::shared::running_stats::MIN_BATCHES_FOR_CONVERGENCE as MIN;
    let batches = p.tally.void_fraction().map_or(0, |e| e.batches);
    match p.convergence(target) {
        None if p.tally.used > 0 => format!("{}/{MIN} win", p.tally.used.min(MIN as u64)),
        None => "-".into(),
        Some((_, false)) if batches < MIN => format!("{batches}/{MIN} win"),
        Some((w, true)) => format!("done {:.0}%", w * 100.0),
        Some((w, false)) if w >= 10.0 => ">999%".into(),
        Some((w, false)) => format!("{:.0}%", w * 100.0),
    }
}

/// The probe rows shown from `scroll` in `rows` lines, and how many lie above and below.
pub fn probe_page(total: usize, scroll: usize, rows: usize) -> (usize, usize, usize) {
    let rows = rows.max(1);
    let start = scroll.min(total.saturating_sub(rows));
    let end = (start + rows).min(total);
    (start, end, total - end)
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
    let all = probe_rows(state);
    let visible = area.height.saturating_sub(3) as usize;
    let (start, end, below) = probe_page(all.len(), state.probe_scroll, visible);
    let target = state.view.target;
    let done = all
        .iter()
        .filter(|(_, p)| p.convergence(target).is_some_and(|c| c.1))
        .count();
    let rows: Vec<Row> = all[start..end]
        .iter()
        .map(|(id, p)| {
            let stuck = p.windows > 0 && tip_stuck(p.flags);
            let name = if multi && !p.name.starts_with('d') {
                format!("{id}:{}", p.name)
            } else {
                p.name.clone()
            };
            let t = &p.tally;
            let v = [
                if stuck { format!("!{name}") } else { name },
                num(Some(p.elevation_mm), 6, 1),
                running(t.void_fraction(), 3),
                running(t.count_rate_hz(), 1),
                running(t.velocity_m_s(), 2),
                running(t.turbulence_intensity(), 2),
                running(
                    t.chord_median_s().map(|mut e| {
                        e.mean *= 1e3;
                        e.half_width = None;
                        e
                    }),
                    2,
                ),
                format!("{}/{}", t.used, t.windows),
                convergence_text(p, target),
                num(p.void_fraction, 6, 3),
            ];
            let flags_style = if stuck {
                Style::default().fg(BAD).add_modifier(Modifier::BOLD)
            } else if (p.flags.0 & !Flags::FEW_BUBBLES.0) != 0 {
                Style::default().fg(WARN)
            } else {
                Style::default()
            };
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
                            flags_style,
                        ))
                    } else {
                        let (_, w, r) = PROBE_COLUMNS[i];
                        let style = if i == 8 && p.convergence(target).is_some_and(|c| c.1) {
                            Style::default().fg(GOOD)
                        } else {
                            Style::default()
                        };
                        Cell::from(Span::styled(fit(v[i].clone(), w, r), style))
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
    let head = if area.width >= 60 {
        format!(
            " probes: run so far, target ±{:.0}%: {done}/{} done ",
            target * 100.0,
            all.len()
        )
    } else {
        format!(" probes: {done}/{} done ", all.len())
    };
    let mut block = Block::default().borders(Borders::ALL).title(title(&head));
    if start > 0 || below > 0 {
        block = block.title_bottom(Span::styled(
            format!(
                " {}{}PgUp/PgDn ",
                if start > 0 {
                    format!("+{start} more above  ")
                } else {
                    String::new()
                },
                if below > 0 {
                    format!("+{below} more below  ")
                } else {
                    String::new()
                }
            ),
            Style::default().fg(WARN).add_modifier(Modifier::BOLD),
        ));
    }
    let t = Table::new(rows, widths)
        .header(header)
        .column_spacing(1)
        .block(block);
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
    let mut dropped = 0usize;
    for &(y, c) in &probes {
        let span = (ymax - ymin.min(0.0)).max(1e-9);
        let want = (((ymax - y) / span) * (plot_rows - 1) as f64).round() as usize;
        let want = want.min(plot_rows - 1);
        // Next free row downwards, else upwards (two probes at one elevation).
        let row = (want..plot_rows)
            .chain((0..want).rev())
            .find(|&r| grid[r].is_none());
        match row {
            Some(r) => grid[r] = Some((y, c)),
            None => dropped += 1,
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
    if dropped > 0 {
        // Too few rows for every probe: say so where the axis labels were.
        lines.push(Line::from(Span::styled(
            format!(" +{dropped} more probe(s): see the table"),
            Style::default().fg(WARN).add_modifier(Modifier::BOLD),
        )));
    } else {
        lines.push(Line::raw(labels));
    }
    lines
}

fn draw_profile(f: &mut Frame, area: Rect, state: &LiveState) {
    let inner_w = area.width.saturating_sub(2) as usize;
    let inner_h = area.height.saturating_sub(2) as usize;
    let p = Paragraph::new(profile_lines(state, inner_w, inner_h)).block(
        Block::default()
            .borders(Borders::ALL)
            .title(title(" C vs elevation ")),
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
            let style = if l.contains("DOWN") || l.contains("NACK") || l.contains("lost") {
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
    use crate::shared::session::Event;
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
        // Running figures with their intervals (equal windows: no spread), the convergence
        // cell waiting for enough windows, the latest flags with the CSV names.
        assert!(narrow
            .iter()
            .any(|l| l.contains("B2-4")
                && l.contains("65.0 0.800±0.000   110.0±0.0 2.70±0.00 6/10 win")));
        assert!(narrow
            .iter()
            .any(|l| l.contains("B2-1") && l.contains("few_bubbles")));
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
            "windows",
            "last C",
            "few_bubbles",
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
        transient_state_with(now, &[8.0, 24.0, 40.0, 56.0, 72.0])
    }

    fn transient_state_with(now: Instant, elevations: &[f32]) -> LiveState {
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
        for p in 0..elevations.len() as u8 {
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
                probes_used: elevations.len() as u8,
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
        let lines = render_text(&s, now, 160, 48);
        println!("{}", lines.join("\n"));
        let text = lines.join("\n");
        for want in [
            "Y90 62.0±0.8 n 0.70±0.06",
            "Cmean 0.222±0.011",
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
        assert!(!text.contains("Cmean fit"));
    }

    /// Every probe name and every panel title is on screen at the tested sizes, for a
    /// steady run (4 probes) and a surge like the transient demo (10 probes); where the
    /// probe table cannot hold every row, a `+N more` mark says so and paging shows the
    /// rest.
    #[test]
    fn every_probe_and_panel_is_on_screen_at_80x24_100x30_160x48() {
        let now = Instant::now();
        let steady = state(now);
        let elevations: Vec<f32> = (0..10).map(|i| 5.0 + 10.0 * i as f32).collect();
        let mut surge = transient_state_with(now, &elevations);
        surge.keys_help = crate::live::watch::KEYS_HELP.into();
        let steady_names = ["B2-1", "B2-2", "B2-3", "B2-4"];
        let surge_names: Vec<String> = (1..=10).map(|i| format!("A{i}")).collect();
        let cases: [(&LiveState, Vec<&str>, Vec<&str>); 2] = [
            (
                &steady,
                steady_names.to_vec(),
                vec![
                    "links and devices",
                    "probes",
                    "C vs elevation",
                    "events",
                    "recent windows",
                ],
            ),
            (
                &surge,
                surge_names.iter().map(|s| s.as_str()).collect(),
                vec![
                    "links and devices",
                    "probes",
                    "C vs y",
                    "events",
                    "Cmean",
                    "recent windows",
                ],
            ),
        ];
        for (st, names, titles) in &cases {
            for (w, h) in [(80u16, 24u16), (100, 30), (160, 48)] {
                let lines = render_text(st, now, w, h);
                let text = lines.join("\n");
                println!("{w}x{h}\n{text}");
                for t in titles {
                    assert!(text.contains(t), "{w}x{h}: no panel title {t:?}");
                }
                assert!(
                    text.contains("local codes") || w < 104,
                    "{w}x{h}: safety line"
                );
                // Probe names as whole cells of the table ("A1" must not match "A10").
                let table_names = |lines: &[String]| -> Vec<String> {
                    lines
                        .iter()
                        .filter_map(|l| {
                            let cell = l.strip_prefix('│')?.split_whitespace().next()?;
                            Some(cell.trim_start_matches('!').to_string())
                        })
                        .collect()
                };
                let mut seen = table_names(&lines);
                let mut scrolled = (*st).clone();
                let mut pages = 0;
                while text_has_more_below(&render_text(&scrolled, now, w, h)) && pages < 10 {
                    scrolled.probe_scroll += 8;
                    seen.extend(table_names(&render_text(&scrolled, now, w, h)));
                    pages += 1;
                }
                for n in names {
                    assert!(seen.iter().any(|s| s == n), "{w}x{h}: probe {n} not shown");
                }
                // The 10 probes fit from 80x24 on; nothing is hidden, so no mark.
                assert_eq!(pages, 0, "{w}x{h}: the probe table should fit");
            }
        }
    }

    fn text_has_more_below(lines: &[String]) -> bool {
        lines.iter().any(|l| l.contains("more below"))
    }

    /// More probes than rows: the table says how many are hidden, and paging reaches them.
    #[test]
    fn a_cut_probe_table_is_marked_and_pages() {
        let now = Instant::now();
        let elevations: Vec<f32> = (0..16).map(|i| 5.0 + 6.0 * i as f32).collect();
        let mut s = transient_state_with(now, &elevations);
        let lines = render_text(&s, now, 80, 24);
        let text = lines.join("\n");
        println!("{text}");
        assert!(text.contains("+"), "no more-mark");
        assert!(text_has_more_below(&lines));
        s.probe_scroll = 100;
        let text = render_text(&s, now, 80, 24).join("\n");
        println!("{text}");
        assert!(text.contains("more above"));
        assert!(text.contains("A1 "), "the lowest probe is reachable");
        assert_eq!(probe_page(16, 100, 5), (11, 16, 0));
        assert_eq!(probe_page(3, 0, 5), (0, 3, 0));
    }

    /// The strip chart: every probe's series against device time, named in its legend;
    /// `c` cycles C, F, V and back to the table.
    #[test]
    fn the_strip_chart_cycles_quantities_and_names_every_probe() {
        let now = Instant::now();
        let mut s = state(now);
        let data = strip_data(&s, 1);
        assert_eq!(data.len(), 4);
        // B2-4 (highest, first): F = 110 Hz in each of its 6 windows, ending 0.1 s apart.
        assert_eq!(data[0].1.len(), 6);
        assert!((data[0].1[5].0 - 0.6).abs() < 1e-9 && (data[0].1[5].1 - 110.0).abs() < 1e-3);
        for (view, head) in [
            (crate::live::state::StripView::VoidFraction, "strip: C"),
            (crate::live::state::StripView::CountRate, "strip: F"),
            (crate::live::state::StripView::Velocity, "strip: V"),
        ] {
            s.strip_view = view;
            let text = render_text(&s, now, 160, 48).join("\n");
            assert!(text.contains(head), "{head}\n{text}");
            for n in ["B2-1", "B2-2", "B2-3", "B2-4"] {
                assert!(
                    text.matches(n).count() >= 2,
                    "{n} not in the table and legend"
                );
            }
        }
        assert_eq!(s.strip_view.next(), crate::live::state::StripView::Tips);
        assert_eq!(
            crate::live::state::StripView::Tips.next(),
            crate::live::state::StripView::Table
        );
    }
}
