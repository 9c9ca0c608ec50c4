//! Quality flags attached to every window record.
//!
//! A flag says a number in the record should be read with care, or could not be computed.
//! Bits are stable: they travel on the wire and into CSV files.

/// A set of quality flags (a bit set; see the associated constants).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
pub struct Flags(pub u32);

impl Flags {
    /// No flag raised.
    pub const NONE: Flags = Flags(0);
    /// The tip saw no interface in the window: it sat in one phase (dead, dry or drowned tip).
    pub const STUCK: Flags = Flags(1 << 0);
    /// Part of the window ran before the air/water levels were learnt; phases there were held.
    pub const LEVELS_NOT_LEARNT: Flags = Flags(1 << 1);
    /// Some samples sat at an ADC rail (saturated front end).
    pub const SATURATED: Flags = Flags(1 << 2);
    /// At least a tenth of the chords were shorter than [`SHORT_CHORD_FRAMES`] samples:
    /// the sampling rate is too slow for these bubbles.
    pub const SHORT_CHORDS: Flags = Flags(1 << 3);
    /// The window is shorter than its policy asked for (the record ended inside it).
    pub const PARTIAL_WINDOW: Flags = Flags(1 << 4);
    /// The trailing tip (if any) saw no interface in the window.
    pub const TRAILING_STUCK: Flags = Flags(1 << 5);
    /// Dual-tip correlation: no lag has a cross-correlation coefficient at or above
    /// [`DetectorConfig::min_peak_coefficient`](crate::DetectorConfig::min_peak_coefficient)
    /// (or none could be computed: a tip sat in one phase). The peak lag, hence the
    /// velocity, is not to be trusted.
    pub const NO_CORRELATION_PEAK: Flags = Flags(1 << 6);
    /// Dual-tip correlation: the highest coefficient lies at lag 0 or at the largest lag:
    /// the true peak may lie outside the lag range (raise `max_lag`), and the lag is not
    /// interpolated.
    pub const PEAK_AT_LAG_BOUNDARY: Flags = Flags(1 << 7);
    /// Dual-tip correlation: a tip closed fewer than
    /// [`DetectorConfig::min_bubbles`](crate::DetectorConfig::min_bubbles) bubbles in the
    /// window; the correlation is statistically weak.
    pub const FEW_BUBBLES: Flags = Flags(1 << 8);
    /// Dual-tip correlation: the turbulence intensity is undefined, because the
    /// cross-correlation half-width tau05 is below the auto-correlation half-time T05, or
    /// one of tau05, T05 or a positive peak lag is missing.
    pub const TU_UNDEFINED: Flags = Flags(1 << 9);
    /// Dual-tip correlation: some interfaces could not be paired, so the correlation sums
    /// are incomplete. The chain sizes its buffers so that this cannot happen; it is raised
    /// only when a [`Correlator`](crate::Correlator) is driven directly with runs longer
    /// than [`MAX_RUN_FRAMES`](crate::correlation::MAX_RUN_FRAMES).
    pub const CORRELATION_OVERFLOW: Flags = Flags(1 << 10);
    /// Transient flows ([`WindowPolicy::AfterFront`](crate::WindowPolicy::AfterFront)): the
    /// record covers the time before the station's front arrival (from the start of the
    /// record to the arrival, or to the end of a record the front never reached). The tips
    /// sat in the phase before the front; its statistics describe the dry (or wet) tips.
    pub const PRE_FRONT: Flags = Flags(1 << 11);
    /// Transient flows: the first window after the front starts later than the arrival,
    /// because the arrival was confirmed more than the chain's delay line after it happened
    /// (see [`crate::station`]); `since_front` of the window says by how much.
    pub const LATE_FRONT_START: Flags = Flags(1 << 12);
    /// The capture stopped abruptly inside or at the end of this window (a data chunk cut
    /// short, or a header its recorder never finished): the window may hold less than the
    /// flow gave, and nothing after it was recorded. Raised by the reader of the capture,
    /// never by the chain.
    pub const CAPTURE_CUT: Flags = Flags(1 << 13);
    /// Dual-tip correlation: Tu is defined but only an index of the turbulence, not a
    /// measure of it: the chord time scale (the auto-correlation half-time T05) is not short
    /// next to the transit-time spread, i.e. the cross-correlation half-width tau05 is below
    /// [`TU_WIDTH_RATIO`](crate::correlation::TU_WIDTH_RATIO) times T05 (see
    /// [`crate::correlation`], where the rule is derived).
    pub const TU_INDEX: Flags = Flags(1 << 14);

    /// Names of the flags, in bit order, as written into CSV files.
    pub const NAMES: [(Flags, &'static str); 15] = [
        (Flags::STUCK, "stuck"),
        (Flags::LEVELS_NOT_LEARNT, "levels_not_learnt"),
        (Flags::SATURATED, "saturated"),
        (Flags::SHORT_CHORDS, "short_chords"),
        (Flags::PARTIAL_WINDOW, "partial_window"),
        (Flags::TRAILING_STUCK, "trailing_stuck"),
        (Flags::NO_CORRELATION_PEAK, "no_correlation_peak"),
        (Flags::PEAK_AT_LAG_BOUNDARY, "peak_at_lag_boundary"),
        (Flags::FEW_BUBBLES, "few_bubbles"),
        (Flags::TU_UNDEFINED, "tu_undefined"),
        (Flags::CORRELATION_OVERFLOW, "correlation_overflow"),
        (Flags::PRE_FRONT, "pre_front"),
        (Flags::LATE_FRONT_START, "late_front_start"),
        (Flags::CAPTURE_CUT, "capture_cut"),
        (Flags::TU_INDEX, "tu_index"),
    ];

    /// True if every bit of `other` is set in `self`.
    pub const fn contains(self, other: Flags) -> bool {
        self.0 & other.0 == other.0
    }

    /// True if no flag is set.
    pub const fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// Set the bits of `other` when `condition` holds.
    pub fn set_if(&mut self, other: Flags, condition: bool) {
        if condition {
            self.0 |= other.0;
        }
    }

    /// Iterate over the names of the flags that are set.
    pub fn names(self) -> impl Iterator<Item = &'static str> {
        Flags::NAMES
            .into_iter()
            .filter(move |(f, _)| self.contains(*f))
            .map(|(_, n)| n)
    }
}

impl core::ops::BitOr for Flags {
    type Output = Flags;
    fn bitor(self, rhs: Flags) -> Flags {
        Flags(self.0 | rhs.0)
    }
}

impl core::ops::BitOrAssign for Flags {
    fn bitor_assign(&mut self, rhs: Flags) {
        self.0 |= rhs.0;
    }
}

/// Chords shorter than this many samples are "short" (barely resolved by the sampling).
pub const SHORT_CHORD_FRAMES: u32 = 3;
