//! The main-loop side: full blocks -> the core's chain -> records -> the wire link.
//!
//! Board-independent: the boards hand it the queue ends, the chain, a link over their
//! UART and a clock, and call [`Pipeline::step`] from their main loop.

use crate::acquire::{Block, Clock, Filled, HEALTH};
use crate::capture;
use crate::commands::{FwTarget, RunState};
use crate::config::{FwChain, FwRecord, BLOCK_FRAMES, PROBES};
#[cfg(feature = "self-check")]
use crate::digest::Digest;
use crate::link::Link;
use crate::settings::{Settings, SettingsSink};
use core::sync::atomic::Ordering;
use embedded_io::{Read, ReadReady, Write};
use frothline_core::wire::{
    DeviceStatus, FrontArrival, Health, LoggerStatus, ProfileFit, Responder, RunStart, WindowResult,
};
use frothline_core::{Flags, FrontRecord};
use heapless::spsc::{Consumer, Producer};

/// A health frame goes out every this many blocks (and at the end), each followed by a
/// device status (kind 0x0C).
const HEALTH_EVERY_BLOCKS: u32 = 8;

/// A board's measurement of its supply voltage (the device status's `supply_mv`).
pub trait SupplySense {
    /// The latest supply reading, mV (None when there is none yet), and start the next
    /// one. Called once per health period from the main loop.
    fn supply_mv(&mut self) -> Option<u16>;
}

/// A second consumer of the results besides the link (the field logger, see
/// [`crate::field_log`]): it sees every window result, front, profile and health frame.
pub trait ResultTap {
    /// One window result.
    fn window(&mut self, w: WindowResult);
    /// A probe's front arrival.
    fn front(&mut self, f: FrontArrival);
    /// A profile fit.
    fn profile(&mut self, p: ProfileFit);
    /// Health counters.
    fn health(&mut self, h: Health);
    /// The run ended: write out what is pending.
    fn flush(&mut self);
    /// Arm the logger (the run began and the settings ask for it).
    fn arm(&mut self) {}
    /// The logger's state and its log's use, for the device status; None without one.
    fn logger(&self) -> Option<LoggerStatus> {
        None
    }
    /// The device status just sent (after each health frame).
    fn status(&mut self, s: DeviceStatus) {
        let _ = s;
    }
    /// Raw bytes of the log region at `offset` (a host reading the log over the link);
    /// the region's size, or `None` when there is no log to read.
    fn read_region(&mut self, offset: u32, buf: &mut [u8]) -> Option<u32> {
        let _ = (offset, buf);
        None
    }
}

/// Where the main loop's time went, in clock ticks.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Timing {
    /// Inside `Chain::push` (the signal chain proper).
    pub push: u64,
    /// Draining records: wire results, the digest, health, and pumping the link.
    pub records: u64,
    /// Of `records`, the self-check digest (a test build's, not a product's work).
    pub digest: u64,
    /// Asleep, waiting for a block.
    pub idle: u64,
    /// Deliberately wasted per block (overrun test).
    pub stalled: u64,
}

/// The main loop's state; `'t` is the borrow of an optional [`ResultTap`].
pub struct Pipeline<'t, W: 'static, C> {
    chain: &'static mut FwChain,
    full: Consumer<'static, Filled>,
    free: Producer<'static, &'static mut Block>,
    /// The link, in static memory (its streamer holds a frame buffer and a queue of
    /// window results: kept off the main loop's stack).
    link: &'static mut Link<W>,
    clock: C,
    channels: usize,
    /// Extra ticks to stall after every block (0 normally; the overrun test sets it).
    pub stall_ticks: u32,
    /// Time accounting.
    pub timing: Timing,
    tap: Option<&'t mut dyn ResultTap>,
    /// The board's supply measurement, if it has one.
    supply: Option<&'t mut dyn SupplySense>,
    /// Clock ticks since power-up (the clock counts from 0 at power-up; the 32-bit
    /// reading is extended here, read at least once per block), and the last reading.
    uptime_ticks: u64,
    last_tick: u32,
    #[cfg(feature = "self-check")]
    digest: Digest,
    frames_pushed: u64,
    blocks: u32,
    saturated: u64,
    stuck: u64,
    /// The channels of each probe's tips (leading, trailing), for the stuck-tip bits.
    tip_channels: [Option<(u8, Option<u8>)>; PROBES],
    /// Host commands: the core's responder, and the run they act on.
    responder: Responder,
    run: RunState,
    /// The settings the chain runs with, and where they are stored.
    settings: Settings,
    store: Option<&'t mut dyn SettingsSink>,
    /// Settings that could not be stored, chain configurations refused.
    saves: u32,
    save_errors: u32,
    config_errors: u32,
    /// Frames pushed in the current run, and the frame of the run where the current
    /// chain began (added to the frame numbers of its results).
    run_frames: u64,
    chain_base: u64,
}

impl<'t, W: Write + 'static, C: Clock> Pipeline<'t, W, C> {
    /// A pipeline over the given chain, queue ends, link and clock. (Not inlined: built
    /// where the caller keeps it, with no temporary copy in the caller's frame.)
    #[inline(never)]
    pub fn new(
        chain: &'static mut FwChain,
        full: Consumer<'static, Filled>,
        free: Producer<'static, &'static mut Block>,
        link: &'static mut Link<W>,
        clock: C,
    ) -> Self {
        let channels = chain.config().channels as usize;
        let mut tip_channels = [None; PROBES];
        for (slot, p) in tip_channels.iter_mut().zip(chain.config().probes.iter()) {
            *slot = Some((p.leading.channel, p.trailing.map(|t| t.channel)));
        }
        let last_tick = clock.now();
        Pipeline {
            chain,
            full,
            free,
            link,
            clock,
            supply: None,
            uptime_ticks: last_tick as u64,
            last_tick,
            channels,
            stall_ticks: 0,
            timing: Timing::default(),
            tap: None,
            #[cfg(feature = "self-check")]
            digest: Digest::new(),
            frames_pushed: 0,
            blocks: 0,
            saturated: 0,
            stuck: 0,
            tip_channels,
            responder: Responder::new(),
            run: RunState::started(),
            settings: Settings::defaults(crate::config::DEVICE_ID, capture::WINDOW),
            store: None,
            saves: 0,
            save_errors: 0,
            config_errors: 0,
            run_frames: 0,
            chain_base: 0,
        }
    }

    /// Run with `settings` (loaded from the store at power-on) and store changes in
    /// `store`; the chain is configured afresh with them. Call before [`start`](Self::start).
    pub fn set_settings(&mut self, settings: Settings, store: Option<&'t mut dyn SettingsSink>) {
        self.settings = settings;
        self.store = store;
        self.link.set_window(self.applied_window());
        self.rebuild();
    }

    /// The settings in force.
    pub fn settings(&self) -> &Settings {
        &self.settings
    }

    /// True when changed settings are stored.
    pub fn has_store(&self) -> bool {
        self.store.is_some()
    }

    /// Settings records stored since power-on.
    pub fn saves(&self) -> u32 {
        self.saves
    }

    /// Settings stores that failed, and chain configurations refused.
    pub fn errors(&self) -> (u32, u32) {
        (self.save_errors, self.config_errors)
    }

    /// The run state (run number, starts and stops carried out, the UTC clock).
    pub fn run_state(&self) -> &RunState {
        &self.run
    }

    fn applied_window(&self) -> frothline_core::WindowPolicy {
        crate::settings::front_relative(
            self.settings.window,
            self.chain.config().station.is_some(),
            capture::WINDOW,
        )
    }

    /// Configure the chain afresh from the capture's configuration and the settings
    /// (in place: nothing chain-sized on the stack). Falls back to the capture's own
    /// configuration if the chain refuses the settings.
    #[inline(never)]
    fn rebuild(&mut self) {
        let Ok(mut cfg) = capture::chain_config() else {
            self.config_errors = self.config_errors.saturating_add(1);
            return;
        };
        self.settings.apply(&mut cfg);
        if self.chain.configure(cfg).is_err() {
            self.config_errors = self.config_errors.saturating_add(1);
            configure_as_captured(self.chain);
        }
    }

    /// Close the open window: the chain's last results go to the link.
    #[inline(never)]
    fn close_chain(&mut self) {
        for _ in 0..1000 {
            let done = self.chain.finish().is_ok();
            self.drain_records();
            let now = self.sample_clock();
            self.link.pump(now);
            if done {
                break;
            }
        }
    }

    /// What the commands just carried out left to do (between two blocks).
    fn carry_out(&mut self) {
        let p = core::mem::take(&mut self.run.pending);
        if p.close {
            self.close_chain();
        }
        if p.rebuild {
            if p.new_run {
                self.run_frames = 0;
            }
            self.chain_base = self.run_frames;
            self.rebuild();
        }
        if p.levels {
            self.send_levels();
        }
        if p.save {
            // Without a store (a board that has none) the settings hold until power-off.
            match self.store.as_mut().map(|s| s.save(&self.settings)) {
                Some(true) => self.saves = self.saves.saturating_add(1),
                Some(false) => self.save_errors = self.save_errors.saturating_add(1),
                None => {}
            }
        }
    }

    /// Hand every result to `tap` too (the field logger).
    pub fn set_tap(&mut self, tap: &'t mut dyn ResultTap) {
        self.tap = Some(tap);
    }

    /// Report the supply `sense` measures in the device status.
    pub fn set_supply(&mut self, sense: &'t mut dyn SupplySense) {
        self.supply = Some(sense);
    }

    /// Extend the clock's reading into the time since power-up.
    fn tick_uptime(&mut self) {
        let now = self.clock.now();
        self.uptime_ticks = self
            .uptime_ticks
            .saturating_add(now.wrapping_sub(self.last_tick) as u64);
        self.last_tick = now;
    }

    /// The device status now: the supply, the time since power-up, the field logger.
    pub fn status(&mut self) -> DeviceStatus {
        self.tick_uptime();
        DeviceStatus {
            supply_mv: self.supply.as_mut().and_then(|s| s.supply_mv()),
            uptime_ms: self.uptime_ticks.saturating_mul(1_000) / C::HZ as u64,
            logger: self.tap.as_ref().and_then(|t| t.logger()),
        }
    }

    /// Queue a device status, and hand it to the tap (the field logger notes changes of
    /// its state in its log).
    fn send_status(&mut self) {
        let s = self.status();
        self.link.status(s);
        if let Some(t) = self.tap.as_mut() {
            t.status(s);
        }
    }

    /// The clock.
    pub fn clock(&self) -> &C {
        &self.clock
    }

    /// Queue the levels every tip uses now (kind 0x0A). (Not inlined: the body is built on
    /// the stack.)
    #[inline(never)]
    fn send_levels(&mut self) {
        self.link
            .levels(frothline_core::wire::levels_in_use(self.chain));
    }

    /// Send the device description and the levels in use. (Not inlined: the description is
    /// built on the stack, which would otherwise stay reserved below the main loop.)
    #[inline(never)]
    pub fn start(&mut self) {
        self.link.describe();
        self.send_levels();
        // The status at power-on: the field logger, mounted, is idle until the run arms it.
        self.send_status();
        if !self.run.running {
            self.link.pump(0);
            return;
        }
        if self.settings.logger_armed {
            if let Some(t) = self.tap.as_mut() {
                t.arm();
            }
        }
        self.link.run_start(RunStart {
            run: 1,
            label: heapless::String::new(),
            uptime_frames: 0,
            utc_ms: None,
        });
        self.link.pump(0);
    }

    /// Start without a run (an instrument waiting for a host's StartRun). Call before
    /// [`start`](Self::start).
    pub fn idle_at_power_on(&mut self) {
        self.run.running = false;
        self.run.run = 0;
    }

    /// True once a StopRun command was carried out.
    pub fn stopped(&self) -> bool {
        self.run.stops > 0
    }

    /// True while a run is going (blocks outside a run are read and discarded).
    pub fn running(&self) -> bool {
        self.run.running
    }

    /// The run ended by itself (the capture is over): StopRun is `not_running` from here.
    pub fn run_over(&mut self) {
        self.run.running = false;
    }

    /// Send what is queued, letting the clock run on from `now` (after the run).
    pub fn drain_link(&mut self, now: u64) -> u64 {
        self.link.drain(now)
    }

    /// The responder's counters.
    pub fn commands(&self) -> &frothline_core::wire::ResponderStats {
        self.responder.stats()
    }

    /// True when a full block waits.
    pub fn ready(&self) -> bool {
        self.full.ready()
    }

    /// True when the source is exhausted and every block was processed.
    pub fn done(&self) -> bool {
        HEALTH.done.load(Ordering::Acquire) && !self.full.ready()
    }

    /// Process one full block if one waits; false if none did.
    pub fn step(&mut self) -> bool {
        let Some(filled) = self.full.dequeue() else {
            return false;
        };
        let n = (filled.frames as usize).min(BLOCK_FRAMES) * self.channels;
        // Outside a run the block is read and given back unused.
        let n = if self.run.running { n } else { 0 };
        let mut rest = &filled.block[..n];
        while !rest.is_empty() {
            let t0 = self.clock.now();
            let used = self.chain.push(rest);
            let t1 = self.clock.now();
            self.timing.push += t1.wrapping_sub(t0) as u64;
            rest = &rest[used..];
            self.drain_records();
        }
        if n > 0 {
            self.frames_pushed += filled.frames as u64;
            self.run_frames += filled.frames as u64;
        }
        self.blocks += 1;
        if self.stall_ticks > 0 {
            let t0 = self.clock.now();
            while self.clock.now().wrapping_sub(t0) < self.stall_ticks {}
            self.timing.stalled += self.clock.now().wrapping_sub(t0) as u64;
        }
        // Give the block back; cannot fail: the queue holds every block.
        let _ = self.free.enqueue(filled.block);
        let t0 = self.clock.now();
        self.tick_uptime();
        if self.blocks % HEALTH_EVERY_BLOCKS == 0 {
            let h = self.health();
            self.link.health(h);
            if let Some(t) = self.tap.as_mut() {
                t.health(h);
            }
            self.send_status();
        }
        self.link.pump(self.sample_clock());
        self.timing.records += self.clock.now().wrapping_sub(t0) as u64;
        true
    }

    /// Account `ticks` of sleep.
    pub fn idled(&mut self, ticks: u32) {
        self.timing.idle += ticks as u64;
    }

    /// End the run: close the last window, send every record and a last health frame.
    /// A station chain closes several windows here (the frames still in its delay ring):
    /// the link is drained after each batch, the clock running on as a UART would, so the
    /// streamer never has to drop results at the end.
    #[inline(never)]
    pub fn finish(&mut self) {
        while self.step() {}
        let mut now = self.sample_clock();
        loop {
            let done = self.chain.finish().is_ok();
            self.drain_records();
            now = self.link.drain(now);
            if done {
                break;
            }
        }
        let h = self.health();
        self.link.health(h);
        if let Some(t) = self.tap.as_mut() {
            t.health(h);
            t.flush();
        }
        self.send_status();
        self.link.drain(now);
    }

    fn drain_records(&mut self) {
        let t0 = self.clock.now();
        // Each record is handed on where it lies in the chain's queue (no copy of it here).
        let mut sink: RecordSink<'_, '_, W, C> = RecordSink {
            link: &mut *self.link,
            tap: &mut self.tap,
            #[cfg(feature = "self-check")]
            digest: &mut self.digest,
            #[cfg(feature = "self-check")]
            digest_ticks: &mut self.timing.digest,
            #[cfg(feature = "self-check")]
            clock: &self.clock,
            #[cfg(not(feature = "self-check"))]
            clock: core::marker::PhantomData,
            saturated: &mut self.saturated,
            stuck: &mut self.stuck,
            tip_channels: &self.tip_channels,
            offset: self.chain_base,
        };
        // A poll also builds the window's next record in the slot it frees (the chain
        // queues one): that part is the chain's work, timed as `push`, the sink's as
        // `records`.
        let clock = &self.clock;
        let mut sink_ticks = 0u32;
        while self
            .chain
            .poll_lean_with(|rec| {
                let s0 = clock.now();
                sink.record(rec);
                sink_ticks = sink_ticks.wrapping_add(clock.now().wrapping_sub(s0));
            })
            .is_some()
        {}
        let polled_at = clock.now();
        self.timing.push += polled_at.wrapping_sub(t0).wrapping_sub(sink_ticks) as u64;
        // Station chains (the field-logger build): the one station is station 0.
        while let Some(p) = self.chain.poll_profile() {
            let mut fit = p.to_wire(0);
            fit.slice_start = fit.slice_start.saturating_add(self.chain_base);
            self.link.profile(fit);
            if let Some(t) = self.tap.as_mut() {
                t.profile(fit);
            }
        }
        while let Some(f) = self.chain.poll_front() {
            if let FrontRecord::Probe(a) = f {
                let mut arrival = a.to_wire(0);
                arrival.frame = arrival.frame.saturating_add(self.chain_base);
                self.link.front(arrival);
                if let Some(t) = self.tap.as_mut() {
                    t.front(arrival);
                }
            }
        }
        self.timing.records += sink_ticks as u64 + self.clock.now().wrapping_sub(polled_at) as u64;
    }

    /// The sample clock: frames read from the source (pushed or dropped).
    pub fn sample_clock(&self) -> u64 {
        HEALTH.frames_in.load(Ordering::Relaxed) as u64
    }

    /// The health counters as a wire body.
    pub fn health(&self) -> Health {
        let ch = self.channels as u64;
        Health {
            samples_dropped: HEALTH.dropped_frames.load(Ordering::Relaxed) as u64 * ch,
            saturated_samples: self.saturated,
            tips_stuck: self.stuck,
            buffer_high_water: HEALTH.queue_high_water.load(Ordering::Relaxed)
                * (BLOCK_FRAMES * self.channels) as u32,
            windows_dropped: 0,
            frames_dropped: 0,
            uptime_frames: self.sample_clock(),
        }
    }

    /// The digest of the records so far.
    #[cfg(feature = "self-check")]
    pub fn digest(&self) -> Digest {
        self.digest
    }

    /// Frames pushed into the chain.
    pub fn frames_pushed(&self) -> u64 {
        self.frames_pushed
    }

    /// The chain and the clock (after [`finish`](Self::finish)), borrowed: the pipeline
    /// stays where it is (no copy of it for the caller).
    pub fn chain_and_clock(&mut self) -> (&mut FwChain, &C) {
        (&mut *self.chain, &self.clock)
    }

    /// The link.
    pub fn link(&self) -> &Link<W> {
        self.link
    }
}

impl<W: Write + Read + ReadReady + 'static, C: Clock> Pipeline<'_, W, C> {
    /// Answer the host's commands waiting in the port's receiver, at most `max_bytes`
    /// bytes per call (bounded work in the main loop); returns the bytes read. Bytes are
    /// read only while the link has room for an answer and a run start (further commands
    /// wait in the receiver), and the link is pumped after each answer.
    pub fn serve_commands(&mut self, max_bytes: usize) -> usize {
        let mut n = 0;
        while n < max_bytes && self.link.urgent_room() >= 2 {
            let port = self.link.port();
            if !port.read_ready().unwrap_or(false) {
                break;
            }
            let mut b = [0u8; 1];
            if !matches!(port.read(&mut b), Ok(1)) {
                break;
            }
            n += 1;
            let mut target = FwTarget {
                link: &mut *self.link,
                run: &mut self.run,
                settings: &mut self.settings,
                config: self.chain.config(),
                now_frames: HEALTH.frames_in.load(Ordering::Relaxed) as u64,
                rate_hz: capture::SAMPLE_RATE_HZ,
                log: match self.tap.as_mut() {
                    Some(t) => Some(&mut **t),
                    None => None,
                },
            };
            if let Some(reply) = self.responder.feed(b[0], &mut target) {
                self.link.reply(reply);
                self.carry_out();
                let now = self.sample_clock();
                self.link.pump(now);
            }
        }
        n
    }
}

/// Configure `chain` with the capture's own configuration. (Not inlined: its configuration
/// takes stack only when the settings were refused.)
#[inline(never)]
fn configure_as_captured(chain: &mut FwChain) {
    if let Ok(cfg) = capture::chain_config() {
        let _ = chain.configure(cfg);
    }
}

/// Where the main loop sends each record: the parts of the [`Pipeline`] a record updates
/// (borrowed apart from the chain, which lends the record).
struct RecordSink<'a, 't, W, C> {
    link: &'a mut Link<W>,
    tap: &'a mut Option<&'t mut dyn ResultTap>,
    #[cfg(feature = "self-check")]
    digest: &'a mut Digest,
    #[cfg(feature = "self-check")]
    digest_ticks: &'a mut u64,
    #[cfg(feature = "self-check")]
    clock: &'a C,
    #[cfg(not(feature = "self-check"))]
    clock: core::marker::PhantomData<&'a C>,
    saturated: &'a mut u64,
    stuck: &'a mut u64,
    tip_channels: &'a [Option<(u8, Option<u8>)>; PROBES],
    /// The frame of the run where the chain began.
    offset: u64,
}

impl<W: Write, C: Clock> RecordSink<'_, '_, W, C> {
    #[inline(never)]
    fn record(&mut self, rec: &FwRecord) {
        // The host replay keeps its records without the raw correlation sums (they do not
        // go on the wire either): the digest covers the same.
        #[cfg(feature = "self-check")]
        {
            let t0 = self.clock.now();
            self.digest.add(rec);
            *self.digest_ticks += self.clock.now().wrapping_sub(t0) as u64;
        }
        let w = self.link.record(rec, self.offset);
        if let Some(t) = self.tap.as_mut() {
            t.window(w);
        }
        *self.saturated += rec.lead.rail_frames + rec.trail.as_ref().map_or(0, |t| t.rail_frames);
        if let Some(&Some((lead, trail))) = self.tip_channels.get(rec.probe as usize) {
            let stuck = &mut *self.stuck;
            let mut set = |ch: u8, is_stuck: bool| {
                let bit = 1u64 << (ch & 63);
                if is_stuck {
                    *stuck |= bit;
                } else {
                    *stuck &= !bit;
                }
            };
            set(lead, rec.flags.contains(Flags::STUCK));
            if let Some(t) = trail {
                set(t, rec.flags.contains(Flags::TRAILING_STUCK));
            }
        }
    }
}
