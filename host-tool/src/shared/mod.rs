//! The parts every job uses; no module here imports a job.
//!
//! ```text
//! inputs   layout (TOML rig file), capture (WAV), window_spec (the --window grammar)
//!          -> rig: layout + capture format -> the core's chain configuration (and the
//!          checks that they fit); stations: one chain per station of a transient layout
//! frames   session: bytes from links or an archive -> frames -> CSV files + archive;
//!          archive (.frothwire), commands (host -> device), runs (run numbers, labels),
//!          marks (operator notes), tips_csv and status_csv (the tip-health and device status
//!          rows of a live session, each a lazy_csv: created at its first row)
//! results  windows_csv, transient_columns (profile.csv, fronts.csv, stations.csv), output_set (a run's files written as one set), probe_summary,
//!          running_stats (means with intervals), hydraulics (water properties, flow
//!          relations), discharge (unit discharges across an array, the continuity check)
//! synthesis synthetic (scenarios rendered into captures with known truth: `synth` writes
//!          them, `demo` and `simulate` play them)
//! plumbing error (HostError), stdout (summaries that survive a closed pipe), serial_port
//!          (opening a port, and what to try when it will not open)
//! ```
pub mod archive;
pub mod capture;
pub mod commands;
pub mod derived_csv;
pub mod discharge;
pub mod error;
pub mod hydraulics;
pub mod layout;
pub mod lazy_csv;
pub mod marks;
pub mod output_set;
pub mod probe_summary;
pub mod rig;
pub mod running_stats;
pub mod runs;
pub mod serial_port;
pub mod session;
pub mod stations;
pub mod status_csv;
pub mod stdout;
pub mod synthetic;
pub mod tips_csv;
pub mod transient_columns;
pub mod window_spec;
pub mod windows_csv;
