//! Compile-time sizes of the firmware: everything that decides its RAM.
//!
//! Sized for the design point of docs/firmware.md: 8 dual-tip probes (16 channels) at 20 kHz per tip.

/// Probes the chain holds.
pub const PROBES: usize = 8;
/// Correlation lag slots of the chain (lags 0..=63: 3.15 ms at 20 kHz, velocities down to
/// 1.9 m/s at 6 mm tip spacing). The capture's layout must ask for `max_lag` below this
/// (`scripts/firmware-capture.sh` checks it), or the device would cap lags the host does not.
pub const LAGS: usize = 64;
/// Most channels per frame (two 8-channel ADC packages).
pub const MAX_CHANNELS: usize = 16;
/// Frames per acquisition block: 128 frames = 6.4 ms at 20 kHz, 4 KiB at 16 channels.
pub const BLOCK_FRAMES: usize = 128;
/// Samples per block.
pub const BLOCK_SAMPLES: usize = BLOCK_FRAMES * MAX_CHANNELS;
/// Acquisition blocks: two (double buffering: one filling, one being processed).
pub const BLOCKS: usize = 2;
/// Window results the wire streamer can hold while the link is busy: a window's worth and
/// half another. The main loop pumps the link after every block (6.4 ms, 590 bytes of
/// link budget at the baud rate, 1024 bytes of burst), and a block closes at most one
/// window per probe, so the queue empties faster than it fills (every firmware check
/// verifies that no result was dropped). 12 rather than 16 makes room in the 64 KiB
/// budget for the command responder and the version-2 frames.
pub const STREAM_WINDOWS: usize = PROBES + PROBES / 2;
/// The device id written into every wire frame.
pub const DEVICE_ID: u16 = 0x0F1E;
/// The link's baud rate (8N1): the streamer's byte budget. 921 600 baud = 92 kB/s, about
/// four times what 8 probes at 10 ms windows need.
pub const BAUD: u32 = 921_600;

/// Station slots of the chain: one when the capture has a station (the field-logger
/// build's surge capture, whose delay ring is not empty), none otherwise (no station state).
pub const STATION_SLOTS: usize = (crate::capture::DELAY_RING_SAMPLES != 0) as usize;

/// The chain the firmware runs: a steady chain (no delay ring), or in the field-logger
/// build a station chain with the delay ring its capture's station needs. Its records keep
/// no raw correlation sums (`S = 0`: they do not go on the wire, and would cost 28 × LAGS
/// bytes per queued record); their other fields are a host replay's, bit for bit. It
/// queues one record (`Q = 1`): the main loop sends each record on as it is polled, and
/// the chain builds the next in the slot that frees (a record is 1.5 KiB).
pub type FwChain = frothline_core::GenericChain<
    PROBES,
    LAGS,
    { crate::capture::DELAY_RING_SAMPLES },
    0,
    { STATION_SLOTS },
    1,
>;
/// The chain's records, as the main loop sees them (`poll_lean_with`: lent where they lie
/// in the chain's queue, without raw correlation sums, a record type of no lag slots).
pub type FwRecord = frothline_core::ProbeWindow<0>;
