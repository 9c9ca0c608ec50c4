//! The host tool's error type: every failure names the file, key, line or channel at fault.

use std::path::PathBuf;

/// Anything that stops a host command.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum HostError {
    /// The layout file is wrong.
    #[error(transparent)]
    Layout(#[from] crate::shared::layout::LayoutError),
    /// The capture file is wrong.
    #[error(transparent)]
    Capture(#[from] crate::shared::capture::CaptureError),
    /// A job's own error (the synthesiser's, the report's), with the exit code it asks
    /// for. Each job converts its error into this one (`impl From<...> for HostError`
    /// beside the job's error type), so this module names no job.
    #[error("{0}")]
    Job(Box<dyn std::error::Error + Send + Sync>, u8),
    /// The layout and capture together make a chain the core cannot run.
    #[error("{}: {source}", file.display())]
    Config {
        /// The layout file.
        file: PathBuf,
        /// What the core refused.
        source: frothline_core::ConfigError,
    },
    /// A command-line value is wrong.
    #[error("{0}")]
    Usage(String),
    /// Writing an output file failed.
    #[error("cannot write {}: {source}", path.display())]
    Write {
        /// The file being written.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
}

impl HostError {
    /// The process exit code: 2 for bad input or usage, 1 for failures while writing.
    pub fn exit_code(&self) -> u8 {
        match self {
            HostError::Write { .. } => 1,
            HostError::Job(_, code) => *code,
            _ => 2,
        }
    }
}

/// Wrap an I/O error with the path it concerns.
pub fn write_err(path: impl Into<PathBuf>) -> impl FnOnce(std::io::Error) -> HostError {
    let path = path.into();
    move |source| HostError::Write { path, source }
}
