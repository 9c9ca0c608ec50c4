//! Host -> device commands: StartRun, StopRun, SetWindow, Relearn, DescribeRequest,
//! SetClock and SetLevels as wire frames.
//!
//! The host writes its commands with the host id ([`HOST_DEVICE_ID`], the protocol's
//! [`wire::HOST_ID`]: devices ignore frames with any other id) and its own sequence
//! numbers, one counter per link; the device answers each command with an `Ack` or a
//! `Nack` that quotes the command's sequence number, so [`CommandLog`] can tell which
//! command a reply is about. A StartRun carries the host's UTC, which the device quotes
//! in the run's RunStart frame; SetClock (sent when the host connects) sets the device's
//! clock, so the runs a device starts by itself are dated too.

use frothline_core::wire::{
    self, Body, Frame, Kind, ReadLog, Relearn, SetClock, SetLevels, StartRun, WindowSetting,
};
use std::collections::VecDeque;

/// The device id the host writes into its command frames (no device uses it).
pub const HOST_DEVICE_ID: u16 = wire::HOST_ID;

/// A command for a device.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Command {
    /// Start a run with this label (at most [`wire::LABEL_BYTES`] bytes of UTF-8): the
    /// device starts the run's sample clock at frame 0 (refused while a run is going).
    StartRun(String),
    /// Stop the run.
    StopRun,
    /// Set the window policy.
    SetWindow(WindowSetting),
    /// Re-learn the air/water levels of the probes in the mask (bit p = probe p).
    Relearn(u32),
    /// Ask for the device description.
    DescribeRequest,
    /// Fix one tip's air and water levels (counts): a calibration's result.
    SetLevels(SetLevels),
    /// Set the device's UTC clock to the host's UTC now (taken when the frame is built).
    SetClock,
    /// Ask for a chunk of the device's field log region.
    ReadLog(ReadLog),
    /// Window results as full windows (kind 0x0B, every column of windows.csv), or not.
    SetExtras(bool),
}

impl Command {
    /// The frame kind of the command.
    pub fn kind(&self) -> Kind {
        match self {
            Command::StartRun(_) => Kind::StartRun,
            Command::StopRun => Kind::StopRun,
            Command::SetWindow(_) => Kind::SetWindow,
            Command::Relearn(_) => Kind::Relearn,
            Command::DescribeRequest => Kind::DescribeRequest,
            Command::SetLevels(_) => Kind::SetLevels,
            Command::SetClock => Kind::SetClock,
            Command::ReadLog(_) => Kind::ReadLog,
            Command::SetExtras(_) => Kind::SetExtras,
        }
    }

    /// The body of the command frame; fails for a label that does not fit.
    pub fn body(&self) -> Result<Body, String> {
        Ok(match self {
            Command::StartRun(label) => {
                let mut s = start_run(label)?;
                s.utc_ms = Some(crate::shared::archive::now_us() / 1000);
                Body::StartRun(s)
            }
            Command::StopRun => Body::StopRun,
            Command::SetWindow(s) => Body::SetWindow(*s),
            Command::Relearn(mask) => Body::Relearn(Relearn { probes: *mask }),
            Command::DescribeRequest => Body::DescribeRequest,
            Command::SetLevels(l) => Body::SetLevels(*l),
            Command::ReadLog(r) => Body::ReadLog(*r),
            Command::SetExtras(on) => Body::SetExtras(frothline_core::wire::SetExtras { on: *on }),
            Command::SetClock => Body::SetClock(SetClock {
                utc_ms: crate::shared::archive::now_us() / 1000,
            }),
        })
    }
}

/// A short name of a command kind, for history lines.
pub fn kind_name(kind: Kind) -> &'static str {
    match kind {
        Kind::Describe => "describe",
        Kind::Windows => "windows",
        Kind::Front => "front",
        Kind::Profile => "profile",
        Kind::Health => "health",
        Kind::RunStart => "run-start",
        Kind::StartRun => "start-run",
        Kind::StopRun => "stop-run",
        Kind::SetWindow => "set-window",
        Kind::Relearn => "relearn",
        Kind::DescribeRequest => "describe-request",
        Kind::SetClock => "set-clock",
        Kind::ReadLog => "read-log",
        Kind::LogChunk => "log-chunk",
        Kind::SetLevels => "set-levels",
        Kind::SetExtras => "set-extras",
        Kind::FullWindows => "full-windows",
        Kind::Levels => "levels",
        Kind::DeviceStatus => "device-status",
        Kind::Ack => "ack",
        Kind::Nack => "nack",
        _ => "unknown",
    }
}

/// A [`StartRun`] body with `label`, or why the label does not fit.
pub fn start_run(label: &str) -> Result<StartRun, String> {
    let mut s = StartRun::default();
    if s.label.push_str(label).is_err() {
        return Err(format!(
            "run label `{label}` is {} bytes; the wire carries at most {}",
            label.len(),
            wire::LABEL_BYTES
        ));
    }
    Ok(s)
}

/// Check a run label for the command line.
pub fn parse_label(label: &str) -> Result<String, String> {
    start_run(label).map(|_| label.to_string())
}

/// Sequence numbers and kinds of the commands sent on one link, to name the replies.
#[derive(Clone, Debug)]
pub struct CommandLog {
    device: u16,
    seq: u16,
    sent: VecDeque<(u16, Kind)>,
}

impl Default for CommandLog {
    fn default() -> Self {
        Self::new(HOST_DEVICE_ID)
    }
}

/// Commands remembered per link for naming replies.
const REMEMBERED: usize = 64;

impl CommandLog {
    /// A log for a host writing as `device`, first sequence number 0.
    pub fn new(device: u16) -> Self {
        CommandLog {
            device,
            seq: 0,
            sent: VecDeque::new(),
        }
    }

    /// A log whose first sequence number is `seq`. A host starts each session somewhere
    /// else (from its clock): a device answers a command with the sequence number and CRC
    /// of the last one it answered as a repeat, without carrying it out (docs/wire-protocol.md
    /// section 8), so a new session that began at 0 again would have its first
    /// DescribeRequest taken for the previous session's and get no description.
    pub fn starting_at(device: u16, seq: u16) -> Self {
        CommandLog {
            seq,
            ..Self::new(device)
        }
    }

    /// Encode `cmd` as the next frame of this link: its sequence number and its bytes
    /// (0x00 delimiter included).
    pub fn encode(&mut self, cmd: &Command) -> Result<(u16, Vec<u8>), String> {
        let frame = Frame {
            device: self.device,
            seq: self.seq,
            body: cmd.body()?,
        };
        let mut buf = [0u8; wire::MAX_FRAME_BYTES];
        let bytes = wire::encode(&frame, &mut buf)
            .map_err(|e| format!("cannot encode {}: {e}", kind_name(cmd.kind())))?
            .to_vec();
        let seq = self.seq;
        self.note_sent(seq, cmd.kind());
        self.seq = self.seq.wrapping_add(1);
        Ok((seq, bytes))
    }

    /// Remember a command frame seen going out (e.g. read back from an archive).
    pub fn note_sent(&mut self, seq: u16, kind: Kind) {
        self.sent.retain(|(s, _)| *s != seq);
        self.sent.push_back((seq, kind));
        while self.sent.len() > REMEMBERED {
            self.sent.pop_front();
        }
    }

    /// The kind of the command sent with `seq`, if remembered.
    pub fn kind_of(&self, seq: u16) -> Option<Kind> {
        self.sent
            .iter()
            .rev()
            .find(|(s, _)| *s == seq)
            .map(|(_, k)| *k)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use frothline_core::wire::{Decoder, FeedResult};

    #[test]
    fn commands_encode_to_frames_the_decoder_reads_back() {
        let mut log = CommandLog::default();
        let cmds = [
            Command::DescribeRequest,
            Command::StartRun("flume-7".into()),
            Command::SetWindow(WindowSetting::Frames(4000)),
            Command::Relearn(0b101),
            Command::StopRun,
        ];
        let mut dec: Decoder = Decoder::new();
        for (i, c) in cmds.iter().enumerate() {
            let (seq, bytes) = log.encode(c).unwrap();
            assert_eq!(seq, i as u16);
            match dec.feed(&bytes) {
                FeedResult::Frame {
                    frame, remaining, ..
                } => {
                    assert!(remaining.is_empty());
                    assert_eq!(frame.device, HOST_DEVICE_ID);
                    assert_eq!(frame.body.kind(), c.kind());
                    if !matches!(c, Command::StartRun(_)) {
                        assert_eq!(frame.body, c.body().unwrap());
                    }
                }
                other => panic!("{other:?}"),
            }
            assert_eq!(log.kind_of(seq), Some(c.kind()));
        }
        assert_eq!(dec.stats().lost, 0);
    }

    #[test]
    fn long_labels_are_refused() {
        assert!(parse_label("0123456789abcdef").is_ok());
        assert!(parse_label("0123456789abcdefg").is_err());
        assert!(Command::StartRun("x".repeat(40)).body().is_err());
    }
}
