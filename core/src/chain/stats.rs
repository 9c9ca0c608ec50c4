//! The statistics path of a chain: runs of frames through the probes, window ends, and the
//! records they close (with the station's slices in a transient run).

use crate::config::ChainConfig;
use crate::correlation::RunBuffer;
use crate::flags::Flags;
use crate::phase::{run_lanes, EdgeSink, Lanes, RunCounts};
use crate::record::TipStats;
use crate::station::Station;
use crate::window::WindowPolicy;

use super::probes::{look_ahead, Feed, ProbeState, Probes, RUN_FRAMES};
use super::queue::{RecordQueue, SumsStore};

/// Room for a station: `T` (0 or 1) slots of station state, and whether it is in use.
#[derive(Clone, Debug)]
pub(super) struct StationSlot<const P: usize, const T: usize> {
    pub(super) slot: [Station<P>; T],
    pub(super) on: bool,
}

impl<const P: usize, const T: usize> StationSlot<P, T> {
    pub(super) const fn new() -> Self {
        StationSlot {
            slot: [Station::<P>::EMPTY; T],
            on: false,
        }
    }

    pub(super) fn as_ref(&self) -> Option<&Station<P>> {
        self.slot.first().filter(|_| self.on)
    }

    pub(super) fn as_mut(&mut self) -> Option<&mut Station<P>> {
        self.slot.first_mut().filter(|_| self.on)
    }

    pub(super) fn is_some(&self) -> bool {
        self.as_ref().is_some()
    }

    pub(super) fn is_none(&self) -> bool {
        self.as_ref().is_none()
    }
}

/// A window being closed: its records are built probe by probe as the queue has room (a
/// queue shallower than the probes fills before the last one), and nothing is processed
/// until the last is built. What every record of the window shares is kept here.
#[derive(Clone, Debug)]
pub(super) struct Closing {
    pub(super) active: bool,
    /// The next probe whose record is to be built.
    pub(super) next: usize,
    pub(super) partial: bool,
    pub(super) pre: bool,
    pub(super) late_start: bool,
    pub(super) since_front: Option<i64>,
}

impl Closing {
    pub(super) const IDLE: Self = Closing {
        active: false,
        next: 0,
        partial: false,
        pre: false,
        late_start: false,
        since_front: None,
    };
}

/// The statistics path: tips, correlators, windows (and the station, which it cuts and
/// closes windows for). `Q` records can wait to be polled.
#[derive(Clone, Debug)]
pub(super) struct Stats<
    const P: usize,
    const L: usize,
    const S: usize,
    const T: usize,
    const Q: usize,
> {
    pub(super) config: ChainConfig<P>,
    pub(super) probes: Probes<P, L>,
    pub(super) queue: RecordQueue<Q>,
    pub(super) closing: Closing,
    pub(super) sums: SumsStore<L, S>,
    /// The leading tips' edges of one run of one probe (tip-by-tip runs).
    pub(super) run: RunBuffer,
    pub(super) frame: u64,
    pub(super) window_start: u64,
    /// Bubbles closed by the reference tip in the open window ([`WindowPolicy::Bubbles`]).
    pub(super) window_bubbles: u32,
    /// [`WindowPolicy::AfterFront`]: the pre-front record is still open.
    pub(super) pre_front_open: bool,
    pub(super) station: StationSlot<P, T>,
}

impl<const P: usize, const L: usize, const S: usize, const T: usize, const Q: usize>
    Stats<P, L, S, T, Q>
{
    /// A window can be closed: no close is under way, the queue has room for every record
    /// of the window (or is empty, when it is shallower than the probes) and the station
    /// for its slice.
    pub(super) fn has_room(&self) -> bool {
        !self.closing.active
            && self.queue.capacity() - self.queue.len() >= self.probes.len().min(Q)
            && self.station.as_ref().is_none_or(Station::has_profile_room)
    }

    /// The end (exclusive) of the open window, when known.
    pub(super) fn window_end(&self) -> Option<u64> {
        // (Only front-relative policies open a pre-front record.)
        if self.pre_front_open {
            return self.station.as_ref().and_then(Station::cut);
        }
        self.config.window.end_of_window_from(self.window_start)
    }

    /// Fix the station's arrival when the statistics reach it, and drop an empty pre-front
    /// record (a front at frame 0).
    pub(super) fn settle_pre_front(&mut self) {
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
    pub(super) fn run_frames(&mut self, data: &[i16]) -> usize {
        let n = self.config.channels as usize;
        let total = data.len() / n;
        let mut done = 0;
        while done < total {
            if self.closing.active && !self.continue_close() {
                break;
            }
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

    /// The next learning event of any tip: the first learning tip's, as all learning tips
    /// share the period (one division per run, not one per tip).
    pub(super) fn next_learn_stop(&self) -> Option<u64> {
        self.probes
            .iter()
            .flat_map(|p| core::iter::once(&p.lead).chain(p.trail()))
            .find_map(|t| t.detector.next_stop(self.frame))
    }

    /// Run every tip over one run of whole frames (no learning event inside): frame-major
    /// over all channels at once for the usual channel counts, tip by tip otherwise. Both
    /// give the same records.
    pub(super) fn run_probes(&mut self, run: &[i16], channels: usize, first: u64) {
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

    pub(super) fn run_tip_by_tip(&mut self, run: &[i16], n: usize, first: u64) {
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

    pub(super) fn run_frame_major<const W: usize>(&mut self, run: &[i16], first: u64) {
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
    /// as its record gave them.
    fn slice_station(&mut self) {
        let probes = self.probes.len();
        let k = probes.min(P).min(crate::front::MAX_STATION_PROBES);
        let (start, end, partial) = (self.window_start, self.frame, self.closing.partial);
        if let Some(s) = self.station.as_mut() {
            s.slice(start, end, k, partial);
        }
    }

    /// Close the open window at the current frame: its records are built now, as far as
    /// the queue has room, and the rest as [`continue_close`](Self::continue_close) finds
    /// room (after polls).
    pub(super) fn close_window(&mut self, partial: bool) {
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
        let c = &mut self.closing;
        (c.active, c.next, c.partial, c.pre) = (true, 0, partial, pre);
        (c.late_start, c.since_front) = (late_start, since_front);
        self.continue_close();
    }

    /// Build the records of the window being closed while the queue has room; once the
    /// last is built, slice the station and open the next window. True when no close is
    /// left under way.
    pub(super) fn continue_close(&mut self) -> bool {
        if !self.closing.active {
            return true;
        }
        let det = &self.config.detector;
        let c = &mut self.closing;
        while let Some(p) = self.probes.get_mut(c.next) {
            // The sums store has a slot for every record the queue can hold, or keeps none.
            let Some(rec) = self.queue.push_slot() else {
                return false;
            };
            let i = c.next;
            c.next += 1;
            // The record is built in its queue slot.
            let (lead_tip, trail_tip, corr) = p.parts_mut();
            rec.probe = i as u8;
            rec.start = self.window_start;
            rec.end = self.frame;
            rec.since_front = c.since_front;
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
            flags.set_if(Flags::PARTIAL_WINDOW, c.partial);
            flags.set_if(Flags::PRE_FRONT, c.pre);
            flags.set_if(Flags::LATE_FRONT_START, c.late_start);
            if let Some(t) = &rec.trail {
                flags.set_if(Flags::TRAILING_STUCK, t.flags.contains(Flags::STUCK));
            }
            let (correlation, sums) = match (corr, &rec.trail) {
                (Some(cr), Some(t)) => {
                    let (result, sums) = if S == 0 {
                        // No sums kept: analyse them in the correlator, no copy made.
                        let min_peak = det.min_peak_coefficient;
                        (cr.close_analysed(self.frame, min_peak, &mut flags), None)
                    } else {
                        let sums = cr.close(self.frame, &mut flags);
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
            if let Some(s) = self.station.as_mut() {
                let sigma = rec.lead.void_fraction_sigma().unwrap_or(0.0);
                s.keep_window_lead(i, (rec.lead.void_fraction(), sigma, flags));
            }
            if let Some(sums) = sums {
                self.sums.push(sums);
            }
        }
        let (pre, since_front) = (self.closing.pre, self.closing.since_front);
        if let (true, false, Some(since)) = (self.station.is_some(), pre, since_front) {
            if since >= 0 {
                self.slice_station();
            }
        }
        self.closing.active = false;
        self.pre_front_open = false;
        self.window_start = self.frame;
        self.window_bubbles = 0;
        true
    }
}
