//! Marks: short notes the technician attaches to a moment of a run (a gate opened, a
//! probe moved), written to `marks.csv` beside the live CSV files and listed in the report.
//!
//! Columns: `run_number`, `run_label`, `host_utc` (ISO 8601), `device_time_s` (the end of
//! the latest window received, empty before any), `note`.
//!
//! Each mark is also a `mark` chunk of the session archive (docs/archive-format.md), whose
//! payload is [`to_payload`]'s; the chunk's time is the mark's host time, so `frothline
//! unpack` writes the same marks.csv again ([`from_payload`]).

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

/// The payload of a `mark` archive chunk: run number (u32 LE), device time in seconds
/// (f64 LE, NaN when none), the label's length in bytes (u8) and the label (UTF-8), then
/// the note (UTF-8, the rest of the payload). The host time is the chunk's.
pub fn to_payload(m: &Mark) -> Vec<u8> {
    let label = cut_utf8(&m.run_label, u8::MAX as usize);
    let note: String = m.note.chars().take(MAX_NOTE_CHARS).collect();
    let mut b = Vec::with_capacity(13 + label.len() + note.len());
    b.extend_from_slice(&m.run_number.to_le_bytes());
    b.extend_from_slice(&m.device_time_s.unwrap_or(f64::NAN).to_le_bytes());
    b.push(label.len() as u8);
    b.extend_from_slice(label.as_bytes());
    b.extend_from_slice(note.as_bytes());
    b
}

/// A mark back from a `mark` chunk's payload and the chunk's host time (ISO 8601). A
/// payload too short for its fields is an error; text that is not UTF-8 is read lossily.
pub fn from_payload(b: &[u8], host_utc: String) -> Result<Mark, String> {
    let short = || {
        format!(
            "a mark chunk of {} bytes is too short for its fields",
            b.len()
        )
    };
    let run = b.get(0..4).ok_or_else(short)?;
    let time = b.get(4..12).ok_or_else(short)?;
    let n = *b.get(12).ok_or_else(short)? as usize;
    let label = b.get(13..13 + n).ok_or_else(short)?;
    let note = &b[13 + n..];
    let t = f64::from_le_bytes(time.try_into().map_err(|_| short())?);
    Ok(Mark {
        run_number: u32::from_le_bytes(run.try_into().map_err(|_| short())?),
        run_label: String::from_utf8_lossy(label).into_owned(),
        host_utc,
        device_time_s: t.is_finite().then_some(t),
        note: String::from_utf8_lossy(note).into_owned(),
    })
}

/// The longest prefix of `s` of at most `max` bytes that ends on a character boundary.
fn cut_utf8(s: &str, max: usize) -> &str {
    let mut end = s.len().min(max);
    while !s.is_char_boundary(end) {
        end -= 1;
    }
    &s[..end]
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

    #[test]
    fn archive_payloads_round_trip() {
        let m = Mark {
            run_number: 7,
            run_label: "gate é".into(),
            host_utc: "2026-12-02T07:00:00.000Z".into(),
            device_time_s: Some(3.25),
            note: "probe moved".into(),
        };
        let b = to_payload(&m);
        assert_eq!(from_payload(&b, m.host_utc.clone()).unwrap(), m);
        let none = Mark {
            device_time_s: None,
            ..m.clone()
        };
        let back = from_payload(&to_payload(&none), m.host_utc.clone()).unwrap();
        assert_eq!(back, none);
        // Cut payloads are refused with their length, never read out of range.
        for n in 0..13 + 6 {
            let e = from_payload(&b[..n], String::new()).unwrap_err();
            assert!(e.contains(&format!("{n} bytes")), "{e}");
        }
        assert_eq!(cut_utf8("aé", 2), "a");
    }
}
