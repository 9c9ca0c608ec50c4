//! Colours and the small text formatters the panels share.

use frothline_core::Flags;
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::Span;

pub(super) const ACCENT: Color = Color::Cyan;
pub(super) const WARN: Color = Color::Yellow;
pub(super) const BAD: Color = Color::Red;
pub(super) const GOOD: Color = Color::Green;
pub(super) const DIM: Color = Color::DarkGray;

pub(super) fn num(v: Option<f64>, width: usize, prec: usize) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v:>width$.prec$}"),
        _ => format!("{:>width$}", "-"),
    }
}

pub(super) fn title(s: &str) -> Span<'_> {
    Span::styled(s, Style::default().fg(ACCENT).add_modifier(Modifier::BOLD))
}

/// The latest window's flags with the CSV names; a stuck tip in capitals first, so it
/// reads without colour.
pub(super) fn flag_words(f: Flags) -> String {
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
pub(super) fn tip_stuck(f: Flags) -> bool {
    f.contains(Flags::STUCK) || f.contains(Flags::TRAILING_STUCK)
}

pub(super) fn bytes_text(b: f64) -> String {
    if b >= 1e6 {
        format!("{:.2} MB", b / 1e6)
    } else if b >= 1e3 {
        format!("{:.2} kB", b / 1e3)
    } else {
        format!("{b:.0} B")
    }
}
