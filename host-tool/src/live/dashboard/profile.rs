//! The C profile panel as bars: one per probe at its elevation.

use super::probes::probe_rows;
use super::style::{num, title, ACCENT, WARN};
use crate::live::state::LiveState;
use ratatui::layout::Rect;
use ratatui::style::{Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph};
use ratatui::Frame;

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

pub(super) fn draw_profile(f: &mut Frame, area: Rect, state: &LiveState) {
    let inner_w = area.width.saturating_sub(2) as usize;
    let inner_h = area.height.saturating_sub(2) as usize;
    let p = Paragraph::new(profile_lines(state, inner_w, inner_h)).block(
        Block::default()
            .borders(Borders::ALL)
            .title(title(" C vs elevation ")),
    );
    f.render_widget(p, area);
}
