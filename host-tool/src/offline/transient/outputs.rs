//! Writing the output files of a transient replay as one set (committed together).

use super::counts::RecordCounts;
use super::indicators::flow_indicators;
use super::slice_discharge::{SliceDischarge, SLICE_DISCHARGE_COLUMNS};
use super::TransientRun;
use crate::offline::chord_files::ChordPool;
use crate::offline::replay_common as common;
use crate::shared::error::{write_err, HostError};
use crate::shared::output_set::{Committed, OutputSet};
use crate::shared::rig::HostRecord;
use crate::shared::transient_columns::{FRONT_COLUMNS, PROFILE_COLUMNS, STATION_COLUMNS};
use crate::shared::windows_csv::WindowsCsv;
use frothline_core::ProfileRecord;
use std::path::{Path, PathBuf};

/// What [`write_outputs`] wrote.
#[derive(Debug, Clone)]
pub struct TransientFiles {
    /// windows.csv.
    pub windows: PathBuf,
    /// profile.csv.
    pub profile: PathBuf,
    /// fronts.csv.
    pub fronts: PathBuf,
    /// stations.csv.
    pub stations: PathBuf,
    /// flow.json.
    pub flow: PathBuf,
}

/// Write windows.csv, profile.csv, fronts.csv, stations.csv and flow.json into `dir`, as one
/// set ([`OutputSet`]): all of them, or the folder as it was.
pub fn write_outputs(
    run: &TransientRun,
    dir: &Path,
    description: &str,
) -> Result<TransientFiles, HostError> {
    write_output_set(run, dir, description, &[]).map(|(files, _)| files)
}

/// [`write_outputs`], recording `inputs` (role, path) in the manifest, and telling what the
/// set replaced.
pub fn write_output_set(
    run: &TransientRun,
    dir: &Path,
    description: &str,
    inputs: &[(&str, &Path)],
) -> Result<(TransientFiles, Committed), HostError> {
    let mut windows = run.windows.iter().cloned().map(Ok);
    let mut profiles = run.profiles.iter().enumerate().map(|(i, &(s, p))| {
        Ok((
            s,
            p,
            run.slice_discharges.get(i).copied().unwrap_or_default(),
        ))
    });
    write_output_set_from(run, &mut windows, &mut profiles, dir, description, inputs)
        .map(|(files, committed, _)| (files, committed))
}

/// [`write_output_set`] with the window records from `windows` (in window-start order) and
/// the profile slices from `profiles` rather than [`TransientRun::windows`] and
/// [`TransientRun::profiles`], counting them for the summary as they go.
pub fn write_output_set_from(
    run: &TransientRun,
    windows: &mut dyn Iterator<Item = Result<HostRecord, HostError>>,
    profiles: &mut dyn Iterator<Item = Result<(usize, ProfileRecord, SliceDischarge), HostError>>,
    dir: &Path,
    description: &str,
    inputs: &[(&str, &Path)],
) -> Result<(TransientFiles, Committed, RecordCounts), HostError> {
    let set = OutputSet::begin(dir)?;
    let staged = set.staged("windows.csv");
    let file = set.create("windows.csv")?;
    let csv_err = |e: csv::Error| HostError::Write {
        path: staged.clone(),
        source: e.into(),
    };
    let mut csv = WindowsCsv::new(std::io::BufWriter::new(file)).map_err(csv_err)?;
    let meta = common::probe_meta_with(&run.layout, &run.levels_from);
    let mut counts = RecordCounts::new(run);
    let mut chords = ChordPool::new(run.layout.probes.len());
    for w in windows {
        let w = w?;
        counts.add(&w, &run.layout, run.sample_rate);
        let since = w.since_front.map(|f| run.secs(f as f64));
        let p = w.probe as usize;
        chords.add(&w, run.sample_rate, run.layout.probes[p].tip_spacing_mm);
        csv.write(
            &w,
            &meta[p],
            run.sample_rate,
            since,
            run.layout.probes[p].tip_spacing_mm,
        )
        .map_err(csv_err)?;
    }
    csv.finish().map_err(write_err(&staged))?;

    // Row by row: a long record at short windows has many slices.
    let header: Vec<&str> = PROFILE_COLUMNS
        .iter()
        .chain(SLICE_DISCHARGE_COLUMNS)
        .copied()
        .collect();
    set.write_csv_with("profile.csv", &header, |w| {
        for sp in profiles {
            let (s, p, d) = sp?;
            counts.add_slice(s, &p);
            let mut row = run.profile_row(s, &p);
            row.extend(d.cells());
            w(row)?;
        }
        Ok(())
    })?;
    set.write_csv_with("fronts.csv", FRONT_COLUMNS, |w| {
        run.front_rows().into_iter().try_for_each(w)
    })?;
    set.write_csv_with("stations.csv", STATION_COLUMNS, |w| {
        run.station_rows().into_iter().try_for_each(w)
    })?;
    let flow = set.staged("flow.json");
    std::fs::write(&flow, flow_indicators(run).to_json(description)).map_err(write_err(&flow))?;
    let mut names = vec![
        "windows.csv",
        "profile.csv",
        "fronts.csv",
        "stations.csv",
        "flow.json",
    ];
    names.extend(chords.write(&set, &run.layout, run.sample_rate)?);
    let committed = set.commit(&names, inputs)?;
    Ok((
        TransientFiles {
            windows: dir.join("windows.csv"),
            profile: dir.join("profile.csv"),
            fronts: dir.join("fronts.csv"),
            stations: dir.join("stations.csv"),
            flow: dir.join("flow.json"),
        },
        committed,
        counts,
    ))
}
