//! `frothline logbook --port`: a field log read over a device's link instead of from an
//! image file.
//!
//! ```text
//! ReadLog { offset 0 } -> LogChunk { offset, total, data } (and the Ack)
//! ReadLog { offset + data.len() } -> ... until `total` bytes are held
//!   -> the image, written to OUT/fieldlog-image.bin -> the image path of `logbook`
//! ```
//!
//! One command per chunk (docs/wire-protocol.md section 6, LogChunk): a chunk that does not
//! come within [`ANSWER_TIMEOUT`] is asked again in a new command frame (a device answers
//! a repeat of the same frame without carrying it out again, so it would not send the
//! chunk again), up to [`TRIES`] times. A Nack stops the read with its reason. Frames of other
//! kinds (the device's results, health) are skipped.

use crate::shared::commands::{Command, CommandLog};
use crate::shared::error::HostError;
use frothline_core::wire::{Body, Decoder, FeedResult, NackReason, ReadLog};
use std::io::{Read, Write};
use std::time::{Duration, Instant};

/// How long to wait for a chunk before asking again.
pub const ANSWER_TIMEOUT: Duration = Duration::from_millis(500);
/// Times a chunk is asked for before the read gives up.
pub const TRIES: u32 = 6;
/// The largest log region the host accepts, bytes (the core's log: 4096 pages of up to
/// 128 KiB would be far more; 64 MiB covers any NOR part a logger carries).
pub const MAX_REGION_BYTES: u32 = 64 << 20;

/// Read the whole field log region of the device on `port` (opened at `baud`).
pub fn read_region(port: &str, baud: u32) -> Result<Vec<u8>, HostError> {
    let mut link = crate::shared::serial_port::open_port(port, baud)
        .map_err(|e| HostError::Usage(crate::shared::serial_port::open_hint(port, &e)))?;
    read_from(&mut *link, port)
}

/// Read the region through any byte link (a serial port, a pipe in tests).
pub fn read_from<L: Read + Write + ?Sized>(link: &mut L, name: &str) -> Result<Vec<u8>, HostError> {
    let io = |e: std::io::Error| HostError::Usage(format!("{name}: {e}"));
    let mut log = CommandLog::new(crate::shared::commands::HOST_DEVICE_ID);
    let mut dec: Decoder = Decoder::new();
    let mut image: Vec<u8> = Vec::new();
    let mut total: Option<u32> = None;
    let mut buf = [0u8; 4096];
    while total.is_none_or(|t| (image.len() as u32) < t) {
        let offset = image.len() as u32;
        let mut got = false;
        'tries: for _ in 0..TRIES {
            let (seq, frame) = log
                .encode(&Command::ReadLog(ReadLog { offset }))
                .map_err(HostError::Usage)?;
            link.write_all(&frame).map_err(io)?;
            link.flush().map_err(io)?;
            let until = Instant::now() + ANSWER_TIMEOUT;
            while Instant::now() < until {
                let n = match link.read(&mut buf) {
                    Ok(n) => n,
                    Err(e) if e.kind() == std::io::ErrorKind::TimedOut => 0,
                    Err(e) if e.kind() == std::io::ErrorKind::Interrupted => 0,
                    Err(e) => return Err(io(e)),
                };
                let mut rest = &buf[..n];
                while !rest.is_empty() {
                    let r = dec.feed(rest);
                    rest = r.remaining();
                    let FeedResult::Frame { frame, .. } = r else {
                        continue;
                    };
                    match frame.body {
                        // One chunk per offset: a chunk asked for twice (a try that
                        // timed out, then answered late) comes twice.
                        Body::LogChunk(c) if c.offset == offset && !got => {
                            if c.total == 0 || c.total > MAX_REGION_BYTES {
                                return Err(HostError::Usage(format!(
                                    "{name}: the device reports a log region of {} bytes (1 to {MAX_REGION_BYTES} expected)",
                                    c.total
                                )));
                            }
                            if total.is_some_and(|t| t != c.total) {
                                return Err(HostError::Usage(format!(
                                    "{name}: the log region changed size during the read"
                                )));
                            }
                            total = Some(c.total);
                            let room = (c.total - offset) as usize;
                            image.extend_from_slice(&c.data[..c.data.len().min(room)]);
                            got = !c.data.is_empty();
                        }
                        Body::Nack(n) if n.seq == seq => {
                            let why = match n.reason {
                                NackReason::UnknownCommand => {
                                    "the device keeps no field log (or its firmware cannot send it)"
                                        .to_string()
                                }
                                r => format!("refused: {r:?}"),
                            };
                            return Err(HostError::Usage(format!(
                                "{name}: reading the field log at byte {offset}: {why}"
                            )));
                        }
                        _ => {}
                    }
                }
                if got {
                    break 'tries;
                }
            }
        }
        if !got {
            return Err(HostError::Usage(format!(
                "{name}: no answer to a read of the field log at byte {offset} after {TRIES} tries of {} ms; {} bytes read",
                ANSWER_TIMEOUT.as_millis(),
                image.len()
            )));
        }
    }
    Ok(image)
}

#[cfg(test)]
mod tests {
    use super::*;
    use frothline_core::wire::{decode, encode, Ack, Frame, LogChunk, LOG_CHUNK_BYTES};
    use std::collections::VecDeque;

    /// A device on a byte link that answers ReadLog from `region` by the spec's rules
    /// (docs/wire-protocol.md, LogChunk: the chunk before the Ack), answering the first
    /// read twice, as a device does when a host's first try timed out and it sent again.
    struct Device {
        region: Vec<u8>,
        rx: Vec<u8>,
        tx: VecDeque<u8>,
        reads: u32,
    }

    impl Device {
        fn send(&mut self, seq: u16, body: Body) {
            let mut buf = [0u8; frothline_core::wire::MAX_FRAME_BYTES];
            let f = Frame {
                device: 7,
                seq,
                body,
            };
            self.tx.extend(encode(&f, &mut buf).unwrap());
        }
    }

    impl Write for Device {
        fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
            for &x in b {
                if x != 0 {
                    self.rx.push(x);
                    continue;
                }
                let mut frame = std::mem::take(&mut self.rx);
                let f = decode(&mut frame).unwrap();
                let Body::ReadLog(r) = f.body else { continue };
                let at = r.offset as usize;
                let end = (at + LOG_CHUNK_BYTES).min(self.region.len());
                let mut chunk = LogChunk {
                    offset: r.offset,
                    total: self.region.len() as u32,
                    ..LogChunk::default()
                };
                chunk.data.extend_from_slice(&self.region[at..end]).unwrap();
                let times = if self.reads == 0 { 2 } else { 1 };
                self.reads += 1;
                for _ in 0..times {
                    self.send(self.reads as u16, Body::LogChunk(chunk.clone()));
                    self.send(self.reads as u16, Body::Ack(Ack { seq: f.seq }));
                }
            }
            Ok(b.len())
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }

    impl Read for Device {
        fn read(&mut self, b: &mut [u8]) -> std::io::Result<usize> {
            if self.tx.is_empty() {
                return Err(std::io::ErrorKind::TimedOut.into());
            }
            let n = b.len().min(self.tx.len());
            for (d, s) in b.iter_mut().zip(self.tx.drain(..n)) {
                *d = s;
            }
            Ok(n)
        }
    }

    #[test]
    fn the_region_read_over_a_link_is_the_region_byte_for_byte() {
        // An analytic case: a region of 1000 distinct-looking bytes (not a multiple of the
        // chunk size) must come back exactly, the doubled first chunk taken once.
        let region: Vec<u8> = (0..1000u32).map(|i| (i * 7 + i / 256) as u8).collect();
        let mut dev = Device {
            region: region.clone(),
            rx: Vec::new(),
            tx: VecDeque::new(),
            reads: 0,
        };
        let got = read_from(&mut dev, "test").unwrap();
        assert_eq!(got.len(), region.len());
        assert!(got == region, "the image differs from the region");
        assert_eq!(dev.reads, 1000_u32.div_ceil(LOG_CHUNK_BYTES as u32));
    }
}
