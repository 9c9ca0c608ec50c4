//! How the simulated device behaves, and what it counts.

use std::time::Duration;

/// How the simulated device behaves.
#[derive(Clone, Debug)]
pub struct SimOptions {
    /// Device id in every header.
    pub device: u16,
    /// Link rate, baud (8N1: baud / 10 bytes per second); 0 for no rate limit.
    pub baud: u32,
    /// Sample clock speed relative to the wall clock (1 = real time).
    pub speed: f64,
    /// Start a run at power-on.
    pub autostart: bool,
    /// Start a new run when the capture ends.
    pub repeat: bool,
    /// Firmware version string (at most 16 bytes are sent).
    pub firmware: String,
    /// Period of health frames (each followed by a device status).
    pub health_every: Duration,
    /// Nominal supply voltage the device status reports, mV (with a slow small wander,
    /// see `status.rs`); None: the device reports no supply measurement.
    pub supply_mv: Option<u16>,
}

impl Default for SimOptions {
    fn default() -> Self {
        SimOptions {
            device: 1,
            baud: 115_200,
            speed: 1.0,
            autostart: true,
            repeat: false,
            firmware: format!("sim-{}", env!("CARGO_PKG_VERSION")),
            health_every: Duration::from_secs(1),
            supply_mv: Some(3_300),
        }
    }
}

/// Counters of a simulated device.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct SimStats {
    /// Frames put on the link.
    pub frames_sent: u64,
    /// Bytes put on the link.
    pub bytes_sent: u64,
    /// Window results sent.
    pub windows_sent: u64,
    /// Window results the streamer dropped (link too slow).
    pub windows_dropped: u32,
    /// Records the chain produced.
    pub records: u64,
    /// Command frames answered with Ack (repeats included).
    pub acks: u64,
    /// Command frames answered with Nack (repeats included).
    pub nacks: u64,
    /// Repeated command frames answered again without being carried out.
    pub repeats: u64,
    /// Received frames that could not be answered (CRC failure, broken framing, too long).
    pub unreadable: u64,
    /// Valid frames not from the host id (ignored).
    pub not_from_host: u64,
    /// Runs started.
    pub runs: u64,
    /// Bytes the port did not take (write timeout or error).
    pub bytes_not_written: u64,
}
