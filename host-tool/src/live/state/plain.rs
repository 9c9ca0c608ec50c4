//! The `--plain` output: one fixed-width line per window result.

use super::probe::{LiveWindow, ProbeRow};

fn num(v: Option<f64>, width: usize, prec: usize) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v:>width$.prec$}"),
        _ => format!("{:>width$}", "-"),
    }
}

/// One line per window result, for `--plain` output: device time at the window end,
/// device, probe, C, F, V, Tu, median chord, bubbles and flags, in fixed-width columns.
pub fn plain_line(row: &ProbeRow, w: &LiveWindow) -> String {
    let flags: Vec<&str> = w.flags.names().collect();
    format!(
        "{:>9.3} s  dev {:<5} probe {:<10} C {}  F {} Hz  V {} m/s  Tu {}  chord {} ms  bubbles {:>4}  {}",
        w.end_s,
        w.device,
        row.name,
        num(w.void_fraction, 6, 4),
        num(w.bubble_rate_hz, 7, 2),
        num(w.velocity_m_s, 5, 2),
        num(w.turbulence_intensity, 5, 3),
        num(w.chord_median_s.map(|s| s * 1e3), 7, 3),
        w.bubbles,
        if flags.is_empty() {
            "-".to_string()
        } else {
            flags.join("|")
        }
    )
}
