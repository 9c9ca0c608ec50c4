//! The device's command handler: command frames in, one Ack or Nack out per command.
//!
//! ```text
//! bytes -> accumulate to 0x00 -> COBS^-1 -> CRC -> header
//!   device != HOST_ID            -> ignored (counted): an echo of the device's own output
//!   same seq and CRC as the last -> the last answer again, not executed again
//!   version != PROTOCOL_VERSION  -> Nack UnsupportedVersion
//!   not a command kind           -> Nack UnknownCommand
//!   body does not parse exactly  -> Nack Malformed
//!   StartRun while running       -> Nack AlreadyRunning   (the run goes on)
//!   StopRun while stopped        -> Nack NotRunning
//!   else the target carries it out -> Ack, or the Nack reason it gives
//! ```
//!
//! Every device (the firmware and the host's simulated device) answers commands through
//! this one type, so the rules of `docs/wire-protocol.md` section 7 hold alike on both. The
//! device-specific work is behind [`CommandTarget`]. Work per byte is O(1); a frame is
//! parsed once at its delimiter. Memory: one command frame
//! ([`COMMAND_FRAME_BYTES`]) and the last answer.

use crate::wire::codec::{crc32, exact};
use crate::wire::frame::WindowSetting;
use crate::wire::frame::{
    Ack, Body, Header, Kind, Nack, NackReason, ReadLog, Relearn, SetClock, SetLevels, StartRun,
};
use crate::wire::{cobs_max_encoded, CRC_BYTES, HOST_ID, PROTOCOL_VERSION};
use postcard::experimental::max_size::MaxSize;

const fn max(a: usize, b: usize) -> usize {
    if a > b {
        a
    } else {
        b
    }
}

/// The longest command frame on the wire, delimiter included: the responder's buffer.
pub const COMMAND_FRAME_BYTES: usize = {
    let mut body = StartRun::POSTCARD_MAX_SIZE;
    body = max(body, WindowSetting::POSTCARD_MAX_SIZE);
    body = max(body, Relearn::POSTCARD_MAX_SIZE);
    body = max(body, SetClock::POSTCARD_MAX_SIZE);
    body = max(body, crate::wire::SetExtras::POSTCARD_MAX_SIZE);
    body = max(body, SetLevels::POSTCARD_MAX_SIZE);
    body = max(body, ReadLog::POSTCARD_MAX_SIZE);
    cobs_max_encoded(Header::POSTCARD_MAX_SIZE + body + CRC_BYTES) + 1
};

/// A command, parsed.
#[derive(Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Command {
    /// 0x20: start a run.
    StartRun(StartRun),
    /// 0x21: stop the run.
    StopRun,
    /// 0x22: set the window policy.
    SetWindow(WindowSetting),
    /// 0x23: re-learn the levels of the probes in the mask.
    Relearn(Relearn),
    /// 0x24: send the device description.
    DescribeRequest,
    /// 0x25: set the device's UTC clock.
    SetClock(SetClock),
    /// 0x26: fix the air and water levels of one tip.
    SetLevels(SetLevels),
    /// 0x27: send a chunk of the field log region.
    ReadLog(ReadLog),
    /// 0x28: full windows (kind 0x0B) on or off.
    SetExtras(bool),
}

/// What a device does for each command. The [`Responder`] has already applied the rules
/// that are the same for every device (who sent it, repeats, version, kind, layout,
/// already running, not running): a method is called only for a command to carry out.
pub trait CommandTarget {
    /// True while a run is in progress.
    fn running(&self) -> bool;
    /// Start a run (called only when none is running). Queue the run's
    /// [`RunStart`](crate::wire::RunStart) frame before returning, so it precedes the Ack.
    fn start_run(&mut self, cmd: &StartRun) -> Result<(), NackReason>;
    /// Stop the run (called only while one is running): close the open window.
    fn stop_run(&mut self) -> Result<(), NackReason>;
    /// Set the window policy (see the spec for the side effects).
    fn set_window(&mut self, setting: WindowSetting) -> Result<(), NackReason>;
    /// Re-learn the levels of the probes in `probes` (bit p = probe p).
    fn relearn(&mut self, probes: u32) -> Result<(), NackReason>;
    /// Queue a device description.
    fn describe(&mut self) -> Result<(), NackReason>;
    /// Fix the air and water levels of one tip from the next frame on. A device that keeps
    /// no settings of its own refuses it as a command it does not carry out.
    fn set_levels(&mut self, levels: &SetLevels) -> Result<(), NackReason> {
        let _ = levels;
        Err(NackReason::UnknownCommand)
    }
    /// Set the device's UTC clock to `utc_ms` (ms since the Unix epoch) as of now. A
    /// device without a clock refuses it as a command it does not carry out.
    fn set_clock(&mut self, utc_ms: u64) -> Result<(), NackReason> {
        let _ = utc_ms;
        Err(NackReason::UnknownCommand)
    }
    /// Queue a [`LogChunk`](crate::wire::LogChunk) of the field log region from `offset`
    /// (before returning, so it precedes the Ack); an offset at or beyond the region's end
    /// is a bad argument. A device without a field log refuses it as a command it does not
    /// carry out.
    fn read_log(&mut self, offset: u32) -> Result<(), NackReason> {
        let _ = offset;
        Err(NackReason::UnknownCommand)
    }
    /// Send window results as full windows (kind 0x0B) from the next one on, or (`on`
    /// false) as kind 0x02 again. A device that cannot refuses it as a command it does not
    /// carry out (the host keeps reading kind 0x02).
    fn set_extras(&mut self, on: bool) -> Result<(), NackReason> {
        let _ = on;
        Err(NackReason::UnknownCommand)
    }
}

/// The answer to one command frame.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Reply {
    /// Carried out.
    Ack(Ack),
    /// Refused.
    Nack(Nack),
}

impl Reply {
    /// The body to send.
    pub const fn body(self) -> Body {
        match self {
            Reply::Ack(a) => Body::Ack(a),
            Reply::Nack(n) => Body::Nack(n),
        }
    }

    /// The sequence number of the command answered.
    pub const fn seq(self) -> u16 {
        match self {
            Reply::Ack(a) => a.seq,
            Reply::Nack(n) => n.seq,
        }
    }
}

/// Counters of a responder (saturating).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ResponderStats {
    /// Commands handed to the target (carried out or refused by it).
    pub executed: u32,
    /// Repeats of the last command (same seq and CRC), answered again and not executed.
    pub repeats: u32,
    /// Acks produced (repeats included).
    pub acks: u32,
    /// Nacks produced (repeats included).
    pub nacks: u32,
    /// Frames that could not be read: bad COBS, shorter than a header and CRC, CRC
    /// mismatch, an unreadable header, longer than a command frame. Not answered.
    pub unreadable: u32,
    /// Valid frames whose header device is not [`HOST_ID`] (an echo, another device). Not
    /// answered.
    pub not_from_host: u32,
}

/// The device's command handler (see the module docs).
#[derive(Clone, Debug)]
pub struct Responder {
    buf: [u8; COMMAND_FRAME_BYTES],
    len: usize,
    overflow: bool,
    /// The last answered command: its seq, its frame CRC, the answer.
    last: Option<(u16, u32, Reply)>,
    stats: ResponderStats,
}

impl Default for Responder {
    fn default() -> Self {
        Self::new()
    }
}

fn bump(c: &mut u32) {
    *c = c.saturating_add(1);
}

impl Responder {
    /// A responder that has seen no command.
    pub const fn new() -> Self {
        Responder {
            buf: [0; COMMAND_FRAME_BYTES],
            len: 0,
            overflow: false,
            last: None,
            stats: ResponderStats {
                executed: 0,
                repeats: 0,
                acks: 0,
                nacks: 0,
                unreadable: 0,
                not_from_host: 0,
            },
        }
    }

    /// The counters.
    pub fn stats(&self) -> &ResponderStats {
        &self.stats
    }

    /// Take in one received byte; at a delimiter that ends a command frame, the answer
    /// to send.
    pub fn feed<T: CommandTarget>(&mut self, byte: u8, target: &mut T) -> Option<Reply> {
        if byte != 0 {
            match self.buf.get_mut(self.len) {
                Some(slot) if !self.overflow => {
                    *slot = byte;
                    self.len += 1;
                }
                _ => self.overflow = true,
            }
            return None;
        }
        let n = core::mem::take(&mut self.len);
        if core::mem::take(&mut self.overflow) {
            bump(&mut self.stats.unreadable);
            return None;
        }
        if n == 0 {
            return None;
        }
        let mut frame = [0u8; COMMAND_FRAME_BYTES];
        let (dst, src) = frame.get_mut(..n).zip(self.buf.get(..n))?;
        dst.copy_from_slice(src);
        self.frame(dst, target)
    }

    /// Answer one frame: its COBS bytes without the delimiter (overwritten in place).
    pub fn frame<T: CommandTarget>(&mut self, cobs: &mut [u8], target: &mut T) -> Option<Reply> {
        let Ok(n) = cobs::decode_in_place(cobs) else {
            bump(&mut self.stats.unreadable);
            return None;
        };
        let data = cobs.get(..n).unwrap_or(&[]);
        const MIN_HEADER: usize = 4;
        if data.len() < MIN_HEADER + CRC_BYTES {
            bump(&mut self.stats.unreadable);
            return None;
        }
        let (payload, tail) = data.split_at(data.len() - CRC_BYTES);
        let crc = u32::from_le_bytes([tail[0], tail[1], tail[2], tail[3]]);
        if crc32(payload) != crc {
            bump(&mut self.stats.unreadable);
            return None;
        }
        let Ok((header, body)) = postcard::take_from_bytes::<Header>(payload) else {
            bump(&mut self.stats.unreadable);
            return None;
        };
        if header.device != HOST_ID {
            bump(&mut self.stats.not_from_host);
            return None;
        }
        let seq = header.seq;
        if let Some((s, c, reply)) = self.last {
            if s == seq && c == crc {
                bump(&mut self.stats.repeats);
                self.count(reply);
                return Some(reply);
            }
        }
        let result = self.execute(&header, body, target);
        let reply = match result {
            Ok(()) => Reply::Ack(Ack { seq }),
            Err(reason) => Reply::Nack(Nack { seq, reason }),
        };
        self.last = Some((seq, crc, reply));
        self.count(reply);
        Some(reply)
    }

    fn count(&mut self, reply: Reply) {
        match reply {
            Reply::Ack(_) => bump(&mut self.stats.acks),
            Reply::Nack(_) => bump(&mut self.stats.nacks),
        }
    }

    fn execute<T: CommandTarget>(
        &mut self,
        header: &Header,
        body: &[u8],
        target: &mut T,
    ) -> Result<(), NackReason> {
        if header.version != PROTOCOL_VERSION {
            return Err(NackReason::UnsupportedVersion);
        }
        let cmd = match header.kind() {
            Some(Kind::StartRun) => {
                Command::StartRun(exact(body).map_err(|_| NackReason::Malformed)?)
            }
            Some(Kind::StopRun) => empty(body, Command::StopRun)?,
            Some(Kind::SetWindow) => {
                Command::SetWindow(exact(body).map_err(|_| NackReason::Malformed)?)
            }
            Some(Kind::Relearn) => {
                Command::Relearn(exact(body).map_err(|_| NackReason::Malformed)?)
            }
            Some(Kind::DescribeRequest) => empty(body, Command::DescribeRequest)?,
            Some(Kind::SetExtras) => {
                let e: crate::wire::SetExtras = exact(body).map_err(|_| NackReason::Malformed)?;
                Command::SetExtras(e.on)
            }
            Some(Kind::SetClock) => {
                Command::SetClock(exact(body).map_err(|_| NackReason::Malformed)?)
            }
            Some(Kind::SetLevels) => {
                Command::SetLevels(exact(body).map_err(|_| NackReason::Malformed)?)
            }
            Some(Kind::ReadLog) => {
                Command::ReadLog(exact(body).map_err(|_| NackReason::Malformed)?)
            }
            _ => return Err(NackReason::UnknownCommand),
        };
        match cmd {
            Command::StartRun(_) if target.running() => return Err(NackReason::AlreadyRunning),
            Command::StopRun if !target.running() => return Err(NackReason::NotRunning),
            _ => {}
        }
        bump(&mut self.stats.executed);
        match cmd {
            Command::StartRun(s) => target.start_run(&s),
            Command::StopRun => target.stop_run(),
            Command::SetWindow(w) => target.set_window(w),
            Command::Relearn(r) => target.relearn(r.probes),
            Command::DescribeRequest => target.describe(),
            Command::SetClock(c) => target.set_clock(c.utc_ms),
            Command::SetExtras(on) => target.set_extras(on),
            Command::SetLevels(l) => target.set_levels(&l),
            Command::ReadLog(r) => target.read_log(r.offset),
        }
    }
}

fn empty(body: &[u8], cmd: Command) -> Result<Command, NackReason> {
    if body.is_empty() {
        Ok(cmd)
    } else {
        Err(NackReason::Malformed)
    }
}
