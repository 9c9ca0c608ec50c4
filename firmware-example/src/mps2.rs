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
        ] {
            measure_streaming(chain, clock, v);
        }
        measure_profile_fit(clock);
        measure_learning(clock);
    }
    pass
}

/// The level learner's two costs on the capture's first channel: feeding it (every
/// `LEARN_STRIDE`-th frame of the capture, ten times) and deciding a period (ten times).
#[inline(never)]
fn measure_learning<C: Clock>(clock: &C) {
    use frothline_core::levels::LevelLearner;
    let ch = capture::CHANNELS as usize;
    let mut block = [0i16; BLOCK_SAMPLES];
    let mut l = LevelLearner::new();
    let mut src = ReplaySource::new(capture::SAMPLES, ch);
    let n = src.fill(&mut block[..BLOCK_FRAMES * ch]).unwrap_or(0);
    l.observe(&block[..n * ch], ch, 0, 0);
    l.range_from_seen();
    const REPS: u32 = 10;
    let t0 = clock.now();
    for _ in 0..REPS {
        l.observe(core::hint::black_box(&block[..n * ch]), ch, 0, 0);
    }
    let observe = clock.now().wrapping_sub(t0);
    let t0 = clock.now();
    let mut modes = 0;
    for _ in 0..REPS {
        let d = core::hint::black_box(&l).decide_with_min_class(64, 2);
        modes += matches!(d, frothline_core::levels::Learnt::Modes { .. }) as u32;
    }
    let decide = clock.now().wrapping_sub(t0);
    // One tip's detector over the whole capture, learning and with fixed levels.
    let mut detect = [0u32; 2];
    for (k, fixed) in [false, true].into_iter().enumerate() {
        let mut tip = capture::PROBE_CONFIGS[0].leading;
        if fixed {
            tip.levels = frothline_core::LevelSource::Fixed {
                air: 26000,
                water: 3000,
            };
        }
        let mut d = frothline_core::PhaseDetector::new(&tip, &capture::DETECTOR, false);
        let mut src = ReplaySource::new(capture::SAMPLES, ch);
        let mut at = 0u64;
        loop {
            let n = src.fill(&mut block[..BLOCK_FRAMES * ch]).unwrap_or(0);
            if n == 0 {
                break;
            }
            let t0 = clock.now();
            d.process(&block[..n * ch], ch, at, &mut ());
            detect[k] += clock.now().wrapping_sub(t0);
            at += n as u64;
        }
    }
    // One probe's lag analysis at a window close: a correlator of the firmware's lags over
    // a 1000-frame window of 20 bubbles of 12 frames, the trailing tip 5 frames behind.
    let (mut close, mut sums_t, mut analyse_t) = (0u32, 0u32, 0u32);
    {
        use frothline_core::{Correlator, Edge, EdgeSink, Flags};
        let mut c = Correlator::<{ crate::config::LAGS }>::new(60, 0, false, false);
        for rep in 0..REPS as u64 {
            let base = rep * 1000;
            for b in 0..20u64 {
                let t = base + b * 50 + 3;
                for (at, to_air) in [(t, true), (t + 12, false)] {
                    c.lead_in_order().edge(Edge { frame: at, to_air });
                    c.trail_in_order().edge(Edge {
                        frame: at + 5,
                        to_air,
                    });
                }
            }
            let mut flags = Flags::NONE;
            let t0 = clock.now();
            if rep % 2 == 0 {
                let r = c.close_analysed(base + 1000, 0.3, &mut flags);
                close += clock.now().wrapping_sub(t0);
                core::hint::black_box(r);
            } else {
                let sums = c.close(base + 1000, &mut flags);
                let t1 = clock.now();
                sums_t += t1.wrapping_sub(t0);
                let r = sums.analyse(0.3);
                analyse_t += clock.now().wrapping_sub(t1);
                core::hint::black_box(r);
            }
        }
    }
    report!(
        "fw.lag_analysis closes={} ticks={} close_ticks={} analyse_ticks={}",
        REPS / 2,
        close,
        sums_t,
        analyse_t
    );
    report!(
        "fw.learning frames={} reps={} observe_ticks={} decide_ticks={} modes={} detect_learnt_ticks={} detect_fixed_ticks={}",
        n,
        REPS,
        observe,
        decide,
        modes,
        detect[0],
        detect[1]
    );
}

/// Fits timed by [`measure_profile_fit`].
const PROFILE_FITS: u32 = 200;

/// The per-slice cost of a station: timer ticks of [`PROFILE_FITS`] profile fits of a
/// coarse station with standard errors (six probes 11 mm apart, three below Y90; the
/// points of the core's `profile_fit_6_points_weighted` bench) and of eight points
/// without (`profile_fit_8_points`).
#[inline(never)]
fn measure_profile_fit<C: Clock>(clock: &C) {
    use frothline_core::profile::{fit_profile, renewal_sigma, ProfileConfig, ProfilePoint};
    const COARSE_C: [f32; 6] = [0.225227, 0.530996, 0.775882, 0.962872, 0.98, 0.99];
    const EIGHT_C: [f32; 8] = [
        0.043867, 0.163939, 0.302622, 0.453163, 0.612671, 0.779485, 0.952508, 1.0,
    ];
    let cfg = ProfileConfig::default();
    let mut coarse = [ProfilePoint::new(0.0, 0.0); 6];
    for (i, (p, &c)) in coarse.iter_mut().zip(&COARSE_C).enumerate() {
        let y = 5.0 + 11.0 * i as f32;
        *p = ProfilePoint::with_sigma(y, c, renewal_sigma(c, 20, Some(0.6), Some(0.8)));
    }
    let mut eight = [ProfilePoint::new(0.0, 0.0); 8];
    for (i, (p, &c)) in eight.iter_mut().zip(&EIGHT_C).enumerate() {
        *p = ProfilePoint::new(5.0 + 10.0 * i as f32, c);
    }
    for (name, pts) in [("weighted_6", &coarse[..]), ("plain_8", &eight[..])] {
        let t0 = clock.now();
        for _ in 0..PROFILE_FITS {
            core::hint::black_box(fit_profile(core::hint::black_box(pts), &cfg));
        }
        let dt = clock.now().wrapping_sub(t0);
        report!(
            "fw.profile_fit points={} fits={} ticks={}",
            name,
            PROFILE_FITS,
            dt
        );
    }
}

/// The settings store of the emulated board: three 4 KiB sectors of NOR flash kept in a
/// file on the host (`target/firmware/settings.nor`, relative to QEMU's working directory;
/// `scripts/firmware-run.sh` keeps or clears it), so settings survive a reboot of the
/// emulated board. Without the file (QEMU started elsewhere) the board runs on defaults.
mod stored {
    use crate::acquire::Clock;
    use crate::host_nor::{HostNor, SECTOR_BYTES};
    use crate::pipeline::Pipeline;
    use crate::settings::{Loaded, Settings, SettingsStore};
    use crate::{capture, config};
    use static_cell::StaticCell;

    /// The store's region.
    pub const SETTINGS_BYTES: usize = 3 * SECTOR_BYTES;
    type Store = SettingsStore<HostNor<SETTINGS_BYTES>>;
    static STORE: StaticCell<Store> = StaticCell::new();

    /// Mount the store, load the newest settings into the pipeline, and report them.
    #[inline(never)]
    pub fn load<W: embedded_io::Write, C: Clock>(pipe: &mut Pipeline<'_, W, C>) -> Loaded {
        // Read first, then configure the chain: the store's buffers and the chain's
        // configuration never take stack at once.
        let (settings, loaded, store) = read();
        let (has_store, store) = match store {
            Some(s) => (true, Some(s as &mut dyn crate::settings::SettingsSink)),
            None => (false, None),
        };
        pipe.set_settings(settings, store);
        report_settings("loaded", &settings, loaded, has_store);
        loaded
    }

    /// Mount the store and read the newest settings (the defaults without a store).
    #[inline(never)]
    fn read() -> (Settings, Loaded, Option<&'static mut Store>) {
        let defaults = Settings::defaults(config::DEVICE_ID, capture::WINDOW);
        let store = HostNor::open(b"target/firmware/settings.nor\0")
            .and_then(|f| SettingsStore::mount(f).ok())
            .map(|s| STORE.init(s));
        match store {
            Some(s) => {
                let (settings, loaded) = s.load(defaults);
                (settings, loaded, Some(s))
            }
            None => (defaults, Loaded::Defaults, None),
        }
    }

    /// One `fw.settings` line.
    pub fn report_settings(when: &str, s: &Settings, loaded: Loaded, store: bool) {
        let fixed = s.levels.iter().flatten().filter(|l| l.is_some()).count();
        let (kind, frames) = match s.window {
            frothline_core::WindowPolicy::Whole => ("whole", 0),
            frothline_core::WindowPolicy::Frames(f) => ("frames", f),
            frothline_core::WindowPolicy::Bubbles { count, .. } => ("bubbles", count),
            frothline_core::WindowPolicy::AfterFront { frames } => ("after_front", frames),
            _ => ("other", 0),
        };
        let first = s.levels.first().and_then(|l| l[0]).unwrap_or((0, 0));
        report!(
            "fw.settings {} store={} records={} device_id={:#06x} window={} window_frames={} fixed_tips={} probe0_leading_air={} probe0_leading_water={} logger_armed={}",
            when,
            store,
            match loaded {
                Loaded::Stored(n) => n,
                Loaded::Defaults => 0,
            },
            s.device_id,
            kind,
            frames,
            fixed,
            first.0,
            first.1,
            s.logger_armed
        );
    }
}

/// The field log of the field-logger modes: a NOR flash stand-in in RAM (its erases
/// stalled as a real part's in modes `erase` and `erase-inside`), and the end-of-run checks.
#[cfg(feature = "field-logger")]
mod logger {
    use crate::acquire::Clock;
    use crate::cmsdk_timer::{TimerReader, PCLK_HZ};
    use crate::cmsdk_uart::CmsdkUart;
    use crate::field_log::{count_records, FieldLog, Schedule};
    use crate::pipeline::ResultTap;
    use crate::ram_nor::RamNor;
    use crate::stall_nor::{StallNor, SECTOR_ERASE_MS};
    use crate::sys;
    use embedded_io::Write;
    use static_cell::ConstStaticCell;

    /// The log region: 16 sectors of 4 KiB (15 hold records, see the core's logbook).
    pub const LOG_BYTES: usize = 64 * 1024;
    type Flash = StallNor<&'static mut RamNor<LOG_BYTES>, TimerReader>;
    static FLASH: ConstStaticCell<RamNor<LOG_BYTES>> = ConstStaticCell::new(RamNor::new());

    /// Mount the log (idle until the run arms it). `stall`: erases take a real part's time and the region starts
    /// unerased (zeros: a part whose content is unknown), else it starts erased (a
    /// factory-fresh part) and erases are instant. `inside`: no erase ahead (the log erases
    /// when it needs a page). Reports how long arming took and what it erased.
    pub fn mount(stall: bool, inside: bool, clock: TimerReader) -> Option<FieldLog<Flash>> {
        let ram = FLASH.try_take()?;
        if !stall {
            ram.erase_all();
        }
        let ms = if stall { SECTOR_ERASE_MS } else { 0 };
        let schedule = if inside {
            Schedule::EraseInCapture
        } else {
            Schedule::Prepared
        };
        let t0 = clock.now();
        let log = FieldLog::mount(StallNor::new(ram, clock, ms), schedule).ok()?;
        let ticks = clock.now().wrapping_sub(t0);
        let st = log.stats();
        report!(
            "fw.arm schedule={} sector_erase_ms={} pages_pre_erased={} ready={} arm_ticks={} arm_ms={}",
            if inside { "erase-inside" } else { "prepared" },
            ms,
            st.log.pages_pre_erased,
            st.ready,
            ticks,
            ticks / (PCLK_HZ / 1000)
        );
        Some(log)
    }

    /// Flush, report, mount the log afresh and count its records, send the image out of
    /// UART1; true when the capture was triggered and every logged frame is on flash, and
    /// with `erase` when nothing was dropped inside the capture and it erased nothing, with
    /// `inside` when frames were dropped inside the capture.
    pub fn finish(mut log: FieldLog<Flash>, erase: bool, inside: bool) -> bool {
        log.flush();
        let st = log.stats();
        let state = log.state();
        let stall = log.into_flash();
        let (erases, stalled) = (stall.erases(), stall.stalled_ticks());
        let flash = stall.into_inner();
        let (found, flash) = match count_records(flash) {
            Ok(x) => x,
            Err(e) => {
                report!("fw.error the field log did not mount again: {}", e);
                return false;
            }
        };
        report!(
            "fw.logger state={} triggers={} descriptions={} statuses={} statuses_left_out={} logged={} dropped={} overwritten={} no_space={} captures_cut={} encode_errors={} log_error={} pages_recycled={} records_after_remount={} image_bytes={}",
            match state {
                frothline_core::logbook::LoggerState::Idle => "idle",
                frothline_core::logbook::LoggerState::Armed => "armed",
                frothline_core::logbook::LoggerState::Capturing { .. } => "capturing",
            },
            st.logger.triggers,
            st.descriptions,
            st.statuses,
            st.statuses_left_out,
            st.logger.logged,
            st.logger.dropped,
            st.logger.overwritten,
            st.logger.no_space,
            st.logger.captures_cut,
            st.encode_errors,
            st.first_error.is_some(),
            st.log.pages_recycled,
            found,
            LOG_BYTES
        );
        let pre = st.log.pages_pre_erased;
        let in_capture = erases.saturating_sub(pre);
        report!(
            "fw.erase sectors_erased={} pre_erased={} erased_after_arm={} stalled_ticks={} prepares={} ready={} dropped_frames_in_capture={} dropped_samples_in_capture={}",
            erases,
            pre,
            in_capture,
            stalled,
            st.prepares,
            st.ready,
            st.dropped_frames_in_capture,
            st.dropped_frames_in_capture as u64 * crate::capture::CHANNELS as u64
        );
        let Some(regs) = sys::take(sys::Device::Uart1) else {
            return false;
        };
        let mut uart = CmsdkUart::new(regs, PCLK_HZ, crate::config::BAUD);
        let sent = uart.write_all(flash.image()).is_ok() && uart.flush().is_ok();
        let logged = sent
            && st.logger.triggers >= 1
            && st.logger.logged > 0
            && st.logger.dropped == 0
            && st.logger.no_space == 0
            && st.encode_errors == 0
            && st.first_error.is_none()
            && st.descriptions >= 1
            // With no room erased ahead (erase-inside) the armed status finds none.
            && st.statuses + st.statuses_left_out >= 2
            && st.statuses >= 1
            && found == st.logger.logged + st.descriptions + st.statuses;
        if erase {
            logged && st.ready && pre > 0 && in_capture == 0 && st.dropped_frames_in_capture == 0
        } else if inside {
            logged && in_capture > 0 && st.dropped_frames_in_capture > 0
        } else {
            logged
        }
    }
}

/// Variants of the capture's configuration for [`measure_streaming`].
#[derive(Clone, Copy, PartialEq, Eq)]
enum Variant {
    /// One window over the whole record, levels as configured (learnt).
    Whole,
    /// ... and fixed levels (no learning).
    WholeFixed,
    /// ... and no trailing tips (no correlation; 8 tips instead of 16).
    WholeFixedLeading,
    /// Settings of a practical run: 50 ms windows, the default 0.2 s learning period,
    /// learnt levels, over the capture played [`PRACTICAL_REPEATS`] times (1.02 s). The
    /// blocks of the first learning period (the tips have no levels yet and learn on every
    /// 4th frame) are timed apart: a run's cost with learning done and levels tracked is
    /// that of the blocks after it.
    Practical,
}

/// Plays of the capture in [`Variant::Practical`].
const PRACTICAL_REPEATS: usize = 17;

/// The chain's streaming cost alone: the capture again through a chain with one window
/// over the whole record (no window closes until the end), blocks decoded before timing.
#[inline(never)]
fn measure_streaming<C: Clock>(chain: &mut FwChain, clock: &C, variant: Variant) {
    let Ok(mut cfg) = capture::chain_config() else {
        return;
    };
    cfg.window = frothline_core::WindowPolicy::Whole;
    let mut repeats = 1;
    // Frames timed apart at the start (the first learning period, practical variant).
    let mut first_period = 0usize;
    if variant == Variant::Practical {
        first_period = (capture::SAMPLE_RATE_HZ / 5) as usize;
        cfg.window = frothline_core::WindowPolicy::Frames(capture::SAMPLE_RATE_HZ / 20);
        cfg.detector.learn_period = capture::SAMPLE_RATE_HZ / 5;
        repeats = PRACTICAL_REPEATS;
    }
    let fixed = frothline_core::LevelSource::Fixed {
        air: 26000,
        water: 3000,
    };
    let mut tips = 0;
    for p in cfg.probes.iter_mut() {
        if !matches!(variant, Variant::Whole | Variant::Practical) {
            p.leading.levels = fixed;
            if let Some(t) = p.trailing.as_mut() {
                t.levels = fixed;
                if t.polarity == frothline_core::Polarity::AirLow {
                    t.levels = frothline_core::LevelSource::Fixed {
                        air: 3000,
                        water: 26000,
                    };
                }
            }
            if p.leading.polarity == frothline_core::Polarity::AirLow {
                p.leading.levels = frothline_core::LevelSource::Fixed {
                    air: 3000,
                    water: 26000,
                };
            }
        }
        if variant == Variant::WholeFixedLeading {
            p.trailing = None;
        }
        tips += 1 + p.trailing.is_some() as usize;
    }
    // In place again: a chain built by value would need its size in stack.
    if chain.configure(cfg).is_err() {
        return;
    }
    let mut block = [0i16; BLOCK_SAMPLES];
    let ch = capture::CHANNELS as usize;
    let mut push = 0u64;
    let mut frames = 0usize;
    let (mut first_push, mut first_frames) = (0u64, 0usize);
    for _ in 0..repeats {
        let mut src = ReplaySource::new(capture::SAMPLES, ch);
        loop {
            let n = src.fill(&mut block[..BLOCK_FRAMES * ch]).unwrap_or(0);
            if n == 0 {
                break;
            }
            let mut rest = &block[..n * ch];
            while !rest.is_empty() {
                let t0 = clock.now();
                let used = chain.push(rest);
                // A poll builds the window's next record (the chain queues one): timed
                // with the push; the records are dropped where they lie (what is done
                // with them is the pipeline's records share).
                while chain.poll_lean_with(|_| ()).is_some() {}
                let dt = clock.now().wrapping_sub(t0) as u64;
                if first_frames < first_period {
                    first_push += dt;
                    first_frames += used / ch;
                } else {
                    push += dt;
                    frames += used / ch;
                }
                rest = &rest[used..];
            }
        }
    }
    let t0 = clock.now();
    while chain.finish().is_err() {
        while chain.poll_lean_with(|_| ()).is_some() {}
    }
    while chain.poll_lean_with(|_| ()).is_some() {}
    let close = clock.now().wrapping_sub(t0) as u64;
    report!(
        "fw.streaming variant={} frames={} channels={} tips={} push_ticks={} finish_ticks={} first_period_frames={} first_period_ticks={}",
        match variant {
            Variant::Whole => "whole",
            Variant::WholeFixed => "whole-fixed",
            Variant::WholeFixedLeading => "whole-fixed-leading",
            Variant::Practical => "practical",
        },
        frames,
        ch,
        tips,
        push,
        close,
        first_frames,
        first_push
    );
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
