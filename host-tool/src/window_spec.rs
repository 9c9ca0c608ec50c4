//! The `--window` grammar of `frothline replay`.
//!
//! ```text
//! whole              one window over the whole capture
//! <number><unit>     fixed-duration windows; unit s | ms | us (e.g. 50ms, 0.5s, 2s)
//! ```

use frothline_core::WindowPolicy;
use std::str::FromStr;

/// A window choice as the user wrote it, before the sample rate is known.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum WindowSpec {
    /// The whole capture.
    Whole,
    /// Fixed windows of this many seconds.
    Duration(f64),
}

impl FromStr for WindowSpec {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, String> {
        let t = s.trim().to_ascii_lowercase();
        if t == "whole" {
            return Ok(WindowSpec::Whole);
        }
        let split = t.find(|c: char| c.is_ascii_alphabetic()).unwrap_or(t.len());
        let (num, unit) = t.split_at(split);
        let scale = match unit {
            "s" => 1.0,
            "ms" => 1e-3,
            "us" | "µs" => 1e-6,
            "" => return Err(format!("window `{s}`: give a unit (s, ms, us), e.g. 50ms")),
            _ => {
                return Err(format!(
                    "window `{s}`: unknown unit `{unit}` (use s, ms or us)"
                ))
            }
        };
        let v: f64 = num
            .trim()
            .parse()
            .map_err(|_| format!("window `{s}`: `{num}` is not a number"))?;
        if !(v.is_finite() && v > 0.0) {
            return Err(format!("window `{s}`: the duration must be positive"));
        }
        Ok(WindowSpec::Duration(v * scale))
    }
}

impl WindowSpec {
    /// The core's policy at `sample_rate` frames per second.
    pub fn policy(self, sample_rate: u32) -> Result<WindowPolicy, String> {
        match self {
            WindowSpec::Whole => Ok(WindowPolicy::Whole),
            WindowSpec::Duration(s) => {
                let frames = (s * sample_rate as f64).round();
                if frames < 1.0 || frames > u32::MAX as f64 {
                    return Err(format!(
                        "window of {s} s is {frames} frames at {sample_rate} Hz: need 1 to {}",
                        u32::MAX
                    ));
                }
                Ok(WindowPolicy::Frames(frames as u32))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_the_grammar() {
        assert_eq!("whole".parse(), Ok(WindowSpec::Whole));
        assert_eq!("50ms".parse(), Ok(WindowSpec::Duration(0.05)));
        assert_eq!("2s".parse(), Ok(WindowSpec::Duration(2.0)));
        assert!("50".parse::<WindowSpec>().is_err());
        assert!("-1s".parse::<WindowSpec>().is_err());
        assert!("5min".parse::<WindowSpec>().is_err());
        assert_eq!(
            WindowSpec::Duration(0.05).policy(40_000),
            Ok(WindowPolicy::Frames(2000))
        );
    }
}
