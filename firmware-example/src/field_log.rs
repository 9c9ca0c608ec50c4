//! The unattended field logger: wait for a front, keep what came just before it, and
//! store the results after it in a power-loss-safe log on flash.
//!
//! ```text
//! records, fronts, profiles, health -> wire frames (frothline_core::wire::encode)
//!   -> FieldLogger: Armed   -> pre-trigger ring of the last PRE_TRIGGER_FRAMES frames
//!                   a front -> ring + front frame into the log, then CAPTURE_FRAMES more
//!   -> Logbook on NOR flash (frothline_core::logbook): a record is on flash in full
//!      once `append` returned, whatever power does afterwards
//! ```
//!
//! The log holds the frames exactly as they would go over the UART, so the host reads an
//! image of the flash region back with `frothline logbook IMAGE --out DIR` into the same
//! CSV files a live session gives. Board-independent: any `NorFlash` will do (the
//! emulated board uses [`crate::ram_nor::RamNor`]).
//!
//! Window results of one window close (all probes, same start) share one frame, as on the
//! UART; the batch goes out when the next window starts, when it holds
//! [`MAX_WINDOWS_PER_FRAME`] results, or at [`FieldLog::flush`].
//!
//! The logger is mounted idle and armed when the run begins (the settings' `logger_armed`).
//! The device status the main loop sends after each health frame (wire kind 0x0C) goes
//! straight into the log whenever the logger's state differs from the one last logged
//! (armed, capturing, armed again): the log's own record of its states, with the supply
//! and the time since power-up. It is a wire frame like every record, so the log's format
//! is unchanged; `frothline logbook` lists these changes.
//!
//! Erases never fall inside a capture ([`Schedule::Prepared`]): the room of one capture
//! ([`RESERVE_RECORDS`] frames of up to [`RESERVE_RECORD_BYTES`] bytes) is erased ahead at
//! mount, before the board starts its acquisition, and again right after each capture when
//! what is left would not hold another. An erase stalls the main loop (a blocking flash
//! driver; on an STM32F4's own flash the whole CPU), so the samples it costs are dropped
//! between captures, never inside one.

use crate::acquire::HEALTH;
use crate::config::DEVICE_ID;
use crate::pipeline::ResultTap;
use core::sync::atomic::Ordering;
use embedded_storage::nor_flash::NorFlash;
use frothline_core::logbook::{FieldLogger, LogError, LogStats, Logbook, LoggerState, LoggerStats};
use frothline_core::wire::{
    encode, Body, DeviceStatus, Frame, FrontArrival, Health, LoggerStatus, ProfileFit,
    WindowResult, Windows, MAX_FRAME_BYTES, MAX_WINDOWS_PER_FRAME,
};

/// Frames kept from before the front (window results and health), written out with it.
pub const PRE_TRIGGER_FRAMES: usize = 6;
/// Frames logged after the front: at 10 ms windows, one window frame and one profile frame
/// per window plus the probes' front frames and health: about 100 ms of flow.
pub const CAPTURE_FRAMES: u32 = 40;
/// Frames one capture logs, as erased ahead: the ring, the front frame, the results after
/// it, the device description and the two device statuses that mark its start and end.
/// (Each later probe's front restarts the count: a capture
/// that outgrows the room ends where it runs out, counted in `LoggerStats::no_space`.)
pub const RESERVE_RECORDS: u32 = PRE_TRIGGER_FRAMES as u32 + 1 + CAPTURE_FRAMES + 1 + 2;
/// Bytes per frame erased ahead for: the surge capture's frames are 15 to 240 bytes (a
/// frame of 8 window results is the longest).
pub const RESERVE_RECORD_BYTES: usize = 256;

/// When the log may erase.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Schedule {
    /// Erase ahead at mount and after each capture; a capture never erases.
    Prepared,
    /// Erase when a record needs a page, inside a capture too (no erase ahead): what an
    /// erase inside a capture costs is measured with it.
    EraseInCapture,
}

/// Counters of the logger and its log, for the summary.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FieldLogStats {
    /// The logger's counters (triggers, logged, dropped, overwritten).
    pub logger: LoggerStats,
    /// The log's counters since mount.
    pub log: LogStats,
    /// Frames that could not be encoded (none expected: every body fits a frame).
    pub encode_errors: u32,
    /// The first log error seen, if any.
    pub first_error: Option<LogError>,
    /// Device descriptions written (one at the start of each capture).
    pub descriptions: u32,
    /// Device statuses written (one per change of the logger's state).
    pub statuses: u32,
    /// Device statuses left out for want of room erased ahead.
    pub statuses_left_out: u32,
    /// The log had room for a capture without erasing, after the last preparation.
    pub ready: bool,
    /// Preparations that erased ahead or checked pages (at mount, after captures).
    pub prepares: u32,
    /// Frames the acquisition dropped while a capture was in progress.
    pub dropped_frames_in_capture: u32,
}

/// The field logger over a log on `F`.
pub struct FieldLog<F: NorFlash> {
    book: Logbook<F>,
    logger: FieldLogger<PRE_TRIGGER_FRAMES>,
    schedule: Schedule,
    seq: u16,
    batch: Windows,
    encode_errors: u32,
    first_error: Option<LogError>,
    descriptions: u32,
    statuses: u32,
    statuses_left_out: u32,
    /// The logger state of the last status written into the log (its variant: the count of
    /// a capture does not make a change).
    logged_state: Option<core::mem::Discriminant<LoggerState>>,
    ready: bool,
    prepares: u32,
    /// The acquisition's dropped-frame count when the capture in progress began.
    capture_drops_from: Option<u32>,
    dropped_in_capture: u32,
}

impl<F: NorFlash> FieldLog<F> {
    /// Mount the log on `flash` (never fails on content: see `Logbook::mount`) and erase
    /// ahead the room of a capture (with [`Schedule::Prepared`]: this is where the logger
    /// takes its time, so call it before the acquisition starts); idle until
    /// [`ResultTap::arm`].
    /// Each capture starts with the device description, so that a log whose oldest pages
    /// were recycled still tells the host the sample rate and the probes.
    pub fn mount(flash: F, schedule: Schedule) -> Result<Self, LogError> {
        let book = Logbook::mount(flash)?;
        let mut logger = FieldLogger::new(CAPTURE_FRAMES);
        logger.set_reserve(RESERVE_RECORDS, RESERVE_RECORD_BYTES);
        logger.set_erase_in_capture(schedule == Schedule::EraseInCapture);
        let mut log = FieldLog {
            book,
            logger,
            schedule,
            seq: 0,
            batch: Windows::new(),
            encode_errors: 0,
            first_error: None,
            descriptions: 0,
            statuses: 0,
            statuses_left_out: 0,
            logged_state: None,
            ready: false,
            prepares: 0,
            capture_drops_from: None,
            dropped_in_capture: 0,
        };
        if schedule == Schedule::Prepared {
            log.prepare()?;
        }
        Ok(log)
    }

    /// Erase ahead the room of the next capture (not while capturing).
    fn prepare(&mut self) -> Result<(), LogError> {
        self.prepares = self.prepares.saturating_add(1);
        let r = self.logger.prepare(&mut self.book);
        self.ready = matches!(r, Ok(true));
        r.map(|_| ())
    }

    fn capturing(&self) -> bool {
        matches!(self.logger.state(), LoggerState::Capturing { .. })
    }

    /// After a frame: a capture that ended adds its dropped frames, and the room of the
    /// next one is erased ahead now, between captures, if what is left would not hold it.
    /// `drops_before`: the acquisition's dropped frames before the frame was logged (a
    /// capture starts before its first frame is written).
    fn after_frame(&mut self, was_capturing: bool, drops_before: u32) {
        let now = self.capturing();
        if was_capturing && !now {
            if let Some(from) = self.capture_drops_from.take() {
                let d = HEALTH
                    .dropped_frames
                    .load(Ordering::Relaxed)
                    .wrapping_sub(from);
                self.dropped_in_capture = self.dropped_in_capture.saturating_add(d);
            }
            if self.schedule == Schedule::Prepared && !self.logger.ready(&self.book) {
                if let Err(e) = self.prepare() {
                    self.first_error.get_or_insert(e);
                }
            }
        }
        if !was_capturing && now {
            self.capture_drops_from = Some(drops_before);
        }
    }

    /// The logger's state.
    pub fn state(&self) -> LoggerState {
        self.logger.state()
    }

    /// Counters.
    pub fn stats(&self) -> FieldLogStats {
        FieldLogStats {
            logger: *self.logger.stats(),
            log: *self.book.stats(),
            encode_errors: self.encode_errors,
            first_error: self.first_error,
            descriptions: self.descriptions,
            statuses: self.statuses,
            statuses_left_out: self.statuses_left_out,
            ready: self.ready,
            prepares: self.prepares,
            dropped_frames_in_capture: self.dropped_in_capture.saturating_add(
                self.capture_drops_from.map_or(0, |from| {
                    HEALTH
                        .dropped_frames
                        .load(Ordering::Relaxed)
                        .wrapping_sub(from)
                }),
            ),
        }
    }

    /// Give the flash back (after [`ResultTap::flush`]).
    pub fn into_flash(self) -> F {
        self.book.into_inner()
    }

    /// Encode `body` as the next frame and send it where `route` says.
    fn emit(&mut self, body: Body, route: Route) {
        let drops_before = HEALTH.dropped_frames.load(Ordering::Relaxed);
        // Each capture opens with the device description, straight into the log.
        if route == Route::Front && self.logger.state() == LoggerState::Armed {
            self.emit(
                Body::Describe(crate::link::description(crate::link::default_window())),
                Route::Log,
            );
        }
        let frame = Frame {
            device: DEVICE_ID,
            seq: self.seq,
            body,
        };
        self.seq = self.seq.wrapping_add(1);
        let mut buf = [0u8; MAX_FRAME_BYTES];
        let Ok(bytes) = encode(&frame, &mut buf) else {
            self.encode_errors = self.encode_errors.saturating_add(1);
            return;
        };
        let was_capturing = self.capturing();
        let r = match route {
            Route::Logger => self.logger.result(bytes, &mut self.book),
            Route::Front => self.logger.front_detected(bytes, &mut self.book),
            Route::Log => self.logger.append(bytes, &mut self.book).map(|()| {
                self.descriptions = self.descriptions.saturating_add(1);
            }),
            // A status is never worth an erase: it goes into room erased ahead, or is
            // counted and left out.
            Route::Status => match self.book.append_prepared(bytes) {
                Err(LogError::NotPrepared) => {
                    self.statuses_left_out = self.statuses_left_out.saturating_add(1);
                    Ok(())
                }
                r => r.map(|()| {
                    self.statuses = self.statuses.saturating_add(1);
                }),
            },
        };
        match r {
            // Out of prepared room: counted by the logger (`no_space`), not a flash error.
            Ok(()) | Err(LogError::NotPrepared) => {}
            Err(e) => {
                self.first_error.get_or_insert(e);
            }
        }
        if matches!(route, Route::Logger | Route::Front) {
            self.after_frame(was_capturing, drops_before);
        }
    }
}

/// Where [`FieldLog::emit`] sends a frame.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Route {
    /// A result: the logger puts it in the pre-trigger ring or the log, by its state.
    Logger,
    /// A front: it triggers (or extends) a capture.
    Front,
    /// Straight into the log (the device description of a capture).
    Log,
    /// Straight into the log: a device status marking a change of the logger's state.
    Status,
}

/// Count the records a log on `flash` holds (a fresh mount, as after a power cycle).
pub fn count_records<F: NorFlash>(flash: F) -> Result<(u32, F), LogError> {
    let mut book = Logbook::mount(flash)?;
    let n = book.records().count() as u32;
    Ok((n, book.into_inner()))
}

impl<F: NorFlash> ResultTap for FieldLog<F> {
    /// Window results of one window close share a frame (see the module docs).
    fn window(&mut self, w: WindowResult) {
        if self
            .batch
            .first()
            .is_some_and(|first| first.start != w.start)
            || self.batch.len() == MAX_WINDOWS_PER_FRAME
        {
            self.flush();
        }
        // Cannot fail: flushed above when full.
        let _ = self.batch.push(w);
    }

    /// The first probe's front triggers the capture (later ones are logged and restart
    /// the capture count, see `FieldLogger::front_detected`).
    fn front(&mut self, f: FrontArrival) {
        self.flush();
        self.emit(Body::Front(f), Route::Front);
    }

    fn profile(&mut self, p: ProfileFit) {
        self.flush();
        self.emit(Body::Profile(p), Route::Logger);
    }

    fn health(&mut self, h: Health) {
        self.flush();
        self.emit(Body::Health(h), Route::Logger);
    }

    fn arm(&mut self) {
        self.logger.arm();
    }

    fn logger(&self) -> Option<LoggerStatus> {
        Some(LoggerStatus {
            state: self.logger.state(),
            used_bytes: self.book.used_bytes() as u32,
            capacity_bytes: self.book.record_capacity() as u32,
        })
    }

    /// Log the status when the logger's state changed since the last one logged (an idle
    /// logger logs nothing: nothing of its run is kept).
    fn status(&mut self, s: DeviceStatus) {
        let Some(state) = s.logger.map(|l| l.state) else {
            return;
        };
        let d = core::mem::discriminant(&state);
        if state == LoggerState::Idle || self.logged_state == Some(d) {
            return;
        }
        self.flush();
        self.logged_state = Some(d);
        self.emit(Body::DeviceStatus(s), Route::Status);
    }

    fn read_region(&mut self, offset: u32, buf: &mut [u8]) -> Option<u32> {
        let total = self.book.capacity() as u32;
        self.book.read_raw(offset, buf).ok()?;
        Some(total)
    }

    fn flush(&mut self) {
        if self.batch.is_empty() {
            return;
        }
        let batch = core::mem::take(&mut self.batch);
        self.emit(Body::Windows(batch), Route::Logger);
    }
}
