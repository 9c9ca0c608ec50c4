//! The lossless archive of a live session: every byte received from every port, as received.
//!
//! A session archive is an append-only file of chunks. Each chunk holds a run of raw bytes
//! exactly as the serial port delivered them (frames, partial frames and garbage alike), so
//! the archive can be decoded again later with the same decoder and nothing the link carried
//! is lost. A chunk header gives the host's arrival time and the port:
//!
//! ```text
//! offset size  field
//! 0      4     magic "FLC1" (0x46 0x4C 0x43 0x31)
//! 4      8     host arrival time, microseconds since the Unix epoch, u64 little-endian
//! 12     2     port number within the session (order of --port options), u16 LE
//! 14     2     chunk kind: 0 = bytes, 1 = link gap (port lost; no payload), u16 LE
//! 16     4     payload length N, u32 LE
//! 20     N     payload: raw bytes from the port
//! ```
//!
//! A chunk is written with one `write_all` and flushed, so a process killed at any moment
//! (kill -9, power cut) leaves at most one incomplete chunk at the end; the reader stops
//! there and reports how many bytes it could not use.

use std::fs::{File, OpenOptions};
use std::io::{self, BufReader, Read, Write};
use std::path::{Path, PathBuf};

/// The four bytes that start every chunk.
pub const MAGIC: [u8; 4] = *b"FLC1";
/// Size of a chunk header.
pub const HEADER_BYTES: usize = 20;
/// Largest payload the writer emits in one chunk (larger reads are split).
pub const MAX_PAYLOAD: usize = 1 << 16;

/// What a chunk holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ChunkKind {
    /// Raw bytes from the port.
    Bytes,
    /// The port was lost (unplugged) at this time; bytes after it come after a reconnect.
    Gap,
}

/// One chunk read back.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Chunk {
    /// Host arrival time, microseconds since the Unix epoch.
    pub host_time_us: u64,
    /// Port number within the session.
    pub port: u16,
    /// What the chunk holds.
    pub kind: ChunkKind,
    /// The raw bytes (empty for a gap).
    pub bytes: Vec<u8>,
}

/// Microseconds since the Unix epoch, now.
pub fn now_us() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_micros() as u64)
}

/// Appends chunks to an archive file.
pub struct ArchiveWriter {
    file: File,
    path: PathBuf,
    bytes: u64,
}

impl ArchiveWriter {
    /// Open (create or append to) an archive.
    pub fn open(path: &Path) -> io::Result<Self> {
        let file = OpenOptions::new().create(true).append(true).open(path)?;
        let bytes = file.metadata()?.len();
        Ok(ArchiveWriter { file, path: path.to_path_buf(), bytes })
    }

    /// The archive's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Bytes in the file so far.
    pub fn len(&self) -> u64 {
        self.bytes
    }

    /// True if nothing was written yet.
    pub fn is_empty(&self) -> bool {
        self.bytes == 0
    }

    /// Append raw bytes received on `port` at `host_time_us`.
    pub fn append(&mut self, port: u16, host_time_us: u64, bytes: &[u8]) -> io::Result<()> {
        for part in bytes.chunks(MAX_PAYLOAD) {
            self.write_chunk(port, host_time_us, ChunkKind::Bytes, part)?;
        }
        Ok(())
    }

    /// Record that `port` was lost at `host_time_us`.
    pub fn gap(&mut self, port: u16, host_time_us: u64) -> io::Result<()> {
        self.write_chunk(port, host_time_us, ChunkKind::Gap, &[])
    }

    fn write_chunk(&mut self, port: u16, t: u64, kind: ChunkKind, payload: &[u8]) -> io::Result<()> {
        let mut buf = Vec::with_capacity(HEADER_BYTES + payload.len());
        buf.extend_from_slice(&MAGIC);
        buf.extend_from_slice(&t.to_le_bytes());
        buf.extend_from_slice(&port.to_le_bytes());
        buf.extend_from_slice(&(kind as u16).to_le_bytes());
        buf.extend_from_slice(&(payload.len() as u32).to_le_bytes());
        buf.extend_from_slice(payload);
        self.file.write_all(&buf)?;
        self.file.flush()?;
        self.bytes += buf.len() as u64;
        Ok(())
    }

    /// Flush to the disk (fsync), for a clean close.
    pub fn sync(&mut self) -> io::Result<()> {
        self.file.sync_data()
    }
}

/// Why reading stopped before the end of the file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Tail {
    /// The file ended on a chunk boundary.
    Clean,
    /// The last chunk is incomplete (the writer was killed mid-write): these bytes were unused.
    Incomplete(u64),
    /// A header was not a chunk header at this offset: the rest of the file was unused.
    Corrupt {
        /// Offset of the bad header.
        offset: u64,
        /// Bytes from there to the end.
        bytes: u64,
    },
}

/// Reads an archive chunk by chunk.
pub struct ArchiveReader {
    input: BufReader<File>,
    offset: u64,
    size: u64,
    tail: Option<Tail>,
}

impl ArchiveReader {
    /// Open an archive for reading.
    pub fn open(path: &Path) -> io::Result<Self> {
        let file = File::open(path)?;
        let size = file.metadata()?.len();
        Ok(ArchiveReader { input: BufReader::new(file), offset: 0, size, tail: None })
    }

    /// How reading ended; `None` until the last chunk was read.
    pub fn tail(&self) -> Option<&Tail> {
        self.tail.as_ref()
    }

    /// The next chunk, or None at the end (then see [`tail`](Self::tail)).
    pub fn next_chunk(&mut self) -> io::Result<Option<Chunk>> {
        if self.tail.is_some() {
            return Ok(None);
        }
        let left = self.size - self.offset;
        if left == 0 {
            self.tail = Some(Tail::Clean);
            return Ok(None);
        }
        if left < HEADER_BYTES as u64 {
            self.tail = Some(Tail::Incomplete(left));
            return Ok(None);
        }
        let mut h = [0u8; HEADER_BYTES];
        self.input.read_exact(&mut h)?;
        let kind = match u16::from_le_bytes([h[14], h[15]]) {
            0 => Some(ChunkKind::Bytes),
            1 => Some(ChunkKind::Gap),
            _ => None,
        };
        let len = u32::from_le_bytes([h[16], h[17], h[18], h[19]]) as u64;
        let (Some(kind), true) = (kind, h[..4] == MAGIC && len <= MAX_PAYLOAD as u64) else {
            self.tail = Some(Tail::Corrupt { offset: self.offset, bytes: left });
            return Ok(None);
        };
        if left < HEADER_BYTES as u64 + len {
            self.tail = Some(Tail::Incomplete(left));
            return Ok(None);
        }
        let mut bytes = vec![0u8; len as usize];
        self.input.read_exact(&mut bytes)?;
        self.offset += HEADER_BYTES as u64 + len;
        Ok(Some(Chunk {
            host_time_us: u64::from_le_bytes(h[4..12].try_into().unwrap_or([0; 8])),
            port: u16::from_le_bytes([h[12], h[13]]),
            kind,
            bytes,
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chunks_round_trip_and_a_cut_file_reads_up_to_the_last_whole_chunk() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.flc");
        let mut w = ArchiveWriter::open(&path).unwrap();
        let payloads: Vec<Vec<u8>> = (0..50u8).map(|i| vec![i; 1 + i as usize * 7]).collect();
        let mut ends = Vec::new();
        for (i, p) in payloads.iter().enumerate() {
            w.append((i % 3) as u16, 1000 + i as u64, p).unwrap();
            ends.push(w.len());
        }
        w.gap(1, 99).unwrap();
        drop(w);
        let full = std::fs::read(&path).unwrap();
        // Cut the file at every offset: the reader returns exactly the chunks before the cut.
        for cut in (0..full.len()).step_by(13) {
            std::fs::write(&path, &full[..cut]).unwrap();
            let mut r = ArchiveReader::open(&path).unwrap();
            let mut n = 0;
            while let Some(c) = r.next_chunk().unwrap() {
                assert_eq!(c.bytes, payloads[n]);
                n += 1;
            }
            let whole = ends.iter().filter(|&&e| e <= cut as u64).count();
            assert_eq!(n, whole, "cut at {cut}");
            let expect_clean = cut == 0 || ends.contains(&(cut as u64));
            assert_eq!(r.tail() == Some(&Tail::Clean), expect_clean, "cut at {cut}: {:?}", r.tail());
        }
        std::fs::write(&path, &full).unwrap();
        let mut r = ArchiveReader::open(&path).unwrap();
        let mut last = None;
        while let Some(c) = r.next_chunk().unwrap() {
            last = Some(c);
        }
        assert_eq!(last.unwrap().kind, ChunkKind::Gap);
    }

    #[test]
    fn garbage_instead_of_a_header_is_reported_not_fatal() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("b.flc");
        let mut w = ArchiveWriter::open(&path).unwrap();
        w.append(0, 1, b"hello").unwrap();
        drop(w);
        let mut f = OpenOptions::new().append(true).open(&path).unwrap();
        f.write_all(&[0xAA; 64]).unwrap();
        let mut r = ArchiveReader::open(&path).unwrap();
        assert_eq!(r.next_chunk().unwrap().unwrap().bytes, b"hello");
        assert!(r.next_chunk().unwrap().is_none());
        assert!(matches!(r.tail(), Some(Tail::Corrupt { offset: 25, bytes: 64 })));
    }
}
