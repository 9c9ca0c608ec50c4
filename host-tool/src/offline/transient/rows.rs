//! The CSV rows of a transient replay: per station, per front and per profile, with the
//! arrival times and celerities they are built from.

use super::{TransientRun, REVERSED_ARRIVAL};
use frothline_core::front::FrontRule;
use frothline_core::profile::ProfileModel;
use frothline_core::station::StationArrival;
use frothline_core::{FrontRecord, ProfileRecord};

fn opt<T: std::fmt::Display>(v: Option<T>) -> String {
    v.map(|v| v.to_string()).unwrap_or_default()
}

impl TransientRun {
    /// Seconds of `frames`.
    pub fn secs(&self, frames: f64) -> f64 {
        frames / self.sample_rate.max(1) as f64
    }

    /// The station record of station `s`.
    pub fn station_front(&self, s: usize) -> Option<&StationArrival> {
        self.fronts.iter().find_map(|f| match &f.record {
            FrontRecord::Station(a) if f.station == s => Some(a),
            _ => None,
        })
    }

    /// The station's arrival, s.
    pub fn arrival_s(&self, s: usize) -> Option<f64> {
        self.station_front(s)
            .and_then(|a| a.front.arrival)
            .map(|f| self.secs(f as f64))
    }

    /// Front celerity between consecutive stations, m/s: `(x_s − x_{s−1}) / (t_s −
    /// t_{s−1})`; `None` for the first station or a missing arrival.
    pub fn celerity_from_previous(&self, s: usize) -> Option<f64> {
        let prev = s.checked_sub(1)?;
        let (a, b) = (
            self.station_front(prev)?.front.arrival?,
            self.station_front(s)?.front.arrival?,
        );
        frothline_core::front::front_celerity_frames(
            self.stations[prev].x_mm as f32,
            a,
            self.stations[s].x_mm as f32,
            b,
            self.sample_rate as f32,
        )
        .map(|v| v as f64)
    }

    /// True when the front reached station `s` before the station upstream of it (a
    /// negative celerity): stations listed in the wrong order, or probes swapped.
    pub fn arrived_before_previous(&self, s: usize) -> bool {
        self.celerity_from_previous(s).is_some_and(|c| c < 0.0)
    }

    /// The front celerity over the whole array (first to last station with an arrival).
    pub fn celerity(&self) -> Option<f64> {
        let with: Vec<(usize, u64)> = (0..self.stations.len())
            .filter_map(|s| Some((s, self.station_front(s)?.front.arrival?)))
            .collect();
        let (&(s0, a0), &(s1, a1)) = (with.first()?, with.last()?);
        if s0 == s1 {
            return None;
        }
        frothline_core::front::front_celerity_frames(
            self.stations[s0].x_mm as f32,
            a0,
            self.stations[s1].x_mm as f32,
            a1,
            self.sample_rate as f32,
        )
        .map(|v| v as f64)
    }

    /// One `profile.csv` row.
    pub fn profile_row(&self, s: usize, p: &ProfileRecord) -> Vec<String> {
        let f = &p.fit;
        let pl = f.power_law;
        let ex = f.exponential;
        let model = f.better_model.map(ProfileModel::name);
        let tr = f.trapezoid;
        let flags: Vec<&str> = f.flags.names().collect();
        let info = &self.stations[s];
        let names = |mask: u32| -> Vec<String> {
            info.probes
                .iter()
                .enumerate()
                .filter(|(i, _)| mask & (1 << i) != 0)
                .map(|(_, &g)| self.layout.probes[g].name.clone())
                .collect()
        };
        let mut left_out: Vec<String> = names(p.dead)
            .into_iter()
            .map(|n| format!("{n}:dead"))
            .collect();
        left_out.extend(names(p.unlearnt).into_iter().map(|n| format!("{n}:levels")));
        let model_d = p.decay.and_then(|d| d.model);
        let decay_flags: Vec<&str> = p
            .decay
            .map(|d| d.flags.names().collect())
            .unwrap_or_default();
        vec![
            info.name.clone(),
            self.secs(p.start as f64).to_string(),
            self.secs(p.end as f64).to_string(),
            self.secs(p.since_front as f64).to_string(),
            opt(f.y90_mm),
            opt(f.mean_void_fraction),
            opt(f.equivalent_depth_mm),
            opt(pl.map(|x| x.exponent)),
            opt(pl.map(|x| x.rmse)),
            f.points_used.to_string(),
            p.slice.to_string(),
            p.partial.to_string(),
            opt(pl.map(|x| x.mean_void_fraction)),
            opt(pl.map(|x| x.mean_diffusivity)),
            opt(ex.map(|x| x.diffusivity)),
            opt(ex.map(|x| x.rmse)),
            opt(ex.map(|x| x.mean_void_fraction)),
            opt(model),
            flags.join("|"),
            left_out.join("|"),
            opt(model_d.map(|m| m.initial)),
            opt(model_d.map(|m| m.final_level)),
            opt(model_d.map(|m| m.tau_s)),
            opt(model_d.and_then(|m| m.tau_star)),
            opt(model_d.map(|m| m.rmse)),
            p.decay_points.to_string(),
            decay_flags.join("|"),
            opt(f.estimate.map(ProfileModel::name)),
            opt(f.errors.y90_mm),
            opt(f.errors.mean_void_fraction),
            opt(f.errors.shape),
            opt(f.errors.equivalent_depth_mm),
            opt(tr.map(|t| t.y90_mm)),
            opt(tr.map(|t| t.mean_void_fraction)),
            opt(tr.map(|t| t.equivalent_depth_mm)),
            opt(tr.and_then(|t| t.errors.mean_void_fraction)),
            opt(pl.map(|x| x.y90_mm)),
            opt(pl.map(|x| x.chi2)),
            opt(ex.map(|x| x.y90_mm)),
            opt(ex.map(|x| x.chi2)),
            opt(ex.and_then(|x| x.errors.shape)),
            if pl.is_some() {
                f.dof.to_string()
            } else {
                String::new()
            },
        ]
    }

    /// `fronts.csv` rows: one per probe of the layout (station order, bottom up).
    pub fn front_rows(&self) -> Vec<Vec<String>> {
        let mut rows = Vec::new();
        for (s, info) in self.stations.iter().enumerate() {
            let st = self.station_front(s);
            let st_arrival = st.and_then(|a| a.front.arrival);
            for (local, &g) in info.probes.iter().enumerate() {
                let bit = 1u32 << local;
                let rec = self.fronts.iter().find_map(|f| match &f.record {
                    FrontRecord::Probe(p) if p.probe as usize == g => Some(*p),
                    _ => None,
                });
                let mut flags = Vec::new();
                if let Some(a) = st {
                    if a.front.first_probe == Some(local as u8) {
                        flags.push("first");
                    }
                    if a.dead & bit != 0 {
                        flags.push("dead");
                    } else if a.front.silent & bit != 0 {
                        flags.push("silent");
                    }
                    if a.front.unconfirmed & bit != 0 {
                        flags.push("unconfirmed");
                    }
                }
                if rec.is_some_and(|r| r.late) {
                    flags.push("late");
                }
                // The probe's arrival is its first contact with the front; the confirmed
                // arrival (the onset of the sustained change) follows at the end.
                rows.push(vec![
                    self.layout.probes[g].name.clone(),
                    info.name.clone(),
                    opt(rec.map(|r| self.secs(r.first_contact as f64))),
                    opt(st_arrival.map(|a| self.secs(a as f64))),
                    opt(rec
                        .zip(st_arrival)
                        .map(|(r, a)| self.secs(r.first_contact as f64 - a as f64))),
                    opt(rec.map(|r| self.secs(r.confirmed_at as f64))),
                    opt(rec.map(|r| match r.rule {
                        FrontRule::Hold => "hold",
                        FrontRule::Burst => "burst",
                    })),
                    opt(rec.map(|r| r.false_starts)),
                    self.layout.probes[g].elevation_mm.to_string(),
                    flags.join("|"),
                    opt(rec.map(|r| self.secs(r.arrival as f64))),
                    opt(rec.map(|r| self.secs(r.first_contact as f64))),
                ]);
            }
        }
        rows
    }

    /// `stations.csv` rows.
    pub fn station_rows(&self) -> Vec<Vec<String>> {
        self.stations
            .iter()
            .enumerate()
            .map(|(s, info)| {
                let st = self.station_front(s);
                let mut flags: Vec<&str> = st
                    .map(|a| a.front.flags.names().collect())
                    .unwrap_or_default();
                if self.arrived_before_previous(s) {
                    flags.push(REVERSED_ARRIVAL);
                }
                vec![
                    info.name.clone(),
                    info.x_mm.to_string(),
                    opt(self.arrival_s(s)),
                    opt(st.and_then(|a| a.origin).map(|o| self.secs(o as f64))),
                    opt(st
                        .and_then(|a| a.front.first_probe)
                        .and_then(|l| info.probes.get(l as usize))
                        .map(|&g| self.layout.probes[g].name.clone())),
                    info.probes.len().to_string(),
                    opt(st.map(|a| a.front.arrived.count_ones())),
                    opt(self.celerity_from_previous(s)),
                    flags.join("|"),
                ]
            })
            .collect()
    }
}
