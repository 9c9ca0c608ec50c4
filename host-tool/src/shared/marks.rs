//! Marks: short notes the technician attaches to a moment of a run (a gate opened, a
//! probe moved), written to `marks.csv` beside the live CSV files and listed in the report.
//!
//! Columns: `run_number`, `run_label`, `host_utc` (ISO 8601), `device_time_s` (the end of
//! the latest window received, empty before any), `note`.

use crate::shared::error::{write_err, HostError};
use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};

/// The columns of marks.csv.
pub const COLUMNS: [&str; 5] = [
    "run_number",
    "run_label",
    "host_utc",
    "device_time_s",
    "note",
];

/// Longest note kept, in characters (a mark is a reminder, not a logbook page).
pub const MAX_NOTE_CHARS: usize = 80;

/// One mark.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Mark {
    /// Run number (0 before any run started in the session).
    pub run_number: u32,
    /// Run label.
    pub run_label: String,
    /// Host time, ISO 8601 UTC.
    pub host_utc: String,
    /// Device time, s.
    pub device_time_s: Option<f64>,
    /// The note.
    pub note: String,
}

/// A marks.csv writer: created on the first mark, flushed after each.
pub struct MarksCsv {
    path: PathBuf,
    out: Option<csv::Writer<BufWriter<File>>>,
    /// Marks written.
    pub written: usize,
}

impl MarksCsv {
    /// Marks for `dir/marks.csv` (nothing is created before the first mark).
    pub fn new(dir: &Path) -> Self {
        MarksCsv {
            path: dir.join("marks.csv"),
            out: None,
            written: 0,
        }
    }

    /// The file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Write `m` (the note cut to [`MAX_NOTE_CHARS`]).
    pub fn write(&mut self, m: &Mark) -> Result<(), HostError> {
        let err = |e: csv::Error| write_err(&self.path)(e.into());
        if self.out.is_none() {
            let f = File::create(&self.path).map_err(write_err(&self.path))?;
            let mut w = csv::Writer::from_writer(BufWriter::new(f));
            w.write_record(COLUMNS).map_err(err)?;
            self.out = Some(w);
        }
        let note: String = m.note.chars().take(MAX_NOTE_CHARS).collect();
        if let Some(w) = self.out.as_mut() {
            w.write_record([
                m.run_number.to_string(),
                m.run_label.clone(),
                m.host_utc.clone(),
                m.device_time_s.map_or(String::new(), |t| format!("{t:.3}")),
                note,
            ])
            .map_err(|e| write_err(&self.path)(e.into()))?;
            w.flush().map_err(write_err(&self.path))?;
        }
        self.written += 1;
        Ok(())
    }
}

/// Read `dir/marks.csv` (none when the file is missing). A row that does not parse is an
/// error naming the file and line.
pub fn read(dir: &Path) -> Result<Vec<Mark>, String> {
    let path = dir.join("marks.csv");
    if !path.exists() {
        return Ok(Vec::new());
    }
    let mut r = csv::Reader::from_path(&path).map_err(|e| format!("{}: {e}", path.display()))?;
    let head: Vec<String> = r
        .headers()
        .map_err(|e| format!("{}: {e}", path.display()))?
        .iter()
        .map(String::from)
        .collect();
    let col = |name: &str| head.iter().position(|h| h == name);
    let mut out = Vec::new();
    for (i, rec) in r.records().enumerate() {
        let rec = rec.map_err(|e| format!("{}: line {}: {e}", path.display(), i + 2))?;
        let get = |name: &str| col(name).and_then(|c| rec.get(c)).unwrap_or("").to_string();
        let num = get("run_number");
        out.push(Mark {
            run_number: if num.is_empty() {
                0
            } else {
                num.parse().map_err(|_| {
                    format!(
                        "{}: line {}: run_number `{num}` is not a whole number",
                        path.display(),
                        i + 2
                    )
                })?
            },
            run_label: get("run_label"),
            host_utc: get("host_utc"),
            device_time_s: get("device_time_s").parse().ok(),
            note: get("note"),
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn marks_round_trip_and_bad_rows_are_named() {
        let dir = tempfile::tempdir().unwrap();
        let mut w = MarksCsv::new(dir.path());
        assert!(!w.path().exists());
        let m = Mark {
            run_number: 2,
            run_label: "flume-b".into(),
            host_utc: "2026-12-02T07:00:00.000Z".into(),
            device_time_s: Some(12.5),
            note: "gate opened, \"fast\"".into(),
        };
        w.write(&m).unwrap();
        w.write(&Mark {
            note: "x".repeat(200),
            ..Default::default()
        })
        .unwrap();
        let back = read(dir.path()).unwrap();
        assert_eq!(back[0], m);
        assert_eq!(back[1].note.chars().count(), MAX_NOTE_CHARS);
        assert_eq!(back[1].device_time_s, None);
        std::fs::write(
            dir.path().join("marks.csv"),
            "run_number,run_label,host_utc,device_time_s,note\nabc,,,,x\n",
        )
        .unwrap();
        let e = read(dir.path()).unwrap_err();
        assert!(e.contains("line 2") && e.contains("run_number"), "{e}");
    }
}
