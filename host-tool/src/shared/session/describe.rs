//! Events, refusals and window settings in words, for the live view and the log.

use super::{Event, Rejected};
use crate::shared::commands::kind_name;
use frothline_core::wire::{NackReason, WindowSetting, PROTOCOL_VERSION};

/// A history line for an event (`None` for window results, which the live view shows in
/// its own way).
pub fn describe_event(e: &Event, ports: &[String]) -> Option<String> {
    let port = |p: &usize| ports.get(*p).map_or("?", |s| s.as_str()).to_string();
    Some(match e {
        Event::LinkUp { port: p } => format!("{}: link up", port(p)),
        Event::LinkDown { port: p, reason } => {
            format!("{}: link DOWN ({reason}); reopening every second", port(p))
        }
        Event::Describe {
            port: p,
            device,
            desc,
        } => format!(
            "{}: device {device}: {} probes, {} Hz, window {}, {} channels, firmware {}",
            port(p),
            desc.probes.len(),
            desc.sample_rate_millihz as f64 / 1000.0,
            setting_text(&desc.window, desc.sample_rate_millihz as f64 / 1000.0),
            desc.channels,
            desc.firmware.as_str()
        ),
        Event::Window { .. }
        | Event::Health { .. }
        | Event::Status { .. }
        | Event::TipHealth { .. } => return None,
        Event::Levels {
            port: p,
            device,
            levels,
        } => {
            let tips = levels
                .iter()
                .flat_map(|p| core::iter::once(p.leading).chain(p.trailing));
            let (mut fixed, mut learnt, mut none) = (0, 0, 0);
            for t in tips {
                match (t.levels.is_some(), t.fixed) {
                    (true, true) => fixed += 1,
                    (true, false) => learnt += 1,
                    (false, _) => none += 1,
                }
            }
            format!(
                "{}: device {device} levels in use: {fixed} tips fixed, {learnt} learnt, \
                 {none} not learnt yet",
                port(p)
            )
        }
        Event::Front {
            port: p,
            device,
            front,
        } => format!(
            "{}: device {device} front at probe {} (station {}), frame {}",
            port(p),
            front.probe,
            front.station,
            front.frame
        ),
        Event::Profile {
            port: p,
            device,
            fit,
        } => format!(
            "{}: device {device} profile of station {} ({} probes)",
            port(p),
            fit.station,
            fit.probes_used
        ),
        Event::Reply {
            port: p,
            device,
            seq,
            command,
            nack,
        } => {
            let what = command.map_or_else(
                || format!("command #{seq}"),
                |k| format!("{} #{seq}", kind_name(k)),
            );
            match nack {
                None => format!("{}: device {device} ACK {what}", port(p)),
                Some(r) => format!(
                    "{}: device {device} NACK {what}: {}",
                    port(p),
                    nack_text(*r)
                ),
            }
        }
        Event::Sent { port: p, seq, kind } => {
            format!("{}: sent {} #{seq}", port(p), kind_name(*kind))
        }
        Event::SeqGap {
            port: p,
            device,
            seq,
            missing,
        } => format!(
            "{}: device {device}: {missing} frame(s) lost before #{seq}",
            port(p)
        ),
        Event::Duplicate {
            port: p,
            device,
            seq,
        } => {
            format!(
                "{}: device {device}: repeated frame #{seq} ignored",
                port(p)
            )
        }
        Event::Restarted { port: p, device } => {
            format!("{}: device {device} restarted its frame numbering", port(p))
        }
        Event::Rejected { port: p, why } => format!(
            "{}: frame rejected ({})",
            port(p),
            match why {
                Rejected::Framing => "not a frame: bad COBS or too short",
                Rejected::Crc => "CRC mismatch",
                Rejected::Malformed => "malformed payload",
                Rejected::Oversize => "too long",
            }
        ),
        Event::Unsupported { port: p, header } if header.version != PROTOCOL_VERSION => format!(
            "{}: device {}: frame of protocol version {} skipped: this build reads version \
             {PROTOCOL_VERSION} only (update the device's firmware or the host tool)",
            port(p),
            header.device,
            header.version
        ),
        Event::Unsupported { port: p, header } => format!(
            "{}: device {}: frame of kind 0x{:02x} not understood (skipped)",
            port(p),
            header.device,
            header.kind
        ),
        Event::RunStart {
            port: p,
            device,
            run,
        } => format!(
            "{}: device {device} run {} started{}{}",
            port(p),
            run.run,
            if run.label.is_empty() {
                String::new()
            } else {
                format!(" `{}`", run.label)
            },
            run.utc_ms.map_or_else(String::new, |ms| format!(
                " at {}",
                crate::shared::archive::utc_iso(ms.saturating_mul(1000))
            ))
        ),
        Event::Stray {
            port: p,
            device,
            kind,
        } => format!(
            "{}: a {} frame from {device} came in on the link (ignored)",
            port(p),
            kind_name(*kind)
        ),
    })
}

/// Words for a Nack reason.
pub fn nack_text(r: NackReason) -> String {
    match r {
        NackReason::UnknownCommand => "unknown command".into(),
        NackReason::BadArgument => "bad argument".into(),
        NackReason::Busy => "busy".into(),
        NackReason::NotRunning => "no run in progress".into(),
        NackReason::AlreadyRunning => "a run is already in progress".into(),
        NackReason::UnsupportedVersion => "protocol version not supported".into(),
        NackReason::Malformed => "malformed command frame".into(),
        other => format!("reason code {}", other.code()),
    }
}

/// Words for a window setting at `fs` Hz.
pub fn setting_text(s: &WindowSetting, fs: f64) -> String {
    match *s {
        WindowSetting::Whole => "whole run".into(),
        WindowSetting::Frames(n) if fs > 0.0 => {
            let secs = n as f64 / fs;
            if secs < 1.0 {
                format!("{:.0} ms", secs * 1e3)
            } else {
                format!("{secs:.2} s")
            }
        }
        WindowSetting::Frames(n) => format!("{n} frames"),
        WindowSetting::Bubbles {
            count,
            probe,
            max_frames,
        } => match max_frames {
            Some(m) => format!("{count} bubbles of probe {probe} (at most {m} frames)"),
            None => format!("{count} bubbles of probe {probe}"),
        },
        WindowSetting::AfterFront { frames } => format!(
            "{} from each front",
            setting_text(&WindowSetting::Frames(frames), fs)
        ),
    }
}
