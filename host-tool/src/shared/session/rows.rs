//! The CSV outputs of a session: the columns of fronts and profiles, and the rows written
//! for each window, front, derived figure, tip health report and profile.

use super::{Session, DEFAULT_RATE_HZ, FRONT_EVENT_GAP_S, MAX_HELD};
use crate::shared::error::{write_err, HostError};
use crate::shared::windows_csv::wire_row;
use frothline_core::wire::quant::{from_exponent, from_fraction, from_spacing};
use frothline_core::wire::{FrontArrival, ProfileFit, WindowResult, PROFILE_ESTIMATES};
use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

/// Columns of a live fronts.csv: the contract of DESIGN.md §3 (the replay's first columns;
/// the wire carries no more).
pub fn front_columns() -> Vec<&'static str> {
    let mut c = crate::shared::transient_columns::FRONT_COLUMNS[..3].to_vec();
    c.extend(crate::shared::runs::RUN_COLUMNS);
    c
}

/// Columns of a live profile.csv: the contract of DESIGN.md §3 (the replay's first ten
/// columns), then `flags`, the estimate the contract columns hold and its standard errors
/// (named as in the replay's profile.csv).
pub fn profile_columns() -> Vec<&'static str> {
    let mut c = crate::shared::transient_columns::PROFILE_COLUMNS[..10].to_vec();
    c.extend([
        "flags",
        "estimate",
        "y90_se_mm",
        "void_fraction_se",
        "exponent_se",
        "equivalent_depth_se_mm",
    ]);
    c.extend(crate::shared::runs::RUN_COLUMNS);
    c
}

fn csv_file(path: &Path, header: &[&str]) -> Result<csv::Writer<BufWriter<File>>, HostError> {
    let f = File::create(path).map_err(write_err(path))?;
    let mut w = csv::Writer::from_writer(BufWriter::new(f));
    w.write_record(header)
        .map_err(|e| write_err(path)(e.into()))?;
    Ok(w)
}

fn opt<T: std::fmt::Display>(v: Option<T>) -> String {
    v.map(|v| v.to_string()).unwrap_or_default()
}

impl Session {
    pub(super) fn window(
        &mut self,
        port: usize,
        device: u16,
        w: WindowResult,
        extras: Option<frothline_core::wire::WindowExtras>,
    ) -> Result<(), HostError> {
        let info = self.devices.entry((port, device)).or_default();
        if info.sample_rate_hz.is_none() && info.held.len() < MAX_HELD {
            info.held.push((w, extras));
            return Ok(());
        }
        self.write_window(port, device, &w, extras.as_ref())
    }

    pub(super) fn write_window(
        &mut self,
        port: usize,
        device: u16,
        w: &WindowResult,
        extras: Option<&frothline_core::wire::WindowExtras>,
    ) -> Result<(), HostError> {
        let meta = self.meta(port, device, w.probe as usize);
        let info = self.devices.get(&(port, device));
        let fs = info.and_then(|d| d.sample_rate_hz);
        let since = info.and_then(|d| {
            let station = d.desc.as_ref()?.probes.get(w.probe as usize)?.station;
            let front = *d.fronts.get(&station)?;
            let fs = d.sample_rate_hz?;
            Some((w.start as f64 - front as f64) / fs)
        });
        // The transit time T is not on the wire, but the device sends V and described the
        // tip spacing s: T = s / V (to the resolution of V, 1 mm/s).
        let transit_s = info
            .and_then(|d| d.desc.as_ref()?.probes.get(w.probe as usize)?.trailing)
            .map(|t| frothline_core::wire::quant::from_spacing(t.spacing) as f64 * 1e-3)
            .zip(w.velocity_m_s().map(f64::from))
            .filter(|(s, v)| *s > 0.0 && *v > 0.0)
            .map(|(s, v)| s / v);
        self.report.windows += 1;
        if fs.is_none() {
            self.report.windows_without_times += 1;
        }
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let mut row = wire_row(w, &meta, fs, since);
        if let (Some(t), Some(i)) = (
            transit_s,
            crate::shared::windows_csv::COLUMNS
                .iter()
                .position(|c| *c == "transit_time_s"),
        ) {
            row[i] = (t as f32).to_string();
        }
        if let Some(x) = extras {
            // The device's own figures (full windows), transit time included.
            crate::shared::windows_csv::fill_extras(&mut row, x);
        }
        row.extend(self.runs.columns(port, device, self.now_us));
        let path = out.dir.join("windows.csv");
        out.windows
            .write_fields(&row)
            .map_err(|e| write_err(path)(e.into()))?;
        out.dirty = true;
        Ok(())
    }

    pub(super) fn front(
        &mut self,
        port: usize,
        device: u16,
        f: &FrontArrival,
    ) -> Result<(), HostError> {
        let name = self.meta(port, device, f.probe as usize).name;
        let station = self.station_name(device, f.station);
        let info = self.devices.entry((port, device)).or_default();
        let fs = info.sample_rate_hz;
        // The station's front is its earliest probe arrival (the core starts the station's
        // windows there); the probes of one front report within moments of each other, and
        // an arrival more than FRONT_EVENT_GAP_S after the stored one is a new front.
        let gap = (fs.unwrap_or(DEFAULT_RATE_HZ) * FRONT_EVENT_GAP_S) as u64;
        info.fronts
            .entry(f.station)
            .and_modify(|a| {
                if f.frame < *a || f.frame > a.saturating_add(gap) {
                    *a = f.frame;
                }
            })
            .or_insert(f.frame);
        self.report.fronts += 1;
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let path = out.dir.join("fronts.csv");
        if out.fronts.is_none() {
            out.fronts = Some(csv_file(&path, &front_columns())?);
            self.report.files.push(path.clone());
        }
        let arrival = fs.map(|fs| (f.frame as f64 / fs).to_string());
        let [run, label, utc] = self.runs.columns(port, device, self.now_us);
        if let Some(w) = out.fronts.as_mut() {
            w.write_record([name, station, arrival.unwrap_or_default(), run, label, utc])
                .map_err(|e| write_err(&path)(e.into()))?;
        }
        out.dirty = true;
        Ok(())
    }

    pub(super) fn derived(
        &mut self,
        port: usize,
        device: u16,
        d: &frothline_core::wire::DerivedResult,
    ) -> Result<(), HostError> {
        let name = self.meta(port, device, d.probe as usize).name;
        let fs = self
            .devices
            .get(&(port, device))
            .and_then(|i| i.sample_rate_hz);
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let path = out.dir.join("derived.csv");
        if out.derived.is_none() {
            let cols: Vec<&str> = crate::shared::derived_csv::COLUMNS
                .iter()
                .chain(crate::shared::runs::RUN_COLUMNS.iter())
                .copied()
                .collect();
            out.derived = Some(csv_file(&path, &cols)?);
            self.report.files.push(path.clone());
        }
        let mut row = crate::shared::derived_csv::row(d, &name, fs);
        row.extend(self.runs.columns(port, device, self.now_us));
        if let Some(w) = out.derived.as_mut() {
            w.write_record(row)
                .map_err(|e| write_err(&path)(e.into()))?;
        }
        out.dirty = true;
        Ok(())
    }

    /// A row of status.csv (kind 0x0C).
    pub(super) fn status(
        &mut self,
        port: usize,
        device: u16,
        s: &frothline_core::wire::DeviceStatus,
    ) -> Result<(), HostError> {
        let Some(csv) = self.status.as_mut() else {
            return Ok(());
        };
        let mut row = crate::shared::status_csv::status_cells(device, s);
        row.extend(self.runs.columns(port, device, self.now_us));
        if csv.write(&row)? {
            self.report.files.push(csv.path().to_path_buf());
        }
        Ok(())
    }

    pub(super) fn tip_health(
        &mut self,
        port: usize,
        device: u16,
        tips: &frothline_core::wire::TipHealth,
    ) -> Result<(), HostError> {
        if self.tips.is_none() {
            return Ok(());
        }
        let fs = self
            .devices
            .get(&(port, device))
            .and_then(|d| d.sample_rate_hz);
        let run = self.runs.columns(port, device, self.now_us);
        let mut rows = Vec::new();
        for r in tips {
            let name = self.meta(port, device, r.probe as usize).name;
            let tips = [
                ("leading", Some(&r.leading)),
                ("trailing", r.trailing.as_ref()),
            ];
            for (which, t) in tips {
                if let Some(t) = t {
                    let mut row = crate::shared::tips_csv::tip_cells(&name, which, r, t, fs);
                    row.extend(run.iter().cloned());
                    rows.push(row);
                }
            }
        }
        if let Some(t) = self.tips.as_mut() {
            if t.write(&rows)? {
                self.report.files.push(t.path().to_path_buf());
            }
        }
        Ok(())
    }

    pub(super) fn profile(
        &mut self,
        port: usize,
        device: u16,
        p: &ProfileFit,
    ) -> Result<(), HostError> {
        let station = self.station_name(device, p.station);
        let info = self.devices.entry((port, device)).or_default();
        let fs = info.sample_rate_hz;
        let front = info.fronts.get(&p.station).copied();
        self.report.profiles += 1;
        let Some(out) = self.out.as_mut() else {
            return Ok(());
        };
        let path = out.dir.join("profile.csv");
        if out.profile.is_none() {
            out.profile = Some(csv_file(&path, &profile_columns())?);
            self.report.files.push(path.clone());
        }
        let secs = |frames: u64| fs.map(|fs| frames as f64 / fs);
        let since = match (front, fs) {
            (Some(f), Some(fs)) => Some((p.slice_start as f64 - f as f64) / fs),
            _ => None,
        };
        let flags: Vec<&str> =
            frothline_core::profile::ProfileFlags(p.flags.min(u16::MAX as u32) as u16)
                .names()
                .collect();
        let row = [
            station,
            opt(secs(p.slice_start)),
            opt(secs(p.slice_start.saturating_add(p.slice_frames as u64))),
            opt(since),
            opt(p.y90.map(|v| v as f32 / 10.0)),
            opt(p.mean_void_fraction.map(from_fraction)),
            opt(p.equivalent_depth.map(|v| v as f32 / 10.0)),
            opt(p.exponent.map(from_exponent)),
            opt(p.fit_rmse.map(from_fraction)),
            p.probes_used.to_string(),
            flags.join("|"),
            PROFILE_ESTIMATES
                .get(p.estimate as usize)
                .filter(|&&e| e != "none")
                .map_or(String::new(), |e| e.to_string()),
            opt(p.y90_se.map(from_spacing)),
            opt(p.mean_void_fraction_se.map(from_fraction)),
            opt(p.exponent_se.map(from_exponent)),
            opt(p.equivalent_depth_se.map(from_spacing)),
        ];
        let row = row
            .into_iter()
            .chain(self.runs.columns(port, device, self.now_us));
        if let Some(w) = out.profile.as_mut() {
            w.write_record(row)
                .map_err(|e| write_err(&path)(e.into()))?;
        }
        out.dirty = true;
        Ok(())
    }
}
