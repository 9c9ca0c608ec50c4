//! The `--window` grammar of `frothline replay`.
//!
//! ```text
//! whole                              one window over the whole capture
//! <number><unit>                     fixed-duration windows; unit s | ms | us (50ms, 0.5s)
//! bubbles:<N>[@<probe>][,max=<dur>]  adaptive windows holding N bubbles of the reference
//!                                    probe's leading tip (default: the first probe of the
//!                                    layout), cut at <dur> if the bubbles stop coming
//! ```

use frothline_core::WindowPolicy;
use std::str::FromStr;

/// A window choice as the user wrote it, before the sample rate and layout are known.
#[derive(Clone, Debug, PartialEq)]
pub enum WindowSpec {
    /// The whole capture.
    Whole,
    /// Fixed windows of this many seconds.
    Duration(f64),
    /// Windows of `count` bubbles of a reference probe.
    Bubbles {
        /// Bubbles per window.
        count: u32,
        /// Name of the reference probe (None: the first probe).
        probe: Option<String>,
        /// Longest window, seconds.
        max_s: Option<f64>,
    },
}

fn parse_duration(s: &str, whole: &str) -> Result<f64, String> {
    let t = s.trim().to_ascii_lowercase();
    // The unit is the run of letters at the end, so that a number with an exponent
    // (`1e-3s`, `2.5E2ms`) keeps its `e`.
    let split = t
        .char_indices()
        .rev()
        .take_while(|(_, c)| c.is_ascii_alphabetic() || *c == 'µ')
        .last()
        .map_or(t.len(), |(i, _)| i);
    let (num, unit) = t.split_at(split);
    let scale = match unit {
        "s" => 1.0,
        "ms" => 1e-3,
        "us" | "µs" => 1e-6,
        "" => {
            return Err(format!(
                "window `{whole}`: give a unit (s, ms, us), e.g. 50ms"
            ))
        }
        _ => {
            return Err(format!(
                "window `{whole}`: unknown unit `{unit}` (accepted: a number, exponents allowed, \
                 then s, ms or us: 50ms, 0.5s, 1e-3s; or `whole`, or `bubbles:N`)"
            ))
        }
    };
    let v: f64 = num
        .trim()
        .parse()
        .map_err(|_| format!("window `{whole}`: `{num}` is not a number"))?;
    if !(v.is_finite() && v > 0.0) {
        return Err(format!("window `{whole}`: the duration must be positive"));
    }
    Ok(v * scale)
}

impl FromStr for WindowSpec {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, String> {
        let t = s.trim();
        if t.eq_ignore_ascii_case("whole") {
            return Ok(WindowSpec::Whole);
        }
        if let Some(rest) = t.strip_prefix("bubbles:") {
            let (head, max) = match rest.split_once(",max=") {
                Some((h, m)) => (h, Some(parse_duration(m, s)?)),
                None => (rest, None),
            };
            let (count, probe) = match head.split_once('@') {
                Some((c, p)) if !p.is_empty() => (c, Some(p.to_string())),
                Some(_) => return Err(format!("window `{s}`: name the probe after @")),
                None => (head, None),
            };
            let count: u32 = count
                .trim()
                .parse()
                .ok()
                .filter(|&n| n > 0)
                .ok_or_else(|| {
                    format!("window `{s}`: `{count}` is not a bubble count (1 or more)")
                })?;
            return Ok(WindowSpec::Bubbles {
                count,
                probe,
                max_s: max,
            });
        }
        Ok(WindowSpec::Duration(parse_duration(t, s)?))
    }
}

fn frames_of(s: f64, sample_rate: u32) -> Result<u32, String> {
    let frames = (s * sample_rate as f64).round();
    if frames < 1.0 || frames > u32::MAX as f64 {
        return Err(format!(
            "a window of {s} s is {frames} frames at {sample_rate} Hz: need 1 to {}",
            u32::MAX
        ));
    }
    Ok(frames as u32)
}

impl WindowSpec {
    /// The core's policy at `sample_rate` frames per second; `probe_index` finds a probe of
    /// the layout by name.
    pub fn policy(
        &self,
        sample_rate: u32,
        probe_index: impl Fn(&str) -> Option<usize>,
    ) -> Result<WindowPolicy, String> {
        match self {
            WindowSpec::Whole => Ok(WindowPolicy::Whole),
            WindowSpec::Duration(s) => Ok(WindowPolicy::Frames(frames_of(*s, sample_rate)?)),
            WindowSpec::Bubbles {
                count,
                probe,
                max_s,
            } => {
                let probe = match probe {
                    Some(name) => probe_index(name)
                        .ok_or_else(|| format!("window: no probe named `{name}` in the layout"))?,
                    None => 0,
                };
                let max_frames = max_s.map(|s| frames_of(s, sample_rate)).transpose()?;
                Ok(WindowPolicy::Bubbles {
                    count: *count,
                    probe: probe.min(255) as u8,
                    max_frames,
                })
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durations_with_exponents_keep_their_exponent() {
        assert_eq!(
            "1e-3s".parse::<WindowSpec>(),
            Ok(WindowSpec::Duration(1e-3))
        );
        assert_eq!(
            "2.5E1ms".parse::<WindowSpec>(),
            Ok(WindowSpec::Duration(0.025))
        );
        assert_eq!("1e9s".parse::<WindowSpec>(), Ok(WindowSpec::Duration(1e9)));
        // 1e9 s is parsed, then refused as frames with a true message.
        let e = WindowSpec::Duration(1e9)
            .policy(20_000, |_| None)
            .unwrap_err();
        assert!(e.contains("1000000000 s"), "{e}");
        let e = "5min".parse::<WindowSpec>().unwrap_err();
        assert!(e.contains("`min`") && e.contains("accepted"), "{e}");
    }

    #[test]
    fn parses_the_grammar() {
        assert_eq!("whole".parse(), Ok(WindowSpec::Whole));
        assert_eq!("50ms".parse(), Ok(WindowSpec::Duration(0.05)));
        assert_eq!("2s".parse(), Ok(WindowSpec::Duration(2.0)));
        assert!("50".parse::<WindowSpec>().is_err());
        assert!("-1s".parse::<WindowSpec>().is_err());
        assert!("5min".parse::<WindowSpec>().is_err());
        assert_eq!(
            WindowSpec::Duration(0.05).policy(40_000, |_| None),
            Ok(WindowPolicy::Frames(2000))
        );
        let b: WindowSpec = "bubbles:200@B2-3,max=2s".parse().unwrap();
        assert_eq!(
            b,
            WindowSpec::Bubbles {
                count: 200,
                probe: Some("B2-3".into()),
                max_s: Some(2.0)
            }
        );
        let idx = |n: &str| (n == "B2-3").then_some(2);
        assert_eq!(
            b.policy(20_000, idx),
            Ok(WindowPolicy::Bubbles {
                count: 200,
                probe: 2,
                max_frames: Some(40_000)
            })
        );
        assert!("bubbles:0".parse::<WindowSpec>().is_err());
        assert!("bubbles:10@".parse::<WindowSpec>().is_err());
        assert!("bubbles:10@nope"
            .parse::<WindowSpec>()
            .unwrap()
            .policy(20_000, |_| None)
            .is_err());
    }
}
