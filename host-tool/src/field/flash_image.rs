//! A raw dump of a field logger's flash region (a debug probe's memory read, or the
//! emulated board's dump), read back through the core's own [`Logbook`].
//!
//! ```text
//! image bytes -> ImageFlash<PAGE, UNIT> (read-only NorFlash over the bytes)
//!             -> Logbook::mount -> records(), oldest first
//! geometry unknown: every page size of PAGE_SIZES that divides the image x every write
//! unit of WRITE_UNITS; the one that reads the most records wins (ties: the larger page,
//! then the larger unit)
//! ```
//!
//! The page size and write unit are associated constants of the NOR flash traits, so each
//! candidate geometry is its own monomorphisation of [`ImageFlash`]. Mounting and reading
//! only read the flash (the core writes in `append`, `open_page` and `erase_all` only); the
//! image is borrowed read-only and a write or erase would be refused with an error.

use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};
use frothline_core::logbook::{LogError, LogStats, Logbook, MAX_PAGES};

/// Page (erase sector) sizes tried, bytes: the powers of two from 256 B to 128 KiB.
pub const PAGE_SIZES: [usize; 10] = [
    256, 512, 1024, 2048, 4096, 8192, 16384, 32768, 65536, 131072,
];

/// Write units tried, bytes.
pub const WRITE_UNITS: [usize; 5] = [1, 2, 4, 8, 16];

/// The largest image that can be a log region: [`MAX_PAGES`] of the largest page.
pub const MAX_IMAGE_BYTES: u64 = (MAX_PAGES * PAGE_SIZES[PAGE_SIZES.len() - 1]) as u64;

/// A flash geometry: erase page size and write unit, bytes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Geometry {
    /// Erase page (sector) size, bytes.
    pub page_bytes: usize,
    /// Write unit, bytes.
    pub write_unit: usize,
}

impl Geometry {
    /// The unit the log pads its fields to: the write unit, at least 4 bytes (so write
    /// units 1, 2 and 4 lay a log out the same way).
    pub fn layout_unit(&self) -> usize {
        self.write_unit.max(4)
    }
}

impl std::fmt::Display for Geometry {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{}-byte pages, write unit {} B",
            self.page_bytes, self.write_unit
        )
    }
}

/// Why the read-only image refused an operation.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ImageFlashError {
    /// A write or an erase: the image is read-only.
    ReadOnly,
    /// A read outside the image.
    OutOfBounds,
}

impl NorFlashError for ImageFlashError {
    fn kind(&self) -> NorFlashErrorKind {
        match self {
            ImageFlashError::ReadOnly => NorFlashErrorKind::Other,
            ImageFlashError::OutOfBounds => NorFlashErrorKind::OutOfBounds,
        }
    }
}

/// A read-only NOR flash over an image's bytes, with `PAGE`-byte erase pages and a
/// `UNIT`-byte write unit (reads of any size and alignment).
#[derive(Clone, Copy, Debug)]
pub struct ImageFlash<'a, const PAGE: usize, const UNIT: usize> {
    bytes: &'a [u8],
}

impl<'a, const PAGE: usize, const UNIT: usize> ImageFlash<'a, PAGE, UNIT> {
    /// The flash over `bytes` (its capacity is their length).
    pub fn new(bytes: &'a [u8]) -> Self {
        ImageFlash { bytes }
    }
}

impl<const PAGE: usize, const UNIT: usize> ErrorType for ImageFlash<'_, PAGE, UNIT> {
    type Error = ImageFlashError;
}

impl<const PAGE: usize, const UNIT: usize> ReadNorFlash for ImageFlash<'_, PAGE, UNIT> {
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), ImageFlashError> {
        let from = offset as usize;
        let src = from
            .checked_add(bytes.len())
            .and_then(|to| self.bytes.get(from..to))
            .ok_or(ImageFlashError::OutOfBounds)?;
        bytes.copy_from_slice(src);
        Ok(())
    }

    fn capacity(&self) -> usize {
        self.bytes.len()
    }
}

impl<const PAGE: usize, const UNIT: usize> NorFlash for ImageFlash<'_, PAGE, UNIT> {
    const WRITE_SIZE: usize = UNIT;
    const ERASE_SIZE: usize = PAGE;

    fn erase(&mut self, _from: u32, _to: u32) -> Result<(), ImageFlashError> {
        Err(ImageFlashError::ReadOnly)
    }

    fn write(&mut self, _offset: u32, _bytes: &[u8]) -> Result<(), ImageFlashError> {
        Err(ImageFlashError::ReadOnly)
    }
}

/// What the log of an image held with one geometry.
#[derive(Clone, Debug)]
pub struct LogRead {
    /// The geometry it was mounted with.
    pub geometry: Geometry,
    /// Pages of the region.
    pub pages: u32,
    /// The log's counters at mount (pages with a valid header, head page cut).
    pub stats: LogStats,
    /// The committed records, oldest first.
    pub records: Vec<Vec<u8>>,
}

fn read_with<const PAGE: usize, const UNIT: usize>(image: &[u8]) -> Result<LogRead, LogError> {
    let mut log = Logbook::mount(ImageFlash::<PAGE, UNIT>::new(image))?;
    let stats = *log.stats();
    let pages = log.pages();
    let records = log
        .records()
        .map(|r| r.map(|v| v.to_vec()))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(LogRead {
        geometry: Geometry {
            page_bytes: PAGE,
            write_unit: UNIT,
        },
        pages,
        stats,
        records,
    })
}

fn read_unit<const PAGE: usize>(image: &[u8], unit: usize) -> Result<LogRead, LogError> {
    match unit {
        1 => read_with::<PAGE, 1>(image),
        2 => read_with::<PAGE, 2>(image),
        4 => read_with::<PAGE, 4>(image),
        8 => read_with::<PAGE, 8>(image),
        16 => read_with::<PAGE, 16>(image),
        _ => Err(LogError::Geometry),
    }
}

/// True when the page size and write unit are among [`PAGE_SIZES`] and [`WRITE_UNITS`].
pub fn supported(g: Geometry) -> bool {
    PAGE_SIZES.contains(&g.page_bytes) && WRITE_UNITS.contains(&g.write_unit)
}

/// Mount the log of `image` with geometry `g` and read its records. The image's length
/// should be a multiple of the page size (the core ignores a partial last page).
/// [`LogError::Geometry`]: the core cannot use `g` for this image (or `g` is not
/// [`supported`]); [`LogError::Flash`]: a read outside the image, or the core tried to
/// write (neither happens).
///
/// A dump longer than the core's [`MAX_PAGES`](frothline_core::logbook::MAX_PAGES) pages
/// of this size whose bytes past that many pages are all erased (0xFF) is read as its
/// first `MAX_PAGES` pages: a log of that page size cannot be longer, so the rest is the
/// padding of a dump larger than the log region.
pub fn read_log(image: &[u8], g: Geometry) -> Result<LogRead, LogError> {
    let image = without_erased_padding(image, g.page_bytes);
    match g.page_bytes {
        256 => read_unit::<256>(image, g.write_unit),
        512 => read_unit::<512>(image, g.write_unit),
        1024 => read_unit::<1024>(image, g.write_unit),
        2048 => read_unit::<2048>(image, g.write_unit),
        4096 => read_unit::<4096>(image, g.write_unit),
        8192 => read_unit::<8192>(image, g.write_unit),
        16384 => read_unit::<16384>(image, g.write_unit),
        32768 => read_unit::<32768>(image, g.write_unit),
        65536 => read_unit::<65536>(image, g.write_unit),
        131072 => read_unit::<131072>(image, g.write_unit),
        _ => Err(LogError::Geometry),
    }
}

/// `image` less an all-erased tail beyond the core's page limit (see [`read_log`]).
fn without_erased_padding(image: &[u8], page_bytes: usize) -> &[u8] {
    let limit = page_bytes.saturating_mul(frothline_core::logbook::MAX_PAGES);
    match image.get(limit..) {
        Some(tail) if !tail.is_empty() && tail.iter().all(|&b| b == 0xFF) => &image[..limit],
        _ => image,
    }
}

/// One geometry tried by [`detect`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Candidate {
    /// The geometry.
    pub geometry: Geometry,
    /// Pages with a valid header and records read, or why the core refused the geometry.
    pub outcome: Result<(u32, usize), LogError>,
}

/// The outcome of a geometry search.
#[derive(Clone, Debug)]
pub struct Detection {
    /// The best read, if any geometry found a valid page header.
    pub best: Option<LogRead>,
    /// Every geometry tried, in the order tried.
    pub candidates: Vec<Candidate>,
    /// The page sizes that read as many records as the best (the best's included),
    /// smallest first: more than one means the image cannot tell the page size.
    pub same_records_pages: Vec<usize>,
}

/// Try every geometry of `pages` x `units` whose page size divides the image length and
/// keep the one that reads the most records among those that find at least one valid
/// page header. Ties: the smaller page, then the larger unit. A page size that is too
/// small cuts the log at its first page end, one too large misses every later page
/// header, so two page sizes read the same records only when all of them sit in the
/// first page: the smallest page that holds them is then the tightest explanation (and
/// [`Detection::same_records_pages`] says which others read the same).
pub fn detect(image: &[u8], pages: &[usize], units: &[usize]) -> Detection {
    let mut best: Option<LogRead> = None;
    let mut candidates = Vec::new();
    for &page_bytes in pages {
        if page_bytes == 0 || !image.len().is_multiple_of(page_bytes) {
            continue;
        }
        for &write_unit in units {
            let geometry = Geometry {
                page_bytes,
                write_unit,
            };
            let r = read_log(image, geometry);
            candidates.push(Candidate {
                geometry,
                outcome: r
                    .as_ref()
                    .map(|l| (l.stats.pages_found, l.records.len()))
                    .map_err(|e| *e),
            });
            let Ok(read) = r else { continue };
            if read.stats.pages_found == 0 {
                continue;
            }
            let key = |l: &LogRead| {
                (
                    l.records.len(),
                    std::cmp::Reverse(l.geometry.page_bytes),
                    l.geometry.write_unit,
                )
            };
            if best.as_ref().is_none_or(|b| key(&read) > key(b)) {
                best = Some(read);
            }
        }
    }
    let same_records_pages = match &best {
        Some(b) => {
            let mut p: Vec<usize> = candidates
                .iter()
                .filter(
                    |c| matches!(c.outcome, Ok((found, n)) if found > 0 && n == b.records.len()),
                )
                .map(|c| c.geometry.page_bytes)
                .collect();
            p.sort_unstable();
            p.dedup();
            p
        }
        None => Vec::new(),
    };
    Detection {
        best,
        candidates,
        same_records_pages,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_image_is_read_only_and_bounded() {
        let bytes = [1u8, 2, 3, 4];
        let mut f = ImageFlash::<256, 4>::new(&bytes);
        let mut b = [0u8; 2];
        f.read(2, &mut b).unwrap();
        assert_eq!(b, [3, 4]);
        assert_eq!(f.read(3, &mut b), Err(ImageFlashError::OutOfBounds));
        assert_eq!(f.read(u32::MAX, &mut b), Err(ImageFlashError::OutOfBounds));
        assert_eq!(f.write(0, &[0; 4]), Err(ImageFlashError::ReadOnly));
        assert_eq!(f.erase(0, 256), Err(ImageFlashError::ReadOnly));
    }

    #[test]
    fn erased_padding_beyond_the_page_limit_is_not_part_of_the_log() {
        let max = frothline_core::logbook::MAX_PAGES;
        let mut image = vec![0xFFu8; 4096 * (max + 256)];
        assert_eq!(without_erased_padding(&image, 4096).len(), 4096 * max);
        assert_eq!(without_erased_padding(&image, 8192).len(), image.len());
        // A written byte past the limit: not padding, the image stays whole.
        let last = image.len() - 1;
        image[last] = 0;
        assert_eq!(without_erased_padding(&image, 4096).len(), image.len());
        assert_eq!(without_erased_padding(&[], 4096).len(), 0);
    }

    #[test]
    fn unsupported_geometries_are_refused_not_panicked() {
        let image = vec![0xFFu8; 8192];
        for g in [(300, 4), (4096, 3), (4096, 32), (0, 0)] {
            let g = Geometry {
                page_bytes: g.0,
                write_unit: g.1,
            };
            assert!(!supported(g));
            assert_eq!(read_log(&image, g).err(), Some(LogError::Geometry));
        }
        // One page only: the core refuses.
        let one = Geometry {
            page_bytes: 8192,
            write_unit: 4,
        };
        assert_eq!(read_log(&image, one).err(), Some(LogError::Geometry));
    }

    /// A writable NOR flash over bytes (erase to 0xFF, writes clear bits), for building a
    /// log as a device does.
    struct VecNor<const PAGE: usize>(Vec<u8>);

    impl<const PAGE: usize> ErrorType for VecNor<PAGE> {
        type Error = ImageFlashError;
    }

    impl<const PAGE: usize> ReadNorFlash for VecNor<PAGE> {
        const READ_SIZE: usize = 1;
        fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), ImageFlashError> {
            let o = offset as usize;
            let src = self
                .0
                .get(o..o + bytes.len())
                .ok_or(ImageFlashError::OutOfBounds)?;
            bytes.copy_from_slice(src);
            Ok(())
        }
        fn capacity(&self) -> usize {
            self.0.len()
        }
    }

    impl<const PAGE: usize> NorFlash for VecNor<PAGE> {
        const WRITE_SIZE: usize = 4;
        const ERASE_SIZE: usize = PAGE;
        fn erase(&mut self, from: u32, to: u32) -> Result<(), ImageFlashError> {
            self.0[from as usize..to as usize].fill(0xFF);
            Ok(())
        }
        fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), ImageFlashError> {
            for (m, b) in self.0[offset as usize..].iter_mut().zip(bytes) {
                *m &= b;
            }
            Ok(())
        }
    }

    /// The NUCLEO-F411RE's log region (sectors 6 and 7: two 128 KiB pages, write unit 4),
    /// never erased before, its room erased ahead by `prepare` and filled without erases:
    /// read back whole, and its geometry detected.
    #[test]
    fn a_prepared_board_region_reads_back() {
        let mut log = Logbook::mount(VecNor::<131072>(vec![0; 2 * 131072])).unwrap();
        assert!(log.prepare(48, 256).unwrap());
        let records: Vec<Vec<u8>> = (0..40u8).map(|i| vec![i; 10 + 5 * i as usize]).collect();
        for r in &records {
            log.append_prepared(r).unwrap();
        }
        assert_eq!(log.stats().pages_pre_erased, 1);
        let image = log.into_inner().0;
        let g = Geometry {
            page_bytes: 131072,
            write_unit: 4,
        };
        assert_eq!(read_log(&image, g).unwrap().records, records);
        let d = detect(&image, &PAGE_SIZES, &WRITE_UNITS);
        assert_eq!(d.best.unwrap().records, records);
    }
}
