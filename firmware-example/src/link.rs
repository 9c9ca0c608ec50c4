//! The results link: chain records -> wire frames -> a UART.
//!
//! Everything on the wire comes from `frothline_core::wire` (frame types, the postcard,
//! COBS and CRC encoding, sequence numbers, and the [`Streamer`] that fits frames into the link's
//! byte budget and drops the oldest window results, counted, when the link cannot keep up).
//! This module only builds the bodies: the device description from the capture's layout, a
//! window result, derived figures and a tip-health report per record, health counters from the acquisition; and pumps the
//! streamer's bytes into any `embedded_io::Write`.

use crate::capture;
use crate::config::{FwRecord, BAUD, DEVICE_ID, PROBES, STREAM_WINDOWS};
use embedded_io::Write;
use frothline_core::wire::{
    quant, Body, DerivedResult, DeviceDescription, FrontArrival, Health, ProfileFit, Reply,
    RunStart, Streamer, StreamerConfig, TipReport, WindowResult, WindowSetting,
};

/// Firmware version, as the device description carries it.
pub const FIRMWARE: &str = concat!("fw-example ", env!("CARGO_PKG_VERSION"));

/// Bytes the link may take at once: the transmit buffer a UART's DMA drains on a real
/// board. The main loop pumps the streamer once per block (6.4 ms = 590 bytes at the baud
/// rate), so the bucket must hold at least that much credit.
pub const TX_BURST_BYTES: u32 = 1024;

/// The link's streamer: [`STREAM_WINDOWS`] window results, the default urgent queue, and
/// the tip-health book of the firmware's [`PROBES`] probes (no room for probes it cannot have).
type FwStreamer = Streamer<STREAM_WINDOWS, 8, PROBES>;

/// A streamer in front of a byte sink.
pub struct Link<W> {
    tx: W,
    streamer: FwStreamer,
    sample_rate_hz: f32,
    write_errors: u32,
    /// The window policy in use, as the description reports it.
    window: WindowSetting,
}

/// Build the link in its static `cell`, apart from the caller: the temporaries of its
/// construction take stack only while it is built, not below the caller for the whole run.
/// `None` if the cell was taken already.
#[inline(never)]
pub fn link_in<W: Write + 'static>(
    cell: &'static static_cell::StaticCell<Link<W>>,
    tx: W,
    sample_rate_hz: u32,
) -> Option<&'static mut Link<W>> {
    cell.try_init_with(|| Link::new(tx, sample_rate_hz))
}

impl<W: Write> Link<W> {
    /// A link over `tx`, its byte budget that of a UART at [`BAUD`], time in frames of
    /// the sample clock.
    pub fn new(tx: W, sample_rate_hz: u32) -> Self {
        Link {
            tx,
            streamer: Streamer::new(StreamerConfig {
                burst_bytes: TX_BURST_BYTES,
                ..StreamerConfig::uart_8n1(DEVICE_ID, BAUD, sample_rate_hz)
            }),
            sample_rate_hz: sample_rate_hz as f32,
            write_errors: 0,
            window: default_window(),
        }
    }

    /// A link whose frames carry `device_id` (the stored settings' id).
    pub fn with_device_id(tx: W, sample_rate_hz: u32, device_id: u16) -> Self {
        let mut l = Self::new(tx, sample_rate_hz);
        l.streamer = Streamer::new(StreamerConfig {
            burst_bytes: TX_BURST_BYTES,
            ..StreamerConfig::uart_8n1(device_id, BAUD, sample_rate_hz)
        });
        l
    }

    /// The window policy the description reports from now on.
    pub fn set_window(&mut self, policy: frothline_core::WindowPolicy) {
        if let Some(w) = WindowSetting::from_policy(&policy) {
            self.window = w;
        }
    }

    /// Queue the device description (sent first).
    pub fn describe(&mut self) {
        self.streamer.offer_description(description(self.window));
    }

    /// Queue the window result of one record and its derived figures (kind 0x08), its
    /// start `offset` frames later (the frame of the run where the chain began), and keep
    /// its tips' state (levels in use, interfaces, bubbles, void fraction, flags) as the
    /// probe's latest tip-health report (kind 0x09, sent after each health frame);
    /// returns the window result.
    pub fn record(&mut self, rec: &FwRecord, offset: u64) -> WindowResult {
        let mut w = wire_result(rec, self.sample_rate_hz);
        w.start = w.start.saturating_add(offset);
        self.streamer.offer_window(w);
        let mut tips = TipReport::from_probe_window(rec);
        tips.start = tips.start.saturating_add(offset);
        self.streamer.offer_tips(tips);
        let spacing_mm = capture::TIP_SPACING_MM
            .get(rec.probe as usize)
            .copied()
            .flatten();
        let mut derived =
            DerivedResult::from_probe_window_with_spacing(rec, self.sample_rate_hz, spacing_mm);
        derived.start = derived.start.saturating_add(offset);
        self.streamer.offer_derived(derived);
        w
    }

    /// Queue the levels every tip uses (after the description; a newer one replaces it).
    pub fn levels(&mut self, l: frothline_core::wire::LevelsInUse) {
        self.streamer.offer_levels(l);
    }

    /// Queue a front arrival (station chains).
    pub fn front(&mut self, f: FrontArrival) {
        self.streamer.offer(Body::Front(f));
    }

    /// Queue a profile fit (station chains).
    pub fn profile(&mut self, p: ProfileFit) {
        self.streamer.offer(Body::Profile(p));
    }

    /// Queue a run start (urgent: it goes before the run's results and the Ack of the
    /// command that started it).
    pub fn run_start(&mut self, r: RunStart) {
        self.streamer.offer(Body::RunStart(r));
    }

    /// Queue a chunk of the field log region (urgent: it precedes the ReadLog's Ack).
    pub fn log_chunk(&mut self, c: frothline_core::wire::LogChunk) {
        self.streamer.offer(Body::LogChunk(c));
    }

    /// Queue the answer to a host command (urgent).
    pub fn reply(&mut self, r: Reply) {
        self.streamer.offer(r.body());
    }

    /// Free places for urgent frames (answers, run starts).
    pub fn urgent_room(&self) -> usize {
        self.streamer.urgent_room()
    }

    /// The byte port itself (its receiver carries the host's commands).
    pub fn port(&mut self) -> &mut W {
        &mut self.tx
    }

    /// Queue a health frame (replaces one not yet sent: its counters are cumulative).
    pub fn health(&mut self, h: Health) {
        self.streamer.offer_health(h);
    }

    /// Queue a device status (sent after the health frame; replaces one not yet sent).
    pub fn status(&mut self, s: frothline_core::wire::DeviceStatus) {
        self.streamer.offer_status(s);
    }

    /// Send what the link's budget allows at sample-clock time `now` (frames).
    pub fn pump(&mut self, now: u64) {
        while let Some(bytes) = self.streamer.poll(now, 64) {
            if self.tx.write_all(bytes).is_err() {
                self.write_errors = self.write_errors.saturating_add(1);
            }
        }
    }

    /// Send everything queued (at the end of a run), letting the clock run on from `now`;
    /// returns the time reached.
    pub fn drain(&mut self, mut now: u64) -> u64 {
        let step = (self.sample_rate_hz as u64 / 100).max(1);
        let mut rounds = 0u32;
        while !self.streamer.is_idle() && rounds < 100_000 {
            self.pump(now);
            now += step;
            rounds += 1;
        }
        let _ = self.tx.flush();
        now
    }

    /// The streamer's counters.
    pub fn stats(&self) -> &frothline_core::wire::StreamerStats {
        self.streamer.stats()
    }

    /// Writes that failed.
    pub fn write_errors(&self) -> u32 {
        self.write_errors
    }
}

/// The wire form of a record, the correlation's velocity from the probe's tip spacing.
pub fn wire_result(rec: &FwRecord, sample_rate_hz: f32) -> WindowResult {
    let spacing_mm = capture::TIP_SPACING_MM
        .get(rec.probe as usize)
        .copied()
        .flatten();
    WindowResult::from_probe_window_with_spacing(rec, sample_rate_hz, spacing_mm)
}

/// The capture's window policy as the wire writes it.
pub fn default_window() -> WindowSetting {
    WindowSetting::from_policy(&capture::WINDOW).unwrap_or(WindowSetting::Whole)
}

/// The device description: the capture's rate, channels and probe layout, the window in use.
pub fn description(window: WindowSetting) -> DeviceDescription {
    let mut d = DeviceDescription {
        firmware: heapless::String::new(),
        sample_rate_millihz: quant::sample_rate(capture::SAMPLE_RATE_HZ as f32),
        channels: capture::CHANNELS,
        window,
        probes: heapless::Vec::new(),
    };
    let _ = d.firmware.push_str(FIRMWARE);
    for p in capture::PROBE_LAYOUT {
        let _ = d.probes.push(p);
    }
    d
}
