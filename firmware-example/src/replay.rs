//! A capture compiled into the image, replayed frame by frame.
//!
//! The samples are the capture's, interleaved (the firmware's build script extracts them
//! from `capture/capture.wav`; [`crate::capture`] decodes them at compile time), so a
//! replay hands them out with a plain copy, as a DMA transfer would. Pacing is the
//! caller's: one [`fill`](SampleSource::fill) per timer tick hands out as many frames as
//! fit the slice it is given.

use crate::source::SampleSource;
use core::convert::Infallible;

/// Replays `samples` (interleaved frames of `channels` channels) once, or in a loop.
#[derive(Debug)]
pub struct ReplaySource {
    samples: &'static [i16],
    channels: usize,
    pos: usize,
    looping: bool,
}

impl ReplaySource {
    /// A replay of `samples`; a trailing incomplete frame is never played.
    pub const fn new(samples: &'static [i16], channels: usize) -> Self {
        ReplaySource {
            samples,
            channels: if channels == 0 { 1 } else { channels },
            pos: 0,
            looping: false,
        }
    }

    /// A replay that starts again from its first frame when it reaches the end (never
    /// exhausted): an instrument left running on the bench.
    pub const fn looping(samples: &'static [i16], channels: usize) -> Self {
        let mut r = Self::new(samples, channels);
        r.looping = !samples.is_empty();
        r
    }

    /// Frames not yet played.
    pub fn frames_left(&self) -> usize {
        (self.samples.len() - self.pos) / self.channels
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
        block[..n].copy_from_slice(&self.samples[self.pos..self.pos + n]);
        self.pos += n;
        Ok(frames)
    }

    fn exhausted(&self) -> bool {
        !self.looping && self.frames_left() == 0
    }
}
