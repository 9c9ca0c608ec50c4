//! What stops `frothline report`: every error names the file (and line or column) at fault.

use std::path::PathBuf;

/// Anything that stops a report.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// The input folder has no `windows.csv`, the one file a report needs.
    #[error("{}: no windows.csv in this folder (is it the --out folder of `frothline replay`?)", dir.display())]
    NoWindows {
        /// The folder given.
        dir: PathBuf,
    },
    /// An input file could not be read.
    #[error("cannot read {}: {source}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// An input file is malformed (a bad number, a missing required column, bad JSON).
    #[error("{}{}: {message}", path.display(), line.map(|l| format!(", line {l}")).unwrap_or_default())]
    Parse {
        /// The file.
        path: PathBuf,
        /// The 1-based line, when the fault is on one row.
        line: Option<u64>,
        /// What is wrong, naming the column or key.
        message: String,
    },
    /// A command-line value is wrong.
    #[error("{0}")]
    Usage(String),
    /// A figure could not be drawn.
    #[error("figure {figure}: {message}")]
    Draw {
        /// The figure's file stem.
        figure: String,
        /// What the plotting library reported.
        message: String,
    },
    /// Writing an output file failed.
    #[error("cannot write {}: {source}", path.display())]
    Write {
        /// The file being written.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
}

impl ReportError {
    /// The process exit code, as for the other commands: 2 for bad input or usage, 1 for
    /// failures while drawing or writing.
    pub fn exit_code(&self) -> u8 {
        match self {
            ReportError::Write { .. } | ReportError::Draw { .. } => 1,
            _ => 2,
        }
    }
}

impl From<ReportError> for crate::shared::error::HostError {
    fn from(e: ReportError) -> Self {
        let code = e.exit_code();
        crate::shared::error::HostError::Job(Box::new(e), code)
    }
}
