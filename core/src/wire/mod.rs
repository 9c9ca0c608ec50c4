//! Wire frames: the compact framed results a device streams over a serial link, and the
//! commands a host sends back.
//!
//! ```text
//! frame   = COBS( payload ++ crc32_le(payload) ) ++ 0x00
//! payload = postcard( Header ) ++ postcard( body of Header.kind )
//! ```
//!
//! One protocol concern per file, the way a small-device network stack lays out its wire
//! formats:
//! - [`frame`]: the header, the frame kinds and every body type, defined once here and shared
//!   by firmware and host;
//! - [`tip_health`], [`levels_in_use`], [`full_windows`], `derived_frame`,
//!   [`device_status`]: the bodies of the kinds added within version 2 (tip health, levels
//!   in use, full windows, derived figures, device status), each with what builds it;
//! - [`quant`]: the fixed-point units of the quantised fields, and records -> bodies;
//! - [`codec`]: [`encode`] and [`decode`] of one frame into and out of caller buffers;
//! - [`decoder`]: the streaming [`Decoder`] a serial read loop feeds, with resynchronisation
//!   and loss counting;
//! - [`streamer`]: the device-side [`Streamer`] that fits frames into the link's byte budget;
//! - [`responder`]: the device-side [`Responder`] that reads command frames and answers
//!   them (idempotent sequence numbers, already running, unknown kinds, malformed bodies),
//!   the one command handler of every device.
//!
//! The byte layout is specified in `docs/wire-protocol.md` (enough to write a decoder in
//! another language); the golden vectors in `core/tests/wire.rs` pin it.
//!
//! Everything here is `no_std`, allocation-free and panic-free on any input: frames are
//! bounded by [`MAX_FRAME_BYTES`], computed at compile time from the types.

pub mod codec;
pub mod decoder;
pub mod derived_frame;
pub mod device_status;
pub mod frame;
pub mod full_windows;
pub mod levels_in_use;
pub mod quant;
pub mod responder;
pub mod streamer;
pub mod tip_health;

pub use codec::{crc32, decode, decode_unstuffed, encode, WireError};
pub use decoder::{Decoder, DecoderStats, DeviceSeqStats, FeedResult, SeqCheck};
pub use derived_frame::{ChordLengths, DerivedBatch, DerivedResult};
pub use device_status::{DeviceStatus, LoggerStatus};
pub use frame::{
    Ack, Body, ChordTimes, Correlation, DeviceDescription, Frame, FrontArrival, Header, Health,
    Kind, LogChunk, Nack, NackReason, ProbeLayout, ProfileFit, ReadLog, Relearn, RunStart,
    SetClock, SetExtras, SetLevels, StartRun, TrailingTip, WindowResult, WindowSetting, Windows,
    LOG_CHUNK_BYTES, PROFILE_ESTIMATES,
};
pub use full_windows::{
    CorrelationTimes, FullWindow, FullWindows, TrailingWindow, WindowExtras,
    MAX_FULL_WINDOWS_PER_FRAME,
};
pub use levels_in_use::{levels_in_use, levels_of_config, LevelsInUse, ProbeLevels, TipSetting};
pub use responder::{Command, CommandTarget, Reply, Responder, ResponderStats};
pub use streamer::{Offer, Streamer, StreamerConfig, StreamerStats};
pub use tip_health::{TipBook, TipHealth, TipLevels, TipReport, TipState, MAX_TIPS_PER_FRAME};

use postcard::experimental::max_size::MaxSize;

/// The protocol version every frame carries in its first byte. Bump it whenever a body
/// layout changes; the header layout itself never changes.
pub const PROTOCOL_VERSION: u8 = 2;

/// The device id a host writes into the header of its command frames. No device uses it;
/// a device ignores frames that carry another id (its own output echoed back, another
/// device's frames on a shared line).
pub const HOST_ID: u16 = 0xFFFF;

/// Most probes a device description can list.
pub const MAX_PROBES: usize = 16;

/// Most per-probe window results one frame carries (the streamer packs the results of one
/// analysis window, or of a backlog, into one frame to share its overhead).
pub const MAX_WINDOWS_PER_FRAME: usize = 8;

/// Capacity in bytes (UTF-8) of the firmware version string and of a run label.
pub const LABEL_BYTES: usize = 16;

/// Bytes of the CRC appended to the payload.
pub const CRC_BYTES: usize = 4;

const fn max(a: usize, b: usize) -> usize {
    if a > b {
        a
    } else {
        b
    }
}

/// The longest body of any kind, bytes (postcard's `MaxSize`, computed from the types).
pub const MAX_BODY_BYTES: usize = {
    let mut m = DeviceDescription::POSTCARD_MAX_SIZE;
    m = max(m, Windows::POSTCARD_MAX_SIZE);
    m = max(m, FrontArrival::POSTCARD_MAX_SIZE);
    m = max(m, ProfileFit::POSTCARD_MAX_SIZE);
    m = max(m, Health::POSTCARD_MAX_SIZE);
    m = max(m, RunStart::POSTCARD_MAX_SIZE);
    m = max(m, DerivedBatch::POSTCARD_MAX_SIZE);
    m = max(m, TipHealth::POSTCARD_MAX_SIZE);
    m = max(m, LevelsInUse::POSTCARD_MAX_SIZE);
    m = max(m, FullWindows::POSTCARD_MAX_SIZE);
    m = max(m, DeviceStatus::POSTCARD_MAX_SIZE);
    m = max(m, SetExtras::POSTCARD_MAX_SIZE);
    m = max(m, StartRun::POSTCARD_MAX_SIZE);
    m = max(m, WindowSetting::POSTCARD_MAX_SIZE);
    m = max(m, Relearn::POSTCARD_MAX_SIZE);
    m = max(m, SetClock::POSTCARD_MAX_SIZE);
    m = max(m, ReadLog::POSTCARD_MAX_SIZE);
    m = max(m, LogChunk::POSTCARD_MAX_SIZE);
    m = max(m, SetLevels::POSTCARD_MAX_SIZE);
    m = max(m, Ack::POSTCARD_MAX_SIZE);
    m = max(m, Nack::POSTCARD_MAX_SIZE);
    m
};

/// The longest payload (header and body, before the CRC), bytes.
pub const MAX_PAYLOAD_BYTES: usize = Header::POSTCARD_MAX_SIZE + MAX_BODY_BYTES;

/// COBS adds one byte per started run of 254 bytes (and one more when the input ends exactly
/// on a run boundary): `n + n / 254 + 1` bounds it for every `n`.
pub const fn cobs_max_encoded(n: usize) -> usize {
    n + n / 254 + 1
}

/// The longest frame on the wire, delimiter included, bytes. Size decoder and transmit
/// buffers with it.
pub const MAX_FRAME_BYTES: usize = cobs_max_encoded(MAX_PAYLOAD_BYTES + CRC_BYTES) + 1;

/// The shortest valid frame: a header of 4 bytes (every field at its smallest), no body, the
/// CRC, the COBS overhead byte and the delimiter.
pub const MIN_FRAME_BYTES: usize = 4 + CRC_BYTES + 2;

// The bound stays small enough for a device's decode and transmit buffers.
const _: () = assert!(MAX_FRAME_BYTES > MAX_PAYLOAD_BYTES + CRC_BYTES + 1);
const _: () = assert!(MAX_FRAME_BYTES <= 1024);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bounds_are_sane() {
        assert_eq!(Header::POSTCARD_MAX_SIZE, 8);
        assert_eq!(cobs_max_encoded(0), 1);
        assert_eq!(cobs_max_encoded(254), 256);
    }
}
