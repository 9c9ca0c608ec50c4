//! The emulated board: QEMU's mps2-an386 (Cortex-M4F, 25 MHz, CMSDK UART0 and TIMER0).
//!
//! Modes, chosen by the semihosting command line (`qemu ... -append MODE`):
//! - `run` (default): replay the embedded capture at the sample rate (SysTick, 32 frames
//!   per tick as the board's DMA hands them over), one block filled by the interrupt while
//!   the main loop processes the other; results out of UART0 as wire frames. Passes when the records equal those of
//!   a host replay (count and digest, see `capture/config.rs`) and nothing was dropped.
//! - `adc`: the same, read through the SPI ADC driver ([`crate::adc::Adc`]) from a
//!   simulated device serving the capture, one frame per tick; passes on the same
//!   condition.
//! - `overrun`: `run` with a main loop that stalls after every block for longer than a
//!   block lasts; passes when the acquisition counted dropped samples and the last health
//!   frame reports them.
//! - `measure`: no pacing and no interrupt: the acquisition is called from the main loop
//!   with whole blocks, so the chain's share can be timed alone (see
//!   scripts/firmware-measure.sh). Passes on the same condition as `run`.
//!
//! - `commands`: `run`, reading host commands from UART0's receiver and answering them
//!   through the core's responder ([`crate::commands`]) until a StopRun ends the run; then
//!   it goes on answering until the receiver has been quiet for 20 ms. Passes when a
//!   StopRun ended the run and the link dropped nothing; `scripts/firmware-test.sh` feeds
//!   the commands from a file and checks every answer on the host
//!   (`frothline-capture-gen commands-in` / `verify-commands`).
//! - `boot`: `run` after a reboot that must find stored settings (the settings store,
//!   [`crate::settings`], kept in a host file between QEMU runs: see `stored`): the chain
//!   runs with them, so its records differ from the host replay's. Passes when stored
//!   settings were loaded and the link dropped nothing; `scripts/firmware-test.sh` checks
//!   the settings reported and the UART frames (`frothline-capture-gen verify-boot`).
//! - Every mode loads its settings from the store at power-on (a factory-fresh store, the
//!   capture's defaults, unless the runner keeps one), and answers host commands the
//!   same way while it runs (none arrive in the other checks).
//!
//! - `logger` (field-logger build only, `--features field-logger`: the surge capture and a
//!   station chain): `run`, and every result also goes to the field logger
//!   ([`crate::field_log`]): armed when the run begins, a pre-trigger ring before the front, the
//!   front and what follows into a power-loss-safe log on a NOR flash stand-in
//!   ([`crate::ram_nor`]). At the end the log is mounted afresh (as after a power cycle)
//!   and its records counted, and the region's image goes out of UART1 (QEMU's second
//!   `-serial`) for `frothline logbook`. Passes as `run` does, and when a front triggered
//!   the capture, nothing was dropped and the fresh mount finds every logged record.
//!
//! - `erase` (field-logger build): `logger` on a flash whose erases stall the main loop as
//!   a real part's do ([`crate::stall_nor`]) and that was never erased, so the log must
//!   erase before it writes: the room of a capture is erased ahead at arm time, before the
//!   acquisition starts. Passes as `logger` does, and when no sample was dropped (none
//!   inside the capture) and the capture erased nothing.
//! - `erase-inside` (field-logger build): the control of `erase`: no erase ahead, the log
//!   erases when it needs a page, inside the capture. Passes when that erase cost samples,
//!   counted by the acquisition and reported in the last health frame, inside the capture.
//!
//! - `field` (field-logger build): `logger`, then the board stays up answering commands
//!   until QEMU is stopped, so a host reads the log over the link with ReadLog
//!   (`frothline logbook --port`), as from a board left powered after a deployment.
//!
//! Every mode ends with `key=value` summary lines on the semihosting console and exits
//! QEMU with status 0 (pass) or 1 (fail).

use crate::acquire::{Acquisition, Block, Clock, Filled, HEALTH};
use crate::adc::{Adc, AdcConfig};
use crate::cmsdk_timer::{CmsdkTimer, TimerReader, PCLK_HZ};
use crate::cmsdk_uart::CmsdkUart;
use crate::config::{FwChain, BLOCKS, BLOCK_FRAMES, BLOCK_SAMPLES};
use crate::link::Link;
use crate::pipeline::Pipeline;
use crate::replay::ReplaySource;
use crate::sim_adc::{self, SimAdc, SimDrdy};
use crate::source::SampleSource;
use crate::{capture, sys};
use core::cell::RefCell;
use core::sync::atomic::Ordering;
use cortex_m::peripheral::syst::SystClkSource;
use cortex_m_rt::{entry, exception};
use cortex_m_semihosting::debug;
use critical_section::Mutex;
use heapless::spsc::Queue;
use static_cell::{ConstStaticCell, StaticCell};

#[cfg(feature = "defmt-semihosting")]
use defmt_semihosting as _;

/// Print a summary line on the semihosting console (defmt-encoded with the
/// `defmt-semihosting` feature).
macro_rules! report {
    ($($t:tt)*) => {{
        #[cfg(not(feature = "defmt-semihosting"))]
        cortex_m_semihosting::hprintln!($($t)*);
        #[cfg(feature = "defmt-semihosting")]
        defmt::println!($($t)*);
    }};
}

mod measure;
use measure::{measure_learning, measure_profile_fit, measure_streaming, Variant};
/// The field log of the field-logger modes (a NOR flash stand-in in RAM) and its checks.
#[cfg(feature = "field-logger")]
mod logger;
/// The settings store of the emulated board (a file-backed NOR flash).
mod stored;

/// What the run does.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
enum Mode {
    Run,
    Adc,
    Overrun,
    Measure,
    Logger,
    Commands,
    Boot,
    Instrument,
    Field,
    Erase,
    EraseInside,
}

impl Mode {
    /// The last word of the command line; a lone word that is no mode is the program name
    /// QEMU passes when no argument was given (`cargo run`): mode `run`.
    fn parse(s: &str) -> Option<Mode> {
        let words = s.split_whitespace().count();
        match s.split_whitespace().last() {
            None => Some(Mode::Run),
            Some("run") => Some(Mode::Run),
            Some("adc") => Some(Mode::Adc),
            Some("overrun") => Some(Mode::Overrun),
            Some("measure") => Some(Mode::Measure),
            Some("logger") => Some(Mode::Logger),
            Some("commands") => Some(Mode::Commands),
            Some("boot") => Some(Mode::Boot),
            Some("instrument") => Some(Mode::Instrument),
            Some("field") => Some(Mode::Field),
            Some("erase") => Some(Mode::Erase),
            Some("erase-inside") => Some(Mode::EraseInside),
            Some(_) if words == 1 => Some(Mode::Run),
            Some(_) => None,
        }
    }

    fn name(self) -> &'static str {
        match self {
            Mode::Run => "run",
            Mode::Adc => "adc",
            Mode::Overrun => "overrun",
            Mode::Measure => "measure",
            Mode::Logger => "logger",
            Mode::Commands => "commands",
            Mode::Boot => "boot",
            Mode::Instrument => "instrument",
            Mode::Field => "field",
            Mode::Erase => "erase",
            Mode::EraseInside => "erase-inside",
        }
    }
}

/// The two sources the emulated board can read.
enum Source {
    Replay(ReplaySource),
    Adc(Adc<SimAdc, SimDrdy>),
}

/// An error of either source (the replay cannot fail).
#[derive(Debug)]
struct SourceError;

impl SampleSource for Source {
    type Error = SourceError;

    fn channels(&self) -> usize {
        match self {
            Source::Replay(r) => r.channels(),
            Source::Adc(a) => a.channels(),
        }
    }

    fn fill(&mut self, block: &mut [i16]) -> Result<usize, SourceError> {
        match self {
            Source::Replay(r) => r.fill(block).map_err(|_| SourceError),
            Source::Adc(a) => {
                // The conversion-start pulse a hardware timer gives on a real board.
                sim_adc::start_conversion();
                a.fill(block).map_err(|_| SourceError)
            }
        }
    }

    fn exhausted(&self) -> bool {
        match self {
            Source::Replay(r) => r.exhausted(),
            Source::Adc(_) => sim_adc::finished(),
        }
    }
}

type PacedAcquisition = Acquisition<Source, TimerReader>;

/// The acquisition, from `main` to the SysTick handler (taken once, in a critical section).
/// (The acquisition itself lives in a static of its own: see [`acquisition`].)
static HANDOFF: Mutex<RefCell<Option<&'static mut PacedAcquisition>>> =
    Mutex::new(RefCell::new(None));

#[exception]
fn SysTick() {
    static mut ACQ: Option<&'static mut PacedAcquisition> = None;
    if ACQ.is_none() {
        *ACQ = critical_section::with(|cs| HANDOFF.borrow_ref_mut(cs).take());
    }
    if let Some(a) = ACQ.as_mut() {
        a.tick();
    }
}

static BLOCK_BUFFERS: ConstStaticCell<[Block; BLOCKS]> =
    ConstStaticCell::new([[0; BLOCK_SAMPLES]; BLOCKS]);
static FULL: ConstStaticCell<Queue<Filled, { BLOCKS + 1 }>> = ConstStaticCell::new(Queue::new());
static FREE: ConstStaticCell<Queue<&'static mut Block, { BLOCKS + 1 }>> =
    ConstStaticCell::new(Queue::new());

#[entry]
fn main() -> ! {
    sys::paint_stack();
    let mut buf = [0u8; 64];
    let arg = sys::semihosting_cmdline(&mut buf).unwrap_or("");
    let pass = match Mode::parse(arg) {
        Some(mode) => run(mode),
        None => {
            report!(
                "fw.error unknown mode `{}`: run | adc | overrun | measure | logger | commands | boot | instrument | field | erase | erase-inside",
                arg
            );
            false
        }
    };
    loop {
        debug::exit(if pass {
            debug::EXIT_SUCCESS
        } else {
            debug::EXIT_FAILURE
        });
    }
}

#[inline(never)]
fn run(mode: Mode) -> bool {
    let (Some(timer), Some(uart)) = (
        sys::take(sys::Device::Timer0),
        sys::take(sys::Device::Uart0),
    ) else {
        return false;
    };
    let clock = CmsdkTimer::free_running(timer);
    let uart = CmsdkUart::new(uart, PCLK_HZ, crate::config::BAUD);
    let chain: &'static mut FwChain = match crate::make_chain() {
        Ok(c) => c,
        Err(e) => {
            report!("fw.error chain configuration: {}", e);
            return false;
        }
    };
    // The chain is configured in place in its static (`Chain::configure`): the start-up
    // depth is small; note it, then repaint to see the steady state.
    let stack_init = sys::stack_high_water();
    sys::paint_stack();
    let (full_tx, full_rx) = FULL.take().split();
    let (mut free_tx, free_rx) = FREE.take().split();
    for b in BLOCK_BUFFERS.take().iter_mut() {
        let _ = free_tx.enqueue(b);
    }
    let Some(acq) = acquisition(mode, clock.reader(), full_tx, free_rx) else {
        return false;
    };
    // The link lives in a static, built apart (not on this function's stack).
    static LINK: StaticCell<Link<CmsdkUart>> = StaticCell::new();
    let Some(link) = crate::link::link_in(&LINK, uart, capture::SAMPLE_RATE_HZ) else {
        return false;
    };
    #[cfg(feature = "field-logger")]
    let mut log = match mode {
        Mode::Logger | Mode::Field | Mode::Erase | Mode::EraseInside => match logger::mount(
            mode == Mode::Erase || mode == Mode::EraseInside,
            mode == Mode::EraseInside,
            clock.reader(),
        ) {
            Some(l) => Some(l),
            None => {
                report!("fw.error the field log did not mount");
                return false;
            }
        },
        _ => None,
    };
    #[cfg(not(feature = "field-logger"))]
    if matches!(
        mode,
        Mode::Logger | Mode::Field | Mode::Erase | Mode::EraseInside
    ) {
        report!("fw.error mode `logger` needs the field-logger build (--features field-logger)");
        return false;
    }
    let mut pipe = Pipeline::new(chain, full_rx, free_tx, link, clock);
    #[cfg(feature = "field-logger")]
    if let Some(l) = log.as_mut() {
        pipe.set_tap(l);
    }
    let loaded = stored::load(&mut pipe);
    if mode == Mode::Instrument {
        pipe.idle_at_power_on();
    }
    pipe.start();
    let block_ticks =
        (PCLK_HZ as u64 * BLOCK_FRAMES as u64 / capture::SAMPLE_RATE_HZ as u64) as u32;
    if mode == Mode::Overrun {
        pipe.stall_ticks = block_ticks * 3 / 2;
    }

    let t_start = pipe.clock().now();
    if mode == Mode::Measure {
        while !pipe.done() && !pipe.stopped() {
            acq.tick();
            while pipe.step() {}
            pipe.serve_commands(COMMAND_BYTES_PER_LOOP);
        }
    } else {
        critical_section::with(|cs| HANDOFF.borrow_ref_mut(cs).replace(acq));
        let Some(cp) = cortex_m::Peripherals::take() else {
            return false;
        };
        let mut syst = cp.SYST;
        syst.set_clock_source(SystClkSource::Core);
        let tick = PCLK_HZ as u64 * frames_per_tick(mode) as u64 / capture::SAMPLE_RATE_HZ as u64;
        syst.set_reload(tick as u32 - 1);
        syst.clear_current();
        syst.enable_interrupt();
        syst.enable_counter();
        let mut seen = (pipe.run_state().run, pipe.saves());
        while !pipe.done() {
            if pipe.serve_commands(COMMAND_BYTES_PER_LOOP) > 0 && mode == Mode::Instrument {
                seen = instrument_news(&pipe, seen);
            }
            if pipe.step() {
                continue;
            }
            let t0 = pipe.clock().now();
            // Sleep unless a block arrived since the check: WFI wakes on the pending
            // interrupt even with interrupts masked, which closes the race.
            cortex_m::interrupt::free(|_| {
                if !pipe.ready() && !pipe.done() {
                    cortex_m::asm::wfi();
                }
            });
            let t1 = pipe.clock().now();
            pipe.idled(t1.wrapping_sub(t0));
        }
        syst.disable_interrupt();
        syst.disable_counter();
    }
    if pipe.running() {
        pipe.run_over();
    }
    pipe.finish();
    if mode == Mode::Commands {
        answer_until_quiet(&mut pipe);
    }
    if mode == Mode::Field {
        report!(
            "fw.field the run is over: the log is read over the link (ReadLog) until power-off"
        );
        answer_for_ever(&mut pipe);
    }
    let total = pipe.clock().now().wrapping_sub(t_start) as u64;
    let stack_run = sys::stack_high_water();
    let pass = end_of_run(mode, &mut pipe, total, stack_init, stack_run);
    let pass = pass && (mode != Mode::Boot || matches!(loaded, crate::settings::Loaded::Stored(_)));
    #[cfg(feature = "field-logger")]
    let pass = match log {
        Some(l) => logger::finish(l, mode == Mode::Erase, mode == Mode::EraseInside) && pass,
        None => pass,
    };
    report!("fw.verdict {}", if pass { "pass" } else { "FAIL" });
    pass
}

/// Mode `instrument`: a console line for each run started and each settings record
/// stored since `seen` (run number, saves); returns what is seen now.
#[inline(never)]
fn instrument_news<W: embedded_io::Write, C: Clock>(
    pipe: &Pipeline<'_, W, C>,
    seen: (u32, u32),
) -> (u32, u32) {
    let r = pipe.run_state();
    if r.run != seen.0 && r.running {
        report!(
            "fw.run run={} uptime_frames={} utc_set={} utc_ms={}",
            r.run,
            pipe.sample_clock(),
            r.clock.is_some(),
            r.clock
                .map(|c| c.at(pipe.sample_clock(), capture::SAMPLE_RATE_HZ))
                .unwrap_or(0)
        );
    }
    if pipe.saves() != seen.1 {
        stored::report_settings(
            "stored",
            pipe.settings(),
            crate::settings::Loaded::Defaults,
            pipe.has_store(),
        );
    }
    (r.run, pipe.saves())
}

/// Command bytes read per pass of the main loop (bounded work: a pass also runs at every
/// sample tick, so the receiver is read far faster than a UART fills it in emulation; a
/// real board would take its commands by interrupt or DMA).
const COMMAND_BYTES_PER_LOOP: usize = 8;

/// After the run (mode `commands`): keep answering until the receiver has been quiet for
/// 20 ms of the board's clock, sending each answer.
#[inline(never)]
fn answer_until_quiet(pipe: &mut Pipeline<'_, CmsdkUart, CmsdkTimer>) {
    const QUIET_TICKS: u32 = PCLK_HZ / 50;
    let mut now = pipe.sample_clock();
    let mut last = pipe.clock().now();
    loop {
        if pipe.serve_commands(COMMAND_BYTES_PER_LOOP) > 0 {
            last = pipe.clock().now();
            now = pipe.drain_link(now);
        } else if pipe.clock().now().wrapping_sub(last) > QUIET_TICKS {
            break;
        }
    }
    pipe.drain_link(now);
}

/// Mode `field`, after the run: answer commands (a host reading the log back with
/// ReadLog) until QEMU is stopped: the board left powered for its log to be read.
#[inline(never)]
fn answer_for_ever(pipe: &mut Pipeline<'_, CmsdkUart, CmsdkTimer>) -> ! {
    let mut now = pipe.sample_clock();
    loop {
        if pipe.serve_commands(COMMAND_BYTES_PER_LOOP) > 0 {
            now = pipe.drain_link(now);
        }
    }
}

/// The acquisition of `mode`, built in place in a static (not on the stack of [`run`],
/// which stays below the main loop for the whole run). `None` if the ADC does not start.
#[inline(never)]
fn acquisition(
    mode: Mode,
    clock: TimerReader,
    full_tx: heapless::spsc::Producer<'static, Filled>,
    free_rx: heapless::spsc::Consumer<'static, &'static mut Block>,
) -> Option<&'static mut PacedAcquisition> {
    static ACQUISITION: StaticCell<PacedAcquisition> = StaticCell::new();
    let channels = capture::CHANNELS as usize;
    let source = match mode {
        Mode::Adc => {
            let dev = SimAdc::new(capture::SAMPLES, channels);
            match Adc::new(dev, SimDrdy, AdcConfig::new(capture::CHANNELS)) {
                Ok(adc) => Source::Adc(adc),
                Err(_) => return None,
            }
        }
        Mode::Instrument => Source::Replay(ReplaySource::looping(capture::SAMPLES, channels)),
        _ => Source::Replay(ReplaySource::new(capture::SAMPLES, channels)),
    };
    let per_tick = frames_per_tick(mode);
    Some(ACQUISITION.init_with(|| Acquisition::new(source, clock, per_tick, full_tx, free_rx)))
}

/// Frames a replayed capture moves per acquisition interrupt: the board's DMA hands over
/// 32 frames per transfer-complete interrupt (`board_stm32f4`'s `DMA_FRAMES`), and the
/// emulated machine, which has no DMA to its modelled converter, copies as many per SysTick.
const DMA_BURST_FRAMES: usize = 32;

/// Frames per acquisition tick in `mode`: whole blocks when unpaced (`measure`), one per
/// tick through the SPI ADC (such a converter raises its data-ready line per conversion),
/// a DMA burst otherwise. The `commands` check also keeps one per tick: its commands are
/// polled from UART0's one-byte receiver once per wake-up of the main loop, and its 60 ms
/// capture must carry every one of them.
fn frames_per_tick(mode: Mode) -> usize {
    match mode {
        Mode::Measure => BLOCK_FRAMES,
        Mode::Adc | Mode::Commands => 1,
        _ => DMA_BURST_FRAMES,
    }
}

/// The end of a run: the summary lines, and in mode `measure` the calibration and the
/// streaming variants. Apart from [`run`] so its locals do not sit below the main loop.
#[inline(never)]
fn end_of_run(
    mode: Mode,
    pipe: &mut Pipeline<'_, CmsdkUart, CmsdkTimer>,
    total: u64,
    stack_init: usize,
    stack_run: usize,
) -> bool {
    let pass = summary(mode, pipe, total);
    report!(
        "fw.memory static_ram_bytes={} stack_init_bytes={} stack_run_bytes={} chain_bytes={} record_bytes={} block_bytes={}",
        sys::static_ram_bytes(),
        stack_init,
        stack_run,
        core::mem::size_of::<FwChain>(),
        core::mem::size_of::<crate::config::FwRecord>(),
        core::mem::size_of::<Block>()
    );
    if mode == Mode::Measure {
        let (chain, clock) = pipe.chain_and_clock();
        const LOOPS: u32 = 1_000_000;
        let t0 = clock.now();
        sys::instruction_loop(LOOPS);
        let dt = clock.now().wrapping_sub(t0);
        report!("fw.calibration instructions={} ticks={}", 2 * LOOPS, dt);
        for v in [
            Variant::Whole,
            Variant::WholeFixed,
            Variant::WholeFixedLeading,
            Variant::Practical,
            Variant::PracticalFixed,
        ] {
            measure_streaming(chain, clock, v);
        }
        measure_profile_fit(clock);
        measure_learning(clock);
    }
    pass
}

#[inline(never)]
fn summary<W: embedded_io::Write, C: Clock>(
    mode: Mode,
    pipe: &Pipeline<'_, W, C>,
    total: u64,
) -> bool {
    let d = pipe.digest();
    let matches = d.records() == capture::EXPECTED_RECORDS && d.value() == capture::EXPECTED_DIGEST;
    let dropped = HEALTH.dropped_frames.load(Ordering::Relaxed);
    let t = pipe.timing;
    let st = *pipe.link().stats();
    let h = pipe.health();
    report!(
        "fw.result mode={} records={} expected_records={} digest={:#018x} expected_digest={:#018x} match={}",
        mode.name(),
        d.records(),
        capture::EXPECTED_RECORDS,
        d.value(),
        capture::EXPECTED_DIGEST,
        matches
    );
    report!(
        "fw.acquisition frames_in={} frames_pushed={} dropped_frames={} dropped_samples={} blocks={} queue_high_water={} source_errors={} adc_missed={}",
        HEALTH.frames_in.load(Ordering::Relaxed),
        pipe.frames_pushed(),
        dropped,
        h.samples_dropped,
        HEALTH.blocks.load(Ordering::Relaxed),
        HEALTH.queue_high_water.load(Ordering::Relaxed),
        HEALTH.source_errors.load(Ordering::Relaxed),
        sim_adc::missed()
    );
    report!(
        "fw.timing tick_hz={} channels={} push_ticks={} records_ticks={} digest_ticks={} isr_ticks={} idle_ticks={} stalled_ticks={} total_ticks={}",
        PCLK_HZ,
        capture::CHANNELS,
        t.push,
        t.records,
        t.digest,
        HEALTH.isr_ticks.load(Ordering::Relaxed),
        t.idle,
        t.stalled,
        total
    );
    report!(
        "fw.link frames_sent={} bytes_sent={} windows_sent={} windows_dropped={} write_errors={} health_samples_dropped={}",
        st.frames_sent,
        st.bytes_sent,
        st.windows_sent,
        st.windows_dropped,
        pipe.link().write_errors(),
        h.samples_dropped
    );
    let c = pipe.commands();
    let r = pipe.run_state();
    report!(
        "fw.commands executed={} repeats={} acks={} nacks={} unreadable={} not_from_host={} stopped={} starts={} stops={} run={} utc_set={}",
        c.executed,
        c.repeats,
        c.acks,
        c.nacks,
        c.unreadable,
        c.not_from_host,
        pipe.stopped(),
        r.starts,
        r.stops,
        r.run,
        r.clock.is_some()
    );
    let (save_errors, config_errors) = pipe.errors();
    report!(
        "fw.store saves={} save_errors={} config_errors={}",
        pipe.saves(),
        save_errors,
        config_errors
    );
    stored::report_settings(
        "end",
        pipe.settings(),
        crate::settings::Loaded::Defaults,
        pipe.has_store(),
    );
    let clean = pipe.link().write_errors() == 0
        && st.windows_dropped == 0
        && save_errors == 0
        && config_errors == 0;
    match mode {
        Mode::Overrun | Mode::EraseInside => dropped > 0 && h.samples_dropped > 0 && clean,
        Mode::Commands => pipe.stopped() && clean,
        Mode::Boot => clean,
        _ => matches && dropped == 0 && clean,
    }
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    cortex_m::interrupt::disable();
    // The location only: formatting the message would link the formatting of every
    // panic payload in the image (floats included), some 10 KiB of flash.
    match info.location() {
        Some(l) => cortex_m_semihosting::hprintln!("fw.panic at {}:{}", l.file(), l.line()),
        None => cortex_m_semihosting::hprintln!("fw.panic"),
    }
    loop {
        debug::exit(debug::EXIT_FAILURE);
    }
}
