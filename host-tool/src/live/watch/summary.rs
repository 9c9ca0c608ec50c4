//! The end of a watch session, as printed.

use crate::shared::session::SessionReport;
use std::time::Duration;

/// The end of a watch session.
#[derive(Debug)]
pub struct WatchSummary {
    /// Counters and files.
    pub report: SessionReport,
    /// How long it ran.
    pub elapsed: Duration,
    /// Baud rate of the links.
    pub baud: u32,
    /// Per probe of every device (highest first): name, elevation in mm, and the running
    /// figures of its latest run.
    pub probes: Vec<(String, f64, crate::shared::probe_summary::ProbeTally)>,
    /// Unit discharges of the stations (streamwise position in mm) from those figures, with
    /// the continuity check against the layout's discharge.
    pub discharges: Vec<(f64, crate::shared::discharge::Discharge)>,
}

impl std::fmt::Display for WatchSummary {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let secs = self.elapsed.as_secs_f64().max(1e-3);
        writeln!(f, "session ended after {secs:.1} s")?;
        for p in &self.report.ports {
            let d = &p.decoder;
            let bps = p.bytes as f64 / secs;
            writeln!(
                f,
                "  {}: {} frames ({:.1} per s), {} bytes ({:.0} B/s = {:.1} % of {} Bd 8N1), lost {}, CRC failures {}, malformed {}, discarded {} B",
                p.name,
                d.frames,
                d.frames as f64 / secs,
                p.bytes,
                bps,
                100.0 * bps * 10.0 / self.baud.max(1) as f64,
                self.baud,
                d.lost,
                d.crc_failures,
                d.malformed + d.oversize,
                d.bytes_discarded
            )?;
        }
        for w in self.report.version_warnings() {
            writeln!(f, "  {w}")?;
        }
        if !self.report.runs.is_empty() {
            writeln!(f, "  runs started: {}", self.report.runs.len())?;
        }
        if !self.report.link_gaps.is_empty() {
            writeln!(f, "  link lost {} time(s)", self.report.link_gaps.len())?;
        }
        if !self.probes.is_empty() {
            writeln!(f, "results of the latest run, per probe:")?;
            let rows: Vec<crate::shared::probe_summary::SummaryRow> = self
                .probes
                .iter()
                .map(
                    |(name, y, tally)| crate::shared::probe_summary::SummaryRow {
                        name,
                        elevation_mm: *y,
                        tally,
                    },
                )
                .collect();
            f.write_str(&crate::shared::probe_summary::summary_table_fitted(
                &rows,
                crate::shared::stdout::terminal_width(),
            ))?;
        }
        for (x, d) in &self.discharges {
            f.write_str(&crate::shared::discharge::summary(*x, d))?;
        }
        writeln!(f, "{} window results; files written:", self.report.windows)?;
        for p in &self.report.files {
            writeln!(f, "  {}", p.display())?;
        }
        if let Some((path, bytes)) = &self.report.archive {
            writeln!(
                f,
                "  {} (archive, {bytes} bytes; decode it again with: frothline unpack {} --out DIR)",
                path.display(),
                path.display()
            )?;
        }
        Ok(())
    }
}
