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
use analysis::{
    analyse_functions, pearson_finish, pearson_parts, pearson_parts_masked, pearson_small, SMALL_N,
};
use heapless::Vec;

mod analysis;
mod correlator;
mod run_buffer;
mod tu_table;

pub use analysis::{pearson, CorrelationResult, TU_WIDTH_RATIO};
pub use correlator::{Correlator, LeadEdges, LeadInOrder, TrailEdges, TrailInOrder};
pub use run_buffer::RunBuffer;
pub use tu_table::tu_for_gaussian_velocity;

/// The chain's default number of lag slots `L`: lags `0..=255`.
pub const DEFAULT_LAGS: usize = 256;

/// Longest run of frames between [`Correlator::begin_run`] and [`Correlator::end_run`]
/// (the chain's runs are never longer): 1024 frames, or 128 on a 32-bit core, where the
/// buffer of a run's edges ([`RunBuffer`], two bytes a frame) is RAM a small device needs
/// elsewhere and blocks are short anyway. The records do not depend on it.
pub const MAX_RUN_FRAMES: usize = if cfg!(target_pointer_width = "32") {
    128
} else {
    1024
};

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
pub(super) struct SumsView<'a> {
    pub(super) frames: u64,
    pub(super) windows: u32,
    pub(super) lead_air: u64,
    pub(super) trail_air: u64,
    pub(super) cross: &'a [u64],
    pub(super) auto: &'a [u64],
    pub(super) lead_head: &'a [u32],
    pub(super) lead_tail: &'a [u32],
    pub(super) trail_head: &'a [u32],
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

    /// [`CorrelationSums::analyse`], with room for `L` lags (at least `lags()`).
    fn analyse<const L: usize>(&self, min_peak: f32) -> (CorrelationResult, Flags) {
        let lags = self.lags().min(L);
        // Zeros, not NaN: a zero fill is a memset, and every entry read is written first.
        let mut rab = [0f32; L];
        let mut raa = [0f32; L];
        let rab_len = self.fill(&mut rab, false, false);
        // The results need R_aa only up to its first zero crossing: the lags after the one
        // at which it stops are not passed on (T05 and the auto integral scale both stop
        // at or before that lag, so they read the same values as over all the lags).
        let raa_len = self.fill(&mut raa, true, true);
        let rab = rab.get(..rab_len.min(lags)).unwrap_or(&[]);
        let raa = raa.get(..raa_len.min(lags)).unwrap_or(&[]);
        analyse_functions(rab, raa, min_peak)
    }

    /// One coefficient function (`auto`: R_aa, else R_ab) into `out`, chunk by chunk;
    /// with `stop_at_zero`, stop after the chunk in which it first falls to 0 or below (the
    /// rest of `out` is left as it is). Returns the number of lags written.
    fn fill(&self, out: &mut [f32], auto: bool, stop_at_zero: bool) -> usize {
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
                return self.fill_lag_by_lag(out, small, second_total, stop_at_zero);
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
            first += len;
            if stop_at_zero && chunk.iter().any(|&r| r <= 0.0) {
                return first;
            }
        }
        lags
    }
}

impl SumsView<'_> {
    /// The 32-bit stage of [`fill`](Self::fill), one lag at a time: for each lag the same
    /// operations in the same order as the chunked stages, so the same coefficients bit
    /// for bit; with `stop_at_zero`, stop at the first lag at or below 0 (the lags after
    /// it are left as they are, which the chunked form fills to the end of its chunk:
    /// nothing reads them). Returns the number of lags written.
    fn fill_lag_by_lag(
        &self,
        out: &mut [f32],
        (tail, head, prod): (&[u32], &[u32], &[u64]),
        second_total: u64,
        stop_at_zero: bool,
    ) -> usize {
        let mut n32 = self.frames as u32;
        let (lead_air, second_total) = (self.lead_air as u32, second_total as u32);
        let ins = tail.iter().zip(head).zip(prod);
        let mut written = 0;
        for (((&t, &h), &sab), o) in ins.zip(out.iter_mut()) {
            *o = pearson_small(
                n32,
                lead_air.saturating_sub(t),
                second_total.saturating_sub(h),
                sab.min(u32::MAX as u64) as u32,
            );
            n32 = n32.saturating_sub(self.windows);
            written += 1;
            if stop_at_zero && *o <= 0.0 {
                break;
            }
        }
        written
    }
}

#[cfg(test)]
mod tests;
