//! Host commands on the firmware: bytes from the UART's receiver go through the core's
//! [`Responder`] (the same command rules as every device: repeats, already running,
//! unknown kinds, versions, malformed bodies, frames not from the host id), and this
//! module says what the example firmware does with each command it is asked to carry out.
//!
//! The example plays its embedded capture once, as one run started at power-on, so:
//! StopRun ends that run (the main loop sees [`RunState::stop`]); StartRun after it is
//! refused `busy` (a new play needs a reset); DescribeRequest queues a description;
//! SetWindow and Relearn are checked (`bad_argument` for a zero window, a bubble probe or
//! a mask naming no probe) and refused `busy`: this firmware does not rebuild its chain
//! during a run. A StartRun during the run is `already_running` (the responder's rule).

use crate::config::PROBES;
use crate::link::Link;
use embedded_io::Write;
use frothline_core::wire::{CommandTarget, NackReason, StartRun, WindowSetting};

/// The run of the example: going from power-on until StopRun or the end of the capture.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RunState {
    /// A run is going.
    pub running: bool,
    /// A StopRun was carried out: the main loop ends the run.
    pub stop: bool,
}

impl RunState {
    /// The run started at power-on.
    pub const fn started() -> Self {
        RunState {
            running: true,
            stop: false,
        }
    }
}

/// The firmware as the responder's target.
pub struct FwTarget<'a, W> {
    /// The link, for the frames a command asks for.
    pub link: &'a mut Link<W>,
    /// The run.
    pub run: &'a mut RunState,
}

impl<W: Write> CommandTarget for FwTarget<'_, W> {
    fn running(&self) -> bool {
        self.run.running
    }

    fn start_run(&mut self, _cmd: &StartRun) -> Result<(), NackReason> {
        Err(NackReason::Busy)
    }

    fn stop_run(&mut self) -> Result<(), NackReason> {
        self.run.running = false;
        self.run.stop = true;
        Ok(())
    }

    fn set_window(&mut self, setting: WindowSetting) -> Result<(), NackReason> {
        let valid = setting.to_policy().is_some_and(|p| p.is_valid());
        let probe_ok = match setting {
            WindowSetting::Bubbles { probe, .. } => (probe as usize) < PROBES,
            _ => true,
        };
        if !valid || !probe_ok {
            return Err(NackReason::BadArgument);
        }
        Err(NackReason::Busy)
    }

    fn relearn(&mut self, probes: u32) -> Result<(), NackReason> {
        let all = (1u32 << PROBES) - 1;
        if probes & all == 0 {
            return Err(NackReason::BadArgument);
        }
        Err(NackReason::Busy)
    }

    fn describe(&mut self) -> Result<(), NackReason> {
        self.link.describe();
        Ok(())
    }
}
