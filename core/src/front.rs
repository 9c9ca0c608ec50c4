//! Arrival of a surge front at a tip, and at a station of probes.
//!
//! Before the front the tips sit in the layout's `phase_before_front` (usually air: the
//! tips are dry). The front is the first *sustained* change out of that phase. A stray
//! droplet hitting a dry tip, or a stray bubble passing a wet one, is a short excursion and
//! must not count. [`FrontDetector`] confirms a change by either of two rules (each may be
//! switched off):
//!
//! - **hold**: the tip stays in the new phase for at least `hold_frames` frames without an
//!   interface (a tip reached by the water body, or by a solid air pocket);
//! - **burst**: `burst_interfaces` interfaces fall within fewer than `burst_frames` frames
//!   (the bubbly roller of a surge front, in which a tip high in the flow may never hold
//!   water for long, since it sits mostly in air with droplets).
//!
//! The arrival is the first frame of the sustained change: the interface that began it.
//! A change ends only when the old phase is back for at least `settle_frames` frames, so
//! the short returns to the old phase inside a roller (a bubble in the water behind an air
//! front, a gap between droplets) do not split it: with the hold rule the arrival is the
//! first interface of the change that contains the held excursion; with the burst rule, of
//! the change that contains the oldest of the `burst_interfaces` interfaces. A stray
//! droplet or bubble followed by `settle_frames` of the old phase is a change of its own
//! that was not sustained (counted in [`TipFront::false_starts`]) and does not move the
//! arrival, unless it falls inside the burst window of the front (closer than
//! `burst_frames` before it), where it is indistinguishable from the front's first spray.
//!
//! **First contact.** At a frothy front (the nose of a surge is mostly air, water comes in
//! short bursts) the sustained change can begin tens of milliseconds after the tip first
//! met the front: the first contacts each return to the old phase for longer than the
//! settle time, so they count as false starts. [`TipFront::first_contact`] is the first
//! interface of the run of excursions that led to the confirmed change, each beginning no
//! more than `contact_gap_frames` (50 ms by default) after the interface before it: the
//! arrival of the front's nose at the tip. A stray droplet or splash followed by a quiet
//! gap longer than that stays out. The default gap is chosen for this crate (no source):
//! in a froth of C = 0.9 with bubbles at 100 Hz the air between two contacts has a mean of
//! 9 ms, and a gap five times the mean is rare for the gamma-like chord distributions of
//! such flows, while a splash ahead of a front is usually separated from it by far more.
//!
//! Streaming: O(1) work per edge and per [`FrontDetector::advance_to`] (O(`burst`) once, at
//! the confirmation), fixed memory (a ring of the last [`MAX_BURST`] interfaces). Every
//! decision is taken at absolute frame indices, so the result does not depend on how the
//! samples were split into runs: the hold rule is checked both at the next interface and at
//! `advance_to` (the end of each run), and both give the same arrival.
//!
//! Default rule ([`FrontConfig::for_rate`], chosen for this crate; no source, tune per rig):
//! hold 5 ms, settle 5 ms, burst 6 interfaces (three excursions) within 20 ms, contact
//! gap 50 ms. Droplets on
//! a dry tip and bubbles on a wet one mostly last less than a few milliseconds at the
//! velocities of DESIGN.md §1 (0.5–10 m/s, mm-sized particles; common practice, no source),
//! and a tip in the roller of a front sees far more than three particles in 20 ms.

use crate::phase::{Edge, EdgeSink};

/// Largest accepted `burst_interfaces` (the ring of interface frames).
pub const MAX_BURST: usize = 16;

/// Largest number of probes a [`StationFront`] describes (its bit masks).
pub const MAX_STATION_PROBES: usize = 32;

/// The rule that confirms a front (see the module docs).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct FrontConfig {
    /// The phase of the tips before the front (true = air).
    pub before_air: bool,
    /// Hold rule: frames the new phase must hold without an interface; 0 switches it off.
    pub hold_frames: u32,
    /// Burst rule: interfaces that must fall within `burst_frames`; 0 switches it off;
    /// values above [`MAX_BURST`] act as [`MAX_BURST`].
    pub burst_interfaces: u8,
    /// Burst rule: the window, frames (the K interfaces span fewer frames than this).
    pub burst_frames: u32,
    /// Frames the old phase must hold to end a change (0: every excursion is a change).
    pub settle_frames: u32,
    /// First contact: the longest quiet gap, frames, between the contacts of a frothy nose
    /// (an excursion beginning later than this after the interface before it starts a new
    /// run of contacts; see the module docs). 0 makes the first contact the arrival.
    pub contact_gap_frames: u32,
}

impl FrontConfig {
    /// The default rule at `sample_rate_hz` frames per second: hold 5 ms, settle 5 ms,
    /// 6 interfaces within 20 ms, contact gap 50 ms (see the module docs). A non-finite or non-positive rate gives 40 kHz
    /// figures.
    pub fn for_rate(sample_rate_hz: f32, before_air: bool) -> Self {
        let fs = if sample_rate_hz.is_finite() && sample_rate_hz > 0.0 {
            sample_rate_hz
        } else {
            40_000.0
        };
        // `as` saturates: no overflow for absurd rates.
        let frames = |seconds: f32| ((fs * seconds + 0.5) as u32).max(1);
        FrontConfig {
            before_air,
            hold_frames: frames(0.005),
            burst_interfaces: 6,
            burst_frames: frames(0.020),
            settle_frames: frames(0.005),
            contact_gap_frames: frames(0.050),
        }
    }
}

/// Which rule confirmed a front.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum FrontRule {
    /// The new phase held for `hold_frames`.
    Hold,
    /// `burst_interfaces` interfaces within `burst_frames`.
    Burst,
}

/// What a tip's detector knows about the front so far.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct TipFront {
    /// Frame of the front's arrival (absolute index), once confirmed.
    pub arrival: Option<u64>,
    /// The rule that confirmed it.
    pub rule: Option<FrontRule>,
    /// Frame of the tip's first interface of the record, if any.
    pub first_interface: Option<u64>,
    /// Interfaces seen so far (saturating).
    pub interfaces: u32,
    /// Changes out of the old phase before the arrival that were not sustained (stray
    /// droplets or bubbles); counted once the front is confirmed.
    pub false_starts: u32,
    /// The number of frames the detector must have seen to confirm the front (a property of
    /// the samples, not of how they were split into runs): `leave + hold_frames` for the
    /// hold rule (the frame at which the excursion had held long enough), one past the
    /// confirming interface for the burst rule. `confirmed_at - arrival` is the
    /// confirmation delay that [`crate::station`] bounds with its delay line.
    pub confirmed_at: Option<u64>,
    /// Frame of the tip's first contact with the front, once confirmed: the first interface
    /// of the run of excursions that led to the confirmed change, each no more than the
    /// contact gap after the interface before it (see the module docs); at or before
    /// `arrival`.
    pub first_contact: Option<u64>,
}

/// The front detector of one tip: feed it the tip's edges ([`EdgeSink`]) and, after each
/// processed run, [`advance_to`](FrontDetector::advance_to).
#[derive(Clone, Debug)]
pub struct FrontDetector {
    cfg: FrontConfig,
    burst: usize,
    /// The tip is in the new (after-front) phase, as told by the edges.
    in_new: bool,
    /// Frame of the interface that began the current (or last) excursion.
    leave: Option<u64>,
    /// Frame of the interface that began the current (or last) change.
    onset: Option<u64>,
    /// Frame of the last return to the old phase.
    back: Option<u64>,
    /// Changes begun so far.
    onsets: u32,
    /// First interface of the current run of contacts (excursions no more than the
    /// contact gap apart).
    contact: Option<u64>,
    /// Frame of the last interface.
    last_edge: Option<u64>,
    /// The last `burst` interfaces: frames, and the onset of the change each belongs to.
    ring: [u64; MAX_BURST],
    ring_onset: [u64; MAX_BURST],
    head: usize,
    len: usize,
    summary: TipFront,
}

impl FrontDetector {
    /// A detector at the start of a record; the tip is assumed in `cfg.before_air`.
    pub fn new(cfg: FrontConfig) -> Self {
        FrontDetector {
            burst: (cfg.burst_interfaces as usize).min(MAX_BURST),
            cfg,
            in_new: false,
            leave: None,
            onset: None,
            back: None,
            onsets: 0,
            contact: None,
            last_edge: None,
            ring: [0; MAX_BURST],
            ring_onset: [0; MAX_BURST],
            head: 0,
            len: 0,
            summary: TipFront::default(),
        }
    }

    /// The rule in use.
    pub fn config(&self) -> &FrontConfig {
        &self.cfg
    }

    /// The arrival frame, once confirmed.
    pub fn arrival(&self) -> Option<u64> {
        self.summary.arrival
    }

    /// Everything known so far.
    pub fn summary(&self) -> TipFront {
        self.summary
    }

    /// The chain processed every frame before `frame` (one past the run's last frame), and
    /// the tip's phase is `is_air_now`. Confirms a held change whose hold reached
    /// `hold_frames` inside the run. `is_air_now` is a consistency check: the hold rule
    /// needs the edges and the phase detector to agree that the tip is in the new phase.
    pub fn advance_to(&mut self, frame: u64, is_air_now: bool) {
        if self.summary.arrival.is_some() {
            return;
        }
        let in_new_now = is_air_now != self.cfg.before_air;
        if in_new_now {
            self.check_hold(frame);
        }
    }

    /// Confirm the current change if its current excursion has held for `hold_frames` by
    /// `frame`.
    fn check_hold(&mut self, frame: u64) -> bool {
        if self.cfg.hold_frames == 0 || !self.in_new {
            return false;
        }
        match self.leave {
            Some(l) if frame.saturating_sub(l) >= self.cfg.hold_frames as u64 => {
                // The current change is the last one begun.
                let at = l.saturating_add(self.cfg.hold_frames as u64);
                self.confirm(self.onset.unwrap_or(l), FrontRule::Hold, 1, at);
                true
            }
            _ => false,
        }
    }

    fn confirm(&mut self, arrival: u64, rule: FrontRule, changes_from_arrival: u32, at: u64) {
        self.summary.first_contact = Some(self.contact.map_or(arrival, |c| c.min(arrival)));
        self.summary.arrival = Some(arrival);
        self.summary.confirmed_at = Some(at.max(arrival));
        self.summary.rule = Some(rule);
        self.summary.false_starts = self.onsets.saturating_sub(changes_from_arrival);
    }

    fn push_ring(&mut self, frame: u64, onset: u64) {
        if self.burst == 0 {
            return;
        }
        if self.len < self.burst {
            self.len += 1;
        }
        // When full, the slot at `head` holds the oldest entry, which is overwritten.
        self.ring[self.head] = frame;
        self.ring_onset[self.head] = onset;
        self.head = if self.head + 1 >= self.burst {
            0
        } else {
            self.head + 1
        };
    }

    fn check_burst(&mut self, frame: u64) {
        if self.burst == 0 || self.len < self.burst {
            return;
        }
        // Ring full: the oldest entry is at `head`.
        let oldest = self.head;
        if frame.saturating_sub(self.ring[oldest]) >= self.cfg.burst_frames as u64 {
            return;
        }
        let arrival = self.ring_onset[oldest];
        // Changes begun from the arrival on: the distinct onsets in the ring (in order).
        let mut changes = 0u32;
        let mut last = None;
        for k in 0..self.burst {
            let o = self.ring_onset[(oldest + k) % self.burst];
            if last != Some(o) {
                changes += 1;
                last = Some(o);
            }
        }
        self.confirm(arrival, FrontRule::Burst, changes, frame.saturating_add(1));
    }
}

impl EdgeSink for FrontDetector {
    fn edge(&mut self, e: Edge) {
        let s = &mut self.summary;
        s.interfaces = s.interfaces.saturating_add(1);
        s.first_interface.get_or_insert(e.frame);
        if s.arrival.is_some() {
            return;
        }
        // A hold that ended with this interface was reached before it.
        if self.check_hold(e.frame) {
            return;
        }
        let leaves = e.to_air != self.cfg.before_air;
        if leaves && !self.in_new {
            let gap = self.cfg.contact_gap_frames as u64;
            let quiet = self
                .last_edge
                .is_none_or(|l| e.frame.saturating_sub(l) > gap);
            if quiet {
                self.contact = Some(e.frame);
            }
        }
        self.last_edge = Some(e.frame);
        if leaves && !self.in_new {
            let settled = match (self.onset, self.back) {
                (Some(_), Some(b)) => e.frame.saturating_sub(b) >= self.cfg.settle_frames as u64,
                _ => true,
            };
            if settled {
                self.onset = Some(e.frame);
                self.onsets = self.onsets.saturating_add(1);
            }
            self.leave = Some(e.frame);
        } else if !leaves && self.in_new {
            self.back = Some(e.frame);
        }
        self.in_new = leaves;
        self.push_ring(e.frame, self.onset.unwrap_or(e.frame));
        self.check_burst(e.frame);
    }
}

impl EdgeSink for &mut FrontDetector {
    fn edge(&mut self, e: Edge) {
        (**self).edge(e);
    }
}

/// Quality flags of a station's front (a bit set; see the associated constants).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct StationFlags(pub u8);

impl StationFlags {
    /// No flag raised.
    pub const NONE: StationFlags = StationFlags(0);
    /// No probe of the station confirmed a front (yet).
    pub const NO_ARRIVAL: StationFlags = StationFlags(1 << 0);
    /// A probe saw no interface at all while the station's front passed, past the grace
    /// time: a dead or stuck tip (or one above the free surface: check the elevation).
    pub const SILENT_PROBE: StationFlags = StationFlags(1 << 1);
    /// A probe saw interfaces but no sustained change, past the grace time (spray above the
    /// flow, or a marginal phase detection).
    pub const UNCONFIRMED_PROBE: StationFlags = StationFlags(1 << 2);
    /// More than [`MAX_STATION_PROBES`] probes were given; the rest were ignored.
    pub const TOO_MANY_PROBES: StationFlags = StationFlags(1 << 3);

    /// Names of the flags, in bit order, as written into CSV files.
    pub const NAMES: [(StationFlags, &'static str); 4] = [
        (StationFlags::NO_ARRIVAL, "no_arrival"),
        (StationFlags::SILENT_PROBE, "silent_probe"),
        (StationFlags::UNCONFIRMED_PROBE, "unconfirmed_probe"),
        (StationFlags::TOO_MANY_PROBES, "too_many_probes"),
    ];

    /// True if every bit of `other` is set in `self`.
    pub const fn contains(self, other: StationFlags) -> bool {
        self.0 & other.0 == other.0
    }

    /// True if no flag is set.
    pub const fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// Set the bits of `other` when `condition` holds.
    pub fn set_if(&mut self, other: StationFlags, condition: bool) {
        if condition {
            self.0 |= other.0;
        }
    }

    /// Iterate over the names of the flags that are set.
    pub fn names(self) -> impl Iterator<Item = &'static str> {
        StationFlags::NAMES
            .into_iter()
            .filter(move |(f, _)| self.contains(*f))
            .map(|(_, n)| n)
    }
}

impl core::ops::BitOr for StationFlags {
    type Output = StationFlags;
    fn bitor(self, rhs: StationFlags) -> StationFlags {
        StationFlags(self.0 | rhs.0)
    }
}

impl core::ops::BitOrAssign for StationFlags {
    fn bitor_assign(&mut self, rhs: StationFlags) {
        self.0 |= rhs.0;
    }
}

/// The front at a station: the earliest confirmed arrival of its probes.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct StationFront {
    /// The station's arrival frame: the earliest of its probes.
    pub arrival: Option<u64>,
    /// Index (in the order given) of the probe that saw it first (the lowest on a tie).
    pub first_probe: Option<u8>,
    /// Probes described (at most [`MAX_STATION_PROBES`]).
    pub probes: u8,
    /// Bit `i`: probe `i` confirmed a front.
    pub arrived: u32,
    /// Bit `i`: probe `i` saw no interface at all, past the grace time.
    pub silent: u32,
    /// Bit `i`: probe `i` saw interfaces but no sustained change, past the grace time.
    pub unconfirmed: u32,
    /// Quality flags.
    pub flags: StationFlags,
}

impl StationFront {
    /// Combine the probes of a station (leading tips, say), at frame `now`. A probe without
    /// a front is flagged only once `now` is `grace_frames` past the station's arrival: the
    /// front reaches upper probes later, and the caller knows how long it should take.
    /// O(number of probes).
    pub fn combine<I>(probes: I, now: u64, grace_frames: u64) -> StationFront
    where
        I: IntoIterator<Item = TipFront>,
    {
        let mut s = StationFront::default();
        let mut quiet = 0u32;
        let mut unconfirmed = 0u32;
        for (i, t) in probes.into_iter().enumerate() {
            if i >= MAX_STATION_PROBES {
                s.flags |= StationFlags::TOO_MANY_PROBES;
                break;
            }
            s.probes += 1;
            let bit = 1u32 << i;
            match t.arrival {
                Some(a) => {
                    s.arrived |= bit;
                    if s.arrival.is_none_or(|b| a < b) {
                        s.arrival = Some(a);
                        s.first_probe = Some(i as u8);
                    }
                }
                None if t.interfaces == 0 => quiet |= bit,
                None => unconfirmed |= bit,
            }
        }
        match s.arrival {
            None => s.flags |= StationFlags::NO_ARRIVAL,
            Some(a) if now >= a.saturating_add(grace_frames) => {
                s.silent = quiet;
                s.unconfirmed = unconfirmed;
                s.flags.set_if(StationFlags::SILENT_PROBE, quiet != 0);
                s.flags
                    .set_if(StationFlags::UNCONFIRMED_PROBE, unconfirmed != 0);
            }
            Some(_) => {}
        }
        s
    }
}

/// Front celerity between two stations, m/s: `(x2 − x1) / (t2 − t1)` with positions in
/// metres and arrival times in seconds. `None` for equal times or non-finite inputs. The
/// sign follows the axis: a front moving towards smaller `x` has a negative celerity.
pub fn front_celerity(x1_m: f32, t1_s: f32, x2_m: f32, t2_s: f32) -> Option<f32> {
    let v = (x2_m - x1_m) / (t2_s - t1_s);
    v.is_finite().then_some(v)
}

/// Front celerity from arrival frames, m/s: positions in mm (as in the layout), frames at
/// `sample_rate_hz`. The frame difference is taken in integers first, so long records keep
/// their resolution. `None` for equal frames, a rate that is not finite and positive, or a
/// non-finite result.
pub fn front_celerity_frames(
    x1_mm: f32,
    arrival1: u64,
    x2_mm: f32,
    arrival2: u64,
    sample_rate_hz: f32,
) -> Option<f32> {
    let frames = arrival2 as i128 - arrival1 as i128;
    if frames == 0 || !(sample_rate_hz.is_finite() && sample_rate_hz > 0.0) {
        return None;
    }
    let dt = frames as f32 / sample_rate_hz;
    let v = (x2_mm - x1_mm) * 1e-3 / dt;
    v.is_finite().then_some(v)
}
