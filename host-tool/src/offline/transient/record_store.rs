//! The records of a transient replay (windows, profile slices), handed back in the order of
//! their files without holding a long capture's worth in memory.
//!
//! Window records arrive station by station, each station in its own order, and windows.csv
//! lists them by window start, then probe, then arrival (a stable sort); profile slices keep
//! their arrival order. Up to [`RUN_RECORDS`]
//! records stay in memory; each full run is sorted and appended to one anonymous temporary
//! file, and reading merges the runs (an external merge sort: D. E. Knuth, *The Art of
//! Computer Programming*, vol. 3, section 5.4). Memory is then one run plus a small buffer
//! per run, whatever the record's length.

use crate::shared::rig::HostRecord;
use frothline_core::ProfileRecord;
use serde::de::DeserializeOwned;
use serde::Serialize;
use std::cmp::Reverse;
use std::collections::BinaryHeap;
use std::fs::File;
use std::io::{self, BufWriter, Read, Seek, SeekFrom, Write};

/// Records sorted in memory before a run goes to the temporary file.
pub const RUN_RECORDS: usize = 1 << 13;

/// Bytes read from the temporary file at a time for each run while merging.
const READ_BUF: usize = 8 << 10;

/// The sort key of a record, then its arrival number (which makes the sort stable).
type Key<K> = (K, u64);

/// What a store sorts by.
pub trait Keyed: Clone + Serialize + DeserializeOwned {
    /// The key, compared before the arrival number.
    type Key: Ord + Copy;
    /// This record's key.
    fn key(&self) -> Self::Key;
}

/// Window records: by window start, then probe (windows.csv).
impl Keyed for HostRecord {
    type Key = (u64, u8);
    fn key(&self) -> (u64, u8) {
        (self.start, self.probe)
    }
}

/// Profile slices with their station index: in arrival order (profile.csv).
impl Keyed for (usize, ProfileRecord) {
    type Key = ();
    fn key(&self) {}
}

/// Slice discharges: in arrival order (beside their profile slices).
impl Keyed for super::slice_discharge::SliceDischarge {
    type Key = ();
    fn key(&self) {}
}

fn key<T: Keyed>(seq: u64, r: &T) -> Key<T::Key> {
    (r.key(), seq)
}

/// The window records of a run.
pub type WindowStore = RecordStore<HostRecord>;
/// The profile slices of a run, with their station index.
pub type ProfileStore = RecordStore<(usize, ProfileRecord)>;
/// The discharges of a run's profile slices, one per slice in the same order.
pub type DischargeStore = RecordStore<super::slice_discharge::SliceDischarge>;

/// Records in arrival order in, key order out.
pub struct RecordStore<T> {
    /// Records per run.
    run_records: usize,
    /// The run being gathered, with each record's arrival number.
    mem: Vec<(u64, T)>,
    /// Runs already written: (offset, bytes) in `file`.
    runs: Vec<(u64, u64)>,
    file: Option<BufWriter<File>>,
    written: u64,
    count: u64,
}

impl<T: Keyed> Default for RecordStore<T> {
    fn default() -> Self {
        Self::new()
    }
}

impl<T> std::fmt::Debug for RecordStore<T> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RecordStore")
            .field("records", &self.count)
            .field("runs_on_disk", &self.runs.len())
            .finish()
    }
}

fn spill_err(e: postcard::Error) -> io::Error {
    io::Error::other(format!("temporary window file: {e}"))
}

impl<T: Keyed> RecordStore<T> {
    /// An empty store.
    pub fn new() -> Self {
        Self::with_runs_of(RUN_RECORDS)
    }

    /// An empty store that writes a run every `n` records (at least one).
    pub fn with_runs_of(n: usize) -> Self {
        RecordStore {
            run_records: n.max(1),
            mem: Vec::new(),
            runs: Vec::new(),
            file: None,
            written: 0,
            count: 0,
        }
    }

    /// Records pushed so far.
    pub fn len(&self) -> u64 {
        self.count
    }

    /// True if nothing was pushed.
    pub fn is_empty(&self) -> bool {
        self.count == 0
    }

    /// Keep `r`; a full run goes to the temporary file.
    pub fn push(&mut self, r: T) -> io::Result<()> {
        self.mem.push((self.count, r));
        self.count += 1;
        if self.mem.len() >= self.run_records {
            self.spill()?;
        }
        Ok(())
    }

    fn spill(&mut self) -> io::Result<()> {
        if self.mem.is_empty() {
            return Ok(());
        }
        self.mem.sort_by_key(|(seq, r)| key(*seq, r));
        let out = match &mut self.file {
            Some(f) => f,
            None => self.file.insert(BufWriter::new(tempfile::tempfile()?)),
        };
        // Reading moves the file's cursor: write after the last run.
        out.seek(SeekFrom::Start(self.written))?;
        let begin = self.written;
        for (seq, r) in self.mem.drain(..) {
            let bytes = postcard::to_stdvec(&(seq, r)).map_err(spill_err)?;
            out.write_all(&(bytes.len() as u32).to_le_bytes())?;
            out.write_all(&bytes)?;
            self.written += 4 + bytes.len() as u64;
        }
        self.runs.push((begin, self.written - begin));
        Ok(())
    }

    /// Every record in key order (then arrival order); may be read again.
    pub fn sorted(&mut self) -> io::Result<Sorted<'_, T>> {
        if self.runs.is_empty() {
            self.mem.sort_by_key(|(seq, r)| key(*seq, r));
            return Ok(Sorted {
                inner: Inner::Memory(self.mem.iter()),
            });
        }
        self.spill()?;
        let writer = self
            .file
            .as_mut()
            .ok_or_else(|| io::Error::other("no window file"))?;
        writer.flush()?;
        let file = writer.get_mut();
        let mut readers: Vec<RunReader> = self
            .runs
            .iter()
            .map(|&(at, len)| RunReader {
                next: at,
                end: at + len,
                buf: Vec::new(),
                pos: 0,
            })
            .collect();
        let mut heap = BinaryHeap::new();
        let mut heads = Vec::with_capacity(readers.len());
        for (i, r) in readers.iter_mut().enumerate() {
            let head = r.next_record(file)?;
            if let Some((seq, rec)) = &head {
                heap.push(Reverse((key(*seq, rec), i)));
            }
            heads.push(head);
        }
        Ok(Sorted {
            inner: Inner::Merge {
                file,
                readers,
                heads,
                heap,
            },
        })
    }

    /// Every record in key order, in memory (for callers that keep a run's records).
    pub fn into_vec(mut self) -> io::Result<Vec<T>> {
        if self.runs.is_empty() {
            self.mem.sort_by_key(|(seq, r)| key(*seq, r));
            return Ok(self.mem.into_iter().map(|(_, r)| r).collect());
        }
        let mut out = Vec::new();
        for r in self.sorted()? {
            out.push(r?);
        }
        Ok(out)
    }
}

/// One run of the temporary file being read back.
struct RunReader {
    next: u64,
    end: u64,
    buf: Vec<u8>,
    pos: usize,
}

impl RunReader {
    /// Make `n` bytes available from `pos`; false at the end of the run.
    fn fill(&mut self, file: &mut File, n: usize) -> io::Result<bool> {
        if self.buf.len() - self.pos >= n {
            return Ok(true);
        }
        self.buf.drain(..self.pos);
        self.pos = 0;
        let left = self.end - self.next;
        let want = (n - self.buf.len()).max(READ_BUF) as u64;
        let take = want.min(left) as usize;
        if self.buf.len() + take < n {
            return Ok(false);
        }
        file.seek(SeekFrom::Start(self.next))?;
        let old = self.buf.len();
        self.buf.resize(old + take, 0);
        file.read_exact(&mut self.buf[old..])?;
        self.next += take as u64;
        Ok(true)
    }

    fn next_record<T: Keyed>(&mut self, file: &mut File) -> io::Result<Option<(u64, T)>> {
        if !self.fill(file, 4)? {
            return Ok(None);
        }
        let p = self.pos;
        let len = u32::from_le_bytes([
            self.buf[p],
            self.buf[p + 1],
            self.buf[p + 2],
            self.buf[p + 3],
        ]) as usize;
        if !self.fill(file, 4 + len)? {
            return Err(io::Error::other(
                "temporary window file: a run ends mid-record",
            ));
        }
        let body = &self.buf[self.pos + 4..self.pos + 4 + len];
        let rec = postcard::from_bytes(body).map_err(spill_err)?;
        self.pos += 4 + len;
        Ok(Some(rec))
    }
}

enum Inner<'a, T: Keyed> {
    Memory(std::slice::Iter<'a, (u64, T)>),
    Merge {
        file: &'a mut File,
        readers: Vec<RunReader>,
        heads: Vec<Option<(u64, T)>>,
        heap: BinaryHeap<Reverse<(Key<T::Key>, usize)>>,
    },
}

/// The records of a [`RecordStore`] in key order.
pub struct Sorted<'a, T: Keyed> {
    inner: Inner<'a, T>,
}

impl<T: Keyed> Iterator for Sorted<'_, T> {
    type Item = io::Result<T>;

    fn next(&mut self) -> Option<Self::Item> {
        match &mut self.inner {
            Inner::Memory(it) => it.next().map(|(_, r)| Ok(r.clone())),
            Inner::Merge {
                file,
                readers,
                heads,
                heap,
            } => {
                let Reverse((_, i)) = heap.pop()?;
                let (_, rec) = heads[i].take()?;
                match readers[i].next_record(file) {
                    Ok(head) => {
                        if let Some((seq, r)) = &head {
                            heap.push(Reverse((key(*seq, r), i)));
                        }
                        heads[i] = head;
                    }
                    Err(e) => return Some(Err(e)),
                }
                Some(Ok(rec))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(start: u64, probe: u8, bubbles: u32) -> HostRecord {
        let mut r = crate::shared::rig::test_record(probe, start, 10, 3, bubbles);
        r.since_front = Some(start as i64 - 7);
        r
    }

    /// The store gives what a stable in-memory sort by (start, probe) gives, spilled or not.
    #[test]
    fn merged_runs_match_a_stable_sort() {
        const RUN: usize = 64;
        for n in [0usize, 5, RUN - 1, RUN, 3 * RUN + 17, 40 * RUN + 3] {
            let mut store = WindowStore::with_runs_of(RUN);
            let mut all = Vec::new();
            // A pseudo-random order with many equal keys (a linear congruential sequence).
            let mut x = 12_345u64;
            for i in 0..n {
                x = x.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1);
                let r = rec((x >> 40) % 300, ((x >> 20) % 4) as u8, i as u32);
                all.push(r.clone());
                store.push(r).unwrap();
            }
            all.sort_by_key(|r| (r.start, r.probe));
            assert_eq!(store.len(), n as u64);
            for _pass in 0..2 {
                let got: Vec<HostRecord> = store.sorted().unwrap().map(|r| r.unwrap()).collect();
                assert_eq!(got.len(), all.len(), "n = {n}");
                assert!(got == all, "n = {n}: order differs from a stable sort");
            }
            assert!(store.into_vec().unwrap() == all);
        }
    }

    /// Profile slices come back in the order they went in, across runs.
    #[test]
    fn profile_slices_keep_their_order() {
        let mut store = ProfileStore::with_runs_of(7);
        let mut all = Vec::new();
        for i in 0..50u32 {
            let p = ProfileRecord {
                slice: i,
                start: 1000 - u64::from(i),
                end: 1010,
                since_front: i64::from(i),
                fit: Default::default(),
                used: i,
                dead: 0,
                unlearnt: 0,
                partial: i % 3 == 0,
                decay_points: 0,
                decay: None,
            };
            let rec = ((i % 2) as usize, p);
            all.push(rec);
            store.push(rec).unwrap();
        }
        let got: Vec<_> = store.sorted().unwrap().map(|r| r.unwrap()).collect();
        assert!(got == all);
    }
}
