//! A capture compiled into the image, replayed frame by frame.
//!
//! The bytes are the capture's samples as little-endian i16, interleaved (the firmware's
//! build script extracts them from `capture/capture.wav`). They are decoded with
//! `i16::from_le_bytes`, so the image needs no alignment and no `unsafe` cast. Pacing is
//! the caller's: one [`fill`](SampleSource::fill) per timer tick hands out as many frames
//! as fit the slice it is given.

use crate::source::SampleSource;
use core::convert::Infallible;

/// Replays `bytes` (interleaved little-endian i16 frames of `channels` channels) once, or
/// in a loop.
#[derive(Debug)]
pub struct ReplaySource {
    bytes: &'static [u8],
    channels: usize,
    pos: usize,
    looping: bool,
}

impl ReplaySource {
    /// A replay of `bytes`; a trailing incomplete frame is never played.
    pub const fn new(bytes: &'static [u8], channels: usize) -> Self {
        ReplaySource {
            bytes,
            channels: if channels == 0 { 1 } else { channels },
            pos: 0,
            looping: false,
        }
    }

    /// A replay that starts again from its first frame when it reaches the end (never
    /// exhausted): an instrument left running on the bench.
    pub const fn looping(bytes: &'static [u8], channels: usize) -> Self {
        let mut r = Self::new(bytes, channels);
        r.looping = !bytes.is_empty();
        r
    }

    /// Frames not yet played.
    pub fn frames_left(&self) -> usize {
        (self.bytes.len() - self.pos) / (2 * self.channels)
    }
}

impl SampleSource for ReplaySource {
    type Error = Infallible;

    fn channels(&self) -> usize {
        self.channels
    }

    fn fill(&mut self, block: &mut [i16]) -> Result<usize, Infallible> {
        if self.looping && self.frames_left() == 0 {
            self.pos = 0;
        }
        let frames = (block.len() / self.channels).min(self.frames_left());
        let n = frames * self.channels;
        let src = &self.bytes[self.pos..self.pos + 2 * n];
        for (d, s) in block[..n].iter_mut().zip(src.chunks_exact(2)) {
            *d = i16::from_le_bytes([s[0], s[1]]);
        }
        self.pos += 2 * n;
        Ok(frames)
    }

    fn exhausted(&self) -> bool {
        !self.looping && self.frames_left() == 0
    }
}
