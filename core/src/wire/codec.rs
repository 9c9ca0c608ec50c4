//! Encoding and decoding of one frame.
//!
//! ```text
//! encode: Frame -> postcard(Header) ++ postcard(body) -> ++ crc32_le -> COBS -> ++ 0x00
//! decode: COBS^-1 -> split off the last 4 bytes -> check CRC -> Header -> body of its kind
//! ```
//!
//! Encoding stacks postcard flavors like middleware (CRC over COBS over the caller's slice),
//! so it needs no scratch buffer. Decoding works in place in the caller's buffer.

use crate::wire::frame::{Body, Frame, Header, Kind};
use crate::wire::{CRC_BYTES, PROTOCOL_VERSION};
use crc::{Crc, CRC_32_ISO_HDLC};
use postcard::ser_flavors::{crc::CrcModifier, Cobs, Slice};
use serde::{Deserialize, Serialize};

/// CRC-32/ISO-HDLC (the CRC of zlib, PNG and Ethernet): width 32, poly 0x04C11DB7,
/// init 0xFFFFFFFF, reflected in and out, xorout 0xFFFFFFFF, check 0xCBF43926.
const CRC32: Crc<u32> = Crc::<u32>::new(&CRC_32_ISO_HDLC);

/// The frame CRC (CRC-32/ISO-HDLC) of `bytes`; on the wire it follows the payload,
/// least significant byte first.
pub fn crc32(bytes: &[u8]) -> u32 {
    CRC32.checksum(bytes)
}

/// Why a frame could not be encoded or decoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum WireError {
    /// Encode: the output buffer is too small (size it with
    /// [`MAX_FRAME_BYTES`](crate::wire::MAX_FRAME_BYTES)).
    BufferTooSmall,
    /// Decode: the bytes are not a valid COBS encoding (or are empty).
    Cobs,
    /// Decode: fewer bytes than the smallest header and the CRC.
    TooShort,
    /// Decode: the CRC does not match.
    Crc,
    /// Decode: the CRC matches but the payload does not parse (bad varint, string too long
    /// or not UTF-8, bad enum index, bytes left over).
    Malformed,
    /// Decode: valid frame of a protocol version this build does not read.
    UnsupportedVersion(Header),
    /// Decode: valid frame of a kind this build does not know.
    UnknownKind(Header),
}

impl WireError {
    /// The header of a valid frame this build cannot read, for the unsupported variants.
    pub const fn header(&self) -> Option<Header> {
        match self {
            WireError::UnsupportedVersion(h) | WireError::UnknownKind(h) => Some(*h),
            _ => None,
        }
    }
}

impl core::fmt::Display for WireError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            WireError::BufferTooSmall => write!(f, "output buffer too small for the frame"),
            WireError::Cobs => write!(f, "invalid COBS encoding"),
            WireError::TooShort => write!(f, "frame shorter than a header and a CRC"),
            WireError::Crc => write!(f, "CRC mismatch"),
            WireError::Malformed => write!(f, "payload does not parse"),
            WireError::UnsupportedVersion(h) => write!(
                f,
                "frame of protocol version {} from device {}: this build reads version {} only \
                 (update the device's firmware or the host tool so both speak the same version)",
                h.version, h.device, PROTOCOL_VERSION
            ),
            WireError::UnknownKind(h) => write!(f, "unknown frame kind 0x{:02x}", h.kind),
        }
    }
}

fn emit<'b, T: Serialize + ?Sized>(
    header: &Header,
    body: &T,
    buf: &'b mut [u8],
) -> Result<&'b [u8], WireError> {
    let cobs = Cobs::try_new(Slice::new(buf)).map_err(|_| WireError::BufferTooSmall)?;
    let flavor = CrcModifier::new(cobs, CRC32.digest());
    // A tuple serialises as its elements back to back: header then body.
    match postcard::serialize_with_flavor(&(header, body), flavor) {
        Ok(out) => Ok(out),
        Err(_) => Err(WireError::BufferTooSmall),
    }
}

/// Encode `frame` into `buf`; returns the bytes to send, the 0x00 delimiter included.
///
/// Fails only when `buf` is too small; a buffer of
/// [`MAX_FRAME_BYTES`](crate::wire::MAX_FRAME_BYTES) always suffices.
pub fn encode<'b>(frame: &Frame, buf: &'b mut [u8]) -> Result<&'b [u8], WireError> {
    let h = frame.header();
    match &frame.body {
        Body::Describe(b) => emit(&h, b, buf),
        Body::Windows(b) => emit(&h, b, buf),
        Body::Front(b) => emit(&h, b, buf),
        Body::Profile(b) => emit(&h, b, buf),
        Body::Health(b) => emit(&h, b, buf),
        Body::RunStart(b) => emit(&h, b, buf),
        Body::LogChunk(b) => emit(&h, b, buf),
        Body::ReadLog(b) => emit(&h, b, buf),
        Body::Derived(b) => emit(&h, b, buf),
        Body::TipHealth(b) => emit(&h, b, buf),
        Body::Levels(b) => emit(&h, b, buf),
        Body::FullWindows(b) => emit(&h, b, buf),
        Body::DeviceStatus(b) => emit(&h, b, buf),
        Body::SetExtras(b) => emit(&h, b, buf),
        Body::StartRun(b) => emit(&h, b, buf),
        Body::SetWindow(b) => emit(&h, b, buf),
        Body::Relearn(b) => emit(&h, b, buf),
        Body::SetClock(b) => emit(&h, b, buf),
        Body::SetLevels(b) => emit(&h, b, buf),
        Body::Ack(b) => emit(&h, b, buf),
        Body::Nack(b) => emit(&h, b, buf),
        Body::StopRun | Body::DescribeRequest => emit(&h, &(), buf),
    }
}

/// Decode one frame from its COBS bytes (the trailing 0x00 may be present or not), in
/// place: `bytes` is overwritten.
pub fn decode(bytes: &mut [u8]) -> Result<Frame, WireError> {
    let n = cobs::decode_in_place(bytes).map_err(|_| WireError::Cobs)?;
    decode_unstuffed(&bytes[..n])
}

/// Decode one frame from its bytes after COBS decoding: the payload then the CRC.
pub fn decode_unstuffed(data: &[u8]) -> Result<Frame, WireError> {
    const MIN_HEADER: usize = 4;
    if data.len() < MIN_HEADER + CRC_BYTES {
        return Err(WireError::TooShort);
    }
    let (payload, crc) = data.split_at(data.len() - CRC_BYTES);
    let crc = u32::from_le_bytes([crc[0], crc[1], crc[2], crc[3]]);
    if crc32(payload) != crc {
        return Err(WireError::Crc);
    }
    let (header, rest) =
        postcard::take_from_bytes::<Header>(payload).map_err(|_| WireError::Malformed)?;
    if header.version != PROTOCOL_VERSION {
        return Err(WireError::UnsupportedVersion(header));
    }
    let kind = header.kind().ok_or(WireError::UnknownKind(header))?;
    let body = match kind {
        Kind::Describe => Body::Describe(exact(rest)?),
        Kind::Windows => Body::Windows(exact(rest)?),
        Kind::Front => Body::Front(exact(rest)?),
        Kind::Profile => Body::Profile(exact(rest)?),
        Kind::Health => Body::Health(exact(rest)?),
        Kind::RunStart => Body::RunStart(exact(rest)?),
        Kind::LogChunk => Body::LogChunk(exact(rest)?),
        Kind::ReadLog => Body::ReadLog(exact(rest)?),
        Kind::Derived => Body::Derived(exact(rest)?),
        Kind::TipHealth => Body::TipHealth(exact(rest)?),
        Kind::Levels => Body::Levels(exact(rest)?),
        Kind::FullWindows => Body::FullWindows(exact(rest)?),
        Kind::DeviceStatus => Body::DeviceStatus(exact(rest)?),
        Kind::SetExtras => Body::SetExtras(exact(rest)?),
        Kind::StartRun => Body::StartRun(exact(rest)?),
        Kind::StopRun => empty(rest, Body::StopRun)?,
        Kind::SetWindow => Body::SetWindow(exact(rest)?),
        Kind::Relearn => Body::Relearn(exact(rest)?),
        Kind::DescribeRequest => empty(rest, Body::DescribeRequest)?,
        Kind::SetClock => Body::SetClock(exact(rest)?),
        Kind::SetLevels => Body::SetLevels(exact(rest)?),
        Kind::Ack => Body::Ack(exact(rest)?),
        Kind::Nack => Body::Nack(exact(rest)?),
    };
    Ok(Frame {
        device: header.device,
        seq: header.seq,
        body,
    })
}

/// Deserialize a `T` that must use up every byte.
pub(crate) fn exact<'a, T: Deserialize<'a>>(bytes: &'a [u8]) -> Result<T, WireError> {
    match postcard::take_from_bytes::<T>(bytes) {
        Ok((v, [])) => Ok(v),
        _ => Err(WireError::Malformed),
    }
}

fn empty(bytes: &[u8], body: Body) -> Result<Body, WireError> {
    if bytes.is_empty() {
        Ok(body)
    } else {
        Err(WireError::Malformed)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wire::frame::Ack;
    use crate::wire::MAX_FRAME_BYTES;

    #[test]
    fn crc_is_the_zlib_crc() {
        assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    }

    #[test]
    fn ack_round_trips_and_small_buffers_fail_cleanly() {
        let f = Frame {
            device: 7,
            seq: 300,
            body: Body::Ack(Ack { seq: 5 }),
        };
        let mut buf = [0u8; MAX_FRAME_BYTES];
        let n = encode(&f, &mut buf).unwrap().len();
        assert_eq!(buf[n - 1], 0);
        assert!(buf[..n - 1].iter().all(|&b| b != 0));
        for short in 0..n {
            let mut small = [0u8; 64];
            assert_eq!(
                encode(&f, &mut small[..short]),
                Err(WireError::BufferTooSmall)
            );
        }
        assert_eq!(decode(&mut buf[..n]), Ok(f));
    }

    #[test]
    fn every_single_bit_flip_is_rejected() {
        let f = Frame {
            device: 1,
            seq: 2,
            body: Body::StopRun,
        };
        let mut buf = [0u8; 32];
        let good: heapless::Vec<u8, 32> =
            heapless::Vec::from_slice(encode(&f, &mut buf).unwrap()).unwrap();
        for i in 0..good.len() - 1 {
            for bit in 0..8 {
                let mut b = good.clone();
                b[i] ^= 1 << bit;
                assert!(decode(&mut b).is_err(), "flip {i}.{bit} accepted");
            }
        }
    }
}
