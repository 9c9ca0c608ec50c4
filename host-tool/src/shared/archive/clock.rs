//! Wall-clock time for archives: the host's clock in microseconds since the Unix epoch,
//! its UTC renderings, and the file names of session archives.

use super::EXTENSION;

/// Microseconds since the Unix epoch, now.
pub fn now_us() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_micros() as u64)
}

/// Civil date (year, month, day) of days since 1970-01-01, proleptic Gregorian calendar
/// (the 400-year-era algorithm of H. Hinnant, "chrono-Compatible Low-Level Date
/// Algorithms").
fn civil(days: i64) -> (i64, i64, i64) {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    (yoe + era * 400 + i64::from(month <= 2), month, day)
}

fn split(unix_us: u64) -> ((i64, i64, i64), u64, u64) {
    let secs = unix_us / 1_000_000;
    (
        civil((secs / 86_400) as i64),
        secs % 86_400,
        (unix_us / 1000) % 1000,
    )
}

/// A UTC timestamp `YYYYMMDDTHHMMSSZ` of microseconds since the Unix epoch (ISO 8601 basic
/// format: sorts as text, no characters that file systems refuse).
pub fn utc_stamp(unix_us: u64) -> String {
    let ((y, mo, d), rem, _) = split(unix_us);
    format!(
        "{y:04}{mo:02}{d:02}T{:02}{:02}{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// A UTC time `YYYY-MM-DDTHH:MM:SS.mmmZ` (ISO 8601 extended format, milliseconds) of
/// microseconds since the Unix epoch. Any value prints as a whole date (years past 9999
/// get more digits).
pub fn utc_iso(unix_us: u64) -> String {
    let ((y, mo, d), rem, ms) = split(unix_us);
    format!(
        "{y:04}-{mo:02}-{d:02}T{:02}:{:02}:{:02}.{ms:03}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// The archive file name of a session started at `unix_us`, the `n`-th of that second
/// (from 1): `session-<UTC stamp>.frothwire`, then `session-<UTC stamp>-2.frothwire` ...
pub fn session_file_name(unix_us: u64, n: u32) -> String {
    match n {
        0 | 1 => format!("session-{}.{EXTENSION}", utc_stamp(unix_us)),
        n => format!("session-{}-{n}.{EXTENSION}", utc_stamp(unix_us)),
    }
}
