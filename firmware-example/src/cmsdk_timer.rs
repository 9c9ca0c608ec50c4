//! A CMSDK APB timer of the emulated board (TIMER0 at 0x4000_0000) as a free-running clock.
//!
//! Registers: CTRL +0x0 (bit 0 enable, bit 3 interrupt enable), VALUE +0x4 (counts down at
//! PCLK, 25 MHz on mps2-an386), RELOAD +0x8, INTSTATUS/INTCLEAR +0xC. Loaded with
//! `u32::MAX` and reloading to it, the inverted VALUE is a wrapping up-count: 171 s per
//! wrap, and under QEMU's `-icount shift=0` (one instruction per nanosecond) one tick is 40
//! instructions.

use crate::acquire::Clock;
use crate::sys::{RegBlock, RoReg};

const CTRL: usize = 0x0;
const VALUE: usize = 0x4;
const RELOAD: usize = 0x8;
const ENABLE: u32 = 1 << 0;

/// The timer's clock, Hz (the board's PCLK).
pub const PCLK_HZ: u32 = 25_000_000;

/// The timer, counting.
#[derive(Debug)]
pub struct CmsdkTimer {
    regs: RegBlock,
}

impl CmsdkTimer {
    /// Start the timer free-running.
    pub fn free_running(regs: RegBlock) -> Self {
        regs.write(CTRL, 0);
        regs.write(RELOAD, u32::MAX);
        regs.write(VALUE, u32::MAX);
        regs.write(CTRL, ENABLE);
        CmsdkTimer { regs }
    }
}

impl CmsdkTimer {
    /// A second, read-only handle on the count (for the interrupt handler).
    pub fn reader(&self) -> TimerReader {
        TimerReader(self.regs.read_only(VALUE))
    }
}

/// A read-only handle on a running timer's count.
#[derive(Clone, Copy, Debug)]
pub struct TimerReader(RoReg);

impl Clock for TimerReader {
    const HZ: u32 = PCLK_HZ;

    fn now(&self) -> u32 {
        !self.0.read()
    }
}

impl Clock for CmsdkTimer {
    const HZ: u32 = PCLK_HZ;

    fn now(&self) -> u32 {
        !self.regs.read(VALUE)
    }
}
