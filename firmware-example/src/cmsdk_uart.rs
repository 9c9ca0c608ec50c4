//! The CMSDK APB UART of the emulated board (mps2-an386 UART0 at 0x4000_4000), as an
//! `embedded-io` 0.6 byte stream: [`Write`] for the results, [`Read`] for host commands.
//!
//! Registers (32-bit, offsets from the base):
//!
//! | offset | name     | use |
//! |--------|----------|-----|
//! | 0x00   | DATA     | write: byte to send; read: byte received |
//! | 0x04   | STATE    | bit 0 TX buffer full, bit 1 RX buffer full, bit 2 TX overrun, bit 3 RX overrun (write 1 to clear) |
//! | 0x08   | CTRL     | bit 0 TX enable, bit 1 RX enable (bits 2.. interrupt enables) |
//! | 0x0C   | INTSTATUS / INTCLEAR | |
//! | 0x10   | BAUDDIV  | PCLK / baud, at least 16 |
//!
//! TX must be enabled in CTRL or QEMU drops the bytes. QEMU maps its `-serial` options to
//! the machine's UARTs in order, so the first `-serial` is this UART.

use crate::sys::RegBlock;
use embedded_io::{ErrorKind, ErrorType, Read, ReadReady, Write, WriteReady};

const DATA: usize = 0x00;
const STATE: usize = 0x04;
const CTRL: usize = 0x08;
const BAUDDIV: usize = 0x10;

const TX_FULL: u32 = 1 << 0;
const RX_FULL: u32 = 1 << 1;
const RX_OVERRUN: u32 = 1 << 3;
const TX_ENABLE: u32 = 1 << 0;
const RX_ENABLE: u32 = 1 << 1;

/// A UART error.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum UartError {
    /// A received byte was lost (the previous one was not read in time).
    RxOverrun,
}

impl embedded_io::Error for UartError {
    fn kind(&self) -> ErrorKind {
        ErrorKind::Other
    }
}

impl core::fmt::Display for UartError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str("UART receive overrun")
    }
}

impl core::error::Error for UartError {}

/// The UART, transmitter and receiver enabled.
#[derive(Debug)]
pub struct CmsdkUart {
    regs: RegBlock,
}

impl CmsdkUart {
    /// Enable the UART at `pclk_hz / baud` (at least 16, as the hardware requires).
    pub fn new(regs: RegBlock, pclk_hz: u32, baud: u32) -> Self {
        let div = (pclk_hz / baud.max(1)).max(16);
        regs.write(CTRL, 0);
        regs.write(BAUDDIV, div);
        regs.write(CTRL, TX_ENABLE | RX_ENABLE);
        CmsdkUart { regs }
    }

    fn state(&self) -> u32 {
        self.regs.read(STATE)
    }
}

impl ErrorType for CmsdkUart {
    type Error = UartError;
}

impl Write for CmsdkUart {
    /// Blocks until the first byte is taken, then sends as many as the buffer takes.
    fn write(&mut self, buf: &[u8]) -> Result<usize, UartError> {
        let mut n = 0;
        for &b in buf {
            if self.state() & TX_FULL != 0 {
                if n > 0 {
                    break;
                }
                while self.state() & TX_FULL != 0 {}
            }
            self.regs.write(DATA, b as u32);
            n += 1;
        }
        Ok(n)
    }

    fn flush(&mut self) -> Result<(), UartError> {
        while self.state() & TX_FULL != 0 {}
        Ok(())
    }
}

impl WriteReady for CmsdkUart {
    fn write_ready(&mut self) -> Result<bool, UartError> {
        Ok(self.state() & TX_FULL == 0)
    }
}

impl Read for CmsdkUart {
    /// Blocks until a byte arrives, then returns the bytes waiting.
    fn read(&mut self, buf: &mut [u8]) -> Result<usize, UartError> {
        if buf.is_empty() {
            return Ok(0);
        }
        let mut n = 0;
        while n < buf.len() {
            let s = self.state();
            if s & RX_OVERRUN != 0 {
                self.regs.write(STATE, RX_OVERRUN);
                return Err(UartError::RxOverrun);
            }
            if s & RX_FULL == 0 {
                if n > 0 {
                    break;
                }
                continue;
            }
            buf[n] = self.regs.read(DATA) as u8;
            n += 1;
        }
        Ok(n)
    }
}

impl ReadReady for CmsdkUart {
    fn read_ready(&mut self) -> Result<bool, UartError> {
        Ok(self.state() & RX_FULL != 0)
    }
}
