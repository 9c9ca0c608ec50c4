//! Analysis-window policies: how the sample stream is cut into windows.
//!
//! Every window of a chain is shared by all its probes (one record per probe per window,
//! with the same start and end frames), and every window end is a property of the samples,
//! never of how they were pushed:
//! - [`WindowPolicy::Whole`] and [`WindowPolicy::Frames`] end at frame indices known in
//!   advance;
//! - [`WindowPolicy::Bubbles`] is adaptive: the window ends right after the frame at which
//!   the leading tip of a reference probe closes its `count`-th bubble of the window (the
//!   frame of that air -> water interface is the window's last frame, so the reference tip's
//!   record holds exactly `count` bubbles). A window therefore spans about the same number
//!   of bubbles in dense and in sparse flow, which keeps the statistical weight of the
//!   correlation results steady along a transient (a surge front, a decaying bore). The
//!   other probes of the chain are cut at the same frames (one chain-wide window; windows of
//!   different ends per probe would break the shared-window records). `max_frames` caps a
//!   window whose reference tip stops seeing bubbles.
//! - [`WindowPolicy::AfterFront`] counts windows from the arrival of a surge front at the
//!   chain's station (transient flows; needs a [`crate::station::StationConfig`]): one
//!   pre-front record from the start of the record to the arrival (flagged
//!   [`Flags::PRE_FRONT`](crate::Flags::PRE_FRONT)), then consecutive windows of `frames`
//!   frames, the first one starting exactly at the arrival frame. The arrival is confirmed
//!   some frames after it happened; the chain's delay line (see [`crate::station`]) lets
//!   the statistics start at the arrival all the same.
//! - [`WindowPolicy::Bubbles`] in a chain with a station is front-relative as well: the same
//!   pre-front record, then bubble-count windows, the first one starting at the arrival
//!   frame (a bubble-count window straddling the front would mix the dry tips with the most
//!   aerated part of the flow).

/// How the chain cuts the stream into analysis windows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
#[non_exhaustive]
pub enum WindowPolicy {
    /// One window over the whole record, closed by [`crate::Chain::finish`].
    Whole,
    /// Consecutive windows of this many frames, aligned on frame 0.
    Frames(u32),
    /// Adaptive windows that each hold `count` bubbles of the reference probe's leading tip
    /// (bubbles counted at their closing air -> water interface, as in
    /// [`crate::TipStats::bubbles`]); see the module documentation.
    Bubbles {
        /// Bubbles per window (at least 1).
        count: u32,
        /// Index of the reference probe in the configuration.
        probe: u8,
        /// Longest window, frames (`None`: no cap). A capped window holds fewer bubbles.
        max_frames: Option<u32>,
    },
    /// Windows of `frames` frames counted from the station's front arrival, after one
    /// pre-front record (see the module documentation). The chain must have a station
    /// configuration ([`crate::ChainConfig::station`]).
    AfterFront {
        /// Window length, frames (at least 1).
        frames: u32,
    },
}

impl WindowPolicy {
    /// False for a zero-length policy.
    pub const fn is_valid(&self) -> bool {
        match *self {
            WindowPolicy::Whole => true,
            WindowPolicy::Frames(n) => n > 0,
            WindowPolicy::Bubbles {
                count, max_frames, ..
            } => count > 0 && !matches!(max_frames, Some(0)),
            WindowPolicy::AfterFront { frames } => frames > 0,
        }
    }

    /// The end (exclusive frame index) of a window that starts at `start`, if known in
    /// advance: the fixed length, or the cap of a bubble-count window (which may close
    /// earlier). For [`WindowPolicy::AfterFront`] this is the end of a window after the
    /// front (the chain ends the pre-front record at the arrival itself).
    pub const fn end_of_window_from(&self, start: u64) -> Option<u64> {
        match *self {
            WindowPolicy::Whole => None,
            WindowPolicy::Frames(n) | WindowPolicy::AfterFront { frames: n } => {
                Some(start.saturating_add(n as u64))
            }
            WindowPolicy::Bubbles {
                max_frames: Some(n),
                ..
            } => Some(start.saturating_add(n as u64)),
            WindowPolicy::Bubbles { .. } => None,
        }
    }

    /// True if a chain with a station (`station`: [`crate::ChainConfig::station`] is set)
    /// counts this policy's windows from the front arrival, after one pre-front record:
    /// [`WindowPolicy::AfterFront`], and [`WindowPolicy::Bubbles`] with a station (the
    /// first bubble-count window starts at the arrival, as the first fixed one does).
    pub const fn counts_from_front(&self, station: bool) -> bool {
        match self {
            WindowPolicy::AfterFront { .. } => true,
            WindowPolicy::Bubbles { .. } => station,
            _ => false,
        }
    }

    /// True if the policy closes windows by itself (everything but [`WindowPolicy::Whole`]):
    /// a window still open when the record ends is then flagged partial.
    pub const fn closes_by_itself(&self) -> bool {
        !matches!(self, WindowPolicy::Whole)
    }
}
