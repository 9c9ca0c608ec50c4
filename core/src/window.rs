//! Analysis-window policies: how the sample stream is cut into windows.

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
}

impl WindowPolicy {
    /// False for a zero-length policy.
    pub const fn is_valid(&self) -> bool {
        !matches!(self, WindowPolicy::Frames(0))
    }

    /// The end (exclusive frame index) of a window that starts at `start`, if the policy
    /// closes windows by itself.
    pub const fn end_of_window_from(&self, start: u64) -> Option<u64> {
        match *self {
            WindowPolicy::Whole => None,
            WindowPolicy::Frames(n) => Some(start + n as u64),
        }
    }
}
