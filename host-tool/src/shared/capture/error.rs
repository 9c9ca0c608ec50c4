//! What can go wrong opening or reading a capture; every error names the file.

use std::io;
use std::path::{Path, PathBuf};

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
