//! The field log's region on the NUCLEO-F411RE: sectors 5 to 7 of the STM32F411RE's own
//! flash, as an `embedded_storage` NOR flash of their own (offset 0 = 0x0802_0000).
//!
//! Sector map of the 512 KiB part (RM0383, the STM32F411xC/E reference manual, "Flash
//! module organization"; from memory): sectors 0 to 3 of 16 KiB at 0x0800_0000, sector 4
//! of 64 KiB at 0x0801_0000, sectors 5 to 7 of 128 KiB at 0x0802_0000, 0x0804_0000 and
//! 0x0806_0000. The code and its constants stay in sectors 0 to 4 (`memory-nucleo-f411re.x`
//! gives the linker 128 KiB), so the log never erases what runs.
//!
//! Erases and writes go through stm32f4xx-hal's `UnlockedFlash` (its `NorFlash`
//! implementation erases whole sectors and programs bytes), unlocked for each operation
//! and locked again right after; reads through `LockedFlash` (memory-mapped). Every access
//! is checked against the region and the grid first and refused with an error: nothing
//! here panics on an offset. (The HAL asserts that the unlock sequence took, and leaves
//! the status register's error flags set after a failed operation, so later operations
//! report that error again until a reset.)
//!
//! While a sector is erased (1 to 2 s for 128 KiB; the STM32F411xC/E data sheet's flash
//! characteristics, from memory) or bytes are programmed, any read of the flash stalls the
//! bus: the CPU, and the interrupts whose code is in flash, wait. The field logger erases
//! only between captures for that reason (see `field_log.rs`).

use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};
use stm32f4xx_hal::flash::{FlashExt, LockedFlash};
use stm32f4xx_hal::pac::FLASH;

/// Start of the region, bytes from the start of the flash (sector 5, 0x0802_0000).
pub const REGION_START: u32 = 0x0002_0000;
/// Sector (erase unit) size of the region, bytes.
pub const SECTOR_BYTES: usize = 128 * 1024;
/// Sectors of the region (5, 6 and 7).
pub const SECTORS: usize = 3;
/// Bytes of the region.
pub const REGION_BYTES: usize = SECTORS * SECTOR_BYTES;
/// Write unit the region takes, bytes: the log's own unit (the HAL programs bytes).
pub const WRITE_BYTES: usize = 4;

/// A refused or failed access.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RegionError(NorFlashErrorKind);

impl NorFlashError for RegionError {
    fn kind(&self) -> NorFlashErrorKind {
        self.0
    }
}

/// Sectors 5 to 7 of the MCU's flash.
pub struct LogRegion {
    flash: LockedFlash,
}

impl LogRegion {
    /// The region on `flash`; `None` when the part's flash (its size register) does not
    /// reach the end of the region (a 256 KiB STM32F411xC).
    pub fn new(flash: FLASH) -> Option<Self> {
        let flash = LockedFlash::new(flash);
        let end = REGION_START as usize + REGION_BYTES;
        (flash.len() >= end).then_some(LogRegion { flash })
    }

    /// The offset of `len` bytes at `offset`, checked against the region and `grid`.
    fn check(offset: u32, len: usize, grid: usize) -> Result<u32, RegionError> {
        let at = offset as usize;
        let end = at
            .checked_add(len)
            .filter(|&e| e <= REGION_BYTES)
            .ok_or(RegionError(NorFlashErrorKind::OutOfBounds))?;
        if at % grid != 0 || end % grid != 0 {
            return Err(RegionError(NorFlashErrorKind::NotAligned));
        }
        Ok(REGION_START + offset)
    }

    fn hal(e: stm32f4xx_hal::flash::Error) -> RegionError {
        RegionError(e.kind())
    }
}

impl ErrorType for LogRegion {
    type Error = RegionError;
}

impl ReadNorFlash for LogRegion {
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), RegionError> {
        let at = Self::check(offset, bytes.len(), 1)?;
        ReadNorFlash::read(&mut self.flash, at, bytes).map_err(Self::hal)
    }

    fn capacity(&self) -> usize {
        REGION_BYTES
    }
}

impl NorFlash for LogRegion {
    const WRITE_SIZE: usize = WRITE_BYTES;
    const ERASE_SIZE: usize = SECTOR_BYTES;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), RegionError> {
        let len = (to as usize)
            .checked_sub(from as usize)
            .ok_or(RegionError(NorFlashErrorKind::OutOfBounds))?;
        let at = Self::check(from, len, SECTOR_BYTES)?;
        if len == 0 {
            return Ok(());
        }
        let mut unlocked = self.flash.unlocked();
        NorFlash::erase(&mut unlocked, at, at + len as u32).map_err(Self::hal)
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), RegionError> {
        let at = Self::check(offset, bytes.len(), WRITE_BYTES)?;
        if bytes.is_empty() {
            return Ok(());
        }
        let mut unlocked = self.flash.unlocked();
        NorFlash::write(&mut unlocked, at, bytes).map_err(Self::hal)
    }
}
