//! What a session reports as it goes: the events for the live view, and the records of
//! sequence gaps, run marks and link losses they carry.

use frothline_core::wire::{
    DeviceDescription, FrontArrival, Header, Health, Kind, NackReason, ProfileFit, RunStart,
    WindowResult,
};

/// A frame rejected by the decoder.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rejected {
    /// Not a frame: invalid COBS, or too short to hold a header and a CRC.
    Framing,
    /// The CRC did not match.
    Crc,
    /// CRC valid, payload invalid.
    Malformed,
    /// Longer than the largest frame.
    Oversize,
}

/// Something that happened on a link.
#[derive(Clone, Debug, PartialEq)]
#[allow(clippy::large_enum_variant)]
pub enum Event {
    /// The port was opened.
    LinkUp {
        /// Port number.
        port: usize,
    },
    /// The port was lost.
    LinkDown {
        /// Port number.
        port: usize,
        /// What the port said.
        reason: String,
    },
    /// A device description.
    Describe {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The description.
        desc: DeviceDescription,
    },
    /// One probe window result.
    Window {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The result.
        result: WindowResult,
    },
    /// A front arrival.
    Front {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The arrival.
        front: FrontArrival,
    },
    /// A profile fit.
    Profile {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The fit.
        fit: ProfileFit,
    },
    /// A run began on the device.
    RunStart {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Its number, label, device time and host UTC.
        run: RunStart,
    },
    /// Device health counters.
    Health {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The counters.
        health: Health,
    },
    /// The device's status: supply voltage, time since power-up, field logger (kind 0x0C).
    Status {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The status.
        status: frothline_core::wire::DeviceStatus,
    },
    /// Tip health of some probes (their latest windows).
    TipHealth {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The reports.
        tips: frothline_core::wire::TipHealth,
    },
    /// The levels every tip of a device uses now (kind 0x0A).
    Levels {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Per probe, in the description's order.
        levels: frothline_core::wire::LevelsInUse,
    },
    /// A reply to a command: `nack` is `None` for an Ack.
    Reply {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Sequence number of the command.
        seq: u16,
        /// The command's kind, if this session sent it.
        command: Option<Kind>,
        /// Why it was refused (Nack).
        nack: Option<NackReason>,
    },
    /// A command frame the host sent.
    Sent {
        /// Port number.
        port: usize,
        /// Its sequence number.
        seq: u16,
        /// Its kind.
        kind: Kind,
    },
    /// Frames missing before this one (sequence gap): lost on the link.
    SeqGap {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Sequence number of the frame after the gap.
        seq: u16,
        /// Frames missing.
        missing: u16,
    },
    /// A repeated frame (same sequence number): ignored.
    Duplicate {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Its sequence number.
        seq: u16,
    },
    /// The device restarted its numbering.
    Restarted {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
    },
    /// A frame the decoder refused.
    Rejected {
        /// Port number.
        port: usize,
        /// Why.
        why: Rejected,
    },
    /// A valid frame of a version or kind this build does not read.
    Unsupported {
        /// Port number.
        port: usize,
        /// Its header.
        header: Header,
    },
    /// A host -> device frame arrived from a link (another host, or an echo): ignored.
    Stray {
        /// Port number.
        port: usize,
        /// Sender id.
        device: u16,
        /// Its kind.
        kind: Kind,
    },
}

/// A sequence gap, for the session report.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SeqGap {
    /// Port number.
    pub port: usize,
    /// Device id.
    pub device: u16,
    /// Sequence number of the frame after the gap.
    pub seq: u16,
    /// Frames missing.
    pub missing: u16,
    /// Host arrival time of the frame after the gap, µs since the Unix epoch.
    pub host_time_us: u64,
}

/// A run start, for the session report.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RunMark {
    /// Port number.
    pub port: usize,
    /// Device id.
    pub device: u16,
    /// The run.
    pub run: RunStart,
    /// Host arrival time of the RunStart frame, µs since the Unix epoch.
    pub host_time_us: u64,
}

/// A link-down moment, for the session report.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LinkGap {
    /// Port number.
    pub port: usize,
    /// When, µs since the Unix epoch.
    pub host_time_us: u64,
    /// Why (empty when read back from an archive).
    pub reason: String,
}
