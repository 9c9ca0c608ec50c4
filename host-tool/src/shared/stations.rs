//! Station chains: one core chain per station of a transient layout (probes with equal
//! `x_mm`), each with a front detector and a delay ring, so that its first window starts at
//! the station's front arrival.
//!
//! ```text
//! layout stations (Layout::stations) -> StationInfo (name, x, probes bottom up)
//!   -> station_configs: one ChainConfig + StationConfig per station
//!   -> StationChain (the core's Chain with a RING_SAMPLES delay ring)
//! ```
//!
//! The transient replay and the simulated device build their chains here, so both run the
//! same chains on the same samples.

use crate::shared::layout::{Layout, Phase};
use crate::shared::rig::{chain_config, ToCounts, HOST_LAGS, MAX_PROBES};
use crate::shared::window_spec::WindowSpec;
use frothline_core::station::default_delay_frames;
use frothline_core::{ChainConfig, ConfigError, StationConfig, WindowPolicy};

/// Samples of each station chain's delay ring: 64 channels × 1024 frames, or 16 channels
/// × 4096 frames (the default delay at 40 kHz is 1600 frames).
pub const RING_SAMPLES: usize = 1 << 16;

/// The chain type of one station.
pub type StationChain = frothline_core::Chain<MAX_PROBES, HOST_LAGS, RING_SAMPLES>;

/// Default window (slice) length after the front, s.
pub const DEFAULT_SLICE_S: f64 = 0.05;

/// One station of a layout.
#[derive(Debug, Clone, PartialEq)]
pub struct StationInfo {
    /// Name: `S1`, `S2`, … in increasing `x_mm`.
    pub name: String,
    /// Streamwise position, mm.
    pub x_mm: f64,
    /// Layout probe indices, bottom up (the chain's probe order).
    pub probes: Vec<usize>,
}

/// The front-relative policy for `spec` at `sample_rate`: fixed durations count from the
/// front, `whole` becomes [`DEFAULT_SLICE_S`] windows from the front, bubble-count windows
/// pass (a station chain starts them at the front).
pub fn transient_policy(
    spec: &WindowSpec,
    sample_rate: u32,
    layout: &Layout,
) -> Result<WindowPolicy, String> {
    let by_name = |name: &str| layout.probes.iter().position(|p| p.name == name);
    Ok(match spec.policy(sample_rate, by_name)? {
        WindowPolicy::Whole => WindowPolicy::AfterFront {
            frames: ((DEFAULT_SLICE_S * sample_rate as f64).round() as u32).max(1),
        },
        WindowPolicy::Frames(frames) => WindowPolicy::AfterFront { frames },
        other => other,
    })
}

/// The stations of `layout`, named `S1`, `S2`, … in increasing `x_mm`.
pub fn stations(layout: &Layout) -> Vec<StationInfo> {
    layout
        .stations()
        .into_iter()
        .enumerate()
        .map(|(i, (x_mm, probes))| StationInfo {
            name: format!("S{}", i + 1),
            x_mm,
            probes,
        })
        .collect()
}

/// The chain configuration of every station (same channels, detector and window for all).
pub fn station_configs(
    layout: &Layout,
    channels: usize,
    sample_rate: u32,
    policy: WindowPolicy,
    units: &dyn ToCounts,
) -> Result<Vec<(StationInfo, ChainConfig<MAX_PROBES>)>, ConfigError> {
    let fs = sample_rate as f32;
    let before_air = layout.flow.phase_before_front == Phase::Air;
    let mut out = Vec::new();
    for st in stations(layout) {
        if st.probes.len() > MAX_PROBES {
            return Err(ConfigError::BadStation);
        }
        // The station's probes as a layout of their own: the one unit conversion of
        // `rig::chain_config`, applied to them.
        let mut sub = layout.clone();
        sub.probes = st
            .probes
            .iter()
            .map(|&i| layout.probes[i].clone())
            .collect();
        // (Validated there without the station, so with a whole-record window; the policy
        // and the station are set below and checked again when the chain is built.)
        let mut cfg = chain_config(&sub, channels, sample_rate, WindowPolicy::Whole, units)?;
        cfg.window = policy;
        let mut station = StationConfig::new(fs, before_air);
        station.reference_depth_m = layout.flow.reference_depth_m.map_or(f32::NAN, |d| d as f32);
        // The delay: the default, within what the ring holds for this channel count.
        let room = (RING_SAMPLES / channels.max(1)).saturating_sub(1) as u32;
        station.delay_frames = default_delay_frames(&station.front).min(room).max(1);
        for &i in &st.probes {
            let _ = station
                .elevations_mm
                .push(layout.probes[i].elevation_mm as f32);
        }
        if let WindowPolicy::Bubbles { probe, .. } = &mut cfg.window {
            // The reference probe, if it is in this station; else the station's lowest.
            *probe = st
                .probes
                .iter()
                .position(|&i| i == *probe as usize)
                .unwrap_or(0) as u8;
        }
        cfg.station = Some(station);
        out.push((st, cfg));
    }
    Ok(out)
}

/// True if `layout` is a transient layout (replayed by this module).
pub fn is_transient(layout: &Layout) -> bool {
    layout.flow.kind == crate::shared::layout::FlowKind::Transient
}
