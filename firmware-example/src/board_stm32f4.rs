//! A real board: NUCLEO-F411RE (STM32F411RE, Cortex-M4F at 100 MHz, 128 KiB SRAM), through
//! `stm32f4xx-hal`. Builds here (`--no-default-features --features board-stm32f4`); wiring
//! and flashing are in docs/firmware.md.
//!
//! ```text
//! TIM2 update (TRGO) at the sample rate
//!   -> ADC1 scans 16 inputs (one frame), DMA2 stream 0 writes them into buffer A or B
//!      (double-buffer mode, DMA_FRAMES frames per buffer)
//!   -> DMA transfer-complete interrupt: swap in the spare buffer, convert the finished one
//!      into the acquisition (12-bit codes << 3 -> i16 counts 0..32760), which hands full
//!      blocks to the main loop through the same spsc queues as the emulated board
//!   -> main loop: chain -> wire frames -> USART1 transmit by DMA2 stream 7
//! USART1 receive by DMA2 stream 2 into a circular buffer
//!   -> main loop: host commands (read between blocks) -> the core's responder
//! ```
//!
//! Inputs (ADC1 rank = channel = tip): PA0..PA7 -> 0..7, PB0, PB1 -> 8, 9, PC0..PC5 ->
//! 10..15. PA2/PA3 also carry the ST-LINK virtual COM port (solder bridges SB13/SB14):
//! open them to use those two inputs; results go out of USART1 (PA9 TX, PA10 RX) at
//! 921 600 baud to a 3.3 V USB-serial adapter.
//!
//! Host commands: the receiver's DMA runs in circular mode (RM0383, "Circular mode": the
//! transfer count reloads at the end of the buffer), so received bytes need neither an
//! interrupt per byte nor a CPU that keeps up with 921 600 Bd (one byte per 10.9 us): the
//! main loop reads what the DMA wrote since its last look, at every wake-up (at least once
//! per DMA buffer of samples, 1.6 ms). A host that sends more than [`RX_BYTES`] bytes
//! (11 ms of a full line) before the loop looks would overwrite unread ones; host commands
//! are a few tens of bytes each, and the responder refuses a damaged frame by its CRC.
//!
//! Settings: the store of [`crate::settings`] over sectors 1 to 3 ([`crate::f4_flash`]),
//! loaded before sampling starts, so a board keeps its window, levels, logger arming and
//! device id across power cycles.
//!
//! Timing comes from the DWT cycle counter (the emulated board's TIMER0 stands in for it).
//!
//! Supply voltage (the device status, wire kind 0x0C): ADC1's internal reference VREFINT
//! (channel 17) on the injected group ([`sys::vrefint`]), one conversion per health period,
//! started by the DMA interrupt right after a scan has ended, so it falls in the ADC's idle
//! time between two frames instead of stretching a scan. VDDA = 3.3 V x VREFINT_CAL /
//! VREFINT_DATA (RM0383, with the factory VREFINT_CAL taken at 3.3 V); without a
//! calibration value, VDDA = 1.21 V (DS10314's typical VREFINT) x 4095 / VREFINT_DATA.
//! The 3.3 V rail feeds VDDA on the NUCLEO board (through a jumper-free ferrite), so this
//! is the board's supply.
//!
//! With the `field-logger` feature the results also go to the field logger
//! ([`crate::field_log`]) over sectors 6 and 7 of the MCU's flash ([`crate::f4_flash`]),
//! which the host reads back over the link (ReadLog, `frothline logbook --port`).
//! It is mounted, and the room of a capture erased ahead, before the ADC and its timer
//! start: a sector erase stalls the CPU for a second or two, which then costs no sample.

use crate::acquire::{Acquisition, Block, Clock, Filled, HEALTH};
use crate::config::{BLOCKS, BLOCK_SAMPLES, MAX_CHANNELS};
use crate::f4_flash::SettingsRegion;
use crate::link::Link;
use crate::pipeline::{Pipeline, SupplySense};
use crate::settings::{Settings, SettingsStore};
use crate::source::SampleSource;
use crate::{capture, sys};
use core::cell::RefCell;
use core::convert::Infallible;
use core::sync::atomic::{AtomicBool, Ordering};
use cortex_m::peripheral::DWT;
use cortex_m_rt::entry;
use critical_section::Mutex;
use heapless::spsc::Queue;
use static_cell::{ConstStaticCell, StaticCell};
use stm32f4xx_hal::adc::config::{
    AdcConfig, Continuous, Dma as AdcDma, ExternalTrigger, SampleTime, Scan, Sequence, TriggerMode,
};
use stm32f4xx_hal::adc::Adc;
use stm32f4xx_hal::dma::config::DmaConfig;
use stm32f4xx_hal::dma::{
    MemoryToPeripheral, PeripheralToMemory, Stream0, Stream2, Stream7, StreamsTuple, Transfer,
};
use stm32f4xx_hal::pac::{self, interrupt, ADC1, DMA2, USART1};
use stm32f4xx_hal::prelude::*;
use stm32f4xx_hal::rcc::Config as RccConfig;
use stm32f4xx_hal::serial::{self, Rx, Serial, Tx};
use stm32f4xx_hal::timer::Timer;

/// Core clock, Hz.
const SYSCLK_HZ: u32 = 100_000_000;
/// Frames per DMA buffer (one transfer-complete interrupt per this many frames).
const DMA_FRAMES: usize = 32;
/// Samples per DMA buffer.
const DMA_SAMPLES: usize = DMA_FRAMES * MAX_CHANNELS;
/// Bytes per UART transmit chunk (two chunks: one sending, one filling).
const TX_CHUNK: usize = 512;
/// Bytes of the receiver's circular buffer (host commands).
const RX_BYTES: usize = 1024;
/// Command bytes the main loop answers per pass (bounded work between blocks).
const COMMAND_BYTES_PER_LOOP: usize = 64;

type DmaBuf = [u16; DMA_SAMPLES];
type AdcTransfer = Transfer<Stream0<DMA2>, 0, Adc<ADC1>, PeripheralToMemory, &'static mut DmaBuf>;
type UartTransfer = Transfer<Stream7<DMA2>, 4, Tx<USART1>, MemoryToPeripheral, sys::TxChunk>;
type RxBuf = [u8; RX_BYTES];
pub(crate) type RxTransfer =
    Transfer<Stream2<DMA2>, 4, Rx<USART1>, PeripheralToMemory, &'static mut RxBuf>;

/// The cycle counter as the pipeline's clock.
#[derive(Clone, Copy, Debug)]
struct CycleClock;

impl Clock for CycleClock {
    const HZ: u32 = SYSCLK_HZ;

    fn now(&self) -> u32 {
        DWT::cycle_count()
    }
}

/// The frames of a finished DMA buffer, as a sample source for the acquisition.
struct DmaBlockSource {
    buf: Option<&'static mut DmaBuf>,
    pos: usize,
    channels: usize,
}

impl SampleSource for DmaBlockSource {
    type Error = Infallible;

    fn channels(&self) -> usize {
        self.channels
    }

    fn fill(&mut self, block: &mut [i16]) -> Result<usize, Infallible> {
        let Some(buf) = self.buf.as_deref() else {
            return Ok(0);
        };
        let ch = self.channels;
        let frames = (block.len() / ch).min(DMA_FRAMES - self.pos / ch);
        let src = &buf[self.pos..self.pos + frames * ch];
        for (d, &s) in block.iter_mut().zip(src) {
            // 12-bit right-aligned code -> 0..32760 counts (0 to 3.3 V).
            *d = ((s & 0x0fff) << 3) as i16;
        }
        self.pos += frames * ch;
        Ok(frames)
    }
}

/// What the DMA interrupt owns.
struct AdcIsr {
    transfer: AdcTransfer,
    spare: Option<&'static mut DmaBuf>,
    acq: Acquisition<DmaBlockSource, CycleClock>,
}

static ADC_ISR: Mutex<RefCell<Option<AdcIsr>>> = Mutex::new(RefCell::new(None));

/// Set by the main loop when it wants a new VREFINT conversion; the DMA interrupt starts
/// it (see the module docs).
static VREF_WANTED: AtomicBool = AtomicBool::new(false);

/// Typical VREFINT, mV (DS10314), for a part whose calibration value cannot be read.
const VREFINT_TYP_MV: u32 = 1_210;

/// The supply from VREFINT readings.
struct Vrefint {
    /// VREFINT_CAL, when the part has one.
    cal: Option<u16>,
    /// The latest supply, mV.
    last: Option<u16>,
}

impl SupplySense for Vrefint {
    fn supply_mv(&mut self) -> Option<u16> {
        use frothline_core::wire::device_status::supply_from_reference;
        if let Some(raw) = sys::vrefint::take() {
            let raw = u32::from(raw & 0x0fff);
            self.last = match self.cal {
                Some(cal) => supply_from_reference(sys::vrefint::CAL_VDDA_MV, cal.into(), raw),
                None => supply_from_reference(VREFINT_TYP_MV, 4_095, raw),
            };
        }
        VREF_WANTED.store(true, Ordering::Release);
        self.last
    }
}

/// Core cycles one DMA buffer takes to fill at the sample rate.
const BUFFER_CYCLES: u32 = SYSCLK_HZ / capture::SAMPLE_RATE_HZ * DMA_FRAMES as u32;

#[interrupt]
fn DMA2_STREAM0() {
    static mut STATE: Option<AdcIsr> = None;
    static mut LAST: Option<u32> = None;
    // A flash erase or program stalls the CPU (and this interrupt, whose code is in flash)
    // while the DMA goes on filling its two buffers in turn: buffers missed in a gap of
    // more than one and a half buffer periods are counted as dropped frames (and on the
    // sample clock), as the acquisition counts the frames it has no block for.
    let now = DWT::cycle_count();
    if let Some(last) = LAST.replace(now) {
        let gap = now.wrapping_sub(last);
        if gap > BUFFER_CYCLES + BUFFER_CYCLES / 2 {
            let lost = (gap / BUFFER_CYCLES).saturating_sub(1) * DMA_FRAMES as u32;
            HEALTH.dropped_frames.fetch_add(lost, Ordering::Relaxed);
            HEALTH.frames_in.fetch_add(lost, Ordering::Relaxed);
        }
    }
    if STATE.is_none() {
        *STATE = critical_section::with(|cs| ADC_ISR.borrow_ref_mut(cs).take());
    }
    let Some(st) = STATE.as_mut() else {
        return;
    };
    let Some(spare) = st.spare.take() else {
        return;
    };
    match st.transfer.next_transfer(spare) {
        Ok((done, _)) => {
            let src = st.acq.source_mut();
            src.buf = Some(done);
            src.pos = 0;
            st.acq.tick();
            st.spare = st.acq.source_mut().buf.take();
            // The buffer's last scan has just ended: the ADC is idle until the next frame.
            if VREF_WANTED.swap(false, Ordering::AcqRel) {
                sys::vrefint::start();
            }
        }
        Err(e) => {
            use stm32f4xx_hal::dma::DMAError;
            let (DMAError::NotReady(b) | DMAError::SmallBuffer(b) | DMAError::Overrun(b)) = e;
            st.spare = Some(b);
            HEALTH.source_errors.fetch_add(1, Ordering::Relaxed);
        }
    }
}

/// USART1 through DMA: transmit as an `embedded_io::Write` (bytes collect in one chunk
/// while the other is on the wire), receive as an `embedded_io::Read` over the circular
/// buffer the receiver's DMA fills.
struct DmaUart {
    transfer: UartTransfer,
    filling: Option<sys::TxChunk>,
    busy: bool,
    rx: RxRing,
}

/// The receiver's circular buffer and how far the main loop has read it.
struct RxRing {
    transfer: RxTransfer,
    /// The buffer the DMA writes (read only behind its write position).
    buf: sys::DmaWritten,
    /// Next byte to read, 0..RX_BYTES.
    pos: usize,
}

impl RxRing {
    /// The DMA's write position, 0..RX_BYTES.
    fn head(&self) -> usize {
        // NDTR counts down from RX_BYTES to 1 and reloads (circular mode).
        let left = (self.transfer.number_of_transfers() as usize).min(RX_BYTES);
        (RX_BYTES - left) % RX_BYTES
    }

    fn has_byte(&self) -> bool {
        self.head() != self.pos
    }

    fn take(&mut self) -> Option<u8> {
        if !self.has_byte() {
            return None;
        }
        // Reads after the count that says the byte was written.
        core::sync::atomic::compiler_fence(Ordering::Acquire);
        let b = self.buf.get(self.pos)?;
        self.pos = (self.pos + 1) % RX_BYTES;
        Some(b)
    }
}

impl DmaUart {
    fn idle(&mut self) -> bool {
        use stm32f4xx_hal::dma::traits::StreamISR;
        !self.busy || self.transfer.is_transfer_complete()
    }

    /// Start sending the filling chunk when the DMA is free; true if it was started (or
    /// there was nothing to send).
    fn kick(&mut self) -> bool {
        let Some(chunk) = self.filling.take() else {
            return false;
        };
        if chunk.is_empty() {
            self.filling = Some(chunk);
            return true;
        }
        if !self.idle() {
            self.filling = Some(chunk);
            return false;
        }
        match self.transfer.next_transfer(chunk) {
            Ok((mut old, _)) => {
                old.clear();
                self.filling = Some(old);
                self.busy = true;
                true
            }
            Err(e) => {
                use stm32f4xx_hal::dma::DMAError;
                let (DMAError::NotReady(c) | DMAError::SmallBuffer(c) | DMAError::Overrun(c)) = e;
                self.filling = Some(c);
                false
            }
        }
    }
}

impl embedded_io::ErrorType for DmaUart {
    type Error = Infallible;
}

impl embedded_io::ReadReady for DmaUart {
    fn read_ready(&mut self) -> Result<bool, Infallible> {
        Ok(self.rx.has_byte())
    }
}

impl embedded_io::Read for DmaUart {
    /// The bytes received so far, at most `buf.len()`; 0 only for an empty `buf` (the
    /// pipeline asks [`embedded_io::ReadReady`] first, so it never waits here).
    fn read(&mut self, buf: &mut [u8]) -> Result<usize, Infallible> {
        let mut n = 0;
        for slot in buf.iter_mut() {
            // The first byte is waited for, as `Read` asks; the rest only if there.
            let b = loop {
                match self.rx.take() {
                    Some(b) => break Some(b),
                    None if n > 0 => break None,
                    None => {}
                }
            };
            let Some(b) = b else { break };
            *slot = b;
            n += 1;
        }
        Ok(n)
    }
}

impl embedded_io::Write for DmaUart {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Infallible> {
        if buf.is_empty() {
            return Ok(0);
        }
        loop {
            if let Some(chunk) = self.filling.as_mut() {
                let n = chunk.extend(buf);
                if n > 0 {
                    if chunk.is_full() {
                        self.kick();
                    }
                    return Ok(n);
                }
            }
            // The filling chunk is full: wait for the wire.
            while !self.kick() {}
        }
    }

    fn flush(&mut self) -> Result<(), Infallible> {
        while !self.kick() {}
        while !self.idle() {}
        Ok(())
    }
}

static DMA_BUFFERS: ConstStaticCell<[DmaBuf; 3]> = ConstStaticCell::new([[0; DMA_SAMPLES]; 3]);
static TX_BUFFERS: ConstStaticCell<[[u8; TX_CHUNK]; 2]> = ConstStaticCell::new([[0; TX_CHUNK]; 2]);
static RX_BUFFER: ConstStaticCell<RxBuf> = ConstStaticCell::new([0; RX_BYTES]);
static BLOCK_BUFFERS: ConstStaticCell<[Block; BLOCKS]> =
    ConstStaticCell::new([[0; BLOCK_SAMPLES]; BLOCKS]);
static FULL: ConstStaticCell<Queue<Filled, { BLOCKS + 1 }>> = ConstStaticCell::new(Queue::new());
static FREE: ConstStaticCell<Queue<&'static mut Block, { BLOCKS + 1 }>> =
    ConstStaticCell::new(Queue::new());

#[entry]
fn main() -> ! {
    sys::paint_stack();
    let (Some(dp), Some(mut cp)) = (pac::Peripherals::take(), cortex_m::Peripherals::take()) else {
        halt()
    };
    cp.DCB.enable_trace();
    cp.DWT.enable_cycle_counter();
    let mut rcc = dp.RCC.freeze(
        RccConfig::hse(8.MHz())
            .bypass_hse_oscillator()
            .sysclk(SYSCLK_HZ.Hz())
            .pclk1(50.MHz()),
    );
    let chain = match crate::make_chain() {
        Ok(c) => c,
        Err(_) => halt(),
    };

    // The field log first: arming may erase a sector (the CPU stalls), so before any
    // sampling starts. Without it (a part whose flash ends before sector 7, a flash
    // error) the board still measures and streams.
    static FLASH: StaticCell<crate::f4_flash::SharedFlash> = StaticCell::new();
    let flash: &'static crate::f4_flash::SharedFlash =
        FLASH.init(crate::f4_flash::shared(dp.FLASH));
    #[cfg(feature = "field-logger")]
    let mut field_log = {
        use crate::f4_flash::LogRegion;
        use crate::field_log::{FieldLog, Schedule};
        LogRegion::new(flash).and_then(|r| FieldLog::mount(r, Schedule::Prepared).ok())
    };
    // The settings: read before sampling starts (a read never erases).
    let (settings, store) = stored_settings(flash);

    let gpioa = dp.GPIOA.split(&mut rcc);
    let gpiob = dp.GPIOB.split(&mut rcc);
    let gpioc = dp.GPIOC.split(&mut rcc);
    let dma2 = StreamsTuple::new(dp.DMA2, &mut rcc);

    // Results link: USART1 TX on PA9 and RX on PA10, both by DMA.
    let Ok(serial) = Serial::new(
        dp.USART1,
        (gpioa.pa9.into_alternate(), gpioa.pa10.into_alternate()),
        serial::Config::default()
            .baudrate(crate::config::BAUD.bps())
            .dma(serial::config::DmaConfig::TxRx),
        &mut rcc,
    ) else {
        halt()
    };
    let (tx, rx) = serial.split();
    let rx_buf = RX_BUFFER.take();
    let rx_written = sys::DmaWritten::of(rx_buf);
    let mut rx_transfer = Transfer::init_peripheral_to_memory(
        dma2.2,
        rx,
        rx_buf,
        None,
        DmaConfig::default().memory_increment(true),
    );
    sys::set_circular(&mut rx_transfer);
    rx_transfer.start(|_| {});
    let [tx_a, tx_b] = TX_BUFFERS.take();
    let uart_transfer = Transfer::init_memory_to_peripheral(
        dma2.7,
        tx,
        sys::TxChunk::new(tx_a),
        None,
        DmaConfig::default().memory_increment(true),
    );
    let uart = DmaUart {
        transfer: uart_transfer,
        filling: Some(sys::TxChunk::new(tx_b)),
        busy: false,
        rx: RxRing {
            transfer: rx_transfer,
            buf: rx_written,
            pos: 0,
        },
    };

    // ADC1: 16 inputs in one scan per TIM2 update, DMA in double-buffer mode.
    let adc_config = AdcConfig::default()
        .scan(Scan::Enabled)
        .continuous(Continuous::Single)
        .external_trigger(TriggerMode::RisingEdge, ExternalTrigger::Tim_2_trgo)
        .dma(AdcDma::Continuous);
    let mut adc = Adc::new(dp.ADC1, true, adc_config, &mut rcc);
    let st = SampleTime::Cycles_28;
    adc.configure_channel(&gpioa.pa0.into_analog(), Sequence::One, st);
    adc.configure_channel(&gpioa.pa1.into_analog(), Sequence::Two, st);
    adc.configure_channel(&gpioa.pa2.into_analog(), Sequence::Three, st);
    adc.configure_channel(&gpioa.pa3.into_analog(), Sequence::Four, st);
    adc.configure_channel(&gpioa.pa4.into_analog(), Sequence::Five, st);
    adc.configure_channel(&gpioa.pa5.into_analog(), Sequence::Six, st);
    adc.configure_channel(&gpioa.pa6.into_analog(), Sequence::Seven, st);
    adc.configure_channel(&gpioa.pa7.into_analog(), Sequence::Eight, st);
    adc.configure_channel(&gpiob.pb0.into_analog(), Sequence::Nine, st);
    adc.configure_channel(&gpiob.pb1.into_analog(), Sequence::Ten, st);
    adc.configure_channel(&gpioc.pc0.into_analog(), Sequence::Eleven, st);
    adc.configure_channel(&gpioc.pc1.into_analog(), Sequence::Twelve, st);
    adc.configure_channel(&gpioc.pc2.into_analog(), Sequence::Thirteen, st);
    adc.configure_channel(&gpioc.pc3.into_analog(), Sequence::Fourteen, st);
    adc.configure_channel(&gpioc.pc4.into_analog(), Sequence::Fifteen, st);
    adc.configure_channel(&gpioc.pc5.into_analog(), Sequence::Sixteen, st);
    adc.enable();
    sys::vrefint::setup();
    let mut vref = Vrefint {
        cal: sys::vrefint::calibration(),
        last: None,
    };

    let [dma_a, dma_b, dma_c] = DMA_BUFFERS.take();
    let mut adc_transfer = Transfer::init_peripheral_to_memory(
        dma2.0,
        adc,
        dma_a,
        Some(dma_b),
        DmaConfig::default()
            .memory_increment(true)
            .double_buffer(true)
            .transfer_complete_interrupt(true),
    );

    // The double buffers between the DMA interrupt and the main loop.
    let (full_tx, full_rx) = FULL.take().split();
    let (mut free_tx, free_rx) = FREE.take().split();
    for b in BLOCK_BUFFERS.take().iter_mut() {
        let _ = free_tx.enqueue(b);
    }
    let source = DmaBlockSource {
        buf: None,
        pos: 0,
        channels: capture::CHANNELS as usize,
    };
    let acq = Acquisition::new(source, CycleClock, DMA_FRAMES, full_tx, free_rx);
    adc_transfer.start(|_| {});
    critical_section::with(|cs| {
        ADC_ISR.borrow_ref_mut(cs).replace(AdcIsr {
            transfer: adc_transfer,
            spare: Some(dma_c),
            acq,
        })
    });
    sys::unmask(pac::Interrupt::DMA2_STREAM0);

    // The sample clock: TIM2 update events at the sample rate drive the ADC (TRGO).
    let mut tim = Timer::new(dp.TIM2, &mut rcc);
    tim.set_master_mode(pac::tim2::cr2::MMS::Update);
    let mut counter = tim.counter_hz();
    if counter.start(capture::SAMPLE_RATE_HZ.Hz()).is_err() {
        halt()
    }

    // The link lives in a static, built apart (not on the main loop's stack).
    static LINK: StaticCell<Link<DmaUart>> = StaticCell::new();
    let Some(link) = crate::link::link_in(&LINK, uart, capture::SAMPLE_RATE_HZ) else {
        halt()
    };
    let mut pipe = Pipeline::new(chain, full_rx, free_tx, link, CycleClock);
    pipe.set_supply(&mut vref);
    #[cfg(feature = "field-logger")]
    if let Some(l) = field_log.as_mut() {
        pipe.set_tap(l);
    }
    pipe.set_settings(
        settings,
        store.map(|s| s as &mut dyn crate::settings::SettingsSink),
    );
    pipe.start();
    loop {
        pipe.serve_commands(COMMAND_BYTES_PER_LOOP);
        if pipe.step() {
            continue;
        }
        let t0 = CycleClock.now();
        // Sleep unless a block arrived since the check (WFI wakes on the pending interrupt
        // even with interrupts masked); received bytes are read at the next wake-up.
        cortex_m::interrupt::free(|_| {
            if !pipe.ready() {
                cortex_m::asm::wfi();
            }
        });
        pipe.idled(CycleClock.now().wrapping_sub(t0));
    }
}

/// The stored settings (the capture's defaults when nothing readable is stored) and the
/// store for changes (none when its sectors cannot be mounted: the board then runs on the
/// defaults and keeps no change across a power cycle).
#[inline(never)]
fn stored_settings(
    flash: &'static crate::f4_flash::SharedFlash,
) -> (Settings, Option<&'static mut SettingsStore<SettingsRegion>>) {
    static STORE: StaticCell<SettingsStore<SettingsRegion>> = StaticCell::new();
    let defaults = Settings::defaults(crate::config::DEVICE_ID, capture::WINDOW);
    let Some(store) = SettingsRegion::new(flash).and_then(|r| SettingsStore::mount(r).ok()) else {
        return (defaults, None);
    };
    let store = STORE.init(store);
    let (settings, _) = store.load(defaults);
    (settings, Some(store))
}

/// Stop here (a debugger shows where); the watchdog, if enabled, resets the board.
fn halt() -> ! {
    loop {
        cortex_m::asm::bkpt();
    }
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    cortex_m::interrupt::disable();
    halt()
}
