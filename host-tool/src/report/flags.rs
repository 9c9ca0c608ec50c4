//! What each quality flag means, for the report's flag table: window flags
//! (`windows.csv`, `frothline_core::Flags`), and the flags of the profile and decay fits
//! (a `flags` or `decay_flags` column of `profile.csv`, when the writer adds one).

/// Which file and column a flag comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum FlagSource {
    /// `windows.csv`, column `flags`.
    Window,
    /// `profile.csv`, column `flags`: the profile fit of a slice.
    Profile,
    /// `profile.csv`, column `decay_flags`: the decay fit.
    Decay,
}

impl FlagSource {
    /// Where the flag was read, for people.
    pub fn label(self) -> &'static str {
        match self {
            FlagSource::Window => "window (windows.csv)",
            FlagSource::Profile => "profile fit (profile.csv)",
            FlagSource::Decay => "decay fit (profile.csv)",
        }
    }
}

/// The meaning of flag `name` from `source`, or None for a name this version does not know.
pub fn meaning(source: FlagSource, name: &str) -> Option<&'static str> {
    match source {
        FlagSource::Window => window(name),
        FlagSource::Profile => profile(name),
        FlagSource::Decay => decay(name),
    }
}

fn window(name: &str) -> Option<&'static str> {
    Some(match name {
        "stuck" => {
            "The tip saw no interface in the window: it sat in one phase throughout (clear \
             water or air, or a dead, dry or drowned tip)."
        }
        "levels_not_learnt" => {
            "Part of the window ran before the air and water levels were learnt; phases there \
             were held, so C and F are not measurements. Left out of means and fits by default."
        }
        "saturated" => {
            "Some samples sat at an ADC rail: the front end saturated, levels and phases near \
             the rail are doubtful."
        }
        "short_chords" => {
            "A tenth or more of the chords were shorter than 3 samples: the sampling rate is \
             too slow for these bubbles, chord times and F are biased."
        }
        "partial_window" => {
            "The window is shorter than asked for (the record ended inside it): its \
             statistics rest on fewer samples."
        }
        "trailing_stuck" => {
            "The trailing tip saw no interface in the window: no interfacial velocity or \
             turbulence intensity from the pair."
        }
        "no_correlation_peak" => {
            "No lag reached the minimum cross-correlation coefficient (or a tip sat in one \
             phase): the velocity is not to be trusted."
        }
        "peak_at_lag_boundary" => {
            "The highest correlation lies at lag 0 or at the largest lag: the true peak may be \
             outside the lag range, the velocity is doubtful."
        }
        "few_bubbles" => {
            "A tip closed fewer bubbles than the correlation needs: the velocity and \
             turbulence intensity are statistically weak."
        }
        "tu_undefined" => {
            "Turbulence intensity undefined: the cross-correlation half-width is below the \
             auto-correlation half-time, or a width or the peak lag is missing."
        }
        "correlation_overflow" => {
            "Some interfaces could not be paired: the correlation sums are incomplete."
        }
        "pre_front" => {
            "The record covers the time before the front reached the station (transient \
             flows): the tips sat in the phase before the front, so these are not flow \
             statistics."
        }
        "late_front_start" => {
            "The first window after the front starts later than the arrival: the arrival was \
             confirmed only after the chain's delay line had passed it (a flickering front); \
             since_front_s says by how much."
        }
        "tu_index" => {
            "Turbulence intensity is only an index here: the chords are not short next to the \
             transit-time spread (tau05 below 4 T05), so the correlation widths reflect the \
             bubble train as much as the velocity fluctuations."
        }
        "capture_cut" => {
            "The capture stopped abruptly in this window (a truncated file, or a header its \
             recorder never finished): the window may be shorter than the flow, and nothing \
             after it was recorded."
        }
        _ => return None,
    })
}

fn profile(name: &str) -> Option<&'static str> {
    Some(match name {
        "too_few_points" => "Fewer than 2 usable points: no profile fit for the slice.",
        "y90_above_array" => {
            "Every probe read below 0.9: Y90 lies above the top probe (flow deeper than the \
             array) and is left empty."
        }
        "y90_below_array" => {
            "The lowest probe already read 0.9 or more: Y90 lies below the lowest probe and is \
             left empty."
        }
        "power_law_not_converged" => {
            "The power-law fit stopped at its iteration limit or on a bound of n."
        }
        "exponential_not_converged" => {
            "The exponential (diffusion) fit stopped at its iteration limit or on a bound."
        }
        "points_dropped" => {
            "Some points were dropped (non-finite, below the bed, C outside 0..1, or too many)."
        }
        "several_crossings" => {
            "C falls below 0.9 again above Y90 (splashes above the roller): Y90 is the lowest \
             crossing."
        }
        _ => return None,
    })
}

fn decay(name: &str) -> Option<&'static str> {
    Some(match name {
        "too_few_points" => "Fewer than 3 points, or all at one time: no decay fit.",
        "no_decay" => "The series does not decay: the levels are its mean, τ means nothing.",
        "tau_at_limit" => {
            "The best τ lies at an end of the search range: the decay is faster than the first \
             points or slower than the record resolves."
        }
        "points_rejected" => "Points were refused (non-finite, or the series was full).",
        "no_reference_depth" => "No reference depth: no dimensionless time constant.",
        _ => return None,
    })
}

/// Text for a flag this version does not know.
pub const UNKNOWN: &str =
    "Not known to this version of the report (written by a newer writer): see its documentation.";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_core_window_flag_has_a_meaning() {
        for (_, name) in frothline_core::Flags::NAMES {
            assert!(meaning(FlagSource::Window, name).is_some(), "{name}");
        }
        assert_eq!(meaning(FlagSource::Window, "weak_correlation"), None);
        assert_ne!(
            meaning(FlagSource::Profile, "too_few_points"),
            meaning(FlagSource::Decay, "too_few_points")
        );
    }
}
