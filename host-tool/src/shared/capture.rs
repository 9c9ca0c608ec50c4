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

/// An error while opening or reading a capture.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CaptureError {
    /// The file could not be opened or read.
    #[error("cannot read capture {}: {source}", path.display())]
    Io {
        /// The capture file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: io::Error,
    },
    /// The file does not start like a RIFF/WAVE file.
    #[error("{}: not a RIFF/WAVE file: {reason}", path.display())]
    NotWav {
        /// The capture file.
        path: PathBuf,
        /// What was found instead.
        reason: String,
    },
    /// A RIFF/WAVE file whose header is damaged or inconsistent.
    #[error("{}: malformed WAV header: {reason}", path.display())]
    Malformed {
        /// The capture file.
        path: PathBuf,
        /// What is wrong.
        reason: String,
    },
    /// A well-formed file in a sample format that is not read.
    #[error(
        "{}: unsupported sample format: {format} (readable: PCM 8/16/24/32-bit integer, \
         32-bit float)",
        path.display()
    )]
    Unsupported {
        /// The capture file.
        path: PathBuf,
        /// The format found.
        format: String,
    },
    /// The header declares zero channels.
    #[error("{}: the WAV header declares zero channels", path.display())]
    ZeroChannels {
        /// The capture file.
        path: PathBuf,
    },
    /// The capture holds no complete frame: nothing to analyse.
    #[error(
        "{}: the capture holds no sample frame ({channels} channels, the data chunk is empty \
         or shorter than one frame)",
        path.display()
    )]
    NoFrames {
        /// The capture file.
        path: PathBuf,
        /// Channels declared.
        channels: usize,
    },
    /// More channels than the core's chain takes.
    #[error(
        "{}: {channels} channels: the host replays captures of at most {max} channels \
         (one chain reads every channel of a frame); export only the channels the layout uses",
        path.display()
    )]
    TooManyChannels {
        /// The capture file.
        path: PathBuf,
        /// Channels in the capture.
        channels: usize,
        /// Most channels read.
        max: usize,
    },
    /// The data chunk declares more frames than the file holds.
    #[error(
        "{}: truncated capture: the data chunk declares {declared} frames but the file ends \
         after frame {frame} (all {frame} complete frames were read)",
        path.display()
    )]
    Truncated {
        /// The capture file.
        path: PathBuf,
        /// Complete frames present (= index of the first missing frame).
        frame: u64,
        /// Frames declared in the header.
        declared: u64,
    },
}

impl CaptureError {
    /// The capture file the error is about.
    pub fn path(&self) -> &Path {
        match self {
            CaptureError::Io { path, .. }
            | CaptureError::NotWav { path, .. }
            | CaptureError::Malformed { path, .. }
            | CaptureError::Unsupported { path, .. }
            | CaptureError::ZeroChannels { path }
            | CaptureError::NoFrames { path, .. }
            | CaptureError::TooManyChannels { path, .. }
            | CaptureError::Truncated { path, .. } => path,
        }
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
            scratch: Vec::new(),
            pending_io: None,
            truncated: false,
            end_at_cut: false,
            unfinished,
        })
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

// ---------------------------------------------------------------------------------------------
// Tests
// ---------------------------------------------------------------------------------------------

#[cfg(test)]
mod tests {
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
}
