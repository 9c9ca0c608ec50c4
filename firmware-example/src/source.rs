//! Where samples come from: a [`SampleSource`] fills blocks of interleaved i16 frames.
//!
//! A frame holds one sample per channel (one channel per probe tip), taken at one instant;
//! frames are interleaved the way the core's [`Chain::push`](frothline_core::Chain::push)
//! wants them: `[c0, c1, .., cN-1, c0, c1, ..]`. Sources are polled from the acquisition
//! interrupt and must not block: `fill` writes the frames that are ready now (maybe none).
//!
//! Implementations: [`crate::adc::Adc`] (an external SPI ADC, any `embedded-hal` 1.0 bus
//! and data-ready pin) and [`crate::replay::ReplaySource`] (a capture compiled into the
//! image, replayed at the sample rate).

/// A source of interleaved i16 frames.
pub trait SampleSource {
    /// What can go wrong while reading.
    type Error: core::fmt::Debug;

    /// Channels per frame.
    fn channels(&self) -> usize;

    /// Write the frames that are ready into `block`, at most `block.len() / channels()`
    /// whole frames from its start, and return how many were written (0: none ready now).
    fn fill(&mut self, block: &mut [i16]) -> Result<usize, Self::Error>;

    /// True once the source will never produce another frame (the end of a replay).
    fn exhausted(&self) -> bool {
        false
    }
}
