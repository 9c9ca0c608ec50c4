//! Reading an archive back chunk by chunk in bounded memory, skipping and reporting damage
//! and telling how the file ended.

use std::fs::File;
use std::io::{self, Read};
use std::path::Path;

use super::{
    crc32, Chunk, ChunkKind, FILE_HEADER_BYTES, FILE_MAGIC, FORMAT_VERSION, MAX_PAYLOAD, MAX_PORTS,
    SYNC,
};

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
    /// The archive's bytes after those read into `buf` (a file, or bytes in memory).
    input: Box<dyn Read + Send>,
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
        let input = File::open(path)?;
        let size = input.metadata()?.len();
        Self::from_reader(path, Box::new(input), size)
    }

    /// Read an archive held in memory (`path` names it in errors), as [`open`](Self::open)
    /// reads a file.
    pub fn from_bytes(path: &Path, bytes: Vec<u8>) -> io::Result<Self> {
        let size = bytes.len() as u64;
        Self::from_reader(path, Box::new(io::Cursor::new(bytes)), size)
    }

    fn from_reader(path: &Path, mut input: Box<dyn Read + Send>, size: u64) -> io::Result<Self> {
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
