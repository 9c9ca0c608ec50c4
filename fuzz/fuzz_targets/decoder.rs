//! Arbitrary bytes, fed in chunks, to the streaming frame decoder.
//!
//! Input: the first byte picks the chunk length (1..=64), the rest is the byte stream.
//! Checks: no panic; every frame the decoder yields re-encodes within `MAX_FRAME_BYTES`
//! and decodes again to itself; a decoder with a small buffer (the oversize path) yields
//! no frame the large one did not; the counters stay within the input.
#![no_main]

use frothline_core::wire::{decode, encode, Decoder, FeedResult, Frame, MAX_FRAME_BYTES};
use libfuzzer_sys::fuzz_target;

fn run<const N: usize>(dec: &mut Decoder<N, 4>, bytes: &[u8], chunk: usize, out: &mut Vec<Frame>) {
    for piece in bytes.chunks(chunk) {
        let mut window = piece;
        while !window.is_empty() {
            let r = dec.feed(window);
            window = r.remaining();
            if let FeedResult::Frame { frame, .. } = r {
                out.push(frame);
            }
        }
    }
}

fuzz_target!(|data: &[u8]| {
    let Some((&first, bytes)) = data.split_first() else {
        return;
    };
    let chunk = (first as usize % 64) + 1;

    let mut big = Decoder::<MAX_FRAME_BYTES, 4>::new();
    let mut frames = Vec::new();
    run(&mut big, bytes, chunk, &mut frames);

    let mut buf = [0u8; MAX_FRAME_BYTES];
    for f in &frames {
        let enc = encode(f, &mut buf).expect("a decoded frame re-encodes");
        assert!(enc.len() <= MAX_FRAME_BYTES);
        let mut again = enc.to_vec();
        assert_eq!(decode(&mut again).as_ref(), Ok(f));
    }

    let mut small = Decoder::<32, 4>::new();
    let mut few = Vec::new();
    run(&mut small, bytes, chunk, &mut few);
    assert!(few.iter().all(|f| frames.contains(f)));

    let s = big.stats();
    assert!(s.bytes_discarded <= bytes.len() as u64);
    assert_eq!(s.frames as usize, frames.len());
});
