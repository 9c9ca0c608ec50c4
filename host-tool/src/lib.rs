//! frothline-host: the host side of frothline.
//!
//! - [`layout`] and [`capture`]: the rig layout (TOML) and captures (WAV);
//! - [`rig`]: layout + capture format -> the core's chain configuration;
//!   [`record_levels`]: tips' levels learnt from the whole record before a replay;
//! - [`replay`]: captures through the core -> [`windows_csv`]; [`transient`]: the replay
//!   of transient layouts (surge fronts: one station chain per station, profile.csv,
//!   fronts.csv, stations.csv, flow.json); [`ensemble`]: repeated runs of a rig aligned on
//!   the front;
//! - [`synth`]: synthetic captures with known truth;
//! - [`tipcheck`]: every tip's levels, noise, swing and interface times on a segment of a
//!   capture, written into the layout on request;
//! - [`session`], [`watch`], [`commands`], [`live`], [`dashboard`], [`archive`],
//!   [`unpack`]: the live link (framed results from devices over serial ports);
//! - [`flash_image`], [`logbook_cmd`]: a field logger's flash image read back through the
//!   core's log into the same CSV files;
//! - [`device_sim`], [`demo`]: a simulated device, and the live link without hardware;
//! - [`cli`]: the `frothline` command line.
#![warn(missing_docs)]

pub mod archive;
pub mod capture;
pub mod cli;
pub mod commands;
pub mod dashboard;
pub mod demo;
pub mod derived_csv;
pub mod device_sim;
pub mod discharge;
pub mod ensemble;
pub mod error;
pub mod flash_image;
pub mod hydraulics;
pub mod layout;
pub mod live;
pub mod logbook_cmd;
pub mod marks;
pub mod output_set;
pub mod ports;
pub mod probe_summary;
pub mod record_levels;
pub mod replay;
pub mod report;
pub mod rig;
pub mod run_summary;
pub mod running_stats;
pub mod runs;
pub mod session;
pub mod session_time;
pub mod stdout;
pub mod synth;
pub mod tipcheck;
pub mod transient;
pub mod unpack;
pub mod watch;
pub mod window_spec;
pub mod windows_csv;
