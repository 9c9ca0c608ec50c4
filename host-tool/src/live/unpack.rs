//! `frothline unpack`: an archive of a live session back into CSV files, with a report of
//! what the link did: link-down gaps, sequence gaps per device, CRC failures, malformed
//! frames, bytes discarded, an unfinished frame, runs started, damaged stretches of the
//! archive (skipped to the next valid chunk) and an incomplete tail. A file that is no
//! archive (empty, a WAV capture, other bytes) is an error naming the file.
//!
//! The archive's bytes go through the same [`Session`] as during the live session, so the
//! CSV files are the ones `frothline watch` wrote (up to the last complete chunk when the
//! session was killed).

use crate::shared::archive::{utc_iso, ArchiveReader, ChunkKind, Damage, Tail};
use crate::shared::error::HostError;
use crate::shared::layout::Layout;
use crate::shared::session::{Event, Session, SessionOptions, SessionReport};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Arguments of `frothline unpack`.
#[derive(clap::Args, Debug, Clone)]
pub struct UnpackArgs {
    /// The session archive (`session-<UTC time>.frothwire` written by `frothline watch`).
    pub archive: PathBuf,
    /// Folder for windows.csv (and fronts.csv, profile.csv when the session had them).
    #[arg(long, short)]
    pub out: PathBuf,
    /// A layout file (TOML) whose probe names label the probes, by index.
    #[arg(long, short)]
    pub layout: Option<PathBuf>,
    /// Print nothing.
    #[arg(long, short)]
    pub quiet: bool,
}

/// What an archive held.
#[derive(Debug)]
pub struct UnpackReport {
    /// The archive.
    pub archive: PathBuf,
    /// Its size, bytes.
    pub size: u64,
    /// Chunks read.
    pub chunks: u64,
    /// Host time of the first and last chunk, µs since the Unix epoch.
    pub span_us: Option<(u64, u64)>,
    /// How the file ended.
    pub tail: Tail,
    /// Damaged stretches skipped (reading resumed at the next valid chunk).
    pub damage: Vec<Damage>,
    /// The file header's CRC failed: chunk times are relative to an unknown start.
    pub header_damaged: bool,
    /// Mark chunks whose payload could not be read (time and why); their CRC held, so the
    /// writer made them so.
    pub bad_marks: Vec<String>,
    /// The decoded session.
    pub session: SessionReport,
}

/// Port names of an archive, from its `opened` chunks (`port N` where none names it), and
/// the layout text it holds.
fn scan_ports(path: &Path) -> Result<(Vec<String>, Option<String>), HostError> {
    let mut r = ArchiveReader::open(path).map_err(|e| read_err(path, e))?;
    let mut names: Vec<Option<String>> = Vec::new();
    let mut layout = None;
    while let Some(c) = r.next_chunk().map_err(|e| read_err(path, e))? {
        if c.kind == ChunkKind::Layout {
            layout.get_or_insert_with(|| String::from_utf8_lossy(&c.bytes).into_owned());
            continue;
        }
        let i = c.port as usize;
        if names.len() <= i {
            names.resize(i + 1, None);
        }
        if c.kind == ChunkKind::Opened && names[i].is_none() {
            names[i] = Some(String::from_utf8_lossy(&c.bytes).into_owned());
        }
    }
    let names = names
        .into_iter()
        .enumerate()
        .map(|(i, n)| n.unwrap_or_else(|| format!("port {i}")))
        .collect();
    Ok((names, layout))
}

fn read_err(path: &Path, e: std::io::Error) -> HostError {
    if e.kind() == std::io::ErrorKind::InvalidData {
        // The reader's own message names the file and what is wrong with it.
        return HostError::Usage(e.to_string());
    }
    HostError::Usage(format!("cannot read archive {}: {e}", path.display()))
}

/// Decode `archive` into CSV files in `out` (none if `None`), handing every event to
/// `observer`. Probes are named by `layout`, else by the layout the archive holds.
pub fn unpack_with(
    archive: &Path,
    out: Option<&Path>,
    layout: Option<Layout>,
    observer: &mut dyn FnMut(&Event),
) -> Result<UnpackReport, HostError> {
    let (ports, text) = scan_ports(archive)?;
    let layout = match layout {
        Some(l) => Some(l),
        None => text
            .as_deref()
            .and_then(|t| Layout::parse(t, Path::new("<layout in the archive>")).ok()),
    };
    let mut session = Session::new(SessionOptions {
        ports: if ports.is_empty() {
            vec!["port 0".into()]
        } else {
            ports
        },
        layout,
        layout_text: None,
        out_dir: out.map(Path::to_path_buf),
    })?;
    let mut r = ArchiveReader::open(archive).map_err(|e| read_err(archive, e))?;
    let mut chunks = 0u64;
    let mut bad_marks = Vec::new();
    let mut span: Option<(u64, u64)> = None;
    while let Some(c) = r.next_chunk().map_err(|e| read_err(archive, e))? {
        chunks += 1;
        let t = c.host_time_us;
        span = Some(span.map_or((t, t), |(a, b)| (a.min(t), b.max(t))));
        let port = c.port as usize;
        let events = match c.kind {
            ChunkKind::Bytes => session.received(port, t, &c.bytes)?,
            ChunkKind::Gap => session.lost(port, t, "")?,
            ChunkKind::Opened => session.opened(port, t)?,
            ChunkKind::Sent => session.sent(port, t, &c.bytes)?,
            ChunkKind::Layout => Vec::new(),
            ChunkKind::Mark => {
                match crate::shared::marks::from_payload(&c.bytes, utc_iso(t)) {
                    Ok(m) => {
                        session.mark(port, t, &m)?;
                    }
                    Err(e) => bad_marks.push(format!("at {}: {e}", utc_iso(t))),
                }
                Vec::new()
            }
        };
        for e in &events {
            observer(e);
        }
    }
    let tail = r.tail().cloned().unwrap_or(Tail::Clean);
    Ok(UnpackReport {
        archive: archive.to_path_buf(),
        size: r.size(),
        chunks,
        span_us: span,
        tail,
        damage: r.damage().to_vec(),
        header_damaged: r.header_damaged(),
        bad_marks,
        session: session.finish()?,
    })
}

impl std::fmt::Display for UnpackReport {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let s = &self.session;
        let t0 = self.span_us.map_or(0, |x| x.0);
        let rel = |t: u64| (t.saturating_sub(t0)) as f64 / 1e6;
        let mut o = String::new();
        let _ = write!(
            o,
            "{}: {} bytes, {} chunks",
            self.archive.display(),
            self.size,
            self.chunks
        );
        if let Some((a, b)) = self.span_us {
            let _ = write!(
                o,
                ", host time {} to {} ({:.1} s)",
                utc_iso(a),
                utc_iso(b),
                rel(b)
            );
        }
        let _ = writeln!(o);
        if self.header_damaged {
            let _ = writeln!(
                o,
                "file header DAMAGED (its CRC fails): the times above count from 1970, not from the session's start"
            );
        }
        for w in s.version_warnings() {
            let _ = writeln!(o, "{w}");
        }
        for m in &self.bad_marks {
            let _ = writeln!(o, "mark chunk not read {m}");
        }
        for (i, p) in s.ports.iter().enumerate() {
            let d = &p.decoder;
            let _ = writeln!(
                o,
                "port {i} ({}): {} bytes, {} frames, {} lost in sequence gaps, {} not frames (bad framing), {} CRC failures, {} malformed, {} oversize, {} unsupported, {} bytes discarded, {} repeated, {} stale, {} commands sent",
                p.name,
                p.bytes,
                d.frames,
                d.lost,
                d.bad_framing,
                d.crc_failures,
                d.malformed,
                d.oversize,
                d.unsupported,
                d.bytes_discarded,
                d.duplicates,
                d.stale,
                p.commands_sent
            );
            for dev in &p.devices {
                let _ = writeln!(
                    o,
                    "  device {}: {} frames, last #{}, {} lost, {} repeated, {} stale, {} restarts",
                    dev.device,
                    dev.frames,
                    dev.last_seq,
                    dev.lost,
                    dev.duplicates,
                    dev.stale,
                    dev.restarts
                );
            }
            if p.unfinished_bytes > 0 {
                let _ = writeln!(
                    o,
                    "  {} bytes of an unfinished frame at the end (not decoded)",
                    p.unfinished_bytes
                );
            }
        }
        if s.link_gaps.is_empty() {
            let _ = writeln!(o, "link gaps: none");
        } else {
            let _ = writeln!(o, "link gaps (port lost): {}", s.link_gaps.len());
            for g in &s.link_gaps {
                let _ = writeln!(
                    o,
                    "  port {} at {} (+{:.3} s)",
                    g.port,
                    utc_iso(g.host_time_us),
                    rel(g.host_time_us)
                );
            }
        }
        if s.seq_gaps.is_empty() {
            let _ = writeln!(o, "sequence gaps: none");
        } else {
            let _ = writeln!(o, "sequence gaps: {}", s.seq_gaps.len());
            for g in s.seq_gaps.iter().take(50) {
                let _ = writeln!(
                    o,
                    "  port {} device {}: {} frame(s) missing before #{} (+{:.3} s)",
                    g.port,
                    g.device,
                    g.missing,
                    g.seq,
                    rel(g.host_time_us)
                );
            }
            if s.seq_gaps.len() > 50 {
                let _ = writeln!(o, "  ... {} more", s.seq_gaps.len() - 50);
            }
        }
        if !s.runs.is_empty() {
            let _ = writeln!(o, "runs started: {}", s.runs.len());
            for r in s.runs.iter().take(50) {
                let _ = writeln!(
                    o,
                    "  port {} device {} run {}{} at +{:.3} s{}",
                    r.port,
                    r.device,
                    r.run.run,
                    if r.run.label.is_empty() {
                        String::new()
                    } else {
                        format!(" `{}`", r.run.label)
                    },
                    rel(r.host_time_us),
                    r.run.utc_ms.map_or_else(String::new, |ms| format!(
                        " (host UTC {})",
                        utc_iso(ms.saturating_mul(1000))
                    ))
                );
            }
        }
        if self.damage.is_empty() {
            let _ = writeln!(o, "damage: none (every chunk's CRC holds)");
        } else {
            let total: u64 = self.damage.iter().map(|d| d.bytes).sum();
            let _ = writeln!(
                o,
                "damage: {} DAMAGED stretch(es), {total} bytes skipped (reading resumed at the next valid chunk each time):",
                self.damage.len()
            );
            for d in self.damage.iter().take(20) {
                let _ = writeln!(o, "  {} bytes at offset {}", d.bytes, d.offset);
            }
            if self.damage.len() > 20 {
                let _ = writeln!(o, "  ... {} more", self.damage.len() - 20);
            }
        }
        let _ = match &self.tail {
            Tail::Clean => writeln!(o, "tail: clean (the file ends on a whole chunk)"),
            Tail::Incomplete(n) => writeln!(
                o,
                "tail: INCOMPLETE: the last {n} bytes are a chunk cut short (the writer stopped mid-write); everything before them was read"
            ),
        };
        o.push_str(&s.results_line("the device never described itself"));
        writeln!(f, "{o}")
    }
}

/// `frothline unpack`.
pub fn run(args: &UnpackArgs) -> Result<UnpackReport, HostError> {
    let layout = args.layout.as_deref().map(Layout::load).transpose()?;
    let report = unpack_with(&args.archive, Some(&args.out), layout, &mut |_| {})?;
    if !args.quiet {
        crate::shared::stdout::print(&report.to_string());
    }
    Ok(report)
}

#[cfg(test)]
mod iso_tests {
    /// ISO 8601 extended format with a Z for UTC; 2026-12-02 05:57:18.293 UTC is
    /// 1 796 191 038.293 s after the Unix epoch (Python's `datetime(2026, 12, 2, 5, 57, 18,
    /// 293000, tzinfo=timezone.utc).timestamp()`).
    #[test]
    fn dates_are_iso_8601() {
        assert_eq!(
            crate::shared::archive::utc_iso(1_796_191_038_293_000),
            "2026-12-02T05:57:18.293Z"
        );
        assert_eq!(
            crate::shared::archive::utc_iso(0),
            "1970-01-01T00:00:00.000Z"
        );
    }
}
