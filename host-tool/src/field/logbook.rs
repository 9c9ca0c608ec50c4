//! `frothline logbook`: a field logger's flash image back into CSV files, with a summary
//! of what the log held.
//!
//! ```text
//! image file -> geometry (given, or detected: crate::field::flash_image) -> Logbook records
//!            -> each record (a wire frame; 0x00 delimiter added when missing)
//!            -> Session (one link) -> windows.csv, fronts.csv, profile.csv, status.csv
//! ```
//!
//! A field logger writes a device status (wire kind 0x0C) into its log when its state
//! changes (armed, capturing, armed again): the summary lists those changes.
//!
//! The records go through the same [`Session`] as `frothline watch` and `frothline unpack`,
//! so the CSV files have the same columns and values as those of a live session.

use crate::field::flash_image::{self, Candidate, Geometry, LogRead, PAGE_SIZES, WRITE_UNITS};
use crate::shared::commands::kind_name;
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::session::{Session, SessionOptions, SessionReport};
use frothline_core::logbook::{LogError, MAX_PAGES, MAX_RECORD_BYTES, MAX_WRITE_UNIT};
use frothline_core::wire::{Decoder, FeedResult};
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Arguments of `frothline logbook`.
#[derive(clap::Args, Debug, Clone)]
pub struct LogbookArgs {
    /// The flash image: a raw dump of the field logger's whole log region, from its first
    /// page. Not needed with --port.
    #[arg(required_unless_present = "port", conflicts_with = "port")]
    pub image: Option<PathBuf>,
    /// Read the log from the device on this serial port instead (the device sends its log
    /// region over the link); the image is kept as OUT/fieldlog-image.bin.
    #[arg(long, value_name = "PORT")]
    pub port: Option<String>,
    /// Baud rate of --port (8N1).
    #[arg(long, default_value_t = 921_600)]
    pub baud: u32,
    /// Folder for windows.csv (and fronts.csv, profile.csv when the log holds them).
    #[arg(long, short)]
    pub out: PathBuf,
    /// A layout file (TOML) whose probe names label the probes, by index.
    #[arg(long, short)]
    pub layout: Option<PathBuf>,
    /// Erase page (sector) size of the flash, bytes: a power of two from 256 to 131072.
    /// Detected from the image when absent.
    #[arg(long, value_name = "N")]
    pub page_bytes: Option<usize>,
    /// Write unit of the flash, bytes: 1, 2, 4, 8 or 16. Detected from the image when
    /// absent.
    #[arg(long, value_name = "N")]
    pub write_unit: Option<usize>,
    /// Print nothing.
    #[arg(long, short)]
    pub quiet: bool,
}

/// What a flash image held.
#[derive(Debug)]
pub struct LogbookReport {
    /// The image file.
    pub image: PathBuf,
    /// Its size, bytes.
    pub size: u64,
    /// The geometry the log was read with.
    pub geometry: Geometry,
    /// True when the page size or write unit was detected rather than given.
    pub detected: bool,
    /// Page sizes that read the same records as the one chosen (see
    /// [`flash_image::detect`]); more than one: the image cannot tell the page size.
    pub same_records_pages: Vec<usize>,
    /// Geometries tried.
    pub tried: usize,
    /// Geometries tried that found a valid page header.
    pub tried_with_pages: usize,
    /// Pages of the region.
    pub pages: u32,
    /// Pages with a valid header.
    pub pages_found: u32,
    /// True when the head page's free tail was not erased: a write cut by a power loss.
    pub recovered_cut: bool,
    /// Committed records read.
    pub records: u64,
    /// Records that lacked the 0x00 frame delimiter (one was added).
    pub records_without_delimiter: u64,
    /// Frames decoded, by kind name ([`kind_name`]).
    pub kinds: BTreeMap<&'static str, u64>,
    /// The decoded session (decoder counters, sequence gaps, CSV files).
    pub session: SessionReport,
    /// The device statuses of the log, in log order: the logger's state changes.
    pub logger_states: Vec<frothline_core::wire::DeviceStatus>,
}

/// What [`decode_log`] found.
pub struct DecodedLog {
    /// The session's report (decoder counters, sequence gaps, CSV files).
    pub session: SessionReport,
    /// Frames by kind name.
    pub kinds: BTreeMap<&'static str, u64>,
    /// Records that lacked the 0x00 delimiter.
    pub without_delimiter: u64,
    /// The device statuses, in log order.
    pub logger_states: Vec<frothline_core::wire::DeviceStatus>,
}

fn usage(msg: String) -> HostError {
    HostError::Usage(msg)
}

fn geometry_rules() -> String {
    format!(
        "the log needs pages that hold its page header and the largest record \
         ({MAX_RECORD_BYTES} bytes), a write unit of at most {MAX_WRITE_UNIT} bytes that \
         divides the page, and 2 to {MAX_PAGES} pages"
    )
}

/// Read the image file, with clear errors for a missing, unreadable, empty or oversized
/// file.
fn load_image(path: &Path) -> Result<Vec<u8>, HostError> {
    let read_err =
        |e: std::io::Error| usage(format!("cannot read flash image {}: {e}", path.display()));
    let meta = std::fs::metadata(path).map_err(read_err)?;
    if meta.is_dir() {
        return Err(usage(format!(
            "flash image {} is a folder, not a file",
            path.display()
        )));
    }
    if meta.len() > flash_image::MAX_IMAGE_BYTES {
        return Err(usage(format!(
            "flash image {} is {} bytes: larger than any log region ({MAX_PAGES} pages of \
             at most {} bytes)",
            path.display(),
            meta.len(),
            PAGE_SIZES[PAGE_SIZES.len() - 1]
        )));
    }
    let bytes = std::fs::read(path).map_err(read_err)?;
    if bytes.is_empty() {
        return Err(usage(format!(
            "flash image {} is empty (0 bytes): the dump holds no log region",
            path.display()
        )));
    }
    Ok(bytes)
}

/// The page sizes and write units to try, from the arguments (checked against the
/// supported values and the image length).
fn candidate_sets(
    path: &Path,
    len: usize,
    args: &LogbookArgs,
) -> Result<(Vec<usize>, Vec<usize>), HostError> {
    let pages = match args.page_bytes {
        Some(p) => {
            if !PAGE_SIZES.contains(&p) {
                return Err(usage(format!(
                    "--page-bytes {p}: not a supported page size (a power of two from {} to {})",
                    PAGE_SIZES[0],
                    PAGE_SIZES[PAGE_SIZES.len() - 1]
                )));
            }
            if !len.is_multiple_of(p) {
                return Err(usage(format!(
                    "flash image {} is {len} bytes: not a whole number of {p}-byte pages \
                     (--page-bytes {p}); was the dump cut short?",
                    path.display()
                )));
            }
            vec![p]
        }
        None => {
            let fit: Vec<usize> = PAGE_SIZES
                .iter()
                .copied()
                .filter(|p| len.is_multiple_of(*p))
                .collect();
            if fit.is_empty() {
                return Err(usage(format!(
                    "flash image {} is {len} bytes: not a multiple of any page size tried \
                     ({} to {} bytes, powers of two); was the dump cut short? Give \
                     --page-bytes if the flash has other pages",
                    path.display(),
                    PAGE_SIZES[0],
                    PAGE_SIZES[PAGE_SIZES.len() - 1]
                )));
            }
            fit
        }
    };
    let units = match args.write_unit {
        Some(u) if WRITE_UNITS.contains(&u) => vec![u],
        Some(u) => {
            return Err(usage(format!(
                "--write-unit {u}: not a supported write unit (one of {WRITE_UNITS:?} bytes)"
            )))
        }
        None => WRITE_UNITS.to_vec(),
    };
    Ok((pages, units))
}

/// Find the log of `image`: the given geometry, or the best one detected. Also returns
/// the candidates tried.
fn find_log(
    path: &Path,
    image: &[u8],
    args: &LogbookArgs,
) -> Result<(LogRead, Vec<Candidate>, Vec<usize>), HostError> {
    let (pages, units) = candidate_sets(path, image.len(), args)?;
    let det = flash_image::detect(image, &pages, &units);
    if let Some(best) = det.best {
        return Ok((best, det.candidates, det.same_records_pages));
    }
    // Nothing found: say why. A flash error cannot come from a read-only image read in
    // bounds; it would mean the core tried to write.
    if det
        .candidates
        .iter()
        .any(|c| c.outcome == Err(LogError::Flash))
    {
        return Err(usage(format!(
            "flash image {}: the log could not be read (a read outside the image, or a \
             write to it: internal error)",
            path.display()
        )));
    }
    let usable = det.candidates.iter().any(|c| c.outcome.is_ok());
    if !usable {
        let what = match (args.page_bytes, args.write_unit) {
            (Some(p), Some(u)) => format!("{p}-byte pages and a {u}-byte write unit"),
            (Some(p), None) => format!("{p}-byte pages (any write unit)"),
            (None, Some(u)) => format!("a {u}-byte write unit (any page size)"),
            (None, None) => "any page size and write unit tried".to_string(),
        };
        return Err(usage(format!(
            "flash image {} ({} bytes): the log cannot be read with {what}: {}",
            path.display(),
            image.len(),
            geometry_rules()
        )));
    }
    let given = match (args.page_bytes, args.write_unit) {
        (None, None) => String::new(),
        _ => " with the given --page-bytes/--write-unit".to_string(),
    };
    Err(usage(format!(
        "no field-log pages found{given}: is this a frothline field-log image? {} ({} bytes) \
         has no page with a valid log header (magic, sequence number and CRC) for any \
         geometry tried; an erased region (all 0xFF) or a dump of the wrong address range \
         reads like this",
        path.display(),
        image.len()
    )))
}

/// Decode the records of `log` into CSV files in `out` (none if `None`).
pub fn decode_log(
    log: &LogRead,
    out: Option<&Path>,
    layout: Option<Layout>,
    port_name: &str,
) -> Result<DecodedLog, HostError> {
    let mut session = Session::new(SessionOptions {
        ports: vec![port_name.to_string()],
        layout,
        layout_text: None,
        out_dir: out.map(Path::to_path_buf),
    })?;
    // A second decoder only tallies the frames by kind (the session's decoder counts the
    // rejects and the sequence gaps).
    let mut tally: Box<Decoder> = Box::default();
    let mut kinds: BTreeMap<&'static str, u64> = BTreeMap::new();
    let mut without_delimiter = 0u64;
    let mut logger_states = Vec::new();
    let mut frame = Vec::with_capacity(MAX_RECORD_BYTES + 1);
    for rec in &log.records {
        frame.clear();
        frame.extend_from_slice(rec);
        if frame.last() != Some(&0) {
            frame.push(0);
            without_delimiter += 1;
        }
        let mut rest = &frame[..];
        while !rest.is_empty() {
            let r = tally.feed(rest);
            rest = r.remaining();
            match r {
                FeedResult::Consumed => break,
                FeedResult::Frame { frame, .. } => {
                    *kinds.entry(kind_name(frame.body.kind())).or_default() += 1;
                    if let frothline_core::wire::Body::DeviceStatus(s) = frame.body {
                        logger_states.push(s);
                    }
                }
                _ => {}
            }
        }
        // The log has no host time: every record is "received" at 0.
        session.received(0, 0, &frame)?;
    }
    Ok(DecodedLog {
        session: session.finish()?,
        kinds,
        without_delimiter,
        logger_states,
    })
}

/// Read the flash image of `args` and write its CSV files.
pub fn read_image(args: &LogbookArgs) -> Result<LogbookReport, HostError> {
    let layout = args.layout.as_deref().map(Layout::load).transpose()?;
    let path = args
        .image
        .as_ref()
        .ok_or_else(|| HostError::Usage("logbook: give an image file or --port".into()))?;
    let image = load_image(path)?;
    let (log, candidates, same_records_pages) = find_log(path, &image, args)?;
    let name = path
        .file_name()
        .map_or_else(|| "flash".to_string(), |n| n.to_string_lossy().into_owned());
    let decoded = decode_log(&log, Some(&args.out), layout, &name)?;
    Ok(LogbookReport {
        image: path.to_path_buf(),
        size: image.len() as u64,
        geometry: log.geometry,
        detected: args.page_bytes.is_none() || args.write_unit.is_none(),
        tried: candidates.len(),
        tried_with_pages: candidates
            .iter()
            .filter(|c| matches!(c.outcome, Ok((p, _)) if p > 0))
            .count(),
        same_records_pages,
        pages: log.pages,
        pages_found: log.stats.pages_found,
        recovered_cut: log.stats.recovered_cut,
        records: log.records.len() as u64,
        records_without_delimiter: decoded.without_delimiter,
        kinds: decoded.kinds,
        session: decoded.session,
        logger_states: decoded.logger_states,
    })
}

impl std::fmt::Display for LogbookReport {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let s = &self.session;
        let g = &self.geometry;
        let mut o = String::new();
        let _ = writeln!(o, "{}: {} bytes", self.image.display(), self.size);
        let _ = write!(
            o,
            "geometry: {}-byte pages, write unit {} B",
            g.page_bytes, g.write_unit
        );
        if self.detected {
            let _ = write!(
                o,
                " (detected: {} geometries tried, {} found log pages; the most records wins",
                self.tried, self.tried_with_pages
            );
            if g.layout_unit() == 4 {
                let _ = write!(o, "; write units 1, 2 and 4 B lay a log out the same");
            }
            if let [first, .., last] = self.same_records_pages[..] {
                let _ = write!(
                    o,
                    "; every record sits in the first page, so pages of {first} to {last} B \
                     read the same and the smallest is taken: give --page-bytes if it is known"
                );
            }
            let _ = write!(o, ")");
        } else {
            let _ = write!(o, " (given)");
        }
        let _ = writeln!(
            o,
            "; {} pages, {} with a valid header",
            self.pages, self.pages_found
        );
        let _ = write!(o, "records: {} committed records read", self.records);
        if self.records_without_delimiter > 0 {
            let _ = write!(
                o,
                " ({} without a 0x00 delimiter: added)",
                self.records_without_delimiter
            );
        }
        let _ = writeln!(o);
        let _ = if self.recovered_cut {
            writeln!(
                o,
                "head page: CUT by a power loss (the last write was not committed and was \
                 dropped; every committed record before it was read)"
            )
        } else {
            writeln!(o, "head page: clean (no write cut by a power loss)")
        };
        let decoded: u64 = self.kinds.values().sum();
        let by_kind: Vec<String> = self.kinds.iter().map(|(k, n)| format!("{n} {k}")).collect();
        let _ = write!(o, "frames: {decoded} decoded");
        if !by_kind.is_empty() {
            let _ = write!(o, " ({})", by_kind.join(", "));
        }
        let d = s.ports.first().map(|p| p.decoder).unwrap_or_default();
        let _ = writeln!(
            o,
            "; {} CRC failures, {} malformed, {} oversize, {} unsupported, {} repeated, {} stale",
            d.crc_failures, d.malformed, d.oversize, d.unsupported, d.duplicates, d.stale
        );
        if s.seq_gaps.is_empty() {
            let _ = writeln!(o, "sequence gaps: none");
        } else {
            let _ = writeln!(
                o,
                "sequence gaps: {} ({} frames not in the log: results between captures are \
                 not logged, and recycled pages are given up)",
                s.seq_gaps.len(),
                d.lost
            );
            for g in s.seq_gaps.iter().take(20) {
                let _ = writeln!(
                    o,
                    "  device {}: {} frame(s) missing before #{}",
                    g.device, g.missing, g.seq
                );
            }
            if s.seq_gaps.len() > 20 {
                let _ = writeln!(o, "  ... {} more", s.seq_gaps.len() - 20);
            }
        }
        if let Some(line) = logger_states_line(&self.logger_states) {
            let _ = writeln!(o, "{line}");
        }
        o.push_str(&s.results_line("the log holds no device description"));
        writeln!(f, "{o}")
    }
}

/// The summary line of the logger's state changes a log holds, if any:
/// `logger states (time since power-up): armed at 0.103 s (3.30 V), capturing at 0.199 s`.
pub fn logger_states_line(states: &[frothline_core::wire::DeviceStatus]) -> Option<String> {
    if states.is_empty() {
        return None;
    }
    let changes: Vec<String> = states
        .iter()
        .map(|st| {
            let mut t = format!(
                "{} at {:.3} s",
                st.logger_state_name(),
                st.uptime_ms as f64 / 1e3
            );
            if let Some(mv) = st.supply_mv {
                let _ = write!(t, " ({:.2} V)", f64::from(mv) / 1e3);
            }
            t
        })
        .collect();
    Some(format!(
        "logger states (time since power-up): {}",
        changes.join(", ")
    ))
}

/// `frothline logbook`.
pub fn run(args: &LogbookArgs) -> Result<LogbookReport, HostError> {
    let report = match &args.port {
        Some(port) => {
            let image = crate::field::log_link::read_region(port, args.baud)?;
            std::fs::create_dir_all(&args.out).map_err(|source| HostError::Write {
                path: args.out.clone(),
                source,
            })?;
            let path = args.out.join("fieldlog-image.bin");
            std::fs::write(&path, &image).map_err(|source| HostError::Write {
                path: path.clone(),
                source,
            })?;
            if !args.quiet {
                crate::shared::stdout::print(&format!(
                    "{port}: read {} bytes of field log into {}\n",
                    image.len(),
                    path.display()
                ));
            }
            let mut a = args.clone();
            a.image = Some(path);
            a.port = None;
            read_image(&a)?
        }
        None => read_image(args)?,
    };
    if !args.quiet {
        crate::shared::stdout::print(&report.to_string());
    }
    Ok(report)
}

#[cfg(test)]
mod tests {
    use super::*;
    use frothline_core::logbook::LoggerState;
    use frothline_core::wire::{encode, Body, DeviceStatus, Frame, Health, LoggerStatus};

    fn record(seq: u16, body: Body) -> Vec<u8> {
        let mut buf = [0u8; frothline_core::wire::MAX_FRAME_BYTES];
        let f = Frame {
            device: 3,
            seq,
            body,
        };
        encode(&f, &mut buf).unwrap().to_vec()
    }

    fn status(uptime_ms: u64, state: LoggerState) -> DeviceStatus {
        DeviceStatus {
            supply_mv: Some(3_304),
            uptime_ms,
            logger: Some(LoggerStatus {
                state,
                used_bytes: 512,
                capacity_bytes: 61_440,
            }),
        }
    }

    /// A log of two logger-state records around a health frame: the report lists the
    /// states in log order, and status.csv holds one row each.
    #[test]
    fn logger_state_changes_are_listed_and_written() {
        let armed = status(103, LoggerState::Armed);
        let capturing = status(199, LoggerState::Capturing { remaining: 37 });
        let log = LogRead {
            geometry: Geometry {
                page_bytes: 4096,
                write_unit: 4,
            },
            pages: 16,
            stats: Default::default(),
            records: vec![
                record(0, Body::DeviceStatus(armed)),
                record(1, Body::Health(Health::default())),
                record(2, Body::DeviceStatus(capturing)),
            ],
        };
        let dir = tempfile::tempdir().unwrap();
        let d = decode_log(&log, Some(dir.path()), None, "image").unwrap();
        assert_eq!(d.logger_states, [armed, capturing]);
        assert_eq!(d.kinds.get("device-status"), Some(&2));
        assert_eq!(
            logger_states_line(&d.logger_states).unwrap(),
            "logger states (time since power-up): armed at 0.103 s (3.30 V), capturing at \
             0.199 s (3.30 V)"
        );
        let csv = std::fs::read_to_string(dir.path().join("status.csv")).unwrap();
        let rows: Vec<&str> = csv.lines().skip(1).collect();
        assert_eq!(rows.len(), 2, "{csv}");
        assert!(
            rows[0].starts_with("3,0.103,3.304,false,armed,,512,61440,"),
            "{csv}"
        );
        assert!(
            rows[1].starts_with("3,0.199,3.304,false,capturing,37,512,61440,"),
            "{csv}"
        );
        assert!(d.session.files.contains(&dir.path().join("status.csv")));
        assert_eq!(logger_states_line(&[]), None);
    }
}
