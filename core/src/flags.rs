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

    /// Names of the flags, in bit order, as written into CSV files.
    pub const NAMES: [(Flags, &'static str); 6] = [
        (Flags::STUCK, "stuck"),
        (Flags::LEVELS_NOT_LEARNT, "levels_not_learnt"),
        (Flags::SATURATED, "saturated"),
        (Flags::SHORT_CHORDS, "short_chords"),
        (Flags::PARTIAL_WINDOW, "partial_window"),
        (Flags::TRAILING_STUCK, "trailing_stuck"),
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
