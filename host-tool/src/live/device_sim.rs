//! A simulated probe device: the core's chain on a capture in real time, streaming frames
//! over a serial link the way firmware does.
//!
//! ```text
//! wall clock x speed -> sample clock -> push the capture's frames due -> Chain -> records
//!   -> WindowResult::from_probe_window (and its extras, sent as full windows after a
//!      SetExtras) -> Streamer (link byte budget: baud / 10 B/s) -> port
//! port -> the core's command Responder (repeats, already running, unknown kind, version,
//!      malformed) -> StartRun / StopRun / SetWindow / Relearn / DescribeRequest -> Ack/Nack
//! Describe at power-on, after SetWindow and on request; RunStart at every run start;
//! Health every second (cumulative counters), then the device status (kind 0x0C: a
//! simulated supply, the time since power-up, no field logger), then the tip health of
//! every probe's latest window (kind 0x09)
//! ```
//!
//! The chain is built from the same configuration `frothline replay` derives from the layout
//! ([`crate::shared::rig::chain_config`]), so a run over the whole capture gives exactly replay's
//! records (compare after the wire's quantisation).
//!
//! A run plays the capture once from its first frame: [`SimOptions::autostart`] starts one
//! at power-on, `StartRun` starts one when none is going (sample clock at 0, capture from
//! the start; refused with `already_running` during a run), `StopRun` ends it (the open
//! window is closed, flagged partial). At the end of the capture the run ends the same way,
//! and with [`SimOptions::repeat`] a new run starts at once. Every run start sends a
//! RunStart frame (run number, label, device time, the host's UTC from StartRun).
//! `SetWindow` rebuilds the chain at the current position: the open window is closed
//! (partial), and the new chain continues the run's sample clock. `Relearn` rebuilds it at
//! the end of the open window when windows have a fixed length (window times stay on the
//! run's grid, no partial window), else at once; the new chain learns its levels again
//! unless the layout fixes them (the core has no per-probe re-learn yet, so `Relearn`
//! re-learns every probe whatever the mask).
//!
//! A transient layout (`flow.kind = "transient"`) runs one station chain per station, as
//! `frothline replay` does ([`crate::offline::transient::station_configs`], a delay ring each,
//! front-relative windows from [`crate::offline::transient::transient_policy`]); every block goes to
//! every station chain, and after each push the device drains its windows, its profile
//! records (kind 0x04, [`frothline_core::ProfileRecord::to_wire`]) and its probe arrivals
//! (kind 0x03, [`frothline_core::station::ProbeArrival::to_wire`]; probe indices mapped to
//! the layout's), the last two as urgent frames.
//!
//! When processing falls behind the wall clock (a slow machine, a high speed factor) the
//! device does not drop samples: it catches up, and the backlog shows in the health frame's
//! buffer high-water mark.

mod capture;
mod options;
mod status;
#[cfg(test)]
mod tests;

pub use capture::{probe_index, SimCapture, StationConfigs};
pub use options::{SimOptions, SimStats};

use crate::shared::error::HostError;
use crate::shared::rig::FullRecord as ProbeWindow;
use crate::shared::rig::{HostChain, HOST_LAGS, MAX_PROBES};
use crate::shared::stations::{self as transient, StationChain, StationInfo};
use frothline_core::wire::{
    quant, Body, CommandTarget, DeviceDescription, Health, NackReason, ProbeLayout, Reply,
    Responder, RunStart, StartRun, Streamer, StreamerConfig, TrailingTip, WindowResult,
    WindowSetting,
};
use frothline_core::{ChainConfig, Flags, FrontRecord, LevelSource, WindowPolicy};
use std::io::{Read, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Window results the streamer queues (the oldest is dropped when the link cannot keep up).
pub const WINDOW_QUEUE: usize = 256;

/// Urgent frames (fronts, profiles, replies) the streamer queues.
pub const URGENT_QUEUE: usize = 64;

/// The chains of a run: one for a steady layout, one per station for a transient one.
enum Chains {
    Steady(Box<HostChain>),
    Transient(Vec<(StationInfo, Box<StationChain>)>),
}

/// The simulated device (see the module docs). Drive it with [`SimDevice::run`] on a port,
/// or step by step with [`input`](SimDevice::input), [`advance`](SimDevice::advance) and
/// [`output`](SimDevice::output).
pub struct SimDevice {
    cap: SimCapture,
    opts: SimOptions,
    config: ChainConfig<MAX_PROBES>,
    /// The station chains' configurations (transient layouts).
    stations: Option<StationConfigs>,
    chain: Option<Chains>,
    /// Keeps the extras of every queued result (full windows, after a SetExtras).
    streamer: Box<
        Streamer<WINDOW_QUEUE, URGENT_QUEUE, { frothline_core::wire::MAX_PROBES }, WINDOW_QUEUE>,
    >,
    /// The command handler (the one every device uses).
    responder: Responder,
    power_on: Instant,
    /// Runs started since power-on.
    run: u32,
    /// Running: the wall time the run's sample clock started at, and its frame position.
    run_t0: Instant,
    pos: usize,
    /// Sample-clock offset of the current chain within the run.
    offset: u64,
    /// The UTC clock a host set (SetClock): its UTC, ms, at that instant.
    clock: Option<(u64, Instant)>,
    /// A re-learn asked for inside a fixed-length window: the run frame it takes effect at
    /// (the end of that window, so the window grid does not move).
    relearn_at: Option<usize>,
    running: bool,
    last_health: Option<Instant>,
    health: Health,
    stuck_bits: u64,
    stats: SimStats,
}

impl SimDevice {
    /// A device for `cap`; the chain's window policy is the capture's configuration.
    pub fn new(cap: SimCapture, opts: SimOptions, now: Instant) -> Result<Self, HostError> {
        let config = cap.config.clone();
        let stations = cap.stations.clone();
        if stations.is_none() {
            HostChain::new(config.clone()).map_err(|source| HostError::Config {
                file: "<simulated device>".into(),
                source,
            })?;
        }
        let streamer = Box::new(Streamer::new(StreamerConfig::uart_8n1(
            opts.device,
            opts.baud,
            1_000_000,
        )));
        let mut d = SimDevice {
            cap,
            opts,
            config,
            stations,
            chain: None,
            streamer,
            responder: Responder::new(),
            power_on: now,
            run: 0,
            run_t0: now,
            pos: 0,
            offset: 0,
            clock: None,
            relearn_at: None,
            running: false,
            last_health: None,
            health: Health::default(),
            stuck_bits: 0,
            stats: SimStats::default(),
        };
        let desc = d.description();
        d.streamer.offer(Body::Describe(desc));
        d.offer_levels();
        if d.opts.autostart {
            let _ = d.start_run(now, &StartRun::default());
        }
        Ok(d)
    }

    /// The counters.
    pub fn stats(&self) -> SimStats {
        let s = self.streamer.stats();
        let r = self.responder.stats();
        SimStats {
            frames_sent: s.frames_sent,
            bytes_sent: s.bytes_sent,
            windows_sent: s.windows_sent,
            windows_dropped: s.windows_dropped,
            acks: r.acks as u64,
            nacks: r.nacks as u64,
            repeats: r.repeats as u64,
            unreadable: r.unreadable as u64,
            not_from_host: r.not_from_host as u64,
            ..self.stats.clone()
        }
    }

    /// True while a run is going.
    pub fn running(&self) -> bool {
        self.running
    }

    /// True when nothing waits to be sent.
    pub fn idle(&self) -> bool {
        self.streamer.is_idle()
    }

    /// The description the device sends.
    pub fn description(&self) -> DeviceDescription {
        let mut d = DeviceDescription {
            firmware: Default::default(),
            sample_rate_millihz: quant::sample_rate(self.cap.sample_rate as f32),
            channels: self.cap.channels.min(255) as u8,
            window: WindowSetting::from_policy(&self.config.window).unwrap_or(WindowSetting::Whole),
            probes: Default::default(),
        };
        for ch in self.opts.firmware.chars() {
            if d.firmware.push(ch).is_err() {
                break;
            }
        }
        let stations = self.cap.layout.stations();
        for (i, p) in self.cap.layout.probes.iter().enumerate() {
            let station = stations
                .iter()
                .position(|(_, members)| members.contains(&i))
                .unwrap_or(0);
            let layout = ProbeLayout {
                station: station.min(255) as u8,
                leading: p.leading.min(255) as u8,
                trailing: p.trailing.map(|t| TrailingTip {
                    channel: t.min(255) as u8,
                    spacing: quant::spacing(p.tip_spacing_mm.unwrap_or(0.0) as f32),
                }),
                elevation: quant::length(p.elevation_mm as f32),
                x: quant::length(p.x_mm as f32),
            };
            if d.probes.push(layout).is_err() {
                break;
            }
        }
        d
    }

    fn new_chain(&self, config: ChainConfig<MAX_PROBES>) -> Result<Chains, NackReason> {
        let Some(stations) = &self.stations else {
            return HostChain::new(config)
                .map(|c| Chains::Steady(Box::new(c)))
                .map_err(|_| NackReason::BadArgument);
        };
        let mut chains = Vec::with_capacity(stations.len());
        for (info, cfg) in stations {
            let mut cfg = cfg.clone();
            cfg.window = config.window;
            let chain = StationChain::with_delay_ring(cfg).map_err(|_| NackReason::BadArgument)?;
            chains.push((info.clone(), Box::new(chain)));
        }
        Ok(Chains::Transient(chains))
    }

    /// Push `block` (interleaved frames) to the chains, draining them as they go.
    fn push_block(&mut self, chains: &mut Chains, block: &[i16]) {
        match chains {
            Chains::Steady(chain) => {
                let mut rest = block;
                while !rest.is_empty() {
                    let used = chain.push(rest);
                    rest = &rest[used..];
                    self.drain(chain, None);
                }
            }
            Chains::Transient(stations) => {
                for (idx, (info, chain)) in stations.iter_mut().enumerate() {
                    let mut rest = block;
                    while !rest.is_empty() {
                        let used = chain.push(rest);
                        rest = &rest[used..];
                        self.drain(chain, Some((idx, &info.probes)));
                    }
                }
            }
        }
    }

    /// Frames of the sample clock since power-on at `now`.
    fn uptime_frames(&self, now: Instant) -> u64 {
        let fs = self.cap.sample_rate as f64 * self.opts.speed;
        (now.duration_since(self.power_on).as_secs_f64() * fs) as u64
    }

    /// Start a run (none may be going): a fresh chain at frame 0 and its RunStart frame.
    fn start_run(&mut self, now: Instant, cmd: &StartRun) -> Result<(), NackReason> {
        let chain = self.new_chain(self.config.clone())?;
        self.chain = Some(chain);
        self.pos = 0;
        self.offset = 0;
        self.run_t0 = now;
        self.running = true;
        self.stats.runs += 1;
        self.run = self.run.saturating_add(1);
        let run = RunStart {
            run: self.run,
            label: cmd.label.clone(),
            uptime_frames: self.uptime_frames(now),
            // The command's UTC, else the device's clock (SetClock) if it was set.
            utc_ms: cmd.utc_ms.or_else(|| {
                self.clock
                    .map(|(utc, at)| utc + now.saturating_duration_since(at).as_millis() as u64)
            }),
        };
        self.streamer.offer(Body::RunStart(run));
        Ok(())
    }

    /// The levels every tip uses now: the running chain's (learnt or fixed), or outside a
    /// run the configuration's (fixed tips; learning tips have none yet).
    fn levels(&self) -> frothline_core::wire::LevelsInUse {
        use frothline_core::wire::{levels_in_use, levels_of_config};
        match &self.chain {
            Some(Chains::Steady(chain)) => levels_in_use(chain),
            Some(Chains::Transient(stations)) => {
                let mut all = levels_of_config(&self.config);
                for (info, chain) in stations {
                    for (local, p) in levels_in_use(chain).into_iter().enumerate() {
                        if let Some(slot) = info.probes.get(local).and_then(|&g| all.get_mut(g)) {
                            *slot = p;
                        }
                    }
                }
                all
            }
            None => levels_of_config(&self.config),
        }
    }

    /// Queue the levels in use (kind 0x0A; a newer one replaces a queued one).
    fn offer_levels(&mut self) {
        let l = self.levels();
        self.streamer.offer(Body::Levels(l));
    }

    /// Close the current chain: its open window comes out (flagged partial).
    fn close_chain(&mut self) {
        match self.chain.take() {
            None => {}
            Some(Chains::Steady(mut chain)) => {
                while chain.finish().is_err() {
                    self.drain(&mut chain, None);
                }
                self.drain(&mut chain, None);
            }
            Some(Chains::Transient(mut stations)) => {
                for (idx, (info, chain)) in stations.iter_mut().enumerate() {
                    let st = Some((idx, &info.probes[..]));
                    while chain.finish().is_err() {
                        self.drain(chain, st);
                    }
                    self.drain(chain, st);
                }
            }
        }
    }

    fn end_run(&mut self) {
        self.close_chain();
        self.running = false;
        self.relearn_at = None;
    }

    /// Relearn: every probe learns its levels again. With fixed-length windows of a steady
    /// layout the chain is rebuilt at the end of the open window, so window times stay on
    /// the run's grid (start + k x length) and no partial window is cut; otherwise (whole
    /// run, bubble-count windows, front-relative slices, no run going) at once.
    fn relearn(&mut self) -> Result<(), NackReason> {
        // A chain must be buildable from the configuration before the command is acked.
        if self.stations.is_none() {
            HostChain::new(self.config.clone()).map_err(|_| NackReason::BadArgument)?;
        }
        let grid = match self.config.window {
            WindowPolicy::Frames(n) if self.stations.is_none() && self.running => n as u64,
            _ => 0,
        };
        if grid == 0 {
            return self.rebuild(self.config.clone());
        }
        let into = (self.pos as u64).saturating_sub(self.offset);
        let end = self.offset + into.div_ceil(grid) * grid;
        if end <= self.pos as u64 {
            return self.rebuild(self.config.clone());
        }
        self.relearn_at = Some(usize::try_from(end).unwrap_or(usize::MAX));
        Ok(())
    }

    /// For a transient layout, `policy` as `frothline replay` takes it
    /// ([`transient::transient_policy`]: fixed windows count from the front); else itself.
    fn front_relative(&self, policy: WindowPolicy) -> WindowPolicy {
        if self.stations.is_none() {
            return policy;
        }
        match policy {
            WindowPolicy::Whole => WindowPolicy::AfterFront {
                frames: ((transient::DEFAULT_SLICE_S * self.cap.sample_rate as f64).round() as u32)
                    .max(1),
            },
            WindowPolicy::Frames(frames) => WindowPolicy::AfterFront { frames },
            other => other,
        }
    }

    /// SetLevels: fix one tip's levels from the current position on (the chain is rebuilt
    /// there, as for Relearn). A probe or tip the device does not have, equal levels and
    /// levels that contradict the tip's polarity are bad arguments.
    fn set_levels(&mut self, l: frothline_core::wire::SetLevels) -> Result<(), NackReason> {
        let mut cfg = self.config.clone();
        let probe = cfg
            .probes
            .get_mut(l.probe as usize)
            .ok_or(NackReason::BadArgument)?;
        let tip = if l.trailing {
            probe.trailing.as_mut().ok_or(NackReason::BadArgument)?
        } else {
            &mut probe.leading
        };
        let air_high = tip.polarity == frothline_core::Polarity::AirHigh;
        if l.air == l.water || (l.air > l.water) != air_high {
            return Err(NackReason::BadArgument);
        }
        tip.levels = frothline_core::LevelSource::Fixed {
            air: l.air,
            water: l.water,
        };
        self.rebuild(cfg)
    }

    /// The levels source of every tip, (leading, trailing) per probe, as configured now.
    pub fn tip_levels(&self) -> Vec<(LevelSource, Option<LevelSource>)> {
        self.config
            .probes
            .iter()
            .map(|p| (p.leading.levels, p.trailing.map(|t| t.levels)))
            .collect()
    }

    /// Rebuild the chain at the current position with `config` (SetWindow, Relearn).
    fn rebuild(&mut self, config: ChainConfig<MAX_PROBES>) -> Result<(), NackReason> {
        let chain = self.new_chain(config.clone())?;
        self.config = config;
        self.relearn_at = None;
        if self.running {
            self.close_chain();
            self.offset = self.pos as u64;
            self.chain = Some(chain);
        }
        Ok(())
    }

    /// Queue what `chain` has: its window records, and for station `station` (index, and
    /// the layout index of each of its probes) its profiles and probe arrivals (urgent
    /// frames; probe indices mapped to the layout's as `frothline replay` maps them).
    fn drain<const D: usize, const S: usize>(
        &mut self,
        chain: &mut frothline_core::GenericChain<MAX_PROBES, HOST_LAGS, D, S, 1>,
        station: Option<(usize, &[usize])>,
    ) {
        let fs = self.cap.sample_rate;
        let layout_probe = |p: u8| match station {
            Some((_, probes)) => probes.get(p as usize).map_or(p, |&i| i as u8),
            None => p,
        };
        while let Some(mut r) = chain.poll() {
            r.probe = layout_probe(r.probe);
            r.start += self.offset;
            r.end += self.offset;
            self.note_record(&r);
            self.stats.records += 1;
            let spacing = self
                .cap
                .layout
                .probes
                .get(r.probe as usize)
                .and_then(|p| p.tip_spacing_mm);
            self.streamer.offer_full(
                wire_result(&r, fs, spacing),
                frothline_core::wire::WindowExtras::from_probe_window(&r, fs as f32),
            );
            self.streamer.offer_derived(
                frothline_core::wire::DerivedResult::from_probe_window_with_spacing(
                    &r,
                    fs as f32,
                    spacing.map(|mm| mm as f32),
                ),
            );
            // A window cut short (a command, the end of a run) says little of its tips.
            if !r.flags.contains(Flags::PARTIAL_WINDOW) {
                self.streamer
                    .offer_tips(frothline_core::wire::TipReport::from_probe_window(&r));
            }
        }
        let Some((idx, _)) = station else {
            return;
        };
        let idx = idx.min(255) as u8;
        while let Some(mut p) = chain.poll_profile() {
            p.start += self.offset;
            p.end += self.offset;
            self.streamer.offer(Body::Profile(p.to_wire(idx)));
        }
        while let Some(f) = chain.poll_front() {
            if let FrontRecord::Probe(mut p) = f {
                p.probe = layout_probe(p.probe);
                p.arrival += self.offset;
                self.streamer.offer(Body::Front(p.to_wire(idx)));
            }
        }
    }

    fn note_record(&mut self, r: &ProbeWindow) {
        let Some(p) = self.config.probes.get(r.probe as usize) else {
            return;
        };
        let rails = r.lead.rail_frames + r.trail.as_ref().map_or(0, |t| t.rail_frames);
        self.health.saturated_samples = self.health.saturated_samples.saturating_add(rails);
        let bit = |ch: u8| 1u64.checked_shl(ch as u32).unwrap_or(0);
        let lead = bit(p.leading.channel);
        if r.flags.contains(Flags::STUCK) {
            self.stuck_bits |= lead;
        } else {
            self.stuck_bits &= !lead;
        }
        if let Some(t) = &p.trailing {
            let b = bit(t.channel);
            if r.flags.contains(Flags::TRAILING_STUCK) {
                self.stuck_bits |= b;
            } else {
                self.stuck_bits &= !b;
            }
        }
    }

    /// Command bytes from the host: each command frame is answered through the core's
    /// [`Responder`] (an Ack or Nack queued as an urgent frame).
    pub fn input(&mut self, bytes: &[u8], now: Instant) {
        let mut responder = std::mem::take(&mut self.responder);
        for &b in bytes {
            let reply: Option<Reply> = responder.feed(b, &mut SimTarget { dev: self, now });
            if let Some(r) = reply {
                self.streamer.offer(r.body());
            }
        }
        self.responder = responder;
    }

    /// Run the sample clock up to `now`: push the frames due, queue the records, end the run
    /// at the end of the capture, queue health every period.
    pub fn advance(&mut self, now: Instant) {
        if self.running {
            let fs = self.cap.sample_rate as f64;
            let due = (now.duration_since(self.run_t0).as_secs_f64() * fs * self.opts.speed)
                .floor()
                .min(self.cap.frames() as f64) as usize;
            let backlog = due.saturating_sub(self.pos);
            let samples = backlog.saturating_mul(self.cap.channels);
            self.health.buffer_high_water = self
                .health
                .buffer_high_water
                .max(u32::try_from(samples).unwrap_or(u32::MAX));
            // Bounded work per step: at most about a tenth of a second of samples.
            let step = ((fs * self.opts.speed.max(1.0)) as usize / 10).max(1024);
            let mut upto = due.min(self.pos + step);
            if let Some(at) = self.relearn_at {
                upto = upto.min(at);
            }
            if upto > self.pos {
                let ch = self.cap.channels;
                let samples = Arc::clone(&self.cap.samples);
                let block = &samples[self.pos * ch..upto * ch];
                if let Some(mut chains) = self.chain.take() {
                    self.push_block(&mut chains, block);
                    self.chain = Some(chains);
                }
                self.pos = upto;
            }
            if self.relearn_at.is_some_and(|at| self.pos >= at) && self.pos < self.cap.frames() {
                let _ = self.rebuild(self.config.clone());
            }
            if self.pos >= self.cap.frames() {
                self.end_run();
                if self.opts.repeat {
                    let _ = self.start_run(now, &StartRun::default());
                }
            }
        }
        if self
            .last_health
            .is_none_or(|t| now.duration_since(t) >= self.opts.health_every)
        {
            self.last_health = Some(now);
            let mut h = self.health;
            h.tips_stuck = self.stuck_bits;
            h.uptime_frames = self.uptime_frames(now);
            self.streamer.offer(Body::Health(h));
            // The device's own clock runs at the speed of its sample clock.
            let since = now
                .duration_since(self.power_on)
                .mul_f64(self.opts.speed.max(0.0));
            self.streamer
                .offer_status(status::status(self.opts.supply_mv, since));
        }
    }

    /// Bytes for the link at `now`, within the link's byte budget.
    pub fn output(&mut self, now: Instant, out: &mut Vec<u8>) {
        let t = now.duration_since(self.power_on).as_micros() as u64;
        while let Some(b) = self.streamer.poll(t, 4096) {
            out.extend_from_slice(b);
        }
    }

    /// Run on `port` until `stop` is set. The port's reads should time out quickly (a few
    /// milliseconds): they pace the loop. Errors of the port never end the loop.
    pub fn run<P: Read + Write>(mut self, port: &mut P, stop: &AtomicBool) -> SimStats {
        let mut buf = vec![0u8; 1024];
        let mut out = Vec::new();
        while !stop.load(Ordering::Relaxed) {
            match port.read(&mut buf) {
                Ok(n) if n > 0 => self.input(&buf[..n], Instant::now()),
                Ok(_) => {}
                Err(e) => match e.kind() {
                    std::io::ErrorKind::TimedOut
                    | std::io::ErrorKind::WouldBlock
                    | std::io::ErrorKind::Interrupted => {}
                    // No host on the other end (a pty without its peer): wait a little.
                    _ => std::thread::sleep(Duration::from_millis(5)),
                },
            }
            let now = Instant::now();
            self.advance(now);
            out.clear();
            self.output(now, &mut out);
            if !out.is_empty() {
                if let Err(left) = write_all_within(port, &out, Duration::from_millis(500)) {
                    self.stats.bytes_not_written += left as u64;
                }
            }
        }
        // Stopped: the frame on the wire is finished, not cut.
        out.clear();
        if let Some(rest) = self.streamer.rest_of_frame() {
            out.extend_from_slice(rest);
        }
        if !out.is_empty() {
            if let Err(left) = write_all_within(port, &out, Duration::from_millis(500)) {
                self.stats.bytes_not_written += left as u64;
            }
        }
        self.stats()
    }
}

/// The wire form of a record as the device sends it: the core's
/// [`WindowResult::from_probe_window_with_spacing`] (velocity from the tip spacing and the
/// peak lag, peak coefficient and Tu), with the layout's spacing.
pub fn wire_result<const L: usize>(
    rec: &frothline_core::ProbeWindow<L>,
    sample_rate: u32,
    tip_spacing_mm: Option<f64>,
) -> WindowResult {
    WindowResult::from_probe_window_with_spacing(
        rec,
        sample_rate as f32,
        tip_spacing_mm.map(|mm| mm as f32),
    )
}

/// Stack size of a device thread: the chain is built on the stack before it is boxed, and
/// a host chain of 32 probes is large in a debug build.
pub const THREAD_STACK: usize = 64 << 20;

/// Start a simulated device on its own thread, talking on `port` until `stop` is set.
pub fn spawn<P: Read + Write + Send + 'static>(
    cap: SimCapture,
    opts: SimOptions,
    mut port: P,
    stop: Arc<AtomicBool>,
) -> std::io::Result<std::thread::JoinHandle<Result<SimStats, HostError>>> {
    std::thread::Builder::new()
        .name(format!("sim-device-{}", opts.device))
        .stack_size(THREAD_STACK)
        .spawn(move || {
            let device = SimDevice::new(cap, opts, Instant::now())?;
            Ok(device.run(&mut port, &stop))
        })
}

/// Write all of `bytes`, retrying on timeouts for at most `within`; on failure the number of
/// bytes not written.
fn write_all_within<P: Write>(port: &mut P, bytes: &[u8], within: Duration) -> Result<(), usize> {
    let end = Instant::now() + within;
    let mut rest = bytes;
    while !rest.is_empty() {
        match port.write(rest) {
            Ok(0) => return Err(rest.len()),
            Ok(n) => rest = &rest[n..],
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::TimedOut
                        | std::io::ErrorKind::WouldBlock
                        | std::io::ErrorKind::Interrupted
                ) && Instant::now() < end => {}
            Err(_) => return Err(rest.len()),
        }
    }
    Ok(())
}

/// The simulated device as the responder's [`CommandTarget`], at wall time `now`.
struct SimTarget<'a> {
    dev: &'a mut SimDevice,
    now: Instant,
}

impl CommandTarget for SimTarget<'_> {
    fn running(&self) -> bool {
        self.dev.running
    }

    fn start_run(&mut self, cmd: &StartRun) -> Result<(), NackReason> {
        self.dev.start_run(self.now, cmd)
    }

    fn stop_run(&mut self) -> Result<(), NackReason> {
        self.dev.end_run();
        Ok(())
    }

    fn set_window(&mut self, setting: WindowSetting) -> Result<(), NackReason> {
        let d = &mut *self.dev;
        let policy = setting
            .to_policy()
            .map(|p| d.front_relative(p))
            .filter(|p| p.is_valid())
            .ok_or(NackReason::BadArgument)?;
        let mut cfg = d.config.clone();
        cfg.window = policy;
        d.rebuild(cfg)?;
        let desc = d.description();
        d.streamer.offer(Body::Describe(desc));
        d.offer_levels();
        Ok(())
    }

    fn relearn(&mut self, probes: u32) -> Result<(), NackReason> {
        let d = &mut *self.dev;
        let n = d.config.probes.len();
        let all = if n >= 32 { u32::MAX } else { (1u32 << n) - 1 };
        if probes & all == 0 {
            return Err(NackReason::BadArgument);
        }
        // The core has no per-probe re-learn yet: every probe re-learns.
        d.relearn()?;
        d.offer_levels();
        Ok(())
    }

    fn describe(&mut self) -> Result<(), NackReason> {
        let desc = self.dev.description();
        self.dev.streamer.offer(Body::Describe(desc));
        self.dev.offer_levels();
        Ok(())
    }

    fn set_levels(&mut self, levels: &frothline_core::wire::SetLevels) -> Result<(), NackReason> {
        self.dev.set_levels(*levels)?;
        self.dev.offer_levels();
        Ok(())
    }

    fn set_clock(&mut self, utc_ms: u64) -> Result<(), NackReason> {
        self.dev.clock = Some((utc_ms, self.now));
        Ok(())
    }

    fn set_extras(&mut self, on: bool) -> Result<(), NackReason> {
        if self.dev.streamer.set_extras(on) {
            Ok(())
        } else {
            Err(NackReason::UnknownCommand)
        }
    }
}
