//! The session archive reader (`frothline_host::shared::archive::ArchiveReader`) on
//! arbitrary and on damaged archives.
//!
//! Input: the first byte picks the mode.
//! - Even: the rest is the file as it is. Checks: no panic; every chunk has a known kind, a
//!   port below `MAX_PORTS` and at most `MAX_PAYLOAD` bytes; the chunks, the skipped bytes and
//!   the tail together never exceed the file; the reader ends (every call moves on).
//! - Odd: the rest describes chunks (kind, port, time step, payload) that this target encodes
//!   by the format of `docs/archive-format.md` (its own encoder, not the host's writer), then
//!   damages: bytes flipped at chosen offsets and, optionally, the file cut short. Checks:
//!   every chunk that no damage touched is read back, in order, with its kind, port and
//!   payload (and its time when the file header is intact); the file is refused only when
//!   the damage touched its header.
#![no_main]

use frothline_host::shared::archive::{
    ArchiveReader, ChunkKind, FILE_HEADER_BYTES, FILE_MAGIC, FORMAT_VERSION, MAX_PAYLOAD,
    MAX_PORTS, SYNC,
};
use libfuzzer_sys::fuzz_target;
use std::path::Path;

const START_US: u64 = 1_700_000_000_000_000;

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

fn header() -> Vec<u8> {
    let mut h = FILE_MAGIC.to_vec();
    h.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
    h.extend_from_slice(&0u16.to_le_bytes());
    h.extend_from_slice(&START_US.to_le_bytes());
    let crc = frothline_core::wire::crc32(&h);
    h.extend_from_slice(&crc.to_le_bytes());
    assert_eq!(h.len(), FILE_HEADER_BYTES);
    h
}

/// One chunk written: where it lies in the file and what it holds.
struct Written {
    span: std::ops::Range<usize>,
    kind: ChunkKind,
    port: u16,
    t_us: u64,
    payload: Vec<u8>,
}

/// Read every chunk; checks that hold for any file. `None` if the file was refused.
fn read_all(bytes: Vec<u8>) -> Option<(Vec<frothline_host::shared::archive::Chunk>, bool)> {
    let size = bytes.len() as u64;
    let mut r = ArchiveReader::from_bytes(Path::new("fuzz.frothwire"), bytes).ok()?;
    let mut chunks = Vec::new();
    let mut payload_bytes = 0u64;
    while let Ok(Some(c)) = r.next_chunk() {
        assert!((c.port as usize) < MAX_PORTS);
        assert!(c.bytes.len() <= MAX_PAYLOAD);
        assert!(ChunkKind::from_code(c.kind.code()) == Some(c.kind));
        payload_bytes += c.bytes.len() as u64;
        // A chunk is at least 10 bytes beyond its payload; the reader cannot yield more
        // chunks than the file has room for.
        assert!(payload_bytes + 10 * (chunks.len() as u64 + 1) <= size);
        chunks.push(c);
    }
    assert!(r.offset() <= size);
    let skipped: u64 = r.damage().iter().map(|d| d.bytes).sum();
    assert!(skipped <= size);
    assert!(matches!(r.next_chunk(), Ok(None)));
    Some((chunks, r.header_damaged()))
}

fuzz_target!(|data: &[u8]| {
    let Some((&mode, rest)) = data.split_first() else {
        return;
    };
    if mode & 1 == 0 {
        let mut file = Vec::new();
        // Half the raw inputs get a valid header, so the fuzzer reaches the chunk parser.
        if mode & 2 == 0 {
            file.extend_from_slice(&header());
        }
        file.extend_from_slice(rest);
        read_all(file);
        return;
    }

    // Damaged-archive mode. Layout of `rest`: n_flips (1 byte), cut (1 byte: 0 = none,
    // else keep that fraction of 255), flips (3 bytes each: offset u16 LE, xor mask), then
    // chunks (kind, port, time step, payload length, payload).
    let Some((&n_flips, rest)) = rest.split_first() else {
        return;
    };
    let Some((&cut, rest)) = rest.split_first() else {
        return;
    };
    let n_flips = usize::from(n_flips % 8);
    if rest.len() < 3 * n_flips {
        return;
    }
    let (flip_bytes, mut spec) = rest.split_at(3 * n_flips);
    let mut file = header();
    let mut written = Vec::new();
    let mut t = 0u64;
    while spec.len() >= 4 {
        let kind = ChunkKind::from_code(spec[0] % 6).unwrap();
        let port = u16::from(spec[1]) % MAX_PORTS as u16;
        t += u64::from(spec[2]) * 997;
        let len = usize::from(spec[3]).min(spec.len() - 4);
        // Payloads hold no sync byte: a payload that held a whole chunk of its own could be
        // read as that chunk once the chunk around it is damaged, which is right but not
        // what this check counts.
        let payload: Vec<u8> = spec[4..4 + len]
            .iter()
            .map(|&b| if b == SYNC[0] { 0 } else { b })
            .collect();
        spec = &spec[4 + len..];
        let begin = file.len();
        file.extend_from_slice(&SYNC);
        file.push(kind.code());
        file.push(port as u8);
        put_varint(&mut file, t);
        put_varint(&mut file, payload.len() as u64);
        file.extend_from_slice(&payload);
        let crc = frothline_core::wire::crc32(&file[begin + 2..]);
        file.extend_from_slice(&crc.to_le_bytes());
        written.push(Written {
            span: begin..file.len(),
            kind,
            port,
            t_us: START_US + t,
            payload,
        });
    }
    let mut touched = vec![false; file.len()];
    for f in flip_bytes.chunks_exact(3) {
        let at = usize::from(u16::from_le_bytes([f[0], f[1]])) % file.len();
        if f[2] != 0 {
            file[at] ^= f[2];
            touched[at] = true;
        }
    }
    let keep = if cut == 0 {
        file.len()
    } else {
        file.len() * usize::from(cut) / 255
    };
    file.truncate(keep);
    let header_touched = keep < FILE_HEADER_BYTES || touched[..FILE_HEADER_BYTES].iter().any(|&t| t);
    let Some((chunks, header_damaged)) = read_all(file) else {
        assert!(header_touched, "an archive with an intact header was refused");
        return;
    };
    assert!(!header_damaged || header_touched);
    // Every untouched chunk, in order, among those read.
    let mut read = chunks.iter();
    for w in written
        .iter()
        .filter(|w| w.span.end <= keep && !touched[w.span.clone()].iter().any(|&t| t))
    {
        let found = read.any(|c| {
            c.kind == w.kind
                && c.port == w.port
                && c.bytes == w.payload
                && (header_damaged || c.host_time_us == w.t_us)
        });
        assert!(found, "an undamaged chunk at {:?} was not read back", w.span);
    }
});
