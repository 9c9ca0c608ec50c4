//! Arbitrary bytes, fed in chunks, to the streaming frame decoder.
//!
//! Input: the first byte picks the chunk length (1..=64), the rest is the byte stream.
//! Checks: no panic; every frame the decoder yields re-encodes within `MAX_FRAME_BYTES`
//! and decodes again to itself; a decoder with a small buffer (the oversize path) yields
//! no frame the large one did not; the counters stay within the input. The same bytes go
//! to a device's command responder (every version-2 command kind and its answers): no
//! panic, at most one answer per delimiter, and an answer only to a frame whose CRC held
//! with the host id.
#![no_main]

use frothline_core::wire::{
    decode, encode, CommandTarget, Decoder, FeedResult, Frame, NackReason, Responder, StartRun,
    WindowSetting, HOST_ID, MAX_FRAME_BYTES,
};
use libfuzzer_sys::fuzz_target;

/// A device that carries out every command (toggling its run).
struct Target(bool);

impl CommandTarget for Target {
    fn running(&self) -> bool {
        self.0
    }
    fn start_run(&mut self, _: &StartRun) -> Result<(), NackReason> {
        self.0 = true;
        Ok(())
    }
    fn stop_run(&mut self) -> Result<(), NackReason> {
        self.0 = false;
        Ok(())
    }
    fn set_window(&mut self, s: WindowSetting) -> Result<(), NackReason> {
        match s.to_policy() {
            Some(p) if p.is_valid() => Ok(()),
            _ => Err(NackReason::BadArgument),
        }
    }
    fn relearn(&mut self, probes: u32) -> Result<(), NackReason> {
        if probes == 0 {
            Err(NackReason::BadArgument)
        } else {
            Ok(())
        }
    }
    fn describe(&mut self) -> Result<(), NackReason> {
        Ok(())
    }
}

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

    let mut responder = Responder::new();
    let mut target = Target(false);
    let mut answers = 0usize;
    for &b in bytes {
        if responder.feed(b, &mut target).is_some() {
            answers += 1;
        }
    }
    let delimiters = bytes.iter().filter(|&&b| b == 0).count();
    assert!(answers <= delimiters);
    // Every answer is to a CRC-valid frame of the host id that the decoder saw too (as a
    // frame, or as an unsupported one), unless it was too long for the decoder's buffer.
    let from_host = frames.iter().filter(|f| f.device == HOST_ID).count() as u64;
    let r = responder.stats();
    assert!((r.acks + r.nacks) as u64 <= from_host + s.unsupported + s.oversize + s.malformed);
});
