//! frothline-host: the host side of frothline.
//!
//! - [`layout`] and [`capture`]: the rig layout (TOML) and captures (WAV);
//! - [`rig`]: layout + capture format -> the core's chain configuration;
//! - [`replay`]: captures through the core -> [`windows_csv`];
//! - [`synth`]: synthetic captures with known truth;
//! - [`cli`]: the `frothline` command line.
#![warn(missing_docs)]

pub mod archive;
pub mod capture;
pub mod cli;
pub mod dashboard;
pub mod error;
pub mod layout;
pub mod live;
pub mod ports;
pub mod replay;
pub mod rig;
pub mod synth;
pub mod window_spec;
pub mod windows_csv;
