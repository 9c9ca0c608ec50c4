//! Tests of the archive: round trips, cut and damaged files, headers, time stamps.

use std::fs::OpenOptions;
use std::io::Write;
use std::path::Path;

use super::{
    session_file_name, utc_iso, utc_stamp, ArchiveReader, ArchiveWriter, Chunk, ChunkKind, Damage,
    Tail, FILE_HEADER_BYTES, MAX_PORTS,
};

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

/// The archive's CRC (crc32fast) is the frames' CRC-32/ISO-HDLC: the standard check value
/// 0xCBF43926 of "123456789" (the CRC catalogue's parameter set for CRC-32/ISO-HDLC), and
/// equal to the core's CRC over assorted lengths.
#[test]
fn the_archive_crc_is_the_frame_crc() {
    assert_eq!(super::crc32(b"123456789"), 0xCBF4_3926);
    let mut x = 7u32;
    let bytes: Vec<u8> = (0..70_000)
        .map(|_| {
            x = x.wrapping_mul(1_103_515_245).wrapping_add(12_345);
            (x >> 16) as u8
        })
        .collect();
    for len in [0, 1, 3, 15, 16, 17, 63, 64, 65, 1000, 65_536, 70_000] {
        assert_eq!(
            super::crc32(&bytes[..len]),
            frothline_core::wire::crc32(&bytes[..len]),
            "length {len}"
        );
    }
}

/// A stretch full of sync pairs that each claim a long chunk is skipped, every byte of it
/// accounted for, and the chunk before it read. (Correctness only here: every candidate
/// costs a CRC over at most 64 KiB; `bash bench/archive_resync.sh` times it.)
#[test]
fn a_stretch_of_false_sync_pairs_is_skipped() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("s.frothwire");
    let mut w = ArchiveWriter::create(&path, 1_000).unwrap();
    w.append(0, 1_000, b"before").unwrap();
    drop(w);
    let mut f = OpenOptions::new().append(true).open(&path).unwrap();
    for _ in 0..2_000 {
        f.write_all(&[0xC5, 0x57, 0x00, 0x00, 0x00, 0xFF, 0xFF, 0x03])
            .unwrap();
    }
    drop(f);
    let (chunks, r) = read_all(&path);
    assert_eq!(chunks.len(), 1);
    assert_eq!(chunks[0].bytes, b"before");
    // Every byte of the stretch is accounted for: skipped as damage, or the cut tail.
    let skipped: u64 = r.damage().iter().map(|d| d.bytes).sum();
    let tail = match r.tail() {
        Some(Tail::Incomplete(n)) => *n,
        _ => 0,
    };
    assert_eq!(skipped + tail, 2_000 * 8, "{:?} {:?}", r.damage(), r.tail());
}
