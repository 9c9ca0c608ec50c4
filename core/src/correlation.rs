//! Dual-tip correlation: interfacial velocity and turbulence intensity from the leading and
//! trailing tips' binary phase signals.
//!
//! # Definition (exact, integer)
//!
//! Take one analysis window of `N` frames, frames `t = 0..N` relative to its start, with
//! `a(t)` the leading tip's phase and `b(t)` the trailing tip's (1 = air, 0 = water), both
//! restricted to the window (an air interval open at a window edge is clipped to the
//! window). For each lag `tau = 0..=M` (`M` the probe's `max_lag`; the trailing tip is
//! delayed) over the `n(tau) = N - tau` frames where both factors lie in the window:
//!
//! ```text
//! S_ab(tau) = sum_{t=0}^{N-1-tau} a(t) b(t+tau)       cross sum
//! S_aa(tau) = sum_{t=0}^{N-1-tau} a(t) a(t+tau)       auto sum (leading tip)
//! S_a(tau)  = sum_{t=0}^{N-1-tau} a(t)                the first factor's range
//! S_b(tau)  = sum_{t=tau}^{N-1}   b(t)                the second factor's range
//! S_a'(tau) = sum_{t=tau}^{N-1}   a(t)                (auto: the lagged factor's range)
//! ```
//!
//! These are exact integers, reported in [`CorrelationSums`] (which the host can add over
//! runs for ensemble statistics, see [`CorrelationSums::merge`]). The coefficient at a lag
//! is Pearson's correlation of the two overlapping sequences, computed from the integers
//! (binary signals: the sums of squares are the sums):
//!
//! ```text
//! R_ab(tau) = (n S_ab - S_a S_b) / sqrt( (n S_a - S_a^2) (n S_b - S_b^2) ),  n = N - tau
//! ```
//!
//! and likewise `R_aa` with `S_a'` in place of `S_b`. The numerator and the two variance
//! terms are computed exactly in integers, then once rounded to `f32`; the square roots are
//! Newton-refined (micromath's estimates alone are 5 % approximations). A lag whose overlap
//! is shorter than 2 frames, or where one factor is constant, has no coefficient.
//!
//! # Algorithm: interface pairs, O(1) per pair
//!
//! Write each signal as a sum of air intervals, i.e. of its interfaces: an edge at frame
//! `t` with sign `e = +1` (air starts at `t`) or `-1` (air ends, `t` is the first water
//! frame). Then, for `tau >= 0`,
//!
//! ```text
//! S_ab(tau) = sum over edge pairs (i of a, j of b) of  -e_i e_j ramp(tau - (t_j - t_i)),
//! ramp(x) = max(x, 0),
//! ```
//!
//! because the overlap of an air interval of `a` with a shifted air interval of `b` is a
//! trapezoid in `tau`, which is the sum of the four ramps at its corners. Accumulate the
//! second difference `D` of `S_ab` over `tau = 0..=M`: a pair with `p = t_j - t_i` adds
//! `c = -e_i e_j` at `D[p + 1]` when `0 <= p < M` (and nothing when `p >= M`); a pair with
//! `p < 0` adds the straight line `c (tau - p)`, i.e. `-c p` at `D[0]` and `c (1 + p)` at
//! `D[1]`. At the window close a double prefix sum of `D` gives `S_ab(tau)` for every lag in
//! O(M). Pairs with `p >= 0` need only the edges of `a` within the last `M` frames (at most
//! `M`, one per frame, kept in a ring of `L > M` entries); pairs with `p < 0` are summed in
//! O(1) per edge from two running sums of the other tip, `sum e` and `sum e t`. The auto
//! sum is the same with `b = a`, the edge-ranges `S_a`, `S_b`, `S_a'` come from the edges
//! in the first and last `M` frames. Everything is integer arithmetic, so the sums equal
//! the direct sums over samples exactly, on a device as on a host.
//!
//! The pairs must be seen in time order (an edge of `a` at `t` before one of `b` at `t`;
//! the other order at equal frames gives the same sums, since `p = 0` adds `c` at `D[1]`
//! by either rule), but the chain may run the leading tip over a run of frames before the
//! trailing tip over the same frames; so the leading tip's edges of the current run wait in
//! a buffer (at most one per frame of a run, [`MAX_RUN_FRAMES`]) and are merged in as the
//! trailing tip's edges arrive, and the rest at the end of the run. The buffer is needed
//! only during one run of one probe, so it is not part of the correlator: a [`RunBuffer`]
//! is lent to it for the run, and a chain keeps one for all its probes. (A frame-major run,
//! which sees both tips' edges in time order, feeds the correlator directly, without it.)
//! No buffer can overflow when driven by the chain; driven directly with longer runs, the
//! correlator raises [`Flags::CORRELATION_OVERFLOW`] and stays defined.
//!
//! Cost: O(1) per edge of `a`, O(edges of `a` in the last `M` frames) per edge of `b`,
//! O(M) per window. In bubbly flow (F = 300 Hz at 40 kHz, M = 255) that is about four pair
//! updates per edge, a few per hundred samples. The other route, bit-packed phase words
//! and a popcount per lag, costs M/32 word operations per sample for each of the two sums
//! whatever the flow, and the Cortex-M4 has no popcount instruction; the interface pairs
//! are two to three orders of magnitude cheaper there. Their worst case (an interface at
//! every frame) is O(M) per frame, which a real probe signal does not approach.
//!
//! # Derived quantities (all lags in frames; the host divides by the sample rate)
//!
//! - Peak: the lag `k` of the highest defined `R_ab` (the first one on ties) and the
//!   coefficient there. The lag is refined below the sample with a three-point tent fit,
//!   `delta = (R(k+1) - R(k-1)) / (2 (R(k) - min(R(k-1), R(k+1))))`: the correlation of
//!   boxcar chords is a sum of trapezoids, each kinked at its transit time, so a sharply
//!   defined delay gives a kinked (tent) peak, on which the tent fit is exact and the usual
//!   parabolic fit is biased by up to 0.085 frame. (When the transit times spread over
//!   many frames the peak rounds off and the tent fit is biased by up to 0.085 frame
//!   instead, far below the statistical scatter of such a peak.) Not refined, and flagged
//!   [`Flags::PEAK_AT_LAG_BOUNDARY`], at lag 0 or the last lag.
//! - Secondary-peak ratio (the quality figure of cross-correlation velocimetry, Keane and
//!   Adrian 1992): the highest local maximum of `R_ab` outside the primary peak (the lags
//!   between its two half-maximum crossings), over the primary peak; 0 when there is no
//!   other local maximum, negative maxima count as 0. End lags count as local maxima when
//!   not below their one neighbour.
//! - `T05`: the lag at which `R_aa` first falls to 0.5 (linear interpolation).
//! - `tau05`: the half-width at half maximum of the cross-correlation peak: with `x_L` and
//!   `x_R` the lags, left and right of `k`, at which `R_ab` first falls to `R_ab(k) / 2`
//!   (linear interpolation), `tau05 = (x_R - x_L) / 2`; when `R_ab` stays above half down
//!   to lag 0, the one-sided `x_R - T`.
//! - Turbulence intensity (published method for dual-tip probes):
//!   `Tu = 0.851 sqrt(tau05^2 - T05^2) / T` with `T` the interpolated peak lag. It assumes
//!   Gaussian velocity fluctuations (0.851 follows from that shape), a frozen bubbly
//!   structure between the tips and `tau05 >= T05`; otherwise it is undefined
//!   ([`Flags::TU_UNDEFINED`]).
//! - When Tu is only an index ([`Flags::TU_INDEX`]): the formula takes the cross-correlation
//!   to be the auto-correlation smeared by the transit-time distribution, with squared
//!   half-widths that add (`tau05^2 = T05^2 + s^2`, `s` the transit-time half-width). That
//!   addition is exact for Gaussian shapes only. Bubbles arriving at random (a Poisson
//!   stream) give an exponential auto-correlation, `exp(-ln2 |tau| / T05)`; its convolution
//!   with a Gaussian transit-time density of half-width `s`, solved numerically, has a
//!   half-width from which the formula reads `s` too high by 2 % at `T05 = 0.1 s`, 7 % at
//!   `0.2 s`, 14 % at `0.3 s`, 26 % at `0.5 s` and 52 % at `T05 = s` (at those points the
//!   measured `tau05 / T05` is 10.3, 5.5, 3.9, 2.7 and 1.8). So Tu is a measure, within
//!   the 15 % of its published use, only while the chord time scale is short next to the
//!   transit-time spread: `tau05 >= TU_WIDTH_RATIO x T05` ([`TU_WIDTH_RATIO`] = 4, where
//!   the bias of the exponential case is about 12 %); below it the window is flagged and
//!   Tu grows with the chord length as much as with the turbulence. (Long chords, dense
//!   flow near the free surface, evenly spaced bubbles: the peak width then reflects the
//!   bubble train.)
//! - Integral time scales: `R_aa` integrated from lag 0, and `R_ab` from the peak lag `k`,
//!   to the first zero crossing after (trapezoid rule, the last piece cut at the linearly
//!   interpolated crossing); `None` when `R` does not cross zero within the lags.

use crate::flags::Flags;
use crate::phase::{Edge, EdgeSink};
use heapless::Vec;
use micromath::F32Ext;

/// The chain's default number of lag slots `L`: lags `0..=255`.
pub const DEFAULT_LAGS: usize = 256;

/// Least cross-correlation half-width tau05, in units of the auto-correlation half-time
/// T05, at which Tu is a measure rather than an index ([`Flags::TU_INDEX`]; derivation in
/// the module documentation).
pub const TU_WIDTH_RATIO: f32 = 4.0;

/// Longest run of frames between [`Correlator::begin_run`] and [`Correlator::end_run`]
/// (the chain's runs are never longer).
pub const MAX_RUN_FRAMES: usize = 1024;

/// Bit of a pending entry that marks a rising (water -> air) edge.
const RISING_BIT: u16 = 1 << 15;

/// The exact correlation sums of one window (see the [module documentation](self)), with
/// `lags()` entries per array: lags `0..lags()`.
///
/// Sums of several windows (for example of repeated runs at the same time since a front)
/// can be added with [`merge`](Self::merge); the coefficients of the merged sums are the
/// pooled Pearson coefficients of all the overlapping frames.
#[derive(Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CorrelationSums<const L: usize> {
    /// Frames in the window(s), `N` (summed over merged windows).
    pub frames: u64,
    /// Number of windows summed (1 for one window): the overlap at lag `tau` is
    /// `frames - windows * tau`.
    pub windows: u32,
    /// Air frames of the leading tip, `sum a(t)` over the window(s).
    pub lead_air: u64,
    /// Air frames of the trailing tip, `sum b(t)`.
    pub trail_air: u64,
    /// `S_ab(tau)`, the cross sums.
    pub cross: Vec<u64, L>,
    /// `S_aa(tau)`, the leading tip's auto sums.
    pub auto: Vec<u64, L>,
    /// Air frames of the leading tip among the first `tau` frames of the window(s).
    pub lead_head: Vec<u32, L>,
    /// Air frames of the leading tip among the last `tau` frames of the window(s).
    pub lead_tail: Vec<u32, L>,
    /// Air frames of the trailing tip among the first `tau` frames of the window(s).
    pub trail_head: Vec<u32, L>,
}

impl<const L: usize> CorrelationSums<L> {
    /// Sums of an empty window over `lags` lags (at most `L`).
    pub fn empty(lags: usize) -> Self {
        fn zeros<T: Copy + Default, const L: usize>(lags: usize) -> Vec<T, L> {
            let mut v = Vec::new();
            for _ in 0..lags.min(L) {
                let _ = v.push(T::default());
            }
            v
        }
        CorrelationSums {
            frames: 0,
            windows: 0,
            lead_air: 0,
            trail_air: 0,
            cross: zeros(lags),
            auto: zeros(lags),
            lead_head: zeros(lags),
            lead_tail: zeros(lags),
            trail_head: zeros(lags),
        }
    }

    /// Number of lags, `max_lag + 1`.
    pub fn lags(&self) -> usize {
        self.cross.len()
    }

    /// Overlap `n(tau)`: the number of frame pairs summed at lag `tau`.
    pub fn overlap(&self, tau: usize) -> u64 {
        self.frames
            .saturating_sub((self.windows as u64).saturating_mul(tau as u64))
    }

    /// `S_a(tau)`: the leading tip's air frames that have a partner at lag `tau`.
    pub fn lead_sum(&self, tau: usize) -> Option<u64> {
        Some(
            self.lead_air
                .saturating_sub(*self.lead_tail.get(tau)? as u64),
        )
    }

    /// `S_b(tau)`: the trailing tip's air frames that have a partner at lag `tau`.
    pub fn trail_sum(&self, tau: usize) -> Option<u64> {
        Some(
            self.trail_air
                .saturating_sub(*self.trail_head.get(tau)? as u64),
        )
    }

    /// `S_a'(tau)`: the leading tip's air frames that are the lagged factor at lag `tau`.
    pub fn lead_lagged_sum(&self, tau: usize) -> Option<u64> {
        Some(
            self.lead_air
                .saturating_sub(*self.lead_head.get(tau)? as u64),
        )
    }

    /// The cross-correlation coefficient `R_ab(tau)`, if defined.
    pub fn cross_coefficient(&self, tau: usize) -> Option<f32> {
        pearson(
            self.overlap(tau),
            self.lead_sum(tau)?,
            self.trail_sum(tau)?,
            *self.cross.get(tau)?,
        )
    }

    /// The leading tip's auto-correlation coefficient `R_aa(tau)`, if defined.
    pub fn auto_coefficient(&self, tau: usize) -> Option<f32> {
        pearson(
            self.overlap(tau),
            self.lead_sum(tau)?,
            self.lead_lagged_sum(tau)?,
            *self.auto.get(tau)?,
        )
    }

    /// Add the sums of another window (lags beyond the shorter of the two are dropped).
    pub fn merge(&mut self, other: &CorrelationSums<L>) {
        self.frames = self.frames.saturating_add(other.frames);
        self.windows = self.windows.saturating_add(other.windows);
        self.lead_air = self.lead_air.saturating_add(other.lead_air);
        self.trail_air = self.trail_air.saturating_add(other.trail_air);
        let n = self.lags().min(other.lags());
        for (mine, theirs) in [
            (&mut self.cross, &other.cross),
            (&mut self.auto, &other.auto),
        ] {
            mine.truncate(n);
            for (a, b) in mine.iter_mut().zip(theirs.iter()) {
                *a = a.saturating_add(*b);
            }
        }
        for (mine, theirs) in [
            (&mut self.lead_head, &other.lead_head),
            (&mut self.lead_tail, &other.lead_tail),
            (&mut self.trail_head, &other.trail_head),
        ] {
            mine.truncate(n);
            for (a, b) in mine.iter_mut().zip(theirs.iter()) {
                *a = a.saturating_add(*b);
            }
        }
    }

    /// The derived quantities of these sums (see the [module documentation](self)), and the
    /// correlation flags they raise ([`Flags::NO_CORRELATION_PEAK`],
    /// [`Flags::PEAK_AT_LAG_BOUNDARY`], [`Flags::TU_UNDEFINED`]); `min_peak` is the
    /// smallest acceptable peak coefficient.
    pub fn analyse(&self, min_peak: f32) -> (CorrelationResult, Flags) {
        self.view().analyse::<L>(min_peak)
    }

    /// Both coefficient functions at every lag (NaN where undefined) into `cross` and
    /// `auto` (as many lags as fit): the same values as
    /// [`cross_coefficient`](Self::cross_coefficient) and
    /// [`auto_coefficient`](Self::auto_coefficient), bit for bit, computed in chunks so the
    /// float stage vectorises.
    pub fn coefficients(&self, cross: &mut [f32], auto: &mut [f32]) {
        let v = self.view();
        v.fill(cross, false, false);
        v.fill(auto, true, false);
    }

    /// The sums as slices.
    fn view(&self) -> SumsView<'_> {
        SumsView {
            frames: self.frames,
            windows: self.windows,
            lead_air: self.lead_air,
            trail_air: self.trail_air,
            cross: &self.cross,
            auto: &self.auto,
            lead_head: &self.lead_head,
            lead_tail: &self.lead_tail,
            trail_head: &self.trail_head,
        }
    }
}

/// The fields of [`CorrelationSums`] as slices (`lags()` = the length of `cross`; missing
/// entries of the others read as 0): the sums of a record, or of a correlator's window
/// analysed in place.
#[derive(Clone, Copy)]
struct SumsView<'a> {
    frames: u64,
    windows: u32,
    lead_air: u64,
    trail_air: u64,
    cross: &'a [u64],
    auto: &'a [u64],
    lead_head: &'a [u32],
    lead_tail: &'a [u32],
    trail_head: &'a [u32],
}

impl SumsView<'_> {
    fn lags(&self) -> usize {
        self.cross.len()
    }

    /// [`CorrelationSums::overlap`].
    fn overlap(&self, tau: usize) -> u64 {
        self.frames
            .saturating_sub((self.windows as u64).saturating_mul(tau as u64))
    }

    /// These sums as a record keeps them.
    fn to_sums<const L: usize>(self) -> CorrelationSums<L> {
        fn vec<T: Copy, const L: usize>(s: &[T]) -> Vec<T, L> {
            let mut v = Vec::new();
            let _ = v.extend_from_slice(s.get(..s.len().min(L)).unwrap_or(&[]));
            v
        }
        CorrelationSums {
            frames: self.frames,
            windows: self.windows,
            lead_air: self.lead_air,
            trail_air: self.trail_air,
            cross: vec(self.cross),
            auto: vec(self.auto),
            lead_head: vec(self.lead_head),
            lead_tail: vec(self.lead_tail),
            trail_head: vec(self.trail_head),
        }
    }

    /// [`CorrelationSums::analyse`], with room for `L` lags (at least `lags()`).
    fn analyse<const L: usize>(&self, min_peak: f32) -> (CorrelationResult, Flags) {
        let lags = self.lags().min(L);
        let mut rab = [f32::NAN; L];
        let mut raa = [f32::NAN; L];
        self.fill(&mut rab, false, false);
        // The results need R_aa only up to its first zero crossing.
        self.fill(&mut raa, true, true);
        let rab = rab.get(..lags).unwrap_or(&[]);
        let raa = raa.get(..lags).unwrap_or(&[]);
        analyse_functions(rab, raa, min_peak)
    }

    /// One coefficient function (`auto`: R_aa, else R_ab) into `out`, chunk by chunk;
    /// with `stop_at_zero`, stop after the chunk in which it first falls to 0 or below (the
    /// rest of `out` is left as it is).
    fn fill(&self, out: &mut [f32], auto: bool, stop_at_zero: bool) {
        const CHUNK: usize = 16;
        const STOP_CHUNK: usize = 8;
        let lags = self.lags().min(out.len());
        let (prod, second, second_total) = if auto {
            (self.auto, self.lead_head, self.lead_air)
        } else {
            (self.cross, self.trail_head, self.trail_air)
        };
        // Windows of up to SMALL_N frames (every real window) take a 32-bit integer stage:
        // the same integers as the 64-bit one (see `pearson_parts_small`), without 64-bit
        // multiplications and conversions (library calls on a 32-bit core).
        let small = match (
            self.lead_tail.get(..lags),
            second.get(..lags),
            prod.get(..lags),
        ) {
            (Some(tail), Some(head), Some(prod))
                if self.frames <= SMALL_N as u64
                    && self.lead_air <= u32::MAX as u64
                    && second_total <= u32::MAX as u64 =>
            {
                Some((tail, head, prod))
            }
            _ => None,
        };
        // The overlap of the next lag in the 32-bit stage: `frames - windows * tau`,
        // saturating, one lag after the other (the same values as `overlap`).
        let mut n32 = self.frames as u32;
        // A 32-bit core has no vector unit for the chunked stages below, and spills their
        // state: one lag at a time instead (the same coefficients, bit for bit).
        if cfg!(target_pointer_width = "32") {
            if let Some(small) = small {
                self.fill_lag_by_lag(out, small, second_total, stop_at_zero);
                return;
            }
        }
        // Stopping at the first zero, short chunks: R_aa usually falls to 0 within a few
        // lags, and the lags after it are not needed.
        let chunk_len = if stop_at_zero { STOP_CHUNK } else { CHUNK };
        // The variance terms of a chunk (its numerators wait in `out`).
        let mut parts = [[0f32; CHUNK]; 2];
        let mut first = 0;
        while first < lags {
            let len = (lags - first).min(chunk_len);
            // Exact integer stage, lag by lag (the first `len` entries of `parts`).
            let [pa, pb] = &mut parts;
            let pn = out.get_mut(first..first + len).unwrap_or(&mut []);
            if let Some((tail, head, prod)) = small {
                let (lead_air, second_total) = (self.lead_air as u32, second_total as u32);
                let range = first..first + len;
                let ins = tail
                    .get(range.clone())
                    .unwrap_or(&[])
                    .iter()
                    .zip(head.get(range.clone()).unwrap_or(&[]))
                    .zip(prod.get(range).unwrap_or(&[]));
                let outs = pn.iter_mut().zip(pa.iter_mut()).zip(pb.iter_mut());
                for (((&t, &h), &sab), ((x, y), z)) in ins.zip(outs) {
                    // A `sab` beyond u32::MAX exceeds `min(sa, sb) <= n` either way.
                    (*x, *y, *z) = pearson_parts_masked(
                        n32,
                        lead_air.saturating_sub(t),
                        second_total.saturating_sub(h),
                        sab.min(u32::MAX as u64) as u32,
                    );
                    n32 = n32.saturating_sub(self.windows);
                }
            } else {
                for i in 0..len {
                    let tau = first + i;
                    let get32 = |c: &[u32]| c.get(tau).copied().unwrap_or(0) as u64;
                    let n = self.overlap(tau);
                    let sa = self.lead_air.saturating_sub(get32(self.lead_tail));
                    let sb = second_total.saturating_sub(get32(second));
                    let sab = prod.get(tau).copied().unwrap_or(0);
                    let (num, va, vb) =
                        pearson_parts(n, sa, sb, sab).unwrap_or((f32::NAN, f32::NAN, f32::NAN));
                    if let (Some(x), Some(y), Some(z)) =
                        (pn.get_mut(i), pa.get_mut(i), pb.get_mut(i))
                    {
                        (*x, *y, *z) = (num, va, vb);
                    }
                }
            }
            // Float stage over the chunk (each numerator replaced by its coefficient).
            let [pa, pb] = &parts;
            let chunk = out.get_mut(first..first + len).unwrap_or(&mut []);
            for (o, (&va, &vb)) in chunk.iter_mut().zip(pa.iter().zip(pb)) {
                *o = pearson_finish(*o, va, vb);
            }
            if stop_at_zero && chunk.iter().any(|&r| r <= 0.0) {
                return;
            }
            first += len;
        }
    }
}

impl SumsView<'_> {
    /// The 32-bit stage of [`fill`](Self::fill), one lag at a time: for each lag the same
    /// operations in the same order as the chunked stages, so the same coefficients bit
    /// for bit; with `stop_at_zero`, stop at the first lag at or below 0 (the lags after
    /// it are left as they are, which the chunked form fills to the end of its chunk:
    /// nothing reads them).
    fn fill_lag_by_lag(
        &self,
        out: &mut [f32],
        (tail, head, prod): (&[u32], &[u32], &[u64]),
        second_total: u64,
        stop_at_zero: bool,
    ) {
        let mut n32 = self.frames as u32;
        let (lead_air, second_total) = (self.lead_air as u32, second_total as u32);
        let ins = tail.iter().zip(head).zip(prod);
        for (((&t, &h), &sab), o) in ins.zip(out.iter_mut()) {
            let (num, va, vb) = pearson_parts_masked(
                n32,
                lead_air.saturating_sub(t),
                second_total.saturating_sub(h),
                sab.min(u32::MAX as u64) as u32,
            );
            n32 = n32.saturating_sub(self.windows);
            *o = pearson_finish(num, va, vb);
            if stop_at_zero && *o <= 0.0 {
                return;
            }
        }
    }
}

/// The derived results of one probe's correlation over one window (lags in frames).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct CorrelationResult {
    /// Largest lag computed, frames (the probe's `max_lag`, capped at the chain's `L - 1`).
    pub max_lag: u16,
    /// Lag of the cross-correlation peak, frames, refined below the sample (the transit
    /// time `T` is this over the sample rate; the velocity is tip spacing over `T`).
    pub peak_lag_frames: Option<f32>,
    /// Cross-correlation coefficient at the peak lag (the sampled maximum).
    pub peak_coefficient: Option<f32>,
    /// Second-highest local maximum over the highest (Keane and Adrian 1992); lower is
    /// better, 0 when there is no other peak.
    pub secondary_peak_ratio: Option<f32>,
    /// `T05`: lag at which the leading tip's auto-correlation falls to 0.5, frames.
    pub t05_frames: Option<f32>,
    /// `tau05`: half-width at half maximum of the cross-correlation peak, frames.
    pub tau05_frames: Option<f32>,
    /// `Tu = 0.851 sqrt(tau05^2 - T05^2) / T` (assumes Gaussian velocity fluctuations).
    pub turbulence_intensity: Option<f32>,
    /// Auto-correlation integral time scale (to the first zero crossing), frames.
    pub auto_integral_frames: Option<f32>,
    /// Cross-correlation integral time scale (from the peak to the next zero crossing),
    /// frames.
    pub cross_integral_frames: Option<f32>,
}

impl CorrelationResult {
    /// Transit time `T` between the tips, seconds, at `sample_rate_hz` frames per second.
    pub fn transit_time_s(&self, sample_rate_hz: f32) -> Option<f32> {
        let lag = self.peak_lag_frames.filter(|l| *l > 0.0 && l.is_finite())?;
        (sample_rate_hz > 0.0).then(|| lag / sample_rate_hz)
    }

    /// Interfacial velocity `V = spacing / T`, m/s, for tips `spacing_mm` apart. The one
    /// formula every consumer uses (device frames, host CSV), so they agree to the bit.
    pub fn velocity_m_s(&self, spacing_mm: f32, sample_rate_hz: f32) -> Option<f32> {
        let lag = self.peak_lag_frames.filter(|l| *l > 0.0 && l.is_finite())?;
        (spacing_mm > 0.0 && sample_rate_hz > 0.0).then(|| spacing_mm * 1e-3 * sample_rate_hz / lag)
    }

    /// No result: every value `None`.
    pub const fn none(max_lag: u16) -> Self {
        CorrelationResult {
            max_lag,
            peak_lag_frames: None,
            peak_coefficient: None,
            secondary_peak_ratio: None,
            t05_frames: None,
            tau05_frames: None,
            turbulence_intensity: None,
            auto_integral_frames: None,
            cross_integral_frames: None,
        }
    }
}

/// Pearson's coefficient of two binary sequences of `n` pairs with sums `sa`, `sb` and
/// product sum `sab`: the numerator `n sab - sa sb` and the variance terms `sa (n - sa)`,
/// `sb (n - sb)` exactly in integers (64-bit when they fit, else 128-bit: the same
/// integers either way), each rounded once to f32, then `r = num / sqrt(va vb)` through a
/// refined reciprocal square root.
pub fn pearson(n: u64, sa: u64, sb: u64, sab: u64) -> Option<f32> {
    let (num, va, vb) = pearson_parts(n, sa, sb, sab)?;
    let r = pearson_finish(num, va, vb);
    (!r.is_nan()).then_some(r)
}

/// The exact integer stage of [`pearson`], rounded to f32: numerator and the two
/// variance terms (`None` if the sums are inconsistent or overflow).
#[inline]
fn pearson_parts(n: u64, sa: u64, sb: u64, sab: u64) -> Option<(f32, f32, f32)> {
    if n < 2 || sa > n || sb > n || sab > sa.min(sb) {
        return None;
    }
    if n <= SMALL_N as u64 {
        // All four are at most n here.
        pearson_parts_small(n as u32, sa as u32, sb as u32, sab as u32)
    } else if n <= 1 << 31 {
        let (n, sa, sb, sab) = (n as i64, sa as i64, sb as i64, sab as i64);
        Some((
            (n * sab - sa * sb) as f32,
            (sa * (n - sa)) as f32,
            (sb * (n - sb)) as f32,
        ))
    } else {
        let (n, sa, sb, sab) = (n as i128, sa as i128, sb as i128, sab as i128);
        let num = n.checked_mul(sab)?.checked_sub(sa.checked_mul(sb)?)?;
        let (va, vb) = (sa.checked_mul(n - sa)?, sb.checked_mul(n - sb)?);
        Some((num as f32, va as f32, vb as f32))
    }
}

/// Longest overlap whose integer stage fits 32-bit arithmetic: `n^2 < 2^31`.
const SMALL_N: u32 = 46_340;

/// [`pearson_parts`] for `n <= SMALL_N`, in 32-bit integers: every product is below
/// `n^2 < 2^31`, so the integers are those of the 64-bit stage, and their rounding to f32
/// (a single instruction on a Cortex-M4F, a library call from 64 bits) is the same.
#[inline(always)]
fn pearson_parts_small(n: u32, sa: u32, sb: u32, sab: u32) -> Option<(f32, f32, f32)> {
    if !(2..=SMALL_N).contains(&n) || sa > n || sb > n || sab > sa.min(sb) {
        return None;
    }
    let (n, sa, sb, sab) = (n as i32, sa as i32, sb as i32, sab as i32);
    Some((
        n.wrapping_mul(sab).wrapping_sub(sa.wrapping_mul(sb)) as f32,
        sa.wrapping_mul(n - sa) as f32,
        sb.wrapping_mul(n - sb) as f32,
    ))
}

/// [`pearson_parts_small`] without branches, for a whole function: inconsistent sums give a
/// variance term of 0, so [`pearson_finish`] gives NaN for them, as for `None`.
#[inline(always)]
fn pearson_parts_masked(n: u32, sa: u32, sb: u32, sab: u32) -> (f32, f32, f32) {
    let ok = (2..=SMALL_N).contains(&n) & (sa <= n) & (sb <= n) & (sab <= sa.min(sb));
    let mask = (ok as i32).wrapping_neg();
    let (n, sa, sb, sab) = (n as i32, sa as i32, sb as i32, sab as i32);
    (
        n.wrapping_mul(sab).wrapping_sub(sa.wrapping_mul(sb)) as f32,
        (sa.wrapping_mul(n.wrapping_sub(sa)) & mask) as f32,
        sb.wrapping_mul(n.wrapping_sub(sb)) as f32,
    )
}

/// The float stage of [`pearson`] (NaN when a variance is zero): `num / sqrt(va vb)`, with
/// one reciprocal square root of the product when it is finite (always so for windows up to
/// 2^31 frames), else one per factor. Equal variances (always so at lag 0 of the
/// auto-correlation) take a plain division, so `R_aa(0)` is exactly 1.
#[inline(always)]
fn pearson_finish(num: f32, va: f32, vb: f32) -> f32 {
    let prod = va * vb;
    let r = if va == vb {
        num / va
    } else if prod.is_finite() {
        num * rsqrt(prod)
    } else {
        num * rsqrt(va) * rsqrt(vb)
    };
    if va > 0.0 && vb > 0.0 {
        r.clamp(-1.0, 1.0)
    } else {
        f32::NAN
    }
}

/// Reciprocal square root to full f32 precision: micromath's estimate (within 3.5 %)
/// refined by three Newton steps (multiplications only). Plain IEEE operations, so a
/// device and a host agree bit for bit.
#[inline]
fn rsqrt(x: f32) -> f32 {
    let mut y = F32Ext::invsqrt(x);
    // Three steps, written out (a loop of three is not unrolled at opt-level "s").
    y *= 1.5 - 0.5 * x * y * y;
    y *= 1.5 - 0.5 * x * y * y;
    y *= 1.5 - 0.5 * x * y * y;
    y
}

/// Square root to full f32 precision (0 for non-positive input), as `x / sqrt(x)`.
fn sqrt(x: f32) -> f32 {
    if x.is_nan() || x <= 0.0 {
        return 0.0;
    }
    x * rsqrt(x)
}

fn at(r: &[f32], i: usize) -> f32 {
    r.get(i).copied().unwrap_or(f32::NAN)
}

/// Where `r` first falls to `level` walking from `from` by `step` (+1 or -1), linearly
/// interpolated; `None` if it does not within the defined lags.
fn crossing(r: &[f32], from: usize, level: f32, right: bool) -> Option<f32> {
    let mut prev = at(r, from);
    let mut i = from;
    loop {
        let next = if right {
            i.checked_add(1).filter(|&j| j < r.len())?
        } else {
            i.checked_sub(1)?
        };
        let v = at(r, next);
        if v.is_nan() || prev.is_nan() {
            return None;
        }
        if v <= level {
            let frac = if prev > v {
                ((prev - level) / (prev - v)).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let base = i as f32;
            return Some(if right { base + frac } else { base - frac });
        }
        prev = v;
        i = next;
    }
}

/// Integral of `r` from lag `from` to its first zero crossing after it.
fn integral_to_zero(r: &[f32], from: usize) -> Option<f32> {
    let mut sum = 0.0f32;
    let mut prev = at(r, from);
    if prev.is_nan() || prev <= 0.0 {
        return None;
    }
    let mut i = from + 1;
    while i < r.len() {
        let v = at(r, i);
        if v.is_nan() {
            return None;
        }
        if v <= 0.0 {
            let frac = prev / (prev - v);
            return Some(sum + 0.5 * prev * frac);
        }
        sum += 0.5 * (prev + v);
        prev = v;
        i += 1;
    }
    None
}

/// The derived quantities from the coefficient functions (NaN = undefined lag).
fn analyse_functions(rab: &[f32], raa: &[f32], min_peak: f32) -> (CorrelationResult, Flags) {
    let lags = rab.len();
    let max_lag = lags.saturating_sub(1).min(u16::MAX as usize) as u16;
    let mut out = CorrelationResult::none(max_lag);
    let mut flags = Flags::NONE;

    // T05 and the auto integral scale need only the auto-correlation.
    out.t05_frames = crossing(raa, 0, 0.5, true);
    out.auto_integral_frames = integral_to_zero(raa, 0);

    let mut peak: Option<(usize, f32)> = None;
    for (i, &v) in rab.iter().enumerate() {
        if !v.is_nan() && peak.is_none_or(|(_, p)| v > p) {
            peak = Some((i, v));
        }
    }
    let Some((k, r0)) = peak else {
        flags |= Flags::NO_CORRELATION_PEAK | Flags::TU_UNDEFINED;
        return (out, flags);
    };
    out.peak_coefficient = Some(r0);
    flags.set_if(Flags::NO_CORRELATION_PEAK, r0 < min_peak);

    let (rm, rp) = (
        k.checked_sub(1).map_or(f32::NAN, |j| at(rab, j)),
        at(rab, k + 1),
    );
    let lag = if rm.is_nan() || rp.is_nan() {
        flags |= Flags::PEAK_AT_LAG_BOUNDARY;
        k as f32
    } else {
        let low = rm.min(rp);
        let delta = if r0 > low {
            ((rp - rm) / (2.0 * (r0 - low))).clamp(-0.5, 0.5)
        } else {
            0.0
        };
        k as f32 + delta
    };
    out.peak_lag_frames = Some(lag);

    let (x_left, x_right) = if r0 > 0.0 {
        (
            crossing(rab, k, 0.5 * r0, false),
            crossing(rab, k, 0.5 * r0, true),
        )
    } else {
        (None, None)
    };
    out.tau05_frames = match (x_left, x_right) {
        (Some(l), Some(r)) => Some(0.5 * (r - l)),
        (None, Some(r)) => Some(r - lag),
        _ => None,
    };

    if r0 > 0.0 {
        let lo = x_left.unwrap_or(-1.0);
        let hi = x_right.unwrap_or(lags as f32);
        let mut second = 0.0f32;
        for (i, &v) in rab.iter().enumerate() {
            let x = i as f32;
            if v.is_nan() || (x > lo && x < hi) {
                continue;
            }
            let left = i.checked_sub(1).map_or(f32::NAN, |j| at(rab, j));
            let right = at(rab, i + 1);
            let is_max = (left.is_nan() || v >= left) && (right.is_nan() || v >= right);
            if is_max && v > second {
                second = v;
            }
        }
        out.secondary_peak_ratio = Some((second / r0).min(1.0));
    }

    out.cross_integral_frames = integral_to_zero(rab, k);

    out.turbulence_intensity = match (out.tau05_frames, out.t05_frames) {
        (Some(w), Some(t05)) if lag > 0.0 && w >= t05 => {
            Some(0.851 * sqrt(w * w - t05 * t05) / lag)
        }
        _ => None,
    };
    flags.set_if(Flags::TU_UNDEFINED, out.turbulence_intensity.is_none());
    let index_only = match (out.turbulence_intensity, out.tau05_frames, out.t05_frames) {
        (Some(_), Some(w), Some(t05)) => w < TU_WIDTH_RATIO * t05,
        _ => false,
    };
    flags.set_if(Flags::TU_INDEX, index_only);
    (out, flags)
}

/// Add the ramp `c * ramp(tau - p)` to the second-difference array `d` over lags
/// `0..=max_lag` (see the module documentation).
/// (`d` holds two's-complement `i64` values in `u64` slots: the wrapping operations are
/// the same bit for bit.)
#[inline]
fn add_ramp(d: &mut [u64], max_lag: usize, p: i64, c: i64) {
    if p >= 0 {
        if p < max_lag as i64 {
            if let Some(x) = d.get_mut(p as usize + 1) {
                *x = x.wrapping_add(c as u64);
            }
        }
    } else {
        if let Some(x) = d.first_mut() {
            *x = x.wrapping_sub(c.wrapping_mul(p) as u64);
        }
        if let Some(x) = d.get_mut(1) {
            *x = x.wrapping_add(c.wrapping_mul(p.wrapping_add(1)) as u64);
        }
    }
}

/// The double prefix sum of the second differences `d` (two's-complement `i64` values),
/// in place, clamped at 0 (exact sums are never negative).
fn double_prefix_wide(d: &mut [u64]) {
    let (mut slope, mut value) = (0i64, 0i64);
    for x in d.iter_mut() {
        slope = slope.wrapping_add(*x as i64);
        value = value.wrapping_add(slope);
        *x = value.max(0) as u64;
    }
}

/// [`double_prefix_wide`] for a window of fewer than 2^31 frames, in 32-bit arithmetic:
/// the low 32 bits of a wrapping sum are the wrapping sum of the low 32 bits, and every
/// exact sum of such a window (a count of frame pairs) lies in `0..2^31`, so the 32-bit
/// sums are the sums. Where the 64-bit value would be negative or past 2^31 (only for
/// inconsistent input), this gives another clamped value; no window of the chain does.
/// Half the instructions on a 32-bit core.
fn double_prefix_short(d: &mut [u64]) {
    let (mut slope, mut value) = (0i32, 0i32);
    for x in d.iter_mut() {
        slope = slope.wrapping_add(*x as u32 as i32);
        value = value.wrapping_add(slope);
        *x = value.max(0) as u64;
    }
}

/// The double prefix sum of the second differences `d` (two's-complement `i32` values), in
/// place, clamped at 0 (exact sums are never negative: they count air frames among at
/// most `L <= 2^16` frames, so they fit an `i32` throughout).
fn double_prefix_narrow(d: &mut [u32]) {
    let (mut slope, mut value) = (0i32, 0i32);
    for x in d.iter_mut() {
        slope = slope.wrapping_add(*x as i32);
        value = value.wrapping_add(slope);
        *x = value.max(0) as u32;
    }
}

/// The last `L` edges of the leading tip, oldest first: `(t << 1) | rising`, `t` from the
/// window start.
#[derive(Clone, Debug)]
struct Ring<const L: usize> {
    edges: [u64; L],
    next: usize,
    len: usize,
}

impl<const L: usize> Ring<L> {
    fn clear(&mut self) {
        self.next = 0;
        self.len = 0;
    }

    fn push(&mut self, t: i64, rising: bool) {
        if let Some(slot) = self.edges.get_mut(self.next) {
            *slot = ((t.max(0) as u64) << 1) | rising as u64;
        }
        self.next = if self.next + 1 >= L { 0 } else { self.next + 1 };
        self.len = (self.len + 1).min(L);
    }

    /// Visit the edges `(t, e)`, newest first, until `f` returns false.
    #[inline]
    fn for_each_recent(&self, mut f: impl FnMut(i64, i64) -> bool) {
        let mut idx = self.next;
        for _ in 0..self.len {
            idx = if idx == 0 { L - 1 } else { idx - 1 };
            let Some(&v) = self.edges.get(idx) else { break };
            let e = if v & 1 == 1 { 1 } else { -1 };
            if !f((v >> 1) as i64, e) {
                break;
            }
        }
    }
}

/// The leading tip's edges of one run, waiting for the trailing tip's edges of the same
/// frames (see the [module documentation](self)): at most one per frame of a run of at
/// most [`MAX_RUN_FRAMES`] frames.
///
/// Only one correlator uses it at a time, from [`Correlator::begin_run`] to
/// [`Correlator::end_run`] (which merges what is left), so one buffer serves every
/// correlator of a chain: the chain lends it to each probe's correlator in turn, instead of
/// keeping 2 KiB per probe.
#[derive(Clone, Debug)]
pub struct RunBuffer {
    /// Offset from the run start, with [`RISING_BIT`].
    edges: [u16; MAX_RUN_FRAMES],
    len: usize,
    pos: usize,
    run_start: u64,
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
    fn begin(&mut self, first: u64) {
        self.len = 0;
        self.pos = 0;
        self.run_start = first;
    }

    /// Hold an edge of the current run; false if it does not fit (beyond the buffer, before
    /// the run, or too far into it).
    #[inline]
    fn hold(&mut self, edge: Edge) -> bool {
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

    /// The oldest held edge at or before absolute frame `upto`, taken out of the buffer.
    #[inline]
    fn take_upto(&mut self, upto: u64) -> Option<(u64, bool)> {
        let &v = self.edges.get(self.pos).filter(|_| self.pos < self.len)?;
        let frame = self.run_start.saturating_add((v & !RISING_BIT) as u64);
        if frame > upto {
            return None;
        }
        self.pos += 1;
        Some((frame, v & RISING_BIT != 0))
    }
}

/// Streaming correlation of one dual-tip probe, fed with the tips' interfaces.
///
/// Drive it as the chain does, either
/// - tip by tip: for each run of at most [`MAX_RUN_FRAMES`] frames,
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
    /// `i64` values; at a window close, in place, the sums themselves).
    cross: [u64; L],
    auto: [u64; L],
    /// Second differences of the air counts among the first frames of the window
    /// (two's-complement `i32` values; at a window close, the counts).
    lead_head: [u32; L],
    trail_head: [u32; L],
    ring: Ring<L>,
    lead_air: bool,
    trail_air: bool,
    /// Running `sum e` and `sum e t` over the merged edges of each tip.
    lead_e: i64,
    lead_q: i64,
    trail_e: i64,
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
        let sums = self.view(totals, &tail).to_sums();
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
        let mut tail = [0u32; L];
        let totals = self.settle(end, &mut tail);
        let (result, f) = self.view(totals, &tail).analyse::<L>(min_peak);
        *flags |= f;
        self.reopen(end, lead_air, trail_air, flags);
        result
    }

    /// The first half of a close: clip the intervals open at `end`, turn the second
    /// differences into the sums in place, and the leading tip's tail counts into `tail`.
    /// Returns `(frames, lead_air, trail_air, lags)`.
    fn settle(&mut self, end: u64, tail: &mut [u32; L]) -> (u64, u64, u64, usize) {
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
        // sum e t over a tip's edges is minus its air time.
        let lead_air = self.lead_q.wrapping_neg().max(0) as u64;
        let trail_air = self.trail_q.wrapping_neg().max(0) as u64;
        for d in [&mut self.cross, &mut self.auto] {
            let d = d.get_mut(..lags).unwrap_or(&mut []);
            if frames < 1 << 31 {
                double_prefix_short(d);
            } else {
                double_prefix_wide(d);
            }
        }
        for d in [&mut self.lead_head, &mut self.trail_head] {
            double_prefix_narrow(d.get_mut(..lags).unwrap_or(&mut []));
        }
        // Tail counts: an edge at t adds -e ramp(tau - (N - t)); the ring holds every edge
        // of the last max_lag frames (only ramps that start inside the lags: 0 <= p < m).
        let m = self.max_lag;
        self.ring.for_each_recent(|t, e| {
            let p = t_end.wrapping_sub(t);
            if p < 0 || p >= m as i64 {
                return p < 0;
            }
            if let Some(x) = tail.get_mut(p as usize + 1) {
                *x = x.wrapping_add((-e) as i32 as u32);
            }
            true
        });
        double_prefix_narrow(tail.get_mut(..lags).unwrap_or(&mut []));
        (frames, lead_air, trail_air, lags)
    }

    /// The sums of a settled window.
    fn view<'a>(&'a self, totals: (u64, u64, u64, usize), tail: &'a [u32]) -> SumsView<'a> {
        let (frames, lead_air, trail_air, lags) = totals;
        SumsView {
            frames,
            windows: 1,
            lead_air,
            trail_air,
            cross: self.cross.get(..lags).unwrap_or(&[]),
            auto: self.auto.get(..lags).unwrap_or(&[]),
            lead_head: self.lead_head.get(..lags).unwrap_or(&[]),
            lead_tail: tail.get(..lags).unwrap_or(&[]),
            trail_head: self.trail_head.get(..lags).unwrap_or(&[]),
        }
    }

    /// The second half of a close: flag lost edges and open the next window at `end`.
    fn reopen(&mut self, end: u64, lead_air: bool, trail_air: bool, flags: &mut Flags) {
        if self.overflow {
            *flags |= Flags::CORRELATION_OVERFLOW;
        }
        self.reset(end);
        self.open(end, lead_air, trail_air);
    }

    fn reset(&mut self, start: u64) {
        self.start = start;
        self.cross = [0; L];
        self.auto = [0; L];
        self.lead_head = [0; L];
        self.trail_head = [0; L];
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
        while let Some((frame, rising)) = buf.take_upto(upto) {
            let t = self.rel(frame);
            self.lead_edge(t, rising);
        }
        if buf.pos >= buf.len {
            // Everything merged: the whole buffer is free again.
            buf.len = 0;
            buf.pos = 0;
        }
    }

    /// A merged edge of the leading tip at window time `t`.
    fn lead_edge(&mut self, t: i64, rising: bool) {
        let e: i64 = if rising { 1 } else { -1 };
        let m = self.max_lag;
        // Auto, this edge second: earlier edges of the last max_lag frames, and itself.
        let auto = &mut self.auto;
        add_ramp(auto, m, 0, -1);
        self.ring.for_each_recent(|ti, ei| {
            let p = t.wrapping_sub(ti);
            if p >= m as i64 {
                return false;
            }
            add_ramp(auto, m, p, -ei * e);
            true
        });
        // Auto, this edge first, every earlier edge second (p < 0): a straight line.
        add_line(auto, t, e, self.lead_e, self.lead_q);
        // Cross, this edge first, every earlier trailing edge second.
        add_line(&mut self.cross, t, e, self.trail_e, self.trail_q);
        add_head(&mut self.lead_head, m, t, e);
        self.lead_e = self.lead_e.wrapping_add(e);
        self.lead_q = self.lead_q.wrapping_add(e.wrapping_mul(t));
        self.lead_air = rising;
        self.ring.push(t, rising);
    }

    /// An edge of the trailing tip at window time `t` (every leading edge up to `t` merged).
    fn trail_edge(&mut self, t: i64, rising: bool) {
        let e: i64 = if rising { 1 } else { -1 };
        let m = self.max_lag;
        let cross = &mut self.cross;
        self.ring.for_each_recent(|ti, ei| {
            let p = t.wrapping_sub(ti);
            if p >= m as i64 {
                return false;
            }
            add_ramp(cross, m, p, -ei * e);
            true
        });
        add_head(&mut self.trail_head, m, t, e);
        self.trail_e = self.trail_e.wrapping_add(e);
        self.trail_q = self.trail_q.wrapping_add(e.wrapping_mul(t));
        self.trail_air = rising;
    }
}

/// The pairs of an edge `(t, e)` (first factor) with all earlier edges of the other factor
/// (running sums `se = sum e_j`, `sq = sum e_j t_j`): `p = t_j - t < 0`, so each adds the
/// line `c (tau - p)`, `c = -e e_j`.
#[inline]
fn add_line(d: &mut [u64], t: i64, e: i64, se: i64, sq: i64) {
    // D[0] += sum -c p = e (sq - t se);  D[1] += sum c (1 + p) = -e (se (1 - t) + sq).
    // A tip's edges alternate, so `se` is 0 or 1 and `e` is +1 or -1: those products are
    // a choice or a negation (64-bit multiplications are several instructions on a 32-bit
    // core); any other value takes the multiplication. The same wrapping sums either way.
    let ts = match se {
        0 => 0,
        1 => t,
        _ => t.wrapping_mul(se),
    };
    let times_e = |v: i64| match e {
        1 => v,
        -1 => v.wrapping_neg(),
        _ => e.wrapping_mul(v),
    };
    if let Some(x) = d.first_mut() {
        *x = x.wrapping_add(times_e(sq.wrapping_sub(ts)) as u64);
    }
    if let Some(x) = d.get_mut(1) {
        // se (1 - t) = se - t se.
        let s = se.wrapping_sub(ts).wrapping_add(sq);
        *x = x.wrapping_sub(times_e(s) as u64);
    }
}

/// An edge `(t, e)` adds `e ramp(tau - t)` to the air count of the first `tau` frames.
#[inline]
fn add_head(d: &mut [u32], max_lag: usize, t: i64, e: i64) {
    if (0..max_lag as i64).contains(&t) {
        if let Some(x) = d.get_mut(t as usize + 1) {
            *x = x.wrapping_add(e as i32 as u32);
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
        let c = &mut *self.0;
        c.drain(self.1, edge.frame);
        let t = c.rel(edge.frame);
        c.trail_edge(t, edge.to_air);
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

#[cfg(test)]
mod tests {
    use super::*;

    /// Direct sums over samples (definition in the module documentation).
    fn direct(a: &[bool], b: &[bool], lags: usize) -> (std::vec::Vec<u64>, std::vec::Vec<u64>) {
        let n = a.len();
        let mut cross = std::vec![0u64; lags];
        let mut auto = std::vec![0u64; lags];
        for tau in 0..lags {
            for t in 0..n.saturating_sub(tau) {
                cross[tau] += (a[t] & b[t + tau]) as u64;
                auto[tau] += (a[t] & a[t + tau]) as u64;
            }
        }
        (cross, auto)
    }

    fn edges(x: &[bool], first: u64, start_air: bool) -> std::vec::Vec<Edge> {
        let mut out = std::vec::Vec::new();
        let mut prev = start_air;
        for (i, &v) in x.iter().enumerate() {
            if v != prev {
                out.push(Edge {
                    frame: first + i as u64,
                    to_air: v,
                });
            }
            prev = v;
        }
        out
    }

    extern crate std;

    /// The lag-by-lag stage a 32-bit core runs gives the chunked stage's coefficients, bit
    /// for bit (up to the first lag at or below 0 when stopping there): random binary
    /// signals of several void fractions and lengths, both functions.
    #[test]
    fn lag_by_lag_fill_equals_chunked_fill() {
        let mut x: u64 = 0x853C_49E6_748F_EA9B;
        let mut next = move || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x
        };
        for case in 0..60u64 {
            let n = 50 + (next() % 3000) as usize;
            let p_flip = 1 + next() % 40;
            let (mut a, mut b) = (std::vec::Vec::new(), std::vec::Vec::new());
            let (mut sa, mut sb) = (false, false);
            for _ in 0..n {
                sa ^= next() % 100 < p_flip;
                sb ^= next() % 100 < p_flip;
                a.push(sa);
                b.push(sb);
            }
            let mut c = Correlator::<64>::new((20 + case % 44) as u16, 0, false, false);
            let (ea, eb) = (edges(&a, 0, false), edges(&b, 0, false));
            let (mut i, mut j) = (0, 0);
            while i < ea.len() || j < eb.len() {
                if j >= eb.len() || (i < ea.len() && ea[i].frame <= eb[j].frame) {
                    c.lead_in_order().edge(ea[i]);
                    i += 1;
                } else {
                    c.trail_in_order().edge(eb[j]);
                    j += 1;
                }
            }
            let mut flags = Flags::NONE;
            let sums = c.close(n as u64, &mut flags);
            let v = sums.view();
            let lags = v.lags();
            for auto in [false, true] {
                for stop in [false, true] {
                    let (prod, second, total) = if auto {
                        (v.auto, v.lead_head, v.lead_air)
                    } else {
                        (v.cross, v.trail_head, v.trail_air)
                    };
                    let mut chunked = [f32::NAN; 64];
                    let mut single = [f32::NAN; 64];
                    v.fill(&mut chunked, auto, stop);
                    v.fill_lag_by_lag(
                        &mut single,
                        (&v.lead_tail[..lags], &second[..lags], &prod[..lags]),
                        total,
                        stop,
                    );
                    let upto = if stop {
                        chunked[..lags]
                            .iter()
                            .position(|&r| r <= 0.0)
                            .map_or(lags, |k| k + 1)
                    } else {
                        lags
                    };
                    for k in 0..upto {
                        assert_eq!(
                            chunked[k].to_bits(),
                            single[k].to_bits(),
                            "case {case} auto {auto} stop {stop} lag {k}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn sums_equal_direct_sums_on_a_small_case() {
        // A hand-made case with intervals open at both window edges.
        let a: std::vec::Vec<bool> = "1110011000111100000111011"
            .bytes()
            .map(|c| c == b'1')
            .collect();
        let b: std::vec::Vec<bool> = "1011100110001111000001110"
            .bytes()
            .map(|c| c == b'1')
            .collect();
        let mut c = Correlator::<8>::new(7, 100, true, true);
        let mut buf = RunBuffer::new();
        c.begin_run(100, &mut buf);
        for e in edges(&a, 100, true) {
            c.lead(&mut buf).edge(e);
        }
        for e in edges(&b, 100, true) {
            c.trail(&mut buf).edge(e);
        }
        c.end_run(&mut buf);
        let mut flags = Flags::NONE;
        let s = c.close(100 + a.len() as u64, &mut flags);
        let (cross, auto) = direct(&a, &b, 8);
        assert_eq!(s.cross.as_slice(), cross.as_slice());
        assert_eq!(s.auto.as_slice(), auto.as_slice());
        assert_eq!(s.lead_air, a.iter().filter(|&&x| x).count() as u64);
        assert_eq!(s.trail_air, b.iter().filter(|&&x| x).count() as u64);
        for tau in 0..8 {
            let n = a.len() - tau;
            let sa: u64 = a[..n].iter().map(|&x| x as u64).sum();
            let sb: u64 = b[tau..].iter().map(|&x| x as u64).sum();
            let sa2: u64 = a[tau..].iter().map(|&x| x as u64).sum();
            assert_eq!(s.lead_sum(tau), Some(sa), "tau {tau}");
            assert_eq!(s.trail_sum(tau), Some(sb), "tau {tau}");
            assert_eq!(s.lead_lagged_sum(tau), Some(sa2), "tau {tau}");
        }
        assert!(flags.is_empty());
    }

    #[test]
    fn sqrt_is_accurate() {
        for x in [1e-6f32, 0.5, 2.0, 3.0, 1e6, 1.234e20, 7.7e30] {
            let r = sqrt(x);
            assert!(((r * r - x) / x).abs() < 3e-7, "{x}: {r}");
        }
        assert_eq!(sqrt(0.0), 0.0);
        assert_eq!(sqrt(-1.0), 0.0);
    }
}

/// The published turbulence intensity `0.851 sqrt(tau05^2 - T05^2) / T` that Gaussian
/// velocity fluctuations of intensity 0, 0.025, ..., 0.6 produce, when the transit time is
/// `spacing / V` with `V ~ N(V0, (Tu V0)^2)`. The transit time is then skewed (slow bubbles
/// take much longer), its mode falls below `spacing / V0` and the published estimate reads
/// low: 0.32 for a true 0.4. Computed for this table from the exact transit-time density
/// `p(u) ~ exp(-(1/u - 1)^2 / (2 Tu^2)) / u^2` (an analytic case: mode and half-maximum
/// crossings found numerically on a fine grid).
const TU_PUBLISHED_OF_GAUSSIAN: [f32; 25] = [
    0.00000, 0.02502, 0.04990, 0.07447, 0.09861, 0.12217, 0.14504, 0.16711, 0.18831, 0.20857,
    0.22786, 0.24614, 0.26342, 0.27971, 0.29504, 0.30944, 0.32295, 0.33562, 0.34749, 0.35861,
    0.36904, 0.37882, 0.38799, 0.39660, 0.40469,
];
/// Step of the true intensity between entries of [`TU_PUBLISHED_OF_GAUSSIAN`].
const TU_TABLE_STEP: f32 = 0.025;

/// The turbulence intensity of Gaussian velocity fluctuations that would give the published
/// estimate `published` (inverts `TU_PUBLISHED_OF_GAUSSIAN` by linear interpolation).
/// Use it where fluctuations are large (above about 0.2 the published formula reads more
/// than 5 % low); `None` beyond the table (a published value above 0.405, true Tu > 0.6) or
/// for a negative or non-finite input.
pub fn tu_for_gaussian_velocity(published: f32) -> Option<f32> {
    if !published.is_finite() || published < 0.0 {
        return None;
    }
    let t = &TU_PUBLISHED_OF_GAUSSIAN;
    for i in 1..t.len() {
        if published <= t[i] {
            let frac = (published - t[i - 1]) / (t[i] - t[i - 1]);
            return Some(((i - 1) as f32 + frac) * TU_TABLE_STEP);
        }
    }
    None
}

#[cfg(test)]
mod tu_table_tests {
    use super::*;

    #[test]
    fn small_intensities_are_unchanged_and_large_ones_corrected() {
        // For small fluctuations the transit time is Gaussian too and the published formula
        // is exact (0.851 = 1/sqrt(2 ln 2) turns a half width into a standard deviation).
        let small = tu_for_gaussian_velocity(0.05).unwrap();
        assert!((small - 0.05).abs() < 0.001, "{small}");
        let big = tu_for_gaussian_velocity(0.32295).unwrap();
        assert!((big - 0.4).abs() < 1e-4, "{big}");
        assert_eq!(tu_for_gaussian_velocity(0.5), None);
        assert_eq!(tu_for_gaussian_velocity(f32::NAN), None);
        assert_eq!(tu_for_gaussian_velocity(-0.1), None);
    }
}
