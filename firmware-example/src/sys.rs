//! The only module with `unsafe` code (the crate root denies it everywhere else).
//!
//! - [`RegBlock`]: volatile access to one memory-mapped peripheral's registers. A block is
//!   handed out once per peripheral by [`take`], so no two drivers alias a register; each
//!   access is one `read_volatile`/`write_volatile` in one unsafe block, bounds- and
//!   alignment-checked against the block's size.
//! - Stack painting: [`paint_stack`] fills the free stack with a pattern at boot,
//!   [`stack_high_water`] finds how deep the stack went.
//! - Emulated board only: the semihosting command line ([`semihosting_cmdline`]) and the
//!   HardFault handler (cortex-m-rt requires it to be an `unsafe fn`).

#[cfg(feature = "emulated-mps2")]
use core::sync::atomic::{AtomicU32, Ordering};

/// Registers of one peripheral: `len` bytes from `base`.
#[cfg(feature = "emulated-mps2")]
#[derive(Debug)]
pub struct RegBlock {
    base: usize,
    len: usize,
}

#[cfg(feature = "emulated-mps2")]
impl RegBlock {
    /// Read the 32-bit register at byte offset `off` (0 for an offset outside the block).
    #[inline]
    pub fn read(&self, off: usize) -> u32 {
        if off % 4 != 0 || off + 4 > self.len {
            return 0;
        }
        let p = (self.base + off) as *const u32;
        // SAFETY: `p` lies inside the register block of a peripheral that exists on this
        // machine (see `Device`), is 4-byte aligned, and this block was handed out once.
        unsafe { core::ptr::read_volatile(p) }
    }

    /// Write the 32-bit register at byte offset `off` (ignored outside the block).
    #[inline]
    pub fn write(&self, off: usize, value: u32) {
        if off % 4 != 0 || off + 4 > self.len {
            return;
        }
        let p = (self.base + off) as *mut u32;
        // SAFETY: as in `read`; register writes have no effect on Rust-visible memory.
        unsafe { core::ptr::write_volatile(p, value) }
    }
}

/// A read-only view of one register of a [`RegBlock`] (a counter, a status), for a
/// second reader such as an interrupt handler: reads have no side effects on these.
#[cfg(feature = "emulated-mps2")]
#[derive(Clone, Copy, Debug)]
pub struct RoReg {
    addr: usize,
}

#[cfg(feature = "emulated-mps2")]
impl RoReg {
    /// Read the register.
    #[inline]
    pub fn read(&self) -> u32 {
        // SAFETY: made by `RegBlock::read_only` from a checked, aligned offset of a block
        // that exists on this machine; a volatile read of a side-effect-free register.
        unsafe { core::ptr::read_volatile(self.addr as *const u32) }
    }
}

#[cfg(feature = "emulated-mps2")]
impl RegBlock {
    /// A read-only view of the register at `off` (offset 0 when `off` is out of range).
    pub fn read_only(&self, off: usize) -> RoReg {
        let off = if off % 4 != 0 || off + 4 > self.len {
            0
        } else {
            off
        };
        RoReg {
            addr: self.base + off,
        }
    }
}

/// Memory-mapped peripherals of the emulated board (mps2-an386) that the firmware drives
/// itself (the real board's go through its HAL).
#[cfg(feature = "emulated-mps2")]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Device {
    /// CMSDK APB timer 0 (the free-running clock).
    Timer0,
    /// CMSDK APB timer 1 (spare).
    Timer1,
    /// CMSDK APB UART 0 (the results link; QEMU's first `-serial`).
    Uart0,
    /// CMSDK APB UART 1 (the field log's read-out; QEMU's second `-serial`).
    Uart1,
}

#[cfg(feature = "emulated-mps2")]
impl Device {
    const fn base(self) -> usize {
        match self {
            Device::Timer0 => 0x4000_0000,
            Device::Timer1 => 0x4000_1000,
            Device::Uart0 => 0x4000_4000,
            Device::Uart1 => 0x4000_5000,
        }
    }

    const fn bit(self) -> u32 {
        match self {
            Device::Timer0 => 1,
            Device::Timer1 => 2,
            Device::Uart0 => 4,
            Device::Uart1 => 8,
        }
    }
}

#[cfg(feature = "emulated-mps2")]
static TAKEN: AtomicU32 = AtomicU32::new(0);

/// The register block of `device`, once; `None` if it was taken before.
#[cfg(feature = "emulated-mps2")]
pub fn take(device: Device) -> Option<RegBlock> {
    let old = TAKEN.fetch_or(device.bit(), Ordering::AcqRel);
    (old & device.bit() == 0).then_some(RegBlock {
        base: device.base(),
        len: 0x1000,
    })
}

const PAINT: u32 = 0x5AA5_C33C;
/// The stack is painted (and scanned) this far below its top at most: enough to see any
/// usage that fits the firmware's RAM budget, and quick to paint on a machine with MiBs.
pub const STACK_WATCH_BYTES: usize = 256 * 1024;

extern "C" {
    static __sheap: u32;
    static _stack_start: u32;
}

fn stack_bounds() -> (usize, usize) {
    // Only the addresses of the linker symbols are taken, never their contents.
    let (heap, top) = (
        core::ptr::addr_of!(__sheap) as usize,
        core::ptr::addr_of!(_stack_start) as usize,
    );
    (heap.max(top.saturating_sub(STACK_WATCH_BYTES)), top)
}

/// Paint the free stack below the current stack pointer. Call before any interrupt source
/// is enabled (first thing in `main`, or before the acquisition starts).
#[inline(never)]
pub fn paint_stack() {
    let (low, _) = stack_bounds();
    let sp = cortex_m::register::msp::read() as usize;
    let mut p = (low + 3) & !3;
    // Leave this function's own frame (and a margin) alone.
    while p + 256 < sp {
        // SAFETY: [low, sp - 256) is free stack: below every live frame, above .bss and
        // .uninit (`__sheap`), and no interrupt handler runs yet to use it.
        unsafe { core::ptr::write_volatile(p as *mut u32, PAINT) };
        p += 4;
    }
}

/// Deepest stack use since [`paint_stack`], bytes (saturates at [`STACK_WATCH_BYTES`]).
pub fn stack_high_water() -> usize {
    let (low, top) = stack_bounds();
    let mut p = (low + 3) & !3;
    while p < top {
        // SAFETY: an aligned read of RAM between the heap start and the stack top.
        let v = unsafe { core::ptr::read_volatile(p as *const u32) };
        if v != PAINT {
            break;
        }
        p += 4;
    }
    top - p
}

/// Bytes of `.data`, `.bss` and `.uninit` (static RAM), from the linker symbols.
pub fn static_ram_bytes() -> usize {
    extern "C" {
        static __sdata: u32;
    }
    // Addresses of linker symbols only.
    let (start, end) = (
        core::ptr::addr_of!(__sdata) as usize,
        core::ptr::addr_of!(__sheap) as usize,
    );
    end - start
}

/// The command line QEMU passes through semihosting (`-append "..."`), if any.
#[cfg(feature = "emulated-mps2")]
pub fn semihosting_cmdline(buf: &mut [u8]) -> Option<&str> {
    #[repr(C)]
    struct Block {
        ptr: *mut u8,
        len: usize,
    }
    let mut block = Block {
        ptr: buf.as_mut_ptr(),
        len: buf.len(),
    };
    let arg = core::ptr::addr_of_mut!(block) as usize;
    // SAFETY: SYS_GET_CMDLINE writes at most `len` bytes to `ptr` and the length back into
    // the block, both of which live for the call. Only valid under a semihosting host
    // (the emulated board always has one).
    let r = unsafe { cortex_m_semihosting::syscall1(cortex_m_semihosting::nr::GET_CMDLINE, arg) };
    // SAFETY: reading back the block the host wrote.
    let len = unsafe { core::ptr::read_volatile(core::ptr::addr_of!(block.len)) };
    if r != 0 || len > buf.len() {
        return None;
    }
    let s = core::str::from_utf8(buf.get(..len)?).ok()?;
    Some(s.trim_end_matches('\0').trim())
}

/// A file on the semihosting host (the emulated board's stand-in for flash that survives
/// a power cycle: see `host_nor.rs`).
#[cfg(feature = "emulated-mps2")]
pub mod host_file {
    use cortex_m_semihosting::{nr, syscall};

    /// Open `path` (a NUL-terminated byte string) in binary read-write mode, created
    /// empty when `create`; the host's handle.
    pub fn open(path: &[u8], create: bool) -> Option<usize> {
        if path.last() != Some(&0) {
            return None;
        }
        let mode = if create {
            nr::open::RW_TRUNC_BINARY
        } else {
            nr::open::RW_BINARY
        };
        let args = [path.as_ptr() as usize, mode, path.len() - 1];
        // SAFETY: SYS_OPEN reads `len` bytes of the path, which lives for the call.
        let r = unsafe { syscall(nr::OPEN, &args) };
        (r as isize >= 0).then_some(r)
    }

    /// Move to byte `pos` of the file; true on success.
    pub fn seek(fd: usize, pos: usize) -> bool {
        let args = [fd, pos];
        // SAFETY: SYS_SEEK takes two words by value.
        unsafe { syscall(nr::SEEK, &args) == 0 }
    }

    /// Read `buf.len()` bytes at the file position; true when all were read.
    pub fn read(fd: usize, buf: &mut [u8]) -> bool {
        let args = [fd, buf.as_mut_ptr() as usize, buf.len()];
        // SAFETY: SYS_READ writes at most `len` bytes into `buf`, which lives for the
        // call; it returns the bytes *not* read.
        unsafe { syscall(nr::READ, &args) == 0 }
    }

    /// Write `buf` at the file position; true when all was written.
    pub fn write(fd: usize, buf: &[u8]) -> bool {
        let args = [fd, buf.as_ptr() as usize, buf.len()];
        // SAFETY: SYS_WRITE reads `len` bytes of `buf`, which lives for the call; it
        // returns the bytes *not* written.
        unsafe { syscall(nr::WRITE, &args) == 0 }
    }

    /// The file's length in bytes.
    pub fn len(fd: usize) -> Option<usize> {
        // SAFETY: SYS_FLEN takes the handle.
        let r = unsafe { syscall(nr::FLEN, &fd) };
        (r as isize >= 0).then_some(r)
    }
}

/// A hard fault on the emulated board: say where, and exit QEMU with failure.
#[cfg(feature = "emulated-mps2")]
#[cortex_m_rt::exception]
unsafe fn HardFault(ef: &cortex_m_rt::ExceptionFrame) -> ! {
    cortex_m_semihosting::hprintln!("hard fault at pc {:#010x}", ef.pc());
    loop {
        cortex_m_semihosting::debug::exit(cortex_m_semihosting::debug::EXIT_FAILURE);
    }
}

/// Unmask an interrupt in the NVIC (the real board's DMA interrupt).
#[cfg(feature = "board-stm32f4")]
pub fn unmask(irq: stm32f4xx_hal::pac::Interrupt) {
    // SAFETY: called once at start-up, after the state the handler takes over was put in
    // its critical-section cell; unmasking cannot break a critical section in progress.
    unsafe { cortex_m::peripheral::NVIC::unmask(irq) }
}

/// A buffer a DMA writes while the CPU reads it (the UART receiver's circular buffer):
/// its address and length, taken before the buffer was handed to the DMA. Bytes are read
/// volatile, and only those behind the DMA's write position (the caller's rule).
#[cfg(feature = "board-stm32f4")]
pub struct DmaWritten {
    ptr: *const u8,
    len: usize,
}

#[cfg(feature = "board-stm32f4")]
impl DmaWritten {
    /// The written view of `buf` (a static the DMA owns from now on).
    pub fn of(buf: &[u8]) -> Self {
        DmaWritten {
            ptr: buf.as_ptr(),
            len: buf.len(),
        }
    }

    /// Byte `i`, `None` past the end.
    pub fn get(&self, i: usize) -> Option<u8> {
        // SAFETY: `ptr` is a static buffer of `len` bytes that lives for ever (the DMA
        // transfer owning it is never released) and `i < len`; a volatile read of a byte
        // the DMA may write next is at worst stale, and the caller reads only written ones.
        (i < self.len).then(|| unsafe { core::ptr::read_volatile(self.ptr.add(i)) })
    }
}

/// Put the receiver's DMA stream in circular mode (RM0383: the transfer count reloads at
/// the end of the buffer and the stream goes on), before the transfer starts.
#[cfg(feature = "board-stm32f4")]
pub fn set_circular(t: &mut crate::board_stm32f4::RxTransfer) {
    use stm32f4xx_hal::dma::traits::Stream;
    // SAFETY: only the CIRC bit of a stream that is not enabled yet is changed; the HAL's
    // transfer keeps owning the stream, the peripheral and the buffer.
    unsafe { t.stream().set_circular_mode(true) }
}

/// Bytes for a UART transmit DMA: a static buffer and how much of it to send. The DMA
/// reads `deref()` (the filled part), whose address never moves.
#[cfg(feature = "board-stm32f4")]
pub struct TxChunk {
    buf: &'static mut [u8],
    len: usize,
}

#[cfg(feature = "board-stm32f4")]
impl TxChunk {
    /// An empty chunk over `buf`.
    pub fn new(buf: &'static mut [u8]) -> Self {
        TxChunk { buf, len: 0 }
    }

    /// Append as much of `bytes` as fits; returns how much did.
    pub fn extend(&mut self, bytes: &[u8]) -> usize {
        let n = bytes.len().min(self.buf.len() - self.len);
        self.buf[self.len..self.len + n].copy_from_slice(&bytes[..n]);
        self.len += n;
        n
    }

    /// True when nothing is in it.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// True when it cannot take another byte.
    pub fn is_full(&self) -> bool {
        self.len == self.buf.len()
    }

    /// Empty it.
    pub fn clear(&mut self) {
        self.len = 0;
    }
}

#[cfg(feature = "board-stm32f4")]
impl core::ops::Deref for TxChunk {
    type Target = [u8];
    fn deref(&self) -> &[u8] {
        &self.buf[..self.len]
    }
}

// SAFETY: `deref` points into a `'static` buffer that the chunk owns exclusively; moving the
// chunk does not move the bytes, so the address the DMA was given stays valid.
#[cfg(feature = "board-stm32f4")]
unsafe impl stable_deref_trait::StableDeref for TxChunk {}

/// Execute exactly `2 * iterations` instructions (a `subs`/`bne` loop), to calibrate the
/// clock against the instruction count (QEMU `-icount`).
#[inline(never)]
pub fn instruction_loop(iterations: u32) {
    if iterations == 0 {
        return;
    }
    // SAFETY: a register-only countdown loop; touches no memory and no stack.
    unsafe {
        core::arch::asm!(
            "2:",
            "subs {0}, {0}, #1",
            "bne 2b",
            inout(reg) iterations => _,
            options(nomem, nostack),
        );
    }
}

/// The STM32F411's internal reference voltage (VREFINT) on ADC1 channel 17, converted by
/// the ADC's injected group beside the regular scan that the DMA drains (the HAL drives
/// the regular group only; the injected group's registers are used here alone).
///
/// From the reference manual RM0383 (STM32F411xC/E): TSVREFE in ADC_CCR connects VREFINT
/// to channel 17; with JL = 0 in ADC_JSQR the injected sequence converts the one channel
/// in JSQ4 (not JSQ1); JSWSTART in ADC_CR2 starts it, JEOC in ADC_SR marks its end and
/// ADC_JDR1 holds the code. A software-started injected conversion interrupts a regular
/// scan, which resumes afterwards. From the datasheet DS10314 (STM32F411xC/E): VREFINT is
/// 1.21 V typical, it needs at least 10 µs of sampling (the longest sampling time, 480
/// ADC clock cycles, gives that at an ADC clock up to 48 MHz), and the factory
/// calibration VREFINT_CAL, the raw 12-bit code of VREFINT taken at VDDA = 3.3 V and
/// 30 °C, is the half-word at 0x1FFF_7A2A in system memory.
#[cfg(feature = "board-stm32f4")]
pub mod vrefint {
    use stm32f4xx_hal::pac;

    /// Address of VREFINT_CAL (DS10314, "Internal reference voltage calibration values").
    const VREFINT_CAL: usize = 0x1FFF_7A2A;

    /// VDDA at which VREFINT_CAL was taken, mV.
    pub const CAL_VDDA_MV: u32 = 3_300;

    fn adc() -> &'static pac::adc1::RegisterBlock {
        // SAFETY: ADC1's register block exists at this fixed address on the part. The
        // regular group's registers belong to the HAL's driver (through its DMA
        // transfer); the functions here touch the injected group's registers, VREFINT's
        // sampling time and its enable bit, which that driver never writes.
        unsafe { &*pac::ADC1::ptr() }
    }

    /// Enable VREFINT and set up the injected group to convert it (one conversion,
    /// channel 17, 480 cycles), then start the first conversion.
    pub fn setup() {
        // SAFETY: as in `adc`; ADC_CCR is shared by the ADCs, and only TSVREFE and VBATE
        // (VBAT must be off for VREFINT to be read, RM0383) are changed.
        let common = unsafe { &*pac::ADC_COMMON::ptr() };
        common
            .ccr()
            .modify(|_, w| w.vbate().clear_bit().tsvrefe().set_bit());
        let adc = adc();
        adc.smpr1().modify(|_, w| w.smp17().cycles480());
        // SAFETY: 17 is a valid channel number for the 5-bit JSQ4 field.
        adc.jsqr()
            .write(|w| unsafe { w.jl().bits(0).jsq4().bits(17) });
        start();
    }

    /// Start a conversion of VREFINT (software trigger of the injected group).
    pub fn start() {
        adc().cr2().modify(|_, w| w.jswstart().set_bit());
    }

    /// The code of a finished conversion (and clear its flag); None while none finished.
    pub fn take() -> Option<u16> {
        let adc = adc();
        if adc.sr().read().jeoc().bit_is_clear() {
            return None;
        }
        let code = adc.jdr1().read().jdata().bits();
        adc.sr().modify(|_, w| w.jeoc().clear());
        Some(code)
    }

    /// The factory calibration VREFINT_CAL, a 12-bit code; None if it reads as erased
    /// (0xFFFF) or 0.
    pub fn calibration() -> Option<u16> {
        // SAFETY: an aligned half-word read of system memory (read-only OTP area), present
        // on every STM32F411.
        let v = unsafe { core::ptr::read_volatile(VREFINT_CAL as *const u16) };
        (v != 0 && v != 0xFFFF).then_some(v)
    }
}
