//! What a transient replay's summary says of its window records and profile slices,
//! counted as they are written (the command line keeps no list of them).

use super::TransientRun;
use crate::offline::replay_common as common;
use crate::offline::run_summary::RunTotals;
use crate::shared::layout::Layout;
use crate::shared::probe_summary::{ProbeTally, SummaryRule};
use crate::shared::rig::HostRecord;
use frothline_core::decay::DecayModel;
use frothline_core::ProfileRecord;

/// What the summary says of a run's window records and profile slices, gathered as they
/// are written (the command line keeps no list of them).
#[derive(Clone, Debug)]
pub struct RecordCounts {
    /// Window records.
    pub windows: u64,
    /// Running totals per probe.
    pub totals: RunTotals,
    /// Per-probe tallies under the default rule.
    pub tallies: Vec<ProbeTally>,
    /// Per station: the slices.
    pub slices: Vec<StationSlices>,
}

/// The profile slices of one station, as the summary shows them.
#[derive(Clone, Debug, Default)]
pub struct StationSlices {
    /// Slices.
    pub count: u64,
    /// The first few, in time order.
    pub first: Vec<ProfileRecord>,
    /// The last decay model of Cmean.
    pub decay: Option<DecayModel>,
}

/// Slices the summary lists per station.
const LISTED_SLICES: usize = 6;

impl RecordCounts {
    /// Nothing counted yet, for the probes and stations of `run`.
    pub fn new(run: &TransientRun) -> RecordCounts {
        let probes = run.layout.probes.len();
        RecordCounts {
            windows: 0,
            totals: RunTotals::new(probes),
            tallies: vec![ProbeTally::new(); probes],
            slices: vec![StationSlices::default(); run.stations.len()],
        }
    }

    /// Count one profile slice of station `station`.
    pub fn add_slice(&mut self, station: usize, p: &ProfileRecord) {
        if let Some(st) = self.slices.get_mut(station) {
            st.count += 1;
            if st.first.len() < LISTED_SLICES {
                st.first.push(*p);
            }
            if let Some(m) = p.decay.and_then(|d| d.model) {
                st.decay = Some(m);
            }
        }
    }

    /// Count one record (`probe` = layout index).
    pub fn add(&mut self, r: &HostRecord, layout: &Layout, sample_rate: u32) {
        self.windows += 1;
        self.totals.add(r);
        let p = r.probe as usize;
        if let Some(tally) = self.tallies.get_mut(p) {
            let spacing = layout.probes.get(p).and_then(|p| p.tip_spacing_mm);
            tally.add(
                &common::window_figures(r, sample_rate, spacing),
                &SummaryRule::default(),
            );
        }
    }

    /// The counts of the records a run keeps in [`TransientRun::windows`] and
    /// [`TransientRun::profiles`].
    pub fn of(run: &TransientRun) -> RecordCounts {
        let mut c = RecordCounts::new(run);
        for w in &run.windows {
            c.add(w, &run.layout, run.sample_rate);
        }
        for (st, p) in &run.profiles {
            c.add_slice(*st, p);
        }
        c
    }
}
