//! A NOR flash stand-in in RAM for the emulated board's field log.
//!
//! QEMU's mps2-an386 has no flash controller the firmware can program, so the field log
//! ([`frothline_core::logbook::Logbook`]) runs on this region instead. It keeps the rules
//! the log relies on from a real NOR part (common practice, no source): erase sets a whole
//! sector to 0xFF; a write may only clear bits (the new content is the old AND the data);
//! writes start and end on the write unit, erases on sector boundaries. A write that would
//! set a bit is not an error on real parts either, it just leaves the bit cleared, so this
//! model does the same. On a real board the same `Logbook` runs over the MCU's flash (or an
//! external SPI NOR) through the HAL's `embedded-storage` implementation.

use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};

/// Write unit, bytes (as the STM32F4's word programming).
pub const WRITE_BYTES: usize = 4;
/// Sector (erase unit), bytes.
pub const SECTOR_BYTES: usize = 4096;

/// An error of the region: an access outside it or off the write/erase grid.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RamNorError(NorFlashErrorKind);

impl NorFlashError for RamNorError {
    fn kind(&self) -> NorFlashErrorKind {
        self.0
    }
}

/// `N` bytes of NOR-like storage (a whole number of sectors).
pub struct RamNor<const N: usize> {
    bytes: [u8; N],
}

impl<const N: usize> RamNor<N> {
    /// A region of zeros (unerased; [`erase_all`](Self::erase_all) before use, as a
    /// factory-fresh part would arrive erased). Const, so a static of it is in `.bss`.
    pub const fn new() -> Self {
        const { assert!(N % SECTOR_BYTES == 0 && N >= 2 * SECTOR_BYTES) };
        RamNor { bytes: [0; N] }
    }

    /// Erase the whole region (0xFF).
    pub fn erase_all(&mut self) {
        self.bytes.fill(0xFF);
    }

    /// The raw content: the image a debug probe would read out of a real part.
    pub fn image(&self) -> &[u8] {
        &self.bytes
    }

    fn check(&self, offset: u32, len: usize, grid: usize) -> Result<usize, RamNorError> {
        let start = offset as usize;
        let end = start
            .checked_add(len)
            .filter(|&e| e <= N)
            .ok_or(RamNorError(NorFlashErrorKind::OutOfBounds))?;
        if start % grid != 0 || end % grid != 0 {
            return Err(RamNorError(NorFlashErrorKind::NotAligned));
        }
        Ok(start)
    }
}

impl<const N: usize> Default for RamNor<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> ErrorType for RamNor<N> {
    type Error = RamNorError;
}

impl<const N: usize> ReadNorFlash for RamNor<N> {
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), RamNorError> {
        let start = self.check(offset, bytes.len(), 1)?;
        bytes.copy_from_slice(&self.bytes[start..start + bytes.len()]);
        Ok(())
    }

    fn capacity(&self) -> usize {
        N
    }
}

impl<const N: usize> NorFlash for RamNor<N> {
    const WRITE_SIZE: usize = WRITE_BYTES;
    const ERASE_SIZE: usize = SECTOR_BYTES;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), RamNorError> {
        let len = (to as usize)
            .checked_sub(from as usize)
            .ok_or(RamNorError(NorFlashErrorKind::OutOfBounds))?;
        let start = self.check(from, len, SECTOR_BYTES)?;
        self.bytes[start..start + len].fill(0xFF);
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), RamNorError> {
        let start = self.check(offset, bytes.len(), WRITE_BYTES)?;
        for (cell, b) in self.bytes[start..start + bytes.len()].iter_mut().zip(bytes) {
            *cell &= *b;
        }
        Ok(())
    }
}
