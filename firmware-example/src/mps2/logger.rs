//! The field log of the field-logger modes: a NOR flash stand-in in RAM (its erases
//! stalled as a real part's in modes `erase` and `erase-inside`), and the end-of-run checks.

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
