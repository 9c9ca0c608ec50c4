//! The dashboard's tip-health view (key `c`, after the strip charts): every tip's levels
//! in use, its swing and its interfaces per second, from the device's tip-health reports
//! (wire kind 0x09, about one per probe per second).
//!
//! A tip that has stopped switching is what a technician must see first, so the rows are
//! ordered by state, worst first, and the state is a word (`STUCK`, `SMALL SWING`,
//! `learning`, `ok`) with a `!` before the probe of a tip in trouble: it reads without
//! colour (colour only repeats it).
//!
//! States, first that applies:
//! - `STUCK`: the tip's own `stuck` flag, or no interface at all in a window of frames;
//! - `learning`: no levels yet, or the tip's `levels_not_learnt` flag;
//! - `SMALL SWING`: a swing below 10 % of the 16-bit ADC range (6554 counts), the same
//!   criterion as `frothline tipcheck`'s `small_swing`;
//! - `ok`.

use crate::live::state::LiveState;
use frothline_core::wire::{TipReport, TipState};
use frothline_core::Flags;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph};
use ratatui::Frame;

/// Swing below which a tip reads `SMALL SWING`, counts: 10 % of a 16-bit range.
pub const SMALL_SWING_COUNTS: u16 = 6_554;

/// The state of one tip, worst first.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum TipCondition {
    /// Not switching.
    Stuck,
    /// A swing too small for a clean threshold.
    SmallSwing,
    /// Levels not learnt yet.
    Learning,
    /// Switching, levels known.
    Ok,
}

impl TipCondition {
    /// The condition of tip `t` over a window of `frames` frames.
    pub fn of(t: &TipState, frames: u32) -> Self {
        let f = Flags(t.flags);
        if f.contains(Flags::STUCK)
            || f.contains(Flags::TRAILING_STUCK)
            || (frames > 0 && t.interfaces == 0)
        {
            return TipCondition::Stuck;
        }
        match t.levels {
            None => TipCondition::Learning,
            Some(_) if f.contains(Flags::LEVELS_NOT_LEARNT) => TipCondition::Learning,
            Some(l) if l.swing() < SMALL_SWING_COUNTS => TipCondition::SmallSwing,
            Some(_) => TipCondition::Ok,
        }
    }

    /// The word shown.
    pub fn word(self) -> &'static str {
        match self {
            TipCondition::Stuck => "STUCK",
            TipCondition::SmallSwing => "SMALL SWING",
            TipCondition::Learning => "learning",
            TipCondition::Ok => "ok",
        }
    }

    fn colour(self) -> Color {
        match self {
            TipCondition::Stuck => Color::Red,
            TipCondition::SmallSwing | TipCondition::Learning => Color::Yellow,
            TipCondition::Ok => Color::Green,
        }
    }
}

/// One line of the view.
#[derive(Clone, Debug, PartialEq)]
pub struct TipLine {
    /// Probe name and tip (`L` leading, `T` trailing).
    pub probe: String,
    /// Which tip.
    pub tip: char,
    /// Levels in use (air, water), counts.
    pub levels: Option<(i16, i16)>,
    /// |water - air|, counts.
    pub swing: Option<u16>,
    /// Interfaces per second in the reported window.
    pub interfaces_per_s: Option<f32>,
    /// The state.
    pub condition: TipCondition,
}

fn line_of(name: &str, tip: char, r: &TipReport, t: &TipState, fs: u32) -> TipLine {
    TipLine {
        probe: name.to_string(),
        tip,
        levels: t.levels.map(|l| (l.air, l.water)),
        swing: t.levels.map(|l| l.swing()),
        interfaces_per_s: t.interfaces_per_s(r.frames, fs as f32),
        condition: TipCondition::of(t, r.frames),
    }
}

/// Every reported tip of every device, worst state first, then highest probe first.
pub fn tip_lines(state: &LiveState) -> Vec<TipLine> {
    let mut v = Vec::new();
    for (_, d) in state.devices.iter() {
        for p in &d.probes {
            let Some(r) = &p.tips else {
                continue;
            };
            v.push((
                p.elevation_mm,
                line_of(&p.name, 'L', r, &r.leading, d.sample_rate_hz),
            ));
            if let Some(t) = &r.trailing {
                v.push((
                    p.elevation_mm,
                    line_of(&p.name, 'T', r, t, d.sample_rate_hz),
                ));
            }
        }
    }
    v.sort_by(|a, b| a.1.condition.cmp(&b.1.condition).then(b.0.total_cmp(&a.0)));
    v.into_iter().map(|(_, l)| l).collect()
}

fn cell<T: std::fmt::Display>(v: Option<T>, width: usize) -> String {
    v.map_or_else(|| format!("{:>width$}", "-"), |v| format!("{v:>width$}"))
}

/// Draw the view in `area`; rows that do not fit are counted in a `+N more` mark.
pub fn draw_tips(f: &mut Frame, area: Rect, state: &LiveState) {
    let lines = tip_lines(state);
    let stuck = lines
        .iter()
        .filter(|l| l.condition == TipCondition::Stuck)
        .count();
    let room = area.height.saturating_sub(3) as usize;
    // The state word comes right after the tip, so a narrow panel still shows it; the
    // figures follow, most telling first.
    let mut text = vec![Line::from(Span::styled(
        "  probe    tip state         if/s  swing    air  water",
        Style::default().add_modifier(Modifier::BOLD),
    ))];
    let shown = lines.len().min(room);
    for l in &lines[..shown] {
        let bang = if l.condition <= TipCondition::SmallSwing {
            '!'
        } else {
            ' '
        };
        let rest = format!(
            " {} {} {} {}",
            cell(l.interfaces_per_s.map(|x| format!("{x:.0}")), 6),
            cell(l.swing, 6),
            cell(l.levels.map(|x| x.0), 6),
            cell(l.levels.map(|x| x.1), 6),
        );
        text.push(Line::from(vec![
            Span::raw(format!(
                "{bang} {:<8}  {}  ",
                l.probe.chars().take(8).collect::<String>(),
                l.tip
            )),
            Span::styled(
                format!("{:<11}", l.condition.word()),
                Style::default().fg(l.condition.colour()),
            ),
            Span::raw(rest),
        ]));
    }
    if lines.is_empty() {
        text.push(Line::from(
            "  no tip report yet (one comes after each health frame)",
        ));
    }
    let head = if stuck > 0 {
        format!(" tips: {stuck} STUCK (c: next) ")
    } else {
        " tips: none stuck (c: next) ".to_string()
    };
    let mut block = Block::default().borders(Borders::ALL).title(Span::styled(
        head,
        Style::default()
            .fg(Color::Cyan)
            .add_modifier(Modifier::BOLD),
    ));
    if lines.len() > shown {
        block = block.title_bottom(Span::styled(
            format!(" +{} more ", lines.len() - shown),
            Style::default().fg(Color::DarkGray),
        ));
    }
    f.render_widget(Paragraph::new(text).block(block), area);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::live::state::StripView;
    use crate::shared::session::Event;
    use frothline_core::wire::{DeviceDescription, ProbeLayout, TipHealth, TipLevels};
    use std::time::Instant;

    fn tip(levels: Option<(i16, i16)>, interfaces: u32, flags: u32) -> TipState {
        TipState {
            levels: levels.map(|(air, water)| TipLevels { air, water }),
            interfaces,
            bubbles: interfaces / 2,
            void_fraction: 2_000,
            flags,
        }
    }

    /// A device of four single-tip probes (names chosen to read as no symbol) and one
    /// tip-health report each: one switching, one stuck, one with a small swing, one
    /// still learning.
    fn state(now: Instant) -> LiveState {
        let mut s = LiveState::new(&["/dev/ttyUSB0".to_string()]);
        s.started = Some(now);
        let names = ["north", "south", "east", "west"];
        let name = |_: u16, i: usize| names[i].to_string();
        let mut desc = DeviceDescription {
            firmware: Default::default(),
            sample_rate_millihz: 20_000_000,
            channels: 4,
            window: frothline_core::wire::WindowSetting::Frames(2_000),
            probes: Default::default(),
        };
        for i in 0..4u8 {
            let _ = desc.probes.push(ProbeLayout {
                station: 0,
                leading: i,
                trailing: None,
                elevation: 100 * (i as i32 + 1),
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
        let mut tips = TipHealth::new();
        let states = [
            tip(Some((26_000, 3_000)), 40, 0),
            tip(Some((26_000, 3_000)), 0, Flags::STUCK.0),
            tip(Some((26_000, 22_000)), 30, 0),
            tip(None, 12, Flags::LEVELS_NOT_LEARNT.0),
        ];
        for (i, t) in states.into_iter().enumerate() {
            let _ = tips.push(TipReport {
                probe: i as u8,
                start: 0,
                frames: 2_000,
                leading: t,
                trailing: None,
            });
        }
        s.apply(
            &Event::TipHealth {
                port: 0,
                device: 7,
                tips,
            },
            now,
            &name,
        );
        s.strip_view = StripView::Tips;
        s
    }

    #[test]
    fn tips_are_ordered_worst_first_with_words_and_rates() {
        let s = state(Instant::now());
        let l = tip_lines(&s);
        let got: Vec<(&str, TipCondition)> =
            l.iter().map(|l| (l.probe.as_str(), l.condition)).collect();
        assert_eq!(
            got,
            vec![
                ("south", TipCondition::Stuck),
                ("east", TipCondition::SmallSwing),
                ("west", TipCondition::Learning),
                ("north", TipCondition::Ok),
            ]
        );
        // 40 interfaces in 2000 frames at 20 kHz (0.1 s): 400 per second.
        assert_eq!(l[3].interfaces_per_s, Some(400.0));
        assert_eq!(l[3].swing, Some(23_000));
        assert_eq!(l[1].swing, Some(4_000));
    }

    /// At every tested size the view names every tip's probe and its state in words, and
    /// a stuck tip is marked with `!` and counted in the title (no colour needed).
    #[test]
    fn the_tip_view_reads_without_colour_at_every_size() {
        let now = Instant::now();
        let s = state(now);
        for (w, h) in [(80, 24), (100, 30), (160, 48)] {
            let text = crate::live::dashboard::render_text(&s, now, w, h).join("\n");
            assert!(text.contains("1 STUCK"), "{w}x{h}\n{text}");
            for word in ["! south", "STUCK", "SMALL SWING", "learning"] {
                assert!(
                    text.contains(word) || text.contains("more"),
                    "{word} at {w}x{h}\n{text}"
                );
            }
            assert!(
                text.contains("! south"),
                "the stuck tip is on screen at {w}x{h}\n{text}"
            );
        }
    }
}
