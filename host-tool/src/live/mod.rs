//! The live link: framed results from probe devices over serial ports, on screen and on
//! disk as they arrive.
//!
//! ```text
//! serial ports (ports) -> watch: one reader thread per port -> shared::session
//!   (archive first, then frames -> CSV files) -> events -> state (what the view knows)
//!   -> dashboard (ratatui)
//! commands (StartRun, SetWindow, ...) -> shared::commands -> ports
//! device_sim: the core's chain on a capture in real time, framed like firmware; demo and
//!   simulate run it on a pseudo-terminal (demo watches the other end)
//! link_drain: the end of a session reads the frames still on their way
//! unpack: a session archive -> shared::session -> the same CSV files, with a link report
//! watch_control: the keys' actions from a channel (tests, scripts); tipcheck_live: a
//!   device's tips from its tip-health frames, SetLevels back; dashboard_tips: the view
//! ```
pub mod dashboard;
pub mod dashboard_tips;
pub mod demo;
pub mod device_sim;
pub mod link_drain;
pub mod ports;
pub mod session_time;
pub mod state;
pub mod tipcheck_live;
pub mod unpack;
pub mod watch;
pub mod watch_control;
