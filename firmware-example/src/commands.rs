//! Host commands on the firmware: bytes from the UART's receiver go through the core's
//! [`Responder`] (the same command rules as every device: repeats, already running,
//! unknown kinds, versions, malformed bodies, frames not from the host id), and this
//! module says what the firmware does with each command it is asked to carry out.
//!
//! The checks and the frames that must precede the Ack happen here (a RunStart before the
//! Ack of StartRun, a Describe with the new window on SetWindow); the work on the chain is
//! left to the main loop as a [`Pending`] step, carried out right after the answer is
//! queued and before the next block is pushed, so it takes effect at a block boundary:
//! - StartRun: a new run (number + 1, label, UTC), the chain configured afresh from the
//!   stored settings, frame 0 of the run at the next block;
//! - StopRun: the open window closed (flag `partial_window`), the chain's last results
//!   sent; blocks are read and discarded until the next StartRun;
//! - SetWindow, Relearn, SetLevels: the open window closed and the chain configured afresh
//!   with the new settings, the run's sample clock going on (windows aligned on the frame
//!   where the command took effect); SetWindow and SetLevels are stored in flash;
//! - SetClock: the device's UTC clock set (kept on the sample clock from then on);
//! - DescribeRequest: a description queued.
//!
//! After a description and after SetLevels, Relearn and SetWindow, the levels every tip
//! uses (kind 0x0A) follow, read from the chain once it has been configured afresh.

use crate::config::PROBES;
use crate::link::Link;
use crate::settings::{front_relative, Settings};
use embedded_io::Write;
use frothline_core::wire::{
    CommandTarget, LogChunk, NackReason, RunStart, SetLevels, StartRun, WindowSetting,
    LOG_CHUNK_BYTES,
};
use frothline_core::ChainConfig;

/// Work a command leaves to the main loop.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Pending {
    /// Close the open window and send the chain's last results.
    pub close: bool,
    /// Configure the chain afresh from the settings (after closing it).
    pub rebuild: bool,
    /// The rebuild starts a new run (frame 0 of the run at the next block).
    pub new_run: bool,
    /// The settings changed: store them.
    pub save: bool,
    /// Send the levels every tip uses (kind 0x0A) once the rest is done: after a
    /// description, and after the levels changed.
    pub levels: bool,
}

/// The device's UTC clock: the host's UTC at a frame of the sample clock.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct UtcClock {
    /// UTC, ms since 1970-01-01T00:00:00Z, at `at_frame`.
    pub utc_ms: u64,
    /// The frame of the sample clock (frames since sampling started) it was set at.
    pub at_frame: u64,
}

impl UtcClock {
    /// UTC at frame `frame` of the sample clock, at `rate_hz` frames per second.
    pub fn at(&self, frame: u64, rate_hz: u32) -> u64 {
        let d = frame.saturating_sub(self.at_frame);
        self.utc_ms
            .saturating_add(d.saturating_mul(1000) / (rate_hz.max(1) as u64))
    }
}

/// The run and what the main loop has to do for the commands carried out.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RunState {
    /// A run is going.
    pub running: bool,
    /// The number of the current (or last) run: 1 for the run started at power-on.
    pub run: u32,
    /// StopRuns carried out.
    pub stops: u32,
    /// StartRuns carried out.
    pub starts: u32,
    /// Work for the main loop.
    pub pending: Pending,
    /// The UTC clock, once a host set it.
    pub clock: Option<UtcClock>,
}

impl RunState {
    /// The run started at power-on.
    pub const fn started() -> Self {
        RunState {
            running: true,
            run: 1,
            stops: 0,
            starts: 0,
            pending: Pending {
                close: false,
                rebuild: false,
                new_run: false,
                save: false,
                levels: false,
            },
            clock: None,
        }
    }
}

/// The firmware as the responder's target.
pub struct FwTarget<'a, W, const P: usize> {
    /// The link, for the frames a command asks for.
    pub link: &'a mut Link<W>,
    /// The run.
    pub run: &'a mut RunState,
    /// The settings (changed in place; stored by the main loop).
    pub settings: &'a mut Settings,
    /// The configuration of the capture the settings apply to (probes, polarities).
    pub config: &'a ChainConfig<P>,
    /// The sample clock now: frames since sampling started.
    pub now_frames: u64,
    /// Frames per second.
    pub rate_hz: u32,
    /// The field log, if the board keeps one (ReadLog).
    pub log: Option<&'a mut dyn crate::pipeline::ResultTap>,
}

impl<W: Write, const P: usize> FwTarget<'_, W, P> {
    fn check_window(
        &self,
        setting: WindowSetting,
    ) -> Result<frothline_core::WindowPolicy, NackReason> {
        let policy = setting
            .to_policy()
            .map(|p| front_relative(p, self.config.station.is_some(), self.config.window))
            .filter(|p| p.is_valid())
            .ok_or(NackReason::BadArgument)?;
        let probes = self.config.probes.len().min(PROBES);
        match policy {
            frothline_core::WindowPolicy::Bubbles { probe, .. } if probe as usize >= probes => {
                Err(NackReason::BadArgument)
            }
            // Bubble windows are not counted from a front; front windows need a station.
            frothline_core::WindowPolicy::Bubbles { .. } if self.config.station.is_some() => {
                Err(NackReason::BadArgument)
            }
            frothline_core::WindowPolicy::AfterFront { .. } if self.config.station.is_none() => {
                Err(NackReason::BadArgument)
            }
            p => Ok(p),
        }
    }

    fn changed(&mut self, save: bool) {
        let p = &mut self.run.pending;
        if self.run.running {
            p.close = true;
        }
        // Outside a run too, so that the levels reported are the ones the next run uses.
        p.rebuild = true;
        p.save |= save;
        p.levels = true;
    }
}

impl<W: Write, const P: usize> CommandTarget for FwTarget<'_, W, P> {
    fn running(&self) -> bool {
        self.run.running
    }

    fn start_run(&mut self, cmd: &StartRun) -> Result<(), NackReason> {
        if let Some(utc_ms) = cmd.utc_ms {
            self.run.clock = Some(UtcClock {
                utc_ms,
                at_frame: self.now_frames,
            });
        }
        self.run.running = true;
        self.run.run = self.run.run.saturating_add(1);
        self.run.starts = self.run.starts.saturating_add(1);
        self.run.pending.rebuild = true;
        self.run.pending.new_run = true;
        let utc_ms = self.run.clock.map(|c| c.at(self.now_frames, self.rate_hz));
        self.link.run_start(RunStart {
            run: self.run.run,
            label: cmd.label.clone(),
            uptime_frames: self.now_frames,
            utc_ms,
        });
        Ok(())
    }

    fn stop_run(&mut self) -> Result<(), NackReason> {
        self.run.running = false;
        self.run.stops = self.run.stops.saturating_add(1);
        self.run.pending.close = true;
        // A StartRun and a StopRun between two blocks: nothing to rebuild.
        self.run.pending.rebuild = false;
        self.run.pending.new_run = false;
        Ok(())
    }

    fn set_window(&mut self, setting: WindowSetting) -> Result<(), NackReason> {
        let policy = self.check_window(setting)?;
        self.settings.window = policy;
        self.link.set_window(policy);
        self.link.describe();
        self.changed(true);
        Ok(())
    }

    fn relearn(&mut self, probes: u32) -> Result<(), NackReason> {
        let n = self.config.probes.len().min(PROBES);
        let all = if n >= 32 { u32::MAX } else { (1u32 << n) - 1 };
        if probes & all == 0 {
            return Err(NackReason::BadArgument);
        }
        // Every probe re-learns (the core has no per-probe re-learn); fixed levels stay.
        self.changed(false);
        Ok(())
    }

    fn describe(&mut self) -> Result<(), NackReason> {
        self.link.describe();
        self.run.pending.levels = true;
        Ok(())
    }

    fn read_log(&mut self, offset: u32) -> Result<(), NackReason> {
        let log = self.log.as_mut().ok_or(NackReason::UnknownCommand)?;
        // The region's size first (a read of no bytes), then the chunk.
        let total = log
            .read_region(0, &mut [])
            .ok_or(NackReason::UnknownCommand)?;
        if offset >= total {
            return Err(NackReason::BadArgument);
        }
        let n = (total - offset).min(LOG_CHUNK_BYTES as u32) as usize;
        let mut buf = [0u8; LOG_CHUNK_BYTES];
        let chunk = buf.get_mut(..n).ok_or(NackReason::BadArgument)?;
        log.read_region(offset, chunk).ok_or(NackReason::Busy)?;
        let mut data = heapless::Vec::new();
        let _ = data.extend_from_slice(chunk);
        self.link.log_chunk(LogChunk {
            offset,
            total,
            data,
        });
        Ok(())
    }

    fn set_clock(&mut self, utc_ms: u64) -> Result<(), NackReason> {
        self.run.clock = Some(UtcClock {
            utc_ms,
            at_frame: self.now_frames,
        });
        Ok(())
    }

    fn set_levels(&mut self, l: &SetLevels) -> Result<(), NackReason> {
        let before = *self.settings;
        if !self
            .settings
            .set_levels(self.config, l.probe, l.trailing, l.air, l.water)
        {
            return Err(NackReason::BadArgument);
        }
        // The same levels again change nothing.
        if *self.settings != before {
            self.changed(true);
        }
        Ok(())
    }
}
