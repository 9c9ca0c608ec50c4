//! A CSV file of a live session that is created with its header at its first row, so a
//! session that never sees such a row leaves no empty file behind.

use crate::shared::error::{write_err, HostError};
use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};

/// A CSV file created at its first row, flushed after every write (a pulled cable or a
/// killed session loses no row already written).
pub struct LazyCsv {
    path: PathBuf,
    header: Vec<&'static str>,
    out: Option<csv::Writer<BufWriter<File>>>,
}

impl LazyCsv {
    /// Rows for `path` under `header` (nothing is created before the first row).
    pub fn new(path: PathBuf, header: Vec<&'static str>) -> Self {
        LazyCsv {
            path,
            header,
            out: None,
        }
    }

    /// The file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Write `rows`; returns true when this created the file.
    pub fn write(&mut self, rows: &[Vec<String>]) -> Result<bool, HostError> {
        let created = self.out.is_none();
        let err = |e: csv::Error| write_err(&self.path)(e.into());
        if created {
            let f = File::create(&self.path).map_err(write_err(&self.path))?;
            let mut w = csv::Writer::from_writer(BufWriter::new(f));
            w.write_record(&self.header).map_err(err)?;
            self.out = Some(w);
        }
        if let Some(w) = self.out.as_mut() {
            for r in rows {
                w.write_record(r).map_err(err)?;
            }
            w.flush().map_err(write_err(&self.path))?;
        }
        Ok(created)
    }
}
