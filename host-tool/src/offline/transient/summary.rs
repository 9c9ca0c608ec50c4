//! The text summary of a transient replay printed at its end.

use super::indicators::flow_indicators;
use super::outputs::TransientFiles;
use super::{TransientRun, REVERSED_ARRIVAL};
use crate::offline::replay_common as common;
use crate::offline::run_summary::RunTotals;
use crate::shared::layout::Layout;
use crate::shared::probe_summary::{ProbeTally, SummaryRule};
use crate::shared::rig::HostRecord;
use frothline_core::decay::DecayModel;
use frothline_core::{ProfileRecord, WindowPolicy};
use std::fmt::Write as _;

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

/// The replay summary of a transient run (its records in [`TransientRun::windows`] and
/// [`TransientRun::profiles`]).
pub fn summary(run: &TransientRun, files: Option<&TransientFiles>) -> String {
    summary_with(run, &RecordCounts::of(run), files)
}

/// The replay summary of a transient run whose records were counted in `counts`.
pub fn summary_with(
    run: &TransientRun,
    counts: &RecordCounts,
    files: Option<&TransientFiles>,
) -> String {
    let mut s = String::new();
    let secs = run.secs(run.frames as f64);
    let _ = writeln!(
        s,
        "{} frames at {} Hz ({secs:.3} s), {} stations, {} windows, {} profile slices",
        run.frames,
        run.sample_rate,
        run.stations.len(),
        counts.windows,
        counts.slices.iter().map(|s| s.count).sum::<u64>()
    );
    if let WindowPolicy::AfterFront { frames } = run.policy {
        let _ = writeln!(
            s,
            "windows of {:.1} ms from each station's front arrival",
            run.secs(frames as f64) * 1e3
        );
    }
    for (i, st) in run.stations.iter().enumerate() {
        let a = run.station_front(i);
        let arrival = run.arrival_s(i);
        let arrived = a.map_or(0, |a| a.front.arrived.count_ones());
        let flags: Vec<&str> = a
            .map(|a| a.front.flags.names().collect())
            .unwrap_or_default();
        let _ = writeln!(
            s,
            "station {} (x = {} mm, {} probes): front at {}, {} probes arrived{}",
            st.name,
            st.x_mm,
            st.probes.len(),
            arrival.map_or("-".into(), |t| format!("{t:.4} s")),
            arrived,
            if flags.is_empty() {
                String::new()
            } else {
                format!(" [{}]", flags.join("|"))
            }
        );
        if let Some(a) = a {
            for (l, &g) in st.probes.iter().enumerate() {
                if a.dead & (1 << l) != 0 {
                    let _ = writeln!(
                        s,
                        "  probe {} looks dead (no interface while the flow reached the probes \
                         above it): left out of the profiles",
                        run.layout.probes[g].name
                    );
                }
            }
        }
        if let Some(c) = run.celerity_from_previous(i) {
            let _ = writeln!(s, "  front celerity from the previous station: {c:.3} m/s");
        }
        if run.arrived_before_previous(i) {
            let _ = writeln!(
                s,
                "  [{REVERSED_ARRIVAL}] the front reached this station before the one upstream: \
                 check the x_mm of the stations (or swapped probes)"
            );
        }
        let no_slices = StationSlices::default();
        let slices = counts.slices.get(i).unwrap_or(&no_slices);
        let _ = writeln!(
            s,
            "  {:>10} {:>9} {:>7} {:>7} {:>9}",
            "since [s]", "Y90 [mm]", "Cmean", "n", "d [mm]"
        );
        let f4 = |v: Option<f32>, w: usize, p: usize| {
            v.map_or(format!("{:>w$}", "-"), |v| format!("{v:>w$.p$}"))
        };
        for p in &slices.first {
            let _ = writeln!(
                s,
                "  {:>10.3} {} {} {} {}",
                run.secs(p.since_front as f64),
                f4(p.fit.y90_mm, 9, 1),
                f4(p.fit.mean_void_fraction, 7, 3),
                f4(p.fit.power_law.map(|x| x.exponent), 7, 3),
                f4(p.fit.equivalent_depth_mm, 9, 1),
            );
        }
        let listed = slices.first.len() as u64;
        if slices.count > listed {
            let _ = writeln!(s, "  … {} more slices", slices.count - listed);
        }
        if let Some(m) = slices.decay {
            let _ = writeln!(
                s,
                "  decay of Cmean: C0 {:.3} -> Cf {:.3}, tau {:.3} s{}",
                m.initial,
                m.final_level,
                m.tau_s,
                m.tau_star
                    .map_or(String::new(), |t| format!(" ({t:.2} sqrt(d/g))"))
            );
        }
    }
    let ind = flow_indicators(run);
    let _ = writeln!(
        s,
        "water at {} °C: density {}, viscosity {}",
        ind.water_temperature_c,
        ind.density_kg_m3
            .map_or("-".into(), |v| format!("{v:.2} kg/m³")),
        ind.viscosity_pa_s
            .map_or("-".into(), |v| format!("{:.4} mPa s", v * 1e3)),
    );
    match (ind.reference_velocity, ind.reynolds) {
        (Some((u, src)), Some(re)) => {
            let _ = writeln!(
                s,
                "front velocity {u:.3} m/s ({src}); Reynolds number {re:.3e}"
            );
        }
        _ => {
            let _ = writeln!(
                s,
                "Reynolds number not computed (needs two stations or reference_depth_m)"
            );
        }
    }
    if let Some(c) = &ind.caution {
        let _ = writeln!(s, "caution: {c}");
    }
    s.push_str(&common::tally_table(&run.layout, &counts.tallies));
    if let Some(f) = files {
        let _ = writeln!(
            s,
            "wrote {}, {}, {}, {}, {}",
            f.windows.display(),
            f.profile.display(),
            f.fronts.display(),
            f.stations.display(),
            f.flow.display()
        );
    }
    s
}
