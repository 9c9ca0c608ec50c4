//! A run's output files, written as one set.
//!
//! Every file of a run is written into a staging folder inside the `--out` folder (same file
//! system, so the final renames cannot fail half-way for want of space). Only when every
//! file is complete does [`OutputSet::commit`]:
//! 1. write the manifest `run.json` (the run's id, what it read, and every file with its
//!    size in bytes),
//! 2. remove the files of an earlier run that this run does not write (a steady replay into
//!    a folder that held a transient one leaves no old `profile.csv`),
//! 3. rename the new files into place, the manifest last.
//!
//! A run that fails before the commit leaves the folder as it was (the staging folder is
//! removed). `report` reads the manifest and refuses files that are not the ones it lists
//! ([`Manifest::check`]), so a folder mixed by hand or by a crash between two renames is
//! named, not drawn. Files are created with `create_new` after removing any previous entry
//! of that name, so a symlink planted in the folder is replaced, never followed.

use crate::shared::error::{write_err, HostError};
use std::fs::{File, OpenOptions};
use std::io;
use std::path::{Path, PathBuf};

/// Name of the manifest in an output folder.
pub const MANIFEST: &str = "run.json";

/// Every file name a run may write into an output folder (the set a new run replaces).
pub const RUN_FILES: &[&str] = &[
    "windows.csv",
    "profile.csv",
    "fronts.csv",
    "stations.csv",
    "flow.json",
    "discharge.csv",
    "chords.csv",
    "chord_lengths.csv",
];

/// Creates `path` as a new file, removing a previous file or symlink of that name first, so
/// that a symlink is never followed.
pub fn create_fresh(path: &Path) -> io::Result<File> {
    match std::fs::symlink_metadata(path) {
        Ok(m) if m.is_dir() => {
            return Err(io::Error::new(
                io::ErrorKind::AlreadyExists,
                "a folder of that name is in the way",
            ))
        }
        Ok(_) => std::fs::remove_file(path)?,
        Err(_) => {}
    }
    OpenOptions::new().write(true).create_new(true).open(path)
}

/// Creates the output folder `dir` if needed, with a clear error when a file stands there.
pub fn prepare_dir(dir: &Path) -> Result<(), HostError> {
    if let Ok(m) = std::fs::metadata(dir) {
        if !m.is_dir() {
            return Err(HostError::Usage(format!(
                "--out {}: that is a file, not a folder: give a folder for the output files",
                dir.display()
            )));
        }
    }
    std::fs::create_dir_all(dir).map_err(write_err(dir))
}

/// An output set being written (see the module documentation).
#[derive(Debug)]
pub struct OutputSet {
    dir: PathBuf,
    staging: PathBuf,
    run_id: String,
    committed: bool,
}

/// What `commit` did, for the run's summary.
#[derive(Debug, Clone, Default)]
pub struct Committed {
    /// Files of an earlier run that were replaced by this run's files of the same name.
    pub replaced: Vec<String>,
    /// Files of an earlier run removed because this run does not write them.
    pub removed: Vec<String>,
    /// The run's id, as written in the manifest.
    pub run_id: String,
}

impl Committed {
    /// A line for the summary, or `None` when the folder held no earlier run.
    pub fn note(&self) -> Option<String> {
        if self.replaced.is_empty() && self.removed.is_empty() {
            return None;
        }
        let mut s = String::from("an earlier run's output in this folder was replaced");
        if !self.replaced.is_empty() {
            s.push_str(&format!(" ({})", self.replaced.join(", ")));
        }
        if !self.removed.is_empty() {
            s.push_str(&format!(
                "; its {} removed (not written by this run)",
                self.removed.join(", ")
            ));
        }
        Some(s)
    }
}

impl OutputSet {
    /// Starts a set in `dir` (created if missing); `run_id` names the run in the manifest.
    pub fn begin(dir: &Path) -> Result<OutputSet, HostError> {
        prepare_dir(dir)?;
        let now = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .unwrap_or_default();
        let run_id = format!(
            "{}.{:09}-{}",
            now.as_secs(),
            now.subsec_nanos(),
            std::process::id()
        );
        let staging = dir.join(format!(".frothline-run-{run_id}"));
        std::fs::create_dir(&staging).map_err(write_err(&staging))?;
        Ok(OutputSet {
            dir: dir.to_path_buf(),
            staging,
            run_id,
            committed: false,
        })
    }

    /// The run's id.
    pub fn run_id(&self) -> &str {
        &self.run_id
    }

    /// Where the file `name` is staged.
    pub fn staged(&self, name: &str) -> PathBuf {
        self.staging.join(name)
    }

    /// Where the file `name` lands after the commit.
    pub fn final_path(&self, name: &str) -> PathBuf {
        self.dir.join(name)
    }

    /// Creates the staged file `name`.
    pub fn create(&self, name: &str) -> Result<File, HostError> {
        let p = self.staged(name);
        create_fresh(&p).map_err(write_err(&p))
    }

    /// Writes the staged CSV file `name`: `header`, then `rows`.
    pub fn write_csv(
        &self,
        name: &str,
        header: &[&str],
        rows: &[Vec<String>],
    ) -> Result<(), HostError> {
        self.write_csv_with(name, header, |w| rows.iter().cloned().try_for_each(w))
    }

    /// Writes the staged CSV file `name`: `header`, then each row `rows` hands to the
    /// writer it is given (so that rows can be made one at a time).
    pub fn write_csv_with(
        &self,
        name: &str,
        header: &[&str],
        rows: impl FnOnce(&mut dyn FnMut(Vec<String>) -> Result<(), HostError>) -> Result<(), HostError>,
    ) -> Result<(), HostError> {
        let path = self.staged(name);
        let err = |e: csv::Error| HostError::Write {
            path: path.clone(),
            source: e.into(),
        };
        let mut w = csv::Writer::from_writer(self.create(name)?);
        w.write_record(header).map_err(err)?;
        rows(&mut |r| w.write_record(&r).map_err(err))?;
        w.flush().map_err(write_err(&path))
    }

    /// Writes the manifest, removes an earlier run's other files, renames the staged files
    /// `names` into place. `inputs` are (role, path) pairs recorded in the manifest.
    pub fn commit(
        mut self,
        names: &[&str],
        inputs: &[(&str, &Path)],
    ) -> Result<Committed, HostError> {
        let mut files = Vec::new();
        for n in names {
            let p = self.staged(n);
            let len = std::fs::metadata(&p).map_err(write_err(&p))?.len();
            files.push((n.to_string(), len));
        }
        let manifest = Manifest {
            run_id: self.run_id.clone(),
            inputs: inputs
                .iter()
                .map(|(k, p)| (k.to_string(), p.display().to_string()))
                .collect(),
            files,
        };
        let mp = self.staged(MANIFEST);
        std::fs::write(&mp, manifest.to_json()).map_err(write_err(&mp))?;
        let mut done = Committed {
            run_id: self.run_id.clone(),
            ..Committed::default()
        };
        for old in RUN_FILES {
            let target = self.dir.join(old);
            if std::fs::symlink_metadata(&target).is_err() {
                continue;
            }
            if names.contains(old) {
                done.replaced.push(old.to_string());
            } else {
                std::fs::remove_file(&target).map_err(write_err(&target))?;
                done.removed.push(old.to_string());
            }
        }
        // The old manifest goes first, so a crash between renames leaves files that no
        // manifest lists (report names them) rather than a manifest that lists old sizes.
        let old_manifest = self.dir.join(MANIFEST);
        if std::fs::symlink_metadata(&old_manifest).is_ok() {
            std::fs::remove_file(&old_manifest).map_err(write_err(&old_manifest))?;
        }
        for n in names.iter().chain(std::iter::once(&MANIFEST)) {
            let from = self.staged(n);
            let to = self.dir.join(n);
            std::fs::rename(&from, &to).map_err(write_err(&to))?;
        }
        self.committed = true;
        let _ = std::fs::remove_dir(&self.staging);
        Ok(done)
    }
}

impl Drop for OutputSet {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_dir_all(&self.staging);
        }
    }
}

/// The manifest of an output folder.
#[derive(Debug, Clone, PartialEq)]
pub struct Manifest {
    /// The run's id (seconds.nanoseconds-pid at its start).
    pub run_id: String,
    /// What the run read: (role, path).
    pub inputs: Vec<(String, String)>,
    /// The files it wrote: (name, bytes).
    pub files: Vec<(String, u64)>,
}

impl Manifest {
    /// The manifest as JSON.
    pub fn to_json(&self) -> String {
        let inputs: serde_json::Map<String, serde_json::Value> = self
            .inputs
            .iter()
            .map(|(k, v)| (k.clone(), serde_json::Value::from(v.as_str())))
            .collect();
        let files: Vec<serde_json::Value> = self
            .files
            .iter()
            .map(|(n, b)| serde_json::json!({ "name": n, "bytes": b }))
            .collect();
        let v = serde_json::json!({
            "run_id": self.run_id,
            "inputs": inputs,
            "files": files,
        });
        serde_json::to_string_pretty(&v).unwrap_or_default() + "\n"
    }

    /// Reads the manifest of `dir`: `Ok(None)` when there is none.
    pub fn read(dir: &Path) -> Result<Option<Manifest>, String> {
        let p = dir.join(MANIFEST);
        let text = match std::fs::read_to_string(&p) {
            Ok(t) => t,
            Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(None),
            Err(e) => return Err(format!("{}: {e}", p.display())),
        };
        let bad = |what: &str| format!("{}: {what}", p.display());
        let v: serde_json::Value =
            serde_json::from_str(&text).map_err(|e| bad(&format!("not JSON: {e}")))?;
        let run_id = v["run_id"]
            .as_str()
            .ok_or_else(|| bad("no run_id"))?
            .to_string();
        let inputs = v["inputs"]
            .as_object()
            .map(|m| {
                m.iter()
                    .map(|(k, v)| (k.clone(), v.as_str().unwrap_or_default().to_string()))
                    .collect()
            })
            .unwrap_or_default();
        let mut files = Vec::new();
        for f in v["files"].as_array().ok_or_else(|| bad("no files list"))? {
            let name = f["name"]
                .as_str()
                .ok_or_else(|| bad("a file without name"))?;
            let bytes = f["bytes"]
                .as_u64()
                .ok_or_else(|| bad(&format!("file {name}: no byte count")))?;
            files.push((name.to_string(), bytes));
        }
        Ok(Some(Manifest {
            run_id,
            inputs,
            files,
        }))
    }

    /// Checks that the file `name` in `dir` is the one this manifest lists: `Err` says why
    /// not (not listed, or another size: written by another run).
    pub fn check(&self, dir: &Path, name: &str) -> Result<(), String> {
        let p = dir.join(name);
        let Some((_, bytes)) = self.files.iter().find(|(n, _)| n == name) else {
            return Err(format!(
                "{}: not written by run {} (its {MANIFEST} does not list it): a file of \
                 another run",
                p.display(),
                self.run_id
            ));
        };
        let len = std::fs::metadata(&p).map_err(|e| format!("{}: {e}", p.display()))?;
        if len.len() != *bytes {
            return Err(format!(
                "{}: {} bytes, but run {} wrote {bytes} bytes: the file was changed or \
                 belongs to another run",
                p.display(),
                len.len(),
                self.run_id
            ));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_new_set_removes_files_the_earlier_run_wrote_and_this_one_does_not() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        for n in [
            "windows.csv",
            "profile.csv",
            "fronts.csv",
            "flow.json",
            "discharge.csv",
        ] {
            std::fs::write(d.join(n), "old").unwrap();
        }
        std::fs::write(d.join("notes.txt"), "mine").unwrap();
        let set = OutputSet::begin(d).unwrap();
        std::fs::write(set.staged("windows.csv"), "new rows\n").unwrap();
        let done = set
            .commit(&["windows.csv"], &[("capture", Path::new("a.wav"))])
            .unwrap();
        assert_eq!(done.replaced, vec!["windows.csv"]);
        assert_eq!(
            done.removed,
            vec!["profile.csv", "fronts.csv", "flow.json", "discharge.csv"]
        );
        assert!(!d.join("discharge.csv").exists());
        assert!(done.note().unwrap().contains("profile.csv"));
        assert_eq!(
            std::fs::read_to_string(d.join("windows.csv")).unwrap(),
            "new rows\n"
        );
        assert!(!d.join("profile.csv").exists());
        assert_eq!(
            std::fs::read_to_string(d.join("notes.txt")).unwrap(),
            "mine"
        );
        let m = Manifest::read(d).unwrap().unwrap();
        assert_eq!(m.run_id, done.run_id);
        assert_eq!(m.files, vec![("windows.csv".to_string(), 9)]);
        m.check(d, "windows.csv").unwrap();
        std::fs::write(d.join("profile.csv"), "from elsewhere").unwrap();
        assert!(m
            .check(d, "profile.csv")
            .unwrap_err()
            .contains("not written"));
        std::fs::write(d.join("windows.csv"), "edited").unwrap();
        assert!(m.check(d, "windows.csv").unwrap_err().contains("bytes"));
        // Only the manifest and the files are left: no staging folder.
        let left: Vec<String> = std::fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with('.'))
            .collect();
        assert!(left.is_empty(), "{left:?}");
    }

    #[test]
    fn a_set_dropped_before_commit_leaves_the_folder_as_it_was() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::write(d.join("profile.csv"), "old").unwrap();
        {
            let set = OutputSet::begin(d).unwrap();
            std::fs::write(set.staged("windows.csv"), "half").unwrap();
        }
        let names: Vec<String> = std::fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        assert_eq!(names, vec!["profile.csv"]);
    }

    #[cfg(unix)]
    #[test]
    fn create_fresh_replaces_a_symlink_instead_of_following_it() {
        let dir = tempfile::tempdir().unwrap();
        let victim = dir.path().join("victim.txt");
        std::fs::write(&victim, "precious").unwrap();
        let link = dir.path().join("windows.csv.partial");
        std::os::unix::fs::symlink(&victim, &link).unwrap();
        use std::io::Write;
        create_fresh(&link).unwrap().write_all(b"rows").unwrap();
        assert_eq!(std::fs::read_to_string(&victim).unwrap(), "precious");
        assert_eq!(std::fs::read_to_string(&link).unwrap(), "rows");
        assert!(!std::fs::symlink_metadata(&link).unwrap().is_symlink());
    }

    #[test]
    fn out_pointing_at_a_file_is_a_usage_error_naming_it() {
        let dir = tempfile::tempdir().unwrap();
        let f = dir.path().join("results");
        std::fs::write(&f, "x").unwrap();
        let e = prepare_dir(&f).unwrap_err().to_string();
        assert!(e.contains("results") && e.contains("not a folder"), "{e}");
    }
}
