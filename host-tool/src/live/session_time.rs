//! Session durations given on the command line (`--duration` of `watch`, `demo`,
//! `simulate`): parsed from the text as typed, so a refusal quotes it as typed (not a
//! 300-digit expansion of 1e-300), and bounded so that every accepted value converts to a
//! [`std::time::Duration`] (which panics beyond about 1.8e19 s).

/// Shortest session accepted, s.
pub const MIN_SESSION_S: f64 = 1e-3;
/// Longest session accepted, s (10^7 s, about 116 days).
pub const MAX_SESSION_S: f64 = 1e7;

/// Parses a session duration in seconds (a clap value parser).
pub fn parse_session_secs(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let v: f64 = t
        .parse()
        .map_err(|_| format!("`{t}` is not a number of seconds (e.g. 20 or 1.5)"))?;
    if !(MIN_SESSION_S..=MAX_SESSION_S).contains(&v) {
        return Err(format!(
            "`{t}`: give a number of seconds from {MIN_SESSION_S} to {MAX_SESSION_S:e} \
             (about 116 days)"
        ));
    }
    Ok(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn huge_tiny_negative_and_non_numbers_are_refused_as_typed() {
        for t in ["1e20", "1e-300", "-1", "0", "inf", "nan", "NaN", "ten"] {
            let e = parse_session_secs(t).unwrap_err();
            assert!(e.contains(&format!("`{t}`")), "{t}: {e}");
            assert!(e.len() < 120, "{t}: {e}");
        }
        for (t, v) in [("20", 20.0), ("0.5", 0.5), ("1e7", 1e7), (" 3 ", 3.0)] {
            let s = parse_session_secs(t).unwrap();
            assert_eq!(s, v);
            // Every accepted value converts without a panic.
            let _ = std::time::Duration::from_secs_f64(s);
        }
    }
}
