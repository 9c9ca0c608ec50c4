//! The device's settings (window policy, per-tip fixed levels, logger configuration, device
//! id) and their store on NOR flash, which survives power cycles.
//!
//! The store reuses the core's power-loss-safe frame log ([`frothline_core::logbook`]):
//! every change appends one settings record; at power-on the newest committed record wins.
//! The region has three pages so that the page before the head still counts as part of the
//! log while a fresh head is opened (an erase or a header write cut by a power loss leaves
//! the previous record readable). A record that does not decode (another layout version,
//! a record cut by a power loss is already refused by the log) is skipped, so a device
//! always starts with the newest settings it can read, or with the capture's defaults.
//!
//! Record layout (little-endian, version 1), 88 bytes:
//!
//! ```text
//! magic "FSET" u32 | version u8 | device_id u16 | logger_armed u8
//! window: kind u8 (0 whole, 1 frames, 2 bubbles, 3 after front) | a u32 | probe u8 | max u32 (0: none)
//! levels: 8 probes x 2 tips x (fixed u8 | air i16 | water i16)
//! ```
//!
//! (The log keeps its own length, CRC-32 and commit word around each record.)

use crate::config::PROBES;
use embedded_storage::nor_flash::NorFlash;
use frothline_core::logbook::{LogError, Logbook, MAX_RECORD_BYTES};
use frothline_core::{ChainConfig, LevelSource, Polarity, WindowPolicy};

const MAGIC: u32 = 0x5445_5346; // "FSET"
const VERSION: u8 = 1;
/// Bytes of a settings record.
pub const RECORD_BYTES: usize = 4 + 1 + 2 + 1 + 10 + PROBES * 2 * 5;

/// The settings a device keeps across power cycles.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Settings {
    /// The device id written into every wire frame.
    pub device_id: u16,
    /// The window policy of the next chain (as the host set it; a station chain counts
    /// fixed windows from the front, see [`Settings::apply`]).
    pub window: WindowPolicy,
    /// Fixed levels (air, water) per probe and tip (leading, trailing); `None`: as the
    /// capture's configuration says.
    pub levels: [[Option<(i16, i16)>; 2]; PROBES],
    /// The field logger is armed at power-on.
    pub logger_armed: bool,
}

impl Settings {
    /// The defaults: the capture's window, its levels, the logger armed.
    pub const fn defaults(device_id: u16, window: WindowPolicy) -> Self {
        Settings {
            device_id,
            window,
            levels: [[None; 2]; PROBES],
            logger_armed: true,
        }
    }

    /// Apply the settings to a chain configuration of the capture.
    pub fn apply<const P: usize>(&self, cfg: &mut ChainConfig<P>) {
        cfg.window = front_relative(self.window, cfg.station.is_some(), cfg.window);
        for (p, lv) in cfg.probes.iter_mut().zip(self.levels.iter()) {
            if let Some((air, water)) = lv[0] {
                p.leading.levels = LevelSource::Fixed { air, water };
            }
            if let (Some(t), Some((air, water))) = (p.trailing.as_mut(), lv[1]) {
                t.levels = LevelSource::Fixed { air, water };
            }
        }
    }

    /// Fix one tip's levels, checked against the configuration: a probe or tip it does not
    /// have, equal levels, levels against the tip's polarity are refused (`false`).
    pub fn set_levels<const P: usize>(
        &mut self,
        cfg: &ChainConfig<P>,
        probe: u8,
        trailing: bool,
        air: i16,
        water: i16,
    ) -> bool {
        let Some(pc) = cfg.probes.get(probe as usize) else {
            return false;
        };
        let tip = if trailing {
            match pc.trailing.as_ref() {
                Some(t) => t,
                None => return false,
            }
        } else {
            &pc.leading
        };
        let air_high = tip.polarity == Polarity::AirHigh;
        if air == water || (air > water) != air_high {
            return false;
        }
        let Some(slot) = self
            .levels
            .get_mut(probe as usize)
            .and_then(|l| l.get_mut(trailing as usize))
        else {
            return false;
        };
        *slot = Some((air, water));
        true
    }

    /// The record bytes.
    pub fn encode(&self) -> [u8; RECORD_BYTES] {
        let mut b = [0u8; RECORD_BYTES];
        b[0..4].copy_from_slice(&MAGIC.to_le_bytes());
        b[4] = VERSION;
        b[5..7].copy_from_slice(&self.device_id.to_le_bytes());
        b[7] = self.logger_armed as u8;
        let (kind, a, probe, max) = match self.window {
            WindowPolicy::Whole => (0u8, 0u32, 0u8, 0u32),
            WindowPolicy::Frames(f) => (1, f, 0, 0),
            WindowPolicy::Bubbles {
                count,
                probe,
                max_frames,
            } => (2, count, probe, max_frames.unwrap_or(0)),
            WindowPolicy::AfterFront { frames } => (3, frames, 0, 0),
            // A policy this layout version cannot write: stored as one whole window.
            _ => (0, 0, 0, 0),
        };
        b[8] = kind;
        b[9..13].copy_from_slice(&a.to_le_bytes());
        b[13] = probe;
        b[14..18].copy_from_slice(&max.to_le_bytes());
        let mut at = 18;
        for tips in &self.levels {
            for tip in tips {
                let (fixed, air, water) = match tip {
                    Some((a, w)) => (1u8, *a, *w),
                    None => (0, 0, 0),
                };
                b[at] = fixed;
                b[at + 1..at + 3].copy_from_slice(&air.to_le_bytes());
                b[at + 3..at + 5].copy_from_slice(&water.to_le_bytes());
                at += 5;
            }
        }
        b
    }

    /// Settings from record bytes; `None` for another magic, version or length.
    pub fn decode(b: &[u8]) -> Option<Settings> {
        if b.len() != RECORD_BYTES || b.get(0..4)? != MAGIC.to_le_bytes() || *b.get(4)? != VERSION {
            return None;
        }
        let u32_at = |i: usize| -> Option<u32> {
            Some(u32::from_le_bytes(b.get(i..i + 4)?.try_into().ok()?))
        };
        let i16_at = |i: usize| -> Option<i16> {
            Some(i16::from_le_bytes(b.get(i..i + 2)?.try_into().ok()?))
        };
        let device_id = u16::from_le_bytes(b.get(5..7)?.try_into().ok()?);
        let a = u32_at(9)?;
        let max = u32_at(14)?;
        let window = match *b.get(8)? {
            0 => WindowPolicy::Whole,
            1 => WindowPolicy::Frames(a),
            2 => WindowPolicy::Bubbles {
                count: a,
                probe: *b.get(13)?,
                max_frames: (max != 0).then_some(max),
            },
            3 => WindowPolicy::AfterFront { frames: a },
            _ => return None,
        };
        if !window.is_valid() {
            return None;
        }
        let mut levels = [[None; 2]; PROBES];
        let mut at = 18;
        for tips in levels.iter_mut() {
            for tip in tips.iter_mut() {
                *tip = match *b.get(at)? {
                    0 => None,
                    1 => Some((i16_at(at + 1)?, i16_at(at + 3)?)),
                    _ => return None,
                };
                at += 5;
            }
        }
        Some(Settings {
            device_id,
            window,
            levels,
            logger_armed: *b.get(7)? != 0,
        })
    }
}

/// A station chain (transient run) counts fixed windows from the front: `Frames(n)` is
/// `AfterFront { frames: n }` there, and `Whole` keeps the configured slice length.
pub fn front_relative(
    policy: WindowPolicy,
    station: bool,
    configured: WindowPolicy,
) -> WindowPolicy {
    if !station {
        return policy;
    }
    match policy {
        WindowPolicy::Frames(frames) => WindowPolicy::AfterFront { frames },
        WindowPolicy::Whole => match configured {
            WindowPolicy::AfterFront { .. } => configured,
            _ => WindowPolicy::AfterFront { frames: 200 },
        },
        other => other,
    }
}

/// Where changed settings are stored (the pipeline holds it as a trait object, so it does
/// not depend on the flash type).
pub trait SettingsSink {
    /// Store `s`; false when the store failed.
    fn save(&mut self, s: &Settings) -> bool;
}

impl<F: NorFlash> SettingsSink for SettingsStore<F> {
    fn save(&mut self, s: &Settings) -> bool {
        SettingsStore::save(self, s).is_ok()
    }
}

/// Where the settings came from at power-on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Loaded {
    /// A stored record (how many records the store holds).
    Stored(u32),
    /// Nothing readable was stored: the defaults.
    Defaults,
}

/// The settings store over a NOR flash region of at least three erase sectors.
pub struct SettingsStore<F> {
    log: Logbook<F>,
    saves: u32,
}

impl<F: NorFlash> SettingsStore<F> {
    /// Mount the store; fails only on a flash error or a region the log cannot use.
    pub fn mount(flash: F) -> Result<Self, LogError> {
        Ok(SettingsStore {
            log: Logbook::mount(flash)?,
            saves: 0,
        })
    }

    /// The newest readable settings record, or `defaults`.
    pub fn load(&mut self, defaults: Settings) -> (Settings, Loaded) {
        let mut buf = [0u8; MAX_RECORD_BYTES];
        let mut cursor = self.log.cursor();
        let mut newest = None;
        let mut records = 0u32;
        // Bounded: the log holds at most a few hundred records of this size.
        while let Ok(Some(n)) = self.log.read_next(&mut cursor, &mut buf) {
            records = records.saturating_add(1);
            if let Some(s) = buf.get(..n).and_then(Settings::decode) {
                newest = Some(s);
            }
        }
        match newest {
            Some(s) => (s, Loaded::Stored(records)),
            None => (defaults, Loaded::Defaults),
        }
    }

    /// Store `s` (one record appended; committed when this returns `Ok`).
    pub fn save(&mut self, s: &Settings) -> Result<(), LogError> {
        self.log.append(&s.encode())?;
        self.saves = self.saves.saturating_add(1);
        Ok(())
    }

    /// Records saved since power-on.
    pub fn saves(&self) -> u32 {
        self.saves
    }
}
