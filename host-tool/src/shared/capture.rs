//! Reading captures: RIFF/WAVE files with one channel per probe tip, interleaved, the
//! header's sample rate being the per-channel rate.
//!
//! # Sample formats and conversion to counts
//!
//! The core works on i16 ADC counts. Samples are converted on reading as follows:
//!
//! | file format           | conversion to i16 counts                        |
//! |-----------------------|-------------------------------------------------|
//! | PCM 16-bit signed     | as is                                           |
//! | PCM 8-bit unsigned    | `(x - 128) << 8`                                |
//! | PCM 24-bit signed     | `x >> 8` (arithmetic: the upper 16 bits)        |
//! | PCM 32-bit signed     | `x >> 16` (arithmetic: the upper 16 bits)       |
//! | IEEE float 32-bit     | `round(clamp(x, -1, 1) * 32767)`, NaN reads 0   |
//!
//! [`Capture::to_counts`] applies the same mapping to a level or rail value given in file units
//! (as in the layout file), so that a sample equal to that value in the file compares equal to
//! the converted value. The arithmetic shifts floor towards minus infinity; `to_counts` does
//! the same (`floor(x / 2^(bits-16))`).
//!
//! Other formats (A-law, mu-law, ADPCM, 64-bit float, sample widths that do not fill their
//! container such as 12 bits in 16 or 24 bits in 32, RF64 and big-endian RIFX files) are
//! refused with [`CaptureError::Unsupported`].
//!
//! # Header handling
//!
//! The RIFF chunk list is walked here (unknown chunks such as `LIST` are skipped, odd-sized
//! chunks are padded as RIFF requires); the `fmt ` chunk is validated by `hound`. The data
//! chunk is then read directly in large blocks, converting bytes without per-sample calls.
//! A data chunk whose length is not a whole number of frames is accepted: the incomplete last
//! frame is ignored. Bytes after the data chunk are ignored.
//!
//! # Truncated files
//!
//! A recorder that stopped abruptly may leave a data chunk that declares more bytes than the
//! file holds. [`Capture::open`] accepts such a file ([`Capture::frames_in_file`] tells how
//! many frames are really there). [`Capture::read_frames`] first returns every complete frame
//! present, then, on the next call, [`CaptureError::Truncated`] with the frame at which the
//! data stopped; the error repeats on later calls. No recorded frame is lost: a caller that
//! wants to keep going treats that error as the end of the capture. An I/O error in the middle
//! of a read is reported the same way (frames already converted first, the error next call).
//! [`Capture::end_at_cut`] turns the truncation into a plain end of data instead, remembered
//! in [`Capture::cut`], for callers that keep the frames and warn.
//!
//! # Unfinished headers
//!
//! A recorder fixes the data chunk length when it closes the file. One that streamed
//! (declaring the placeholder 0xFFFFFFFF) or crashed before closing (declaring 0) leaves a
//! data chunk length that says nothing about the samples. When the data chunk declares 0 or
//! 0xFFFFFFFF bytes and bytes follow it, the samples are read to the end of the file and
//! [`Capture::unfinished_header`] reports the declared value (common practice, no source:
//! the same placeholders appear in streaming WAV writers).

mod error;
pub use error::CaptureError;

use std::fs::File;
use std::io::{self, BufReader, Read, Seek};
use std::path::{Path, PathBuf};

/// Bytes read from the data chunk per underlying read (bounded scratch buffer).
const BLOCK_BYTES: usize = 1 << 20;
/// Buffer for header parsing.
const HEADER_BUFFER: usize = 64 * 1024;
/// Longest `fmt ` chunk accepted (the longest defined layout is 40 bytes).
const MAX_FMT_LEN: u32 = 1024;

/// Sample format of a capture, as stored in the file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum SampleFormat {
    /// PCM integer: 8 (unsigned), 16, 24 or 32 bits (signed), filling the container.
    Int {
        /// Bits per sample.
        bits: u16,
    },
    /// IEEE 754 32-bit float, full scale -1.0..=1.0.
    Float32,
}

impl SampleFormat {
    /// Bytes per sample in the file.
    pub fn bytes_per_sample(self) -> usize {
        match self {
            SampleFormat::Int { bits } => usize::from(bits / 8),
            SampleFormat::Float32 => 4,
        }
    }

    /// Lowest and highest sample values in file units (the defaults for the ADC rails).
    pub fn full_scale(self) -> (f64, f64) {
        match self {
            SampleFormat::Int { bits: 8 } => (0.0, 255.0),
            SampleFormat::Int { bits } => {
                let half = f64::powi(2.0, i32::from(bits) - 1);
                (-half, half - 1.0)
            }
            SampleFormat::Float32 => (-1.0, 1.0),
        }
    }

    /// Maps a value in file units to i16 counts exactly as samples are converted (see the
    /// module documentation). The result is not clamped to the i16 range.
    pub fn to_counts(self, x: f64) -> f64 {
        match self {
            SampleFormat::Int { bits: 8 } => (x - 128.0) * 256.0,
            SampleFormat::Int { bits: 16 } => x,
            SampleFormat::Int { bits } => {
                (x / f64::powi(2.0, i32::from(bits.saturating_sub(16)))).floor()
            }
            SampleFormat::Float32 => float_to_count(x),
        }
    }
}

impl std::fmt::Display for SampleFormat {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SampleFormat::Int { bits: 8 } => f.write_str("8-bit unsigned PCM"),
            SampleFormat::Int { bits } => write!(f, "{bits}-bit signed PCM"),
            SampleFormat::Float32 => f.write_str("32-bit float"),
        }
    }
}

fn float_to_count(x: f64) -> f64 {
    if x.is_nan() {
        0.0
    } else {
        (x.clamp(-1.0, 1.0) * 32767.0).round()
    }
}

/// Header errors before the path is attached.
enum HeaderError {
    Io(io::Error),
    NotWav(String),
    Malformed(String),
    Unsupported(String),
    ZeroChannels,
}

impl HeaderError {
    fn at(self, path: &Path) -> CaptureError {
        let path = path.to_path_buf();
        match self {
            HeaderError::Io(source) => CaptureError::Io { path, source },
            HeaderError::NotWav(reason) => CaptureError::NotWav { path, reason },
            HeaderError::Malformed(reason) => CaptureError::Malformed { path, reason },
            HeaderError::Unsupported(format) => CaptureError::Unsupported { path, format },
            HeaderError::ZeroChannels => CaptureError::ZeroChannels { path },
        }
    }
}

impl From<io::Error> for HeaderError {
    fn from(e: io::Error) -> Self {
        HeaderError::Io(e)
    }
}

/// What the header says.
struct Header {
    format: SampleFormat,
    channels: usize,
    sample_rate: u32,
    /// Byte offset of the first data byte.
    data_offset: u64,
    /// Data chunk length as declared.
    data_len: u64,
}

/// What a capture is read from: a file, or bytes in memory ([`Capture::from_bytes`]).
trait Source: Read + Seek + Send {}
impl<T: Read + Seek + Send> Source for T {}

/// An open capture, read front to back in blocks of frames.
pub struct Capture {
    path: PathBuf,
    reader: BufReader<Box<dyn Source>>,
    format: SampleFormat,
    channels: usize,
    sample_rate: u32,
    frame_bytes: usize,
    frames: u64,
    frames_in_file: u64,
    position: u64,
    /// Byte offset of the first frame in the source.
    data_offset: u64,
    scratch: Vec<u8>,
    /// An I/O error met after some frames were converted, reported on the next call.
    pending_io: Option<io::Error>,
    /// The data ended before the declared length; reported from the next call on.
    truncated: bool,
    /// Report the truncation as the end of the data ([`Capture::end_at_cut`]).
    end_at_cut: bool,
    /// The data chunk length declared by an unfinished header (0 or 0xFFFFFFFF).
    unfinished: Option<u32>,
}

/// Where a capture's data stopped before its header said it would.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Cut {
    /// Complete frames read (= index of the first missing frame).
    pub frame: u64,
    /// Frames the header declared.
    pub declared: u64,
}

impl std::fmt::Debug for Capture {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Capture")
            .field("path", &self.path)
            .field("format", &self.format)
            .field("channels", &self.channels)
            .field("sample_rate", &self.sample_rate)
            .field("frames", &self.frames)
            .field("frames_in_file", &self.frames_in_file)
            .field("position", &self.position)
            .finish()
    }
}

impl Capture {
    /// Opens a capture and reads its header.
    pub fn open(path: &Path) -> Result<Capture, CaptureError> {
        let io_err = |source| CaptureError::Io {
            path: path.to_path_buf(),
            source,
        };
        let file = File::open(path).map_err(io_err)?;
        let file_len = file.metadata().map_err(io_err)?.len();
        Capture::from_source(path, Box::new(file), file_len)
    }

    /// Reads a capture held in memory; `name` stands for the file in messages.
    pub fn from_bytes(name: &Path, bytes: Vec<u8>) -> Result<Capture, CaptureError> {
        let len = bytes.len() as u64;
        Capture::from_source(name, Box::new(io::Cursor::new(bytes)), len)
    }

    fn from_source(
        path: &Path,
        source: Box<dyn Source>,
        file_len: u64,
    ) -> Result<Capture, CaptureError> {
        let mut reader = BufReader::with_capacity(HEADER_BUFFER, source);
        let h = read_header(&mut reader, file_len).map_err(|e| e.at(path))?;
        let frame_bytes = h.channels * h.format.bytes_per_sample();
        let present = file_len.saturating_sub(h.data_offset) / frame_bytes as u64;
        let unfinished =
            (matches!(h.data_len, 0 | 0xFFFF_FFFF) && present > 0).then_some(h.data_len as u32);
        let frames = match unfinished {
            Some(_) => present,
            None => h.data_len / frame_bytes as u64,
        };
        Ok(Capture {
            path: path.to_path_buf(),
            reader,
            format: h.format,
            channels: h.channels,
            sample_rate: h.sample_rate,
            frame_bytes,
            frames,
            frames_in_file: frames.min(present),
            position: 0,
            data_offset: h.data_offset,
            scratch: Vec::new(),
            pending_io: None,
            truncated: false,
            end_at_cut: false,
            unfinished,
        })
    }

    /// Go to frame `frame` (at most the declared length): the next [`read_frames`] starts
    /// there. For readers that each take a stretch of the capture (the learning pass's
    /// threads); a frame beyond the data of a cut file reads as the cut.
    ///
    /// [`read_frames`]: Capture::read_frames
    pub fn seek_frame(&mut self, frame: u64) -> Result<(), CaptureError> {
        let frame = frame.min(self.frames);
        let at = self
            .data_offset
            .saturating_add(frame.saturating_mul(self.frame_bytes as u64));
        self.reader
            .seek(io::SeekFrom::Start(at))
            .map_err(|source| CaptureError::Io {
                path: self.path.clone(),
                source,
            })?;
        self.position = frame;
        self.pending_io = None;
        self.truncated = false;
        Ok(())
    }

    /// From now on, a data chunk cut short ends the data ([`Capture::read_frames`] returns 0)
    /// instead of returning [`CaptureError::Truncated`]; [`Capture::cut`] tells where.
    pub fn end_at_cut(&mut self) {
        self.end_at_cut = true;
    }

    /// Where the data stopped short of the declared length, once the reading got there.
    pub fn cut(&self) -> Option<Cut> {
        self.truncated.then_some(Cut {
            frame: self.position,
            declared: self.frames,
        })
    }

    /// The data chunk length an unfinished header declared (0 or 0xFFFFFFFF), when the
    /// samples were read to the end of the file instead (see the module documentation).
    pub fn unfinished_header(&self) -> Option<u32> {
        self.unfinished
    }

    /// True if the capture may end where the recorder stopped abruptly: a truncated data
    /// chunk or an unfinished header. Known at open for both.
    pub fn ends_abruptly(&self) -> bool {
        self.frames_in_file < self.frames || self.unfinished.is_some()
    }

    /// A one-line warning about an abrupt end, naming the file and the last frame read, or
    /// `None` for a capture read as its header declared.
    pub fn abrupt_end_warning(&self) -> Option<String> {
        let path = self.path.display();
        if let Some(c) = self.cut() {
            Some(format!(
                "{path}: truncated capture: the data chunk declares {} frames but the file ends \
                 after frame {}; results up to the cut were kept, the last window is flagged \
                 capture_cut",
                c.declared, c.frame
            ))
        } else {
            self.unfinished.map(|d| {
                format!(
                    "{path}: unfinished WAV header (data chunk length 0x{d:08X}): read {} frames \
                     to the end of the file; the last window is flagged capture_cut",
                    self.position
                )
            })
        }
    }

    /// The error a strict caller returns for an abrupt end (see [`Capture::ends_abruptly`]).
    pub fn abrupt_end_error(&self) -> Option<CaptureError> {
        if let Some(c) = self.cut() {
            return Some(CaptureError::Truncated {
                path: self.path.clone(),
                frame: c.frame,
                declared: c.declared,
            });
        }
        self.unfinished.map(|d| CaptureError::Malformed {
            path: self.path.clone(),
            reason: format!(
                "unfinished header: the data chunk declares 0x{d:08X} bytes ({} frames were read \
                 to the end of the file)",
                self.position
            ),
        })
    }

    /// The capture file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Per-channel sample rate, Hz.
    pub fn sample_rate(&self) -> u32 {
        self.sample_rate
    }

    /// Number of channels (tips).
    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Frames declared by the header (one frame = one sample of every channel).
    pub fn frames(&self) -> u64 {
        self.frames
    }

    /// Complete frames actually present in the file (less than [`Capture::frames`] for a
    /// truncated file).
    pub fn frames_in_file(&self) -> u64 {
        self.frames_in_file
    }

    /// Frames read so far.
    pub fn position(&self) -> u64 {
        self.position
    }

    /// The sample format in the file.
    pub fn format(&self) -> SampleFormat {
        self.format
    }

    /// Maps a level or rail value in file units to counts (see [`SampleFormat::to_counts`]).
    pub fn to_counts(&self, value_in_file_units: f64) -> f64 {
        self.format.to_counts(value_in_file_units)
    }

    /// Clears `out`, then appends up to `max_frames` whole frames of interleaved samples
    /// converted to i16 counts. Returns the number of frames appended: 0 at the end of the
    /// data (or when `max_frames` is 0).
    ///
    /// On a truncated file or an I/O error, the complete frames read so far are returned
    /// first and the error on the next call (see the module documentation).
    pub fn read_frames(
        &mut self,
        out: &mut Vec<i16>,
        max_frames: usize,
    ) -> Result<usize, CaptureError> {
        out.clear();
        if let Some(source) = self.pending_io.take() {
            return Err(CaptureError::Io {
                path: self.path.clone(),
                source,
            });
        }
        if self.truncated {
            if self.end_at_cut {
                return Ok(0);
            }
            return Err(self.truncation());
        }
        let left = self.frames - self.position;
        let want = usize::try_from(left).unwrap_or(usize::MAX).min(max_frames);
        if want == 0 {
            return Ok(0);
        }
        let block_frames = (BLOCK_BYTES / self.frame_bytes).max(1);
        out.reserve(want.min(block_frames * 4) * self.channels);
        let mut done = 0;
        while done < want {
            let frames = (want - done).min(block_frames);
            let bytes = frames * self.frame_bytes;
            if self.scratch.len() < bytes {
                self.scratch.resize(bytes, 0);
            }
            let (got, err) = read_full(&mut self.reader, &mut self.scratch[..bytes]);
            let whole = got / self.frame_bytes;
            convert(self.format, &self.scratch[..whole * self.frame_bytes], out);
            done += whole;
            self.position += whole as u64;
            if got < bytes {
                match err {
                    Some(e) => self.pending_io = Some(e),
                    None => self.truncated = true,
                }
                break;
            }
        }
        if done == 0 {
            // Nothing to hand back first: report now.
            return self.read_frames(out, max_frames);
        }
        Ok(done)
    }

    fn truncation(&self) -> CaptureError {
        CaptureError::Truncated {
            path: self.path.clone(),
            frame: self.position,
            declared: self.frames,
        }
    }
}

/// Reads until `buf` is full, the end of the file, or an error. Returns the bytes read and the
/// error, if any (`None` with a short count means end of file).
fn read_full(r: &mut impl Read, buf: &mut [u8]) -> (usize, Option<io::Error>) {
    let mut n = 0;
    while n < buf.len() {
        match r.read(&mut buf[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
            Err(e) => return (n, Some(e)),
        }
    }
    (n, None)
}

/// Converts whole samples of `bytes` to counts, appending to `out`.
fn convert(format: SampleFormat, bytes: &[u8], out: &mut Vec<i16>) {
    match format {
        SampleFormat::Int { bits: 8 } => {
            out.extend(bytes.iter().map(|&b| (i16::from(b) - 128) << 8))
        }
        SampleFormat::Int { bits: 16 } => out.extend(
            bytes
                .chunks_exact(2)
                .map(|b| i16::from_le_bytes([b[0], b[1]])),
        ),
        // The upper 16 bits of a little-endian 24/32-bit sample are its last two bytes:
        // exactly the arithmetic shift right by 8/16.
        SampleFormat::Int { bits: 24 } => out.extend(
            bytes
                .chunks_exact(3)
                .map(|b| i16::from_le_bytes([b[1], b[2]])),
        ),
        // open() admits no other integer width than 8/16/24/32.
        SampleFormat::Int { .. } => out.extend(
            bytes
                .chunks_exact(4)
                .map(|b| i16::from_le_bytes([b[2], b[3]])),
        ),
        SampleFormat::Float32 => out.extend(bytes.chunks_exact(4).map(|b| {
            let x = f32::from_le_bytes([b[0], b[1], b[2], b[3]]);
            float_to_count(f64::from(x)) as i16
        })),
    }
}

// ---------------------------------------------------------------------------------------------
// Header
// ---------------------------------------------------------------------------------------------

fn u16_at(b: &[u8], i: usize) -> u16 {
    u16::from_le_bytes([b[i], b[i + 1]])
}

fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]])
}

/// A chunk id for messages: its text when printable, else its bytes in hex (an all-zero
/// file starts with `00 00 00 00`, not `????`).
fn fourcc(b: &[u8]) -> String {
    if !b.iter().all(|&c| c.is_ascii_graphic() || c == b' ') {
        let hex: Vec<String> = b.iter().map(|c| format!("{c:02X}")).collect();
        return format!("bytes {}", hex.join(" "));
    }
    b.iter()
        .map(|&c| {
            if c.is_ascii_graphic() || c == b' ' {
                char::from(c)
            } else {
                '?'
            }
        })
        .collect()
}

/// [`fourcc`] in quotes when it is text.
fn quoted_id(b: &[u8]) -> String {
    let id = fourcc(b);
    if id.starts_with("bytes ") {
        id
    } else {
        format!("\"{id}\"")
    }
}

/// Walks the RIFF chunks up to the data chunk; leaves `r` at the first data byte.
fn read_header(r: &mut BufReader<Box<dyn Source>>, file_len: u64) -> Result<Header, HeaderError> {
    let mut riff = [0u8; 12];
    let (n, err) = read_full(r, &mut riff);
    if let Some(e) = err {
        return Err(e.into());
    }
    if n == 0 {
        return Err(HeaderError::NotWav("the file is empty".into()));
    }
    match &riff[..4.min(n)] {
        b"RF64" | b"BW64" => {
            return Err(HeaderError::Unsupported(
                "RF64 (64-bit RIFF); export the capture as plain RIFF/WAVE".into(),
            ))
        }
        b"RIFX" => return Err(HeaderError::Unsupported("big-endian RIFX".into())),
        _ => {}
    }
    if n < 12 || &riff[..4] != b"RIFF" || &riff[8..12] != b"WAVE" {
        let what = if n < 12 {
            format!("only {n} bytes long")
        } else if &riff[..4] != b"RIFF" {
            format!("starts with {} instead of \"RIFF\"", quoted_id(&riff[..4]))
        } else {
            format!("RIFF type {} instead of \"WAVE\"", quoted_id(&riff[8..12]))
        };
        return Err(HeaderError::NotWav(what));
    }

    let mut pos: u64 = 12;
    let mut fmt: Option<Vec<u8>> = None;
    loop {
        let mut ch = [0u8; 8];
        let (n, err) = read_full(r, &mut ch);
        if let Some(e) = err {
            return Err(e.into());
        }
        if n < 8 {
            return Err(HeaderError::Malformed(match fmt {
                None => format!("no fmt chunk (the file ends after {file_len} bytes)"),
                Some(_) => format!("no data chunk (the file ends after {file_len} bytes)"),
            }));
        }
        pos += 8;
        let id = &ch[..4];
        let len = u32_at(&ch, 4);
        match id {
            b"fmt " => {
                if fmt.is_some() {
                    return Err(HeaderError::Malformed("two fmt chunks".into()));
                }
                if !(16..=MAX_FMT_LEN).contains(&len) {
                    return Err(HeaderError::Malformed(format!(
                        "fmt chunk of {len} bytes (expected 16 to {MAX_FMT_LEN})"
                    )));
                }
                let mut body = vec![0u8; len as usize + (len as usize & 1)];
                let (n, err) = read_full(r, &mut body);
                if let Some(e) = err {
                    return Err(e.into());
                }
                if n < len as usize {
                    return Err(HeaderError::Malformed(
                        "the file ends inside the fmt chunk".into(),
                    ));
                }
                body.truncate(len as usize);
                pos += u64::from(len) + u64::from(len & 1);
                fmt = Some(body);
            }
            b"data" => {
                let Some(fmt) = fmt else {
                    return Err(HeaderError::Malformed(
                        "data chunk before the fmt chunk".into(),
                    ));
                };
                let (format, channels, sample_rate) = parse_fmt(&fmt)?;
                return Ok(Header {
                    format,
                    channels,
                    sample_rate,
                    data_offset: pos,
                    data_len: u64::from(len),
                });
            }
            _ => {
                let skip = u64::from(len) + u64::from(len & 1);
                if pos + skip > file_len {
                    return Err(HeaderError::Malformed(format!(
                        "chunk {} of {len} bytes runs past the end of the file, before any \
                         data chunk",
                        quoted_id(id)
                    )));
                }
                r.seek_relative(skip as i64)?;
                pos += skip;
            }
        }
    }
}

/// Format tag names for messages.
fn tag_name(tag: u16) -> String {
    match tag {
        0x0001 => "PCM".into(),
        0x0002 => "Microsoft ADPCM".into(),
        0x0003 => "IEEE float".into(),
        0x0006 => "A-law".into(),
        0x0007 => "mu-law".into(),
        0x0011 => "IMA ADPCM".into(),
        0x0055 => "MPEG layer 3".into(),
        t => format!("format tag 0x{t:04x}"),
    }
}

/// Checks the fmt chunk: own checks for what is read, then hound's validation of the rest.
fn parse_fmt(fmt: &[u8]) -> Result<(SampleFormat, usize, u32), HeaderError> {
    let mut tag = u16_at(fmt, 0);
    let channels = u16_at(fmt, 2);
    let sample_rate = u32_at(fmt, 4);
    let block_align = u16_at(fmt, 12);
    let container_bits = u16_at(fmt, 14);
    let mut bits = container_bits;
    if tag == 0xFFFE {
        // WAVE_FORMAT_EXTENSIBLE: the real tag leads the sub-format GUID.
        if fmt.len() < 40 {
            return Err(HeaderError::Malformed(format!(
                "extensible fmt chunk of {} bytes (expected 40)",
                fmt.len()
            )));
        }
        let valid = u16_at(fmt, 18);
        if valid != 0 {
            bits = valid;
        }
        tag = u16_at(fmt, 24);
    }
    if channels == 0 {
        return Err(HeaderError::ZeroChannels);
    }
    let format = match (tag, bits) {
        (0x0001, 8 | 16 | 24 | 32) if bits == container_bits => SampleFormat::Int { bits },
        (0x0003, 32) if container_bits == 32 => SampleFormat::Float32,
        (0x0001, _) if bits != container_bits => {
            return Err(HeaderError::Unsupported(format!(
                "{bits}-bit integer samples in a {container_bits}-bit container"
            )))
        }
        (0x0001, _) => {
            return Err(HeaderError::Unsupported(format!(
                "{bits}-bit integer samples"
            )))
        }
        (0x0003, _) => {
            return Err(HeaderError::Unsupported(format!(
                "{bits}-bit float samples"
            )))
        }
        (t, _) => return Err(HeaderError::Unsupported(tag_name(t))),
    };
    let expected_align = usize::from(channels) * format.bytes_per_sample();
    if usize::from(block_align) != expected_align {
        return Err(HeaderError::Malformed(format!(
            "block align {block_align} does not match {channels} channels of {} bytes",
            format.bytes_per_sample()
        )));
    }
    if sample_rate == 0 {
        return Err(HeaderError::Malformed("sample rate 0".into()));
    }
    // hound validates the rest of the fmt chunk (sizes, byte rate, extensible fields) on a
    // copy of the header with an empty data chunk.
    let mut probe = Vec::with_capacity(fmt.len() + 28);
    probe.extend_from_slice(b"RIFF");
    probe.extend_from_slice(&(20 + fmt.len() as u32 + (fmt.len() as u32 & 1)).to_le_bytes());
    probe.extend_from_slice(b"WAVEfmt ");
    probe.extend_from_slice(&(fmt.len() as u32).to_le_bytes());
    probe.extend_from_slice(fmt);
    if fmt.len() % 2 == 1 {
        probe.push(0);
    }
    probe.extend_from_slice(b"data\0\0\0\0");
    match hound::WavReader::new(io::Cursor::new(probe)) {
        Ok(_) => Ok((format, usize::from(channels), sample_rate)),
        Err(hound::Error::Unsupported) => Err(HeaderError::Unsupported(tag_name(tag))),
        Err(hound::Error::FormatError(msg)) => {
            Err(HeaderError::Malformed(format!("fmt chunk: {msg}")))
        }
        Err(e) => Err(HeaderError::Malformed(format!("fmt chunk: {e}"))),
    }
}

#[cfg(test)]
mod tests;
