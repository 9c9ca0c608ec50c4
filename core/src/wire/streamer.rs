//! The device-side streamer: frames in, link-sized byte chunks out.
//!
//! ```text
//! offer(body) -> urgent FIFO (fronts, profiles, replies, commands) ---+
//!                description slot (latest wins)                     +-> encode (seq++) -> tx
//!                levels slot (latest wins; after the description)   |
//!                health slot (latest wins; counters are cumulative)  |        |
//!                status slot (latest wins; after health)            |        |
//!                tip book (latest report per probe; after health)    |        |
//!                window queue (Q results; full -> drop the oldest)  -+        v
//!                (with X >= Q: their extras, for full windows, kind 0x0B)
//! poll(now, room) -> at most min(credit, room) bytes of the frame in tx
//! ```
//!
//! The link's byte budget is a token bucket: credit grows at the link rate with the time the
//! caller passes in (any clock: microseconds, or the sample clock itself) up to a burst,
//! and every byte handed out spends one byte of credit. Each call does bounded work: at
//! most one frame is encoded.
//!
//! Policy when the link cannot keep up: the very first frame is the description if one is
//! queued (a device's power-on marker); after it urgent frames go first, then the
//! description, then the levels in use, then health, then the device status, then window results, then their derived figures (kind 0x08,
//! a queue of its own of `Q`, dropped and counted like window results). Window results wait in a queue of `Q`; when it is full the
//! **oldest** result is dropped. A new description or health frame replaces a queued one
//! (nothing is lost: health counters are cumulative). An urgent frame offered to a full
//! urgent queue is dropped. Every drop is counted, and the totals go out in the
//! `windows_dropped` (window results) and `frames_dropped` (whole frames) fields of the
//! next health frame (filled in when it is encoded), so drops are never silent. Sequence
//! numbers are given when a frame is encoded, so a frame dropped here leaves no sequence
//! gap: gaps at the host mean link loss, the health counters mean streamer drops, and the
//! two never count the same frame.
//!
//! Tip-health reports (kind 0x09, [`crate::wire::tip_health`]) are kept per probe, the
//! latest replacing the earlier, and go out only after a health frame has been sent: the
//! book of up to `T` probes then leaves in frames of [`crate::wire::MAX_TIPS_PER_FRAME`] before any
//! window result, so tip health costs a frame or two per health period, whatever the
//! window length.
//!
//! Window results waiting together are packed into one frame (up to
//! [`MAX_WINDOWS_PER_FRAME`]), which shares the header, CRC and COBS overhead: the results
//! of one analysis window of all probes usually travel in one frame.

use crate::wire::codec::encode;
use crate::wire::frame::{
    Ack, Body, DeviceDescription, Frame, FrontArrival, Health, LogChunk, Nack, ProfileFit, ReadLog,
    Relearn, RunStart, SetClock, SetLevels, StartRun, WindowResult, WindowSetting, Windows,
};
use crate::wire::tip_health::{TipBook, TipHealth, TipReport};
use crate::wire::{
    DerivedBatch, DerivedResult, MAX_FRAME_BYTES, MAX_PROBES, MAX_WINDOWS_PER_FRAME,
};
use heapless::Deque;

/// How the streamer sees its link.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StreamerConfig {
    /// Device id written into every header.
    pub device: u16,
    /// Link capacity, bytes per second (0: no rate limit, only `room` limits).
    pub link_bytes_per_s: u32,
    /// Units per second of the `now` passed to [`Streamer::poll`] (1_000_000 for
    /// microseconds, the sample rate for the sample clock).
    pub ticks_per_s: u32,
    /// Most bytes that may go out at once after an idle spell (the bucket depth; at least 1).
    pub burst_bytes: u32,
}

impl StreamerConfig {
    /// A UART at `baud` with 8N1 framing (10 bits per byte), a burst of 64 bytes.
    pub const fn uart_8n1(device: u16, baud: u32, ticks_per_s: u32) -> Self {
        StreamerConfig {
            device,
            link_bytes_per_s: baud / 10,
            ticks_per_s,
            burst_bytes: 64,
        }
    }
}

/// What [`Streamer::offer`] did with a body.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Offer {
    /// Queued.
    Queued,
    /// Queued; this many older window results were dropped to make room (counted).
    DroppedOldest(u16),
    /// Replaced a queued description or health frame (nothing lost).
    Replaced,
    /// Dropped: the urgent queue was full (counted).
    Dropped,
}

/// Counters of a streamer.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StreamerStats {
    /// Frames encoded and started on the link.
    pub frames_sent: u64,
    /// Bytes handed out.
    pub bytes_sent: u64,
    /// Window results sent.
    pub windows_sent: u64,
    /// Window results dropped (oldest first) for want of link capacity.
    pub windows_dropped: u32,
    /// Urgent frames dropped because their queue was full.
    pub urgent_dropped: u32,
    /// Frames that failed to encode (cannot happen with the crate's types; counted anyway).
    pub encode_errors: u32,
    /// Description or health frames replaced by a newer one before they went out.
    pub replaced: u64,
}

impl StreamerStats {
    /// Whole frames dropped (urgent queue full, encode errors): `Health::frames_dropped`.
    pub fn frames_dropped(&self) -> u32 {
        self.urgent_dropped.saturating_add(self.encode_errors)
    }
}

/// The bodies that go through the urgent FIFO (all small).
#[derive(Clone, Debug)]
enum Urgent {
    Front(FrontArrival),
    RunStart(RunStart),
    Profile(ProfileFit),
    StartRun(StartRun),
    StopRun,
    SetWindow(WindowSetting),
    Relearn(Relearn),
    DescribeRequest,
    SetClock(SetClock),
    SetLevels(SetLevels),
    ReadLog(ReadLog),
    SetExtras(crate::wire::SetExtras),
    LogChunk(LogChunk),
    Ack(Ack),
    Nack(Nack),
}

impl Urgent {
    fn into_body(self) -> Body {
        match self {
            Urgent::Front(b) => Body::Front(b),
            Urgent::RunStart(b) => Body::RunStart(b),
            Urgent::Profile(b) => Body::Profile(b),
            Urgent::StartRun(b) => Body::StartRun(b),
            Urgent::StopRun => Body::StopRun,
            Urgent::SetWindow(b) => Body::SetWindow(b),
            Urgent::Relearn(b) => Body::Relearn(b),
            Urgent::DescribeRequest => Body::DescribeRequest,
            Urgent::SetClock(b) => Body::SetClock(b),
            Urgent::SetLevels(b) => Body::SetLevels(b),
            Urgent::ReadLog(b) => Body::ReadLog(b),
            Urgent::SetExtras(b) => Body::SetExtras(b),
            Urgent::LogChunk(b) => Body::LogChunk(b),
            Urgent::Ack(b) => Body::Ack(b),
            Urgent::Nack(b) => Body::Nack(b),
        }
    }
}

/// A streamer with a queue of `Q` window results, `P` urgent frames and the tip health of
/// `T` probes.
#[derive(Clone, Debug)]
pub struct Streamer<
    const Q: usize,
    const P: usize = 8,
    const T: usize = MAX_PROBES,
    const X: usize = 1,
> {
    cfg: StreamerConfig,
    seq: u16,
    windows: Deque<WindowResult, Q>,
    /// The extras of the newest `extras.len()` queued window results (full windows on).
    extras: Deque<crate::wire::WindowExtras, X>,
    /// Full windows (kind 0x0B) on: window results are offered with their extras.
    extras_on: bool,
    derived: Deque<DerivedResult, Q>,
    urgent: Deque<Urgent, P>,
    describe: Option<DeviceDescription>,
    levels: Option<crate::wire::LevelsInUse>,
    health: Option<Health>,
    status: Option<crate::wire::DeviceStatus>,
    tips: TipBook<T>,
    /// A health frame went out: send the tip book next.
    tips_due: bool,
    tx: [u8; MAX_FRAME_BYTES],
    tx_len: usize,
    tx_pos: usize,
    credit: u64,
    last: Option<u64>,
    stats: StreamerStats,
}

impl<const Q: usize, const P: usize, const T: usize, const X: usize> Streamer<Q, P, T, X> {
    /// A streamer whose first frame has sequence number 0.
    pub fn new(cfg: StreamerConfig) -> Self {
        const { assert!(Q > 0, "the window queue needs room for one result") };
        const { assert!(P > 0, "the urgent queue needs room for one frame") };
        Streamer {
            cfg,
            seq: 0,
            windows: Deque::new(),
            extras: Deque::new(),
            extras_on: false,
            derived: Deque::new(),
            urgent: Deque::new(),
            describe: None,
            levels: None,
            health: None,
            status: None,
            tips: TipBook::default(),
            tips_due: false,
            tx: [0; MAX_FRAME_BYTES],
            tx_len: 0,
            tx_pos: 0,
            credit: 0,
            last: None,
            stats: StreamerStats::default(),
        }
    }

    /// Queue a body to send (see the module docs for the policy).
    pub fn offer(&mut self, body: Body) -> Offer {
        let urgent = match body {
            Body::Windows(ws) => {
                let mut dropped = 0u16;
                for w in ws {
                    dropped = dropped.saturating_add(self.offer_window(w) as u16);
                }
                return if dropped > 0 {
                    Offer::DroppedOldest(dropped)
                } else {
                    Offer::Queued
                };
            }
            Body::FullWindows(fs) => {
                let mut dropped = 0u16;
                for f in fs {
                    dropped = dropped.saturating_add(self.offer_full(f.result, f.extras) as u16);
                }
                return if dropped > 0 {
                    Offer::DroppedOldest(dropped)
                } else {
                    Offer::Queued
                };
            }
            Body::Derived(ds) => {
                let mut dropped = 0u16;
                for d in ds {
                    dropped = dropped.saturating_add(self.offer_derived(d) as u16);
                }
                return if dropped > 0 {
                    Offer::DroppedOldest(dropped)
                } else {
                    Offer::Queued
                };
            }
            Body::Describe(d) => return Self::replace(&mut self.describe, d, &mut self.stats),
            Body::Levels(l) => return Self::replace(&mut self.levels, l, &mut self.stats),
            Body::Health(h) => return Self::replace(&mut self.health, h, &mut self.stats),
            Body::DeviceStatus(d) => return Self::replace(&mut self.status, d, &mut self.stats),
            Body::TipHealth(v) => {
                for r in v {
                    self.offer_tips(r);
                }
                return Offer::Queued;
            }
            Body::Front(b) => Urgent::Front(b),
            Body::RunStart(b) => Urgent::RunStart(b),
            Body::Profile(b) => Urgent::Profile(b),
            Body::StartRun(b) => Urgent::StartRun(b),
            Body::StopRun => Urgent::StopRun,
            Body::SetWindow(b) => Urgent::SetWindow(b),
            Body::Relearn(b) => Urgent::Relearn(b),
            Body::DescribeRequest => Urgent::DescribeRequest,
            Body::SetClock(b) => Urgent::SetClock(b),
            Body::SetLevels(b) => Urgent::SetLevels(b),
            Body::ReadLog(b) => Urgent::ReadLog(b),
            Body::SetExtras(b) => Urgent::SetExtras(b),
            Body::LogChunk(b) => Urgent::LogChunk(b),
            Body::Ack(b) => Urgent::Ack(b),
            Body::Nack(b) => Urgent::Nack(b),
        };
        match self.urgent.push_back(urgent) {
            Ok(()) => Offer::Queued,
            Err(_) => {
                self.stats.urgent_dropped = self.stats.urgent_dropped.saturating_add(1);
                Offer::Dropped
            }
        }
    }

    /// Queue the device description: `offer(Body::Describe(d))` without building a
    /// [`Body`] (as large as its largest variant) on the caller's stack.
    pub fn offer_description(&mut self, d: DeviceDescription) -> Offer {
        Self::replace(&mut self.describe, d, &mut self.stats)
    }

    /// Queue the levels in use: `offer(Body::Levels(l))` without building a [`Body`].
    pub fn offer_levels(&mut self, l: crate::wire::LevelsInUse) -> Offer {
        Self::replace(&mut self.levels, l, &mut self.stats)
    }

    /// Queue a health frame: `offer(Body::Health(h))` without building a [`Body`] (as large
    /// as its largest variant) on the caller's stack.
    pub fn offer_health(&mut self, h: Health) -> Offer {
        Self::replace(&mut self.health, h, &mut self.stats)
    }

    /// Queue a device status (kind 0x0C; sent after the health frame, a newer one replaces
    /// a queued one: it is a state).
    pub fn offer_status(&mut self, s: crate::wire::DeviceStatus) -> Offer {
        Self::replace(&mut self.status, s, &mut self.stats)
    }

    /// Keep `r` as its probe's latest tip-health report (sent after the next health frame;
    /// a probe index of `T` or more is ignored).
    pub fn offer_tips(&mut self, r: TipReport) {
        self.tips.note(r);
    }

    /// Queue one window result; returns true if the oldest queued one was dropped for it.
    pub fn offer_window(&mut self, w: WindowResult) -> bool {
        let dropped = self.windows.is_full();
        if dropped {
            // The oldest result has extras only if every queued one has.
            if self.extras.len() >= self.windows.len() {
                self.extras.pop_front();
            }
            self.windows.pop_front();
            self.stats.windows_dropped = self.stats.windows_dropped.saturating_add(1);
        }
        // Cannot fail: room was made.
        let _ = self.windows.push_back(w);
        dropped
    }

    /// Turn full windows (kind 0x0B) on or off; false (and off) if this streamer keeps no
    /// extras (`X` below `Q`: then every queued result could not keep its extras). Results
    /// queued before it was turned on go out as kind 0x02 first; turning it off sends the
    /// queued ones as kind 0x02.
    pub fn set_extras(&mut self, on: bool) -> bool {
        self.extras_on = on && X >= Q;
        if !self.extras_on {
            self.extras.clear();
        }
        self.extras_on == on
    }

    /// True while full windows are on.
    pub fn extras_on(&self) -> bool {
        self.extras_on
    }

    /// Queue a window result with its extras (sent as a full window while full windows are
    /// on, else as a plain result); returns true if the oldest queued result was dropped.
    pub fn offer_full(&mut self, w: WindowResult, x: crate::wire::WindowExtras) -> bool {
        let dropped = self.offer_window(w);
        if self.extras_on {
            if self.extras.is_full() {
                self.extras.pop_front();
            }
            let _ = self.extras.push_back(x);
        }
        dropped
    }

    /// Queue the derived figures of one window result (kind 0x08, sent after the window
    /// results); returns true if the oldest queued one was dropped for it (counted with the
    /// dropped window results).
    pub fn offer_derived(&mut self, d: DerivedResult) -> bool {
        let dropped = self.derived.is_full();
        if dropped {
            self.derived.pop_front();
            self.stats.windows_dropped = self.stats.windows_dropped.saturating_add(1);
        }
        let _ = self.derived.push_back(d);
        dropped
    }

    fn replace<V>(slot: &mut Option<V>, v: V, stats: &mut StreamerStats) -> Offer {
        if slot.replace(v).is_some() {
            stats.replaced += 1;
            Offer::Replaced
        } else {
            Offer::Queued
        }
    }

    /// The next bytes for the link at time `now`, at most `room` of them (e.g. the free
    /// space of the UART FIFO or DMA buffer). The bytes count as sent: write all of them.
    /// `None` when there is nothing to send, no credit, or no room.
    pub fn poll(&mut self, now: u64, room: usize) -> Option<&[u8]> {
        self.refill(now);
        let tps = self.cfg.ticks_per_s.max(1) as u64;
        let allowed = if self.cfg.link_bytes_per_s == 0 {
            room
        } else {
            usize::try_from(self.credit / tps)
                .unwrap_or(usize::MAX)
                .min(room)
        };
        if allowed == 0 {
            return None;
        }
        if self.tx_pos >= self.tx_len && !self.load() {
            return None;
        }
        let n = allowed.min(self.tx_len - self.tx_pos);
        if self.cfg.link_bytes_per_s != 0 {
            self.credit = self.credit.saturating_sub(n as u64 * tps);
        }
        let start = self.tx_pos;
        self.tx_pos += n;
        self.stats.bytes_sent = self.stats.bytes_sent.saturating_add(n as u64);
        self.tx.get(start..start + n)
    }

    /// The bytes of the frame on the wire that are not sent yet, whatever the link budget
    /// (a device that stops streaming finishes the frame it started, so that the receiver
    /// gets every frame counted as sent). `None` between frames. They count as sent.
    pub fn rest_of_frame(&mut self) -> Option<&[u8]> {
        if self.tx_pos >= self.tx_len {
            return None;
        }
        let start = self.tx_pos;
        self.tx_pos = self.tx_len;
        let n = self.tx_len - start;
        self.stats.bytes_sent = self.stats.bytes_sent.saturating_add(n as u64);
        self.tx.get(start..start + n)
    }

    /// The counters.
    pub fn stats(&self) -> &StreamerStats {
        &self.stats
    }

    /// Free places in the urgent queue: a device reads its next command only while there
    /// is room for the answer (and a RunStart), leaving further commands in its receiver.
    pub fn urgent_room(&self) -> usize {
        P - self.urgent.len()
    }

    /// Window results waiting.
    pub fn queued_windows(&self) -> usize {
        self.windows.len()
    }

    /// True when nothing waits and no frame is half sent.
    pub fn is_idle(&self) -> bool {
        self.tx_pos >= self.tx_len
            && self.windows.is_empty()
            && self.derived.is_empty()
            && self.urgent.is_empty()
            && self.describe.is_none()
            && self.levels.is_none()
            && self.health.is_none()
            && self.status.is_none()
            && (!self.tips_due || self.tips.is_empty())
    }

    /// The sequence number the next frame will carry.
    pub fn next_seq(&self) -> u16 {
        self.seq
    }

    fn refill(&mut self, now: u64) {
        let tps = self.cfg.ticks_per_s.max(1) as u64;
        let cap = (self.cfg.burst_bytes.max(1) as u64).saturating_mul(tps);
        let gained = match self.last {
            None => cap,
            Some(last) => now
                .saturating_sub(last)
                .saturating_mul(self.cfg.link_bytes_per_s as u64),
        };
        self.last = Some(self.last.map_or(now, |l| l.max(now)));
        self.credit = self.credit.saturating_add(gained).min(cap);
    }

    /// The next frame of the tip book, while it is due (after a health frame).
    fn next_tips(&mut self) -> Option<TipHealth> {
        if !self.tips_due {
            return None;
        }
        let v = self.tips.take_frame();
        if v.is_none() {
            self.tips_due = false;
        }
        v
    }

    /// Encode the next frame into the transmit buffer; false if nothing waits.
    fn load(&mut self) -> bool {
        // A device's first frame is its description (the power-on marker of the sequence
        // state machine, docs/wire-protocol.md section 9), whatever else waits.
        let first = self.stats.frames_sent == 0 && self.describe.is_some();
        let body = if first {
            match self.describe.take() {
                Some(d) => Body::Describe(d),
                None => return false,
            }
        } else if let Some(u) = self.urgent.pop_front() {
            u.into_body()
        } else if let Some(d) = self.describe.take() {
            Body::Describe(d)
        } else if let Some(l) = self.levels.take() {
            Body::Levels(l)
        } else if let Some(mut h) = self.health.take() {
            h.windows_dropped = self.stats.windows_dropped;
            h.frames_dropped = self.stats.frames_dropped();
            self.tips_due = true;
            Body::Health(h)
        } else if let Some(d) = self.status.take() {
            Body::DeviceStatus(d)
        } else if let Some(v) = self.next_tips() {
            Body::TipHealth(v)
        } else if !self.extras.is_empty() && self.extras.len() >= self.windows.len() {
            // Every queued result has its extras: full windows.
            let mut fs = crate::wire::FullWindows::new();
            while !fs.is_full() {
                match (self.windows.pop_front(), self.extras.pop_front()) {
                    (Some(result), Some(extras)) => {
                        let _ = fs.push(crate::wire::FullWindow { result, extras });
                    }
                    _ => break,
                }
            }
            self.stats.windows_sent = self.stats.windows_sent.saturating_add(fs.len() as u64);
            Body::FullWindows(fs)
        } else if !self.windows.is_empty() {
            // The oldest results, queued before full windows were on, go as kind 0x02.
            let plain = self.windows.len() - self.extras.len().min(self.windows.len());
            let mut ws = Windows::new();
            while ws.len() < MAX_WINDOWS_PER_FRAME.min(plain.max(1)) {
                match self.windows.pop_front() {
                    Some(w) => {
                        let _ = ws.push(w);
                    }
                    None => break,
                }
            }
            self.stats.windows_sent = self.stats.windows_sent.saturating_add(ws.len() as u64);
            Body::Windows(ws)
        } else if !self.derived.is_empty() {
            let mut ds = DerivedBatch::new();
            while ds.len() < MAX_WINDOWS_PER_FRAME {
                match self.derived.pop_front() {
                    Some(d) => {
                        let _ = ds.push(d);
                    }
                    None => break,
                }
            }
            Body::Derived(ds)
        } else {
            return false;
        };
        let frame = Frame {
            device: self.cfg.device,
            seq: self.seq,
            body,
        };
        match encode(&frame, &mut self.tx) {
            Ok(bytes) => {
                self.tx_len = bytes.len();
                self.tx_pos = 0;
                self.seq = self.seq.wrapping_add(1);
                self.stats.frames_sent = self.stats.frames_sent.saturating_add(1);
                true
            }
            Err(_) => {
                self.stats.encode_errors = self.stats.encode_errors.saturating_add(1);
                self.tx_len = 0;
                self.tx_pos = 0;
                false
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wire::decoder::{Decoder, FeedResult};

    fn window(probe: u8, start: u64) -> WindowResult {
        WindowResult {
            probe,
            start,
            frames: 1000,
            void_fraction: 2500,
            bubble_rate: 10_000,
            bubbles: 5,
            chords: None,
            correlation: None,
            flags: 0,
        }
    }

    #[test]
    fn idle_streamer_sends_nothing() {
        let mut s = Streamer::<4>::new(StreamerConfig::uart_8n1(1, 115_200, 1_000_000));
        assert!(s.poll(0, 64).is_none());
        assert!(s.is_idle());
    }

    #[test]
    fn respects_the_byte_budget_and_room() {
        // 1000 bytes/s, time in ms: 1 byte per tick, burst 8.
        let cfg = StreamerConfig {
            device: 1,
            link_bytes_per_s: 1000,
            ticks_per_s: 1000,
            burst_bytes: 8,
        };
        let mut s = Streamer::<4>::new(cfg);
        s.offer(Body::window(window(0, 0)));
        assert_eq!(s.poll(0, 64).map(<[u8]>::len), Some(8));
        assert!(s.poll(0, 64).is_none());
        assert_eq!(s.poll(3, 64).map(<[u8]>::len), Some(3));
        assert_eq!(s.poll(100, 2).map(<[u8]>::len), Some(2));
    }

    #[test]
    fn drops_oldest_windows_and_reports_them_in_health() {
        let cfg = StreamerConfig {
            device: 3,
            link_bytes_per_s: 0,
            ticks_per_s: 1,
            burst_bytes: 1,
        };
        let mut s = Streamer::<2>::new(cfg);
        for i in 0..5 {
            s.offer(Body::window(window(0, i * 1000)));
        }
        assert_eq!(s.stats().windows_dropped, 3);
        s.offer(Body::Health(Health::default()));
        let mut dec: Decoder = Decoder::new();
        let mut got = heapless::Vec::<Frame, 4>::new();
        while let Some(bytes) = s.poll(0, 1000) {
            let mut rest = bytes;
            while !rest.is_empty() {
                let r = dec.feed(rest);
                rest = r.remaining();
                if let FeedResult::Frame { frame, .. } = r {
                    got.push(frame).unwrap();
                }
            }
        }
        // Health first (it carries the drop count), then the two newest windows in one frame.
        assert_eq!(got.len(), 2);
        match &got[0].body {
            Body::Health(h) => assert_eq!((h.windows_dropped, h.frames_dropped), (3, 0)),
            other => panic!("{other:?}"),
        }
        match &got[1].body {
            Body::Windows(ws) => {
                assert_eq!(ws.len(), 2);
                assert_eq!((ws[0].start, ws[1].start), (3000, 4000));
            }
            other => panic!("{other:?}"),
        }
        assert_eq!((got[0].seq, got[1].seq), (0, 1));
    }
}
