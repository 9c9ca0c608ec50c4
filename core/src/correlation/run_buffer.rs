//! The [`RunBuffer`]: the leading tip's edges of one run, held until the trailing tip's
//! edges of the same frames come (see the [correlation module](super)).

use super::MAX_RUN_FRAMES;
use crate::phase::Edge;

/// Bit of a held entry that marks a rising (water -> air) edge.
pub(super) const RISING_BIT: u16 = 1 << 15;

/// The leading tip's edges of one run, waiting for the trailing tip's edges of the same
/// frames (see the [correlation module](super)): at most one per frame of a run of at
/// most [`MAX_RUN_FRAMES`] frames.
///
/// Only one correlator uses it at a time, from
/// [`Correlator::begin_run`](super::Correlator::begin_run) to
/// [`Correlator::end_run`](super::Correlator::end_run) (which merges what is left), so
/// one buffer serves every
/// correlator of a chain: the chain lends it to each probe's correlator in turn, instead of
/// keeping 2 KiB per probe.
#[derive(Clone, Debug)]
pub struct RunBuffer {
    /// Offset from the run start, with [`RISING_BIT`].
    pub(super) edges: [u16; MAX_RUN_FRAMES],
    pub(super) len: usize,
    pub(super) pos: usize,
    pub(super) run_start: u64,
}

impl Default for RunBuffer {
    fn default() -> Self {
        Self::new()
    }
}

impl RunBuffer {
    /// An empty buffer (all zero bytes: a `static` of it lands in `.bss`).
    pub const fn new() -> Self {
        RunBuffer {
            edges: [0; MAX_RUN_FRAMES],
            len: 0,
            pos: 0,
            run_start: 0,
        }
    }

    /// Start a run at absolute frame `first` (anything held is forgotten).
    pub(super) fn begin(&mut self, first: u64) {
        self.len = 0;
        self.pos = 0;
        self.run_start = first;
    }

    /// Hold an edge of the current run; false if it does not fit (beyond the buffer, before
    /// the run, or too far into it).
    #[inline]
    pub(super) fn hold(&mut self, edge: Edge) -> bool {
        let off = edge.frame.wrapping_sub(self.run_start);
        match self.edges.get_mut(self.len) {
            Some(s) if edge.frame >= self.run_start && off < RISING_BIT as u64 => {
                *s = off as u16 | if edge.to_air { RISING_BIT } else { 0 };
                self.len += 1;
                true
            }
            _ => false,
        }
    }

    /// Everything merged: the whole buffer is free again.
    #[inline]
    pub(super) fn free_if_merged(&mut self) {
        if self.pos >= self.len {
            self.len = 0;
            self.pos = 0;
        }
    }

    /// The oldest held edge at or before absolute frame `upto`, taken out of the buffer.
    #[inline]
    pub(super) fn take_upto(&mut self, upto: u64) -> Option<(u64, bool)> {
        let &v = self.edges.get(self.pos).filter(|_| self.pos < self.len)?;
        let frame = self.run_start.saturating_add((v & !RISING_BIT) as u64);
        if frame > upto {
            return None;
        }
        self.pos += 1;
        Some((frame, v & RISING_BIT != 0))
    }
}
