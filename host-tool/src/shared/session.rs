//! A receiving session: bytes from one or more links in; frames, events, CSV files and the
//! archive out. `frothline watch` feeds it from serial ports as the bytes arrive and
//! `frothline unpack` from an archive chunk by chunk, so both write the same files from the
//! same bytes.
//!
//! ```text
//! received(port, t, bytes) -> archive (raw, first) -> Decoder of the port -> frames
//!     Describe  -> probe names/elevations, sample rate (held windows are written now)
//!     Windows   -> windows.csv (held until the device's sample rate is known)
//!     FullWindows -> the same, with the columns a window result leaves out filled in
//!     Front     -> fronts.csv          Profile -> profile.csv
//!     RunStart  -> a new run: its number, label and UTC (earlier fronts no longer apply)
//!     DeviceStatus -> status.csv (supply, time since power-up, field logger state)
//!     Health, Ack/Nack, sequence gaps, CRC failures -> events for the live view
//! ```
//!
//! Probe names come from the layout given with `--layout` (by probe index) or are `p0`,
//! `p1`, ...; with several ports they are prefixed by the device id (`d7.p0`) so rows of
//! different devices stay apart. The CSV columns are those of `frothline replay`
//! ([`crate::shared::windows_csv::COLUMNS`]) and DESIGN.md §3 for fronts and profiles.

use crate::shared::archive::ArchiveWriter;
use crate::shared::commands::{CommandLog, HOST_DEVICE_ID};
use crate::shared::error::{write_err, HostError};
use crate::shared::layout::Layout;
use crate::shared::windows_csv::{ProbeMeta, WindowsCsv};
use frothline_core::wire::quant::from_length;
use frothline_core::wire::{
    Body, Decoder, DecoderStats, DeviceDescription, FeedResult, WindowResult, WindowSetting,
};
use std::collections::BTreeMap;
use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};

mod describe;
mod events;
mod link;
mod report;
mod rows;
pub use describe::{describe_event, nack_text, setting_text};
pub use events::{Event, LinkGap, Rejected, RunMark, SeqGap};
pub use report::{PortReport, SessionReport};
pub use rows::{front_columns, profile_columns};

/// Window results held per device while its sample rate is unknown.
const MAX_HELD: usize = 4096;

/// Probe arrivals at one station further apart than this belong to different fronts, s.
const FRONT_EVENT_GAP_S: f64 = 1.0;

/// The rate assumed for [`FRONT_EVENT_GAP_S`] before a device has described itself, Hz.
const DEFAULT_RATE_HZ: f64 = 40_000.0;

/// What a session is set up with.
#[derive(Clone, Debug, Default)]
pub struct SessionOptions {
    /// Port names, in order (the index is the port number in events and the archive).
    pub ports: Vec<String>,
    /// A layout naming the probes (by index); elevations still come from the device.
    pub layout: Option<Layout>,
    /// The layout's text, kept in the archive so that `frothline unpack` names the probes
    /// the same way.
    pub layout_text: Option<String>,
    /// Folder for windows.csv, fronts.csv and profile.csv (`None`: no CSV files).
    pub out_dir: Option<PathBuf>,
}

#[derive(Debug, Default)]
struct DeviceInfo {
    desc: Option<DeviceDescription>,
    sample_rate_hz: Option<f64>,
    meta: Vec<ProbeMeta>,
    /// Latest front arrival frame per station.
    fronts: BTreeMap<u8, u64>,
    held: Vec<(WindowResult, Option<frothline_core::wire::WindowExtras>)>,
}

struct PortState {
    decoder: Box<Decoder>,
    /// Decodes the host's own command frames (to name the replies).
    sent_decoder: Box<Decoder>,
    commands: CommandLog,
    bytes: u64,
    commands_sent: u64,
}

struct Outputs {
    dir: PathBuf,
    windows: WindowsCsv<BufWriter<File>>,
    fronts: Option<csv::Writer<BufWriter<File>>>,
    profile: Option<csv::Writer<BufWriter<File>>>,
    derived: Option<csv::Writer<BufWriter<File>>>,
    dirty: bool,
}

/// A receiving session (see the module docs).
pub struct Session {
    opts: SessionOptions,
    ports: Vec<PortState>,
    devices: BTreeMap<(usize, u16), DeviceInfo>,
    out: Option<Outputs>,
    archive: Option<ArchiveWriter>,
    report: SessionReport,
    /// The run of each device (run columns of the live CSV files).
    runs: crate::shared::runs::RunTracker,
    /// Host time of the bytes being decoded, µs since the Unix epoch.
    now_us: u64,
    /// marks.csv beside the CSV files (created at the first mark).
    marks: Option<crate::shared::marks::MarksCsv>,
    /// tips.csv beside them (created at the first tip-health report).
    tips: Option<crate::shared::tips_csv::TipsCsv>,
    /// status.csv beside them (created at the first device status).
    status: Option<crate::shared::status_csv::StatusCsv>,
}

impl Session {
    /// Open the session's files: the CSV folder (created if missing) with windows.csv; no
    /// archive.
    pub fn new(opts: SessionOptions) -> Result<Session, HostError> {
        Self::with_archive(opts, None)
    }

    /// [`new`](Self::new), appending every byte to `archive` (made by
    /// [`ArchiveWriter::create_in`]).
    pub fn with_archive(
        opts: SessionOptions,
        archive: Option<ArchiveWriter>,
    ) -> Result<Session, HostError> {
        let out = match &opts.out_dir {
            Some(dir) => {
                std::fs::create_dir_all(dir).map_err(write_err(dir))?;
                let path = dir.join("windows.csv");
                let f = File::create(&path).map_err(write_err(&path))?;
                let windows = WindowsCsv::new_live(BufWriter::new(f))
                    .map_err(|e| write_err(&path)(e.into()))?;
                Some(Outputs {
                    dir: dir.clone(),
                    windows,
                    fronts: None,
                    profile: None,
                    derived: None,
                    dirty: true,
                })
            }
            None => None,
        };
        let ports = opts
            .ports
            .iter()
            .map(|_| PortState {
                decoder: Box::new(Decoder::new()),
                sent_decoder: Box::new(Decoder::new()),
                // A new session's commands start where no earlier session's did (the
                // device would take a repeat of the last one for a repeat).
                commands: CommandLog::starting_at(
                    HOST_DEVICE_ID,
                    (crate::shared::archive::now_us() / 1_000) as u16,
                ),
                bytes: 0,
                commands_sent: 0,
            })
            .collect();
        let mut report = SessionReport::default();
        if let Some(o) = &out {
            report.files.push(o.dir.join("windows.csv"));
        }
        let mut archive = archive;
        if let (Some(a), Some(text)) = (archive.as_mut(), &opts.layout_text) {
            let path = a.path().to_path_buf();
            a.layout(crate::shared::archive::now_us(), text)
                .map_err(write_err(path))?;
        }
        let marks = out
            .as_ref()
            .map(|o| crate::shared::marks::MarksCsv::new(&o.dir));
        let tips = out
            .as_ref()
            .map(|o| crate::shared::tips_csv::TipsCsv::new(&o.dir));
        let status = out
            .as_ref()
            .map(|o| crate::shared::status_csv::StatusCsv::new(&o.dir));
        let mut s = Session {
            opts,
            ports,
            devices: BTreeMap::new(),
            marks,
            tips,
            status,
            out,
            archive,
            report,
            runs: crate::shared::runs::RunTracker::new(),
            now_us: 0,
        };
        s.flush()?;
        Ok(s)
    }

    /// Port names.
    pub fn port_names(&self) -> &[String] {
        &self.opts.ports
    }

    /// The decoder counters of a port.
    pub fn decoder_stats(&self, port: usize) -> Option<&DecoderStats> {
        self.ports.get(port).map(|p| p.decoder.stats())
    }

    /// The archive path, if any.
    pub fn archive_path(&self) -> Option<&Path> {
        self.archive.as_ref().map(|a| a.path())
    }

    /// Encode a command for the device on `port` (the next sequence number of that link).
    /// Write the bytes, then pass them to [`sent`](Self::sent).
    pub fn encode_command(
        &mut self,
        port: usize,
        cmd: &crate::shared::commands::Command,
    ) -> Result<(u16, Vec<u8>), String> {
        let p = self
            .ports
            .get_mut(port)
            .ok_or_else(|| format!("no port {port}"))?;
        p.commands.encode(cmd)
    }

    fn archive_do(
        &mut self,
        f: impl FnOnce(&mut ArchiveWriter) -> std::io::Result<()>,
    ) -> Result<(), HostError> {
        if let Some(a) = self.archive.as_mut() {
            let path = a.path().to_path_buf();
            f(a).map_err(write_err(path))?;
        }
        Ok(())
    }

    /// The port was opened at `t_us`.
    pub fn opened(&mut self, port: usize, t_us: u64) -> Result<Vec<Event>, HostError> {
        let name = self.opts.ports.get(port).cloned().unwrap_or_default();
        self.archive_do(|a| a.opened(port as u16, t_us, &name))?;
        Ok(vec![Event::LinkUp { port }])
    }

    /// The port was lost at `t_us`: a gap chunk, and the unfinished frame is dropped.
    pub fn lost(&mut self, port: usize, t_us: u64, reason: &str) -> Result<Vec<Event>, HostError> {
        self.archive_do(|a| a.gap(port as u16, t_us))?;
        if let Some(p) = self.ports.get_mut(port) {
            p.decoder.clear();
        }
        self.report.link_gaps.push(LinkGap {
            port,
            host_time_us: t_us,
            reason: reason.to_string(),
        });
        Ok(vec![Event::LinkDown {
            port,
            reason: reason.to_string(),
        }])
    }

    /// The host wrote `bytes` (command frames) to `port` at `t_us`.
    pub fn sent(&mut self, port: usize, t_us: u64, bytes: &[u8]) -> Result<Vec<Event>, HostError> {
        self.archive_do(|a| a.sent(port as u16, t_us, bytes))?;
        let mut events = Vec::new();
        let Some(p) = self.ports.get_mut(port) else {
            return Ok(events);
        };
        let mut rest = bytes;
        while !rest.is_empty() {
            let r = p.sent_decoder.feed(rest);
            rest = r.remaining();
            if let FeedResult::Frame { frame, .. } = r {
                let kind = frame.body.kind();
                if let Body::StartRun(start) = &frame.body {
                    self.runs
                        .command_sent(port, frame.seq, start.label.as_str());
                }
                p.commands.note_sent(frame.seq, kind);
                p.commands_sent += 1;
                events.push(Event::Sent {
                    port,
                    seq: frame.seq,
                    kind,
                });
            }
        }
        Ok(events)
    }

    /// The current run of `device` on `port` (see [`crate::shared::runs`]).
    pub fn run_tag(&self, port: usize, device: u16) -> crate::shared::runs::RunTag {
        self.runs.tag(port, device)
    }

    /// The CSV name of probe `probe` of `device` on `port`.
    pub fn probe_name(&self, device: u16, probe: usize) -> String {
        let base = self
            .opts
            .layout
            .as_ref()
            .and_then(|l| l.probes.get(probe))
            .map_or_else(|| format!("p{probe}"), |p| p.name.clone());
        if self.opts.ports.len() > 1 {
            format!("d{device}.{base}")
        } else {
            base
        }
    }

    fn station_name(&self, device: u16, station: u8) -> String {
        if self.opts.ports.len() > 1 {
            format!("d{device}.{station}")
        } else {
            station.to_string()
        }
    }

    fn meta(&self, port: usize, device: u16, probe: usize) -> ProbeMeta {
        self.devices
            .get(&(port, device))
            .and_then(|d| d.meta.get(probe).cloned())
            .unwrap_or_else(|| ProbeMeta {
                name: self.probe_name(device, probe),
                elevation_mm: f64::NAN,
                x_mm: f64::NAN,
                levels_from: None,
            })
    }

    fn describe(
        &mut self,
        port: usize,
        device: u16,
        desc: &DeviceDescription,
    ) -> Result<(), HostError> {
        if let Some(l) = &self.opts.layout {
            let (named, sent) = (l.probes.len(), desc.probes.len());
            let line = format!(
                "device {device} describes {sent} probes, the layout names {named}{}",
                if named < sent {
                    format!(": probes {named}..{} are named p{named}..", sent - 1)
                } else {
                    String::new()
                }
            );
            if named != sent && !self.report.layout_mismatches.contains(&line) {
                self.report.layout_mismatches.push(line);
            }
        }
        let meta: Vec<ProbeMeta> = desc
            .probes
            .iter()
            .enumerate()
            .map(|(i, p)| ProbeMeta {
                name: self.probe_name(device, i),
                elevation_mm: from_length(p.elevation) as f64,
                x_mm: from_length(p.x) as f64,
                levels_from: None,
            })
            .collect();
        let fs = desc.sample_rate_millihz as f64 / 1000.0;
        let info = self.devices.entry((port, device)).or_default();
        info.desc = Some(desc.clone());
        info.meta = meta;
        info.sample_rate_hz = (fs > 0.0).then_some(fs);
        if info.sample_rate_hz.is_some() {
            let held = std::mem::take(&mut info.held);
            for (w, x) in held {
                self.write_window(port, device, &w, x.as_ref())?;
            }
        }
        Ok(())
    }

    /// Flush the CSV files (after every batch, so a killed process leaves whole rows).
    pub fn flush(&mut self) -> Result<(), HostError> {
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        if !out.dirty {
            return Ok(());
        }
        out.dirty = false;
        let dir = out.dir.clone();
        out.windows
            .flush()
            .map_err(write_err(dir.join("windows.csv")))?;
        if let Some(w) = out.fronts.as_mut() {
            w.flush().map_err(write_err(dir.join("fronts.csv")))?;
        }
        if let Some(w) = out.profile.as_mut() {
            w.flush().map_err(write_err(dir.join("profile.csv")))?;
        }
        if let Some(w) = out.derived.as_mut() {
            w.flush().map_err(write_err(dir.join("derived.csv")))?;
        }
        Ok(())
    }

    /// A mark made at `t_us` for the device on `port`: a `mark` chunk in the archive (when
    /// the session writes one), then a row of marks.csv (when it writes files). Returns
    /// where the row went. `frothline unpack` calls it for every mark chunk it reads.
    pub fn mark(
        &mut self,
        port: usize,
        t_us: u64,
        mark: &crate::shared::marks::Mark,
    ) -> Result<Option<PathBuf>, HostError> {
        if let Some(a) = self.archive.as_mut() {
            let path = a.path().to_path_buf();
            a.mark(port as u16, t_us, &crate::shared::marks::to_payload(mark))
                .map_err(write_err(path))?;
        }
        let Some(m) = self.marks.as_mut() else {
            return Ok(None);
        };
        let first = m.written == 0;
        m.write(mark)?;
        if first {
            self.report.files.push(m.path().to_path_buf());
        }
        Ok(Some(m.path().to_path_buf()))
    }

    /// Close the session: write held windows (without times), flush the CSV files, sync the
    /// archive, and report.
    pub fn finish(mut self) -> Result<SessionReport, HostError> {
        type Held = Vec<(WindowResult, Option<frothline_core::wire::WindowExtras>)>;
        let held: Vec<(usize, u16, Held)> = self
            .devices
            .iter_mut()
            .map(|(&(p, d), info)| (p, d, std::mem::take(&mut info.held)))
            .collect();
        for (port, device, ws) in held {
            for (w, x) in ws {
                self.write_window(port, device, &w, x.as_ref())?;
            }
        }
        if let Some(o) = self.out.as_mut() {
            o.dirty = true;
        }
        self.flush()?;
        if let Some(a) = self.archive.as_mut() {
            let path = a.path().to_path_buf();
            a.sync().map_err(write_err(&path))?;
            self.report.archive = Some((path, a.len()));
        }
        let mut report = std::mem::take(&mut self.report);
        report.ports = self
            .ports
            .iter()
            .zip(&self.opts.ports)
            .map(|(p, name)| PortReport {
                name: name.clone(),
                bytes: p.bytes,
                decoder: *p.decoder.stats(),
                devices: p.decoder.devices().collect(),
                unfinished_bytes: p.decoder.buffered(),
                commands_sent: p.commands_sent,
            })
            .collect();
        Ok(report)
    }

    /// The window setting a device last described, if any.
    pub fn window_setting(&self, port: usize, device: u16) -> Option<WindowSetting> {
        self.devices
            .get(&(port, device))
            .and_then(|d| d.desc.as_ref())
            .map(|d| d.window)
    }

    /// The sample rate a device on `port` described (the first one found), Hz.
    pub fn sample_rate(&self, port: usize) -> Option<f64> {
        self.devices
            .iter()
            .filter(|((p, _), _)| *p == port)
            .find_map(|(_, d)| d.sample_rate_hz)
    }
}

#[cfg(test)]
mod tests;
