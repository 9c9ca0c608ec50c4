//! The captures an ensemble reads: folders expanded into their captures, and a capture given
//! twice refused (an ensemble averages independent runs).

use crate::shared::error::HostError;
use std::collections::HashMap;
use std::path::PathBuf;

/// The capture files named by `paths` (files as given; folders: their `*.wav` and their
/// sub-folders' `capture.wav`, in name order).
pub fn capture_list(paths: &[PathBuf]) -> Result<Vec<PathBuf>, HostError> {
    let mut out = Vec::new();
    for p in paths {
        if p.is_dir() {
            let mut entries: Vec<PathBuf> = std::fs::read_dir(p)
                .map_err(|e| HostError::Usage(format!("{}: {e}", p.display())))?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .collect();
            entries.sort();
            for e in entries {
                if e.is_dir() && e.join("capture.wav").is_file() {
                    out.push(e.join("capture.wav"));
                } else if e.extension().is_some_and(|x| x.eq_ignore_ascii_case("wav")) {
                    out.push(e);
                }
            }
        } else {
            out.push(p.clone());
        }
    }
    if out.is_empty() {
        return Err(HostError::Usage("ensemble: no capture found".into()));
    }
    Ok(out)
}

/// An ensemble averages independent runs: a capture given twice (the same file by two
/// paths, or two files with the same bytes) would count one run twice, so it is refused,
/// naming both.
pub fn refuse_repeated_captures(captures: &[PathBuf]) -> Result<(), HostError> {
    use std::hash::Hasher;
    let mut seen: HashMap<(u64, u64), &PathBuf> = HashMap::new();
    for c in captures {
        let mut file = std::fs::File::open(c).map_err(|source| {
            HostError::Capture(crate::shared::capture::CaptureError::Io {
                path: c.clone(),
                source,
            })
        })?;
        let mut h = std::collections::hash_map::DefaultHasher::new();
        let mut buf = vec![0u8; 1 << 16];
        let mut len = 0u64;
        loop {
            let n = std::io::Read::read(&mut file, &mut buf).map_err(|source| {
                HostError::Capture(crate::shared::capture::CaptureError::Io {
                    path: c.clone(),
                    source,
                })
            })?;
            if n == 0 {
                break;
            }
            h.write(&buf[..n]);
            len += n as u64;
        }
        if let Some(first) = seen.insert((len, h.finish()), c) {
            return Err(HostError::Usage(format!(
                "ensemble: {} and {} hold the same capture: each run must be given once",
                first.display(),
                c.display()
            )));
        }
    }
    Ok(())
}
