//! The streaming chain: interleaved samples in, per-probe window records out.
//!
//! ```text
//! push(samples) -> [partial frame] -> runs of whole frames (cut at window ends)
//!   per probe: leading tip  PhaseDetector -> TipAccumulator
//!              trailing tip PhaseDetector -> TipAccumulator
//!   at a window end: one ProbeWindow per probe -> queue -> poll()
//! ```
//!
//! Records do not depend on how the caller splits the samples into blocks: every decision
//! (learning events, window ends) is taken at absolute frame indices, and a frame split
//! across two pushes is completed before it is processed. When the caller does not drain
//! the queue, `push` stops at the next window end and says how much it consumed
//! (back-pressure, never a silent drop).

use crate::config::{ChainConfig, ConfigError, DetectorConfig, TipConfig};
use crate::flags::Flags;
use crate::phase::PhaseDetector;
use crate::record::{ProbeWindow, TipStats};
use crate::tip_stats::TipAccumulator;
use crate::MAX_CHANNELS;
use heapless::{Deque, Vec};

/// Longest run of frames handed to the tips at once: keeps a run of a wide frame in L1.
const RUN_FRAMES: usize = 1024;

/// The queue is full: drain it with [`Chain::poll`] and call again.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct QueueFull;

#[derive(Clone, Debug)]
struct Tip {
    detector: PhaseDetector,
    stats: TipAccumulator,
}

impl Tip {
    fn new(cfg: &TipConfig, det: &DetectorConfig, initial_air: bool) -> Self {
        Tip {
            detector: PhaseDetector::new(cfg, det, initial_air),
            stats: TipAccumulator::new(),
        }
    }

    #[inline]
    fn run(&mut self, frames: &[i16], channels: usize, first: u64) {
        let n = (frames.len() / channels) as u32;
        let counts = self
            .detector
            .process(frames, channels, first, &mut self.stats);
        self.stats.add_run(n, counts);
    }

    fn close(&mut self) -> TipStats {
        self.stats.close(self.detector.levels())
    }
}

#[derive(Clone, Debug)]
struct ProbeState {
    lead: Tip,
    trail: Option<Tip>,
}

/// The signal chain of up to `P` probes.
#[derive(Clone, Debug)]
pub struct Chain<const P: usize> {
    config: ChainConfig<P>,
    probes: Vec<ProbeState, P>,
    queue: Deque<ProbeWindow, P>,
    frame: u64,
    window_start: u64,
    partial: [i16; MAX_CHANNELS],
    partial_len: usize,
    finished: bool,
}

impl<const P: usize> Chain<P> {
    /// Build a chain; the configuration is checked first.
    pub fn new(config: ChainConfig<P>) -> Result<Self, ConfigError> {
        const { assert!(P > 0, "a chain needs room for at least one probe") };
        config.validate()?;
        let mut probes = Vec::new();
        for p in &config.probes {
            let lead = Tip::new(&p.leading, &config.detector, config.initial_air);
            let trail = p
                .trailing
                .as_ref()
                .map(|t| Tip::new(t, &config.detector, config.initial_air));
            // Cannot fail: config.probes has the same capacity.
            let _ = probes.push(ProbeState { lead, trail });
        }
        Ok(Chain {
            config,
            probes,
            queue: Deque::new(),
            frame: 0,
            window_start: 0,
            partial: [0; MAX_CHANNELS],
            partial_len: 0,
            finished: false,
        })
    }

    /// The configuration in use.
    pub fn config(&self) -> &ChainConfig<P> {
        &self.config
    }

    /// Frames processed so far (the sample clock since the run started).
    pub fn frames(&self) -> u64 {
        self.frame
    }

    /// Samples of an incomplete frame held for the next push.
    pub fn pending_samples(&self) -> usize {
        self.partial_len
    }

    /// Push interleaved samples of any length. Returns how many samples were consumed: all
    /// of them unless the record queue filled up, in which case drain it with [`poll`] and
    /// push the rest. Nothing is consumed after [`finish`].
    ///
    /// [`poll`]: Chain::poll
    /// [`finish`]: Chain::finish
    pub fn push(&mut self, samples: &[i16]) -> usize {
        if self.finished {
            return 0;
        }
        let n = self.config.channels as usize;
        let mut used = 0;
        if self.partial_len > 0 {
            let need = n - self.partial_len;
            if samples.len() < need {
                self.partial[self.partial_len..self.partial_len + samples.len()]
                    .copy_from_slice(samples);
                self.partial_len += samples.len();
                return samples.len();
            }
            let mut frame = self.partial;
            frame[self.partial_len..n].copy_from_slice(&samples[..need]);
            if self.process_frames(&frame[..n]) == 0 {
                return 0;
            }
            self.partial_len = 0;
            used = need;
        }
        let rest = &samples[used..];
        let whole = rest.len() / n;
        let done = self.process_frames(&rest[..whole * n]);
        used += done * n;
        if done == whole {
            let tail = &rest[whole * n..];
            self.partial[..tail.len()].copy_from_slice(tail);
            self.partial_len = tail.len();
            used += tail.len();
        }
        used
    }

    /// Take the oldest finished record, if any.
    pub fn poll(&mut self) -> Option<ProbeWindow> {
        self.queue.pop_front()
    }

    /// End the record: close the open window (flagged partial when the policy wanted a
    /// longer one). An incomplete last frame is dropped. Call [`poll`](Chain::poll) after.
    pub fn finish(&mut self) -> Result<(), QueueFull> {
        if self.finished {
            return Ok(());
        }
        if self.frame > self.window_start {
            if !self.has_room() {
                return Err(QueueFull);
            }
            let partial = self
                .config
                .window
                .end_of_window_from(self.window_start)
                .is_some();
            self.close_window(partial);
        }
        self.finished = true;
        Ok(())
    }

    fn has_room(&self) -> bool {
        self.queue.capacity() - self.queue.len() >= self.probes.len()
    }

    /// Process whole frames; returns the number processed (fewer only on back-pressure).
    fn process_frames(&mut self, data: &[i16]) -> usize {
        let n = self.config.channels as usize;
        let total = data.len() / n;
        let mut done = 0;
        while done < total {
            let to_end = self
                .config
                .window
                .end_of_window_from(self.window_start)
                .map_or(u64::MAX, |e| e - self.frame);
            let len = ((total - done) as u64).min(to_end).min(RUN_FRAMES as u64) as usize;
            let closes = len as u64 == to_end;
            if closes && !self.has_room() {
                break;
            }
            let run = &data[done * n..(done + len) * n];
            for p in self.probes.iter_mut() {
                p.lead.run(run, n, self.frame);
                if let Some(t) = p.trail.as_mut() {
                    t.run(run, n, self.frame);
                }
            }
            self.frame += len as u64;
            done += len;
            if closes {
                self.close_window(false);
            }
        }
        done
    }

    fn close_window(&mut self, partial: bool) {
        for (i, p) in self.probes.iter_mut().enumerate() {
            let lead = p.lead.close();
            let trail = p.trail.as_mut().map(Tip::close);
            let mut flags = lead.flags;
            flags.set_if(Flags::PARTIAL_WINDOW, partial);
            if let Some(t) = &trail {
                flags.set_if(Flags::TRAILING_STUCK, t.flags.contains(Flags::STUCK));
            }
            let rec = ProbeWindow {
                probe: i as u8,
                start: self.window_start,
                end: self.frame,
                lead,
                trail,
                flags,
            };
            // Room was checked before the window was processed.
            let _ = self.queue.push_back(rec);
        }
        self.window_start = self.frame;
    }
}
