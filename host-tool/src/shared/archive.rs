//! The lossless archive of a live session (`.frothwire`): every byte received from every
//! port, as received, in checksummed chunks. The format is specified in
//! `docs/archive-format.md` (enough to read an archive in another language); in short:
//!
//! ```text
//! file    = file header (24 bytes) ++ chunk*
//! header  = 89 'F' 'R' 'W' 0d 0a 1a 0a | version u16 LE = 2 | flags u16 LE = 0
//!           | start time u64 LE (µs since the Unix epoch) | CRC-32 LE of the 20 bytes before
//! chunk   = sync c5 57 | kind u8 | port u8 | time varint (µs since the start time)
//!           | length varint (<= 65536) | payload | CRC-32 LE of kind..payload
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
//! A chunk is written with one `write_all` and flushed, so a process killed at any moment
//! (kill -9, power cut) leaves at most one incomplete chunk at the end. Every chunk carries
//! its own CRC and its time counts from the file's start (not from the chunk before), so
//! damage in the middle costs only the damaged bytes: the reader skips to the next sync
//! pair that starts a chunk whose CRC holds, and reports the bytes it skipped.
//!
//! The reader keeps a window of the file in memory (at most a chunk and a megabyte), so an
//! archive of any length reads in bounded memory.

use std::fs::{File, OpenOptions};
use std::io::{self, Read, Write};
use std::path::{Path, PathBuf};

/// The eight bytes that start an archive: a non-ASCII byte, "FRW", CR LF, SUB, LF (a
/// transfer that mangles line ends or the high bit shows in the first bytes).
pub const FILE_MAGIC: [u8; 8] = [0x89, b'F', b'R', b'W', 0x0D, 0x0A, 0x1A, 0x0A];
/// The archive format version this build writes and reads.
pub const FORMAT_VERSION: u16 = 2;
/// Size of the file header.
pub const FILE_HEADER_BYTES: usize = 24;
/// The two bytes that start every chunk.
pub const SYNC: [u8; 2] = [0xC5, 0x57];
/// The file extension of session archives.
pub const EXTENSION: &str = "frothwire";
/// Largest payload of one chunk (larger reads are split).
pub const MAX_PAYLOAD: usize = 1 << 16;
/// Ports a session may have (port numbers 0..MAX_PORTS); a chunk naming another is damage.
pub const MAX_PORTS: usize = 64;
/// The longest chunk: sync, kind, port, a 10-byte time, a 3-byte length, payload, CRC.
pub const MAX_CHUNK_BYTES: usize = 2 + 1 + 1 + 10 + 3 + MAX_PAYLOAD + 4;

/// The CRC of headers and chunks: CRC-32/ISO-HDLC, the frames' CRC.
fn crc32(bytes: &[u8]) -> u32 {
    frothline_core::wire::crc32(bytes)
}

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
    /// A mark the user made (a short note on a moment of a run; [`crate::marks`]).
    Mark,
}

impl ChunkKind {
    /// The code in the chunk header.
    pub const fn code(self) -> u8 {
        match self {
            ChunkKind::Bytes => 0,
            ChunkKind::Gap => 1,
            ChunkKind::Opened => 2,
            ChunkKind::Sent => 3,
            ChunkKind::Layout => 4,
            ChunkKind::Mark => 5,
        }
    }

    /// The kind of a code, if known.
    pub const fn from_code(code: u8) -> Option<ChunkKind> {
        match code {
            0 => Some(ChunkKind::Bytes),
            1 => Some(ChunkKind::Gap),
            2 => Some(ChunkKind::Opened),
            3 => Some(ChunkKind::Sent),
            4 => Some(ChunkKind::Layout),
            5 => Some(ChunkKind::Mark),
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

/// Civil date (year, month, day) of days since 1970-01-01, proleptic Gregorian calendar
/// (the 400-year-era algorithm of H. Hinnant, "chrono-Compatible Low-Level Date
/// Algorithms").
fn civil(days: i64) -> (i64, i64, i64) {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    (yoe + era * 400 + i64::from(month <= 2), month, day)
}

fn split(unix_us: u64) -> ((i64, i64, i64), u64, u64) {
    let secs = unix_us / 1_000_000;
    (
        civil((secs / 86_400) as i64),
        secs % 86_400,
        (unix_us / 1000) % 1000,
    )
}

/// A UTC timestamp `YYYYMMDDTHHMMSSZ` of microseconds since the Unix epoch (ISO 8601 basic
/// format: sorts as text, no characters that file systems refuse).
pub fn utc_stamp(unix_us: u64) -> String {
    let ((y, mo, d), rem, _) = split(unix_us);
    format!(
        "{y:04}{mo:02}{d:02}T{:02}{:02}{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// A UTC time `YYYY-MM-DDTHH:MM:SS.mmmZ` (ISO 8601 extended format, milliseconds) of
/// microseconds since the Unix epoch. Any value prints as a whole date (years past 9999
/// get more digits).
pub fn utc_iso(unix_us: u64) -> String {
    let ((y, mo, d), rem, ms) = split(unix_us);
    format!(
        "{y:04}-{mo:02}-{d:02}T{:02}:{:02}:{:02}.{ms:03}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// The archive file name of a session started at `unix_us`, the `n`-th of that second
/// (from 1): `session-<UTC stamp>.frothwire`, then `session-<UTC stamp>-2.frothwire` ...
pub fn session_file_name(unix_us: u64, n: u32) -> String {
    match n {
        0 | 1 => format!("session-{}.{EXTENSION}", utc_stamp(unix_us)),
        n => format!("session-{}-{n}.{EXTENSION}", utc_stamp(unix_us)),
    }
}

fn put_varint(out: &mut Vec<u8>, mut v: u64) {
    loop {
        let b = (v & 0x7F) as u8;
        v >>= 7;
        if v == 0 {
            out.push(b);
            return;
        }
        out.push(b | 0x80);
    }
}

/// Appends chunks to an archive file.
pub struct ArchiveWriter {
    file: File,
    path: PathBuf,
    bytes: u64,
    start_us: u64,
}

impl ArchiveWriter {
    /// Create a new archive at `path` (never an existing file), its start time `start_us`.
    pub fn create(path: &Path, start_us: u64) -> io::Result<Self> {
        let file = OpenOptions::new().write(true).create_new(true).open(path)?;
        Self::start(file, path.to_path_buf(), start_us)
    }

    /// Create the archive of a session started at `start_us` in `dir` under the first free
    /// name of [`session_file_name`]: two sessions started in the same second get two
    /// files (the name is claimed with create-new, so even concurrent processes never
    /// share one).
    pub fn create_in(dir: &Path, start_us: u64) -> io::Result<Self> {
        for n in 1..=10_000u32 {
            let path = dir.join(session_file_name(start_us, n));
            match OpenOptions::new().write(true).create_new(true).open(&path) {
                Ok(file) => return Self::start(file, path, start_us),
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists => continue,
                Err(e) => return Err(e),
            }
        }
        Err(io::Error::new(
            io::ErrorKind::AlreadyExists,
            format!(
                "{}: 10000 sessions of the same second already there",
                dir.display()
            ),
        ))
    }

    fn start(mut file: File, path: PathBuf, start_us: u64) -> io::Result<Self> {
        let mut h = Vec::with_capacity(FILE_HEADER_BYTES);
        h.extend_from_slice(&FILE_MAGIC);
        h.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
        h.extend_from_slice(&0u16.to_le_bytes());
        h.extend_from_slice(&start_us.to_le_bytes());
        let crc = crc32(&h);
        h.extend_from_slice(&crc.to_le_bytes());
        file.write_all(&h)?;
        file.flush()?;
        Ok(ArchiveWriter {
            file,
            path,
            bytes: FILE_HEADER_BYTES as u64,
            start_us,
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

    /// True if no chunk was written yet.
    pub fn is_empty(&self) -> bool {
        self.bytes <= FILE_HEADER_BYTES as u64
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

    /// Record a mark made at `host_time_us` for the device on `port`; `payload` is
    /// [`crate::shared::marks::to_payload`]'s (at most a few hundred bytes).
    pub fn mark(&mut self, port: u16, host_time_us: u64, payload: &[u8]) -> io::Result<()> {
        let p = &payload[..payload.len().min(MAX_PAYLOAD)];
        self.write_chunk(port, host_time_us, ChunkKind::Mark, p)
    }

    fn write_chunk(
        &mut self,
        port: u16,
        t: u64,
        kind: ChunkKind,
        payload: &[u8],
    ) -> io::Result<()> {
        let port = u8::try_from(port)
            .ok()
            .filter(|&p| (p as usize) < MAX_PORTS)
            .ok_or_else(|| {
                io::Error::new(
                    io::ErrorKind::InvalidInput,
                    format!("port {port}: an archive holds ports 0 to {}", MAX_PORTS - 1),
                )
            })?;
        let mut buf = Vec::with_capacity(payload.len() + 24);
        buf.extend_from_slice(&SYNC);
        buf.push(kind.code());
        buf.push(port);
        put_varint(&mut buf, t.saturating_sub(self.start_us));
        put_varint(&mut buf, payload.len() as u64);
        buf.extend_from_slice(payload);
        let crc = crc32(&buf[SYNC.len()..]);
        buf.extend_from_slice(&crc.to_le_bytes());
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

/// How reading ended.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Tail {
    /// The file ended on a chunk boundary.
    Clean,
    /// The file ends with this many bytes that hold no whole chunk (the writer was killed
    /// mid-write, or the file was cut).
    Incomplete(u64),
}

/// Bytes the reader skipped because no valid chunk started there.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Damage {
    /// File offset of the first skipped byte.
    pub offset: u64,
    /// Bytes skipped up to the next valid chunk.
    pub bytes: u64,
}

/// Why a file is no archive this build reads.
fn not_an_archive(path: &Path, first: &[u8]) -> io::Error {
    let what = if first.is_empty() {
        "it is empty".to_string()
    } else if first.starts_with(b"RIFF") {
        "it is a RIFF/WAV file (a capture? read it with `frothline replay`)".to_string()
    } else if first.starts_with(b"FLC1") {
        "it is an archive of the old format (chunk magic FLC1), which this version does not read"
            .to_string()
    } else if first.starts_with(&FILE_MAGIC[..4]) {
        "its header is cut short".to_string()
    } else {
        let hex: Vec<String> = first.iter().take(8).map(|b| format!("{b:02x}")).collect();
        format!("it starts with {} instead of 89 46 52 57", hex.join(" "))
    };
    io::Error::new(
        io::ErrorKind::InvalidData,
        format!(
            "{}: not a frothline session archive: {what}",
            path.display()
        ),
    )
}

/// Reads an archive chunk by chunk, skipping damage.
pub struct ArchiveReader {
    input: File,
    /// Bytes of the file from offset `base`.
    buf: Vec<u8>,
    base: u64,
    /// Read position within `buf`.
    pos: usize,
    eof: bool,
    size: u64,
    start_us: u64,
    header_damaged: bool,
    damage: Vec<Damage>,
    tail: Option<Tail>,
}

/// A parse attempt of a chunk at a position.
enum Parse {
    /// A chunk of this many bytes.
    Chunk(Chunk, usize),
    /// No chunk starts here.
    Invalid,
    /// The file ends before the chunk would.
    Short,
}

impl ArchiveReader {
    /// Open an archive; an error naming the file if it is no archive (empty, a WAV, an
    /// old-format archive, other bytes).
    pub fn open(path: &Path) -> io::Result<Self> {
        let mut input = File::open(path)?;
        let size = input.metadata()?.len();
        let mut head = Vec::with_capacity(FILE_HEADER_BYTES);
        (&mut input)
            .take(FILE_HEADER_BYTES as u64)
            .read_to_end(&mut head)?;
        if head.len() < FILE_HEADER_BYTES || head[..8] != FILE_MAGIC {
            return Err(not_an_archive(path, &head));
        }
        let version = u16::from_le_bytes([head[8], head[9]]);
        let crc = u32::from_le_bytes([head[20], head[21], head[22], head[23]]);
        let header_damaged = crc32(&head[..20]) != crc;
        if !header_damaged && version != FORMAT_VERSION {
            return Err(io::Error::new(
                io::ErrorKind::InvalidData,
                format!(
                    "{}: archive format version {version}; this build reads version {FORMAT_VERSION}",
                    path.display()
                ),
            ));
        }
        let start_us = if header_damaged {
            0
        } else {
            u64::from_le_bytes(head[12..20].try_into().unwrap_or([0; 8]))
        };
        Ok(ArchiveReader {
            input,
            buf: Vec::new(),
            base: FILE_HEADER_BYTES as u64,
            pos: 0,
            eof: false,
            size,
            start_us,
            header_damaged,
            damage: Vec::new(),
            tail: None,
        })
    }

    /// Bytes of the file read so far (the offset of the next chunk).
    pub fn offset(&self) -> u64 {
        self.base + self.pos as u64
    }

    /// Size of the file when it was opened.
    pub fn size(&self) -> u64 {
        self.size
    }

    /// The session's start time, µs since the Unix epoch (0 if the file header is damaged).
    pub fn start_us(&self) -> u64 {
        self.start_us
    }

    /// True if the file header's CRC failed (chunk times then count from 1970).
    pub fn header_damaged(&self) -> bool {
        self.header_damaged
    }

    /// The damaged stretches skipped so far.
    pub fn damage(&self) -> &[Damage] {
        &self.damage
    }

    /// How reading ended; `None` until the last chunk was read.
    pub fn tail(&self) -> Option<&Tail> {
        self.tail.as_ref()
    }

    /// Make `n` bytes from `pos` available; false if the file ends first.
    fn ensure(&mut self, n: usize) -> io::Result<bool> {
        while self.buf.len() - self.pos < n {
            if self.eof {
                return Ok(false);
            }
            let want = (n - (self.buf.len() - self.pos)).max(1 << 16);
            let got = (&mut self.input)
                .take(want as u64)
                .read_to_end(&mut self.buf)?;
            if got == 0 {
                self.eof = true;
            }
        }
        Ok(true)
    }

    /// Drop the bytes before `pos` once they pass a megabyte (bounded memory).
    fn compact(&mut self) {
        if self.pos > (1 << 20) {
            self.buf.drain(..self.pos);
            self.base += self.pos as u64;
            self.pos = 0;
        }
    }

    /// Parse the chunk at `at` (an index into `buf`, at or after `pos`).
    fn parse(&mut self, at: usize) -> io::Result<Parse> {
        let rel = at - self.pos;
        // sync, kind, port, at least one byte each of time and length.
        if !self.ensure(rel + 6)? {
            return Ok(Parse::Short);
        }
        let b = &self.buf[at..];
        let kind = ChunkKind::from_code(b[2]);
        let port = b[3];
        let (Some(kind), true, true) = (kind, b[..2] == SYNC, (port as usize) < MAX_PORTS) else {
            return Ok(Parse::Invalid);
        };
        let mut i = 4;
        let mut field = |max_bytes: usize, this: &mut Self| -> io::Result<Option<Option<u64>>> {
            let mut v = 0u64;
            for k in 0..max_bytes {
                if !this.ensure(rel + i + 1)? {
                    return Ok(None);
                }
                let byte = this.buf[at + i];
                i += 1;
                v |= ((byte & 0x7F) as u64) << (7 * k);
                if byte & 0x80 == 0 {
                    return Ok(Some(Some(v)));
                }
            }
            Ok(Some(None))
        };
        let t = match field(10, self)? {
            None => return Ok(Parse::Short),
            Some(None) => return Ok(Parse::Invalid),
            Some(Some(t)) => t,
        };
        let len = match field(3, self)? {
            None => return Ok(Parse::Short),
            Some(None) => return Ok(Parse::Invalid),
            Some(Some(l)) if l as usize > MAX_PAYLOAD => return Ok(Parse::Invalid),
            Some(Some(l)) => l as usize,
        };
        let total = i + len + 4;
        if !self.ensure(rel + total)? {
            return Ok(Parse::Short);
        }
        let c = &self.buf[at..at + total];
        let crc = u32::from_le_bytes([c[total - 4], c[total - 3], c[total - 2], c[total - 1]]);
        if crc32(&c[2..total - 4]) != crc {
            return Ok(Parse::Invalid);
        }
        Ok(Parse::Chunk(
            Chunk {
                host_time_us: self.start_us.saturating_add(t),
                port: port as u16,
                kind,
                bytes: c[i..i + len].to_vec(),
            },
            total,
        ))
    }

    /// The next chunk, or None at the end (then see [`tail`](Self::tail)). Damage on the
    /// way is skipped and recorded in [`damage`](Self::damage): the reader resumes at the
    /// next sync pair that starts a chunk whose CRC holds.
    pub fn next_chunk(&mut self) -> io::Result<Option<Chunk>> {
        if self.tail.is_some() {
            return Ok(None);
        }
        self.compact();
        let mut at = self.pos;
        // The first place where a chunk began but the file ended before it did.
        let mut cut: Option<usize> = None;
        loop {
            match self.parse(at)? {
                Parse::Chunk(chunk, n) => {
                    if at > self.pos {
                        self.damage.push(Damage {
                            offset: self.offset(),
                            bytes: (at - self.pos) as u64,
                        });
                    }
                    self.pos = at + n;
                    return Ok(Some(chunk));
                }
                Parse::Short if at == self.pos && self.buf.len() == self.pos => {
                    self.tail = Some(Tail::Clean);
                    return Ok(None);
                }
                Parse::Short => {
                    cut.get_or_insert(at);
                }
                Parse::Invalid => {}
            }
            // Resynchronise on the next sync pair after `at`, reading on as needed.
            loop {
                let from = at + 1;
                let found = self
                    .buf
                    .get(from..)
                    .and_then(|rest| rest.windows(2).position(|w| w == SYNC));
                if let Some(k) = found {
                    at = from + k;
                    break;
                }
                if self.eof {
                    return Ok(self.finish(cut));
                }
                let seen = self.buf.len();
                let more = seen - self.pos + 1;
                self.ensure(more)?;
                // A sync pair may straddle the old end.
                at = at.max(seen.saturating_sub(2));
            }
        }
    }

    /// The end of the file: what lies between `pos` and a chunk cut short (`cut`), or the
    /// end, is damage; a chunk cut short is the incomplete tail.
    fn finish(&mut self, cut: Option<usize>) -> Option<Chunk> {
        let end = self.buf.len();
        let damaged_to = cut.unwrap_or(end);
        if damaged_to > self.pos {
            self.damage.push(Damage {
                offset: self.offset(),
                bytes: (damaged_to - self.pos) as u64,
            });
        }
        self.tail = Some(match cut {
            Some(c) => Tail::Incomplete((end - c) as u64),
            None => Tail::Clean,
        });
        self.pos = end;
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read_all(path: &Path) -> (Vec<Chunk>, ArchiveReader) {
        let mut r = ArchiveReader::open(path).unwrap();
        let mut v = Vec::new();
        while let Some(c) = r.next_chunk().unwrap() {
            v.push(c);
        }
        (v, r)
    }

    #[test]
    fn chunks_round_trip_and_a_cut_file_reads_up_to_the_last_whole_chunk() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.frothwire");
        let mut w = ArchiveWriter::create(&path, 1_000_000).unwrap();
        let payloads: Vec<Vec<u8>> = (0..50u8).map(|i| vec![i; 1 + i as usize * 7]).collect();
        let mut ends = Vec::new();
        for (i, p) in payloads.iter().enumerate() {
            w.append((i % 3) as u16, 1_000_000 + i as u64, p).unwrap();
            ends.push(w.len());
        }
        w.gap(1, 1_000_099).unwrap();
        drop(w);
        let full = std::fs::read(&path).unwrap();
        // Cut the file at every offset past the header: the reader returns exactly the
        // chunks before the cut, no damage, and an incomplete tail unless the cut falls on
        // a chunk boundary.
        for cut in (FILE_HEADER_BYTES..full.len()).step_by(13) {
            std::fs::write(&path, &full[..cut]).unwrap();
            let (chunks, r) = read_all(&path);
            for (n, c) in chunks.iter().enumerate() {
                assert_eq!(c.bytes, payloads[n]);
                assert_eq!(c.host_time_us, 1_000_000 + n as u64);
            }
            let whole = ends.iter().filter(|&&e| e <= cut as u64).count();
            assert_eq!(chunks.len(), whole, "cut at {cut}");
            assert!(r.damage().is_empty(), "cut at {cut}: {:?}", r.damage());
            let expect_clean = cut == FILE_HEADER_BYTES || ends.contains(&(cut as u64));
            assert_eq!(
                r.tail() == Some(&Tail::Clean),
                expect_clean,
                "cut at {cut}: {:?}",
                r.tail()
            );
        }
        std::fs::write(&path, &full).unwrap();
        let (chunks, _) = read_all(&path);
        assert_eq!(chunks.last().unwrap().kind, ChunkKind::Gap);
    }

    #[test]
    fn damage_in_the_middle_costs_only_the_damaged_chunks() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("d.frothwire");
        let mut w = ArchiveWriter::create(&path, 5).unwrap();
        for i in 0..20u8 {
            w.append(0, 10 + i as u64, &[i; 30]).unwrap();
        }
        drop(w);
        let mut bytes = std::fs::read(&path).unwrap();
        // Every chunk is 40 bytes: sync 2, kind 1, port 1, time 1 (under 128 µs), length 1,
        // payload 30, CRC 4.
        let chunk = 2 + 1 + 1 + 1 + 1 + 30 + 4;
        // Overwrite the header of chunk 5 (its port becomes 0xff) and flip a payload byte
        // of chunk 9.
        bytes[FILE_HEADER_BYTES + 5 * chunk + 3] = 0xFF;
        bytes[FILE_HEADER_BYTES + 9 * chunk + 10] ^= 0x01;
        std::fs::write(&path, &bytes).unwrap();
        let (chunks, r) = read_all(&path);
        let firsts: Vec<u8> = chunks.iter().map(|c| c.bytes[0]).collect();
        let want: Vec<u8> = (0..20).filter(|i| *i != 5 && *i != 9).collect();
        assert_eq!(firsts, want);
        assert_eq!(
            r.damage(),
            &[
                Damage {
                    offset: (FILE_HEADER_BYTES + 5 * chunk) as u64,
                    bytes: chunk as u64
                },
                Damage {
                    offset: (FILE_HEADER_BYTES + 9 * chunk) as u64,
                    bytes: chunk as u64
                }
            ]
        );
        assert_eq!(r.tail(), Some(&Tail::Clean));
    }

    #[test]
    fn files_that_are_no_archive_are_refused_by_name() {
        let dir = tempfile::tempdir().unwrap();
        let cases: [(&str, &[u8], &str); 4] = [
            ("empty.frothwire", b"", "it is empty"),
            ("c.wav", b"RIFF\x24\x00\x00\x00WAVEfmt ", "RIFF/WAV"),
            (
                "old-format.bin",
                b"FLC1\x00\x01\x02\x03\x04\x05\x06\x07\x08",
                "old format",
            ),
            (
                "noise.bin",
                &[0x13, 0x37, 0x42, 0x00, 1, 2, 3, 4, 5, 6],
                "13 37 42 00",
            ),
        ];
        for (name, bytes, says) in cases {
            let p = dir.path().join(name);
            std::fs::write(&p, bytes).unwrap();
            let e = ArchiveReader::open(&p).err().expect(name).to_string();
            assert!(e.contains(name) && e.contains(says), "{e}");
        }
    }

    /// The worked example of docs/archive-format.md, byte for byte.
    #[test]
    fn the_worked_example_of_the_format_page() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("example.frothwire");
        let start = 1_796_194_800_000_000;
        let mut w = ArchiveWriter::create(&path, start).unwrap();
        w.opened(0, start + 100_000, "/dev/ttyUSB0").unwrap();
        let ack = [
            0x0b, 0x02, 0x07, 0x30, 0x90, 0x03, 0x02, 0x06, 0xae, 0x31, 0x86, 0x00,
        ];
        w.append(0, start + 250_000, &ack).unwrap();
        drop(w);
        let hex: String = std::fs::read(&path)
            .unwrap()
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        assert_eq!(
            hex,
            "894652570d0a1a0a02000000005c0031a1610600525d3b29\
             c5570200a08d060c2f6465762f747479555342301cad9ced\
             c557000090a10f0c0b02073090030206ae31860018e661b2"
        );
        let (c, r) = read_all(&path);
        assert_eq!(r.start_us(), start);
        assert_eq!(
            (c[1].host_time_us, c[1].bytes.as_slice()),
            (start + 250_000, &ack[..])
        );
    }

    #[test]
    fn utc_stamps_of_known_instants() {
        assert_eq!(utc_stamp(0), "19700101T000000Z");
        // 2000-02-29 12:34:56 UTC (a leap day of a century leap year).
        assert_eq!(utc_stamp(951_827_696_000_000), "20000229T123456Z");
        // 2024-12-31 23:59:59 UTC.
        assert_eq!(utc_stamp(1_735_689_599_999_999), "20241231T235959Z");
        assert_eq!(utc_iso(1_735_689_599_999_999), "2024-12-31T23:59:59.999Z");
        // Past year 9999 the date is still whole.
        assert_eq!(
            utc_iso(253_402_300_800_000_000),
            "10000-01-01T00:00:00.000Z"
        );
        assert_eq!(
            session_file_name(0, 1),
            "session-19700101T000000Z.frothwire"
        );
        assert_eq!(
            session_file_name(0, 3),
            "session-19700101T000000Z-3.frothwire"
        );
    }

    #[test]
    fn two_archives_of_the_same_second_get_two_names() {
        let dir = tempfile::tempdir().unwrap();
        let a = ArchiveWriter::create_in(dir.path(), 42_000_000).unwrap();
        let b = ArchiveWriter::create_in(dir.path(), 42_300_000).unwrap();
        assert_ne!(a.path(), b.path());
        assert!(b.path().to_string_lossy().ends_with("-2.frothwire"));
        assert!(
            ArchiveWriter::create(a.path(), 0).is_err(),
            "never reuses a file"
        );
    }

    #[test]
    fn ports_beyond_the_bound_are_refused_when_writing() {
        let dir = tempfile::tempdir().unwrap();
        let mut w = ArchiveWriter::create(&dir.path().join("p.frothwire"), 0).unwrap();
        assert!(w.append(MAX_PORTS as u16, 1, b"x").is_err());
        assert!(w.append(0xFFFF, 1, b"x").is_err());
        w.append(MAX_PORTS as u16 - 1, 1, b"x").unwrap();
    }

    #[test]
    fn opened_and_sent_chunks_round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("c.frothwire");
        let mut w = ArchiveWriter::create(&path, 0).unwrap();
        w.opened(1, 5, "/dev/ttyACM0").unwrap();
        w.sent(1, 6, &[1, 2, 0]).unwrap();
        drop(w);
        let (c, r) = read_all(&path);
        assert_eq!(
            (c[0].kind, c[0].port, c[0].bytes.as_slice()),
            (ChunkKind::Opened, 1, &b"/dev/ttyACM0"[..])
        );
        assert_eq!(
            (c[1].kind, c[1].host_time_us, c[1].bytes.clone()),
            (ChunkKind::Sent, 6, vec![1, 2, 0])
        );
        assert_eq!(r.tail(), Some(&Tail::Clean));
    }

    #[test]
    fn garbage_after_the_last_chunk_is_reported_as_damage() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("b.frothwire");
        let mut w = ArchiveWriter::create(&path, 0).unwrap();
        w.append(0, 1, b"hello").unwrap();
        let end = w.len();
        drop(w);
        let mut f = OpenOptions::new().append(true).open(&path).unwrap();
        f.write_all(&[0xAA; 64]).unwrap();
        let (c, r) = read_all(&path);
        assert_eq!(c[0].bytes, b"hello");
        assert_eq!(c.len(), 1);
        assert_eq!(
            r.damage(),
            &[Damage {
                offset: end,
                bytes: 64
            }]
        );
    }
}
