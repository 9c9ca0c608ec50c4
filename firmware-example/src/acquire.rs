//! Double-buffered acquisition: an interrupt fills one block while the main loop
//! processes the other.
//!
//! ```text
//!            free: spsc queue of empty blocks  <--------------------------+
//!              |                                                         |
//!  tick (ISR): take a block, source.fill(frames) ... block full -> full: spsc queue
//!                                                                   |
//!  main loop:                              dequeue -> chain.push -> give the block back
//! ```
//!
//! Blocks are `&'static mut` buffers that travel through two lock-free single-producer,
//! single-consumer queues (`heapless::spsc`): the interrupt produces full blocks and
//! consumes empty ones, the main loop the other way round. Nothing is copied and no lock is
//! taken. When the main loop falls behind, the interrupt finds no empty block: it still
//! reads the source (an ADC must be read, a replay keeps its pace) into a scratch frame and
//! counts the frames it dropped ([`Health`]). Dropped frames are not pushed to the chain, so
//! its frame count lags the sample clock by exactly [`Health::dropped_frames`].

use crate::config::{BLOCK_FRAMES, BLOCK_SAMPLES, MAX_CHANNELS};
use crate::source::SampleSource;
use core::sync::atomic::{AtomicBool, AtomicU32, Ordering};
use heapless::spsc::{Consumer, Producer};

/// One block of interleaved frames.
pub type Block = [i16; BLOCK_SAMPLES];

/// A block handed to the main loop, with the number of frames in it.
#[derive(Debug)]
pub struct Filled {
    /// The samples; the first `frames * channels` are valid.
    pub block: &'static mut Block,
    /// Whole frames in the block.
    pub frames: u16,
}

/// Counters shared by the interrupt and the main loop (atomics: no lock).
#[derive(Debug)]
pub struct Health {
    /// Frames read from the source (the sample clock).
    pub frames_in: AtomicU32,
    /// Frames dropped because no empty block was available.
    pub dropped_frames: AtomicU32,
    /// Blocks handed to the main loop.
    pub blocks: AtomicU32,
    /// Most blocks ever waiting for the main loop at once.
    pub queue_high_water: AtomicU32,
    /// Errors of the source (each costs that tick's frames).
    pub source_errors: AtomicU32,
    /// Timer ticks spent in the acquisition interrupt.
    pub isr_ticks: AtomicU32,
    /// Set once the source is exhausted and its last block was handed over.
    pub done: AtomicBool,
}

impl Health {
    /// All counters at zero.
    pub const fn new() -> Self {
        Health {
            frames_in: AtomicU32::new(0),
            dropped_frames: AtomicU32::new(0),
            blocks: AtomicU32::new(0),
            queue_high_water: AtomicU32::new(0),
            source_errors: AtomicU32::new(0),
            isr_ticks: AtomicU32::new(0),
            done: AtomicBool::new(false),
        }
    }
}

impl Default for Health {
    fn default() -> Self {
        Self::new()
    }
}

/// The health counters of the acquisition.
pub static HEALTH: Health = Health::new();

/// A free-running tick counter (wrapping), for timing.
pub trait Clock {
    /// Ticks per second.
    const HZ: u32;
    /// The current count.
    fn now(&self) -> u32;
}

/// The interrupt side of the acquisition.
pub struct Acquisition<S, C> {
    source: S,
    clock: C,
    frames_per_tick: usize,
    filling: Option<&'static mut Block>,
    fill_frames: usize,
    full: Producer<'static, Filled>,
    free: Consumer<'static, &'static mut Block>,
    scratch: [i16; MAX_CHANNELS],
    done: bool,
}

impl<S: SampleSource, C: Clock> Acquisition<S, C> {
    /// The acquisition of `source`, reading at most `frames_per_tick` frames per tick,
    /// with the two queue ends it needs.
    pub fn new(
        source: S,
        clock: C,
        frames_per_tick: usize,
        full: Producer<'static, Filled>,
        free: Consumer<'static, &'static mut Block>,
    ) -> Self {
        Acquisition {
            source,
            clock,
            frames_per_tick: frames_per_tick.clamp(1, BLOCK_FRAMES),
            filling: None,
            fill_frames: 0,
            full,
            free,
            scratch: [0; MAX_CHANNELS],
            done: false,
        }
    }

    /// The source (for a board whose interrupt loads it before each tick).
    pub fn source_mut(&mut self) -> &mut S {
        &mut self.source
    }

    /// One timer tick: read what the source has ready into the current block, hand the
    /// block over when it is full (or when the source is exhausted).
    pub fn tick(&mut self) {
        if self.done {
            return;
        }
        let t0 = self.clock.now();
        let ch = self.source.channels().clamp(1, MAX_CHANNELS);
        let mut want = self.frames_per_tick;
        while want > 0 {
            if self.filling.is_none() {
                self.filling = self.free.dequeue();
                self.fill_frames = 0;
            }
            let got = match self.filling.as_deref_mut() {
                Some(block) => {
                    let room = (BLOCK_FRAMES - self.fill_frames).min(want);
                    let start = self.fill_frames * ch;
                    let got = read(&mut self.source, &mut block[start..start + room * ch]);
                    self.fill_frames += got;
                    got
                }
                None => {
                    // Overrun: the main loop holds every block. Read and drop.
                    let mut scratch = self.scratch;
                    let got = read(&mut self.source, &mut scratch[..ch]);
                    HEALTH
                        .dropped_frames
                        .fetch_add(got as u32, Ordering::Relaxed);
                    got
                }
            };
            HEALTH.frames_in.fetch_add(got as u32, Ordering::Relaxed);
            if self.fill_frames == BLOCK_FRAMES {
                self.hand_over();
            }
            if got == 0 {
                break;
            }
            want -= got;
        }
        if self.source.exhausted() {
            self.hand_over();
            self.done = true;
            HEALTH.done.store(true, Ordering::Release);
        }
        let dt = self.clock.now().wrapping_sub(t0);
        HEALTH.isr_ticks.fetch_add(dt, Ordering::Relaxed);
    }

    fn hand_over(&mut self) {
        let Some(block) = self.filling.take() else {
            return;
        };
        let frames = self.fill_frames as u16;
        self.fill_frames = 0;
        if frames == 0 {
            self.filling = Some(block);
            return;
        }
        match self.full.enqueue(Filled { block, frames }) {
            Ok(()) => {
                HEALTH.blocks.fetch_add(1, Ordering::Relaxed);
                let waiting = self.full.len() as u32;
                HEALTH
                    .queue_high_water
                    .fetch_max(waiting, Ordering::Relaxed);
            }
            Err(back) => {
                // Cannot happen (the queue holds every block); drop the frames, keep the block.
                HEALTH
                    .dropped_frames
                    .fetch_add(back.frames as u32, Ordering::Relaxed);
                self.filling = Some(back.block);
            }
        }
    }
}

/// Read what `source` has ready into `into`; an error counts and reads nothing.
fn read<S: SampleSource>(source: &mut S, into: &mut [i16]) -> usize {
    match source.fill(into) {
        Ok(n) => n,
        Err(_) => {
            HEALTH.source_errors.fetch_add(1, Ordering::Relaxed);
            0
        }
    }
}
