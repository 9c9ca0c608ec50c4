//! frothline firmware example: the core's signal chain on a Cortex-M4F.
//!
//! ```text
//! SampleSource (SPI ADC on embedded-hal 1.0 | capture in flash)
//!   -> timer interrupt fills block A            acquire.rs
//!   -> spsc queue (lock-free) -> main loop       pipeline.rs
//!   -> frothline_core::Chain<8, 64>              (the same chain a host replay runs)
//!   -> records -> frothline_core::wire frames    link.rs
//!   -> UART                                      cmsdk_uart.rs | board_stm32f4.rs
//! ```
//!
//! Boards (one cargo feature each, exactly one):
//! - `emulated-mps2` (default): QEMU's mps2-an386 (Cortex-M4F). Replays the capture
//!   compiled into the image, or reads it through the SPI ADC driver from a simulated
//!   device; checks its records against the digest of a host replay and exits QEMU
//!   through semihosting with the verdict (see `mps2.rs` and docs/firmware.md).
//! - `board-stm32f4`: a NUCLEO-F411RE: timer-triggered ADC with DMA into the double
//!   buffers, results out of USART1 by DMA (see `board_stm32f4.rs`).
//!
//! `field-logger` (with either board): the surge capture's station chain and the field
//! logger ([`field_log`]), on a NOR flash stand-in in the emulator, on sectors 6 and 7 of
//! the MCU's flash on the board (`f4_flash.rs`, which also holds the board's settings
//! store in sectors 1 to 3).
//!
//! `unsafe` lives in `sys.rs` alone (register access, stack painting, one semihosting call).
#![no_std]
#![no_main]
#![deny(unsafe_code)]
#![warn(missing_docs)]

#[cfg(all(feature = "emulated-mps2", feature = "board-stm32f4"))]
compile_error!(
    "choose one board: `emulated-mps2` (the default) or `board-stm32f4` (with --no-default-features)"
);
#[cfg(not(any(feature = "emulated-mps2", feature = "board-stm32f4")))]
compile_error!("choose a board: feature `emulated-mps2` (the default) or `board-stm32f4`");

pub mod acquire;
pub mod adc;
pub mod capture;
pub mod commands;
pub mod config;
#[cfg(feature = "self-check")]
pub mod digest;
#[cfg(feature = "field-logger")]
pub mod field_log;
pub mod link;
pub mod pipeline;
pub mod replay;
pub mod settings;
pub mod source;
#[allow(unsafe_code)]
pub mod sys;

#[cfg(feature = "emulated-mps2")]
pub mod cmsdk_timer;
#[cfg(feature = "emulated-mps2")]
pub mod cmsdk_uart;
#[cfg(feature = "emulated-mps2")]
pub mod host_nor;
#[cfg(feature = "emulated-mps2")]
mod mps2;
#[cfg(all(feature = "field-logger", feature = "emulated-mps2"))]
pub mod ram_nor;
#[cfg(feature = "emulated-mps2")]
pub mod sim_adc;
#[cfg(all(feature = "field-logger", feature = "emulated-mps2"))]
pub mod stall_nor;

#[cfg(feature = "board-stm32f4")]
mod board_stm32f4;
#[cfg(feature = "board-stm32f4")]
pub mod f4_flash;

use config::FwChain;
use static_cell::ConstStaticCell;

/// Build the chain of the capture's configuration, in static memory. Call it once.
///
/// The chain is tens of KiB: its static is the empty chain (all zero bytes, in `.bss`),
/// configured in place (`configure` builds one probe's state at a time), never built on
/// the stack and moved.
#[inline(never)]
pub fn make_chain() -> Result<&'static mut FwChain, frothline_core::ConfigError> {
    static CHAIN: ConstStaticCell<FwChain> = ConstStaticCell::new(FwChain::empty());
    let cfg = capture::chain_config()?;
    let chain = CHAIN.take();
    chain.configure(cfg)?;
    Ok(chain)
}
