//! Kind 0x0A, levels in use: the air and water levels every tip of the device uses now,
//! and whether each is fixed (stored in the device's settings, set by a calibration) or
//! learnt from the signal.
//!
//! A device sends it right after every description (power-on, a window change, a
//! DescribeRequest) and after every SetLevels or Relearn it carries out, so a host reads a
//! device's levels without waiting for a window to close: a calibration reads back what it
//! set, before a run and after a power cycle. Tip-health frames (kind 0x09) give the levels
//! of each closed window besides.

use crate::wire::tip_health::TipLevels;
use crate::wire::MAX_PROBES;
use heapless::Vec;
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

/// One tip's levels.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TipSetting {
    /// The air and water levels in use, counts rounded to the nearest count; None while a
    /// learning tip has learnt none.
    pub levels: Option<TipLevels>,
    /// True if the levels are fixed (from the settings), false if learnt and tracked.
    pub fixed: bool,
}

/// The tips of one probe.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ProbeLevels {
    /// The leading tip.
    pub leading: TipSetting,
    /// The trailing tip of a dual-tip probe.
    pub trailing: Option<TipSetting>,
}

/// Kind 0x0A body: every probe of the description, in its order (the index is the probe).
pub type LevelsInUse = Vec<ProbeLevels, MAX_PROBES>;

fn tip(levels: Option<crate::levels::Levels>, fixed: bool) -> TipSetting {
    TipSetting {
        levels: levels.map(|l| TipLevels {
            air: crate::wire::quant::counts(l.air),
            water: crate::wire::quant::counts(l.water),
        }),
        fixed,
    }
}

/// The levels every probe of `chain` uses now (at most [`MAX_PROBES`] probes).
pub fn levels_in_use<
    const P: usize,
    const L: usize,
    const D: usize,
    const S: usize,
    const T: usize,
    const Q: usize,
>(
    chain: &crate::chain::GenericChain<P, L, D, S, T, Q>,
) -> LevelsInUse {
    let mut v = LevelsInUse::new();
    for probe in 0..chain.probe_count().min(MAX_PROBES) {
        let Some((lead, lead_fixed)) = chain.tip_levels(probe, false) else {
            break;
        };
        let trailing = chain
            .tip_levels(probe, true)
            .map(|(l, fixed)| tip(l, fixed));
        // Cannot fail: at most MAX_PROBES probes.
        let _ = v.push(ProbeLevels {
            leading: tip(lead, lead_fixed),
            trailing,
        });
    }
    v
}

/// A tip as its configuration sets it: fixed levels, or none yet for a learning tip.
fn from_config(t: &crate::probe_config::TipConfig) -> TipSetting {
    match t.levels {
        crate::probe_config::LevelSource::Fixed { air, water } => TipSetting {
            levels: Some(TipLevels { air, water }),
            fixed: true,
        },
        crate::probe_config::LevelSource::Learnt => TipSetting {
            levels: None,
            fixed: false,
        },
    }
}

/// The levels a chain configured with `config` starts with (a device outside a run, whose
/// chain is not running): fixed tips with their levels, learning tips with none.
pub fn levels_of_config<const P: usize>(config: &crate::config::ChainConfig<P>) -> LevelsInUse {
    config
        .probes
        .iter()
        .take(MAX_PROBES)
        .map(|p| ProbeLevels {
            leading: from_config(&p.leading),
            trailing: p.trailing.as_ref().map(from_config),
        })
        .collect()
}
