//! The frame types: header, kinds, and one body type per kind.
//!
//! Every field is an integer in a fixed-point unit (see [`crate::wire::quant`]); there is no
//! float on the wire. Field order is the wire order: postcard writes struct fields one after
//! the other with no tags, so **never reorder or insert fields** without bumping
//! [`PROTOCOL_VERSION`]. Integers wider than a byte are
//! varints (LEB128, signed ones zigzagged), `Option` is a 0/1 byte then the value, a
//! heapless `Vec` or `String` is a varint length then the elements or UTF-8 bytes.
//!
//! The kind of a frame is not postcard's variant index of [`Body`]: it is an explicit
//! one-byte code in the [`Header`] ([`Kind`], discriminants fixed forever), and the payload
//! after the header is the body struct of that kind alone. So reordering the variants of
//! [`Body`] in the source cannot change the wire, and a decoder that meets a code it does
//! not know can still read the header (to count the frame in its sequence tracking) and
//! skip the body. Every code is below 0x80, so the byte also reads as a one-byte varint.
//! The small data-carrying enums inside bodies ([`WindowSetting`]) *are* encoded by
//! postcard's variant index (a varint, in declaration order): their variants may only be
//! appended.

use crate::wire::tip_health::TipHealth;
use crate::wire::{LABEL_BYTES, MAX_PROBES, MAX_WINDOWS_PER_FRAME, PROTOCOL_VERSION};
use heapless::{String, Vec};
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

/// The header at the start of every payload. Its layout is frozen across protocol versions.
///
/// Wire order: `version: u8`, `device: u16 varint`, `kind: u8`, `seq: u16 varint`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Header {
    /// Protocol version ([`PROTOCOL_VERSION`] for frames this crate writes).
    pub version: u8,
    /// The sending device (a host uses its own id for commands).
    pub device: u16,
    /// The frame kind, a [`Kind`] code (kept raw so unknown kinds can be reported).
    pub kind: u8,
    /// Sequence number, per sender, wrapping from 65535 to 0; +1 for every frame sent.
    pub seq: u16,
}

impl MaxSize for Header {
    // u8 + u16 varint (3) + u8 + u16 varint (3).
    const POSTCARD_MAX_SIZE: usize = 1 + 3 + 1 + 3;
}

impl Header {
    /// The kind, if this build knows the code.
    pub const fn kind(&self) -> Option<Kind> {
        Kind::from_code(self.kind)
    }
}

/// The kind of a frame: an explicit, stable one-byte code.
///
/// Device -> host results are 0x01..=0x1F, host -> device commands 0x20..=0x2F,
/// device -> host replies to commands 0x30..=0x3F. Codes are never reused.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
#[non_exhaustive]
pub enum Kind {
    /// [`DeviceDescription`]: firmware, sample rate, probe layout.
    Describe = 0x01,
    /// [`Windows`]: one or more per-probe window results.
    Windows = 0x02,
    /// [`FrontArrival`]: a front reached a probe.
    Front = 0x03,
    /// [`ProfileFit`]: a fitted void-fraction profile of one station over one time slice.
    Profile = 0x04,
    /// [`Health`]: cumulative device health counters.
    Health = 0x05,
    /// [`RunStart`]: a run began (its number, label, start on the device clock, host UTC).
    RunStart = 0x06,
    /// [`LogChunk`]: bytes of the device's field log region, answering a ReadLog.
    LogChunk = 0x07,
    /// [`DerivedBatch`](crate::wire::DerivedBatch): derived figures of window results.
    Derived = 0x08,
    /// [`TipHealth`]: per tip, the levels in use, interfaces and void fraction of its
    /// latest window.
    TipHealth = 0x09,
    /// [`LevelsInUse`](crate::wire::LevelsInUse): every tip's levels now, fixed or learnt
    /// (after each description, SetLevels and Relearn).
    Levels = 0x0A,
    /// [`FullWindows`](crate::wire::FullWindows): window results with the figures kind
    /// 0x02 leaves out (after a SetExtras).
    FullWindows = 0x0B,
    /// [`DeviceStatus`](crate::wire::DeviceStatus): supply voltage, time since power-up,
    /// the field logger's state (with every health frame).
    DeviceStatus = 0x0C,
    /// Command [`StartRun`].
    StartRun = 0x20,
    /// Command: stop the run (no body).
    StopRun = 0x21,
    /// Command [`WindowSetting`]: set the window policy.
    SetWindow = 0x22,
    /// Command [`Relearn`]: re-learn the air/water levels.
    Relearn = 0x23,
    /// Command: send a [`DeviceDescription`] (no body).
    DescribeRequest = 0x24,
    /// Command [`SetClock`]: set the device's UTC clock.
    SetClock = 0x25,
    /// Command [`SetLevels`]: fix the air and water levels of one tip.
    SetLevels = 0x26,
    /// Command [`ReadLog`]: send a chunk of the field log region.
    ReadLog = 0x27,
    /// Command [`SetExtras`]: send window results as full windows (kind 0x0B), or not.
    SetExtras = 0x28,
    /// Reply [`Ack`]: a command was carried out.
    Ack = 0x30,
    /// Reply [`Nack`]: a command was refused.
    Nack = 0x31,
}

impl Kind {
    /// Every kind, in code order.
    pub const ALL: [Kind; 23] = [
        Kind::Describe,
        Kind::Windows,
        Kind::Front,
        Kind::Profile,
        Kind::Health,
        Kind::RunStart,
        Kind::LogChunk,
        Kind::Derived,
        Kind::TipHealth,
        Kind::Levels,
        Kind::FullWindows,
        Kind::DeviceStatus,
        Kind::StartRun,
        Kind::StopRun,
        Kind::SetWindow,
        Kind::Relearn,
        Kind::DescribeRequest,
        Kind::SetClock,
        Kind::SetLevels,
        Kind::ReadLog,
        Kind::SetExtras,
        Kind::Ack,
        Kind::Nack,
    ];

    /// The code on the wire.
    pub const fn code(self) -> u8 {
        self as u8
    }

    /// The kind of a code, if known.
    pub const fn from_code(code: u8) -> Option<Kind> {
        Some(match code {
            0x01 => Kind::Describe,
            0x02 => Kind::Windows,
            0x03 => Kind::Front,
            0x04 => Kind::Profile,
            0x05 => Kind::Health,
            0x06 => Kind::RunStart,
            0x07 => Kind::LogChunk,
            0x08 => Kind::Derived,
            0x09 => Kind::TipHealth,
            0x0A => Kind::Levels,
            0x0B => Kind::FullWindows,
            0x0C => Kind::DeviceStatus,
            0x20 => Kind::StartRun,
            0x21 => Kind::StopRun,
            0x22 => Kind::SetWindow,
            0x23 => Kind::Relearn,
            0x24 => Kind::DescribeRequest,
            0x25 => Kind::SetClock,
            0x26 => Kind::SetLevels,
            0x27 => Kind::ReadLog,
            0x28 => Kind::SetExtras,
            0x30 => Kind::Ack,
            0x31 => Kind::Nack,
            _ => return None,
        })
    }

    /// Codes set aside for kinds specified but not implemented by this build: none (0x07,
    /// 0x25, 0x26 and 0x27, set aside by the first version-2 text, are implemented).
    pub const RESERVED: [u8; 0] = [];

    /// True for the kinds a device sends (results and replies).
    pub const fn is_from_device(self) -> bool {
        !matches!(
            self,
            Kind::StartRun
                | Kind::StopRun
                | Kind::SetWindow
                | Kind::Relearn
                | Kind::DescribeRequest
                | Kind::SetClock
                | Kind::SetLevels
                | Kind::ReadLog
        )
    }
}

/// One frame: who sent it, its sequence number, and what it says.
#[derive(Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Frame {
    /// The sending device.
    pub device: u16,
    /// The sender's sequence number.
    pub seq: u16,
    /// The content; its kind goes into the header.
    pub body: Body,
}

impl Frame {
    /// The header this frame is written with (always the current protocol version).
    pub const fn header(&self) -> Header {
        Header {
            version: PROTOCOL_VERSION,
            device: self.device,
            kind: self.body.kind().code(),
            seq: self.seq,
        }
    }
}

/// The content of a frame, one variant per [`Kind`].
// The variants are as large as their fixed-capacity containers: without alloc there is
// nothing to box, and a body is built once and moved, so the size is the price of no heap.
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Body {
    /// Device description.
    Describe(DeviceDescription),
    /// Per-probe window results (1 to [`MAX_WINDOWS_PER_FRAME`]).
    Windows(Windows),
    /// A front arrival.
    Front(FrontArrival),
    /// A profile fit.
    Profile(ProfileFit),
    /// Health counters.
    Health(Health),
    /// A run began.
    RunStart(RunStart),
    /// A chunk of the field log region.
    LogChunk(LogChunk),
    /// Derived figures of window results (1 to [`MAX_WINDOWS_PER_FRAME`]).
    Derived(crate::wire::DerivedBatch),
    /// Tip health of some probes.
    TipHealth(TipHealth),
    /// The levels every tip uses now.
    Levels(crate::wire::LevelsInUse),
    /// Window results with their extras (1 to
    /// [`MAX_FULL_WINDOWS_PER_FRAME`](crate::wire::MAX_FULL_WINDOWS_PER_FRAME)).
    FullWindows(crate::wire::FullWindows),
    /// Supply voltage, time since power-up, logger state.
    DeviceStatus(crate::wire::DeviceStatus),
    /// Command: start a run.
    StartRun(StartRun),
    /// Command: stop the run.
    StopRun,
    /// Command: set the window policy.
    SetWindow(WindowSetting),
    /// Command: re-learn levels.
    Relearn(Relearn),
    /// Command: describe yourself.
    DescribeRequest,
    /// Command: set the device's UTC clock.
    SetClock(SetClock),
    /// Command: fix one tip's levels.
    SetLevels(SetLevels),
    /// Command: read a chunk of the field log region.
    ReadLog(ReadLog),
    /// Command: full windows on or off.
    SetExtras(SetExtras),
    /// Reply: command done.
    Ack(Ack),
    /// Reply: command refused.
    Nack(Nack),
}

impl Body {
    /// The kind of this body.
    pub const fn kind(&self) -> Kind {
        match self {
            Body::Describe(_) => Kind::Describe,
            Body::Windows(_) => Kind::Windows,
            Body::Front(_) => Kind::Front,
            Body::Profile(_) => Kind::Profile,
            Body::Health(_) => Kind::Health,
            Body::RunStart(_) => Kind::RunStart,
            Body::LogChunk(_) => Kind::LogChunk,
            Body::Derived(_) => Kind::Derived,
            Body::TipHealth(_) => Kind::TipHealth,
            Body::Levels(_) => Kind::Levels,
            Body::FullWindows(_) => Kind::FullWindows,
            Body::DeviceStatus(_) => Kind::DeviceStatus,
            Body::StartRun(_) => Kind::StartRun,
            Body::StopRun => Kind::StopRun,
            Body::SetWindow(_) => Kind::SetWindow,
            Body::Relearn(_) => Kind::Relearn,
            Body::DescribeRequest => Kind::DescribeRequest,
            Body::SetClock(_) => Kind::SetClock,
            Body::SetLevels(_) => Kind::SetLevels,
            Body::ReadLog(_) => Kind::ReadLog,
            Body::SetExtras(_) => Kind::SetExtras,
            Body::Ack(_) => Kind::Ack,
            Body::Nack(_) => Kind::Nack,
        }
    }

    /// A body of one window result.
    pub fn window(result: WindowResult) -> Body {
        let mut v = Windows::new();
        // Cannot fail: capacity is at least one.
        let _ = v.push(result);
        Body::Windows(v)
    }
}

// ----------------------------------- Device -> host ------------------------------------

/// Kind 0x01: what the device is and how its probes sit.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DeviceDescription {
    /// Firmware version, UTF-8, at most [`LABEL_BYTES`] bytes.
    pub firmware: String<LABEL_BYTES>,
    /// Per-channel sample rate (frames per second), millihertz.
    pub sample_rate_millihz: u32,
    /// Interleaved channels per frame.
    pub channels: u8,
    /// The window policy in force.
    pub window: WindowSetting,
    /// The probes, in configuration order (the index is the `probe` of other frames).
    pub probes: Vec<ProbeLayout, MAX_PROBES>,
}

/// Where one probe sits and which channels it reads.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ProbeLayout {
    /// Station index (probes at one streamwise position share it).
    pub station: u8,
    /// Channel of the leading tip.
    pub leading: u8,
    /// The trailing tip, for a dual-tip probe.
    pub trailing: Option<TrailingTip>,
    /// Tip elevation above the bed, 0.1 mm (signed).
    pub elevation: i32,
    /// Streamwise position, 0.1 mm (signed).
    pub x: i32,
}

/// The trailing tip of a dual-tip probe.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrailingTip {
    /// Channel of the trailing tip.
    pub channel: u8,
    /// Streamwise leading -> trailing tip spacing, 0.01 mm.
    pub spacing: u16,
}

/// Kind 0x02 body: 1 to [`MAX_WINDOWS_PER_FRAME`] per-probe window results.
pub type Windows = Vec<WindowResult, MAX_WINDOWS_PER_FRAME>;

/// One probe over one analysis window.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WindowResult {
    /// Probe index (see [`DeviceDescription::probes`]).
    pub probe: u8,
    /// First frame (sample-clock index since the run started) of the window.
    pub start: u64,
    /// Window length, frames.
    pub frames: u32,
    /// Void fraction, 1e-4 (0..=10000).
    pub void_fraction: u16,
    /// Bubble count rate, 0.01 Hz (saturating).
    pub bubble_rate: u32,
    /// Bubbles closed in the window.
    pub bubbles: u32,
    /// Bubble chord times, absent when no bubble of known length closed in the window.
    pub chords: Option<ChordTimes>,
    /// Pair-correlation results, absent for a single-tip probe or a failed correlation.
    pub correlation: Option<Correlation>,
    /// Quality flags ([`crate::Flags`] bits).
    pub flags: u32,
}

/// Bubble chord times of one window, microseconds (saturating).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChordTimes {
    /// Mean chord, µs.
    pub mean: u32,
    /// Median chord, µs.
    pub median: u32,
    /// 10th percentile, µs.
    pub p10: u32,
    /// 90th percentile, µs.
    pub p90: u32,
}

/// Leading x trailing tip cross-correlation of one window.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Correlation {
    /// Interfacial velocity, mm/s (signed: a negative lag gives a negative velocity).
    pub velocity: i16,
    /// Peak correlation coefficient, 1e-4 (0..=10000).
    pub peak: u16,
    /// Turbulence intensity, 1e-4, when the correlation widths allowed it.
    pub turbulence: Option<u16>,
}

/// Kind 0x03: the front reached a probe.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FrontArrival {
    /// Probe index.
    pub probe: u8,
    /// Station index.
    pub station: u8,
    /// Arrival frame (sample-clock index).
    pub frame: u64,
}

/// Kind 0x04: the fitted void-fraction profile of a station over one time slice.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ProfileFit {
    /// Station index.
    pub station: u8,
    /// First frame of the slice.
    pub slice_start: u64,
    /// Slice length, frames.
    pub slice_frames: u32,
    /// Probes that contributed.
    pub probes_used: u8,
    /// Elevation where C = 0.9, 0.1 mm; absent when the profile never reaches 0.9.
    pub y90: Option<u32>,
    /// Depth-averaged void fraction over 0..Y90, 1e-4.
    pub mean_void_fraction: Option<u16>,
    /// Equivalent clear-water depth, 0.1 mm.
    pub equivalent_depth: Option<u32>,
    /// Power-law exponent n of C = 0.9 (y/Y90)^n, 1e-3.
    pub exponent: Option<u16>,
    /// Root-mean-square residual of the fit, void fraction 1e-4.
    pub fit_rmse: Option<u16>,
    /// Quality flags of the profile stage.
    pub flags: u32,
    /// Which estimate `y90`, `mean_void_fraction` and `equivalent_depth` are:
    /// [`PROFILE_ESTIMATES`] (0 none, 1 power law, 2 exponential, 3 trapezoid).
    pub estimate: u8,
    /// Standard error of `y90`, 0.01 mm.
    pub y90_se: Option<u16>,
    /// Standard error of `mean_void_fraction`, 1e-4.
    pub mean_void_fraction_se: Option<u16>,
    /// Standard error of `exponent`, 1e-3.
    pub exponent_se: Option<u16>,
    /// Standard error of `equivalent_depth`, 0.01 mm.
    pub equivalent_depth_se: Option<u16>,
}

/// The codes of [`ProfileFit::estimate`], by index.
pub const PROFILE_ESTIMATES: [&str; 4] = ["none", "power_law", "exponential", "trapezoid"];

/// Kind 0x05: health counters, cumulative since the device started (the host takes
/// differences, so a lost health frame loses nothing).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Health {
    /// Samples lost before the chain (ADC/DMA overruns).
    pub samples_dropped: u64,
    /// Samples at an ADC rail.
    pub saturated_samples: u64,
    /// Channels whose tip currently sits in one phase: bit c = channel c.
    pub tips_stuck: u64,
    /// Highest fill of the acquisition buffer, samples.
    pub buffer_high_water: u32,
    /// Window results (entries of kind 0x02 or 0x08, not frames) the streamer dropped, oldest
    /// first, because the link could not keep up (filled in by the
    /// [`Streamer`](crate::wire::Streamer) when it sends the frame).
    pub windows_dropped: u32,
    /// Whole frames the streamer dropped: urgent frames (fronts, profiles, run starts,
    /// replies) offered to a full queue, and frames that failed to encode.
    pub frames_dropped: u32,
    /// Frames (sample-clock ticks) since the device started sampling.
    pub uptime_frames: u64,
}

/// Kind 0x06: a run began. Sent before any result of the run (and, for a run started by
/// a command, before the command's Ack), so a host can label every later row with the
/// run's number, label and UTC start.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RunStart {
    /// Run number since power-on: 1 for the first run, +1 per run (saturating).
    pub run: u32,
    /// The run's label (the StartRun command's; empty for a run the device started itself).
    pub label: String<LABEL_BYTES>,
    /// Device time of the run's frame 0: sample-clock frames since the device started
    /// sampling (the clock of [`Health::uptime_frames`]).
    pub uptime_frames: u64,
    /// The host's UTC at the StartRun command, milliseconds since the Unix epoch; absent
    /// for a run the device started by itself.
    pub utc_ms: Option<u64>,
}

// ----------------------------------- Host -> device ------------------------------------

/// Kind 0x20: start a run.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StartRun {
    /// A label for the run, UTF-8, at most [`LABEL_BYTES`] bytes.
    pub label: String<LABEL_BYTES>,
    /// The host's UTC now, milliseconds since the Unix epoch (absent: the host has no
    /// clock). The device quotes it in the run's [`RunStart`].
    pub utc_ms: Option<u64>,
}

/// Kind 0x22 body: a window policy. Encoded by postcard's variant index (varint): 0 = whole,
/// 1 = fixed frames, 2 = bubble count, 3 = fixed frames counted from the front. Append new
/// variants only.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WindowSetting {
    /// One window over the whole run (index 0).
    Whole,
    /// Windows of this many frames (index 1).
    Frames(u32),
    /// Windows that close after `count` bubbles on the leading tip of probe `probe`, capped
    /// at `max_frames` (index 2).
    Bubbles {
        /// Bubbles per window.
        count: u32,
        /// Reference probe.
        probe: u8,
        /// Longest window, frames.
        max_frames: Option<u32>,
    },
    /// Windows of `frames` frames counted from each station's front arrival, after one
    /// pre-front record (index 3): what a transient run streams.
    AfterFront {
        /// Window length, frames.
        frames: u32,
    },
}

impl WindowSetting {
    /// The chain's policy for this setting.
    pub fn to_policy(self) -> Option<crate::WindowPolicy> {
        Some(match self {
            WindowSetting::Whole => crate::WindowPolicy::Whole,
            WindowSetting::Frames(n) => crate::WindowPolicy::Frames(n),
            WindowSetting::Bubbles {
                count,
                probe,
                max_frames,
            } => crate::WindowPolicy::Bubbles {
                count,
                probe,
                max_frames,
            },
            WindowSetting::AfterFront { frames } => crate::WindowPolicy::AfterFront { frames },
        })
    }

    /// The setting describing a chain policy, if the wire has one for it.
    pub fn from_policy(policy: &crate::WindowPolicy) -> Option<Self> {
        #[allow(unreachable_patterns)]
        match *policy {
            crate::WindowPolicy::Whole => Some(WindowSetting::Whole),
            crate::WindowPolicy::Frames(n) => Some(WindowSetting::Frames(n)),
            crate::WindowPolicy::Bubbles {
                count,
                probe,
                max_frames,
            } => Some(WindowSetting::Bubbles {
                count,
                probe,
                max_frames,
            }),
            crate::WindowPolicy::AfterFront { frames } => {
                Some(WindowSetting::AfterFront { frames })
            }
            #[allow(unreachable_patterns)]
            _ => None,
        }
    }
}

/// Kind 0x23: re-learn the air/water levels of some probes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Relearn {
    /// Probes to re-learn: bit p = probe p.
    pub probes: u32,
}

impl Relearn {
    /// Every probe.
    pub const ALL: Relearn = Relearn { probes: u32::MAX };
}

/// Bytes of the field log region one [`LogChunk`] carries at most.
pub const LOG_CHUNK_BYTES: usize = 64;

/// Kind 0x27: send the field log region's bytes from `offset` on, as one [`LogChunk`]
/// (before the Ack). A host reads the whole region by asking again at the next offset
/// until it reaches the chunk's `total`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReadLog {
    /// First byte wanted, from the start of the region.
    pub offset: u32,
}

/// Kind 0x07: raw bytes of the device's field log region (its flash image), answering a
/// [`ReadLog`]: the region as it is on flash, read by the host as it would read a dump.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LogChunk {
    /// Where `data` starts in the region.
    pub offset: u32,
    /// Bytes of the whole region.
    pub total: u32,
    /// The bytes from `offset` on: [`LOG_CHUNK_BYTES`], fewer at the region's end.
    pub data: Vec<u8, LOG_CHUNK_BYTES>,
}

/// Kind 0x25: set the device's UTC clock. A host sends it when it connects and before a
/// StartRun; the device keeps the time on its own clock from the frame it took effect, and
/// dates the runs it starts with it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SetClock {
    /// The host's UTC now, ms since 1970-01-01T00:00:00Z.
    pub utc_ms: u64,
}

/// Kind 0x28: send window results as full windows (kind 0x0B, with the figures kind 0x02
/// leaves out) from the next window result on, or (`on` false) as kind 0x02 again. Not
/// stored: a device starts without them at power-on.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SetExtras {
    /// Full windows on.
    pub on: bool,
}

/// Kind 0x26: fix the air and water levels of one tip, in ADC counts, from the next frame
/// on (the tip stops learning). Sent once per tip; sending it again with the same levels
/// changes nothing.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SetLevels {
    /// Probe index (as in the description).
    pub probe: u8,
    /// The trailing tip (false: the leading tip).
    pub trailing: bool,
    /// Air level, counts.
    pub air: i16,
    /// Water level, counts.
    pub water: i16,
}

/// Kind 0x30: the command with this sequence number was carried out.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Ack {
    /// Sequence number of the command frame.
    pub seq: u16,
}

/// Kind 0x31: the command with this sequence number was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Nack {
    /// Sequence number of the command frame.
    pub seq: u16,
    /// Why.
    pub reason: NackReason,
}

/// Why a command was refused: a one-byte code (unknown codes are kept, not rejected).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum NackReason {
    /// 1: the command kind is not supported by this device.
    UnknownCommand,
    /// 2: an argument is out of range (e.g. a zero-length window).
    BadArgument,
    /// 3: the device cannot do it now; try again.
    Busy,
    /// 4: no run is in progress.
    NotRunning,
    /// 5: a run is already in progress.
    AlreadyRunning,
    /// 6: the command's protocol version is not supported.
    UnsupportedVersion,
    /// 7: the CRC holds but the body does not parse (a byte left over, a label over 16
    /// bytes, an unknown window variant).
    Malformed,
    /// A code this build does not know.
    Other(u8),
}

impl NackReason {
    /// The code on the wire.
    pub const fn code(self) -> u8 {
        match self {
            NackReason::UnknownCommand => 1,
            NackReason::BadArgument => 2,
            NackReason::Busy => 3,
            NackReason::NotRunning => 4,
            NackReason::AlreadyRunning => 5,
            NackReason::UnsupportedVersion => 6,
            NackReason::Malformed => 7,
            NackReason::Other(c) => c,
        }
    }

    /// The reason of a code.
    pub const fn from_code(code: u8) -> NackReason {
        match code {
            1 => NackReason::UnknownCommand,
            2 => NackReason::BadArgument,
            3 => NackReason::Busy,
            4 => NackReason::NotRunning,
            5 => NackReason::AlreadyRunning,
            6 => NackReason::UnsupportedVersion,
            7 => NackReason::Malformed,
            c => NackReason::Other(c),
        }
    }
}

impl Serialize for NackReason {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_u8(self.code())
    }
}

impl<'de> Deserialize<'de> for NackReason {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        u8::deserialize(d).map(NackReason::from_code)
    }
}

impl MaxSize for NackReason {
    const POSTCARD_MAX_SIZE: usize = 1;
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kind_codes_round_trip_and_are_single_byte_varints() {
        for k in Kind::ALL {
            assert_eq!(Kind::from_code(k.code()), Some(k));
            assert!(k.code() < 0x80);
        }
        let known = (0..=255u8)
            .filter(|c| Kind::from_code(*c).is_some())
            .count();
        assert_eq!(known, Kind::ALL.len());
        assert!(Kind::Ack.is_from_device() && Kind::Windows.is_from_device());
        assert!(!Kind::StartRun.is_from_device() && !Kind::DescribeRequest.is_from_device());
    }

    #[test]
    fn nack_codes_round_trip() {
        for c in 0..=255u8 {
            assert_eq!(NackReason::from_code(c).code(), c);
        }
    }

    #[test]
    fn window_setting_matches_the_chain_policy() {
        let p = crate::WindowPolicy::Frames(1000);
        assert_eq!(
            WindowSetting::from_policy(&p),
            Some(WindowSetting::Frames(1000))
        );
        assert_eq!(WindowSetting::Frames(1000).to_policy(), Some(p));
        let b = WindowSetting::Bubbles {
            count: 10,
            probe: 0,
            max_frames: None,
        };
        assert_eq!(WindowSetting::from_policy(&b.to_policy().unwrap()), Some(b));
    }
}
