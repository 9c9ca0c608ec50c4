//! Regions of the NUCLEO-F411RE's own flash as `embedded_storage` NOR flashes of their own
//! (offset 0 = the region's first sector): the settings store over sectors 1 to 3 and the
//! field log over sectors 6 and 7.
//!
//! Sector map of the 512 KiB part (RM0383, the STM32F411xC/E reference manual, "Flash
//! module organization"; from memory): sectors 0 to 3 of 16 KiB at 0x0800_0000, sector 4
//! of 64 KiB at 0x0801_0000, sectors 5 to 7 of 128 KiB at 0x0802_0000, 0x0804_0000 and
//! 0x0806_0000. `memory-nucleo-f411re.x` keeps the vector table in sector 0 and starts the
//! code at sector 4 (`_stext`), with room up to the end of sector 5, so neither region
//! ever erases what runs.
//!
//! Erases and writes go through stm32f4xx-hal's `UnlockedFlash` (its `NorFlash`
//! implementation erases the sectors an offset range covers and programs bytes), unlocked
//! for each operation and locked again right after; reads through `LockedFlash`
//! (memory-mapped). Both regions share one `LockedFlash` ([`SharedFlash`]): they are used
//! from the main loop only, one operation at a time. Every access is checked against the
//! region and the grid first and refused with an error: nothing here panics on an offset.
//! (The HAL asserts that the unlock sequence took, and leaves the status register's error
//! flags set after a failed operation, so later operations report that error again until
//! a reset.)
//!
//! While a sector is erased (1 to 2 s for 128 KiB, 0.25 to 0.5 s for 16 KiB; the
//! STM32F411xC/E data sheet's flash characteristics, from memory) or bytes are programmed,
//! any read of the flash stalls the bus: the CPU, and the interrupts whose code is in
//! flash, wait. The field logger erases only between captures for that reason (see
//! `field_log.rs`); a settings change (SetWindow, SetLevels) during a run may cost the
//! samples of such a stall, which the DMA interrupt counts as dropped.

use core::cell::RefCell;
use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};
use stm32f4xx_hal::flash::{FlashExt, LockedFlash};
use stm32f4xx_hal::pac::FLASH;

/// The MCU's flash, shared by the regions (main loop only).
pub type SharedFlash = RefCell<LockedFlash>;

/// The flash peripheral as a [`SharedFlash`].
pub fn shared(flash: FLASH) -> SharedFlash {
    RefCell::new(LockedFlash::new(flash))
}

/// Write unit the regions take, bytes: the log's own unit (the HAL programs bytes).
pub const WRITE_BYTES: usize = 4;

/// The settings store: sectors 1 to 3 (three 16 KiB sectors from 0x0800_4000).
pub type SettingsRegion = Region<0x0000_4000, { 16 * 1024 }, 3>;
/// The field log: sectors 6 and 7 (two 128 KiB sectors from 0x0804_0000).
pub type LogRegion = Region<0x0004_0000, { 128 * 1024 }, 2>;

/// A refused or failed access.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RegionError(NorFlashErrorKind);

impl NorFlashError for RegionError {
    fn kind(&self) -> NorFlashErrorKind {
        self.0
    }
}

/// `SECTORS` sectors of `SECTOR` bytes each from `START` (bytes from the start of the
/// flash), all of one size.
pub struct Region<const START: u32, const SECTOR: usize, const SECTORS: usize> {
    flash: &'static SharedFlash,
}

impl<const START: u32, const SECTOR: usize, const SECTORS: usize> Region<START, SECTOR, SECTORS> {
    /// Bytes of the region.
    pub const BYTES: usize = SECTOR * SECTORS;

    /// The region on `flash`; `None` when the part's flash (its size register) does not
    /// reach the end of the region (a 256 KiB STM32F411xC for the log).
    pub fn new(flash: &'static SharedFlash) -> Option<Self> {
        let len = flash.try_borrow().ok()?.len();
        (len >= START as usize + Self::BYTES).then_some(Region { flash })
    }

    /// The flash address of `len` bytes at `offset`, checked against the region and `grid`.
    fn check(offset: u32, len: usize, grid: usize) -> Result<u32, RegionError> {
        let at = offset as usize;
        let end = at
            .checked_add(len)
            .filter(|&e| e <= Self::BYTES)
            .ok_or(RegionError(NorFlashErrorKind::OutOfBounds))?;
        if at % grid != 0 || end % grid != 0 {
            return Err(RegionError(NorFlashErrorKind::NotAligned));
        }
        Ok(START + offset)
    }

    /// The flash, refused (not panicking) if an operation on it were still going.
    fn flash(&self) -> Result<core::cell::RefMut<'static, LockedFlash>, RegionError> {
        self.flash
            .try_borrow_mut()
            .map_err(|_| RegionError(NorFlashErrorKind::Other))
    }

    fn hal(e: stm32f4xx_hal::flash::Error) -> RegionError {
        RegionError(e.kind())
    }
}

impl<const START: u32, const SECTOR: usize, const SECTORS: usize> ErrorType
    for Region<START, SECTOR, SECTORS>
{
    type Error = RegionError;
}

impl<const START: u32, const SECTOR: usize, const SECTORS: usize> ReadNorFlash
    for Region<START, SECTOR, SECTORS>
{
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), RegionError> {
        let at = Self::check(offset, bytes.len(), 1)?;
        ReadNorFlash::read(&mut *self.flash()?, at, bytes).map_err(Self::hal)
    }

    fn capacity(&self) -> usize {
        Self::BYTES
    }
}

impl<const START: u32, const SECTOR: usize, const SECTORS: usize> NorFlash
    for Region<START, SECTOR, SECTORS>
{
    const WRITE_SIZE: usize = WRITE_BYTES;
    const ERASE_SIZE: usize = SECTOR;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), RegionError> {
        let len = (to as usize)
            .checked_sub(from as usize)
            .ok_or(RegionError(NorFlashErrorKind::OutOfBounds))?;
        let at = Self::check(from, len, SECTOR)?;
        if len == 0 {
            return Ok(());
        }
        let mut flash = self.flash()?;
        let mut unlocked = flash.unlocked();
        NorFlash::erase(&mut unlocked, at, at + len as u32).map_err(Self::hal)
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), RegionError> {
        let at = Self::check(offset, bytes.len(), WRITE_BYTES)?;
        if bytes.is_empty() {
            return Ok(());
        }
        let mut flash = self.flash()?;
        let mut unlocked = flash.unlocked();
        NorFlash::write(&mut unlocked, at, bytes).map_err(Self::hal)
    }
}
