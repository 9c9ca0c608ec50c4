//! Writing an archive: the file header, then one checksummed chunk per append, each
//! written whole and flushed.

use std::fs::{File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};

use super::clock::session_file_name;
use super::{
    crc32, ChunkKind, FILE_HEADER_BYTES, FILE_MAGIC, FORMAT_VERSION, MAX_PAYLOAD, MAX_PORTS, SYNC,
};

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
