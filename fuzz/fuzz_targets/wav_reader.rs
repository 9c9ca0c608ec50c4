//! Arbitrary bytes as a capture file, read by the host's WAV reader.
//!
//! Input: the first byte picks the block size in frames (1..=256), the rest is the file.
//! Checks: no panic; every block holds whole frames (`channels` samples each); the reader
//! never hands back more frames than the file has room for; after the end (or a
//! truncation) it hands back nothing more.
#![no_main]

use frothline_host::shared::capture::Capture;
use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Some((&first, bytes)) = data.split_first() else {
        return;
    };
    let block = usize::from(first) + 1;
    let len = bytes.len();
    let Ok(mut cap) = Capture::from_bytes(Path::new("fuzz.wav"), bytes.to_vec()) else {
        return;
    };
    if first & 1 == 1 {
        cap.end_at_cut();
    }
    let channels = cap.channels();
    assert!(channels > 0);
    assert!(cap.frames_in_file() <= cap.frames());
    let mut buf = Vec::new();
    let mut total = 0u64;
    loop {
        match cap.read_frames(&mut buf, block) {
            Ok(0) => break,
            Ok(n) => {
                assert!(n <= block);
                assert_eq!(buf.len(), n * channels);
                total += n as u64;
            }
            Err(_) => break,
        }
    }
    assert!(total <= cap.frames_in_file());
    assert!(total * channels as u64 <= len as u64);
    // Nothing more after the end.
    assert!(!matches!(cap.read_frames(&mut buf, block), Ok(n) if n > 0));
});
