//! The unit discharges of each profile slice behind a front: `q_w = ∫ (1 − C) V dy` and
//! `q_a = ∫ C V dy` across a station's probes, from the window records of the slice (the
//! windows that start where the slice starts), with the same fits and depth integral as a
//! steady run's discharge.csv ([`crate::shared::discharge`]).
//!
//! A station chain hands out a slice's window records and its profile together (the same
//! drain), so the records wait here only until their slice's profile comes: a few slices at
//! most, whatever the capture's length.

use crate::shared::discharge::{discharge, ArrayPoint};
use crate::shared::layout::Layout;
use crate::shared::probe_summary::SummaryRule;
use crate::shared::rig::HostRecord;
use std::collections::BTreeMap;

/// Columns appended to a transient replay's profile.csv.
pub const SLICE_DISCHARGE_COLUMNS: &[&str] = &[
    "q_water_m2_s",
    "q_air_m2_s",
    "q_water_above_y90_m2_s",
    "q_air_above_y90_m2_s",
];

/// The discharges of one slice (in the order of its profile record).
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SliceDischarge {
    /// `q_w`, `q_a` below `Y90`, then above it, m²/s; None when the slice's probes gave no
    /// discharge (fewer than three with C, or no trusted velocity).
    pub q: Option<[f64; 4]>,
}

impl SliceDischarge {
    /// The [`SLICE_DISCHARGE_COLUMNS`] cells.
    pub fn cells(&self) -> [String; 4] {
        match self.q {
            Some(q) => q.map(|v| v.to_string()),
            None => Default::default(),
        }
    }
}

/// Window records per station waiting for their slice's profile.
#[derive(Debug, Default)]
pub struct SliceDischarges {
    /// Per station, per window start: (layout probe index, the probe's point).
    pending: Vec<BTreeMap<u64, Vec<(usize, ArrayPoint)>>>,
}

impl SliceDischarges {
    /// Note a window record of station `station` (`probe` = layout index).
    pub fn window(&mut self, station: usize, w: &HostRecord, layout: &Layout, sample_rate: u32) {
        let Some(p) = layout.probes.get(w.probe as usize) else {
            return;
        };
        if self.pending.len() <= station {
            self.pending.resize_with(station + 1, BTreeMap::new);
        }
        let untrusted = SummaryRule::default().untrusted_velocity;
        let v = w
            .correlation
            .as_ref()
            .filter(|_| w.flags.0 & untrusted.0 == 0)
            .and_then(|c| c.velocity_m_s(p.tip_spacing_mm? as f32, sample_rate as f32))
            .map(f64::from);
        self.pending[station].entry(w.start).or_default().push((
            w.probe as usize,
            ArrayPoint {
                name: p.name.clone(),
                y_mm: p.elevation_mm,
                c: w.lead.void_fraction().map(f64::from),
                v_m_s: v,
                dead: false,
            },
        ));
    }

    /// The discharges of the slice of station `station` that starts at frame `start`,
    /// leaving out the probes `dead` names (layout indices: the station's own verdict, a
    /// probe with no interface while the flow reached the probes above it; a tip above the
    /// flow, in air all the time, is a point at C = 1, not a dead probe). The records of
    /// earlier starts (a pre-front record, a slice without a profile) go.
    pub fn slice(
        &mut self,
        station: usize,
        start: u64,
        dead: impl Fn(usize) -> bool,
    ) -> SliceDischarge {
        let Some(p) = self.pending.get_mut(station) else {
            return SliceDischarge::default();
        };
        let points: Vec<ArrayPoint> = p
            .remove(&start)
            .unwrap_or_default()
            .into_iter()
            .map(|(i, mut a)| {
                a.dead = dead(i);
                a
            })
            .collect();
        *p = p.split_off(&start);
        if points.len() < 3 {
            return SliceDischarge::default();
        }
        SliceDischarge {
            q: discharge(&points, None).map(|d| {
                [
                    d.q_water_m2_s,
                    d.q_air_m2_s,
                    d.q_water_above_m2_s,
                    d.q_air_above_m2_s,
                ]
            }),
        }
    }
}
