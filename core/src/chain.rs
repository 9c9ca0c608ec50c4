//! The streaming chain: interleaved samples in, per-probe window records out.
//!
//! ```text
//! push(samples) -> [partial frame] -> runs of whole frames (cut at window ends)
//!   per probe: leading tip  PhaseDetector -> TipAccumulator + Correlator (leading side)
//!              trailing tip PhaseDetector -> TipAccumulator + Correlator (trailing side)
//!   at a window end: one ProbeWindow per probe -> queue -> poll()
//! ```
//!
//! `Chain<P, L>` holds up to `P` probes; `L` (default [`DEFAULT_LAGS`] = 256) is the number
//! of correlation lag slots of its dual-tip probes, so the largest lag a probe can use is
//! `L - 1` frames: a probe's `max_lag` above that is capped (the record's
//! [`CorrelationResult::max_lag`](crate::CorrelationResult::max_lag) says what was used).
//! Memory grows with `L`: `20 L` bytes of correlator state per probe, and `28 L` bytes of
//! raw correlation sums per queued record (7 KiB for `L` = 256).
//!
//! # Memory, and chains for small devices
//!
//! [`Chain<P, L, D>`](Chain) is [`GenericChain<P, L, D, P, 1>`](GenericChain): it keeps the
//! raw [`CorrelationSums`] of every queued record (a host's ensemble statistics need them)
//! and has room for a station. A device that sends only the derived results uses
//! [`LeanChain<P, L>`](LeanChain) = `GenericChain<P, L, 0, 0, 0>`: its records come out
//! with `correlation_sums: None` (everything else bit for bit the same) and it holds no
//! sums and no station state (a station needs a delay ring anyway). Per probe there is
//! the state of its tips (detector, level learner, window statistics: about 1.3 KiB each)
//! and of its correlator (`20 L` bytes); per queued record about 1.4 KiB plus, in a
//! `Chain`, `28 L` bytes of sums; once per chain one [`RunBuffer`] (2 KiB, 256 bytes on a
//! 32-bit core) that the correlators borrow in turn, one run each.
//!
//! A chain is tens of KiB, so a device does not build it on the stack:
//! [`GenericChain::empty`] is a `const fn` whose value is all zero bytes (a `static` of it
//! lands in `.bss`), and [`GenericChain::configure`] builds the state in place, one probe at
//! a time (the stack holds at most one probe's state, a few KiB). [`Chain::new`] and
//! [`Chain::with_delay_ring`] are `empty` plus `configure` (by value, for hosts).
//!
//! Frames of 2, 4, 8, 16, 32 or 64 channels are processed frame-major: every tip of a frame
//! at once, in a fixed-width loop over the channels that the compiler vectorises (see
//! `phase::run_lanes`); other channel counts tip by tip. The two give the same records
//! (tested): each tip's statistics see its edges in time order either way, and the
//! correlators merge the two tips' edges into time order.
//!
//! With [`WindowPolicy::Bubbles`] the end of a window is found before the run is processed:
//! a copy of the reference tip's detector looks ahead over the run for the frame at which
//! the window's last bubble closes, and the run is cut after it.
//!
//! Records do not depend on how the caller splits the samples into blocks: every decision
//! (learning events, window ends) is taken at absolute frame indices, and a frame split
//! across two pushes is completed before it is processed. When the caller does not drain
//! the queue, `push` stops at the next window end and says how much it consumed
//! (back-pressure, never a silent drop).
//!
//! A chain with a station configuration ([`ChainConfig::station`], transient flows) runs
//! the front detectors on the samples as they come and the statistics above `H` frames
//! later, through a delay ring of `D` samples held by the chain (`Chain<P, L, D>`; `D = 0`,
//! the default, for steady flows): see [`crate::station`] for why and how the first window
//! then starts exactly at the front's arrival. Such a chain also gives front records
//! ([`Chain::poll_front`]) and profile records ([`Chain::poll_profile`]).
//!
//! Parts, one file each: `probes` (the tips and correlators of each probe), `queue` (closed
//! records waiting for `poll`, and their raw sums), `stats` (the statistics path: runs of
//! frames through the probes, window ends, closing records); this file holds the chain
//! itself, its delay ring and its public interface.

use crate::config::{ChainConfig, ConfigError};
use crate::correlation::{Correlator, RunBuffer, DEFAULT_LAGS};
use crate::record::ProbeWindow;
use crate::station::{FrontRecord, ProfileRecord, Station, MAX_DECAY_POINTS};
use crate::MAX_CHANNELS;

mod probes;
mod queue;
mod stats;

use probes::Probes;
use queue::{RecordQueue, SumsStore};
use stats::{Closing, StationSlot, Stats};

/// The queue is full: drain it with [`GenericChain::poll`] and call again.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct QueueFull;

/// The delay ring of a station chain: the frames the front path has seen and the statistics
/// not yet, oldest first, in slots of one frame.
#[derive(Clone, Debug)]
struct Ring<const D: usize> {
    buf: [i16; D],
    /// Slots (frames) the buffer holds.
    cap: usize,
    /// Slot of the oldest frame.
    head: usize,
    /// Frames held.
    len: usize,
}

/// The signal chain of up to `P` probes, with `L` correlation lag slots (largest lag
/// `L - 1` frames; see the module documentation) and a delay ring of `D` samples for a
/// station (transient flows; 0 for steady flows): every record keeps its raw correlation
/// sums, and a station can be configured (given a delay ring).
pub type Chain<const P: usize, const L: usize = DEFAULT_LAGS, const D: usize = 0> =
    GenericChain<P, L, D, P, 1>;

/// A chain for small devices (see the [module documentation](self)): `P` probes, `L` lag
/// slots, no delay ring, no station, and records without their raw correlation sums
/// (`correlation_sums: None`; every other field as a [`Chain`]'s, bit for bit).
pub type LeanChain<const P: usize, const L: usize = DEFAULT_LAGS> = GenericChain<P, L, 0, 0, 0, 1>;

/// The signal chain, with all its sizes: up to `P` probes, `L` correlation lag slots, a
/// delay ring of `D` samples, the raw correlation sums of `S` queued records (`P`: every
/// record keeps them; 0: none does), `T` station slots (1: a station can be configured,
/// given a delay ring; 0: not) and a queue of `Q` records (default `P`: a window's records
/// all wait together). Use it through [`Chain`] (`S = P`, `T = 1`) or [`LeanChain`]
/// (`S = 0`, `T = 0`, `D = 0`, `Q = 1`).
///
/// With `Q` below the probe count a window's records are built as they are polled: the
/// chain builds what fits at the window end, `push` stops there (back-pressure), and each
/// [`poll`](Self::poll) builds the next record in the slot it frees. The records are the
/// same, bit for bit; a queue of one record saves a device the other records' room (1.5 KiB
/// each).
#[derive(Clone, Debug)]
pub struct GenericChain<
    const P: usize,
    const L: usize,
    const D: usize,
    const S: usize,
    const T: usize,
    const Q: usize = P,
> {
    stats: Stats<P, L, S, T, Q>,
    ring: Ring<D>,
    partial: [i16; MAX_CHANNELS],
    partial_len: usize,
    finished: bool,
}

impl<const P: usize, const L: usize, const S: usize, const T: usize, const Q: usize>
    GenericChain<P, L, 0, S, T, Q>
{
    /// Build a chain without a delay ring (steady flows); the configuration is checked
    /// first. A station chain needs [`with_delay_ring`](GenericChain::with_delay_ring).
    /// The chain is built by value (tens of KiB): on a small device use
    /// [`empty`](GenericChain::empty) and [`configure`](GenericChain::configure).
    pub fn new(config: ChainConfig<P>) -> Result<Self, ConfigError> {
        Self::with_delay_ring(config)
    }
}

impl<
        const P: usize,
        const L: usize,
        const D: usize,
        const S: usize,
        const T: usize,
        const Q: usize,
    > GenericChain<P, L, D, S, T, Q>
{
    /// The largest correlation lag a probe of this chain can use, frames.
    pub const MAX_LAG: u16 = if L - 1 > u16::MAX as usize {
        u16::MAX
    } else {
        (L - 1) as u16
    };

    /// A chain with no configuration: no probes, it takes no sample (`push` consumes
    /// nothing, `poll` gives nothing) until [`configure`](Self::configure)d. Its value is
    /// all zero bytes, so a `static` of it lands in `.bss` (no copy of it in flash, no
    /// construction on the stack). Its [`config`](Self::config) is a placeholder (zero
    /// channels, no probes, zero values elsewhere) that does not validate.
    pub const fn empty() -> Self {
        const { assert!(P > 0, "a chain needs room for at least one probe") };
        const { assert!(L >= 3 && L <= 1 << 16, "L must lie in 3..=65536") };
        const { assert!(Q > 0, "a chain queues at least one record") };
        const {
            assert!(
                S == 0 || S >= Q,
                "S keeps the sums of every queued record (S >= Q) or of none (0)"
            )
        };
        const { assert!(T <= 1, "a chain has at most one station") };
        GenericChain {
            stats: Stats {
                config: ChainConfig::placeholder(),
                probes: Probes::new(),
                queue: RecordQueue::new(),
                closing: Closing::IDLE,
                sums: SumsStore::new(),
                run: RunBuffer::new(),
                frame: 0,
                window_start: 0,
                window_bubbles: 0,
                pre_front_open: false,
                station: StationSlot::new(),
            },
            ring: Ring {
                buf: [0; D],
                cap: 0,
                head: 0,
                len: 0,
            },
            partial: [0; MAX_CHANNELS],
            partial_len: 0,
            finished: false,
        }
    }

    /// Check `config` and (re)build the chain's state for it in place, as a fresh chain:
    /// whatever the chain held (probes, queued records, samples of a partial frame, a
    /// finished record) is dropped. The probes' state is built one probe at a time, so the
    /// stack holds at most one probe's state (a few KiB), never the chain. On `Err` the
    /// chain is left as it was.
    ///
    /// A station ([`ChainConfig::station`]) needs `D >= (delay_frames + 1) × channels` and a
    /// station slot (`T = 1`).
    pub fn configure(&mut self, config: ChainConfig<P>) -> Result<(), ConfigError> {
        config.validate()?;
        let channels = config.channels as usize;
        if let Some(st) = &config.station {
            let need = (st.delay_frames as u64 + 1).saturating_mul(channels as u64);
            if need > D as u64 {
                return Err(ConfigError::DelayRingTooSmall {
                    need: need.min(u32::MAX as u64) as u32,
                });
            }
            if T == 0 {
                return Err(ConfigError::BadStation);
            }
        }
        let stats = &mut self.stats;
        stats
            .probes
            .configure(&config.probes, &config.detector, config.initial_air);
        stats.queue.clear();
        stats.closing.active = false;
        stats.sums.clear();
        stats.frame = 0;
        stats.window_start = 0;
        stats.window_bubbles = 0;
        stats.pre_front_open = config.window.counts_from_front(config.station.is_some());
        stats.station.on = false;
        if let (Some(st), Some(slot)) = (&config.station, stats.station.slot.first_mut()) {
            slot.configure(st, &config.probes, &config.detector, config.initial_air);
            stats.station.on = true;
        }
        stats.config = config;
        self.ring.cap = D / channels.max(1);
        self.ring.head = 0;
        self.ring.len = 0;
        self.partial_len = 0;
        self.finished = false;
        Ok(())
    }

    /// Build a chain with a delay ring of `D` samples (`Chain<P, L, D>`); the configuration
    /// is checked first. A station ([`ChainConfig::station`]) needs
    /// `D >= (delay_frames + 1) × channels`; without one the ring is unused. The chain is
    /// built by value: [`empty`](Self::empty) and [`configure`](Self::configure) in place.
    pub fn with_delay_ring(config: ChainConfig<P>) -> Result<Self, ConfigError> {
        let mut chain = Self::empty();
        chain.configure(config)?;
        Ok(chain)
    }

    /// The correlation lag range in use for probe `probe`, frames (`None` for a probe
    /// without a trailing tip, or beyond the configuration).
    pub fn max_lag(&self, probe: usize) -> Option<u16> {
        self.stats
            .probes
            .get(probe)?
            .corr()
            .map(Correlator::max_lag)
    }

    /// The configuration in use.
    pub fn config(&self) -> &ChainConfig<P> {
        &self.stats.config
    }

    /// Frames taken in so far (the sample clock since the run started). With a station,
    /// the statistics run [`processed_frames`](Self::processed_frames) behind by the delay.
    pub fn frames(&self) -> u64 {
        match self.stats.station.as_ref() {
            Some(st) => st.front_frame(),
            None => self.stats.frame,
        }
    }

    /// Frames the statistics (windows, correlation) have processed.
    pub fn processed_frames(&self) -> u64 {
        self.stats.frame
    }

    /// Samples of an incomplete frame held for the next push.
    pub fn pending_samples(&self) -> usize {
        self.partial_len
    }

    /// The station's front arrival frame, once fixed (station chains only; see
    /// [`crate::station`]): it is fixed when the statistics reach the front.
    pub fn arrival(&self) -> Option<u64> {
        self.stats
            .station
            .as_ref()
            .and_then(|s| s.locked())
            .map(|(a, _)| a)
    }

    /// Give the leading (`trailing` false) or trailing tip of probe `probe` new levels,
    /// used by the statistics from the next frame they process
    /// ([`processed_frames`](Self::processed_frames), which is [`frames`](Self::frames)
    /// but for a station chain): a host that learnt a record's levels segment by segment
    /// applies each segment's at its first frame (push whole frames up to it first). In a
    /// station chain only the statistics path takes them: its front path, which runs ahead
    /// by the delay, keeps the levels it started with (the front is found against the
    /// levels before it). Refused (false) for a tip that does not exist, while a partial
    /// frame is pending and while a window's records wait to be built (poll them first).
    pub fn set_tip_levels(
        &mut self,
        probe: usize,
        trailing: bool,
        levels: crate::levels::Levels,
    ) -> bool {
        if self.partial_len > 0 || self.stats.closing.active {
            return false;
        }
        let Some(p) = self.stats.probes.get_mut(probe) else {
            return false;
        };
        let (lead, trail, _) = p.parts_mut();
        let tip = if trailing { trail } else { Some(lead) };
        match tip {
            Some(t) => {
                t.detector.set_levels(levels);
                true
            }
            None => false,
        }
    }

    /// The levels the statistics use on a tip of probe `probe` (the leading tip, or the
    /// trailing one), with true if they are fixed rather than learnt; `None` for a tip that
    /// does not exist. The levels are `None` while a learning tip has learnt none.
    pub fn tip_levels(
        &self,
        probe: usize,
        trailing: bool,
    ) -> Option<(Option<crate::levels::Levels>, bool)> {
        let p = self.stats.probes.in_use().get(probe)?;
        let tip = if trailing { p.trail()? } else { &p.lead };
        Some((tip.detector.levels(), tip.detector.levels_fixed()))
    }

    /// Probes in use.
    pub fn probe_count(&self) -> usize {
        self.stats.probes.in_use().len()
    }

    /// What the front detector of probe `probe` knows so far (station chains only).
    pub fn tip_front(&self, probe: usize) -> Option<crate::front::TipFront> {
        self.stats.station.as_ref()?.tip(probe)
    }

    /// The decay series so far, `(seconds since the front, Cmean)` (station chains only).
    pub fn decay_tracker(&self) -> Option<&crate::decay::DecayTracker<MAX_DECAY_POINTS>> {
        self.stats.station.as_ref().map(Station::decay_tracker)
    }

    /// Push interleaved samples of any length. Returns how many samples were consumed: all
    /// of them unless the record queue filled up, in which case drain it with [`poll`] and
    /// push the rest. Nothing is consumed after [`finish`].
    ///
    /// [`poll`]: Self::poll
    /// [`finish`]: Self::finish
    pub fn push(&mut self, samples: &[i16]) -> usize {
        if self.finished || self.stats.probes.is_empty() {
            // Finished, or not configured.
            return 0;
        }
        let n = self.stats.config.channels as usize;
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
    pub fn poll(&mut self) -> Option<ProbeWindow<L>> {
        let rec = self.stats.queue.front()?;
        // Every record with a correlation result has sums, kept in the same order (when the
        // chain keeps them).
        let sums = rec.correlation.and_then(|_| self.stats.sums.pop());
        let out = rec.with_sums(sums);
        self.stats.queue.pop_front();
        self.stats.continue_close();
        Some(out)
    }

    /// Take the oldest finished record without its raw correlation sums (given up if the
    /// chain keeps them), as a record of one lag slot: what a device that only sends the
    /// results takes. It moves about half the bytes of [`poll`](Self::poll)'s record
    /// (`28 L` bytes less) through the caller's stack.
    pub fn poll_lean(&mut self) -> Option<ProbeWindow<1>> {
        self.poll_lean_with(|rec| rec.with_sums(None))
    }

    /// Hand the oldest finished record, without its raw correlation sums (as
    /// [`poll_lean`](Self::poll_lean) gives it, as a record of no lag slots), to `f` where
    /// it lies in the chain's queue, then drop it; `None` when there is none. No copy of
    /// the record is made: what a device that sends each record on at once takes.
    pub fn poll_lean_with<R>(&mut self, f: impl FnOnce(&ProbeWindow<0>) -> R) -> Option<R> {
        let rec = self.stats.queue.front()?;
        if rec.correlation.is_some() {
            // Keep the sums store in step with the queue.
            let _ = self.stats.sums.pop();
        }
        let out = f(rec);
        self.stats.queue.pop_front();
        self.stats.continue_close();
        Some(out)
    }

    /// Take the oldest front record, if any (station chains). The queue holds every front
    /// record of a run (one per probe and one for the station), so it never applies
    /// back-pressure.
    pub fn poll_front(&mut self) -> Option<FrontRecord> {
        self.stats.station.as_mut()?.poll_front()
    }

    /// Take the oldest profile record, if any (station chains; one per window closed after
    /// the front). Like [`poll`](Self::poll), a full queue makes `push` stop.
    pub fn poll_profile(&mut self) -> Option<ProfileRecord> {
        self.stats.station.as_mut()?.poll_profile()
    }

    /// End the record: run the statistics over the frames still in the delay ring, close
    /// the open window (flagged partial when the policy wanted a longer one) and queue the
    /// station's last front records. An incomplete last frame is dropped. Call
    /// [`poll`](Self::poll) (and the other polls) after; on `Err`, drain and call again.
    pub fn finish(&mut self) -> Result<(), QueueFull> {
        if self.finished {
            return Ok(());
        }
        if !self.stats.continue_close() {
            return Err(QueueFull);
        }
        if self.stats.station.is_some() && !self.drain_ring(0) {
            return Err(QueueFull);
        }
        let st = &mut self.stats;
        let frame = st.frame;
        if let Some(s) = st.station.as_mut() {
            s.lock_if_due(frame);
        }
        st.settle_pre_front();
        if st.frame > st.window_start {
            if !st.has_room() {
                return Err(QueueFull);
            }
            let partial = st.config.window.closes_by_itself() && !st.pre_front_open;
            st.close_window(partial);
            if st.closing.active {
                // The rest of its records after polls (the next call goes on from here).
                return Err(QueueFull);
            }
        }
        if let Some(s) = st.station.as_mut() {
            s.finish();
        }
        self.finished = true;
        Ok(())
    }

    /// Process whole frames; returns the number consumed (fewer only on back-pressure).
    fn process_frames(&mut self, data: &[i16]) -> usize {
        if self.stats.station.is_none() {
            return self.stats.run_frames(data);
        }
        let n = self.stats.config.channels as usize;
        let total = data.len() / n;
        let keep = self
            .stats
            .config
            .station
            .as_ref()
            .map_or(0, |s| s.delay_frames as usize);
        let mut used = 0;
        loop {
            // 1. The statistics catch up to `delay` frames behind the front path.
            if !self.drain_ring(keep) {
                return used;
            }
            if used == total {
                return used;
            }
            // 2. The front path takes the next frames into the ring.
            let m = (total - used).min(self.ring.cap - self.ring.len);
            if m == 0 {
                // Unreachable: the ring holds at least delay + 1 frames.
                return used;
            }
            let chunk = &data[used * n..(used + m) * n];
            if let Some(st) = self.stats.station.as_mut() {
                st.front_run(chunk, n);
            }
            self.ring_append(chunk, n);
            used += m;
        }
    }

    /// Run the statistics over the ring's oldest frames until at most `keep` are left.
    /// False on back-pressure.
    fn drain_ring(&mut self, keep: usize) -> bool {
        let n = self.stats.config.channels as usize;
        while self.ring.len > keep {
            let want = (self.ring.len - keep).min(self.ring.cap - self.ring.head);
            let from = self.ring.head * n;
            let Some(piece) = self.ring.buf.get(from..from + want * n) else {
                return false;
            };
            let done = self.stats.run_frames(piece);
            self.ring.head = (self.ring.head + done) % self.ring.cap.max(1);
            self.ring.len -= done;
            if done < want {
                return false;
            }
        }
        true
    }

    /// Copy whole frames to the ring's tail (room was checked).
    fn ring_append(&mut self, frames: &[i16], n: usize) {
        let cap = self.ring.cap.max(1);
        let mut rest = frames;
        while !rest.is_empty() {
            let tail = (self.ring.head + self.ring.len) % cap;
            let take = (rest.len() / n).min(cap - tail);
            let (now, later) = rest.split_at(take * n);
            if let Some(dst) = self.ring.buf.get_mut(tail * n..(tail + take) * n) {
                dst.copy_from_slice(now);
            }
            self.ring.len += take;
            rest = later;
            if take == 0 {
                break;
            }
        }
    }
}
