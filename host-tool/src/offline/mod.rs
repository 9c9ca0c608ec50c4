//! The offline path: a recorded capture (WAV + layout) through the same core the devices
//! run, into CSV files.
//!
//! ```text
//! layout.toml + capture.wav (shared::layout, shared::capture)
//!   -> record_levels: every tip's air and water levels learnt from the whole record
//!   -> shared::rig: the core's chain configuration (frames, i16 counts)
//!   -> replay: one core chain over the capture          (steady layouts; replay_drive:
//!      the drivers, the probes split over worker threads, one chain each; threads: how
//!      many threads the offline passes use)
//!      transient: one core chain per station, windows from each station's front
//!      (replay hands transient layouts to transient; both use replay_common;
//!      level_drift: a transient record's levels checked segment by segment)
//!   -> windows.csv (+ profile.csv, fronts.csv, stations.csv, flow.json), written as one
//!      output set (shared::output_set), summary table from running totals (run_summary),
//!      chords.csv and chord_lengths.csv from the pooled chords (chord_files)
//! ensemble: repeated transient runs of one rig, aligned on the front, combined, written as
//!   one output set (ensemble_inputs: the captures it reads)
//! tipcheck: every tip's levels, noise and swing on a segment, written into the layout
//! ```
pub mod chord_files;
pub mod ensemble;
pub mod ensemble_inputs;
pub mod level_drift;
pub mod record_levels;
pub mod replay;
pub mod replay_common;
pub mod replay_drive;
pub mod run_summary;
pub mod threads;
pub mod tipcheck;
pub mod transient;
