//! The device status on the device's line of the links panel: supply voltage (warning
//! style and the word LOW below [`SUPPLY_LOW_MV`]), time since power-up, the field
//! logger's state and how full its log is. It comes right after the device id, so it
//! stays on screen however narrow the terminal.

use super::style::{DIM, WARN};
use crate::shared::status_csv::{supply_low, SUPPLY_LOW_MV};
use frothline_core::logbook::LoggerState;
use frothline_core::wire::DeviceStatus;
use ratatui::style::{Modifier, Style};
use ratatui::text::Span;

/// Time since power-up in words: `42 s`, `12 min 05 s`, `3 h 07 min`, `2 d 03 h`.
pub(super) fn uptime_text(ms: u64) -> String {
    let s = ms / 1_000;
    match s {
        0..60 => format!("{:.1} s", ms as f64 / 1_000.0),
        60..3_600 => format!("{} min {:02} s", s / 60, s % 60),
        3_600..86_400 => format!("{} h {:02} min", s / 3_600, s / 60 % 60),
        _ => format!("{} d {:02} h", s / 86_400, s / 3_600 % 24),
    }
}

/// The spans of a status: ` 3.30 V  up 12 min 05 s  logger armed, log 20 %`.
pub(super) fn status_spans(s: &DeviceStatus) -> Vec<Span<'static>> {
    let mut v = Vec::new();
    match s.supply_mv {
        Some(mv) if supply_low(s) => v.push(Span::styled(
            format!(
                " {:.2} V LOW (< {:.1} V)",
                f64::from(mv) / 1e3,
                f64::from(SUPPLY_LOW_MV) / 1e3
            ),
            Style::default().fg(WARN).add_modifier(Modifier::BOLD),
        )),
        Some(mv) => v.push(Span::raw(format!(" {:.2} V", f64::from(mv) / 1e3))),
        None => v.push(Span::styled(" supply ?", Style::default().fg(DIM))),
    }
    v.push(Span::raw(format!("  up {}", uptime_text(s.uptime_ms))));
    if let Some(l) = s.logger {
        let state = match l.state {
            LoggerState::Capturing { remaining } => format!("capturing ({remaining} to go)"),
            other => frothline_core::wire::device_status::state_name(other).to_string(),
        };
        let full = if l.capacity_bytes > 0 {
            let share = 100.0 * l.used_bytes as f64 / l.capacity_bytes as f64;
            format!(", log {share:.0} %")
        } else {
            String::new()
        };
        let style = match l.state {
            LoggerState::Idle => Style::default().fg(DIM),
            _ => Style::default(),
        };
        v.push(Span::styled(format!("  logger {state}{full}"), style));
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use frothline_core::wire::LoggerStatus;

    fn text(s: &DeviceStatus) -> String {
        status_spans(s).iter().map(|s| s.content.as_ref()).collect()
    }

    #[test]
    fn status_reads_without_colour() {
        assert_eq!(uptime_text(12_345), "12.3 s");
        assert_eq!(uptime_text(725_000), "12 min 05 s");
        assert_eq!(uptime_text(3 * 3_600_000 + 7 * 60_000), "3 h 07 min");
        assert_eq!(uptime_text(2 * 86_400_000 + 3 * 3_600_000), "2 d 03 h");
        let mut s = DeviceStatus {
            supply_mv: Some(3_301),
            uptime_ms: 725_000,
            logger: Some(LoggerStatus {
                state: LoggerState::Capturing { remaining: 17 },
                used_bytes: 12_288,
                capacity_bytes: 61_440,
            }),
        };
        assert_eq!(
            text(&s),
            " 3.30 V  up 12 min 05 s  logger capturing (17 to go), log 20 %"
        );
        s.supply_mv = Some(2_940);
        s.logger = None;
        assert_eq!(text(&s), " 2.94 V LOW (< 3.0 V)  up 12 min 05 s");
        let low = &status_spans(&s)[0];
        assert_eq!(low.style.fg, Some(WARN));
        s.supply_mv = None;
        assert_eq!(text(&s), " supply ?  up 12 min 05 s");
    }
}
