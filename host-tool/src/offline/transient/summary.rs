//! The text summary of a transient replay printed at its end.

use super::counts::{RecordCounts, StationSlices};
use super::indicators::flow_indicators;
use super::outputs::TransientFiles;
use super::{TransientRun, REVERSED_ARRIVAL};
use crate::offline::replay_common as common;
use frothline_core::WindowPolicy;
use std::fmt::Write as _;

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
