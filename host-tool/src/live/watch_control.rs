//! Actions on a running `watch` from outside its keyboard: the same actions the dashboard's
//! keys take (start a run with a label, end it, mark a moment with a note, re-learn),
//! sent through a channel. Tests and scripts drive a session with them
//! ([`crate::live::watch::run_controlled`]).

/// One action, as a key and its prompt would take it.
#[derive(Clone, Debug, PartialEq)]
pub enum Control {
    /// `s` and a label: start a run on every device.
    StartRun(String),
    /// `e`: end the run of every device.
    StopRun,
    /// `m` and a note: mark the current moment of the first device's run.
    Mark(String),
    /// `r`: every device re-learns the levels of all its probes.
    Relearn,
    /// Any command, sent to every device (a calibration's SetLevels).
    Command(crate::shared::commands::Command),
}
