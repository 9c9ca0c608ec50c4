//! The streaming [`Correlator`]: the window's sums kept as second differences over the lags,
//! and the edge sinks that feed it (through a [`RunBuffer`] run by run, or in time order).

use super::analysis::{
    analyse_functions, pearson_lane, pearson_small, CorrelationResult, PEARSON_IN_LANES, SMALL_N,
};
use super::run_buffer::{RunBuffer, RISING_BIT};
use super::CorrelationSums;
use crate::flags::Flags;
use crate::phase::{Edge, EdgeSink};

/// The double prefix sum of the second differences `d` (two's-complement `i32` values), in
/// place, clamped at 0 (exact sums are never negative). The sums of a window count frame
/// pairs, so they lie in `0..2^31` for a window shorter than 2^31 frames (the correlator
/// flags a longer one): the low 32 bits of the wrapping sums are then the sums.
fn double_prefix_narrow(d: &mut [u32]) {
    let (mut slope, mut value) = (0i32, 0i32);
    for x in d.iter_mut() {
        slope = slope.wrapping_add(*x as i32);
        value = value.wrapping_add(slope);
        *x = value.max(0) as u32;
    }
}

/// The last `L` edges of the leading tip, oldest first: `(t << 1) | rising`, `t` from the
/// window start (below 2^31).
#[derive(Clone, Debug)]
struct Ring<const L: usize> {
    edges: [u32; L],
    next: usize,
    len: usize,
}

impl<const L: usize> Ring<L> {
    fn clear(&mut self) {
        self.next = 0;
        self.len = 0;
    }

    fn push(&mut self, t: i32, rising: bool) {
        if let Some(slot) = self.edges.get_mut(self.next) {
            *slot = ((t.max(0) as u32) << 1) | rising as u32;
        }
        self.next = if self.next + 1 >= L { 0 } else { self.next + 1 };
        self.len = (self.len + 1).min(L);
    }

    /// The pairs of the edges of the last `m` frames (first factor) with an edge `(t, e)`
    /// (second): each adds the ramp `-e_i e ramp(tau - p)`, `p = t - t_i` in `0..m`, whose
    /// second difference is `-e_i e` at `d[p + 1]`. Newest first, until an edge lies `m`
    /// or more frames back (or after `t`), over the ring as two plain slices (before
    /// `next`, then from `next` on): no index wrap, no multiplication (`-e_i e` is `±e`).
    #[inline]
    fn add_pairs(&self, d: &mut [u32; L], m: usize, t: i32, e: i32) {
        // `d[p + 1]` for `p < m <= L - 1`: the slots after the first.
        let Some((_, d1)) = d.split_first_mut() else {
            return;
        };
        let m = m.min(d1.len()) as u32;
        // `next == len` until the ring is full (`push` and `clear` keep it so): the edges
        // are those before `next`, and once it is full those from `next` on.
        let (newer, older) = self.edges.split_at(self.next.min(L));
        let older = if self.len >= L { older } else { &[] };
        let mut pairs = |edges: &[u32]| -> bool {
            for &v in edges.iter().rev() {
                // A negative lag (an edge after `t`) wraps to 2^31 or more: past `m`.
                let p = t.wrapping_sub((v >> 1) as i32) as u32;
                if p >= m {
                    return false;
                }
                // -e_i e: -e for a rising edge i (e_i = 1), e for a falling one.
                let rising = (v & 1).wrapping_neg() as i32;
                let c = (e ^ rising).wrapping_sub(rising);
                if let Some(x) = d1.get_mut(p as usize) {
                    *x = x.wrapping_add(c as u32);
                }
            }
            true
        };
        if pairs(newer) {
            pairs(older);
        }
    }

    /// Visit the edges `(t, e)`, newest first, until `f` returns false.
    #[inline]
    fn for_each_recent(&self, mut f: impl FnMut(i32, i32) -> bool) {
        let mut idx = self.next;
        for _ in 0..self.len {
            idx = if idx == 0 { L - 1 } else { idx - 1 };
            let Some(&v) = self.edges.get(idx) else { break };
            let e = if v & 1 == 1 { 1 } else { -1 };
            if !f((v >> 1) as i32, e) {
                break;
            }
        }
    }
}

/// The cross coefficients of the first `lags` lags from their prefix sums, in SIMD lanes
/// on a host: lag `t` overlaps `frames - t` frames, the leading tip's air among them is
/// `lead_air` less its air in the last `t` frames (`tail`), the trailing tip's is
/// `trail_air` less its air in the first `t` (`head`). No loop-carried value, so the
/// compiler runs several lags at once; the values are [`pearson_small`]'s bit for bit.
#[inline(never)]
fn cross_in_lanes(
    rab: &mut [f32],
    cross: &[u32],
    head: &[u32],
    tail: &[u32],
    lags: usize,
    (frames, lead_air, trail_air): (u32, u32, u32),
) {
    let sums = cross.iter().zip(head).zip(tail);
    for ((o, ((&sab, &h), &z)), t) in rab.iter_mut().zip(sums).take(lags).zip(0u32..) {
        let n = frames.saturating_sub(t);
        *o = pearson_lane(
            n,
            lead_air.saturating_sub(z),
            trail_air.saturating_sub(h),
            sab,
        );
    }
}

/// Streaming correlation of one dual-tip probe, fed with the tips' interfaces.
///
/// Drive it as the chain does, either
/// - tip by tip: for each run of at most [`MAX_RUN_FRAMES`](super::MAX_RUN_FRAMES) frames,
///   [`begin_run`](Self::begin_run), the leading tip's edges through
///   [`lead`](Self::lead), the trailing tip's edges of the same frames through
///   [`trail`](Self::trail), then [`end_run`](Self::end_run), all with the same
///   [`RunBuffer`] (which may serve other correlators between runs); or
/// - in time order: the edges of both tips as they happen, through
///   [`lead_in_order`](Self::lead_in_order) and [`trail_in_order`](Self::trail_in_order)
///   (edges of the two tips at the same frame in either order), no buffer;
///
/// and [`close`](Self::close) at a window end (after `end_run`). `L` is the number of lag
/// slots (the largest lag is `L - 1`).
#[derive(Clone, Debug)]
pub struct Correlator<const L: usize> {
    max_lag: usize,
    start: u64,
    /// Second differences of the cross and auto sums over the lags (two's-complement
    /// `i32` values; at a window close, in place, the sums themselves).
    cross: [u32; L],
    auto: [u32; L],
    /// Second differences of the air counts among the first frames of the window
    /// (two's-complement `i32` values; at a window close, the counts).
    lead_head: [u32; L],
    trail_head: [u32; L],
    ring: Ring<L>,
    lead_air: bool,
    trail_air: bool,
    /// Running `sum e` (modulo 2^32: it goes only into the lag sums) and `sum e t` over
    /// the merged edges of each tip.
    lead_e: i32,
    lead_q: i64,
    trail_e: i32,
    trail_q: i64,
    overflow: bool,
}

impl<const L: usize> Correlator<L> {
    /// All zero bytes: the placeholder in an unused probe slot of a chain (lag 0, frame 0,
    /// both tips in water).
    pub(crate) const ZERO: Self = Correlator {
        max_lag: 0,
        start: 0,
        cross: [0; L],
        auto: [0; L],
        lead_head: [0; L],
        trail_head: [0; L],
        ring: Ring {
            edges: [0; L],
            next: 0,
            len: 0,
        },
        lead_air: false,
        trail_air: false,
        lead_e: 0,
        lead_q: 0,
        trail_e: 0,
        trail_q: 0,
        overflow: false,
    };

    /// Start afresh, in place: the state of [`new`](Self::new) with the same arguments.
    pub fn restart(&mut self, max_lag: u16, start: u64, lead_air: bool, trail_air: bool) {
        self.max_lag = (max_lag as usize).min(L - 1);
        self.reset(start);
        self.open(start, lead_air, trail_air);
    }

    /// A correlator over lags `0..=max_lag` (capped at `L - 1`), starting at frame `start`
    /// with the given phases of the two tips.
    pub fn new(max_lag: u16, start: u64, lead_air: bool, trail_air: bool) -> Self {
        const { assert!(L >= 2 && L <= 1 << 16, "L must lie in 2..=65536") };
        let mut c = Self::ZERO;
        c.restart(max_lag, start, lead_air, trail_air);
        c
    }

    /// The largest lag, frames.
    pub fn max_lag(&self) -> u16 {
        self.max_lag as u16
    }

    /// Start a run of frames at absolute frame `first`, with `buf` for the leading tip's
    /// edges (what it held is forgotten: end every run with [`end_run`](Self::end_run)).
    pub fn begin_run(&mut self, first: u64, buf: &mut RunBuffer) {
        buf.begin(first);
    }

    /// The sink for the leading tip's edges of the current run.
    pub fn lead<'a>(&'a mut self, buf: &'a mut RunBuffer) -> LeadEdges<'a, L> {
        LeadEdges(self, buf)
    }

    /// The sink for the trailing tip's edges of the current run.
    pub fn trail<'a>(&'a mut self, buf: &'a mut RunBuffer) -> TrailEdges<'a, L> {
        TrailEdges(self, buf)
    }

    /// End the run: merge the leading tip's remaining edges.
    pub fn end_run(&mut self, buf: &mut RunBuffer) {
        self.drain(buf, u64::MAX);
    }

    /// The sink for the leading tip's edges when both tips' edges come in time order.
    pub fn lead_in_order(&mut self) -> LeadInOrder<'_, L> {
        LeadInOrder(self)
    }

    /// The sink for the trailing tip's edges when both tips' edges come in time order.
    pub fn trail_in_order(&mut self) -> TrailInOrder<'_, L> {
        TrailInOrder(self)
    }

    /// Close the window at absolute frame `end` (exclusive): return its sums and start the
    /// next window there. Raises [`Flags::CORRELATION_OVERFLOW`] in `flags` if edges were
    /// lost. Call it between runs (after [`end_run`](Self::end_run)).
    pub fn close(&mut self, end: u64, flags: &mut Flags) -> CorrelationSums<L> {
        let (lead_air, trail_air) = (self.lead_air, self.trail_air);
        let mut tail = [0u32; L];
        let totals = self.settle(end, &mut tail);
        let sums = self.sums(totals, &tail);
        self.reopen(end, lead_air, trail_air, flags);
        sums
    }

    /// Close the window at absolute frame `end` as [`close`](Self::close) does, and return
    /// the derived results of its sums (as [`CorrelationSums::analyse`] gives them, bit for
    /// bit) instead of the sums: they are analysed where they are, in the correlator, so
    /// no copy of them is made. The analysis flags and [`Flags::CORRELATION_OVERFLOW`] go
    /// into `flags`.
    pub fn close_analysed(
        &mut self,
        end: u64,
        min_peak: f32,
        flags: &mut Flags,
    ) -> CorrelationResult {
        let (lead_air, trail_air) = (self.lead_air, self.trail_air);
        let totals = self.clip(end);
        // A short window's sums are taken lag by lag, straight from the second differences
        // (on a host too: fewer instructions than the copy's vector passes, no 28 L bytes
        // moved, the same results).
        if let Some((result, f)) = self.analyse_small(end, totals, min_peak) {
            *flags |= f;
            self.flag_overflow(flags);
            self.reset_scalars(end);
            self.open(end, lead_air, trail_air);
            return result;
        }
        let (result, f) = self.analyse_copy(end, totals, min_peak);
        *flags |= f;
        self.reopen(end, lead_air, trail_air, flags);
        result
    }

    /// The sums of a clipped window, copied out and analysed. Apart from
    /// [`close_analysed`](Self::close_analysed), so only a long window's close takes the
    /// copy's stack (`28 L` bytes).
    #[inline(never)]
    fn analyse_copy(
        &mut self,
        end: u64,
        totals: (u64, u64, u64, usize),
        min_peak: f32,
    ) -> (CorrelationResult, Flags) {
        let mut tail = [0u32; L];
        self.prefix_sums(end, totals, &mut tail);
        self.sums(totals, &tail).analyse(min_peak)
    }

    /// [`close_analysed`](Self::close_analysed) of a clipped window of at most `SMALL_N`
    /// frames (else `None`, nothing changed), in one pass over the lags per coefficient
    /// function: each lag's sums are the running double prefix sums of the second
    /// differences (the values `prefix_sums` would store, bit for bit), turned at once
    /// into the coefficient as `SumsView::fill_lag_by_lag` does, and the second differences are cleared as they
    /// are read, so the next window starts from zeros without another pass. The results
    /// are those of [`CorrelationSums::analyse`] of the same sums, bit for bit.
    fn analyse_small(
        &mut self,
        end: u64,
        (frames, lead_air, trail_air, lags): (u64, u64, u64, usize),
        min_peak: f32,
    ) -> Option<(CorrelationResult, Flags)> {
        if frames > SMALL_N as u64 || lead_air > u32::MAX as u64 || trail_air > u32::MAX as u64 {
            return None;
        }
        let (lead_air, trail_air) = (lead_air as u32, trail_air as u32);
        let mut tail = [0u32; L];
        self.tail_differences(self.rel(end), &mut tail);
        // Zeros, not NaN: a zero fill is a memset, and every entry read is written first.
        let mut rab = [0f32; L];
        let mut raa = [0f32; L];
        // Running (slope, value) of each double prefix sum, in 32-bit wrapping arithmetic
        // as `double_prefix_short` and `double_prefix_narrow` (the window is short).
        let step = |d: u32, (slope, value): &mut (i32, i32)| -> u32 {
            *slope = slope.wrapping_add(d as i32);
            *value = value.wrapping_add(*slope);
            (*value).max(0) as u32
        };
        // R_ab, every lag; the tail counts are kept for R_aa. Two passes: the three
        // running sums in place first (integers only), then the coefficients from them,
        // clearing the second differences; apart, each loop keeps its values in a 32-bit
        // core's registers (together they spill), for the same values bit for bit.
        let (mut c, mut h, mut t) = ((0, 0), (0, 0), (0, 0));
        let ins = self.cross.iter_mut().zip(self.trail_head.iter_mut());
        for ((x, y), z) in ins.zip(tail.iter_mut()).take(lags) {
            *x = step(*x, &mut c);
            *y = step(*y, &mut h);
            *z = step(*z, &mut t);
        }
        if PEARSON_IN_LANES {
            let sums = (frames as u32, lead_air, trail_air);
            cross_in_lanes(&mut rab, &self.cross, &self.trail_head, &tail, lags, sums);
            self.cross.get_mut(..lags).unwrap_or(&mut []).fill(0);
            self.trail_head.get_mut(..lags).unwrap_or(&mut []).fill(0);
        } else {
            let mut n32 = frames as u32;
            let ins = self.cross.iter_mut().zip(self.trail_head.iter_mut());
            for ((x, y), (z, o)) in ins.zip(tail.iter().zip(rab.iter_mut())).take(lags) {
                let (sab, head) = (*x, *y);
                (*x, *y) = (0, 0);
                let (sa, sb) = (lead_air.saturating_sub(*z), trail_air.saturating_sub(head));
                *o = pearson_small(n32, sa, sb, sab);
                n32 = n32.saturating_sub(1);
            }
        }
        // R_aa up to its first lag at or below 0 (all the results need of it).
        let (mut a, mut h) = ((0, 0), (0, 0));
        let mut n32 = frames as u32;
        let mut written = 0;
        let ins = self.auto.iter_mut().zip(self.lead_head.iter_mut());
        for ((x, y), (&z, o)) in ins.zip(tail.iter().zip(raa.iter_mut())).take(lags) {
            let saa = step(*x, &mut a);
            let head = step(*y, &mut h);
            (*x, *y) = (0, 0);
            *o = pearson_small(
                n32,
                lead_air.saturating_sub(z),
                lead_air.saturating_sub(head),
                saa,
            );
            n32 = n32.saturating_sub(1);
            written += 1;
            if *o <= 0.0 {
                break;
            }
        }
        // The rest of the auto-correlation's second differences (after the stop). Slots from
        // `lags` on are never written (every edge writes slots `0..=max_lag`, and a new
        // `max_lag` comes with a full reset), so they are still zero: a host's 1024 slots
        // are not cleared again at every close.
        self.auto.get_mut(written..lags).unwrap_or(&mut []).fill(0);
        self.lead_head
            .get_mut(written..lags)
            .unwrap_or(&mut [])
            .fill(0);
        let rab = rab.get(..lags).unwrap_or(&[]);
        let raa = raa.get(..written).unwrap_or(&[]);
        Some(analyse_functions(rab, raa, min_peak))
    }

    /// The first half of a close: clip the intervals open at `end`, turn the second
    /// differences into the sums in place, and the leading tip's tail counts into `tail`.
    /// Returns `(frames, lead_air, trail_air, lags)`.
    fn settle(&mut self, end: u64, tail: &mut [u32; L]) -> (u64, u64, u64, usize) {
        let totals = self.clip(end);
        self.prefix_sums(end, totals, tail);
        totals
    }

    /// Clip the intervals open at `end`. Returns `(frames, lead_air, trail_air, lags)`.
    fn clip(&mut self, end: u64) -> (u64, u64, u64, usize) {
        let t_end = self.rel(end);
        // Clip intervals open at the window end.
        if self.lead_air {
            self.lead_edge(t_end, false);
        }
        if self.trail_air {
            self.trail_edge(t_end, false);
        }
        let lags = (self.max_lag + 1).min(L);
        let frames = end.saturating_sub(self.start);
        // The sums are kept in 32 bits (see `double_prefix_narrow`).
        if frames > MAX_WINDOW_FRAMES {
            self.overflow = true;
        }
        // sum e t over a tip's edges is minus its air time.
        let lead_air = self.lead_q.wrapping_neg().max(0) as u64;
        let trail_air = self.trail_q.wrapping_neg().max(0) as u64;
        (frames, lead_air, trail_air, lags)
    }

    /// Turn the second differences of a clipped window into the sums in place, and the
    /// leading tip's tail counts into `tail`.
    fn prefix_sums(&mut self, end: u64, totals: (u64, u64, u64, usize), tail: &mut [u32; L]) {
        let lags = totals.3;
        let d = [
            &mut self.cross,
            &mut self.auto,
            &mut self.lead_head,
            &mut self.trail_head,
        ];
        for d in d {
            double_prefix_narrow(d.get_mut(..lags).unwrap_or(&mut []));
        }
        self.tail_differences(self.rel(end), tail);
        double_prefix_narrow(tail.get_mut(..lags).unwrap_or(&mut []));
    }

    /// The second differences of the leading tip's tail counts into `tail` (zeros), for a
    /// window ending at window time `t_end`.
    fn tail_differences(&self, t_end: i64, tail: &mut [u32; L]) {
        // Tail counts: an edge at t adds -e ramp(tau - (N - t)); the ring holds every edge
        // of the last max_lag frames (only ramps that start inside the lags: 0 <= p < m).
        let m = self.max_lag;
        self.ring.for_each_recent(|t, e| {
            let p = t_end.wrapping_sub(t as i64);
            if p < 0 || p >= m as i64 {
                return p < 0;
            }
            if let Some(x) = tail.get_mut(p as usize + 1) {
                *x = x.wrapping_add(e.wrapping_neg() as u32);
            }
            true
        });
    }

    /// The sums of a settled window, as a record keeps them.
    fn sums(&self, totals: (u64, u64, u64, usize), tail: &[u32; L]) -> CorrelationSums<L> {
        let (frames, lead_air, trail_air, lags) = totals;
        let wide = |s: &[u32]| {
            let mut v = heapless::Vec::new();
            for &x in s.iter().take(lags) {
                let _ = v.push(x as u64);
            }
            v
        };
        let narrow =
            |s: &[u32]| heapless::Vec::from_slice(s.get(..lags).unwrap_or(&[])).unwrap_or_default();
        CorrelationSums {
            frames,
            windows: 1,
            lead_air,
            trail_air,
            cross: wide(&self.cross),
            auto: wide(&self.auto),
            lead_head: narrow(&self.lead_head),
            lead_tail: narrow(tail),
            trail_head: narrow(&self.trail_head),
        }
    }

    /// The second half of a close: flag lost edges and open the next window at `end`.
    fn reopen(&mut self, end: u64, lead_air: bool, trail_air: bool, flags: &mut Flags) {
        self.flag_overflow(flags);
        self.reset(end);
        self.open(end, lead_air, trail_air);
    }

    fn flag_overflow(&self, flags: &mut Flags) {
        if self.overflow {
            *flags |= Flags::CORRELATION_OVERFLOW;
        }
    }

    fn reset(&mut self, start: u64) {
        self.cross = [0; L];
        self.auto = [0; L];
        self.lead_head = [0; L];
        self.trail_head = [0; L];
        self.reset_scalars(start);
    }

    /// [`reset`](Self::reset) of everything but the second differences (already zero).
    fn reset_scalars(&mut self, start: u64) {
        self.start = start;
        self.ring.clear();
        self.lead_air = false;
        self.trail_air = false;
        self.lead_e = 0;
        self.lead_q = 0;
        self.trail_e = 0;
        self.trail_q = 0;
        self.overflow = false;
    }

    /// Open a window at `start`: clip intervals already open there.
    fn open(&mut self, start: u64, lead_air: bool, trail_air: bool) {
        self.start = start;
        if lead_air {
            self.lead_edge(0, true);
        }
        if trail_air {
            self.trail_edge(0, true);
        }
    }

    fn rel(&self, frame: u64) -> i64 {
        frame.saturating_sub(self.start).min(i64::MAX as u64 >> 1) as i64
    }

    fn lead_pending(&mut self, buf: &mut RunBuffer, edge: Edge) {
        if !buf.hold(edge) {
            // Cannot happen through the chain: merge out of order, flagged.
            self.overflow = true;
            self.drain(buf, u64::MAX);
            let t = self.rel(edge.frame);
            self.lead_edge(t, edge.to_air);
        }
    }

    /// Merge the held leading-tip edges at or before absolute frame `upto`.
    #[inline]
    fn drain(&mut self, buf: &mut RunBuffer, upto: u64) {
        match (buf.pos < buf.len, self.run_base(buf)) {
            (true, Some(base)) => {
                // The last offset due: `upto - run_start` (every held offset when `upto`
                // is `u64::MAX`, which no held frame passes; none before the run).
                let last = match upto.checked_sub(buf.run_start) {
                    _ if upto == u64::MAX => u32::MAX,
                    Some(d) => d.min(u32::MAX as u64) as u32,
                    None => return,
                };
                self.drain_short(buf, base, last);
            }
            (true, None) => {
                while let Some((frame, rising)) = buf.take_upto(upto) {
                    let t = self.rel(frame);
                    self.lead_edge(t, rising);
                }
            }
            (false, _) => {}
        }
        buf.free_if_merged();
    }

    /// The window time of the run start if the run starts in the window less than
    /// `2^31 - 2^15` frames in (and no held frame passes `u64::MAX`): then an edge held
    /// `off` frames into the run has window time `base + off`, as [`rel`](Self::rel) gives.
    #[inline]
    fn run_base(&self, buf: &RunBuffer) -> Option<i32> {
        const SPAN: u64 = RISING_BIT as u64;
        let base = buf.run_start.checked_sub(self.start)?;
        let fits = base < MAX_WINDOW_FRAMES + 1 - SPAN && buf.run_start <= u64::MAX - SPAN;
        fits.then_some(base as i32)
    }

    /// Merge the held edges at most `last` frames into a run with 32-bit window times
    /// ([`run_base`](Self::run_base)): the edges [`RunBuffer::take_upto`] would give.
    #[inline]
    fn drain_short(&mut self, buf: &mut RunBuffer, base: i32, last: u32) {
        while let Some(&v) = buf.edges.get(buf.pos).filter(|_| buf.pos < buf.len) {
            let off = (v & !RISING_BIT) as u32;
            if off > last {
                break;
            }
            buf.pos += 1;
            self.lead_edge_short(base + off as i32, v & RISING_BIT != 0);
        }
    }

    /// An edge of the trailing tip of the current run: the held leading edges up to its
    /// frame merged first.
    #[inline]
    fn trail_run_edge(&mut self, buf: &mut RunBuffer, edge: Edge) {
        let off = edge.frame.checked_sub(buf.run_start);
        match (self.run_base(buf), off.filter(|&o| o < RISING_BIT as u64)) {
            // Inside a run with 32-bit window times (as `drain` and `rel` give it).
            (Some(base), Some(off)) => {
                self.drain_short(buf, base, off as u32);
                buf.free_if_merged();
                self.trail_edge_short(base + off as i32, edge.to_air);
            }
            _ => {
                self.drain(buf, edge.frame);
                let t = self.rel(edge.frame);
                self.trail_edge(t, edge.to_air);
            }
        }
    }

    /// A merged edge of the leading tip at window time `t`.
    fn lead_edge(&mut self, t: i64, rising: bool) {
        match i32::try_from(t) {
            Ok(t) => self.lead_edge_short(t, rising),
            Err(_) => {
                // Past the window times the lag sums keep (no lag slot is that far):
                // flagged, counted in the sums over the tip's edges only.
                self.overflow = true;
                self.lead_air = rising;
                far_edge(&mut self.lead_e, &mut self.lead_q, t, rising);
            }
        }
    }

    /// [`lead_edge`](Self::lead_edge) at a 32-bit window time.
    #[inline(never)]
    fn lead_edge_short(&mut self, t: i32, rising: bool) {
        let e: i32 = if rising { 1 } else { -1 };
        self.lead_air = rising;
        let m = self.max_lag;
        // Auto, this edge second: earlier edges of the last max_lag frames, and itself.
        let auto = &mut self.auto;
        // Itself, lag 0: the ramp -ramp(tau), whose second difference is -1 at lag 1.
        if m > 0 {
            if let Some(x) = auto.get_mut(1) {
                *x = x.wrapping_sub(1);
            }
        }
        self.ring.add_pairs(auto, m, t, e);
        // Auto, this edge first, every earlier edge second (p < 0): a straight line.
        add_line(auto, t, e, self.lead_e, self.lead_q);
        // Cross, this edge first, every earlier trailing edge second.
        add_line(&mut self.cross, t, e, self.trail_e, self.trail_q);
        self.ring.push(t, rising);
        add_head(&mut self.lead_head, m, t, e);
        self.lead_e = self.lead_e.wrapping_add(e);
        self.lead_q = self.lead_q.wrapping_add(signed(t, rising));
    }

    /// An edge of the trailing tip at window time `t` (every leading edge up to `t` merged).
    fn trail_edge(&mut self, t: i64, rising: bool) {
        match i32::try_from(t) {
            Ok(t) => self.trail_edge_short(t, rising),
            Err(_) => {
                // As in `lead_edge`.
                self.overflow = true;
                self.trail_air = rising;
                far_edge(&mut self.trail_e, &mut self.trail_q, t, rising);
            }
        }
    }

    /// [`trail_edge`](Self::trail_edge) at a 32-bit window time.
    #[inline(never)]
    fn trail_edge_short(&mut self, t: i32, rising: bool) {
        let e: i32 = if rising { 1 } else { -1 };
        self.trail_air = rising;
        let m = self.max_lag;
        self.ring.add_pairs(&mut self.cross, m, t, e);
        add_head(&mut self.trail_head, m, t, e);
        self.trail_e = self.trail_e.wrapping_add(e);
        self.trail_q = self.trail_q.wrapping_add(signed(t, rising));
    }
}

/// The running sums `sum e` and `sum e t` of a tip after an edge at window time `t` past
/// 32 bits.
fn far_edge(se: &mut i32, sq: &mut i64, t: i64, rising: bool) {
    let e: i64 = if rising { 1 } else { -1 };
    *se = se.wrapping_add(e as i32);
    *sq = sq.wrapping_add(e.wrapping_mul(t));
}

/// `e t` for an edge at window time `t` (`e` is 1 for a rising edge, -1 for a falling one).
#[inline]
fn signed(t: i32, rising: bool) -> i64 {
    let t = t as i64;
    if rising {
        t
    } else {
        -t
    }
}

/// The longest window, frames, whose lag sums the correlator keeps (they count frame pairs
/// in 32 bits; 2^31 - 1 frames are 14.9 hours at 40 kHz): a longer window is flagged
/// [`Flags::CORRELATION_OVERFLOW`].
const MAX_WINDOW_FRAMES: u64 = i32::MAX as u64;

/// The pairs of an edge `(t, e)` (first factor) with all earlier edges of the other factor
/// (running sums `se = sum e_j`, `sq = sum e_j t_j`): `p = t_j - t < 0`, so each adds the
/// line `c (tau - p)`, `c = -e e_j`.
#[inline]
fn add_line(d: &mut [u32], t: i32, e: i32, se: i32, sq: i64) {
    // The running sums in 32 bits: the sums they go into are kept modulo 2^32.
    let sq = sq as i32;
    // D[0] += sum -c p = e (sq - t se);  D[1] += sum c (1 + p) = -e (se (1 - t) + sq).
    // A tip's edges alternate, so `se` is 0 or 1 and `e` is +1 or -1: those products are
    // a choice or a negation; any other value takes the multiplication. The same wrapping
    // sums either way.
    let ts = match se {
        0 => 0,
        1 => t,
        _ => t.wrapping_mul(se),
    };
    let times_e = |v: i32| match e {
        1 => v,
        -1 => v.wrapping_neg(),
        _ => e.wrapping_mul(v),
    };
    if let Some(x) = d.first_mut() {
        *x = x.wrapping_add(times_e(sq.wrapping_sub(ts)) as u32);
    }
    if let Some(x) = d.get_mut(1) {
        // se (1 - t) = se - t se.
        let s = se.wrapping_sub(ts).wrapping_add(sq);
        *x = x.wrapping_sub(times_e(s) as u32);
    }
}

/// An edge `(t, e)` adds `e ramp(tau - t)` to the air count of the first `tau` frames.
#[inline]
fn add_head(d: &mut [u32], max_lag: usize, t: i32, e: i32) {
    if (t as u32 as usize) < max_lag {
        if let Some(x) = d.get_mut(t as usize + 1) {
            *x = x.wrapping_add(e as u32);
        }
    }
}

/// The leading tip's edge sink of a [`Correlator`] (tip-by-tip runs).
pub struct LeadEdges<'a, const L: usize>(&'a mut Correlator<L>, &'a mut RunBuffer);

impl<const L: usize> EdgeSink for LeadEdges<'_, L> {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        self.0.lead_pending(self.1, edge);
    }
}

/// The trailing tip's edge sink of a [`Correlator`] (tip-by-tip runs).
pub struct TrailEdges<'a, const L: usize>(&'a mut Correlator<L>, &'a mut RunBuffer);

impl<const L: usize> EdgeSink for TrailEdges<'_, L> {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        self.0.trail_run_edge(self.1, edge);
    }
}

/// The leading tip's edge sink of a [`Correlator`] fed in time order.
pub struct LeadInOrder<'a, const L: usize>(&'a mut Correlator<L>);

impl<const L: usize> EdgeSink for LeadInOrder<'_, L> {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        let t = self.0.rel(edge.frame);
        self.0.lead_edge(t, edge.to_air);
    }
}

/// The trailing tip's edge sink of a [`Correlator`] fed in time order.
pub struct TrailInOrder<'a, const L: usize>(&'a mut Correlator<L>);

impl<const L: usize> EdgeSink for TrailInOrder<'_, L> {
    #[inline]
    fn edge(&mut self, edge: Edge) {
        let t = self.0.rel(edge.frame);
        self.0.trail_edge(t, edge.to_air);
    }
}
