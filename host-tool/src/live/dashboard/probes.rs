//! The probe table: which probes, which columns fit, paging, and drawing it.

use super::style::{flag_words, num, tip_stuck, title, ACCENT, BAD, GOOD, WARN};
use crate::live::state::{LiveState, ProbeRow};
use frothline_core::Flags;
use ratatui::layout::{Constraint, Rect};
use ratatui::style::{Modifier, Style};
use ratatui::text::Span;
use ratatui::widgets::{Block, Borders, Cell, Row, Table};
use ratatui::Frame;

/// Rows of the probe table: borders, header and one line per probe.
pub(super) fn probe_table_height(state: &LiveState) -> u16 {
    (probe_rows(state).len() as u16).saturating_add(3)
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
/// windows, Tu, last C, then a probe's convergence, which the table's title sums up as
/// probes done, and its elevation), so a narrow terminal loses columns instead of cutting
/// numbers, and keeps the run's C, F and V with the latest flags. Column indices into
/// `PROBE_COLUMNS`, in order.
pub fn probe_columns_that_fit(width: u16) -> Vec<usize> {
    // Lower keeps longer; the flags column (last) takes the rest of the width.
    const KEEP: [u8; 11] = [0, 2, 0, 1, 1, 4, 6, 5, 2, 3, 1];
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

pub(super) fn draw_probes(f: &mut Frame, area: Rect, state: &LiveState) {
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
    if let Some(text) = continuity_text(state, area.width) {
        let warn = text.contains("CHECK");
        block = block.title_bottom(
            ratatui::text::Line::from(Span::styled(
                text,
                if warn {
                    Style::default().fg(BAD).add_modifier(Modifier::BOLD)
                } else {
                    Style::default()
                },
            ))
            .right_aligned(),
        );
    }
    let t = Table::new(rows, widths)
        .header(header)
        .column_spacing(1)
        .block(block);
    f.render_widget(t, area);
}

/// The continuity line of the first station with a discharge, for the probe table's lower
/// edge: `q_w` of the run so far and, with the layout's discharge, the gap to it, with the
/// word `CHECK` (not colour alone) beyond the tolerance. `None` without a station of three
/// probes with C and V, or when the table is too narrow for it.
pub(super) fn continuity_text(state: &LiveState, width: u16) -> Option<String> {
    let (_, _, d) = state.continuity().into_iter().next()?;
    let q = d.q_water_total_m2_s();
    let text = match (d.expected_m2_s, d.continuity_error()) {
        (Some(e), Some(err)) => format!(
            " q_w {q:.4} m²/s, layout {e:.4}: {:+.1} %{} ",
            100.0 * err,
            if err.abs() > crate::shared::discharge::CONTINUITY_TOLERANCE {
                " CHECK"
            } else {
                ""
            }
        ),
        _ => format!(" q_w {q:.4} m²/s "),
    };
    ((text.chars().count() as u16) + 4 <= width).then_some(text)
}
