//! A simulated ADC for the emulated board: an `embedded-hal` 1.0 [`SpiDevice`] and a
//! data-ready [`InputPin`] that speak the protocol documented in [`crate::adc`] and serve
//! the embedded capture, so the real driver ([`crate::adc::Adc`]) runs unchanged in QEMU.
//!
//! [`start_conversion`] plays the conversion-start pulse that a hardware timer gives on a
//! real board: it latches the next frame of the capture and pulls DRDY low. Reading the
//! frame (command [`READ_FRAME`], then the words MSB first) releases DRDY. A conversion
//! started while a frame still waits overwrites it and is counted as missed, as a real
//! device would lose it. Register writes are accepted and kept.

use crate::adc::{READ_FRAME, WRITE_REGISTER};
use core::convert::Infallible;
use core::sync::atomic::{AtomicBool, AtomicU32, Ordering};
use embedded_hal::digital::{ErrorType as PinErrorType, InputPin};
use embedded_hal::spi::{self, ErrorType, Operation, SpiDevice};

static CONVERTED: AtomicBool = AtomicBool::new(false);
static FINISHED: AtomicBool = AtomicBool::new(false);
static MISSED: AtomicU32 = AtomicU32::new(0);

/// Start a conversion (the timer's CONVST pulse). Returns false once the capture is over.
pub fn start_conversion() -> bool {
    if FINISHED.load(Ordering::Relaxed) {
        return false;
    }
    if CONVERTED.swap(true, Ordering::AcqRel) {
        MISSED.fetch_add(1, Ordering::Relaxed);
    }
    true
}

/// True once every frame of the capture has been converted and read.
pub fn finished() -> bool {
    FINISHED.load(Ordering::Relaxed) && !CONVERTED.load(Ordering::Relaxed)
}

/// Conversions overwritten before they were read.
pub fn missed() -> u32 {
    MISSED.load(Ordering::Relaxed)
}

/// The data-ready line of the simulated device (active low).
#[derive(Debug, Default)]
pub struct SimDrdy;

impl PinErrorType for SimDrdy {
    type Error = Infallible;
}

impl InputPin for SimDrdy {
    fn is_high(&mut self) -> Result<bool, Infallible> {
        Ok(!CONVERTED.load(Ordering::Acquire))
    }

    fn is_low(&mut self) -> Result<bool, Infallible> {
        Ok(CONVERTED.load(Ordering::Acquire))
    }
}

/// A transaction the simulated device does not understand.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SimSpiError;

impl spi::Error for SimSpiError {
    fn kind(&self) -> spi::ErrorKind {
        spi::ErrorKind::Other
    }
}

/// The simulated device on its SPI bus.
#[derive(Debug)]
pub struct SimAdc {
    samples: &'static [i16],
    channels: usize,
    pos: usize,
    registers: [u16; 8],
}

impl SimAdc {
    /// A device that converts the frames of `samples` (interleaved, `channels` per frame),
    /// one per [`start_conversion`].
    pub fn new(samples: &'static [i16], channels: usize) -> Self {
        CONVERTED.store(false, Ordering::Relaxed);
        FINISHED.store(samples.len() < channels.max(1), Ordering::Relaxed);
        SimAdc {
            samples,
            channels: channels.max(1),
            pos: 0,
            registers: [0; 8],
        }
    }

    /// The value last written to register `reg`.
    pub fn register(&self, reg: u8) -> Option<u16> {
        self.registers.get(reg as usize).copied()
    }

    fn shift_out(&mut self, buf: &mut [u8]) -> Result<(), SimSpiError> {
        let frame = self.channels;
        if buf.len() != 2 * frame {
            return Err(SimSpiError);
        }
        let src = self
            .samples
            .get(self.pos..self.pos + frame)
            .ok_or(SimSpiError)?;
        for (d, v) in buf.chunks_exact_mut(2).zip(src) {
            d.copy_from_slice(&v.to_be_bytes());
        }
        self.pos += frame;
        CONVERTED.store(false, Ordering::Release);
        if self.pos + frame > self.samples.len() {
            FINISHED.store(true, Ordering::Relaxed);
        }
        Ok(())
    }
}

impl ErrorType for SimAdc {
    type Error = SimSpiError;
}

impl SpiDevice<u8> for SimAdc {
    fn transaction(&mut self, ops: &mut [Operation<'_, u8>]) -> Result<(), SimSpiError> {
        match ops {
            [Operation::Write([READ_FRAME]), Operation::Read(buf)] => self.shift_out(buf),
            [Operation::Write([cmd, hi, lo])] if *cmd & WRITE_REGISTER != 0 => {
                let reg = (*cmd & 0x7f) as usize;
                let slot = self.registers.get_mut(reg).ok_or(SimSpiError)?;
                *slot = u16::from_be_bytes([*hi, *lo]);
                Ok(())
            }
            _ => Err(SimSpiError),
        }
    }
}
