//! Driver for an external multi-channel 16-bit simultaneous-sampling ADC on SPI, with a
//! data-ready line, generic over `embedded-hal` 1.0 ([`SpiDevice`] and [`InputPin`]).
//!
//! # The assumed device
//!
//! The shape of the 8-channel 16-bit simultaneous-sampling SAR converters sold for data
//! acquisition, which several vendors make; check the data sheet of the part you use and
//! adapt the constants below (or set [`AdcConfig::command`] to `None` for a part that clocks
//! the frame out without a command).
//!
//! - **Conversion**: all channels are sampled at one instant on the rising edge of a
//!   conversion-start input (CONVST), driven by a hardware timer at the sample rate (not
//!   by this driver: software jitter would become sampling jitter).
//! - **Data ready** (`DRDY`, active low): falls when a converted frame waits in the
//!   device, rises when the read of that frame starts. The firmware reads one frame per
//!   falling edge (from that pin's interrupt, or from a timer tick just after the
//!   conversion time, as the emulated board does).
//! - **Read a frame**: one SPI transaction (chip select low throughout): the host writes the
//!   command byte [`READ_FRAME`] (`0x10`); the device then shifts out `channels` words of
//!   16 bits, **most significant byte first, two's complement**, channel 0 first.
//!   Daisy-chained devices behave as one device with 8 channels per package: 16 tips =
//!   two packages = 16 words, so the frame is `1 + 32` bytes on the bus.
//! - **Write a register**: one transaction of three bytes `[0x80 | reg, value_hi, value_lo]`
//!   (oversampling ratio, input range, ...: see [`Adc::write_register`]).
//! - **Bus**: SPI mode and clock rate belong to the [`SpiDevice`] (parts of this class use
//!   mode 0 or 2, up to tens of MHz). At 16 channels and 20 kHz a frame is 264 bits, so
//!   the bus needs at least 5.3 Mbit/s plus gaps; 10 MHz or more leaves room.
//!
//! Errors carry the bus's or the pin's error and expose a [`kind`](AdcError::kind) in the
//! style of `embedded-hal`'s own error kinds.

use crate::source::SampleSource;
use embedded_hal::digital::{self, InputPin};
use embedded_hal::spi::{self, Operation, SpiDevice};

/// Command byte: read the converted frame.
pub const READ_FRAME: u8 = 0x10;
/// Command bit: write register `reg` (`WRITE_REGISTER | reg`, then the 16-bit value).
pub const WRITE_REGISTER: u8 = 0x80;
/// Most channels one frame may hold (two daisy-chained 8-channel packages).
pub const MAX_ADC_CHANNELS: usize = 16;

/// How the device is read.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AdcConfig {
    /// Channels per frame (1 to [`MAX_ADC_CHANNELS`]).
    pub channels: u8,
    /// The command byte written before a frame is clocked out, or `None` for a device that
    /// shifts its frame out without one.
    pub command: Option<u8>,
}

impl AdcConfig {
    /// `channels` channels read with [`READ_FRAME`].
    pub const fn new(channels: u8) -> Self {
        AdcConfig {
            channels,
            command: Some(READ_FRAME),
        }
    }
}

/// An error of the ADC driver, over the bus error `S` and the pin error `P`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AdcError<S, P> {
    /// The SPI transaction failed.
    Spi(S),
    /// Reading the data-ready pin failed.
    Pin(P),
    /// The configuration cannot be read (0 or too many channels).
    BadConfig,
}

/// What kind of error an [`AdcError`] is, without its payload. (No `defmt::Format`:
/// `embedded-hal`'s kinds implement it only for defmt 0.3; log it with `Debug2Format`.)
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum AdcErrorKind {
    /// A bus error, of this kind.
    Spi(spi::ErrorKind),
    /// A pin error, of this kind.
    Pin(digital::ErrorKind),
    /// A bad configuration.
    BadConfig,
}

impl<S: spi::Error, P: digital::Error> AdcError<S, P> {
    /// The kind of the error.
    pub fn kind(&self) -> AdcErrorKind {
        match self {
            AdcError::Spi(e) => AdcErrorKind::Spi(e.kind()),
            AdcError::Pin(e) => AdcErrorKind::Pin(e.kind()),
            AdcError::BadConfig => AdcErrorKind::BadConfig,
        }
    }
}

impl<S: core::fmt::Debug, P: core::fmt::Debug> core::fmt::Display for AdcError<S, P> {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            AdcError::Spi(e) => write!(f, "ADC bus error: {e:?}"),
            AdcError::Pin(e) => write!(f, "ADC data-ready pin error: {e:?}"),
            AdcError::BadConfig => write!(f, "ADC: 1 to {MAX_ADC_CHANNELS} channels"),
        }
    }
}

impl<S: core::fmt::Debug, P: core::fmt::Debug> core::error::Error for AdcError<S, P> {}

/// The error type of an `Adc<SPI, DRDY>`.
pub type ErrorOf<SPI, DRDY> =
    AdcError<<SPI as spi::ErrorType>::Error, <DRDY as digital::ErrorType>::Error>;

/// An external SPI ADC with a data-ready pin.
#[derive(Debug)]
pub struct Adc<SPI, DRDY> {
    spi: SPI,
    drdy: DRDY,
    config: AdcConfig,
    raw: [u8; 2 * MAX_ADC_CHANNELS],
    frames: u32,
}

impl<SPI: SpiDevice<u8>, DRDY: InputPin> Adc<SPI, DRDY> {
    /// A driver for the device on `spi` whose data-ready line is `drdy`.
    pub fn new(spi: SPI, drdy: DRDY, config: AdcConfig) -> Result<Self, ErrorOf<SPI, DRDY>> {
        if config.channels == 0 || config.channels as usize > MAX_ADC_CHANNELS {
            return Err(AdcError::BadConfig);
        }
        Ok(Adc {
            spi,
            drdy,
            config,
            raw: [0; 2 * MAX_ADC_CHANNELS],
            frames: 0,
        })
    }

    /// True when a converted frame waits (DRDY low).
    pub fn data_ready(&mut self) -> Result<bool, ErrorOf<SPI, DRDY>> {
        self.drdy.is_low().map_err(AdcError::Pin)
    }

    /// Read the waiting frame into `frame` (its first `channels` samples), whether or not
    /// DRDY says one waits.
    pub fn read_frame(&mut self, frame: &mut [i16]) -> Result<(), ErrorOf<SPI, DRDY>> {
        let n = self.config.channels as usize;
        let Some(out) = frame.get_mut(..n) else {
            return Err(AdcError::BadConfig);
        };
        let raw = &mut self.raw[..2 * n];
        match self.config.command {
            Some(cmd) => self
                .spi
                .transaction(&mut [Operation::Write(&[cmd]), Operation::Read(raw)]),
            None => self.spi.read(raw),
        }
        .map_err(AdcError::Spi)?;
        for (d, s) in out.iter_mut().zip(raw.chunks_exact(2)) {
            *d = i16::from_be_bytes([s[0], s[1]]);
        }
        self.frames = self.frames.wrapping_add(1);
        Ok(())
    }

    /// Write a device register (for example the oversampling ratio or the input range).
    pub fn write_register(&mut self, reg: u8, value: u16) -> Result<(), ErrorOf<SPI, DRDY>> {
        let [hi, lo] = value.to_be_bytes();
        self.spi
            .write(&[WRITE_REGISTER | (reg & 0x7f), hi, lo])
            .map_err(AdcError::Spi)
    }

    /// Frames read so far (wrapping).
    pub fn frames_read(&self) -> u32 {
        self.frames
    }

    /// Give back the bus and the pin.
    pub fn release(self) -> (SPI, DRDY) {
        (self.spi, self.drdy)
    }
}

impl<SPI: SpiDevice<u8>, DRDY: InputPin> SampleSource for Adc<SPI, DRDY> {
    type Error = ErrorOf<SPI, DRDY>;

    fn channels(&self) -> usize {
        self.config.channels as usize
    }

    /// One frame per data-ready (the device holds one converted frame at a time).
    fn fill(&mut self, block: &mut [i16]) -> Result<usize, Self::Error> {
        if block.len() < self.config.channels as usize || !self.data_ready()? {
            return Ok(0);
        }
        self.read_frame(block)?;
        Ok(1)
    }
}
