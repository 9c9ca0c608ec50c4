//! Encoding and decoding of one frame.
//!
//! ```text
//! encode: Frame -> postcard(Header) ++ postcard(body) -> ++ crc32_le -> COBS -> ++ 0x00
//! decode: COBS^-1 -> split off the last 4 bytes -> check CRC -> Header -> body of its kind
//! ```
//!
//! Encoding works in the caller's buffer alone: postcard writes header and body a few bytes
//! in, the CRC goes after them, and COBS then encodes the bytes forward over themselves
//! (the same bytes as postcard's CRC and COBS flavours stacked, which push every byte
//! through both; this is a block of plain loops). Decoding works in place too.

use crate::wire::frame::{Body, Frame, Header, Kind};
use crate::wire::{CRC_BYTES, PROTOCOL_VERSION};
use crc::{Crc, CRC_32_ISO_HDLC};
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

/// Bytes kept free before the staged payload for COBS's overhead in a `len`-byte buffer:
/// the first code byte and one per 254 bytes encoded.
const fn cobs_lead(len: usize) -> usize {
    1 + len / 254
}

fn emit<'b, T: Serialize + ?Sized>(
    header: &Header,
    body: &T,
    buf: &'b mut [u8],
) -> Result<&'b [u8], WireError> {
    let len = buf.len();
    let lead = cobs_lead(len);
    let staged = buf
        .get_mut(lead..len.saturating_sub(CRC_BYTES))
        .ok_or(WireError::BufferTooSmall)?;
    // A tuple serialises as its elements back to back: header then body.
    let n = postcard::to_slice(&(header, body), staged)
        .map_err(|_| WireError::BufferTooSmall)?
        .len();
    let payload = buf.get(lead..lead + n).ok_or(WireError::BufferTooSmall)?;
    let crc = crc32(payload).to_le_bytes();
    buf.get_mut(lead + n..lead + n + CRC_BYTES)
        .ok_or(WireError::BufferTooSmall)?
        .copy_from_slice(&crc);
    let end = cobs_forward(buf, lead, n + CRC_BYTES).ok_or(WireError::BufferTooSmall)?;
    buf.get(..end).ok_or(WireError::BufferTooSmall)
}

/// COBS-encode (Cheshire and Baker, 1999, "Consistent overhead byte stuffing") the `n`
/// bytes at `buf[from..]` to the start of `buf`, then the 0x00 delimiter; returns the
/// encoded length, delimiter included (`None` if `buf` is too short). The output never
/// overtakes the input when `from >= 1 + n / 254`: after `i` bytes read, at most
/// `1 + i + i / 254` are written. Blocks as postcard's COBS flavour makes them: a block of
/// 254 data bytes is closed with code 0xFF, and when the data end there a final empty
/// block of code 1 follows (the `cobs` crate's `encode` leaves that one out; both decode to
/// the same bytes).
fn cobs_forward(buf: &mut [u8], from: usize, n: usize) -> Option<usize> {
    let mut code_at = 0;
    let mut w = 1;
    let mut code = 1u8;
    for r in from..from.checked_add(n)? {
        let b = *buf.get(r)?;
        if b == 0 {
            *buf.get_mut(code_at)? = code;
            code_at = w;
            w += 1;
            code = 1;
        } else {
            *buf.get_mut(w)? = b;
            w += 1;
            code += 1;
            if code == 0xFF {
                *buf.get_mut(code_at)? = code;
                code_at = w;
                w += 1;
                code = 1;
            }
        }
    }
    *buf.get_mut(code_at)? = code;
    *buf.get_mut(w)? = 0;
    Some(w + 1)
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

    /// COBS by postcard's own flavour (the wire's encoder before, a reference library):
    /// the bytes pushed one by one through `Cobs` over a `Slice`, then finalised.
    fn postcard_cobs(data: &[u8], out: &mut [u8]) -> usize {
        use postcard::ser_flavors::{Cobs, Flavor, Slice};
        let mut f = Cobs::try_new(Slice::new(out)).unwrap();
        for &b in data {
            f.try_push(b).unwrap();
        }
        f.finalize().unwrap().len()
    }

    /// The forward in-place COBS encoder against postcard's COBS flavour and, for the
    /// decoding, the `cobs` crate (reference libraries): random byte strings of every length
    /// to 800, zero densities from none to most, runs of non-zero bytes at and around the
    /// 254-byte block length (where encoders differ: postcard, and so the wire, closes a
    /// full block with an empty one of code 1).
    #[test]
    fn cobs_forward_matches_postcard_and_decodes() {
        let mut seed = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        };
        for len in 1..800usize {
            for zeros in [0u64, 1, 8, 64, 200] {
                let data: [u8; 800] = core::array::from_fn(|_| {
                    let v = next();
                    if v % 256 < zeros {
                        0
                    } else {
                        (v >> 8) as u8 | 1
                    }
                });
                let data = &data[..len];
                let mut want = [0u8; 1024];
                let k = postcard_cobs(data, &mut want);
                let from = cobs_lead(k);
                let mut buf = [0xAAu8; 1024];
                buf[from..from + len].copy_from_slice(data);
                let got = cobs_forward(&mut buf, from, len);
                assert_eq!(got, Some(k), "len {len} zeros {zeros}");
                assert_eq!(&buf[..k], &want[..k], "len {len} zeros {zeros}");
                let mut back = [0u8; 1024];
                assert_eq!(cobs::decode(&buf[..k - 1], &mut back), Ok(len));
                assert_eq!(&back[..len], data);
            }
        }
        // Runs of non-zero bytes at the block length, in a buffer just long enough.
        for run in [253usize, 254, 255, 508, 509] {
            let data = [7u8; 600];
            let mut want = [0u8; 700];
            let k = postcard_cobs(&data[..run], &mut want);
            let mut buf = [0u8; 700];
            let from = 1 + run / 254;
            buf[from..from + run].copy_from_slice(&data[..run]);
            assert_eq!(cobs_forward(&mut buf[..k], from, run), Some(k), "run {run}");
            assert_eq!(&buf[..k], &want[..k], "run {run}");
            buf[from..from + run].copy_from_slice(&data[..run]);
            assert_eq!(
                cobs_forward(&mut buf[..k - 1], from, run),
                None,
                "run {run}, one short"
            );
        }
    }

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
