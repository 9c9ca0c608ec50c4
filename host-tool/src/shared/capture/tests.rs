//! Tests of the capture reader: formats, conversions, headers, truncated and unfinished
//! files.

use super::*;
use hound::{WavSpec, WavWriter};

fn spec(channels: u16, bits: u16, float: bool) -> WavSpec {
    WavSpec {
        channels,
        sample_rate: 40_000,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    }
}

fn read_all(c: &mut Capture, block: usize) -> Result<Vec<i16>, CaptureError> {
    let mut all = Vec::new();
    let mut buf = Vec::new();
    loop {
        let n = c.read_frames(&mut buf, block)?;
        assert_eq!(buf.len(), n * c.channels());
        if n == 0 {
            return Ok(all);
        }
        all.extend_from_slice(&buf);
    }
}

/// A little-endian fmt chunk body (16 bytes).
fn fmt16(tag: u16, channels: u16, rate: u32, bits: u16, align: u16) -> Vec<u8> {
    let mut f = Vec::new();
    f.extend_from_slice(&tag.to_le_bytes());
    f.extend_from_slice(&channels.to_le_bytes());
    f.extend_from_slice(&rate.to_le_bytes());
    f.extend_from_slice(&(rate * u32::from(align)).to_le_bytes());
    f.extend_from_slice(&align.to_le_bytes());
    f.extend_from_slice(&bits.to_le_bytes());
    f
}

/// An extensible fmt chunk body (40 bytes).
fn fmt_ext(sub_tag: u16, channels: u16, container: u16, valid: u16) -> Vec<u8> {
    let align = channels * container / 8;
    let mut f = fmt16(0xFFFE, channels, 40_000, container, align);
    f.extend_from_slice(&22u16.to_le_bytes());
    f.extend_from_slice(&valid.to_le_bytes());
    f.extend_from_slice(&0u32.to_le_bytes());
    f.extend_from_slice(&sub_tag.to_le_bytes());
    f.extend_from_slice(&[0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71]);
    f
}

/// A WAV file from a fmt body and data; `declared` overrides the data chunk length.
fn wav(fmt: &[u8], data: &[u8], declared: Option<u32>) -> Vec<u8> {
    let mut w = Vec::new();
    w.extend_from_slice(b"RIFF");
    w.extend_from_slice(&((4 + 8 + fmt.len() + 8 + data.len()) as u32).to_le_bytes());
    w.extend_from_slice(b"WAVEfmt ");
    w.extend_from_slice(&(fmt.len() as u32).to_le_bytes());
    w.extend_from_slice(fmt);
    w.extend_from_slice(b"data");
    w.extend_from_slice(&declared.unwrap_or(data.len() as u32).to_le_bytes());
    w.extend_from_slice(data);
    w
}

struct Files(tempfile::TempDir);

impl Files {
    fn new() -> Files {
        Files(tempfile::tempdir().unwrap())
    }
    fn write(&self, name: &str, bytes: &[u8]) -> PathBuf {
        let p = self.0.path().join(name);
        std::fs::write(&p, bytes).unwrap();
        p
    }
    fn path(&self, name: &str) -> PathBuf {
        self.0.path().join(name)
    }
}

#[test]
fn pcm16_round_trip_in_odd_blocks() {
    let files = Files::new();
    let path = files.path("a.wav");
    let mut w = WavWriter::create(&path, spec(3, 16, false)).unwrap();
    let mut expected = Vec::new();
    for i in 0..1000i32 {
        for c in 0..3i32 {
            let v = ((i * 37 + c * 1001) % 65536 - 32768) as i16;
            w.write_sample(v).unwrap();
            expected.push(v);
        }
    }
    w.finalize().unwrap();
    let mut c = Capture::open(&path).unwrap();
    assert_eq!(
        (c.sample_rate(), c.channels(), c.frames()),
        (40_000, 3, 1000)
    );
    assert_eq!(c.frames_in_file(), 1000);
    assert_eq!(c.format(), SampleFormat::Int { bits: 16 });
    assert_eq!(read_all(&mut c, 7).unwrap(), expected);
    assert_eq!(c.position(), 1000);
    let mut buf = vec![1, 2, 3];
    assert_eq!(c.read_frames(&mut buf, 10).unwrap(), 0);
    assert!(buf.is_empty());
    // Everything in one call; max_frames = 0 reads nothing.
    let mut c = Capture::open(&path).unwrap();
    assert_eq!(c.read_frames(&mut buf, 0).unwrap(), 0);
    assert_eq!(c.read_frames(&mut buf, usize::MAX).unwrap(), 1000);
    assert_eq!(buf, expected);
}

#[test]
fn pcm8_24_32_and_float_conversion() {
    let files = Files::new();
    // 8-bit unsigned
    let p = files.path("u8.wav");
    let mut w = WavWriter::create(&p, spec(2, 8, false)).unwrap();
    for v in [-128i8, -1, 0, 127] {
        w.write_sample(v).unwrap(); // hound stores x + 128
    }
    w.finalize().unwrap();
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(c.format(), SampleFormat::Int { bits: 8 });
    assert_eq!(read_all(&mut c, 100).unwrap(), vec![-32768, -256, 0, 32512]);
    assert_eq!(c.to_counts(0.0), -32768.0);
    assert_eq!(c.to_counts(255.0), 32512.0);

    // 24-bit
    let p = files.path("i24.wav");
    let mut w = WavWriter::create(&p, spec(1, 24, false)).unwrap();
    let vals = [-8_388_608i32, -257, -256, -1, 0, 255, 256, 8_388_607];
    for v in vals {
        w.write_sample(v).unwrap();
    }
    w.finalize().unwrap();
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(c.format(), SampleFormat::Int { bits: 24 });
    let got = read_all(&mut c, 3).unwrap();
    assert_eq!(got, vals.map(|v| (v >> 8) as i16).to_vec());
    assert_eq!(got, vec![-32768, -2, -1, -1, 0, 0, 1, 32767]);
    for v in vals {
        assert_eq!(c.to_counts(f64::from(v)), f64::from(v >> 8), "{v}");
    }

    // 32-bit integer
    let p = files.path("i32.wav");
    let mut w = WavWriter::create(&p, spec(2, 32, false)).unwrap();
    let vals = [i32::MIN, -65537, -1, 0, 65536, i32::MAX];
    for v in vals {
        w.write_sample(v).unwrap();
    }
    w.finalize().unwrap();
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(c.format(), SampleFormat::Int { bits: 32 });
    assert_eq!(
        read_all(&mut c, 1).unwrap(),
        vals.map(|v| (v >> 16) as i16).to_vec()
    );
    for v in vals {
        assert_eq!(c.to_counts(f64::from(v)), f64::from(v >> 16), "{v}");
    }

    // 32-bit float
    let p = files.path("f32.wav");
    let mut w = WavWriter::create(&p, spec(1, 32, true)).unwrap();
    let vals = [
        -2.0f32,
        -1.0,
        -0.5,
        0.0,
        0.25,
        1.0,
        7.0,
        f32::NAN,
        3.0 / 32767.0,
    ];
    for v in vals {
        w.write_sample(v).unwrap();
    }
    w.finalize().unwrap();
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(c.format(), SampleFormat::Float32);
    let got = read_all(&mut c, 4).unwrap();
    assert_eq!(
        got,
        vec![-32767, -32767, -16384, 0, 8192, 32767, 32767, 0, 3]
    );
    for (v, g) in vals.iter().zip(&got) {
        assert_eq!(c.to_counts(f64::from(*v)), f64::from(*g), "{v}");
    }
    assert_eq!(c.format().full_scale(), (-1.0, 1.0));
    assert_eq!(
        SampleFormat::Int { bits: 16 }.full_scale(),
        (-32768.0, 32767.0)
    );
    assert_eq!(SampleFormat::Int { bits: 16 }.to_counts(26000.0), 26000.0);
}

#[test]
fn extensible_pcm_is_read() {
    let files = Files::new();
    let data: Vec<u8> = [100i16, -200, 300, -400]
        .iter()
        .flat_map(|v| v.to_le_bytes())
        .collect();
    let p = files.write("ext.wav", &wav(&fmt_ext(1, 2, 16, 16), &data, None));
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(read_all(&mut c, 5).unwrap(), vec![100, -200, 300, -400]);
}

#[test]
fn truncated_file_returns_frames_then_error() {
    let files = Files::new();
    let path = files.path("t.wav");
    let mut w = WavWriter::create(&path, spec(2, 16, false)).unwrap();
    for i in 0..2000 {
        w.write_sample(i as i16).unwrap();
    }
    w.finalize().unwrap();
    let bytes = std::fs::read(&path).unwrap();
    // 1000 frames of 4 bytes after a 44-byte header; keep 500 frames and 3 bytes.
    let cut = files.write("cut.wav", &bytes[..44 + 500 * 4 + 3]);
    let mut c = Capture::open(&cut).unwrap();
    assert_eq!((c.frames(), c.frames_in_file()), (1000, 500));
    let mut buf = Vec::new();
    let mut total = 0;
    let err = loop {
        match c.read_frames(&mut buf, 64) {
            Ok(0) => panic!("end of data without truncation error"),
            Ok(n) => {
                assert_eq!(buf[0], (total * 2) as i16);
                total += n;
            }
            Err(e) => break e,
        }
    };
    assert_eq!(total, 500);
    assert!(
        matches!(
            err,
            CaptureError::Truncated {
                frame: 500,
                declared: 1000,
                ..
            }
        ),
        "{err}"
    );
    let msg = err.to_string();
    assert!(
        msg.contains("cut.wav") && msg.contains("frame 500") && msg.contains("1000"),
        "{msg}"
    );
    // The error repeats.
    assert!(matches!(
        c.read_frames(&mut buf, 64),
        Err(CaptureError::Truncated { .. })
    ));
    // Cut exactly on a frame boundary, read in one call.
    let cut = files.write("cut2.wav", &bytes[..44 + 300 * 4]);
    let mut c = Capture::open(&cut).unwrap();
    assert_eq!(c.read_frames(&mut buf, 5000).unwrap(), 300);
    assert!(matches!(
        c.read_frames(&mut buf, 5000),
        Err(CaptureError::Truncated { frame: 300, .. })
    ));
    // Cut right after the header: the first call reports.
    let cut = files.write("cut3.wav", &bytes[..44]);
    let mut c = Capture::open(&cut).unwrap();
    assert!(matches!(
        c.read_frames(&mut buf, 10),
        Err(CaptureError::Truncated { frame: 0, .. })
    ));
}

#[test]
fn odd_trailing_bytes_are_ignored() {
    let files = Files::new();
    let data: Vec<u8> = [1i16, 2, 3, 4, 5, 6]
        .iter()
        .flat_map(|v| v.to_le_bytes())
        .collect();
    let fmt = fmt16(1, 2, 40_000, 16, 4);
    // A pad byte after the data chunk.
    let mut bytes = wav(&fmt, &data, None);
    bytes.push(0);
    let p = files.write("pad.wav", &bytes);
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(read_all(&mut c, 2).unwrap(), vec![1, 2, 3, 4, 5, 6]);
    // An odd byte inside the data chunk (not a whole frame).
    let mut odd = data.clone();
    odd.push(0x7F);
    let p = files.write("odd.wav", &wav(&fmt, &odd, None));
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(c.frames(), 3);
    assert_eq!(read_all(&mut c, 2).unwrap(), vec![1, 2, 3, 4, 5, 6]);
    // Unknown odd-sized chunk before the data (padded as RIFF requires).
    let mut bytes = Vec::new();
    bytes.extend_from_slice(b"RIFF\0\0\0\0WAVEfmt ");
    bytes.extend_from_slice(&16u32.to_le_bytes());
    bytes.extend_from_slice(&fmt);
    bytes.extend_from_slice(b"LIST");
    bytes.extend_from_slice(&3u32.to_le_bytes());
    bytes.extend_from_slice(b"abc\0");
    bytes.extend_from_slice(b"data");
    bytes.extend_from_slice(&(data.len() as u32).to_le_bytes());
    bytes.extend_from_slice(&data);
    let p = files.write("list.wav", &bytes);
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(read_all(&mut c, 2).unwrap(), vec![1, 2, 3, 4, 5, 6]);
}

#[track_caller]
fn open_err(files: &Files, name: &str, bytes: &[u8]) -> CaptureError {
    let p = files.write(name, bytes);
    let err = Capture::open(&p).expect_err("should be refused");
    assert!(err.to_string().contains(name), "{err}");
    assert_eq!(err.path(), p);
    err
}

#[test]
fn not_wav_files() {
    let files = Files::new();
    let e = open_err(&files, "empty.wav", b"");
    assert!(
        matches!(e, CaptureError::NotWav { .. }) && e.to_string().contains("empty"),
        "{e}"
    );
    let e = open_err(&files, "short.wav", b"RIF");
    assert!(matches!(e, CaptureError::NotWav { .. }), "{e}");
    let e = open_err(&files, "text.wav", b"name,value\nA,1\n");
    assert!(
        matches!(e, CaptureError::NotWav { .. }) && e.to_string().contains("RIFF"),
        "{e}"
    );
    let e = open_err(&files, "zeros.wav", &[0u8; 64]);
    assert!(
        e.to_string().contains("starts with bytes 00 00 00 00") && !e.to_string().contains('?'),
        "{e}"
    );
    let e = open_err(&files, "avi.wav", b"RIFF\x10\0\0\0AVI LIST\0\0\0\0");
    assert!(
        matches!(e, CaptureError::NotWav { .. }) && e.to_string().contains("AVI"),
        "{e}"
    );
    let e = open_err(&files, "rf64.wav", b"RF64\xff\xff\xff\xffWAVEds64");
    assert!(matches!(e, CaptureError::Unsupported { .. }), "{e}");
    let missing = files.path("absent.wav");
    let e = Capture::open(&missing).unwrap_err();
    assert!(
        matches!(e, CaptureError::Io { .. }) && e.to_string().contains("absent.wav"),
        "{e}"
    );
}

#[test]
fn malformed_headers() {
    let files = Files::new();
    let fmt = fmt16(1, 2, 40_000, 16, 4);
    // Header only: RIFF, WAVE and fmt, no data chunk.
    let mut bytes = wav(&fmt, &[], None);
    bytes.truncate(bytes.len() - 8);
    let e = open_err(&files, "hdr.wav", &bytes);
    assert!(
        matches!(e, CaptureError::Malformed { .. }) && e.to_string().contains("no data chunk"),
        "{e}"
    );
    // Only RIFF/WAVE.
    let e = open_err(&files, "riff.wav", b"RIFF\x04\0\0\0WAVE");
    assert!(e.to_string().contains("no fmt chunk"), "{e}");
    // Cut inside the fmt chunk.
    let e = open_err(&files, "fmtcut.wav", &bytes[..30]);
    assert!(e.to_string().contains("inside the fmt chunk"), "{e}");
    // Data before fmt.
    let e = open_err(&files, "order.wav", b"RIFF\x0c\0\0\0WAVEdata\0\0\0\0");
    assert!(e.to_string().contains("before the fmt"), "{e}");
    // Inconsistent byte rate (hound's check).
    let mut bad = fmt.clone();
    bad[8] ^= 1;
    let e = open_err(&files, "rate.wav", &wav(&bad, &[], None));
    assert!(matches!(e, CaptureError::Malformed { .. }), "{e}");
    // Block align not matching the channels.
    let e = open_err(
        &files,
        "align.wav",
        &wav(&fmt16(1, 2, 40_000, 16, 6), &[], None),
    );
    assert!(e.to_string().contains("block align"), "{e}");
    // A huge unknown chunk.
    let mut bytes = b"RIFF\0\0\0\0WAVEjunk\xff\xff\xff\x7f".to_vec();
    bytes.extend_from_slice(&[0; 64]);
    let e = open_err(&files, "junk.wav", &bytes);
    assert!(e.to_string().contains("junk"), "{e}");
    // A valid header with no samples is a valid, empty capture.
    let p = files.write("nodata.wav", &wav(&fmt, &[], None));
    let mut c = Capture::open(&p).unwrap();
    assert_eq!(c.frames(), 0);
    assert_eq!(read_all(&mut c, 10).unwrap(), Vec::<i16>::new());
}

#[test]
fn zero_channels() {
    let files = Files::new();
    let e = open_err(
        &files,
        "zero.wav",
        &wav(&fmt16(1, 0, 40_000, 16, 0), &[], None),
    );
    assert!(matches!(e, CaptureError::ZeroChannels { .. }), "{e}");
    assert!(e.to_string().contains("zero channels"), "{e}");
}

#[test]
fn unsupported_formats() {
    let files = Files::new();
    let cases: [(&str, Vec<u8>, &str); 6] = [
        ("alaw.wav", fmt16(6, 1, 8000, 8, 1), "A-law"),
        ("f64.wav", fmt16(3, 1, 40_000, 64, 8), "64-bit float"),
        ("i12.wav", fmt16(1, 1, 40_000, 12, 2), "12-bit"),
        (
            "ext12.wav",
            fmt_ext(1, 2, 16, 12),
            "12-bit integer samples in a 16-bit container",
        ),
        (
            "ext24in32.wav",
            fmt_ext(1, 2, 32, 24),
            "24-bit integer samples in a 32-bit",
        ),
        ("extalaw.wav", fmt_ext(6, 1, 8, 8), "A-law"),
    ];
    for (name, fmt, what) in cases {
        let e = open_err(&files, name, &wav(&fmt, &[0; 16], None));
        assert!(matches!(e, CaptureError::Unsupported { .. }), "{name}: {e}");
        assert!(e.to_string().contains(what), "{name}: {e}");
    }
}

/// Small deterministic generator for the robustness test.
struct XorShift(u64);

impl XorShift {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }
}

#[test]
fn never_panics_on_random_or_damaged_input() {
    let files = Files::new();
    let mut rng = XorShift(0x9E37_79B9_7F4A_7C15);
    let good = wav(&fmt16(1, 2, 40_000, 16, 4), &[7; 64], None);
    let good_ext = wav(&fmt_ext(3, 2, 32, 32), &[7; 64], None);
    let mut buf = Vec::new();
    for round in 0..600 {
        let bytes: Vec<u8> = match round % 3 {
            // Pure noise.
            0 => (0..rng.next() % 200).map(|_| rng.next() as u8).collect(),
            // A valid file with a few header bytes damaged and a random length.
            _ => {
                let mut b = if round % 3 == 1 {
                    good.clone()
                } else {
                    good_ext.clone()
                };
                let hdr = b.len() - 64;
                for _ in 0..1 + rng.next() % 4 {
                    let i = (rng.next() as usize) % hdr;
                    b[i] = rng.next() as u8;
                }
                let keep = (rng.next() as usize) % (b.len() + 1);
                b.truncate(keep.max(hdr / 2));
                b
            }
        };
        let p = files.write("fuzz.wav", &bytes);
        if let Ok(mut c) = Capture::open(&p) {
            for _ in 0..100 {
                match c.read_frames(&mut buf, 3) {
                    Ok(0) | Err(_) => break,
                    Ok(n) => assert_eq!(buf.len(), n * c.channels()),
                }
            }
        }
    }
}

/// Rough read throughput on a 16 ch x 45 s x 40 kHz 16-bit file (57.6 MB). Run with
/// `cargo test --release -p frothline-host --lib capture::tests::throughput -- --ignored --nocapture`.
#[test]
#[ignore]
fn throughput() {
    let files = Files::new();
    let path = files.path("big.wav");
    let frames = 45 * 40_000usize;
    let mut w = WavWriter::create(&path, spec(16, 16, false)).unwrap();
    {
        let mut s = w.get_i16_writer((frames * 16) as u32);
        for i in 0..frames * 16 {
            s.write_sample((i % 65_536) as i16);
        }
        s.flush().unwrap();
    }
    w.finalize().unwrap();
    let bytes = std::fs::metadata(&path).unwrap().len() as f64;
    for block in [1024, 8192] {
        let t = std::time::Instant::now();
        let mut c = Capture::open(&path).unwrap();
        let mut buf = Vec::new();
        let mut sum = 0i64;
        while c.read_frames(&mut buf, block).unwrap() > 0 {
            sum += i64::from(buf[buf.len() - 1]);
        }
        let s = t.elapsed().as_secs_f64();
        println!(
            "block {block}: {:.0} MB in {s:.3} s = {:.0} MB/s (checksum {sum})",
            bytes / 1e6,
            bytes / 1e6 / s
        );
    }
}
