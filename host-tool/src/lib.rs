//! frothline-host: the host side of frothline, one folder per job.
//!
//! ```text
//!            WAV capture + layout (TOML)          serial ports            flash image
//!                      |                               |                       |
//!   synth/ ----------> |                               |                       |
//!   (captures with     v                               v                       v
//!    known truth)   offline/                         live/                  field/
//!                   replay, transient, ensemble,     watch, dashboard,      logbook,
//!                   record levels, tipcheck          demo, simulated        flash image
//!                      |                             device, unpack            |
//!                      +------------------+------------------+-----------------+
//!                                         v
//!                                     shared/: layout, capture, rig, window grammar,
//!                                     session (frames -> CSV files + archive), commands,
//!                                     CSV writers, per-probe summaries, output sets, errors
//!                                         |
//!                                         v
//!                          windows.csv, profile.csv, fronts.csv, flow.json, ...
//!                                         |
//!                                         v
//!                                     report/: figures (SVG, PNG) + one-page HTML
//! ```
//!
//! - [`offline`]: recorded captures through the core (the `replay`, `ensemble` and
//!   `tipcheck` commands);
//! - [`live`]: framed results from devices over serial ports (`watch`, `demo`, `simulate`,
//!   `unpack`, `ports`);
//! - [`field`]: a field logger's flash image read back into the same CSV files (`logbook`);
//! - [`report`]: figures and a summary page of an output folder (`report`);
//! - [`synth`]: synthetic captures with known truth written to a folder (`synth`; the
//!   generator is the shared part [`shared::synthetic`], which `demo` also renders from);
//! - [`shared`]: what every job uses: layout, captures, the rig's chain configuration, the
//!   receiving session, CSV writers, summaries, errors;
//! - [`cli`]: the `frothline` command line on top.
//!
//! `docs/architecture.md` draws the whole flow once.
#![warn(missing_docs)]

pub mod cli;
pub mod field;
pub mod live;
pub mod offline;
pub mod report;
pub mod shared;
pub mod synth;
