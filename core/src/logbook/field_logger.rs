//! The field logger: a pre-trigger ring of the latest frames while armed, and after a front
//! the ring, the front and what follows into the [`Logbook`], in room erased ahead.

use super::{LogError, Logbook, MAX_RECORD_BYTES};
use embedded_storage::nor_flash::NorFlash;
use heapless::HistoryBuf;

/// A stored frame of the pre-trigger ring.
pub type StoredFrame = heapless::Vec<u8, MAX_RECORD_BYTES>;

/// The field logger's state. It goes on the wire in the device status (kind 0x0C) by
/// postcard's variant index, in declaration order: append new states only.
#[derive(
    Clone,
    Copy,
    Debug,
    PartialEq,
    Eq,
    serde::Serialize,
    serde::Deserialize,
    postcard::experimental::max_size::MaxSize,
)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LoggerState {
    /// Not armed: results are dropped.
    Idle,
    /// Waiting for a front: results go into the pre-trigger ring.
    Armed,
    /// After a front: every result is logged; `remaining` results to go.
    Capturing {
        /// Results still to log before returning to `Armed`.
        remaining: u32,
    },
}

/// Counters of a field logger.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoggerStats {
    /// Fronts that triggered a capture.
    pub triggers: u32,
    /// Frames written to the log.
    pub logged: u32,
    /// Frames dropped because the log failed or the frame was too long.
    pub dropped: u32,
    /// Results seen while armed that left the pre-trigger ring unlogged.
    pub overwritten: u32,
    /// Frames of a capture not logged because the log had no erased space left for them
    /// (the logger never erases inside a capture, see [`FieldLogger::prepare`]).
    pub no_space: u32,
    /// Captures ended early for that reason.
    pub captures_cut: u32,
}

/// The unattended field logger: armed, it keeps the last `N` encoded result frames in a
/// pre-trigger ring; at a front ([`front_detected`](Self::front_detected)) it writes the
/// ring, then the front frame, to the log and logs the next `capture_frames` results
/// before it re-arms. Fixed memory: `N` frames of [`MAX_RECORD_BYTES`].
///
/// A capture never erases flash: its frames go in with [`Logbook::append_prepared`], into
/// space made ready by [`prepare`](Self::prepare) while the logger was not capturing (at
/// arm time, and after each capture). When that space runs out inside a capture, the
/// capture ends there and the frames are counted ([`LoggerStats::no_space`]).
pub struct FieldLogger<const N: usize> {
    state: LoggerState,
    ring: HistoryBuf<StoredFrame, N>,
    capture_frames: u32,
    /// Records of up to `reserve_bytes` bytes that [`prepare`](Self::prepare) makes room for.
    reserve_records: u32,
    reserve_bytes: usize,
    /// Erase inside a capture when the log needs it (off unless set).
    erase_in_capture: bool,
    stats: LoggerStats,
}

impl<const N: usize> FieldLogger<N> {
    /// An idle logger that captures `capture_frames` results after each front. It
    /// prepares room for one capture of frames up to [`MAX_RECORD_BYTES`] (the ring, the
    /// front frame, `capture_frames` results and one more); see
    /// [`set_reserve`](Self::set_reserve).
    pub fn new(capture_frames: u32) -> Self {
        FieldLogger {
            state: LoggerState::Idle,
            ring: HistoryBuf::new(),
            capture_frames,
            reserve_records: (N as u32).saturating_add(capture_frames).saturating_add(2),
            reserve_bytes: MAX_RECORD_BYTES,
            erase_in_capture: false,
            stats: LoggerStats::default(),
        }
    }

    /// Prepare room for `records` records of up to `record_bytes` bytes each (the frames
    /// of one capture, with what the caller logs beside them).
    pub fn set_reserve(&mut self, records: u32, record_bytes: usize) {
        self.reserve_records = records;
        self.reserve_bytes = record_bytes.clamp(1, MAX_RECORD_BYTES);
    }

    /// The room [`prepare`](Self::prepare) makes: records, and bytes per record.
    pub fn reserve(&self) -> (u32, usize) {
        (self.reserve_records, self.reserve_bytes)
    }

    /// Let a capture erase when the log needs a page (the log's plain `append`): the
    /// behaviour without scheduling, for measuring what an erase inside a capture costs.
    pub fn set_erase_in_capture(&mut self, on: bool) {
        self.erase_in_capture = on;
    }

    /// True when a capture may erase (see [`set_erase_in_capture`](Self::set_erase_in_capture)).
    pub fn erases_in_capture(&self) -> bool {
        self.erase_in_capture
    }

    /// Erase ahead the room of one capture ([`Logbook::prepare`]), unless a capture is in
    /// progress (then nothing is erased and `false` returned). Call while the logger is
    /// idle, or armed before a front is awaited: an erase stalls the caller. Returns
    /// whether the log has room for a capture.
    pub fn prepare<F: NorFlash>(&mut self, log: &mut Logbook<F>) -> Result<bool, LogError> {
        if matches!(self.state, LoggerState::Capturing { .. }) {
            return Ok(false);
        }
        log.prepare(self.reserve_records, self.reserve_bytes)
    }

    /// True when the log has room for a capture without any erase.
    pub fn ready<F: NorFlash>(&self, log: &Logbook<F>) -> bool {
        log.room_for(self.reserve_records, self.reserve_bytes)
    }

    /// Append a frame of the capture outside the ring (for example a description the
    /// caller puts first), by the capture's rule: no erase unless
    /// [`set_erase_in_capture`](Self::set_erase_in_capture). Not counted as logged.
    pub fn append<F: NorFlash>(&self, frame: &[u8], log: &mut Logbook<F>) -> Result<(), LogError> {
        if self.erase_in_capture {
            log.append(frame)
        } else {
            log.append_prepared(frame)
        }
    }

    /// Arm (from `Idle`; no effect otherwise).
    pub fn arm(&mut self) {
        if self.state == LoggerState::Idle {
            self.state = LoggerState::Armed;
        }
    }

    /// Back to `Idle`, the ring emptied (a capture in progress ends).
    pub fn disarm(&mut self) {
        self.state = LoggerState::Idle;
        self.ring.clear();
    }

    /// The state.
    pub fn state(&self) -> LoggerState {
        self.state
    }

    /// Counters.
    pub fn stats(&self) -> &LoggerStats {
        &self.stats
    }

    /// Frames in the pre-trigger ring.
    pub fn pending(&self) -> usize {
        self.ring.len()
    }

    /// One encoded result frame. Armed: into the ring; capturing: into the log (the last
    /// one of the capture re-arms). A log error is returned after the state was updated.
    pub fn result<F: NorFlash>(
        &mut self,
        frame: &[u8],
        log: &mut Logbook<F>,
    ) -> Result<(), LogError> {
        match self.state {
            LoggerState::Idle => Ok(()),
            LoggerState::Armed => {
                let mut v = StoredFrame::new();
                if v.extend_from_slice(frame).is_err() || frame.is_empty() {
                    self.stats.dropped = self.stats.dropped.saturating_add(1);
                    return Err(LogError::RecordSize);
                }
                if self.ring.is_full() {
                    self.stats.overwritten = self.stats.overwritten.saturating_add(1);
                }
                self.ring.write(v);
                Ok(())
            }
            LoggerState::Capturing { remaining } => {
                let left = remaining.saturating_sub(1);
                self.state = if left == 0 {
                    LoggerState::Armed
                } else {
                    LoggerState::Capturing { remaining: left }
                };
                log_frame(
                    &mut self.stats,
                    &mut self.state,
                    self.erase_in_capture,
                    log,
                    frame,
                )
            }
        }
    }

    /// A front: flush the pre-trigger ring (oldest first) and the front frame `frame` to
    /// the log and capture the next `capture_frames` results. While capturing, it logs the
    /// frame and restarts the count. Idle: ignored. Returns the first log error, after
    /// trying every frame.
    pub fn front_detected<F: NorFlash>(
        &mut self,
        frame: &[u8],
        log: &mut Logbook<F>,
    ) -> Result<(), LogError> {
        if self.state == LoggerState::Idle {
            return Ok(());
        }
        self.stats.triggers = self.stats.triggers.saturating_add(1);
        self.state = if self.capture_frames == 0 {
            LoggerState::Armed
        } else {
            LoggerState::Capturing {
                remaining: self.capture_frames,
            }
        };
        let erase = self.erase_in_capture;
        let mut first = Ok(());
        for f in self.ring.oldest_ordered() {
            let r = log_frame(&mut self.stats, &mut self.state, erase, log, f);
            first = first.and(r);
        }
        self.ring.clear();
        let r = log_frame(&mut self.stats, &mut self.state, erase, log, frame);
        first.and(r)
    }
}

/// Log one frame of a capture (erasing only when `erase`); out of prepared space the
/// capture ends, counted.
fn log_frame<F: NorFlash>(
    stats: &mut LoggerStats,
    state: &mut LoggerState,
    erase: bool,
    log: &mut Logbook<F>,
    frame: &[u8],
) -> Result<(), LogError> {
    let r = if erase {
        log.append(frame)
    } else {
        log.append_prepared(frame)
    };
    match r {
        Ok(()) => stats.logged = stats.logged.saturating_add(1),
        Err(LogError::NotPrepared) => {
            stats.no_space = stats.no_space.saturating_add(1);
            if matches!(state, LoggerState::Capturing { .. }) {
                stats.captures_cut = stats.captures_cut.saturating_add(1);
                *state = LoggerState::Armed;
            }
        }
        Err(_) => stats.dropped = stats.dropped.saturating_add(1),
    }
    r
}
