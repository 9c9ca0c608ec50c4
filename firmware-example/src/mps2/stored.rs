//! The settings store of the emulated board: three 4 KiB sectors of NOR flash kept in a
//! file on the host (`target/firmware/settings.nor`, relative to QEMU's working directory;
//! `scripts/firmware-run.sh` keeps or clears it), so settings survive a reboot of the
//! emulated board. Without the file (QEMU started elsewhere) the board runs on defaults.

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
