//! A power-loss-safe, append-only log of wire frames on NOR flash, and the field logger
//! that fills it after a front.
//!
//! ```text
//! region  = page 0 | page 1 | ... | page N-1          (one page = one erase sector)
//! page    = header | record | record | ... | 0xFF...  (erased tail)
//! header  = magic u32 | seq u32 | crc32(magic, seq) u32, padded to the write unit
//! record  = len u16 | !len u16 | crc32(payload) u32 | payload, padded to the unit
//!           | commit word u32, padded to the unit
//! ```
//!
//! Every byte of a page is programmed at most once between two erases, so only the plain
//! [`NorFlash`] traits are needed (no [`MultiwriteNorFlash`](embedded_storage::nor_flash::MultiwriteNorFlash)).
//! A record is written header and payload first, then its commit word in a separate write;
//! [`Logbook::append`] returns `Ok` only after the commit word is written, so a record that
//! was acknowledged is on the flash in full. A record is accepted on reading only if its
//! length, the complement of its length, its CRC-32 and its commit word all check; the
//! first record of a page that does not check ends that page (a write cut by a power loss).
//!
//! Pages are used as a ring in order of their sequence number: when the head page is full
//! the next page is erased, given the next sequence number and becomes the head; the oldest
//! page's records are given up then. `pages - 1` pages hold records: the page after the
//! head is always counted as given up, even before it is erased, so that an erase cut by
//! a power loss never brings back part of its records. [`Logbook::mount`] reads the page headers and the head
//! page; it never fails on what it finds (garbage, an erased region, a cut write or erase):
//! a page without a valid header is free, and a head page whose free tail is not erased (a
//! cut write) is closed, so the next record goes to a fresh page. Reading walks the pages
//! in increasing sequence order.
//!
//! Bounded work: mount reads N page headers and one page; an append writes one record (and
//! erases one page at most); a read step looks at N headers at most.
//!
//! Erasing a sector takes long and, on a microcontroller's own flash, stalls the CPU (from
//! memory: 45 ms typical for a 4 KiB sector of a W25Q-class serial NOR, its data sheets'
//! tSE; 1 to 2 s for a 128 KiB sector of an STM32F411, its data sheet's flash
//! characteristics). [`Logbook::prepare`] erases ahead, at a time the caller chooses, the
//! pages that a number of records will need, and [`Logbook::append_prepared`] never erases:
//! it fails with [`LogError::NotPrepared`] when the next record would need an erase. The
//! field logger uses them so that no erase falls inside a capture. Pages erased ahead are
//! given up then (their records are lost as they would be when the ring reached them); a
//! power loss during such an erase may leave the first records of the page being given up
//! readable, each still checked in full, so the log then holds those before a gap.

use crate::wire::{crc32, MAX_FRAME_BYTES};
use embedded_storage::nor_flash::NorFlash;

/// The longest record the log stores, bytes (the longest wire frame).
pub const MAX_RECORD_BYTES: usize = MAX_FRAME_BYTES;

/// Largest supported write unit of the flash, bytes.
pub const MAX_WRITE_UNIT: usize = 16;

/// Most pages the log can manage.
pub const MAX_PAGES: usize = 4096;

const PAGE_MAGIC: u32 = 0x464C_4C47; // "FLLG"
const COMMIT: u32 = 0x0C0A_11ED;
const PAGE_HEADER_BYTES: usize = 12;
const RECORD_HEADER_BYTES: usize = 8;
const COMMIT_BYTES: usize = 4;
/// Bytes read at once when checking that a region is erased.
const SCAN_CHUNK: usize = 64;

/// Why a log operation failed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum LogError {
    /// The flash reported an error (read, write or erase).
    Flash,
    /// The flash's geometry does not fit: write unit above [`MAX_WRITE_UNIT`], pages that
    /// do not hold the largest record, fewer than two pages or more than [`MAX_PAGES`].
    Geometry,
    /// The record is empty or longer than [`MAX_RECORD_BYTES`].
    RecordSize,
    /// [`Logbook::append_prepared`]: the record needs a fresh page and the next page is not
    /// erased (nothing, or too little, was prepared with [`Logbook::prepare`]).
    NotPrepared,
}

impl core::fmt::Display for LogError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            LogError::Flash => write!(f, "flash error"),
            LogError::Geometry => write!(f, "flash geometry not supported by the log"),
            LogError::RecordSize => write!(f, "record empty or too long"),
            LogError::NotPrepared => write!(f, "no erased page prepared for the record"),
        }
    }
}

/// Counters of a log since it was mounted.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LogStats {
    /// Pages with a valid header found at mount.
    pub pages_found: u32,
    /// True when mount found the head page's free tail not erased (a write cut by a power
    /// loss) and closed the page.
    pub recovered_cut: bool,
    /// Records appended since mount.
    pub appended: u32,
    /// Pages erased to make room since mount (their records were given up).
    pub pages_recycled: u32,
    /// Pages erased ahead by [`Logbook::prepare`] since mount.
    pub pages_pre_erased: u32,
}

/// Where a reader stands: the sequence number of its page and the offset in it.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Cursor {
    page: Option<(u32, u32)>, // (page index, seq)
    offset: u32,
    done_seq: u32,
    started: bool,
}

/// The append-only frame log over a NOR flash region (see the module docs).
pub struct Logbook<F> {
    flash: F,
    unit: usize,
    page_bytes: usize,
    pages: u32,
    /// The head page (index, seq) and the next write offset in it; `None`: empty log.
    head: Option<(u32, u32)>,
    write_at: usize,
    /// The head page cannot take more records (full or cut): the next append opens a page.
    head_closed: bool,
    /// Pages after the head, in ring order, known to be erased (checked or erased by
    /// [`Logbook::prepare`]); the next pages opened take them without an erase.
    erased_ahead: u32,
    stats: LogStats,
}

const fn round_up(n: usize, unit: usize) -> usize {
    n.div_ceil(unit) * unit
}

fn le32(b: &[u8], at: usize) -> u32 {
    let mut w = [0u8; 4];
    if let Some(s) = b.get(at..at + 4) {
        w.copy_from_slice(s);
    }
    u32::from_le_bytes(w)
}

impl<F: NorFlash> Logbook<F> {
    /// Mount the log on `flash` (the whole of its capacity is the log region). Recovers
    /// from any content; fails only on a flash error or a geometry the log cannot use.
    pub fn mount(flash: F) -> Result<Self, LogError> {
        let unit = F::WRITE_SIZE.max(F::READ_SIZE).max(4);
        let page_bytes = F::ERASE_SIZE;
        let capacity = flash.capacity();
        let pages = capacity.checked_div(page_bytes).unwrap_or(0);
        if unit > MAX_WRITE_UNIT
            || page_bytes % unit != 0
            || page_bytes < Self::header_len(unit) + Self::record_len(unit, MAX_RECORD_BYTES)
            || !(2..=MAX_PAGES).contains(&pages)
            || u32::try_from(capacity).is_err()
        {
            return Err(LogError::Geometry);
        }
        let mut log = Logbook {
            flash,
            unit,
            page_bytes,
            pages: pages as u32,
            head: None,
            write_at: 0,
            head_closed: true,
            erased_ahead: 0,
            stats: LogStats::default(),
        };
        for p in 0..log.pages {
            if let Some(seq) = log.page_seq(p)? {
                log.stats.pages_found += 1;
                if log.head.is_none_or(|(_, s)| seq > s) {
                    log.head = Some((p, seq));
                }
            }
        }
        if let Some((p, _)) = log.head {
            let mut at = Self::header_len(unit);
            let mut buf = [0u8; MAX_RECORD_BYTES];
            while let Some(next) = log.record_at(p, at, &mut buf)?.map(|(_, n)| n) {
                at = next;
            }
            log.write_at = at;
            let erased = log.is_erased(p, at)?;
            log.stats.recovered_cut = !erased;
            log.head_closed = !erased || at + Self::record_len(unit, 1) > page_bytes;
        }
        Ok(log)
    }

    fn header_len(unit: usize) -> usize {
        round_up(PAGE_HEADER_BYTES, unit)
    }

    fn record_len(unit: usize, payload: usize) -> usize {
        round_up(RECORD_HEADER_BYTES + payload, unit) + round_up(COMMIT_BYTES, unit)
    }

    fn addr(&self, page: u32, offset: usize) -> u32 {
        // In range: page < pages, offset <= page_bytes, capacity fits in u32 (mount).
        page.saturating_mul(self.page_bytes as u32)
            .saturating_add(offset as u32)
    }

    fn read(&mut self, page: u32, offset: usize, buf: &mut [u8]) -> Result<(), LogError> {
        let a = self.addr(page, offset);
        self.flash.read(a, buf).map_err(|_| LogError::Flash)
    }

    /// The sequence number of a page with a valid header.
    fn page_seq(&mut self, page: u32) -> Result<Option<u32>, LogError> {
        let mut h = [0u8; PAGE_HEADER_BYTES];
        self.read(page, 0, &mut h)?;
        let ok = le32(&h, 0) == PAGE_MAGIC && le32(&h, 8) == crc32(&h[..8]);
        Ok(ok.then(|| le32(&h, 4)))
    }

    /// True when the page is erased (all 0xFF) from `offset` to its end.
    fn is_erased(&mut self, page: u32, mut offset: usize) -> Result<bool, LogError> {
        let mut chunk = [0u8; SCAN_CHUNK];
        while offset < self.page_bytes {
            let n = (self.page_bytes - offset).min(SCAN_CHUNK);
            let c = &mut chunk[..n];
            self.read(page, offset, c)?;
            if c.iter().any(|&b| b != 0xFF) {
                return Ok(false);
            }
            offset += n;
        }
        Ok(true)
    }

    /// The valid record at `offset` of `page`: its length (payload in `buf`) and the offset
    /// after it; `None` when there is none (erased, cut or garbage).
    fn record_at(
        &mut self,
        page: u32,
        offset: usize,
        buf: &mut [u8; MAX_RECORD_BYTES],
    ) -> Result<Option<(usize, usize)>, LogError> {
        if offset + Self::record_len(self.unit, 1) > self.page_bytes {
            return Ok(None);
        }
        let mut h = [0u8; RECORD_HEADER_BYTES];
        self.read(page, offset, &mut h)?;
        let len = u16::from_le_bytes([h[0], h[1]]);
        let inv = u16::from_le_bytes([h[2], h[3]]);
        let n = len as usize;
        if len != !inv || n == 0 || n > MAX_RECORD_BYTES {
            return Ok(None);
        }
        let end = offset + Self::record_len(self.unit, n);
        if end > self.page_bytes {
            return Ok(None);
        }
        let commit_at = end - round_up(COMMIT_BYTES, self.unit);
        let mut c = [0u8; COMMIT_BYTES];
        self.read(page, commit_at, &mut c)?;
        if u32::from_le_bytes(c) != COMMIT {
            return Ok(None);
        }
        let payload = &mut buf[..n];
        self.read(page, offset + RECORD_HEADER_BYTES, payload)?;
        if crc32(payload) != le32(&h, 4) {
            return Ok(None);
        }
        Ok(Some((n, end)))
    }

    /// Program `bytes` (a multiple of the unit) at `offset` of `page`.
    fn program(&mut self, page: u32, offset: usize, bytes: &[u8]) -> Result<(), LogError> {
        let a = self.addr(page, offset);
        self.flash.write(a, bytes).map_err(|_| LogError::Flash)
    }

    /// The `k`-th page the log will open after the head (page 0 first in an empty log).
    fn page_ahead(&self, k: u32) -> u32 {
        match self.head {
            Some((p, _)) => (p + 1 + k % self.pages) % self.pages,
            None => k % self.pages,
        }
    }

    /// Erase one page (counted as recycled when it held a valid header).
    fn erase_page(&mut self, page: u32) -> Result<(), LogError> {
        if self.page_seq(page)?.is_some() {
            self.stats.pages_recycled = self.stats.pages_recycled.saturating_add(1);
        }
        let from = self.addr(page, 0);
        let to = self.addr(page, self.page_bytes);
        self.flash.erase(from, to).map_err(|_| LogError::Flash)
    }

    /// Make the next page of the ring the head. A page erased ahead is taken as it is;
    /// otherwise it is erased when `erase`, or taken only if it reads erased
    /// ([`LogError::NotPrepared`] if not).
    fn open_page(&mut self, erase: bool) -> Result<(), LogError> {
        let (page, seq) = match self.head {
            Some((p, s)) => ((p + 1) % self.pages, s.saturating_add(1)),
            None => (0, 1),
        };
        if self.erased_ahead > 0 {
            self.erased_ahead -= 1;
        } else if erase {
            // From here the page is not a valid head until its header is written.
            self.head_closed = true;
            self.erase_page(page)?;
        } else if !self.is_erased(page, 0)? {
            return Err(LogError::NotPrepared);
        }
        self.head_closed = true;
        let mut h = [0xFFu8; MAX_WRITE_UNIT * 2];
        h[0..4].copy_from_slice(&PAGE_MAGIC.to_le_bytes());
        h[4..8].copy_from_slice(&seq.to_le_bytes());
        let c = crc32(&h[..8]);
        h[8..12].copy_from_slice(&c.to_le_bytes());
        let hl = Self::header_len(self.unit);
        if let Err(e) = self.program(page, 0, &h[..hl]) {
            // The pages ahead are no longer known as they were.
            self.erased_ahead = 0;
            return Err(e);
        }
        self.head = Some((page, seq));
        self.write_at = hl;
        self.head_closed = false;
        Ok(())
    }

    /// Append one record (a wire frame's bytes). When this returns `Ok` the record is
    /// committed: it survives any later power loss (until the ring recycles its page).
    /// Erases the next page when the record needs one that is not erased.
    pub fn append(&mut self, record: &[u8]) -> Result<(), LogError> {
        self.append_with(record, true)
    }

    /// [`append`](Self::append) without ever erasing: a record that needs a fresh page
    /// takes the next page only if it was prepared ([`prepare`](Self::prepare)) or reads
    /// erased; otherwise [`LogError::NotPrepared`] and nothing is written.
    pub fn append_prepared(&mut self, record: &[u8]) -> Result<(), LogError> {
        self.append_with(record, false)
    }

    /// True when `records` records of up to `record_bytes` bytes each fit in the head
    /// page's free tail and the pages erased ahead, so appending them erases nothing.
    pub fn room_for(&self, records: u32, record_bytes: usize) -> bool {
        let rl = Self::record_len(self.unit, record_bytes.clamp(1, MAX_RECORD_BYTES));
        let in_head = match self.head {
            Some(_) if !self.head_closed => self.page_bytes.saturating_sub(self.write_at) / rl,
            _ => 0,
        };
        let per_page = (self.page_bytes - Self::header_len(self.unit)) / rl;
        let ahead = (self.erased_ahead as usize).saturating_mul(per_page);
        in_head.saturating_add(ahead) >= records as usize
    }

    /// Erase ahead, now, the pages that `records` records of up to `record_bytes` bytes
    /// each will need, so that appending them erases nothing (see the module docs): pages
    /// that read erased are only checked. Returns whether they fit (false when the region
    /// is too small for them; as many pages as can be are prepared then). At most
    /// `pages - 1` erases; the head page is never erased.
    pub fn prepare(&mut self, records: u32, record_bytes: usize) -> Result<bool, LogError> {
        while !self.room_for(records, record_bytes) {
            if self.erased_ahead >= self.pages - 1 {
                return Ok(false);
            }
            let page = self.page_ahead(self.erased_ahead);
            if !self.is_erased(page, 0)? {
                self.erase_page(page)?;
                self.stats.pages_pre_erased = self.stats.pages_pre_erased.saturating_add(1);
            }
            self.erased_ahead += 1;
        }
        Ok(true)
    }

    fn append_with(&mut self, record: &[u8], erase: bool) -> Result<(), LogError> {
        let n = record.len();
        if n == 0 || n > MAX_RECORD_BYTES {
            return Err(LogError::RecordSize);
        }
        let need = Self::record_len(self.unit, n);
        if self.head_closed || self.head.is_none() || self.write_at + need > self.page_bytes {
            self.open_page(erase)?;
        }
        let Some((page, _)) = self.head else {
            return Err(LogError::Flash);
        };
        let at = self.write_at;
        // Header and payload in one write, padded with 0xFF to the unit.
        let body = round_up(RECORD_HEADER_BYTES + n, self.unit);
        let mut buf = [0xFFu8; RECORD_HEADER_BYTES + MAX_RECORD_BYTES + MAX_WRITE_UNIT];
        let len = n as u16;
        buf[0..2].copy_from_slice(&len.to_le_bytes());
        buf[2..4].copy_from_slice(&(!len).to_le_bytes());
        buf[4..8].copy_from_slice(&crc32(record).to_le_bytes());
        buf[RECORD_HEADER_BYTES..RECORD_HEADER_BYTES + n].copy_from_slice(record);
        // A failed write leaves the page's tail unknown: close it.
        self.head_closed = true;
        self.program(page, at, &buf[..body])?;
        let mut c = [0xFFu8; MAX_WRITE_UNIT];
        c[..4].copy_from_slice(&COMMIT.to_le_bytes());
        let cl = round_up(COMMIT_BYTES, self.unit);
        self.program(page, at + body, &c[..cl])?;
        self.write_at = at + need;
        self.head_closed = self.write_at + Self::record_len(self.unit, 1) > self.page_bytes;
        self.stats.appended = self.stats.appended.saturating_add(1);
        Ok(())
    }

    /// A cursor before the oldest record.
    pub fn cursor(&self) -> Cursor {
        Cursor::default()
    }

    /// The oldest sequence number that is part of the log: the head and the `pages - 2`
    /// before it. The page after those is the next to be recycled and counts as given up
    /// already, so an erase of it cut by a power loss cannot bring back part of its old
    /// records (nor can stale pages of an older log).
    fn min_seq(&self) -> u32 {
        match self.head {
            Some((_, s)) => s.saturating_sub(self.pages.saturating_sub(2)),
            None => u32::MAX,
        }
    }

    /// The page with the smallest sequence number above `after` (any when `None`).
    fn next_page(&mut self, after: Option<u32>) -> Result<Option<(u32, u32)>, LogError> {
        let mut best: Option<(u32, u32)> = None;
        let min = self.min_seq();
        for p in 0..self.pages {
            if let Some(s) = self.page_seq(p)? {
                if s < min || after.is_some_and(|a| s <= a) {
                    continue;
                }
                if best.is_none_or(|(_, b)| s < b) {
                    best = Some((p, s));
                }
            }
        }
        Ok(best)
    }

    /// Read the record after `cursor` into `buf`; its length, or `None` at the end of the
    /// log. Bounded: it steps over at most every page once.
    pub fn read_next(
        &mut self,
        cursor: &mut Cursor,
        buf: &mut [u8; MAX_RECORD_BYTES],
    ) -> Result<Option<usize>, LogError> {
        for _ in 0..=self.pages {
            let (page, seq) = match cursor.page {
                Some(ps) => ps,
                None => {
                    let after = cursor.started.then_some(cursor.done_seq);
                    match self.next_page(after)? {
                        Some(ps) => {
                            cursor.page = Some(ps);
                            cursor.offset = Self::header_len(self.unit) as u32;
                            cursor.started = true;
                            ps
                        }
                        None => return Ok(None),
                    }
                }
            };
            // The page may have been recycled since the cursor stood on it.
            if seq >= self.min_seq() && self.page_seq(page)? == Some(seq) {
                if let Some((n, next)) = self.record_at(page, cursor.offset as usize, buf)? {
                    cursor.offset = next as u32;
                    return Ok(Some(n));
                }
                // End of this page. Stay on the head page (more may be appended to it).
                if self.head == Some((page, seq)) && !self.head_closed {
                    return Ok(None);
                }
            }
            cursor.page = None;
            cursor.done_seq = seq;
        }
        Ok(None)
    }

    /// An iterator over the committed records, oldest first.
    pub fn records(&mut self) -> Records<'_, F> {
        Records {
            cursor: self.cursor(),
            log: self,
            failed: false,
        }
    }

    /// Erase the whole log region.
    pub fn erase_all(&mut self) -> Result<(), LogError> {
        self.head = None;
        self.head_closed = true;
        self.write_at = 0;
        self.erased_ahead = 0;
        for p in 0..self.pages {
            let from = self.addr(p, 0);
            let to = self.addr(p, self.page_bytes);
            self.flash.erase(from, to).map_err(|_| LogError::Flash)?;
        }
        self.erased_ahead = self.pages;
        Ok(())
    }

    /// True when the log holds no page (nothing was appended since it was erased).
    pub fn is_empty(&self) -> bool {
        self.head.is_none()
    }

    /// Counters since mount.
    pub fn stats(&self) -> &LogStats {
        &self.stats
    }

    /// Pages of the region.
    pub fn pages(&self) -> u32 {
        self.pages
    }

    /// Payload bytes a page holds at least, in records of `record_bytes` each: the
    /// number of such records one page takes.
    pub fn records_per_page(&self, record_bytes: usize) -> usize {
        let r = Self::record_len(self.unit, record_bytes.clamp(1, MAX_RECORD_BYTES));
        (self.page_bytes - Self::header_len(self.unit)) / r
    }

    /// Read raw bytes of the region at `offset` (a dump of the flash, for a host that reads
    /// the log over a link as it would read an image): no record is interpreted.
    pub fn read_raw(&mut self, offset: u32, buf: &mut [u8]) -> Result<(), LogError> {
        self.flash.read(offset, buf).map_err(|_| LogError::Flash)
    }

    /// Bytes of the region.
    pub fn capacity(&self) -> usize {
        self.flash.capacity()
    }

    /// Bytes of the pages that hold records at once: `pages - 1` pages (the page after
    /// the head is the next to be recycled, see the module docs).
    pub fn record_capacity(&self) -> usize {
        (self.pages.saturating_sub(1) as usize).saturating_mul(self.page_bytes)
    }

    /// Bytes of the log in use now: the pages before the head that are still part of the
    /// log, whole, and the head page up to its next write offset. O(1): it counts the
    /// pages by their sequence numbers, so a page lost to a bad header still counts. At
    /// most [`record_capacity`](Self::record_capacity); it stays there once the ring
    /// recycles its oldest pages.
    pub fn used_bytes(&self) -> usize {
        match self.head {
            None => 0,
            Some((_, seq)) => {
                let older = seq.saturating_sub(1).min(self.pages.saturating_sub(2)) as usize;
                older
                    .saturating_mul(self.page_bytes)
                    .saturating_add(self.write_at)
                    .min(self.record_capacity())
            }
        }
    }

    /// Give the flash back.
    pub fn into_inner(self) -> F {
        self.flash
    }
}

/// Iterator over a log's committed records (see [`Logbook::records`]); stops after the
/// first flash error, which it yields.
pub struct Records<'a, F> {
    log: &'a mut Logbook<F>,
    cursor: Cursor,
    failed: bool,
}

impl<F: NorFlash> Iterator for Records<'_, F> {
    type Item = Result<heapless::Vec<u8, MAX_RECORD_BYTES>, LogError>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.failed {
            return None;
        }
        let mut buf = [0u8; MAX_RECORD_BYTES];
        match self.log.read_next(&mut self.cursor, &mut buf) {
            Ok(Some(n)) => {
                let mut v = heapless::Vec::new();
                // n <= MAX_RECORD_BYTES: cannot fail.
                let _ = v.extend_from_slice(buf.get(..n).unwrap_or(&[]));
                Some(Ok(v))
            }
            Ok(None) => None,
            Err(e) => {
                self.failed = true;
                Some(Err(e))
            }
        }
    }
}

mod field_logger;
pub use field_logger::{FieldLogger, LoggerState, LoggerStats, StoredFrame};
