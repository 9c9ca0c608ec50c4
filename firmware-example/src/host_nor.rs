//! A NOR flash stand-in kept in a file on the semihosting host (emulated board only), so
//! that what the firmware writes survives a reboot of the emulated board: QEMU's
//! mps2-an386 has no programmable flash. It behaves as NOR flash does: erased bytes read
//! 0xFF, a write can only clear bits (the old content is read and ANDed with the new), an
//! erase sets a whole 4 KiB sector back to 0xFF. A file shorter than the region (or none)
//! is a factory-fresh part: it is created and filled with 0xFF.
//!
//! Writes and erases are host calls, cheap next to the stalls of a real part; this
//! stand-in is for keeping state across reboots, not for timing.

use crate::sys::host_file;
use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};

/// The write unit, bytes.
pub const WRITE_BYTES: usize = 4;
/// The erase unit, bytes.
pub const SECTOR_BYTES: usize = 4096;
const CHUNK: usize = 64;

/// A failed access: out of bounds, misaligned, or the host refused the file operation.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct HostNorError(NorFlashErrorKind);

impl NorFlashError for HostNorError {
    fn kind(&self) -> NorFlashErrorKind {
        self.0
    }
}

/// `N` bytes of NOR flash in the host file it was opened on.
pub struct HostNor<const N: usize> {
    fd: usize,
}

impl<const N: usize> HostNor<N> {
    /// Open (or create erased) the file `path`, NUL-terminated.
    pub fn open(path: &[u8]) -> Option<Self> {
        if let Some(fd) = host_file::open(path, false) {
            if host_file::len(fd) == Some(N) {
                return Some(HostNor { fd });
            }
        }
        let fd = host_file::open(path, true)?;
        let ff = [0xFFu8; CHUNK];
        let mut at = 0;
        while at < N {
            let n = CHUNK.min(N - at);
            if !host_file::write(fd, &ff[..n]) {
                return None;
            }
            at += n;
        }
        Some(HostNor { fd })
    }

    fn check(offset: u32, len: usize, align: usize) -> Result<usize, HostNorError> {
        let at = offset as usize;
        if at % align != 0 || len % align != 0 {
            return Err(HostNorError(NorFlashErrorKind::NotAligned));
        }
        match at.checked_add(len) {
            Some(end) if end <= N => Ok(at),
            _ => Err(HostNorError(NorFlashErrorKind::OutOfBounds)),
        }
    }

    fn io(ok: bool) -> Result<(), HostNorError> {
        if ok {
            Ok(())
        } else {
            Err(HostNorError(NorFlashErrorKind::Other))
        }
    }
}

impl<const N: usize> ErrorType for HostNor<N> {
    type Error = HostNorError;
}

impl<const N: usize> ReadNorFlash for HostNor<N> {
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), HostNorError> {
        let at = Self::check(offset, bytes.len(), 1)?;
        if bytes.is_empty() {
            return Ok(());
        }
        Self::io(host_file::seek(self.fd, at) && host_file::read(self.fd, bytes))
    }

    fn capacity(&self) -> usize {
        N
    }
}

impl<const N: usize> NorFlash for HostNor<N> {
    const WRITE_SIZE: usize = WRITE_BYTES;
    const ERASE_SIZE: usize = SECTOR_BYTES;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), HostNorError> {
        if to < from {
            return Err(HostNorError(NorFlashErrorKind::OutOfBounds));
        }
        let at = Self::check(from, (to - from) as usize, SECTOR_BYTES)?;
        Self::io(host_file::seek(self.fd, at))?;
        let ff = [0xFFu8; CHUNK];
        let mut left = (to - from) as usize;
        while left > 0 {
            let n = CHUNK.min(left);
            Self::io(host_file::write(self.fd, &ff[..n]))?;
            left -= n;
        }
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), HostNorError> {
        let mut at = Self::check(offset, bytes.len(), WRITE_BYTES)?;
        let mut old = [0u8; CHUNK];
        for part in bytes.chunks(CHUNK) {
            let o = &mut old[..part.len()];
            Self::io(host_file::seek(self.fd, at) && host_file::read(self.fd, o))?;
            // NOR programming only clears bits.
            for (d, s) in o.iter_mut().zip(part) {
                *d &= *s;
            }
            Self::io(host_file::seek(self.fd, at) && host_file::write(self.fd, o))?;
            at += part.len();
        }
        Ok(())
    }
}
