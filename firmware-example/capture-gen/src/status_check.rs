//! Checks of the device status frames (wire kind 0x0C) the firmware sends and logs.

use frothline_core::wire::DeviceStatus;

/// The logger's states in order, consecutive repeats merged.
fn state_runs(statuses: &[DeviceStatus]) -> Vec<&'static str> {
    let mut runs: Vec<&'static str> = Vec::new();
    for s in statuses {
        let name = s.logger_state_name();
        if runs.last() != Some(&name) {
            runs.push(name);
        }
    }
    runs
}

/// The statuses of the UART: several, the time since power-up growing from one to the
/// next, no supply (the emulated board has no measurement of it), and with `logger` the
/// field logger idle at power-on, then armed, then capturing (after the front), its log's
/// use never falling; without, no logger.
pub fn check_uart(statuses: &[DeviceStatus], logger: bool) -> Result<(), String> {
    if statuses.len() < 3 {
        return Err(format!("{} device status frames", statuses.len()));
    }
    for w in statuses.windows(2) {
        if w[1].uptime_ms <= w[0].uptime_ms {
            return Err(format!(
                "the time since power-up does not grow: {} ms then {} ms",
                w[0].uptime_ms, w[1].uptime_ms
            ));
        }
    }
    if let Some(s) = statuses.iter().find(|s| s.supply_mv.is_some()) {
        return Err(format!("the emulated board reports a supply: {s:?}"));
    }
    let runs = state_runs(statuses);
    if logger {
        if !runs.starts_with(&["idle", "armed", "capturing"]) {
            return Err(format!(
                "logger states {runs:?}: want idle, armed, capturing"
            ));
        }
        let used: Vec<u32> = statuses
            .iter()
            .filter_map(|s| s.logger.map(|l| l.used_bytes))
            .collect();
        if used.windows(2).any(|w| w[1] < w[0]) || used.last().is_none_or(|&u| u == 0) {
            return Err(format!("log use {used:?}"));
        }
    } else if runs != ["none"] {
        return Err(format!(
            "logger states {runs:?} on a build without a logger"
        ));
    }
    let (first, last) = (
        statuses[0].uptime_ms,
        statuses[statuses.len() - 1].uptime_ms,
    );
    eprintln!(
        "verify-uart: {} device status frames, uptime {first} ms -> {last} ms, logger states {}",
        statuses.len(),
        runs.join(" -> ")
    );
    Ok(())
}

/// The statuses of the field log: one per change of the logger's state, so armed first
/// (the logger logs nothing while idle), then capturing, the time since power-up growing.
pub fn check_log(statuses: &[DeviceStatus]) -> Result<(), String> {
    let runs = state_runs(statuses);
    if runs.len() != statuses.len() {
        return Err(format!(
            "a status logged without a change of state: {statuses:?}"
        ));
    }
    if !runs.starts_with(&["armed", "capturing"]) {
        return Err(format!(
            "logged logger states {runs:?}: want armed, capturing"
        ));
    }
    if statuses
        .windows(2)
        .any(|w| w[1].uptime_ms <= w[0].uptime_ms)
    {
        return Err(format!("logged statuses out of time order: {statuses:?}"));
    }
    eprintln!(
        "verify-log: {} device status records, logger states {}",
        statuses.len(),
        runs.join(" -> ")
    );
    Ok(())
}
