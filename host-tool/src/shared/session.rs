//! A receiving session: bytes from one or more links in; frames, events, CSV files and the
//! archive out. `frothline watch` feeds it from serial ports as the bytes arrive and
//! `frothline unpack` from an archive chunk by chunk, so both write the same files from the
//! same bytes.
//!
//! ```text
//! received(port, t, bytes) -> archive (raw, first) -> Decoder of the port -> frames
//!     Describe  -> probe names/elevations, sample rate (held windows are written now)
//!     Windows   -> windows.csv (held until the device's sample rate is known)
//!     Front     -> fronts.csv          Profile -> profile.csv
//!     RunStart  -> a new run: its number, label and UTC (earlier fronts no longer apply)
//!     Health, Ack/Nack, sequence gaps, CRC failures -> events for the live view
//! ```
//!
//! Probe names come from the layout given with `--layout` (by probe index) or are `p0`,
//! `p1`, ...; with several ports they are prefixed by the device id (`d7.p0`) so rows of
//! different devices stay apart. The CSV columns are those of `frothline replay`
//! ([`crate::shared::windows_csv::COLUMNS`]) and DESIGN.md §3 for fronts and profiles.

use crate::shared::archive::ArchiveWriter;
use crate::shared::commands::{kind_name, CommandLog, HOST_DEVICE_ID};
use crate::shared::error::{write_err, HostError};
use crate::shared::layout::Layout;
use crate::shared::windows_csv::{wire_row, ProbeMeta, WindowsCsv};
use frothline_core::wire::quant::{from_exponent, from_fraction, from_length, from_spacing};
use frothline_core::wire::{
    Body, Decoder, DecoderStats, DeviceDescription, DeviceSeqStats, FeedResult, FrontArrival,
    Header, Health, Kind, NackReason, ProfileFit, RunStart, SeqCheck, WindowResult, WindowSetting,
    PROFILE_ESTIMATES, PROTOCOL_VERSION,
};
use std::collections::BTreeMap;
use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};
/// Columns of a live fronts.csv: the contract of DESIGN.md §3 (the replay's first columns;
/// the wire carries no more).
pub fn front_columns() -> Vec<&'static str> {
    let mut c = crate::shared::transient_columns::FRONT_COLUMNS[..3].to_vec();
    c.extend(crate::shared::runs::RUN_COLUMNS);
    c
}

/// Columns of a live profile.csv: the contract of DESIGN.md §3 (the replay's first ten
/// columns), then `flags`, the estimate the contract columns hold and its standard errors
/// (named as in the replay's profile.csv).
pub fn profile_columns() -> Vec<&'static str> {
    let mut c = crate::shared::transient_columns::PROFILE_COLUMNS[..10].to_vec();
    c.extend([
        "flags",
        "estimate",
        "y90_se_mm",
        "void_fraction_se",
        "exponent_se",
        "equivalent_depth_se_mm",
    ]);
    c.extend(crate::shared::runs::RUN_COLUMNS);
    c
}

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

/// A frame rejected by the decoder.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rejected {
    /// Not a frame: invalid COBS, or too short to hold a header and a CRC.
    Framing,
    /// The CRC did not match.
    Crc,
    /// CRC valid, payload invalid.
    Malformed,
    /// Longer than the largest frame.
    Oversize,
}

/// Something that happened on a link.
#[derive(Clone, Debug, PartialEq)]
#[allow(clippy::large_enum_variant)]
pub enum Event {
    /// The port was opened.
    LinkUp {
        /// Port number.
        port: usize,
    },
    /// The port was lost.
    LinkDown {
        /// Port number.
        port: usize,
        /// What the port said.
        reason: String,
    },
    /// A device description.
    Describe {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The description.
        desc: DeviceDescription,
    },
    /// One probe window result.
    Window {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The result.
        result: WindowResult,
    },
    /// A front arrival.
    Front {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The arrival.
        front: FrontArrival,
    },
    /// A profile fit.
    Profile {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The fit.
        fit: ProfileFit,
    },
    /// A run began on the device.
    RunStart {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Its number, label, device time and host UTC.
        run: RunStart,
    },
    /// Device health counters.
    Health {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The counters.
        health: Health,
    },
    /// Tip health of some probes (their latest windows).
    TipHealth {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// The reports.
        tips: frothline_core::wire::TipHealth,
    },
    /// A reply to a command: `nack` is `None` for an Ack.
    Reply {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Sequence number of the command.
        seq: u16,
        /// The command's kind, if this session sent it.
        command: Option<Kind>,
        /// Why it was refused (Nack).
        nack: Option<NackReason>,
    },
    /// A command frame the host sent.
    Sent {
        /// Port number.
        port: usize,
        /// Its sequence number.
        seq: u16,
        /// Its kind.
        kind: Kind,
    },
    /// Frames missing before this one (sequence gap): lost on the link.
    SeqGap {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Sequence number of the frame after the gap.
        seq: u16,
        /// Frames missing.
        missing: u16,
    },
    /// A repeated frame (same sequence number): ignored.
    Duplicate {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
        /// Its sequence number.
        seq: u16,
    },
    /// The device restarted its numbering.
    Restarted {
        /// Port number.
        port: usize,
        /// Device id.
        device: u16,
    },
    /// A frame the decoder refused.
    Rejected {
        /// Port number.
        port: usize,
        /// Why.
        why: Rejected,
    },
    /// A valid frame of a version or kind this build does not read.
    Unsupported {
        /// Port number.
        port: usize,
        /// Its header.
        header: Header,
    },
    /// A host -> device frame arrived from a link (another host, or an echo): ignored.
    Stray {
        /// Port number.
        port: usize,
        /// Sender id.
        device: u16,
        /// Its kind.
        kind: Kind,
    },
}

/// A sequence gap, for the session report.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SeqGap {
    /// Port number.
    pub port: usize,
    /// Device id.
    pub device: u16,
    /// Sequence number of the frame after the gap.
    pub seq: u16,
    /// Frames missing.
    pub missing: u16,
    /// Host arrival time of the frame after the gap, µs since the Unix epoch.
    pub host_time_us: u64,
}

/// A run start, for the session report.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RunMark {
    /// Port number.
    pub port: usize,
    /// Device id.
    pub device: u16,
    /// The run.
    pub run: RunStart,
    /// Host arrival time of the RunStart frame, µs since the Unix epoch.
    pub host_time_us: u64,
}

/// A link-down moment, for the session report.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LinkGap {
    /// Port number.
    pub port: usize,
    /// When, µs since the Unix epoch.
    pub host_time_us: u64,
    /// Why (empty when read back from an archive).
    pub reason: String,
}

/// What one port carried.
#[derive(Clone, Debug, Default)]
pub struct PortReport {
    /// Port name.
    pub name: String,
    /// Bytes received.
    pub bytes: u64,
    /// Decoder counters.
    pub decoder: DecoderStats,
    /// Sequence tracking of each device seen.
    pub devices: Vec<DeviceSeqStats>,
    /// Bytes of an unfinished frame at the end.
    pub unfinished_bytes: usize,
    /// Command frames sent.
    pub commands_sent: u64,
}

/// The end of a session: counters and the files written.
#[derive(Clone, Debug, Default)]
pub struct SessionReport {
    /// Per port.
    pub ports: Vec<PortReport>,
    /// Every sequence gap.
    pub seq_gaps: Vec<SeqGap>,
    /// Every link-down moment.
    pub link_gaps: Vec<LinkGap>,
    /// Every run start.
    pub runs: Vec<RunMark>,
    /// Window results written to windows.csv.
    pub windows: u64,
    /// Window results written without times (the device never described itself).
    pub windows_without_times: u64,
    /// Front arrivals written.
    pub fronts: u64,
    /// Profile fits written.
    pub profiles: u64,
    /// Files written.
    pub files: Vec<PathBuf>,
    /// The archive, if one was written, and its size.
    pub archive: Option<(PathBuf, u64)>,
    /// Devices whose probe count differs from the `--layout` given (one line each).
    pub layout_mismatches: Vec<String>,
}

impl SessionReport {
    /// One line of what came out: window results (and how many lack times, `why`),
    /// fronts, profiles, and the files written.
    pub fn results_line(&self, why: &str) -> String {
        let mut o = format!("{} window results", self.windows);
        if self.windows_without_times > 0 {
            o += &format!(" ({} without times: {why})", self.windows_without_times);
        }
        if self.fronts > 0 {
            o += &format!(", {} fronts", self.fronts);
        }
        if self.profiles > 0 {
            o += &format!(", {} profiles", self.profiles);
        }
        let files: Vec<String> = self.files.iter().map(|p| p.display().to_string()).collect();
        if !files.is_empty() {
            o += &format!(" -> {}", files.join(", "));
        }
        for m in &self.layout_mismatches {
            o += &format!("\nlayout mismatch: {m}");
        }
        o
    }

    /// Frames accepted, all ports.
    pub fn frames(&self) -> u64 {
        self.ports.iter().map(|p| p.decoder.frames).sum()
    }

    /// Frames lost in sequence gaps, all ports.
    pub fn lost(&self) -> u64 {
        self.ports.iter().map(|p| p.decoder.lost).sum()
    }

    /// CRC failures, all ports.
    pub fn crc_failures(&self) -> u64 {
        self.ports.iter().map(|p| p.decoder.crc_failures).sum()
    }

    /// Lines about frames of another protocol version, one per port that had any: what
    /// they were and what to do.
    pub fn version_warnings(&self) -> Vec<String> {
        self.ports
            .iter()
            .filter(|p| p.decoder.other_version > 0)
            .map(|p| {
                format!(
                    "{}: {} frame(s) of protocol version {} skipped: this build reads version \
                     {PROTOCOL_VERSION} only (update the device's firmware or the host tool so \
                     both speak the same version)",
                    p.name, p.decoder.other_version, p.decoder.last_other_version
                )
            })
            .collect()
    }
}

#[derive(Debug, Default)]
struct DeviceInfo {
    desc: Option<DeviceDescription>,
    sample_rate_hz: Option<f64>,
    meta: Vec<ProbeMeta>,
    /// Latest front arrival frame per station.
    fronts: BTreeMap<u8, u64>,
    held: Vec<WindowResult>,
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
}

fn csv_file(path: &Path, header: &[&str]) -> Result<csv::Writer<BufWriter<File>>, HostError> {
    let f = File::create(path).map_err(write_err(path))?;
    let mut w = csv::Writer::from_writer(BufWriter::new(f));
    w.write_record(header)
        .map_err(|e| write_err(path)(e.into()))?;
    Ok(w)
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
        let mut s = Session {
            opts,
            ports,
            devices: BTreeMap::new(),
            marks,
            tips,
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

    /// Bytes received on `port` at `t_us`: archived first, then decoded.
    pub fn received(
        &mut self,
        port: usize,
        t_us: u64,
        bytes: &[u8],
    ) -> Result<Vec<Event>, HostError> {
        self.archive_do(|a| a.append(port as u16, t_us, bytes))?;
        self.now_us = t_us;
        let mut events = Vec::new();
        let mut frames = Vec::new();
        {
            let Some(p) = self.ports.get_mut(port) else {
                return Ok(events);
            };
            p.bytes += bytes.len() as u64;
            let mut rest = bytes;
            while !rest.is_empty() {
                let r = p.decoder.feed(rest);
                rest = r.remaining();
                match r {
                    FeedResult::Consumed => break,
                    FeedResult::Frame { frame, seq, .. } => frames.push((frame, seq)),
                    FeedResult::Unsupported { header, seq, .. } => {
                        if let SeqCheck::Gap(n) = seq {
                            push_gap(
                                &mut self.report,
                                &mut events,
                                port,
                                header.device,
                                header.seq,
                                n,
                                t_us,
                            );
                        }
                        events.push(Event::Unsupported { port, header });
                    }
                    FeedResult::BadFraming { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Framing,
                    }),
                    FeedResult::CrcFailure { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Crc,
                    }),
                    FeedResult::Malformed { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Malformed,
                    }),
                    FeedResult::Oversize { .. } => events.push(Event::Rejected {
                        port,
                        why: Rejected::Oversize,
                    }),
                }
            }
        }
        for (frame, seq) in frames {
            let device = frame.device;
            match seq {
                SeqCheck::Gap(n) => push_gap(
                    &mut self.report,
                    &mut events,
                    port,
                    device,
                    frame.seq,
                    n,
                    t_us,
                ),
                SeqCheck::Duplicate => {
                    events.push(Event::Duplicate {
                        port,
                        device,
                        seq: frame.seq,
                    });
                    continue;
                }
                SeqCheck::Restarted => events.push(Event::Restarted { port, device }),
                _ => {}
            }
            self.frame(port, device, t_us, frame.body, &mut events)?;
        }
        self.flush()?;
        Ok(events)
    }

    fn frame(
        &mut self,
        port: usize,
        device: u16,
        t_us: u64,
        body: Body,
        events: &mut Vec<Event>,
    ) -> Result<(), HostError> {
        let kind = body.kind();
        if !kind.is_from_device() {
            events.push(Event::Stray { port, device, kind });
            return Ok(());
        }
        match body {
            Body::Describe(desc) => {
                self.describe(port, device, &desc)?;
                events.push(Event::Describe { port, device, desc });
            }
            Body::Windows(ws) => {
                for w in ws {
                    self.window(port, device, w)?;
                    events.push(Event::Window {
                        port,
                        device,
                        result: w,
                    });
                }
            }
            Body::Front(front) => {
                self.front(port, device, &front)?;
                events.push(Event::Front {
                    port,
                    device,
                    front,
                });
            }
            Body::Profile(fit) => {
                self.profile(port, device, &fit)?;
                events.push(Event::Profile { port, device, fit });
            }
            Body::RunStart(run) => {
                // A new run: its frame numbers count from 0 again, earlier fronts no longer
                // apply.
                if let Some(d) = self.devices.get_mut(&(port, device)) {
                    d.fronts.clear();
                }
                self.runs
                    .started(port, device, run.label.as_str().to_string(), t_us);
                self.report.runs.push(RunMark {
                    port,
                    device,
                    run: run.clone(),
                    host_time_us: t_us,
                });
                events.push(Event::RunStart { port, device, run });
            }
            Body::Health(health) => events.push(Event::Health {
                port,
                device,
                health,
            }),
            Body::Derived(ds) => {
                for d in &ds {
                    self.derived(port, device, d)?;
                }
            }
            Body::TipHealth(tips) => {
                self.tip_health(port, device, &tips)?;
                events.push(Event::TipHealth { port, device, tips });
            }
            Body::Ack(a) => self.reply(port, device, a.seq, None, events),
            Body::Nack(n) => self.reply(port, device, n.seq, Some(n.reason), events),
            _ => events.push(Event::Stray { port, device, kind }),
        }
        Ok(())
    }

    fn reply(
        &mut self,
        port: usize,
        device: u16,
        seq: u16,
        nack: Option<NackReason>,
        events: &mut Vec<Event>,
    ) {
        let command = self.ports.get(port).and_then(|p| p.commands.kind_of(seq));
        events.push(Event::Reply {
            port,
            device,
            seq,
            command,
            nack,
        });
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
            for w in held {
                self.write_window(port, device, &w)?;
            }
        }
        Ok(())
    }

    fn window(&mut self, port: usize, device: u16, w: WindowResult) -> Result<(), HostError> {
        let info = self.devices.entry((port, device)).or_default();
        if info.sample_rate_hz.is_none() && info.held.len() < MAX_HELD {
            info.held.push(w);
            return Ok(());
        }
        self.write_window(port, device, &w)
    }

    fn write_window(
        &mut self,
        port: usize,
        device: u16,
        w: &WindowResult,
    ) -> Result<(), HostError> {
        let meta = self.meta(port, device, w.probe as usize);
        let info = self.devices.get(&(port, device));
        let fs = info.and_then(|d| d.sample_rate_hz);
        let since = info.and_then(|d| {
            let station = d.desc.as_ref()?.probes.get(w.probe as usize)?.station;
            let front = *d.fronts.get(&station)?;
            let fs = d.sample_rate_hz?;
            Some((w.start as f64 - front as f64) / fs)
        });
        // The transit time T is not on the wire, but the device sends V and described the
        // tip spacing s: T = s / V (to the resolution of V, 1 mm/s).
        let transit_s = info
            .and_then(|d| d.desc.as_ref()?.probes.get(w.probe as usize)?.trailing)
            .map(|t| frothline_core::wire::quant::from_spacing(t.spacing) as f64 * 1e-3)
            .zip(w.velocity_m_s().map(f64::from))
            .filter(|(s, v)| *s > 0.0 && *v > 0.0)
            .map(|(s, v)| s / v);
        self.report.windows += 1;
        if fs.is_none() {
            self.report.windows_without_times += 1;
        }
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let mut row = wire_row(w, &meta, fs, since);
        if let (Some(t), Some(i)) = (
            transit_s,
            crate::shared::windows_csv::COLUMNS
                .iter()
                .position(|c| *c == "transit_time_s"),
        ) {
            row[i] = (t as f32).to_string();
        }
        row.extend(self.runs.columns(port, device, self.now_us));
        let path = out.dir.join("windows.csv");
        out.windows
            .write_fields(&row)
            .map_err(|e| write_err(path)(e.into()))?;
        out.dirty = true;
        Ok(())
    }

    fn front(&mut self, port: usize, device: u16, f: &FrontArrival) -> Result<(), HostError> {
        let name = self.meta(port, device, f.probe as usize).name;
        let station = self.station_name(device, f.station);
        let info = self.devices.entry((port, device)).or_default();
        let fs = info.sample_rate_hz;
        // The station's front is its earliest probe arrival (the core starts the station's
        // windows there); the probes of one front report within moments of each other, and
        // an arrival more than FRONT_EVENT_GAP_S after the stored one is a new front.
        let gap = (fs.unwrap_or(DEFAULT_RATE_HZ) * FRONT_EVENT_GAP_S) as u64;
        info.fronts
            .entry(f.station)
            .and_modify(|a| {
                if f.frame < *a || f.frame > a.saturating_add(gap) {
                    *a = f.frame;
                }
            })
            .or_insert(f.frame);
        self.report.fronts += 1;
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let path = out.dir.join("fronts.csv");
        if out.fronts.is_none() {
            out.fronts = Some(csv_file(&path, &front_columns())?);
            self.report.files.push(path.clone());
        }
        let arrival = fs.map(|fs| (f.frame as f64 / fs).to_string());
        let [run, label, utc] = self.runs.columns(port, device, self.now_us);
        if let Some(w) = out.fronts.as_mut() {
            w.write_record([name, station, arrival.unwrap_or_default(), run, label, utc])
                .map_err(|e| write_err(&path)(e.into()))?;
        }
        out.dirty = true;
        Ok(())
    }

    fn derived(
        &mut self,
        port: usize,
        device: u16,
        d: &frothline_core::wire::DerivedResult,
    ) -> Result<(), HostError> {
        let name = self.meta(port, device, d.probe as usize).name;
        let fs = self
            .devices
            .get(&(port, device))
            .and_then(|i| i.sample_rate_hz);
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let path = out.dir.join("derived.csv");
        if out.derived.is_none() {
            let cols: Vec<&str> = crate::shared::derived_csv::COLUMNS
                .iter()
                .chain(crate::shared::runs::RUN_COLUMNS.iter())
                .copied()
                .collect();
            out.derived = Some(csv_file(&path, &cols)?);
            self.report.files.push(path.clone());
        }
        let mut row = crate::shared::derived_csv::row(d, &name, fs);
        row.extend(self.runs.columns(port, device, self.now_us));
        if let Some(w) = out.derived.as_mut() {
            w.write_record(row)
                .map_err(|e| write_err(&path)(e.into()))?;
        }
        out.dirty = true;
        Ok(())
    }

    fn tip_health(
        &mut self,
        port: usize,
        device: u16,
        tips: &frothline_core::wire::TipHealth,
    ) -> Result<(), HostError> {
        if self.tips.is_none() {
            return Ok(());
        }
        let fs = self
            .devices
            .get(&(port, device))
            .and_then(|d| d.sample_rate_hz);
        let run = self.runs.columns(port, device, self.now_us);
        let mut rows = Vec::new();
        for r in tips {
            let name = self.meta(port, device, r.probe as usize).name;
            let tips = [
                ("leading", Some(&r.leading)),
                ("trailing", r.trailing.as_ref()),
            ];
            for (which, t) in tips {
                if let Some(t) = t {
                    let mut row = crate::shared::tips_csv::tip_cells(&name, which, r, t, fs);
                    row.extend(run.iter().cloned());
                    rows.push(row);
                }
            }
        }
        if let Some(t) = self.tips.as_mut() {
            if t.write(&rows)? {
                self.report.files.push(t.path().to_path_buf());
            }
        }
        Ok(())
    }

    fn profile(&mut self, port: usize, device: u16, p: &ProfileFit) -> Result<(), HostError> {
        let station = self.station_name(device, p.station);
        let info = self.devices.entry((port, device)).or_default();
        let fs = info.sample_rate_hz;
        let front = info.fronts.get(&p.station).copied();
        self.report.profiles += 1;
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let path = out.dir.join("profile.csv");
        if out.profile.is_none() {
            out.profile = Some(csv_file(&path, &profile_columns())?);
            self.report.files.push(path.clone());
        }
        let secs = |frames: u64| fs.map(|fs| frames as f64 / fs);
        let since = match (front, fs) {
            (Some(f), Some(fs)) => Some((p.slice_start as f64 - f as f64) / fs),
            _ => None,
        };
        let flags: Vec<&str> =
            frothline_core::profile::ProfileFlags(p.flags.min(u16::MAX as u32) as u16)
                .names()
                .collect();
        let row = [
            station,
            opt(secs(p.slice_start)),
            opt(secs(p.slice_start.saturating_add(p.slice_frames as u64))),
            opt(since),
            opt(p.y90.map(|v| v as f32 / 10.0)),
            opt(p.mean_void_fraction.map(from_fraction)),
            opt(p.equivalent_depth.map(|v| v as f32 / 10.0)),
            opt(p.exponent.map(from_exponent)),
            opt(p.fit_rmse.map(from_fraction)),
            p.probes_used.to_string(),
            flags.join("|"),
            PROFILE_ESTIMATES
                .get(p.estimate as usize)
                .filter(|&&e| e != "none")
                .map_or(String::new(), |e| e.to_string()),
            opt(p.y90_se.map(from_spacing)),
            opt(p.mean_void_fraction_se.map(from_fraction)),
            opt(p.exponent_se.map(from_exponent)),
            opt(p.equivalent_depth_se.map(from_spacing)),
        ];
        let row = row
            .into_iter()
            .chain(self.runs.columns(port, device, self.now_us));
        if let Some(w) = out.profile.as_mut() {
            w.write_record(row)
                .map_err(|e| write_err(&path)(e.into()))?;
        }
        out.dirty = true;
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
        let held: Vec<(usize, u16, Vec<WindowResult>)> = self
            .devices
            .iter_mut()
            .map(|(&(p, d), info)| (p, d, std::mem::take(&mut info.held)))
            .collect();
        for (port, device, ws) in held {
            for w in ws {
                self.write_window(port, device, &w)?;
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

fn opt<T: std::fmt::Display>(v: Option<T>) -> String {
    v.map(|v| v.to_string()).unwrap_or_default()
}

fn push_gap(
    report: &mut SessionReport,
    events: &mut Vec<Event>,
    port: usize,
    device: u16,
    seq: u16,
    missing: u16,
    t_us: u64,
) {
    report.seq_gaps.push(SeqGap {
        port,
        device,
        seq,
        missing,
        host_time_us: t_us,
    });
    events.push(Event::SeqGap {
        port,
        device,
        seq,
        missing,
    });
}

/// A history line for an event (`None` for window results, which the live view shows in
/// its own way).
pub fn describe_event(e: &Event, ports: &[String]) -> Option<String> {
    let port = |p: &usize| ports.get(*p).map_or("?", |s| s.as_str()).to_string();
    Some(match e {
        Event::LinkUp { port: p } => format!("{}: link up", port(p)),
        Event::LinkDown { port: p, reason } => {
            format!("{}: link DOWN ({reason}); reopening every second", port(p))
        }
        Event::Describe {
            port: p,
            device,
            desc,
        } => format!(
            "{}: device {device}: {} probes, {} Hz, window {}, {} channels, firmware {}",
            port(p),
            desc.probes.len(),
            desc.sample_rate_millihz as f64 / 1000.0,
            setting_text(&desc.window, desc.sample_rate_millihz as f64 / 1000.0),
            desc.channels,
            desc.firmware.as_str()
        ),
        Event::Window { .. } | Event::Health { .. } | Event::TipHealth { .. } => return None,
        Event::Front {
            port: p,
            device,
            front,
        } => format!(
            "{}: device {device} front at probe {} (station {}), frame {}",
            port(p),
            front.probe,
            front.station,
            front.frame
        ),
        Event::Profile {
            port: p,
            device,
            fit,
        } => format!(
            "{}: device {device} profile of station {} ({} probes)",
            port(p),
            fit.station,
            fit.probes_used
        ),
        Event::Reply {
            port: p,
            device,
            seq,
            command,
            nack,
        } => {
            let what = command.map_or_else(
                || format!("command #{seq}"),
                |k| format!("{} #{seq}", kind_name(k)),
            );
            match nack {
                None => format!("{}: device {device} ACK {what}", port(p)),
                Some(r) => format!(
                    "{}: device {device} NACK {what}: {}",
                    port(p),
                    nack_text(*r)
                ),
            }
        }
        Event::Sent { port: p, seq, kind } => {
            format!("{}: sent {} #{seq}", port(p), kind_name(*kind))
        }
        Event::SeqGap {
            port: p,
            device,
            seq,
            missing,
        } => format!(
            "{}: device {device}: {missing} frame(s) lost before #{seq}",
            port(p)
        ),
        Event::Duplicate {
            port: p,
            device,
            seq,
        } => {
            format!(
                "{}: device {device}: repeated frame #{seq} ignored",
                port(p)
            )
        }
        Event::Restarted { port: p, device } => {
            format!("{}: device {device} restarted its frame numbering", port(p))
        }
        Event::Rejected { port: p, why } => format!(
            "{}: frame rejected ({})",
            port(p),
            match why {
                Rejected::Framing => "not a frame: bad COBS or too short",
                Rejected::Crc => "CRC mismatch",
                Rejected::Malformed => "malformed payload",
                Rejected::Oversize => "too long",
            }
        ),
        Event::Unsupported { port: p, header } if header.version != PROTOCOL_VERSION => format!(
            "{}: device {}: frame of protocol version {} skipped: this build reads version \
             {PROTOCOL_VERSION} only (update the device's firmware or the host tool)",
            port(p),
            header.device,
            header.version
        ),
        Event::Unsupported { port: p, header } => format!(
            "{}: device {}: frame of kind 0x{:02x} not understood (skipped)",
            port(p),
            header.device,
            header.kind
        ),
        Event::RunStart {
            port: p,
            device,
            run,
        } => format!(
            "{}: device {device} run {} started{}{}",
            port(p),
            run.run,
            if run.label.is_empty() {
                String::new()
            } else {
                format!(" `{}`", run.label)
            },
            run.utc_ms.map_or_else(String::new, |ms| format!(
                " at {}",
                crate::shared::archive::utc_iso(ms.saturating_mul(1000))
            ))
        ),
        Event::Stray {
            port: p,
            device,
            kind,
        } => format!(
            "{}: a {} frame from {device} came in on the link (ignored)",
            port(p),
            kind_name(*kind)
        ),
    })
}

/// Words for a Nack reason.
pub fn nack_text(r: NackReason) -> String {
    match r {
        NackReason::UnknownCommand => "unknown command".into(),
        NackReason::BadArgument => "bad argument".into(),
        NackReason::Busy => "busy".into(),
        NackReason::NotRunning => "no run in progress".into(),
        NackReason::AlreadyRunning => "a run is already in progress".into(),
        NackReason::UnsupportedVersion => "protocol version not supported".into(),
        NackReason::Malformed => "malformed command frame".into(),
        other => format!("reason code {}", other.code()),
    }
}

/// Words for a window setting at `fs` Hz.
pub fn setting_text(s: &WindowSetting, fs: f64) -> String {
    match *s {
        WindowSetting::Whole => "whole run".into(),
        WindowSetting::Frames(n) if fs > 0.0 => {
            let secs = n as f64 / fs;
            if secs < 1.0 {
                format!("{:.0} ms", secs * 1e3)
            } else {
                format!("{secs:.2} s")
            }
        }
        WindowSetting::Frames(n) => format!("{n} frames"),
        WindowSetting::Bubbles {
            count,
            probe,
            max_frames,
        } => match max_frames {
            Some(m) => format!("{count} bubbles of probe {probe} (at most {m} frames)"),
            None => format!("{count} bubbles of probe {probe}"),
        },
        WindowSetting::AfterFront { frames } => format!(
            "{} from each front",
            setting_text(&WindowSetting::Frames(frames), fs)
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use frothline_core::wire::{encode, ChordTimes, Frame, ProbeLayout, MAX_FRAME_BYTES};

    fn describe(device: u16) -> Frame {
        let mut d = DeviceDescription {
            firmware: Default::default(),
            sample_rate_millihz: 20_000_000,
            channels: 2,
            window: WindowSetting::Frames(2000),
            probes: Default::default(),
        };
        let _ = d.firmware.push_str("t-1");
        let _ = d.probes.push(ProbeLayout {
            station: 0,
            leading: 0,
            trailing: None,
            elevation: 125,
            x: 0,
        });
        Frame {
            device,
            seq: 0,
            body: Body::Describe(d),
        }
    }

    fn window(i: u64) -> WindowResult {
        WindowResult {
            probe: 0,
            start: i * 2000,
            frames: 2000,
            void_fraction: 1234,
            bubble_rate: 4567,
            bubbles: 9,
            chords: Some(ChordTimes {
                mean: 1500,
                median: 1200,
                p10: 300,
                p90: 3000,
            }),
            correlation: None,
            flags: 0,
        }
    }

    fn enc(f: &Frame) -> Vec<u8> {
        let mut buf = [0u8; MAX_FRAME_BYTES];
        encode(f, &mut buf).unwrap().to_vec()
    }

    /// Frames of protocol version 1 are skipped and said so, once, with what to do.
    #[test]
    fn version_1_frames_are_refused_with_a_clear_message() {
        let mut s = Session::new(SessionOptions {
            ports: vec!["old".into()],
            ..Default::default()
        })
        .unwrap();
        // The version-1 Ack of the version-1 spec, three times (seq 305 each: repeats).
        let v1 = [
            0x0b, 0x01, 0x07, 0x30, 0xb1, 0x02, 0x29, 0x7e, 0x38, 0x8d, 0x8c, 0x00,
        ];
        let events = s.received(0, 1, &v1.repeat(3)).unwrap();
        let lines: Vec<String> = events
            .iter()
            .filter_map(|e| describe_event(e, &["old".to_string()]))
            .collect();
        assert!(
            lines[0].contains("protocol version 1 skipped: this build reads version 2"),
            "{lines:?}"
        );
        let r = s.finish().unwrap();
        let w = r.version_warnings();
        assert_eq!(w.len(), 1);
        assert!(w[0].contains("3 frame(s) of protocol version 1"), "{w:?}");
    }

    /// A layout naming fewer probes than the device describes: the summary says so, and
    /// which probes fall back to p-names.
    #[test]
    fn a_layout_with_fewer_probes_than_the_device_is_reported() {
        let layout = Layout::parse(
            "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"A\"\nelevation_mm = 1.0\nleading = 0\n",
            std::path::Path::new("one.toml"),
        )
        .unwrap();
        let mut s = Session::new(SessionOptions {
            ports: vec!["test".into()],
            layout: Some(layout),
            ..Default::default()
        })
        .unwrap();
        let mut f = describe(3);
        if let Body::Describe(d) = &mut f.body {
            for leading in 1..4 {
                let _ = d.probes.push(ProbeLayout {
                    station: 0,
                    leading,
                    trailing: None,
                    elevation: 125,
                    x: 0,
                });
            }
        }
        s.received(0, 1, &enc(&f)).unwrap();
        s.received(0, 2, &enc(&f)).unwrap();
        let r = s.finish().unwrap();
        assert_eq!(r.layout_mismatches.len(), 1, "{:?}", r.layout_mismatches);
        let line = r.results_line("-");
        assert!(
            line.contains("device 3 describes 4 probes, the layout names 1")
                && line.contains("p1.."),
            "{line}"
        );
    }

    /// A stream of frames with faults at the host: some frames dropped whole, some
    /// corrupted (a byte flipped), garbage inserted, one duplicated. No corrupted frame may
    /// be accepted, the lost count must equal the dropped plus corrupted frames (their
    /// sequence numbers are missing), and every frame after a fault must be read.
    #[test]
    fn faults_between_device_and_host() {
        let dir = tempfile::tempdir().unwrap();
        let archive = ArchiveWriter::create_in(dir.path(), 1).unwrap();
        let mut s = Session::with_archive(
            SessionOptions {
                ports: vec!["test".into()],
                out_dir: Some(dir.path().to_path_buf()),
                ..Default::default()
            },
            Some(archive),
        )
        .unwrap();
        let mut stream = enc(&describe(3));
        let mut sent = Vec::new();
        let mut dropped = 0u64;
        let mut corrupted = 0u64;
        for i in 1..=300u64 {
            let f = Frame {
                device: 3,
                seq: i as u16,
                body: Body::window(window(i)),
            };
            let mut bytes = enc(&f);
            match i % 17 {
                5 => {
                    dropped += 1;
                    continue;
                }
                9 => {
                    corrupted += 1;
                    let k = bytes.len() / 2;
                    bytes[k] ^= 0x10;
                    if bytes[k] == 0 {
                        bytes[k] = 0x77;
                    }
                    stream.extend_from_slice(&bytes);
                    continue;
                }
                // Garbage ended by a delimiter: rejected on its own, costs no frame.
                12 => stream.extend_from_slice(&[0x13, 0x37, 0x00, 0xAA, 0x00]),
                // Sent twice: the repeat is ignored.
                14 => stream.extend_from_slice(&bytes),
                _ => {}
            }
            stream.extend_from_slice(&bytes);
            sent.push(window(i));
        }
        let mut got = Vec::new();
        for chunk in stream.chunks(37) {
            for e in s.received(0, 1, chunk).unwrap() {
                if let Event::Window { result, .. } = e {
                    got.push(result);
                }
            }
        }
        let r = s.finish().unwrap();
        assert_eq!(got, sent, "only intact frames, each once");
        assert_eq!(r.lost(), dropped + corrupted);
        assert_eq!(r.ports[0].decoder.duplicates, 300 / 17);
        let d = r.ports[0].decoder;
        assert_eq!(
            d.crc_failures + d.malformed + d.bad_framing,
            corrupted + 2 * (300 / 17)
        );
        let csv = std::fs::read_to_string(dir.path().join("windows.csv")).unwrap();
        assert_eq!(csv.lines().count(), 1 + sent.len());
        let first: Vec<&str> = csv.lines().nth(1).unwrap().split(',').collect();
        assert_eq!(
            &first[..7],
            &["p0", "0.1", "0.2", "", "0.1234", "45.67", "0.0015"]
        );
        assert_eq!(first[12], "12.5");
    }

    /// The probes of one front arrive one after the other; times since the front count
    /// from the first of them (where the core starts the station's windows), and an
    /// arrival long after is a new front (common practice, no source).
    #[test]
    fn times_since_the_front_count_from_the_earliest_probe_of_each_front() {
        let dir = tempfile::tempdir().unwrap();
        let mut s = Session::new(SessionOptions {
            ports: vec!["a".into()],
            out_dir: Some(dir.path().to_path_buf()),
            ..Default::default()
        })
        .unwrap();
        let mut seq = 0u16;
        let mut send = |s: &mut Session, body: Body| {
            seq += 1;
            let f = Frame {
                device: 4,
                seq,
                body,
            };
            s.received(0, 0, &enc(&f)).unwrap();
        };
        send(&mut s, describe(4).body);
        let front = |probe: u8, frame: u64| {
            Body::Front(FrontArrival {
                probe,
                station: 0,
                frame,
            })
        };
        let at = |start: u64| {
            let mut w = window(0);
            w.start = start;
            Body::window(w)
        };
        // First front: probe 0 at frame 1000, probe 1 at 1300 (20 kHz).
        send(&mut s, front(0, 1000));
        send(&mut s, front(1, 1300));
        send(&mut s, at(1000));
        send(&mut s, at(3000));
        // A second front 5 s later.
        send(&mut s, front(0, 101_000));
        send(&mut s, at(101_000));
        s.finish().unwrap();
        let csv = std::fs::read_to_string(dir.path().join("windows.csv")).unwrap();
        let since: Vec<&str> = csv
            .lines()
            .skip(1)
            .map(|l| l.split(',').nth(3).unwrap())
            .collect();
        assert_eq!(since, ["0", "0.1", "0"]);
    }

    #[test]
    fn windows_before_the_description_are_held_then_written_with_times() {
        let dir = tempfile::tempdir().unwrap();
        let mut s = Session::new(SessionOptions {
            ports: vec!["a".into(), "b".into()],
            out_dir: Some(dir.path().to_path_buf()),
            ..Default::default()
        })
        .unwrap();
        let w = Frame {
            device: 9,
            seq: 5,
            body: Body::window(window(2)),
        };
        s.received(1, 0, &enc(&w)).unwrap();
        let mut d = describe(9);
        d.seq = 6;
        s.received(1, 0, &enc(&d)).unwrap();
        let r = s.finish().unwrap();
        assert_eq!(r.windows_without_times, 0);
        let csv = std::fs::read_to_string(dir.path().join("windows.csv")).unwrap();
        let row: Vec<&str> = csv.lines().nth(1).unwrap().split(',').collect();
        assert_eq!(&row[..3], &["d9.p0", "0.2", "0.3"]);
    }
}
