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
//! 14     2     chunk kind, u16 LE (below)
//! 16     4     payload length N, u32 LE
//! 20     N     payload
//! ```
//!
//! | kind | name   | payload |
//! |------|--------|---------|
//! | 0    | bytes  | raw bytes received from the port, as read |
//! | 1    | gap    | none: the port was lost (read error, unplugged) at this time |
//! | 2    | opened | the port's name (UTF-8): the port was opened (at start, after a gap) |
//! | 3    | sent   | raw bytes the host wrote to the port (command frames) |
//! | 4    | layout | the text of the layout file (TOML) that named the probes (port 0) |
//!
//! Kinds 2 to 4 make the archive a complete record of the session: which port was which,
//! which commands the host sent (their sequence numbers explain the device's replies), and
//! the probe names the session used.
//! Only kind 0 carries link input; a reader that knows only kinds 0 and 1 stops at the first
//! other chunk and says so.
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
    /// The port was opened; the payload is its name.
    Opened,
    /// Bytes the host sent to the port.
    Sent,
    /// The layout text (TOML) of the session.
    Layout,
}

impl ChunkKind {
    /// The code in the chunk header.
    pub const fn code(self) -> u16 {
        match self {
            ChunkKind::Bytes => 0,
            ChunkKind::Gap => 1,
            ChunkKind::Opened => 2,
            ChunkKind::Sent => 3,
            ChunkKind::Layout => 4,
        }
    }

    /// The kind of a code, if known.
    pub const fn from_code(code: u16) -> Option<ChunkKind> {
        match code {
            0 => Some(ChunkKind::Bytes),
            1 => Some(ChunkKind::Gap),
            2 => Some(ChunkKind::Opened),
            3 => Some(ChunkKind::Sent),
            4 => Some(ChunkKind::Layout),
            _ => None,
        }
    }
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
    /// The payload: raw bytes (received or sent), the port name, or empty for a gap.
    pub bytes: Vec<u8>,
}

/// Microseconds since the Unix epoch, now.
pub fn now_us() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_micros() as u64)
}

/// A UTC timestamp `YYYYMMDDTHHMMSSZ` of microseconds since the Unix epoch (ISO 8601 basic
/// format: sorts as text, no characters that file systems refuse).
pub fn utc_stamp(unix_us: u64) -> String {
    let secs = unix_us / 1_000_000;
    let (days, rem) = (secs / 86_400, secs % 86_400);
    // Civil date from days since 1970-01-01 (proleptic Gregorian calendar, 400-year eras).
    let z = days as i64 + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}{month:02}{day:02}T{:02}{:02}{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// The archive file name of a session started at `unix_us`: `session-<UTC stamp>.flc`.
pub fn session_file_name(unix_us: u64) -> String {
    format!("session-{}.flc", utc_stamp(unix_us))
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
        Ok(ArchiveWriter {
            file,
            path: path.to_path_buf(),
            bytes,
        })
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

    /// Record that `port` (named `name`) was opened at `host_time_us`.
    pub fn opened(&mut self, port: u16, host_time_us: u64, name: &str) -> io::Result<()> {
        let name = name.as_bytes();
        let name = &name[..name.len().min(MAX_PAYLOAD)];
        self.write_chunk(port, host_time_us, ChunkKind::Opened, name)
    }

    /// Record bytes the host wrote to `port` at `host_time_us`.
    pub fn sent(&mut self, port: u16, host_time_us: u64, bytes: &[u8]) -> io::Result<()> {
        for part in bytes.chunks(MAX_PAYLOAD) {
            self.write_chunk(port, host_time_us, ChunkKind::Sent, part)?;
        }
        Ok(())
    }

    fn write_chunk(
        &mut self,
        port: u16,
        t: u64,
        kind: ChunkKind,
        payload: &[u8],
    ) -> io::Result<()> {
        let mut buf = Vec::with_capacity(HEADER_BYTES + payload.len());
        buf.extend_from_slice(&MAGIC);
        buf.extend_from_slice(&t.to_le_bytes());
        buf.extend_from_slice(&port.to_le_bytes());
        buf.extend_from_slice(&kind.code().to_le_bytes());
        buf.extend_from_slice(&(payload.len() as u32).to_le_bytes());
        buf.extend_from_slice(payload);
        self.file.write_all(&buf)?;
        self.file.flush()?;
        self.bytes += buf.len() as u64;
        Ok(())
    }

    /// Record the session's layout text at `host_time_us` (cut at the largest payload).
    pub fn layout(&mut self, host_time_us: u64, text: &str) -> io::Result<()> {
        let b = text.as_bytes();
        self.write_chunk(
            0,
            host_time_us,
            ChunkKind::Layout,
            &b[..b.len().min(MAX_PAYLOAD)],
        )
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
        Ok(ArchiveReader {
            input: BufReader::new(file),
            offset: 0,
            size,
            tail: None,
        })
    }

    /// Bytes of the file read so far (the offset of the next chunk).
    pub fn offset(&self) -> u64 {
        self.offset
    }

    /// Size of the file when it was opened.
    pub fn size(&self) -> u64 {
        self.size
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
        let kind = ChunkKind::from_code(u16::from_le_bytes([h[14], h[15]]));
        let len = u32::from_le_bytes([h[16], h[17], h[18], h[19]]) as u64;
        let (Some(kind), true) = (kind, h[..4] == MAGIC && len <= MAX_PAYLOAD as u64) else {
            self.tail = Some(Tail::Corrupt {
                offset: self.offset,
                bytes: left,
            });
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
            assert_eq!(
                r.tail() == Some(&Tail::Clean),
                expect_clean,
                "cut at {cut}: {:?}",
                r.tail()
            );
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
    fn utc_stamps_of_known_instants() {
        assert_eq!(utc_stamp(0), "19700101T000000Z");
        // 2000-02-29 12:34:56 UTC (a leap day of a century leap year).
        assert_eq!(utc_stamp(951_827_696_000_000), "20000229T123456Z");
        // 2024-12-31 23:59:59 UTC.
        assert_eq!(utc_stamp(1_735_689_599_999_999), "20241231T235959Z");
        assert_eq!(session_file_name(0), "session-19700101T000000Z.flc");
    }

    #[test]
    fn opened_and_sent_chunks_round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("c.flc");
        let mut w = ArchiveWriter::open(&path).unwrap();
        w.opened(1, 5, "/dev/ttyACM0").unwrap();
        w.sent(1, 6, &[1, 2, 0]).unwrap();
        drop(w);
        let mut r = ArchiveReader::open(&path).unwrap();
        let a = r.next_chunk().unwrap().unwrap();
        assert_eq!(
            (a.kind, a.port, a.bytes.as_slice()),
            (ChunkKind::Opened, 1, &b"/dev/ttyACM0"[..])
        );
        let b = r.next_chunk().unwrap().unwrap();
        assert_eq!(
            (b.kind, b.host_time_us, b.bytes),
            (ChunkKind::Sent, 6, vec![1, 2, 0])
        );
        assert!(r.next_chunk().unwrap().is_none());
        assert_eq!(r.tail(), Some(&Tail::Clean));
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
        assert!(matches!(
            r.tail(),
            Some(Tail::Corrupt {
                offset: 25,
                bytes: 64
            })
        ));
    }
}
