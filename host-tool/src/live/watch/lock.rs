//! The claim of a watch session on its folder's CSV files.

use std::io::Write;
use std::path::{Path, PathBuf};

/// The claim of a watch session on its folder's CSV files: `.watch-lock` holds the
/// process id, removed when the session ends. A session that finds the lock held by a
/// live process writes its CSV files into a subfolder named after its archive instead, so
/// two sessions never write the same windows.csv. A lock left by a killed process is
/// taken over.
pub struct FolderLock {
    path: PathBuf,
}

/// The name of the lock file in a watch folder.
pub const LOCK_FILE: &str = ".watch-lock";

impl FolderLock {
    /// The CSV folder for a session archiving to `archive` in `dir`, and the lock if this
    /// session holds the folder.
    pub fn claim(dir: &Path, archive: &Path) -> (PathBuf, Option<FolderLock>) {
        let path = dir.join(LOCK_FILE);
        for _ in 0..2 {
            match std::fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&path)
            {
                Ok(mut f) => {
                    let _ = write!(f, "{}", std::process::id());
                    return (dir.to_path_buf(), Some(FolderLock { path }));
                }
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                    let holder = std::fs::read_to_string(&path)
                        .ok()
                        .and_then(|s| s.trim().parse::<u32>().ok());
                    if holder.is_some_and(process_alive) {
                        break;
                    }
                    // Left by a process that is gone: take it over.
                    let _ = std::fs::remove_file(&path);
                }
                Err(_) => break,
            }
        }
        let stem = archive
            .file_stem()
            .map_or_else(|| "session".into(), |s| s.to_string_lossy().into_owned());
        (dir.join(stem), None)
    }
}

impl Drop for FolderLock {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}

/// True if process `pid` runs (Linux: /proc; elsewhere assumed, which only costs a
/// separate CSV folder).
fn process_alive(pid: u32) -> bool {
    if cfg!(target_os = "linux") {
        Path::new(&format!("/proc/{pid}")).exists()
    } else {
        true
    }
}
