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
//! Memory grows with `L`: `32 L` bytes of correlator state per probe, and `28 L` bytes of
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
//! and of its correlator (`32 L` bytes); per queued record about 1.4 KiB plus, in a
//! `Chain`, `28 L` bytes of sums; once per chain one [`RunBuffer`] (2 KiB) that the
//! correlators borrow in turn, one run each.
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

use crate::config::{ChainConfig, ConfigError};
use crate::correlation::{
    CorrelationResult, CorrelationSums, Correlator, RunBuffer, DEFAULT_LAGS, MAX_RUN_FRAMES,
};
use crate::flags::Flags;
use crate::phase::{run_lanes, Edge, EdgeSink, Lanes, PhaseDetector, RunCounts};
use crate::probe_config::{DetectorConfig, ProbeConfig, TipConfig};
use crate::record::{ProbeWindow, TipStats};
use crate::station::{FrontRecord, ProfileRecord, Station, MAX_DECAY_POINTS};
use crate::tip_stats::TipAccumulator;
use crate::window::WindowPolicy;
use crate::MAX_CHANNELS;

/// Longest run of frames handed to the tips at once: keeps a run of a wide frame in L1 (and
/// bounds the correlators' buffer of leading-tip edges).
const RUN_FRAMES: usize = MAX_RUN_FRAMES;

/// Feeds a tip's statistics and one more sink with the same edges.
struct Feed<'a, S>(&'a mut TipAccumulator, S);

impl<S: EdgeSink> EdgeSink for Feed<'_, S> {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        self.0.edge(edge);
        self.1.edge(edge);
    }
}

/// Finds the frame at which the `need`-th bubble (air -> water interface) closes.
struct BubbleCounter {
    need: u32,
    seen: u32,
    at: Option<u64>,
}

impl EdgeSink for BubbleCounter {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        if !edge.to_air && self.at.is_none() {
            self.seen += 1;
            if self.seen >= self.need {
                self.at = Some(edge.frame);
            }
        }
    }
}

/// Run a copy of `detector` over `run` (frames from `first`) to find where the `need`-th
/// bubble closes. Apart from the caller, so the copy takes stack only when it is made.
#[inline(never)]
fn look_ahead(
    detector: &PhaseDetector,
    run: &[i16],
    channels: usize,
    first: u64,
    need: u32,
) -> BubbleCounter {
    let mut peek = detector.clone();
    let mut counter = BubbleCounter {
        need,
        seen: 0,
        at: None,
    };
    peek.process(run, channels, first, &mut counter);
    counter
}

/// The queue is full: drain it with [`GenericChain::poll`] and call again.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct QueueFull;

#[derive(Clone, Debug)]
struct Tip {
    detector: PhaseDetector,
    stats: TipAccumulator,
}

impl Tip {
    /// All zero bytes (an unused probe slot).
    const ZERO: Self = Tip {
        detector: PhaseDetector::ZERO,
        stats: TipAccumulator::ZERO,
    };

    /// Start afresh, in place, for `cfg`.
    fn configure(&mut self, cfg: &TipConfig, det: &DetectorConfig, initial_air: bool) {
        self.detector = PhaseDetector::new(cfg, det, initial_air);
        self.stats = TipAccumulator::new();
    }

    #[inline]
    fn run<S: EdgeSink>(&mut self, frames: &[i16], channels: usize, first: u64, extra: S) {
        let n = (frames.len() / channels) as u32;
        let mut sink = Feed(&mut self.stats, extra);
        let counts = self.detector.process(frames, channels, first, &mut sink);
        self.stats.add_run(n, counts);
    }

    /// Close the window into `out` (in place).
    fn close_into(&mut self, out: &mut TipStats) {
        self.stats.close_into(out, self.detector.levels())
    }
}

/// One probe's state. The trailing tip and the correlator are always there (an `Option`
/// would take the same room) and in use for a dual-tip probe only, so a probe slot can be
/// (re)built in place.
#[derive(Clone, Debug)]
struct ProbeState<const L: usize> {
    lead: Tip,
    trail: Tip,
    corr: Correlator<L>,
    /// The probe has a trailing tip (and so a correlator).
    dual: bool,
}

impl<const L: usize> ProbeState<L> {
    /// All zero bytes (an unused probe slot).
    const ZERO: Self = ProbeState {
        lead: Tip::ZERO,
        trail: Tip::ZERO,
        corr: Correlator::ZERO,
        dual: false,
    };

    /// Start afresh, in place, for probe `p` (the state a new chain has).
    fn configure(&mut self, p: &ProbeConfig, det: &DetectorConfig, initial_air: bool) {
        self.lead.configure(&p.leading, det, initial_air);
        self.dual = p.trailing.is_some();
        if let Some(t) = &p.trailing {
            self.trail.configure(t, det, initial_air);
            self.corr.restart(p.max_lag, 0, initial_air, initial_air);
        }
    }

    fn trail(&self) -> Option<&Tip> {
        self.dual.then_some(&self.trail)
    }

    fn corr(&self) -> Option<&Correlator<L>> {
        self.dual.then_some(&self.corr)
    }

    /// The leading tip, and the trailing tip and correlator of a dual-tip probe.
    fn parts_mut(&mut self) -> (&mut Tip, Option<&mut Tip>, Option<&mut Correlator<L>>) {
        let ProbeState {
            lead,
            trail,
            corr,
            dual,
        } = self;
        if *dual {
            (lead, Some(trail), Some(corr))
        } else {
            (lead, None, None)
        }
    }
}

/// The probes of a chain: `P` slots, the first `len` in use. The slots stay in place (a
/// configuration rebuilds them where they are), so no probe's state is ever moved.
#[derive(Clone, Debug)]
struct Probes<const P: usize, const L: usize> {
    slots: [ProbeState<L>; P],
    len: usize,
}

impl<const P: usize, const L: usize> Probes<P, L> {
    const fn new() -> Self {
        Probes {
            slots: [ProbeState::ZERO; P],
            len: 0,
        }
    }

    fn configure(&mut self, probes: &[ProbeConfig], det: &DetectorConfig, initial_air: bool) {
        self.len = 0;
        for (slot, p) in self.slots.iter_mut().zip(probes) {
            slot.configure(p, det, initial_air);
            self.len += 1;
        }
    }

    fn in_use(&self) -> &[ProbeState<L>] {
        self.slots.get(..self.len).unwrap_or(&[])
    }

    fn iter(&self) -> core::slice::Iter<'_, ProbeState<L>> {
        self.in_use().iter()
    }

    fn iter_mut(&mut self) -> core::slice::IterMut<'_, ProbeState<L>> {
        self.slots.get_mut(..self.len).unwrap_or(&mut []).iter_mut()
    }

    fn get(&self, i: usize) -> Option<&ProbeState<L>> {
        self.in_use().get(i)
    }

    fn get_mut(&mut self, i: usize) -> Option<&mut ProbeState<L>> {
        self.slots.get_mut(..self.len)?.get_mut(i)
    }

    fn len(&self) -> usize {
        self.len
    }

    fn is_empty(&self) -> bool {
        self.len == 0
    }
}

/// The closed windows waiting to be polled, oldest first, in `P` slots: records without
/// their raw correlation sums (those wait in the [`SumsStore`], if the chain keeps them;
/// a record type of no lag slots), built in place in their slot and lent out from there.
#[derive(Clone, Debug)]
struct RecordQueue<const P: usize> {
    slots: [ProbeWindow<0>; P],
    head: usize,
    len: usize,
}

impl<const P: usize> RecordQueue<P> {
    /// An empty slot, all zero bytes (so an empty chain's `static` stays in `.bss`): the
    /// options are `Some` of values whose own options are `None` (a `None` of the outer
    /// ones would be a non-zero niche value). Slots are written in full before they are
    /// read.
    const EMPTY_SLOT: ProbeWindow<0> = ProbeWindow {
        trail: Some(TipStats::ZERO),
        correlation: Some(CorrelationResult::none(0)),
        ..ProbeWindow::<0>::ZERO
    };

    const fn new() -> Self {
        RecordQueue {
            slots: [Self::EMPTY_SLOT; P],
            head: 0,
            len: 0,
        }
    }

    fn capacity(&self) -> usize {
        P
    }

    fn len(&self) -> usize {
        self.len
    }

    fn clear(&mut self) {
        self.head = 0;
        self.len = 0;
    }

    /// The oldest record.
    fn front(&self) -> Option<&ProbeWindow<0>> {
        if self.len == 0 {
            return None;
        }
        self.slots.get(self.head)
    }

    /// The record `pos` places after the oldest.
    fn get(&self, pos: usize) -> Option<&ProbeWindow<0>> {
        if pos >= self.len {
            return None;
        }
        self.slots
            .get((self.head + pos).checked_rem(P).unwrap_or(0))
    }

    /// Drop the oldest record.
    fn pop_front(&mut self) {
        if self.len > 0 {
            self.head = (self.head + 1).checked_rem(P).unwrap_or(0);
            self.len -= 1;
        }
    }

    /// The slot of a new newest record, to be filled in place (`None` when full).
    fn push_slot(&mut self) -> Option<&mut ProbeWindow<0>> {
        if self.len >= P {
            return None;
        }
        let at = (self.head + self.len).checked_rem(P).unwrap_or(0);
        self.len += 1;
        self.slots.get_mut(at)
    }
}

/// The raw correlation sums of the queued records that have them, oldest first, in up to
/// `S` slots (none at all for `S = 0`).
#[derive(Clone, Debug)]
struct SumsStore<const L: usize, const S: usize> {
    slots: [Option<CorrelationSums<L>>; S],
    head: usize,
    len: usize,
}

impl<const L: usize, const S: usize> SumsStore<L, S> {
    const NONE: Option<CorrelationSums<L>> = None;

    const fn new() -> Self {
        SumsStore {
            slots: [Self::NONE; S],
            head: 0,
            len: 0,
        }
    }

    fn clear(&mut self) {
        for s in self.slots.iter_mut() {
            *s = None;
        }
        self.head = 0;
        self.len = 0;
    }

    /// Keep `sums` (dropped when there is no room: never so in a chain, which has a slot
    /// for every record it can queue, or none at all).
    fn push(&mut self, sums: CorrelationSums<L>) {
        let at = (self.head + self.len).checked_rem(S).unwrap_or(0);
        if self.len < S {
            if let Some(slot) = self.slots.get_mut(at) {
                *slot = Some(sums);
                self.len += 1;
            }
        }
    }

    fn pop(&mut self) -> Option<CorrelationSums<L>> {
        if self.len == 0 {
            return None;
        }
        let out = self.slots.get_mut(self.head)?.take();
        self.head = (self.head + 1).checked_rem(S).unwrap_or(0);
        self.len -= 1;
        out
    }
}

/// Room for a station: `T` (0 or 1) slots of station state, and whether it is in use.
#[derive(Clone, Debug)]
struct StationSlot<const P: usize, const T: usize> {
    slot: [Station<P>; T],
    on: bool,
}

impl<const P: usize, const T: usize> StationSlot<P, T> {
    const fn new() -> Self {
        StationSlot {
            slot: [Station::<P>::EMPTY; T],
            on: false,
        }
    }

    fn as_ref(&self) -> Option<&Station<P>> {
        self.slot.first().filter(|_| self.on)
    }

    fn as_mut(&mut self) -> Option<&mut Station<P>> {
        self.slot.first_mut().filter(|_| self.on)
    }

    fn is_some(&self) -> bool {
        self.as_ref().is_some()
    }

    fn is_none(&self) -> bool {
        self.as_ref().is_none()
    }
}

/// The statistics path: tips, correlators, windows (and the station, which it cuts and
/// closes windows for).
#[derive(Clone, Debug)]
struct Stats<const P: usize, const L: usize, const S: usize, const T: usize> {
    config: ChainConfig<P>,
    probes: Probes<P, L>,
    queue: RecordQueue<P>,
    sums: SumsStore<L, S>,
    /// The leading tips' edges of one run of one probe (tip-by-tip runs).
    run: RunBuffer,
    frame: u64,
    window_start: u64,
    /// Bubbles closed by the reference tip in the open window ([`WindowPolicy::Bubbles`]).
    window_bubbles: u32,
    /// [`WindowPolicy::AfterFront`]: the pre-front record is still open.
    pre_front_open: bool,
    station: StationSlot<P, T>,
}

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
pub type LeanChain<const P: usize, const L: usize = DEFAULT_LAGS> = GenericChain<P, L, 0, 0, 0>;

/// The signal chain, with all its sizes: up to `P` probes, `L` correlation lag slots, a
/// delay ring of `D` samples, the raw correlation sums of `S` queued records (`P`: every
/// record keeps them; 0: none does) and `T` station slots (1: a station can be configured,
/// given a delay ring; 0: not). Use it through [`Chain`] (`S = P`, `T = 1`) or
/// [`LeanChain`] (`S = 0`, `T = 0`, `D = 0`).
#[derive(Clone, Debug)]
pub struct GenericChain<
    const P: usize,
    const L: usize,
    const D: usize,
    const S: usize,
    const T: usize,
> {
    stats: Stats<P, L, S, T>,
    ring: Ring<D>,
    partial: [i16; MAX_CHANNELS],
    partial_len: usize,
    finished: bool,
}

impl<const P: usize, const L: usize, const S: usize, const T: usize> GenericChain<P, L, 0, S, T> {
    /// Build a chain without a delay ring (steady flows); the configuration is checked
    /// first. A station chain needs [`with_delay_ring`](GenericChain::with_delay_ring).
    /// The chain is built by value (tens of KiB): on a small device use
    /// [`empty`](GenericChain::empty) and [`configure`](GenericChain::configure).
    pub fn new(config: ChainConfig<P>) -> Result<Self, ConfigError> {
        Self::with_delay_ring(config)
    }
}

impl<const P: usize, const L: usize, const D: usize, const S: usize, const T: usize>
    GenericChain<P, L, D, S, T>
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
        const {
            assert!(
                S == 0 || S >= P,
                "S keeps the sums of every queued record (S >= P) or of none (0)"
            )
        };
        const { assert!(T <= 1, "a chain has at most one station") };
        GenericChain {
            stats: Stats {
                config: ChainConfig::placeholder(),
                probes: Probes::new(),
                queue: RecordQueue::new(),
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
    /// levels before it). Refused (false) for a tip that does not exist and while a partial
    /// frame is pending.
    pub fn set_tip_levels(
        &mut self,
        probe: usize,
        trailing: bool,
        levels: crate::levels::Levels,
    ) -> bool {
        if self.partial_len > 0 {
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

impl<const P: usize, const L: usize, const S: usize, const T: usize> Stats<P, L, S, T> {
    fn has_room(&self) -> bool {
        self.queue.capacity() - self.queue.len() >= self.probes.len()
            && self.station.as_ref().is_none_or(Station::has_profile_room)
    }

    /// The end (exclusive) of the open window, when known.
    fn window_end(&self) -> Option<u64> {
        // (Only front-relative policies open a pre-front record.)
        if self.pre_front_open {
            return self.station.as_ref().and_then(Station::cut);
        }
        self.config.window.end_of_window_from(self.window_start)
    }

    /// Fix the station's arrival when the statistics reach it, and drop an empty pre-front
    /// record (a front at frame 0).
    fn settle_pre_front(&mut self) {
        let frame = self.frame;
        if let Some(s) = self.station.as_mut() {
            s.lock_if_due(frame);
        }
        let locked = self.station.as_ref().and_then(Station::locked);
        if self.pre_front_open && locked.is_some() && self.frame == self.window_start {
            self.pre_front_open = false;
        }
    }

    /// Process whole frames; returns the number processed (fewer only on back-pressure).
    fn run_frames(&mut self, data: &[i16]) -> usize {
        let n = self.config.channels as usize;
        let total = data.len() / n;
        let mut done = 0;
        while done < total {
            self.settle_pre_front();
            let to_end = self
                .window_end()
                .map_or(u64::MAX, |e| e.saturating_sub(self.frame));
            let mut len = ((total - done) as u64).min(to_end).min(RUN_FRAMES as u64) as usize;
            // Learning events (at the same frames for every learning tip) end runs too.
            if let Some(stop) = self.next_learn_stop() {
                len = len.min(stop.saturating_sub(self.frame).max(1) as usize);
            }
            let mut closes = len as u64 == to_end;
            let mut bubbles = 0;
            // The pre-front record ends at the arrival, never by a bubble count.
            let counting = !self.pre_front_open;
            if let (true, WindowPolicy::Bubbles { count, probe, .. }) =
                (counting, self.config.window)
            {
                // Look ahead with a copy of the reference tip's detector.
                let need = count.saturating_sub(self.window_bubbles).max(1);
                let run = data.get(done * n..(done + len) * n).unwrap_or(&[]);
                if let Some(p) = self.probes.get(probe as usize) {
                    let counter = look_ahead(&p.lead.detector, run, n, self.frame, need);
                    bubbles = counter.seen;
                    if let Some(e) = counter.at {
                        let upto = e.saturating_add(1).saturating_sub(self.frame);
                        len = (upto as usize).clamp(1, len);
                        closes = true;
                    }
                }
            }
            if closes && !self.has_room() {
                break;
            }
            let Some(run) = data.get(done * n..(done + len) * n) else {
                break;
            };
            self.run_probes(run, n, self.frame);
            self.frame += len as u64;
            self.window_bubbles = self.window_bubbles.saturating_add(bubbles);
            done += len;
            if closes {
                self.close_window(false);
            }
        }
        done
    }

    /// The next learning event of any tip (all learning tips share the period).
    fn next_learn_stop(&self) -> Option<u64> {
        self.probes
            .iter()
            .flat_map(|p| core::iter::once(&p.lead).chain(p.trail()))
            .filter_map(|t| t.detector.next_stop(self.frame))
            .min()
    }

    /// Run every tip over one run of whole frames (no learning event inside): frame-major
    /// over all channels at once for the usual channel counts, tip by tip otherwise. Both
    /// give the same records.
    fn run_probes(&mut self, run: &[i16], channels: usize, first: u64) {
        // The frame-major lanes pay off where 64-bit masks and wide vector units are cheap;
        // a 32-bit core (Cortex-M4) splits every 64-bit mask operation and spills, so it
        // runs the per-tip loop, which keeps one tip's state in registers.
        if cfg!(target_pointer_width = "32") {
            return self.run_tip_by_tip(run, channels, first);
        }
        match channels {
            2 => self.run_frame_major::<2>(run, first),
            4 => self.run_frame_major::<4>(run, first),
            8 => self.run_frame_major::<8>(run, first),
            16 => self.run_frame_major::<16>(run, first),
            32 => self.run_frame_major::<32>(run, first),
            64 => self.run_frame_major::<64>(run, first),
            _ => self.run_tip_by_tip(run, channels, first),
        }
    }

    fn run_tip_by_tip(&mut self, run: &[i16], n: usize, first: u64) {
        // One probe at a time, so the probes' correlators share one buffer.
        let buf = &mut self.run;
        for p in self.probes.iter_mut() {
            let (lead, trail, corr) = p.parts_mut();
            match (trail, corr) {
                (Some(t), Some(c)) => {
                    c.begin_run(first, buf);
                    lead.run(run, n, first, c.lead(buf));
                    t.run(run, n, first, c.trail(buf));
                    c.end_run(buf);
                }
                (Some(t), None) => {
                    lead.run(run, n, first, ());
                    t.run(run, n, first, ());
                }
                (None, _) => lead.run(run, n, first, ()),
            }
        }
    }

    fn run_frame_major<const W: usize>(&mut self, run: &[i16], first: u64) {
        let frames = (run.len() / W) as u32;
        let mut lanes = Lanes::<W>::new();
        // The tip reading each channel: (probe, trailing?).
        let mut owner: [Option<(usize, bool)>; W] = [None; W];
        for (i, p) in self.probes.iter_mut().enumerate() {
            let (lead, trail, _) = p.parts_mut();
            for (trailing, tip) in [(false, Some(lead)), (true, trail)] {
                if let Some(tip) = tip {
                    tip.detector.observe(run, W, first);
                    let (ch, lane) = tip.detector.lane();
                    lanes.load(ch, lane, tip.detector.is_air());
                    if let Some(o) = owner.get_mut(ch) {
                        *o = Some((i, trailing));
                    }
                }
            }
        }
        let probes = &mut self.probes;
        let rails = (
            self.config.detector.rail_low,
            self.config.detector.rail_high,
        );
        run_lanes(run, &mut lanes, rails, first, |j, e| {
            let Some(&Some((i, trailing))) = owner.get(j) else {
                return;
            };
            let Some((lead, trail, corr)) = probes.get_mut(i).map(ProbeState::parts_mut) else {
                return;
            };
            // Edges come in time order (lanes in channel order within a frame): the
            // correlators take them as they come, no run buffer.
            match (trailing, trail, corr) {
                (false, _, Some(c)) => Feed(&mut lead.stats, c.lead_in_order()).edge(e),
                (false, _, None) => lead.stats.edge(e),
                (true, Some(t), Some(c)) => Feed(&mut t.stats, c.trail_in_order()).edge(e),
                (true, Some(t), None) => t.stats.edge(e),
                (true, None, _) => {}
            }
        });
        for p in probes.iter_mut() {
            let (lead, trail, _) = p.parts_mut();
            for tip in core::iter::once(lead).chain(trail) {
                let (ch, lane) = tip.detector.lane();
                let get = |a: &[u32; W]| a.get(ch).copied().unwrap_or(0);
                tip.detector
                    .set_air(lanes.air.get(ch).is_some_and(|&a| a != 0));
                let counts = RunCounts {
                    air: get(&lanes.air_n),
                    rail: get(&lanes.rail),
                    unlearnt: if lane.held { frames } else { 0 },
                };
                tip.stats.add_run(frames, counts);
                tip.detector.end_run_at(first + frames as u64);
            }
        }
    }

    /// Hand the window just closed to the station: each probe's void fraction and flags,
    /// from its record (the newest records of the queue, one per probe in order). Apart
    /// from `close_window`, so only a station chain's stack holds the list.
    #[inline(never)]
    fn slice_station(&mut self, partial: bool) {
        // At most P probes (and a station takes at most MAX_STATION_PROBES of them).
        let mut lead_c = [(None, 0.0f32, Flags::NONE); P];
        let probes = self.probes.len();
        let k = probes.min(P).min(crate::front::MAX_STATION_PROBES);
        let first = self.queue.len().saturating_sub(probes);
        for (i, slot) in lead_c.iter_mut().enumerate().take(k) {
            if let Some(rec) = self.queue.get(first + i) {
                let sigma = rec.lead.void_fraction_sigma().unwrap_or(0.0);
                *slot = (rec.lead.void_fraction(), sigma, rec.flags);
            }
        }
        if let Some(s) = self.station.as_mut() {
            s.slice(self.window_start, self.frame, &lead_c[..k], partial);
        }
    }

    fn close_window(&mut self, partial: bool) {
        let frame = self.frame;
        if let Some(s) = self.station.as_mut() {
            s.lock_if_due(frame);
        }
        let pre = self.pre_front_open;
        let locked = self.station.as_ref().and_then(Station::locked);
        let since_front = self
            .station
            .as_ref()
            .and_then(|s| s.since_front(self.window_start));
        let after_front = self.config.window.counts_from_front(self.station.is_some());
        let late_start =
            after_front && !pre && locked.is_some_and(|(a, w)| self.window_start == w && w > a);
        let det = &self.config.detector;
        for (i, p) in self.probes.iter_mut().enumerate() {
            // Room was checked before the window was processed (the sums store has a slot
            // for every record the queue can hold, or keeps none). Were the queue full, the
            // oldest record would give way.
            if self.queue.len() >= self.queue.capacity() {
                if self.queue.front().is_some_and(|r| r.correlation.is_some()) {
                    let _ = self.sums.pop();
                }
                self.queue.pop_front();
            }
            let Some(rec) = self.queue.push_slot() else {
                break;
            };
            // The record is built in its queue slot.
            let (lead_tip, trail_tip, corr) = p.parts_mut();
            rec.probe = i as u8;
            rec.start = self.window_start;
            rec.end = self.frame;
            rec.since_front = since_front;
            rec.correlation_sums = None;
            lead_tip.close_into(&mut rec.lead);
            match trail_tip {
                Some(t) => {
                    let slot = rec.trail.get_or_insert(TipStats::ZERO);
                    t.close_into(slot);
                }
                None => rec.trail = None,
            }
            let mut flags = rec.lead.flags;
            flags.set_if(Flags::PARTIAL_WINDOW, partial);
            flags.set_if(Flags::PRE_FRONT, pre);
            flags.set_if(Flags::LATE_FRONT_START, late_start);
            if let Some(t) = &rec.trail {
                flags.set_if(Flags::TRAILING_STUCK, t.flags.contains(Flags::STUCK));
            }
            let (correlation, sums) = match (corr, &rec.trail) {
                (Some(c), Some(t)) => {
                    let (result, sums) = if S == 0 {
                        // No sums kept: analyse them in the correlator, no copy made.
                        let min_peak = det.min_peak_coefficient;
                        (c.close_analysed(self.frame, min_peak, &mut flags), None)
                    } else {
                        let sums = c.close(self.frame, &mut flags);
                        let (result, f) = sums.analyse(det.min_peak_coefficient);
                        flags |= f;
                        (result, Some(sums))
                    };
                    flags.set_if(
                        Flags::FEW_BUBBLES,
                        rec.lead.bubbles.min(t.bubbles) < det.min_bubbles,
                    );
                    (Some(result), sums)
                }
                _ => (None, None),
            };
            rec.flags = flags;
            rec.correlation = correlation;
            if let Some(sums) = sums {
                self.sums.push(sums);
            }
        }
        if let (true, false, Some(since)) = (self.station.is_some(), pre, since_front) {
            if since >= 0 {
                self.slice_station(partial);
            }
        }
        self.pre_front_open = false;
        self.window_start = self.frame;
        self.window_bubbles = 0;
    }
}
