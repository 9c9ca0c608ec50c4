//! A session archive (`.frothwire`, docs/archive-format.md) with random damage at random
//! offsets: bit flips, a cut-short end, zeroed and garbage stretches. Reading never panics
//! and always ends; `unpack` either refuses the file with an error naming it, or decodes
//! window results that are an in-order subsequence of the undamaged archive's (every chunk
//! carries a CRC-32 and every frame a CRC, so a damaged chunk or frame is skipped, not read
//! wrong: the archive format and docs/wire-protocol.md). Property-based testing as in
//! QuickCheck (Claessen and Hughes, ICFP 2000), with the proptest crate.

use frothline_core::wire::{
    encode, Body, DeviceDescription, Frame, ProbeLayout, WindowResult, WindowSetting,
    MAX_FRAME_BYTES,
};
use frothline_host::live::unpack::unpack_with;
use frothline_host::shared::archive::{ArchiveReader, ArchiveWriter};
use frothline_host::shared::session::Event;
use std::path::Path;

const T0: u64 = 1_796_191_038_000_000;
const WINDOWS: u64 = 40;

fn enc(f: &Frame) -> Vec<u8> {
    let mut buf = [0u8; MAX_FRAME_BYTES];
    encode(f, &mut buf).unwrap().to_vec()
}

fn description() -> Body {
    let mut d = DeviceDescription {
        firmware: Default::default(),
        sample_rate_millihz: 20_000_000,
        channels: 1,
        window: WindowSetting::Frames(2000),
        probes: Default::default(),
    };
    let _ = d.firmware.push_str("t-1");
    let _ = d.probes.push(ProbeLayout {
        station: 0,
        leading: 0,
        trailing: None,
        elevation: 125,
        x: 0,
    });
    Body::Describe(d)
}

fn window(i: u64) -> WindowResult {
    WindowResult {
        probe: 0,
        start: i * 2000,
        frames: 2000,
        void_fraction: 1000 + i as u16 * 37,
        bubble_rate: 4567,
        bubbles: 9,
        chords: None,
        correlation: None,
        flags: 0,
    }
}

/// The undamaged archive: a port opened, a description, then the windows, one frame per
/// chunk for the first half and three frames per chunk after (chunks need not end on a
/// frame), with a gap chunk in the middle.
fn undamaged(path: &Path) -> (Vec<u8>, u64) {
    let mut w = ArchiveWriter::create(path, T0).unwrap();
    let mut chunks = 0u64;
    w.opened(0, T0, "sim").unwrap();
    chunks += 1;
    let frame = |seq: u16, body: Body| {
        enc(&Frame {
            device: 1,
            seq,
            body,
        })
    };
    w.append(0, T0 + 1000, &frame(0, description())).unwrap();
    chunks += 1;
    let mut t = T0 + 2000;
    let mut pending = Vec::new();
    for i in 0..WINDOWS {
        pending.extend(frame(1 + i as u16, Body::window(window(i))));
        t += 100_000;
        if i < WINDOWS / 2 || pending.len() > 3 * 20 || i == WINDOWS - 1 {
            // Second half: split the bytes unevenly across chunks.
            let cut = if i < WINDOWS / 2 {
                pending.len()
            } else {
                pending.len() * 2 / 3
            };
            let rest = pending.split_off(cut);
            w.append(0, t, &pending).unwrap();
            chunks += 1;
            pending = rest;
        }
        if i == WINDOWS / 2 {
            w.gap(0, t).unwrap();
            chunks += 1;
        }
    }
    if !pending.is_empty() {
        w.append(0, t + 1, &pending).unwrap();
        chunks += 1;
    }
    w.sync().unwrap();
    drop(w);
    (std::fs::read(path).unwrap(), chunks)
}

/// A window result decoded: (port, device, window).
type Seen = (usize, u16, WindowResult);

/// Every window result `unpack` decodes from `path`, and the chunks it read.
fn windows(path: &Path, out: &Path) -> Result<(Vec<Seen>, u64), String> {
    let mut seen = Vec::new();
    let r = unpack_with(path, Some(out), None, &mut |e| {
        if let Event::Window {
            port,
            device,
            result,
        } = e
        {
            seen.push((*port, *device, *result));
        }
    })
    .map_err(|e| e.to_string())?;
    Ok((seen, r.chunks))
}

#[derive(Clone, Debug)]
enum Damage {
    Flip { at: usize, xor: u8 },
    Zero { at: usize, len: usize },
    Garbage { at: usize, bytes: Vec<u8> },
    Cut { at: usize },
}

fn damage() -> impl proptest::strategy::Strategy<Value = Damage> {
    use proptest::prelude::*;
    // The undamaged archive is about 1.5 kB: offsets over all of it.
    let n: usize = 1500;
    prop_oneof![
        (0..n, 1u8..=255).prop_map(|(at, xor)| Damage::Flip { at, xor }),
        (0..n, 1usize..300).prop_map(|(at, len)| Damage::Zero { at, len }),
        (0..n, proptest::collection::vec(any::<u8>(), 1..300))
            .prop_map(|(at, bytes)| Damage::Garbage { at, bytes }),
        (0..n).prop_map(|at| Damage::Cut { at }),
    ]
}

#[test]
fn the_undamaged_archive_unpacks_every_window() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("session.frothwire");
    let (_, chunks) = undamaged(&path);
    let (w, read) = windows(&path, &dir.path().join("out")).unwrap();
    assert_eq!(read, chunks);
    // Written by this test above: WINDOWS windows, in order.
    let want: Vec<WindowResult> = (0..WINDOWS).map(window).collect();
    let got: Vec<WindowResult> = w.into_iter().map(|(_, _, r)| r).collect();
    assert_eq!(got, want);
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig { cases: 96, ..Default::default() })]

    /// An archive damaged at random: the reader ends, reads no more chunks than were
    /// written and skips no more bytes than the file holds; `unpack` refuses the file by
    /// name or decodes an in-order subsequence of the undamaged archive's windows.
    #[test]
    fn a_damaged_archive_unpacks_a_subsequence_of_its_windows(
        hits in proptest::collection::vec(damage(), 1..5),
    ) {
        let dir = tempfile::tempdir().unwrap();
        let clean = dir.path().join("clean.frothwire");
        let (bytes, chunks) = undamaged(&clean);
        let (want, _) = windows(&clean, &dir.path().join("clean-out")).unwrap();
        let mut img = bytes.clone();
        for d in &hits {
            match d {
                Damage::Flip { at, xor } => {
                    if let Some(b) = img.get_mut(*at) {
                        *b ^= xor;
                    }
                }
                Damage::Zero { at, len } => {
                    let end = (at + len).min(img.len());
                    for b in img.iter_mut().take(end).skip(*at) {
                        *b = 0;
                    }
                }
                Damage::Garbage { at, bytes } => {
                    for (k, g) in bytes.iter().enumerate() {
                        if let Some(b) = img.get_mut(at + k) {
                            *b = *g;
                        }
                    }
                }
                Damage::Cut { at } => img.truncate(*at),
            }
        }
        let path = dir.path().join("damaged.frothwire");
        std::fs::write(&path, &img).unwrap();

        if let Ok(mut r) = ArchiveReader::open(&path) {
            let mut read = 0u64;
            while let Some(_c) = r.next_chunk().unwrap() {
                read += 1;
                proptest::prop_assert!(read <= chunks, "more chunks than were written");
            }
            let skipped: u64 = r.damage().iter().map(|d| d.bytes).sum();
            proptest::prop_assert!(skipped <= img.len() as u64);
        }
        match windows(&path, &dir.path().join("out")) {
            Ok((got, read)) => {
                proptest::prop_assert!(read <= chunks);
                let mut from = 0;
                for w in &got {
                    let at = want[from..].iter().position(|x| x == w);
                    proptest::prop_assert!(at.is_some(), "a window not in the undamaged archive: {:?}", w);
                    from += at.unwrap() + 1;
                }
            }
            Err(msg) => proptest::prop_assert!(msg.contains("damaged.frothwire"), "{}", msg),
        }
    }
}
