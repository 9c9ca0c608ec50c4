//! A NOR flash whose erase takes as long as a real part's: a wrapper over the emulated
//! board's flash stand-in ([`crate::ram_nor::RamNor`]) that, after erasing, busy-waits the
//! part's sector erase time on the board's clock, so the caller is held as a blocking flash
//! driver holds it. Held in the main loop, the acquisition interrupt finds no free block
//! and counts the samples it drops ([`crate::acquire::HEALTH`]), as on a board whose main
//! loop waits for a flash erase.
//!
//! The time modelled: a 4 KiB sector erase of a common serial NOR flash (Winbond W25Q
//! family data sheets, tSE, from memory: 45 ms typical, 400 ms at most), [`SECTOR_ERASE_MS`]
//! per sector. Page programming (under 1 ms per 256 bytes in the same data sheets) is not
//! modelled. Under QEMU's `-icount` the board's clock follows the instruction count, so the
//! stall, and the samples it costs, are the same on every run.

use crate::acquire::Clock;
use embedded_storage::nor_flash::{ErrorType, NorFlash, ReadNorFlash};

/// Sector erase time modelled, ms (typical of a W25Q-class 4 KiB sector erase).
pub const SECTOR_ERASE_MS: u32 = 45;

/// `F` with erases that hold the caller [`SECTOR_ERASE_MS`] per sector (or not at all
/// with a stall of 0).
pub struct StallNor<F, C> {
    inner: F,
    clock: C,
    /// Clock ticks per sector erased.
    stall_ticks: u32,
    erases: u32,
    stalled_ticks: u64,
}

impl<F: NorFlash, C: Clock> StallNor<F, C> {
    /// `inner` with erases stalled `ms_per_sector` ms each (0: no stall), timed on `clock`.
    pub fn new(inner: F, clock: C, ms_per_sector: u32) -> Self {
        let stall_ticks = (C::HZ as u64 * ms_per_sector as u64 / 1000).min(u32::MAX as u64) as u32;
        StallNor {
            inner,
            clock,
            stall_ticks,
            erases: 0,
            stalled_ticks: 0,
        }
    }

    /// Sectors erased so far.
    pub fn erases(&self) -> u32 {
        self.erases
    }

    /// Clock ticks spent stalled in erases so far.
    pub fn stalled_ticks(&self) -> u64 {
        self.stalled_ticks
    }

    /// The wrapped flash.
    pub fn into_inner(self) -> F {
        self.inner
    }

    fn stall(&mut self, sectors: u32) {
        for _ in 0..sectors {
            let t0 = self.clock.now();
            while self.clock.now().wrapping_sub(t0) < self.stall_ticks {}
            self.stalled_ticks += self.clock.now().wrapping_sub(t0) as u64;
        }
    }
}

impl<F: ErrorType, C> ErrorType for StallNor<F, C> {
    type Error = F::Error;
}

impl<F: NorFlash, C: Clock> ReadNorFlash for StallNor<F, C> {
    const READ_SIZE: usize = F::READ_SIZE;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        self.inner.read(offset, bytes)
    }

    fn capacity(&self) -> usize {
        self.inner.capacity()
    }
}

impl<F: NorFlash, C: Clock> NorFlash for StallNor<F, C> {
    const WRITE_SIZE: usize = F::WRITE_SIZE;
    const ERASE_SIZE: usize = F::ERASE_SIZE;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        self.inner.erase(from, to)?;
        let sectors = (to.saturating_sub(from) as usize / F::ERASE_SIZE.max(1)) as u32;
        self.erases = self.erases.saturating_add(sectors);
        self.stall(sectors);
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        self.inner.write(offset, bytes)
    }
}
