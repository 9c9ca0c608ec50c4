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

mod clock;
mod reader;
mod writer;
pub use clock::{now_us, session_file_name, utc_iso, utc_stamp};
pub use reader::{ArchiveReader, Damage, Tail};
pub use writer::ArchiveWriter;

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

/// The CRC of headers and chunks: CRC-32/ISO-HDLC, the frames' CRC
/// ([`frothline_core::wire::crc32`]), computed with `crc32fast`: a reader resynchronising
/// over hostile bytes may test a CRC over up to 64 KiB at every sync pair.
fn crc32(bytes: &[u8]) -> u32 {
    crc32fast::hash(bytes)
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

#[cfg(test)]
mod tests;
