//! The streaming decoder: bytes from a serial port in, frames out.
//!
//! ```text
//! feed(bytes) -> accumulate until 0x00 -> COBS^-1 in place -> CRC -> header -> body
//!                   | more than N bytes: discard up to the next 0x00 (Oversize)
//! ```
//!
//! Shaped like postcard's `CobsAccumulator`: [`Decoder::feed`] returns what the bytes
//! completed together with the bytes it has not looked at yet, so a read loop is
//!
//! ```
//! # use frothline_core::wire::{Decoder, FeedResult};
//! # let mut dec: Decoder = Decoder::new();
//! # let read: &[u8] = &[];
//! let mut window = read;
//! while !window.is_empty() {
//!     window = match dec.feed(window) {
//!         FeedResult::Consumed => break,
//!         FeedResult::Frame { frame, remaining, .. } => {
//!             // use `frame`
//!             remaining
//!         }
//!         FeedResult::Unsupported { remaining, .. }
//!         | FeedResult::BadFraming { remaining }
//!         | FeedResult::CrcFailure { remaining }
//!         | FeedResult::Malformed { remaining }
//!         | FeedResult::Oversize { remaining } => remaining,
//!     };
//! }
//! ```
//!
//! Every 0x00 ends a frame, so after garbage the decoder is back in step at the next
//! delimiter: garbage costs at most the one frame it runs into. Empty frames (0x00 0x00)
//! are skipped silently, so a sender may put an extra 0x00 before a frame to mark a start.
//!
//! Sequence numbers are tracked per device id in a table of `D` entries (the least recently
//! seen device is evicted when a new one arrives and the table is full), by the state
//! machine of `docs/wire-protocol.md` section 9 (modulo 65536):
//!
//! ```text
//! distance d = (seq - last - 1) mod 65536
//! Tracking(last): d = 0                      -> InOrder
//!                 seq = last                 -> Duplicate   (contents not to be used)
//!                 seq = 0 and kind Describe  -> Restarted   (a device's first frame)
//!                 0 < d < MAX_GAP            -> Gap(d)      (d frames lost)
//!                 else                       -> Stale, and Doubt(last, seq)
//! Doubt(last, c): seq = c + 1                -> Restarted   (c un-counted from stale)
//!                 else                       -> as Tracking(last)
//! ```

use crate::wire::codec::{decode, WireError};
use crate::wire::frame::{Frame, Header};
use crate::wire::{MAX_FRAME_BYTES, MIN_FRAME_BYTES};

/// The largest forward jump of a sequence number read as frames lost on the link. A larger
/// jump (a restart from a number of 4096 or more, a stray frame) is held in doubt: the
/// next frame tells a restart from a stray (see the module docs). 4096 frames are more
/// than three minutes of 8 probes at 20 windows/s; a longer silence shows as a link gap.
pub const MAX_GAP: u16 = 4096;

/// What one call to [`Decoder::feed`] produced. `remaining` is the input after the
/// delimiter that completed the event: feed it next.
// A decoded frame is returned by value (no alloc to box it in); it is moved once.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, PartialEq)]
pub enum FeedResult<'a> {
    /// Every byte was taken in; no frame is complete yet.
    Consumed,
    /// A valid frame.
    Frame {
        /// The frame.
        frame: Frame,
        /// Where its sequence number stands for its device.
        seq: SeqCheck,
        /// Unread input.
        remaining: &'a [u8],
    },
    /// A frame with a valid CRC and header, of a protocol version or kind this build does
    /// not read. Its sequence number is tracked all the same.
    Unsupported {
        /// Its header.
        header: Header,
        /// Where its sequence number stands for its device.
        seq: SeqCheck,
        /// Unread input.
        remaining: &'a [u8],
    },
    /// Bytes between two delimiters that are not a frame: invalid COBS, or fewer than 8
    /// bytes after COBS decoding (no room for the smallest header and the CRC).
    BadFraming {
        /// Unread input.
        remaining: &'a [u8],
    },
    /// A frame whose CRC did not match.
    CrcFailure {
        /// Unread input.
        remaining: &'a [u8],
    },
    /// A frame whose CRC matched but whose payload did not parse.
    Malformed {
        /// Unread input.
        remaining: &'a [u8],
    },
    /// More than `N` bytes without a delimiter: discarded up to the delimiter.
    Oversize {
        /// Unread input.
        remaining: &'a [u8],
    },
}

impl<'a> FeedResult<'a> {
    /// The unread input (empty for [`FeedResult::Consumed`]).
    pub fn remaining(&self) -> &'a [u8] {
        match self {
            FeedResult::Consumed => &[],
            FeedResult::Frame { remaining, .. }
            | FeedResult::Unsupported { remaining, .. }
            | FeedResult::BadFraming { remaining }
            | FeedResult::CrcFailure { remaining }
            | FeedResult::Malformed { remaining }
            | FeedResult::Oversize { remaining } => remaining,
        }
    }
}

/// How a frame's sequence number relates to the last one of its device.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SeqCheck {
    /// The first frame seen from this device (or since it was forgotten or evicted).
    First,
    /// The next number.
    InOrder,
    /// This many frames are missing before this one (counted as lost).
    Gap(u16),
    /// The same number as the last frame: a repeat.
    Duplicate,
    /// An older number (reordered or replayed); the tracked number is kept.
    Stale,
    /// The device restarted its numbering; tracking continues from here. Either a
    /// Describe with sequence number 0 out of order (a device's first frame after power-on),
    /// or the second of two frames that did not fit, following each other.
    Restarted,
}

/// Counters of a decoder, since it was made.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DecoderStats {
    /// Valid frames returned.
    pub frames: u64,
    /// Valid frames of an unsupported version or kind.
    pub unsupported: u64,
    /// Valid frames of an unsupported protocol version (also counted in `unsupported`).
    pub other_version: u64,
    /// The version of the last such frame (0: none seen).
    pub last_other_version: u8,
    /// Byte runs between delimiters that were no frame: invalid COBS, or fewer than 8
    /// bytes after COBS decoding.
    pub bad_framing: u64,
    /// Frames rejected for their CRC.
    pub crc_failures: u64,
    /// Frames with a valid CRC over a payload that does not parse.
    pub malformed: u64,
    /// Frames longer than the buffer.
    pub oversize: u64,
    /// Bytes of rejected frames (delimiters not counted).
    pub bytes_discarded: u64,
    /// Frames lost, from sequence gaps, all devices.
    pub lost: u64,
    /// Repeated frames, all devices.
    pub duplicates: u64,
    /// Older frames, all devices.
    pub stale: u64,
    /// Restarts of a device's numbering.
    pub restarts: u64,
    /// Devices evicted from the sequence table.
    pub devices_evicted: u64,
}

/// Sequence tracking of one device.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DeviceSeqStats {
    /// Device id.
    pub device: u16,
    /// Last in-order sequence number.
    pub last_seq: u16,
    /// Frames seen (valid CRC).
    pub frames: u64,
    /// Frames lost in gaps.
    pub lost: u64,
    /// Repeats.
    pub duplicates: u64,
    /// Older frames.
    pub stale: u64,
    /// Numbering restarts.
    pub restarts: u64,
}

#[derive(Clone, Copy, Debug)]
struct SeqEntry {
    stats: DeviceSeqStats,
    touched: u64,
    stale_run: Option<u16>,
}

/// A streaming frame decoder with an `N`-byte frame buffer and a sequence table of `D`
/// devices. The defaults hold the largest frame and 8 devices.
#[derive(Clone, Debug)]
pub struct Decoder<const N: usize = MAX_FRAME_BYTES, const D: usize = 8> {
    buf: [u8; N],
    len: usize,
    overflow: bool,
    stats: DecoderStats,
    devices: [Option<SeqEntry>; D],
    tick: u64,
}

impl<const N: usize, const D: usize> Default for Decoder<N, D> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize, const D: usize> Decoder<N, D> {
    /// An empty decoder.
    pub const fn new() -> Self {
        const {
            assert!(
                N >= MIN_FRAME_BYTES,
                "the buffer must hold at least the smallest frame"
            )
        };
        const { assert!(D > 0, "the sequence table needs at least one entry") };
        Decoder {
            buf: [0; N],
            len: 0,
            overflow: false,
            stats: DecoderStats {
                frames: 0,
                unsupported: 0,
                other_version: 0,
                last_other_version: 0,
                bad_framing: 0,
                crc_failures: 0,
                malformed: 0,
                oversize: 0,
                bytes_discarded: 0,
                lost: 0,
                duplicates: 0,
                stale: 0,
                restarts: 0,
                devices_evicted: 0,
            },
            devices: [None; D],
            tick: 0,
        }
    }

    /// Take in bytes until one frame completes (or the input ends). See the module docs for
    /// the read loop.
    pub fn feed<'a>(&mut self, input: &'a [u8]) -> FeedResult<'a> {
        let mut rest = input;
        loop {
            let Some(end) = rest.iter().position(|&b| b == 0) else {
                self.absorb(rest);
                return FeedResult::Consumed;
            };
            self.absorb(&rest[..end]);
            rest = &rest[end + 1..];
            if let Some(result) = self.end_of_frame(rest) {
                return result;
            }
        }
    }

    /// The counters.
    pub fn stats(&self) -> &DecoderStats {
        &self.stats
    }

    /// Sequence tracking of one device, if it is in the table.
    pub fn device(&self, device: u16) -> Option<DeviceSeqStats> {
        self.devices
            .iter()
            .flatten()
            .find(|e| e.stats.device == device)
            .map(|e| e.stats)
    }

    /// Every tracked device.
    pub fn devices(&self) -> impl Iterator<Item = DeviceSeqStats> + '_ {
        self.devices.iter().flatten().map(|e| e.stats)
    }

    /// Forget a device's numbering (e.g. after it was seen to restart): its next frame
    /// counts as [`SeqCheck::First`].
    pub fn forget_device(&mut self, device: u16) {
        for slot in self.devices.iter_mut() {
            if slot.is_some_and(|e| e.stats.device == device) {
                *slot = None;
            }
        }
    }

    /// Bytes of an incomplete frame held.
    pub fn buffered(&self) -> usize {
        self.len
    }

    /// Drop an incomplete frame (e.g. after the port was reopened).
    pub fn clear(&mut self) {
        if self.len > 0 || self.overflow {
            self.stats.bytes_discarded = self.stats.bytes_discarded.saturating_add(self.len as u64);
        }
        self.len = 0;
        self.overflow = false;
    }

    fn absorb(&mut self, bytes: &[u8]) {
        if bytes.is_empty() {
            return;
        }
        if !self.overflow {
            // A frame of N bytes counts its delimiter: at most N - 1 bytes come before it.
            let end = self.len + bytes.len();
            if let Some(dst) = self.buf.get_mut(self.len..end).filter(|_| end < N) {
                dst.copy_from_slice(bytes);
                self.len = end;
                return;
            }
            self.overflow = true;
            self.stats.bytes_discarded = self.stats.bytes_discarded.saturating_add(self.len as u64);
            self.len = 0;
        }
        self.stats.bytes_discarded = self
            .stats
            .bytes_discarded
            .saturating_add(bytes.len() as u64);
    }

    fn end_of_frame<'a>(&mut self, remaining: &'a [u8]) -> Option<FeedResult<'a>> {
        let s = &mut self.stats;
        if self.overflow {
            self.overflow = false;
            s.oversize = s.oversize.saturating_add(1);
            return Some(FeedResult::Oversize { remaining });
        }
        let n = core::mem::take(&mut self.len);
        if n == 0 {
            return None;
        }
        match decode(&mut self.buf[..n]) {
            Ok(frame) => {
                self.stats.frames = self.stats.frames.saturating_add(1);
                let power_on =
                    frame.seq == 0 && matches!(frame.body, crate::wire::Body::Describe(_));
                let seq = self.track(frame.device, frame.seq, power_on);
                Some(FeedResult::Frame {
                    frame,
                    seq,
                    remaining,
                })
            }
            Err(e @ (WireError::UnsupportedVersion(header) | WireError::UnknownKind(header))) => {
                self.stats.unsupported = self.stats.unsupported.saturating_add(1);
                if matches!(e, WireError::UnsupportedVersion(_)) {
                    self.stats.other_version = self.stats.other_version.saturating_add(1);
                    self.stats.last_other_version = header.version;
                }
                let seq = self.track(header.device, header.seq, false);
                Some(FeedResult::Unsupported {
                    header,
                    seq,
                    remaining,
                })
            }
            Err(e) => {
                s.bytes_discarded = s.bytes_discarded.saturating_add(n as u64);
                Some(match e {
                    WireError::Cobs | WireError::TooShort => {
                        s.bad_framing = s.bad_framing.saturating_add(1);
                        FeedResult::BadFraming { remaining }
                    }
                    WireError::Crc => {
                        s.crc_failures = s.crc_failures.saturating_add(1);
                        FeedResult::CrcFailure { remaining }
                    }
                    _ => {
                        s.malformed = s.malformed.saturating_add(1);
                        FeedResult::Malformed { remaining }
                    }
                })
            }
        }
    }

    fn track(&mut self, device: u16, seq: u16, power_on: bool) -> SeqCheck {
        self.tick = self.tick.wrapping_add(1);
        let tick = self.tick;
        let slot = match self
            .devices
            .iter()
            .position(|e| e.is_some_and(|e| e.stats.device == device))
        {
            Some(i) => i,
            None => {
                let free = self.devices.iter().position(Option::is_none);
                let i = free.unwrap_or_else(|| {
                    self.stats.devices_evicted = self.stats.devices_evicted.saturating_add(1);
                    self.devices
                        .iter()
                        .enumerate()
                        .min_by_key(|(_, e)| e.map_or(0, |e| e.touched))
                        .map_or(0, |(i, _)| i)
                });
                self.devices[i] = Some(SeqEntry {
                    stats: DeviceSeqStats {
                        device,
                        last_seq: seq,
                        frames: 1,
                        lost: 0,
                        duplicates: 0,
                        stale: 0,
                        restarts: 0,
                    },
                    touched: tick,
                    stale_run: None,
                });
                return SeqCheck::First;
            }
        };
        let Some(e) = self.devices[slot].as_mut() else {
            return SeqCheck::First;
        };
        let s = &mut self.stats;
        e.touched = tick;
        e.stats.frames = e.stats.frames.saturating_add(1);
        let gap = seq.wrapping_sub(e.stats.last_seq.wrapping_add(1));
        if gap == 0 {
            e.stats.last_seq = seq;
            e.stale_run = None;
            return SeqCheck::InOrder;
        }
        if seq == e.stats.last_seq {
            e.stats.duplicates = e.stats.duplicates.saturating_add(1);
            s.duplicates = s.duplicates.saturating_add(1);
            return SeqCheck::Duplicate;
        }
        if power_on {
            e.stats.last_seq = seq;
            e.stale_run = None;
            e.stats.restarts = e.stats.restarts.saturating_add(1);
            s.restarts = s.restarts.saturating_add(1);
            return SeqCheck::Restarted;
        }
        if gap < MAX_GAP {
            e.stats.last_seq = seq;
            e.stale_run = None;
            e.stats.lost = e.stats.lost.saturating_add(gap as u64);
            s.lost = s.lost.saturating_add(gap as u64);
            return SeqCheck::Gap(gap);
        }
        if e.stale_run.is_some_and(|prev| seq == prev.wrapping_add(1)) {
            e.stats.last_seq = seq;
            e.stale_run = None;
            e.stats.restarts = e.stats.restarts.saturating_add(1);
            s.restarts = s.restarts.saturating_add(1);
            // The frame before, counted stale, belonged to the new numbering.
            e.stats.stale = e.stats.stale.saturating_sub(1);
            s.stale = s.stale.saturating_sub(1);
            return SeqCheck::Restarted;
        }
        e.stale_run = Some(seq);
        e.stats.stale = e.stats.stale.saturating_add(1);
        s.stale = s.stale.saturating_add(1);
        SeqCheck::Stale
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wire::codec::encode;
    use crate::wire::frame::{Ack, Body};

    fn ack(device: u16, seq: u16) -> heapless::Vec<u8, 32> {
        let f = Frame {
            device,
            seq,
            body: Body::Ack(Ack { seq: 1 }),
        };
        let mut buf = [0u8; 32];
        heapless::Vec::from_slice(encode(&f, &mut buf).unwrap()).unwrap()
    }

    fn seq_of(dec: &mut Decoder<64, 2>, bytes: &[u8]) -> SeqCheck {
        match dec.feed(bytes) {
            FeedResult::Frame { seq, remaining, .. } => {
                assert!(remaining.is_empty());
                seq
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn sequence_numbers_wrap_and_gaps_count() {
        let mut dec = Decoder::<64, 2>::new();
        assert_eq!(seq_of(&mut dec, &ack(1, 65534)), SeqCheck::First);
        assert_eq!(seq_of(&mut dec, &ack(1, 65535)), SeqCheck::InOrder);
        assert_eq!(seq_of(&mut dec, &ack(1, 0)), SeqCheck::InOrder);
        assert_eq!(seq_of(&mut dec, &ack(1, 3)), SeqCheck::Gap(2));
        assert_eq!(seq_of(&mut dec, &ack(1, 3)), SeqCheck::Duplicate);
        assert_eq!(seq_of(&mut dec, &ack(1, 1)), SeqCheck::Stale);
        assert_eq!(dec.stats().lost, 2);
        assert_eq!(dec.stats().duplicates, 1);
        assert_eq!(dec.stats().stale, 1);
        // A restart: 0, 1 after 3 (0 is stale, then 1 follows it; no Describe marks it).
        assert_eq!(seq_of(&mut dec, &ack(1, 0)), SeqCheck::Stale);
        assert_eq!(seq_of(&mut dec, &ack(1, 1)), SeqCheck::Restarted);
        assert_eq!(seq_of(&mut dec, &ack(1, 2)), SeqCheck::InOrder);
        assert_eq!(dec.stats().stale, 1);
        assert_eq!(dec.stats().restarts, 1);
    }

    #[test]
    fn devices_are_tracked_apart_and_evicted_oldest_first() {
        let mut dec = Decoder::<64, 2>::new();
        assert_eq!(seq_of(&mut dec, &ack(1, 10)), SeqCheck::First);
        assert_eq!(seq_of(&mut dec, &ack(2, 500)), SeqCheck::First);
        assert_eq!(seq_of(&mut dec, &ack(1, 11)), SeqCheck::InOrder);
        assert_eq!(seq_of(&mut dec, &ack(3, 0)), SeqCheck::First);
        assert_eq!(dec.stats().devices_evicted, 1);
        assert!(dec.device(2).is_none());
        assert_eq!(dec.device(1).unwrap().last_seq, 11);
        assert_eq!(dec.stats().lost, 0);
    }

    #[test]
    fn oversize_then_resync() {
        let mut dec = Decoder::<16, 1>::new();
        let long = [0x55u8; 40];
        assert_eq!(dec.feed(&long), FeedResult::Consumed);
        let good = ack(1, 0);
        let mut input = heapless::Vec::<u8, 64>::new();
        input.push(0).unwrap();
        input.extend_from_slice(&good).unwrap();
        let r = dec.feed(&input);
        assert!(matches!(r, FeedResult::Oversize { .. }), "{r:?}");
        let r = dec.feed(r.remaining());
        assert!(matches!(r, FeedResult::Frame { .. }), "{r:?}");
        assert_eq!(dec.stats().oversize, 1);
        assert_eq!(dec.stats().bytes_discarded, 40);
    }

    #[test]
    fn empty_frames_are_skipped() {
        let mut dec: Decoder = Decoder::new();
        assert_eq!(dec.feed(&[0, 0, 0]), FeedResult::Consumed);
        assert_eq!(dec.stats(), &DecoderStats::default());
    }
}
