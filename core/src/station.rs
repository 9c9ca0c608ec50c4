//! A station in a transient flow: front arrival, front-relative windows, profile slices and
//! the decay of the depth-averaged void fraction behind the front.
//!
//! A [`Chain`](crate::Chain) is one station: probes that share a streamwise position, at
//! several elevations (the host runs one chain per station). Giving its configuration a
//! [`StationConfig`] ([`ChainConfig::station`](crate::ChainConfig::station)) turns on:
//!
//! - **front detection**: a [`FrontDetector`] on the leading tip of every probe; the station's
//!   arrival is the earliest sustained arrival of its probes ([`FrontRecord`]s, drained with
//!   [`Chain::poll_front`](crate::Chain::poll_front));
//! - **front-relative windows** ([`WindowPolicy::AfterFront`](crate::WindowPolicy)) and
//!   `since_front` in every record;
//! - **profile slices**: at every window close after the arrival, the void fractions of the
//!   probes at their elevations go through [`fit_profile`](crate::profile::fit_profile)
//!   ([`ProfileRecord`]s, drained with [`Chain::poll_profile`](crate::Chain::poll_profile));
//! - **decay tracking**: the slices' depth-averaged void fraction against the time since the
//!   front, with its running exponential fit ([`DecayTracker`]).
//!
//! # The delay line: windows that start exactly at the arrival
//!
//! A front is confirmed only some frames after it happened: the hold rule needs the new
//! phase to last `hold_frames`, the burst rule needs `burst_interfaces` interfaces. Yet the
//! first window must start at the arrival frame, and the statistics of the frames between
//! the arrival and its confirmation cannot be rebuilt afterwards (the correlation sums least
//! of all). So the chain runs two paths over the same samples:
//!
//! ```text
//! push(samples) -> front path: a PhaseDetector + FrontDetector per leading tip (no delay)
//!               -> delay ring of H frames (held by the chain: `Chain<P, L, D>`, D samples)
//!               -> statistics path (tips, correlators, windows, profiles) H frames later
//! ```
//!
//! The statistics path processes frame `f` only once the front path has processed frame
//! `f + H` (`H` = [`StationConfig::delay_frames`]). A probe whose front arrived at `t_p` and
//! was confirmed at `c_p` ([`TipFront::confirmed_at`], a property of the samples) gives the
//! candidate origin `W_p = max(t_p, c_p − H)`: when `c_p − t_p <= H` (every clean front,
//! with the default `H` of twice the longest rule), `W_p = t_p`. When the front path finds
//! the confirmation, the statistics path is still at or before `c_p − 1 − H < W_p`, so it
//! can end the pre-front record at `W = min_p W_p` and open the first window exactly there.
//! The station's arrival is `A = min t_p` over the probes confirmed by `c_p <= W + H`: the
//! probes the chain knows of when its statistics reach `W`. A probe confirmed later (a
//! flickering tip whose confirmation took longer than `H`) is reported `late` and does not
//! move `A`; if it is the one that sets `W`, the first window starts after the arrival and is
//! flagged [`Flags::LATE_FRONT_START`].
//!
//! Every quantity here (`t_p`, `c_p`, `W`, `A`, the masks below) is defined by frame
//! indices alone, never by when the caller pushed what, so the records do not depend on
//! block splits (tested). The price: `H × channels` samples of memory, one more phase
//! detector per probe until its front is confirmed (after that the front path does nothing
//! for that probe), and a copy of every sample into the ring.
//!
//! Before the arrival, [`WindowPolicy::AfterFront`](crate::WindowPolicy) gives one pre-front
//! record per probe (from frame 0 to `W`, flagged [`Flags::PRE_FRONT`], `since_front = −A`;
//! none when `W = 0`): it documents the dry tips (levels, rails, stray droplets) and costs
//! nothing. A record the front never reaches ends as one pre-front record.
//!
//! # Dead probes
//!
//! A probe that never changes phase is flagged in the station's [`StationArrival`]
//! (`silent`, [`StationFlags::SILENT_PROBE`]), evaluated at `A + grace_frames`; it is
//! `dead` when a probe on the far side of it was reached (below). A profile
//! slice ending at `E` leaves out a probe as **dead** when it saw no interface before `E`
//! while a probe on the far side of it (above it when the tips sit in air before the front,
//! below it when they sit in water) had its arrival by `E − dead_after_frames` (by default
//! the burst window of the front rule, 20 ms): the flow cannot reach a tip without passing
//! the one below it, and a tip reached late is wetted within the time the detector itself
//! takes to confirm a front. A tip that is silent because the flow has
//! not reached it (above the free surface) keeps its `C = 1`, which is a measurement.
//! Probes whose window ran before their levels were learnt are left out too.
//!
//! # Profile slices
//!
//! Each window after the arrival is one slice. Its points are the leading tips' void
//! fractions at the probes' elevations ([`StationConfig::elevations_mm`]). The ends of the
//! array are treated as [`crate::profile`] documents: the bed band (bed to lowest probe) by
//! [`ProfileConfig::bed`] (by default `C` falls linearly to 0 at the bed), probes above
//! `Y90` stay out of the integrals and fits, and a `Y90` outside the array is left `None`
//! with a flag (never extrapolated above the top probe). Work per slice: one fit of at most
//! [`MAX_STATION_PROBES`] points (bounded Gauss-Newton), plus a decay fit every
//! [`StationConfig::decay_fit_every`] slices (`(48 + 30 + 4) × points` exponentials).
//!
//! The decay tracker takes one point per complete slice with a depth-averaged void fraction:
//! time since the front at the slice's middle, `Cmean` of the slice. It keeps the first
//! [`MAX_DECAY_POINTS`] (the early ones carry the decay).

use crate::decay::{DecayFit, DecayTracker};
use crate::flags::Flags;
use crate::front::{
    FrontConfig, FrontDetector, FrontRule, StationFlags, StationFront, TipFront, MAX_STATION_PROBES,
};
use crate::phase::PhaseDetector;
use crate::probe_config::{DetectorConfig, ProbeConfig};
use crate::profile::{fit_profile_sized, ProfileConfig, ProfileFit, ProfilePoint};
use heapless::{Deque, Vec};

/// Points the decay tracker keeps (one per slice: 6.4 s of 50 ms slices).
pub const MAX_DECAY_POINTS: usize = 128;

/// Front records a chain can hold: one per probe and one for the station, never more, so
/// the front queue cannot overflow even when it is never drained.
const FRONT_QUEUE: usize = MAX_STATION_PROBES + 2;

/// Profile records held before the chain waits for [`Chain::poll_profile`](crate::Chain).
const PROFILE_QUEUE: usize = 4;

/// The station settings of a chain (transient flows).
#[derive(Clone, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StationConfig<const P: usize> {
    /// The rule that confirms a front at a tip (and the phase before the front).
    pub front: FrontConfig,
    /// `H`: frames the statistics run behind the front detection (see the module docs). At
    /// least 1; the chain's delay ring must hold `(H + 1) × channels` samples.
    pub delay_frames: u32,
    /// Frames after the station's arrival by which every probe should have seen the front:
    /// the station record's `silent` / `unconfirmed` masks are evaluated then.
    pub grace_frames: u32,
    /// The dead-probe rule of the profile slices: a probe with no interface yet is left
    /// out once a probe on the far side of it has been in the flow this many frames (see
    /// the module docs).
    pub dead_after_frames: u32,
    /// Elevation of each probe's tips above the bed, mm, in probe order (as many as probes).
    pub elevations_mm: Vec<f32, P>,
    /// Profile fit settings (bed band treatment, iterations).
    pub profile: ProfileConfig,
    /// Frames per second (times of the decay fit, in seconds).
    pub sample_rate_hz: f32,
    /// Reference depth for the dimensionless decay time, m (`<= 0` or NaN: none).
    pub reference_depth_m: f32,
    /// Fit the decay every this many slices (1: at every slice; 0: never in the chain).
    /// A decay fit costs `(48 + 30 + 4) × points` exponentials (on a desktop core about
    /// 35 µs at 20 points and 216 µs at the 128-point cap, `cargo bench --bench station`),
    /// a hundred times a profile fit (2.6 µs): at every 50 ms slice it doubles the cost of
    /// an 8-probe chain, so a device fits every 20 slices or leaves it to the host.
    pub decay_fit_every: u16,
}

impl<const P: usize> StationConfig<P> {
    /// Zero values everywhere (all zero bytes; the placeholder of an unconfigured chain,
    /// not a usable configuration).
    pub(crate) const fn zero() -> Self {
        StationConfig {
            front: FrontConfig {
                before_air: false,
                hold_frames: 0,
                burst_interfaces: 0,
                burst_frames: 0,
                settle_frames: 0,
                contact_gap_frames: 0,
            },
            delay_frames: 0,
            grace_frames: 0,
            dead_after_frames: 0,
            elevations_mm: Vec::new(),
            profile: ProfileConfig {
                bed: crate::profile::BedTreatment::LinearToZero,
                max_iterations: 0,
            },
            sample_rate_hz: 0.0,
            reference_depth_m: 0.0,
            decay_fit_every: 0,
        }
    }

    /// Defaults at `sample_rate_hz`: the front rule of [`FrontConfig::for_rate`], a delay of
    /// [`default_delay_frames`], a grace of 100 ms, a dead-probe wait of the burst window
    /// (20 ms), the default profile fit, a decay fit at
    /// every slice, no reference depth, no elevations yet (push one per probe).
    pub fn new(sample_rate_hz: f32, before_air: bool) -> Self {
        let front = FrontConfig::for_rate(sample_rate_hz, before_air);
        let fs = if sample_rate_hz.is_finite() && sample_rate_hz > 0.0 {
            sample_rate_hz
        } else {
            40_000.0
        };
        StationConfig {
            front,
            delay_frames: default_delay_frames(&front),
            grace_frames: ((fs * 0.1) as u32).max(1),
            dead_after_frames: front.burst_frames.max(front.hold_frames),
            elevations_mm: Vec::new(),
            profile: ProfileConfig::default(),
            sample_rate_hz,
            reference_depth_m: f32::NAN,
            decay_fit_every: 1,
        }
    }
}

/// The default delay: twice the longest confirmation of a clean front (`hold_frames`, or
/// `burst_frames` for the burst rule), so a front that begins with a short excursion or
/// two still starts its windows at the arrival.
pub const fn default_delay_frames(front: &FrontConfig) -> u32 {
    let hold = front.hold_frames;
    let burst = if front.burst_interfaces > 0 {
        front.burst_frames
    } else {
        0
    };
    let longest = if hold > burst { hold } else { burst };
    let d = longest.saturating_mul(2);
    if d == 0 {
        1
    } else {
        d
    }
}

/// A probe's leading tip confirmed the front.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProbeArrival {
    /// Probe index in the chain's configuration.
    pub probe: u8,
    /// Arrival frame: the first interface of the sustained change.
    pub arrival: u64,
    /// First contact with the front ([`TipFront::first_contact`]), at or before `arrival`.
    pub first_contact: u64,
    /// Frames the detector needed to confirm it ([`TipFront::confirmed_at`]).
    pub confirmed_at: u64,
    /// The rule that confirmed it.
    pub rule: FrontRule,
    /// Stray excursions before the arrival that were not sustained.
    pub false_starts: u32,
    /// Confirmed too late to count for the station's arrival (after the statistics had
    /// reached the station's origin plus the delay).
    pub late: bool,
}

/// The station's front, once its probes had the grace time to arrive (or at the end of the
/// record).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct StationArrival {
    /// Arrival, first probe, probe masks and flags. `arrived` holds the probes confirmed by
    /// the evaluation frame (`arrival + grace_frames`), `silent` those without any interface
    /// before it, `unconfirmed` the others.
    pub front: StationFront,
    /// First frame of the first front-relative window (`W`; equal to the arrival unless a
    /// confirmation came late).
    pub origin: Option<u64>,
    /// Bit `i`: probe `i` confirmed after the station's arrival was fixed (see
    /// [`ProbeArrival::late`]).
    pub late: u32,
    /// Bit `i`: probe `i` is dead: silent, while a probe on the far side of it (above it
    /// when the tips sit in air before the front, below when in water) was reached by the
    /// evaluation frame. A silent probe that is not dead is beyond the flow (above the free
    /// surface of a dry-bed surge): its `C = 1` is a measurement.
    pub dead: u32,
    /// The frame at which the masks were evaluated.
    pub evaluated_at: u64,
}

/// A front record: a probe's arrival, or the station's summary.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub enum FrontRecord {
    /// A probe confirmed the front.
    Probe(ProbeArrival),
    /// The station's front (one per record).
    Station(StationArrival),
}

/// The profile of the station over one slice (one window after the arrival).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct ProfileRecord {
    /// Slice index since the arrival (0 = the first window after it).
    pub slice: u32,
    /// First frame of the slice.
    pub start: u64,
    /// One past the last frame.
    pub end: u64,
    /// `start` minus the station's arrival, frames (0 for the first slice unless late).
    pub since_front: i64,
    /// The fit (Y90, Cmean, d, power law, exponential, flags).
    pub fit: ProfileFit,
    /// Bit `i`: probe `i`'s void fraction was a point of the profile.
    pub used: u32,
    /// Bit `i`: probe `i` was left out as dead (see the module docs).
    pub dead: u32,
    /// Bit `i`: probe `i` was left out because its levels were not learnt in the slice.
    pub unlearnt: u32,
    /// The slice is shorter than the window policy asked (the record ended inside it); it
    /// is not added to the decay series.
    pub partial: bool,
    /// Points in the decay series after this slice.
    pub decay_points: u16,
    /// The decay fit over the slices so far, when due at this slice
    /// ([`StationConfig::decay_fit_every`]).
    pub decay: Option<DecayFit>,
}

/// The front path of one probe.
#[derive(Clone, Debug)]
struct FrontTip {
    detector: PhaseDetector,
    front: FrontDetector,
    /// The front is confirmed: the front path no longer runs for this probe.
    done: bool,
    /// Its probe record was queued.
    emitted: bool,
}

/// The station state of a chain (crate-private; the chain drives it).
#[derive(Clone, Debug)]
pub(crate) struct Station<const P: usize> {
    cfg: StationConfig<P>,
    tips: Vec<FrontTip, P>,
    /// Frames seen by the front path.
    front_frame: u64,
    /// Candidate origin `W = min W_p` over the probes confirmed so far.
    cut: Option<u64>,
    /// Fixed when the statistics reached `W`: (arrival `A`, origin `W`).
    locked: Option<(u64, u64)>,
    station_emitted: bool,
    slices: u32,
    decay: DecayTracker<MAX_DECAY_POINTS>,
    fronts: Deque<FrontRecord, FRONT_QUEUE>,
    profiles: Deque<ProfileRecord, PROFILE_QUEUE>,
    /// The window being closed: each probe's leading-tip void fraction, its standard error
    /// and its record's flags, as the records are built (see [`slice`](Self::slice)).
    window_lead: [(Option<f32>, f32, Flags); P],
}

impl<const P: usize> Station<P> {
    /// No station: the state of an unconfigured chain's station slot (all zero bytes).
    pub(crate) const EMPTY: Self = Station {
        cfg: StationConfig::zero(),
        tips: Vec::new(),
        front_frame: 0,
        cut: None,
        locked: None,
        station_emitted: false,
        slices: 0,
        decay: DecayTracker::new(),
        fronts: Deque::new(),
        profiles: Deque::new(),
        window_lead: [(None, 0.0, Flags::NONE); P],
    };

    /// (Re)build the state in place for a fresh record of `cfg` with `probes`, one probe's
    /// front path at a time.
    pub(crate) fn configure(
        &mut self,
        cfg: &StationConfig<P>,
        probes: &[ProbeConfig],
        det: &DetectorConfig,
        initial_air: bool,
    ) {
        self.cfg = cfg.clone();
        self.tips.clear();
        for p in probes {
            let _ = self.tips.push(FrontTip {
                detector: PhaseDetector::new(&p.leading, det, initial_air),
                front: FrontDetector::new(cfg.front),
                done: false,
                emitted: false,
            });
        }
        self.front_frame = 0;
        self.cut = None;
        self.locked = None;
        self.station_emitted = false;
        self.slices = 0;
        self.decay.clear();
        self.fronts.clear();
        self.profiles.clear();
    }

    fn delay(&self) -> u64 {
        self.cfg.delay_frames.max(1) as u64
    }

    /// Frames the front path has seen.
    pub(crate) fn front_frame(&self) -> u64 {
        self.front_frame
    }

    /// `(A, W)` once fixed.
    pub(crate) fn locked(&self) -> Option<(u64, u64)> {
        self.locked
    }

    /// The candidate origin `W` (the end of the pre-front record), once any probe confirmed.
    pub(crate) fn cut(&self) -> Option<u64> {
        self.locked.map(|(_, w)| w).or(self.cut)
    }

    pub(crate) fn has_profile_room(&self) -> bool {
        self.profiles.len() < self.profiles.capacity()
    }

    pub(crate) fn poll_front(&mut self) -> Option<FrontRecord> {
        self.fronts.pop_front()
    }

    pub(crate) fn poll_profile(&mut self) -> Option<ProfileRecord> {
        self.profiles.pop_front()
    }

    /// What probe `i`'s front detector knows.
    pub(crate) fn tip(&self, i: usize) -> Option<TipFront> {
        self.tips.get(i).map(|t| t.front.summary())
    }

    /// The front path over whole `frames` (interleaved, `channels` wide), the next frames of
    /// the record. O(1) per sample per probe whose front is not yet confirmed.
    pub(crate) fn front_run(&mut self, frames: &[i16], channels: usize) {
        let channels = channels.max(1);
        let first = self.front_frame;
        let end = first + (frames.len() / channels) as u64;
        let h = self.delay();
        for t in self.tips.iter_mut().filter(|t| !t.done) {
            t.detector.process(frames, channels, first, &mut t.front);
            t.front.advance_to(end, t.detector.is_air());
            let s = t.front.summary();
            if let (Some(a), Some(c)) = (s.arrival, s.confirmed_at) {
                t.done = true;
                let w = a.max(c.saturating_sub(h));
                self.cut = Some(self.cut.map_or(w, |x| x.min(w)));
            }
        }
        self.front_frame = end;
        self.emit_due(end);
    }

    /// Fix the station's arrival when the statistics reach the origin (`stats_frame >= W`).
    pub(crate) fn lock_if_due(&mut self, stats_frame: u64) {
        if self.locked.is_some() {
            return;
        }
        let Some(w) = self.cut.filter(|&w| w <= stats_frame) else {
            return;
        };
        let h = self.delay();
        let arrival = self
            .tips
            .iter()
            .filter_map(|t| {
                let s = t.front.summary();
                s.arrival
                    .filter(|_| s.confirmed_at.is_some_and(|c| c <= w + h))
            })
            .min()
            .unwrap_or(w);
        self.locked = Some((arrival, w));
        self.emit_due(self.front_frame);
    }

    /// Queue the front records due once the front path has seen `upto` frames, in a fixed
    /// order: probe `p` at key `max(c_p, W + H)`, then index; the station record at
    /// `max(A + grace, W + H)` after the probes of the same key. Only after the lock (the
    /// keys need `W`); every record of key `<= upto` is known by then, so the order does
    /// not depend on when this runs.
    fn emit_due(&mut self, upto: u64) {
        let Some((arrival, w)) = self.locked else {
            return;
        };
        let base = w.saturating_add(self.delay());
        let station_key = arrival
            .saturating_add(self.cfg.grace_frames as u64)
            .max(base);
        loop {
            // The next probe record due, by (key, index).
            let mut next: Option<(u64, usize)> = None;
            for (i, t) in self.tips.iter().enumerate() {
                if t.emitted {
                    continue;
                }
                let Some(c) = t.front.summary().confirmed_at else {
                    continue;
                };
                let key = c.max(base);
                if key <= upto && next.is_none_or(|(k, _)| key < k) {
                    next = Some((key, i));
                }
            }
            let station_due = !self.station_emitted && station_key <= upto;
            match next {
                Some((key, _)) if station_due && station_key < key => self.emit_station(),
                Some((_, i)) => self.emit_probe(i, base),
                None if station_due => self.emit_station(),
                None => break,
            }
        }
    }

    fn emit_probe(&mut self, i: usize, base: u64) {
        let Some(t) = self.tips.get_mut(i) else {
            return;
        };
        t.emitted = true;
        let s = t.front.summary();
        if let (Some(arrival), Some(confirmed_at), Some(rule)) = (s.arrival, s.confirmed_at, s.rule)
        {
            // At most one record per probe: the queue has room for all of them.
            let _ = self.fronts.push_back(FrontRecord::Probe(ProbeArrival {
                probe: i as u8,
                arrival,
                first_contact: s.first_contact.unwrap_or(arrival).min(arrival),
                confirmed_at,
                rule,
                false_starts: s.false_starts,
                late: confirmed_at > base,
            }));
        }
    }

    fn emit_station(&mut self) {
        self.station_emitted = true;
        let rec = self.station_summary();
        let _ = self.fronts.push_back(FrontRecord::Station(rec));
    }

    /// The station summary, evaluated at `A + grace` (or, without an arrival, over
    /// everything the front path saw).
    fn station_summary(&self) -> StationArrival {
        let h = self.delay();
        let mut s = StationFront {
            probes: self.tips.len().min(MAX_STATION_PROBES) as u8,
            ..StationFront::default()
        };
        let (g, base) = match self.locked {
            Some((a, w)) => (
                a.saturating_add(self.cfg.grace_frames as u64),
                w.saturating_add(h),
            ),
            None => (u64::MAX, u64::MAX),
        };
        let mut late = 0u32;
        for (i, t) in self.tips.iter().enumerate().take(MAX_STATION_PROBES) {
            let bit = 1u32 << i;
            let f = t.front.summary();
            let arrived = f.confirmed_at.is_some_and(|c| c <= g);
            if arrived {
                s.arrived |= bit;
                if f.confirmed_at.is_some_and(|c| c > base) {
                    late |= bit;
                }
            } else if f.first_interface.is_none_or(|x| x >= g) {
                s.silent |= bit;
            } else {
                s.unconfirmed |= bit;
            }
        }
        match self.locked {
            Some((a, _)) => {
                s.arrival = Some(a);
                s.first_probe = self
                    .tips
                    .iter()
                    .position(|t| t.front.summary().arrival == Some(a))
                    .map(|i| i as u8);
            }
            None => s.flags |= StationFlags::NO_ARRIVAL,
        }
        let mut dead = 0u32;
        for i in 0..self.tips.len().min(MAX_STATION_PROBES) {
            if s.silent & (1 << i) != 0 && self.far_side_reached(i, g, 0) {
                dead |= 1 << i;
            }
        }
        s.flags.set_if(StationFlags::SILENT_PROBE, s.silent != 0);
        s.flags
            .set_if(StationFlags::UNCONFIRMED_PROBE, s.unconfirmed != 0);
        StationArrival {
            front: s,
            origin: self.locked.map(|(_, w)| w),
            late,
            dead,
            evaluated_at: g.min(self.front_frame),
        }
    }

    /// The end of the record: queue every front record still due.
    pub(crate) fn finish(&mut self) {
        self.emit_due(u64::MAX);
        if !self.station_emitted {
            self.emit_station();
        }
    }

    /// `start` relative to the arrival, once fixed.
    pub(crate) fn since_front(&self, start: u64) -> Option<i64> {
        self.locked.map(|(a, _)| {
            (start as i128 - a as i128).clamp(i64::MIN as i128, i64::MAX as i128) as i64
        })
    }

    /// Probe `p` is dead for a slice ending at `end` (see the module docs).
    fn is_dead(&self, p: usize, end: u64) -> bool {
        let Some(tp) = self.tips.get(p) else {
            return false;
        };
        let s = tp.front.summary();
        if s.first_interface.is_some_and(|x| x < end) {
            return false;
        }
        self.far_side_reached(p, end, self.cfg.dead_after_frames as u64)
    }

    /// A probe on the far side of probe `p` (above it when the tips sit in air before the
    /// front, below it when in water) confirmed its front by frame `by`, at least `grace`
    /// frames after its arrival.
    fn far_side_reached(&self, p: usize, by: u64, grace: u64) -> bool {
        let Some(&y) = self.cfg.elevations_mm.get(p) else {
            return false;
        };
        let above = self.cfg.front.before_air;
        self.tips.iter().enumerate().any(|(q, t)| {
            let f = t.front.summary();
            let far = match self.cfg.elevations_mm.get(q) {
                Some(&yq) if above => yq > y,
                Some(&yq) => yq < y,
                None => false,
            };
            far && f.confirmed_at.is_some_and(|c| c <= by)
                && f.arrival.is_some_and(|a| a.saturating_add(grace) <= by)
        })
    }

    /// Keep probe `i`'s leading-tip void fraction, its standard error (0: unknown) and its
    /// record's flags for the slice of the window being closed.
    pub(crate) fn keep_window_lead(&mut self, i: usize, lead: (Option<f32>, f32, Flags)) {
        if let Some(slot) = self.window_lead.get_mut(i) {
            *slot = lead;
        }
    }

    /// A window `start..end` closed after the arrival: fit its profile from the first
    /// `probes` probes' values kept by [`keep_window_lead`](Self::keep_window_lead) and
    /// queue the record. Room was checked by the caller.
    pub(crate) fn slice(&mut self, start: u64, end: u64, probes: usize, partial: bool) {
        let Some(since_front) = self.since_front(start) else {
            return;
        };
        let window_lead = self.window_lead;
        let lead = window_lead.get(..probes).unwrap_or(&[]);
        let mut points = [ProfilePoint::new(0.0, 0.0); MAX_STATION_PROBES];
        let (mut k, mut used, mut dead, mut unlearnt) = (0usize, 0u32, 0u32, 0u32);
        for (i, &(c, sigma, flags)) in lead.iter().enumerate().take(MAX_STATION_PROBES) {
            let bit = 1u32 << i;
            let (Some(c), Some(&y)) = (c, self.cfg.elevations_mm.get(i)) else {
                continue;
            };
            if flags.contains(Flags::LEVELS_NOT_LEARNT) {
                unlearnt |= bit;
                continue;
            }
            if self.is_dead(i, end) {
                dead |= bit;
                continue;
            }
            if let Some(slot) = points.get_mut(k) {
                *slot = ProfilePoint::with_sigma(y, c, sigma);
                k += 1;
                used |= bit;
            }
        }
        let fit = fit_profile_sized::<MAX_STATION_PROBES>(&points[..k], &self.cfg.profile);
        if let (false, Some(cmean)) = (partial, fit.mean_void_fraction) {
            let fs = self.cfg.sample_rate_hz;
            let mid = since_front as f64 + (end - start) as f64 * 0.5;
            let _ = self.decay.push((mid / fs as f64) as f32, cmean);
        }
        let every = self.cfg.decay_fit_every as u32;
        let decay = (self.slices.saturating_add(1).checked_rem(every) == Some(0))
            .then(|| self.decay.fit(self.cfg.reference_depth_m));
        let rec = ProfileRecord {
            slice: self.slices,
            start,
            end,
            since_front,
            fit,
            used,
            dead,
            unlearnt,
            partial,
            decay_points: self.decay.len().min(u16::MAX as usize) as u16,
            decay,
        };
        self.slices = self.slices.saturating_add(1);
        let _ = self.profiles.push_back(rec);
    }

    /// The decay series so far: `(seconds since the front, Cmean)`.
    pub(crate) fn decay_tracker(&self) -> &DecayTracker<MAX_DECAY_POINTS> {
        &self.decay
    }
}
