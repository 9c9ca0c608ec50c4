//! The rig layout file: which WAV channel belongs to which probe tip, where the probes sit,
//! what kind of flow was recorded and how the phase detector is set up.
//!
//! The format is TOML; `docs/layout-format.md` is the user reference. In short:
//!
//! ```toml
//! [flow]
//! kind = "transient"          # "steady" | "transient"
//! phase_before_front = "air"  # transient only, default "air"
//! reference_depth_m = 0.08    # optional
//! water_temperature_c = 18.5  # optional, default 20.0
//! discharge_m2_s = 0.12       # optional: the rig's discharge per unit width (or
//!                             # discharge_m3_s with width_m), for the continuity check
//!
//! [detector]                  # optional, every key optional
//! threshold = 0.5
//! hysteresis = 0.2
//! near_wake_ms = 1.5          # cluster pairs: water chord shorter than this (or
//!                             # near_wake_chord_fraction = 0.5 of the bubble's chord;
//!                             # default: the bubble's own chord)
//!
//! [[probe]]                   # one or more
//! name = "A"
//! elevation_mm = 12.0
//! leading = 0
//! trailing = 1
//! tip_spacing_mm = 6.0
//! ```
//!
//! [`Layout::parse`] checks everything that can be checked without the capture: key names,
//! types, ranges, pairing rules (trailing tip and spacing, level pairs), unique names and
//! unique channels. [`Layout::check_channels`] then checks the channel indices against the
//! capture. Every error names the file, the key (`probe[2].trailing`) and the 1-based line
//! and column.
//!
//! Level and rail values are in *file units* (the numbers stored in the WAV file: counts for
//! integer files, -1.0..1.0 for float files); `crate::shared::capture::Capture::to_counts` maps them
//! to the i16 counts the core works on.

use std::collections::HashMap;
use std::fmt;
use std::ops::Range;
use std::path::{Path, PathBuf};

mod parse;
use parse::*;

use serde::{Deserialize, Serialize};
use toml::de::{DeTable, DeValue};
use toml::Spanned;

/// Default phase threshold, as a fraction of the water-to-air range.
pub const DEFAULT_THRESHOLD: f64 = 0.5;
/// Default hysteresis band width, as a fraction of the range (0.2 = the 40 %/60 % band).
pub const DEFAULT_HYSTERESIS: f64 = 0.2;
/// Default period over which levels are learnt when they are not fixed, in seconds.
pub const DEFAULT_LEARN_PERIOD_S: f64 = 0.2;
/// Default water temperature, degrees Celsius.
pub const DEFAULT_WATER_TEMPERATURE_C: f64 = 20.0;
/// Largest channel index accepted (a WAV file holds at most 65535 channels).
pub const MAX_CHANNEL: usize = 65534;
/// Largest layout file read, bytes. A layout of [`MAX_LAYOUT_PROBES`] probes written out
/// with comments takes a few hundred kilobytes; anything larger is refused before parsing.
pub const MAX_LAYOUT_BYTES: u64 = 1 << 20;
/// Most probes a layout may describe (the host runs at most 16 probes per chain, one chain
/// per station).
pub const MAX_LAYOUT_PROBES: usize = 1024;
/// Longest tip spacing accepted, mm: dual-tip probes space their tips a few millimetres
/// apart (3 to 10 mm is usual: common practice, no source); a metre is beyond any probe.
pub const MAX_TIP_SPACING_MM: f64 = 1000.0;
/// Largest |x_mm| accepted, mm (10 km of channel): beyond it a celerity over the stations'
/// distance means nothing.
pub const MAX_ABS_X_MM: f64 = 1.0e7;
/// Probes whose `x_mm` lie within this distance of a station's first probe belong to that
/// station, mm: probes meant to stand at one streamwise position are set to about a
/// millimetre (common practice, no source), and 600 and 600.0000001 are one position.
pub const STATION_TOLERANCE_MM: f64 = 1.0;
/// Largest elevation accepted, mm (100 m above the bed).
pub const MAX_ELEVATION_MM: f64 = 1.0e5;

// ---------------------------------------------------------------------------------------------
// Public representation
// ---------------------------------------------------------------------------------------------

/// A parsed and validated rig layout.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Layout {
    /// The `[flow]` table.
    pub flow: Flow,
    /// The `[detector]` table (defaults when absent).
    pub detector: DetectorSettings,
    /// The `[[probe]]` tables, in file order (never empty after [`Layout::parse`]).
    pub probes: Vec<ProbeSpec>,
}

/// Steady or transient flow.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum FlowKind {
    /// Statistically stationary flow: whole-record or windowed statistics.
    Steady,
    /// A front passes the probes (surge, dam break): front arrival, profiles versus time.
    Transient,
}

/// A phase seen by a tip.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Phase {
    /// The tip is in air.
    Air,
    /// The tip is in water.
    Water,
}

/// The `[flow]` table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Flow {
    /// `kind`.
    pub kind: FlowKind,
    /// `phase_before_front`: the phase the tips sit in before the front (transient flows;
    /// ignored for steady flows). Default [`Phase::Air`].
    pub phase_before_front: Phase,
    /// `reference_depth_m`: length scale for dimensionless time (transient flows), metres.
    pub reference_depth_m: Option<f64>,
    /// `water_temperature_c`, degrees Celsius. Default 20.0.
    pub water_temperature_c: f64,
    /// The discharge the rig delivered per unit width, m²/s: `discharge_m2_s`, or
    /// `discharge_m3_s / width_m`. The continuity check compares the water discharge
    /// integrated across the array with it ([`crate::shared::discharge`]).
    pub discharge_m2_s: Option<f64>,
}

/// The `[detector]` table: phase detector settings shared by all tips.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DetectorSettings {
    /// Threshold as a fraction of the water-to-air range, 0 < t < 1. Default 0.5.
    pub threshold: f64,
    /// Full hysteresis band width as a fraction of the range, 0 <= h < 2 min(t, 1 - t);
    /// 0 disables hysteresis. Default 0.2 (switch at 40 % and 60 %).
    pub hysteresis: f64,
    /// Period over which levels are learnt when a probe has no fixed levels, seconds (> 0).
    pub learn_period_s: f64,
    /// Lower ADC rail in file units; samples at or below count as saturated.
    /// `None`: the lowest value of the capture's sample format.
    pub rail_low: Option<f64>,
    /// Upper ADC rail in file units; samples at or above count as saturated.
    /// `None`: the highest value of the capture's sample format.
    pub rail_high: Option<f64>,
    /// Smallest air-water swing accepted when learning levels, file units (> 0).
    pub min_swing: Option<f64>,
    /// Near-wake criterion of the cluster tally: a bubble and the next pair when the water
    /// chord between them is shorter than this time, ms (0 < t <= 1000).
    pub near_wake_ms: Option<f64>,
    /// ... or shorter than this fraction of the leading bubble's chord (0.001 to 60; default:
    /// the bubble's own chord, 1). At most one of the two.
    pub near_wake_chord_fraction: Option<f64>,
}

impl Default for DetectorSettings {
    fn default() -> Self {
        DetectorSettings {
            threshold: DEFAULT_THRESHOLD,
            hysteresis: DEFAULT_HYSTERESIS,
            learn_period_s: DEFAULT_LEARN_PERIOD_S,
            rail_low: None,
            rail_high: None,
            min_swing: None,
            near_wake_ms: None,
            near_wake_chord_fraction: None,
        }
    }
}

/// Fixed air and water levels of a tip, in file units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FixedLevels {
    /// `air_level`.
    pub air: f64,
    /// `water_level`.
    pub water: f64,
}

/// The level pairs of a probe table: (prefix, air key, water key).
const LEVEL_KEYS: [(&str, &str, &str); 3] = [
    ("", "air_level", "water_level"),
    ("leading_", "leading_air_level", "leading_water_level"),
    ("trailing_", "trailing_air_level", "trailing_water_level"),
];

/// One `[[probe]]` table: a single-tip or dual-tip probe.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProbeSpec {
    /// `name`: unique, non-empty.
    pub name: String,
    /// `elevation_mm`: tip height above the bed, millimetres (>= 0).
    pub elevation_mm: f64,
    /// `x_mm`: streamwise position, millimetres (default 0). Equal values form a station.
    pub x_mm: f64,
    /// `leading`: WAV channel of the leading tip.
    pub leading: usize,
    /// `trailing`: WAV channel of the trailing tip, if the probe has two tips.
    pub trailing: Option<usize>,
    /// `tip_spacing_mm`: streamwise distance leading -> trailing (present iff `trailing` is).
    pub tip_spacing_mm: Option<f64>,
    /// `air_is_high`: polarity, air reads the higher value. Default true, or inferred from
    /// fixed levels when those are given and `air_is_high` is not.
    pub air_is_high: bool,
    /// `air_level` and `water_level`: fixed levels of both tips, file units. `None`: see
    /// the per-tip pairs; with neither, the levels are learnt.
    pub levels: Option<FixedLevels>,
    /// `leading_air_level` and `leading_water_level`: the leading tip's own fixed levels.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub leading_levels: Option<FixedLevels>,
    /// `trailing_air_level` and `trailing_water_level`: the trailing tip's own fixed levels.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub trailing_levels: Option<FixedLevels>,
    /// `max_lag_ms`: longest lag searched by the cross-correlation, milliseconds.
    pub max_lag_ms: Option<f64>,
    /// Where the probe was written in the layout file (`None` when built in code).
    #[serde(skip)]
    pub source: Option<ProbeSource>,
}

impl ProbeSpec {
    /// The fixed levels of the leading (`trailing` false) or trailing tip: its own pair,
    /// else the probe's pair; `None` when they are learnt.
    pub fn tip_levels(&self, trailing: bool) -> Option<FixedLevels> {
        let own = if trailing {
            self.trailing_levels
        } else {
            self.leading_levels
        };
        own.or(self.levels)
    }

    /// The channels of this probe's tips: leading first, then trailing if any.
    pub fn channels(&self) -> impl Iterator<Item = usize> {
        std::iter::once(self.leading).chain(self.trailing)
    }
}

/// Source positions of one probe's keys, kept for errors found after parsing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ProbeSource {
    /// The `[[probe]]` header.
    pub table: Location,
    /// The `leading` value.
    pub leading: Location,
    /// The `trailing` value.
    pub trailing: Option<Location>,
    /// The level values, in the order of the keys `air_level`, `water_level`,
    /// `leading_air_level`, `leading_water_level`, `trailing_air_level`,
    /// `trailing_water_level`.
    pub levels: [Option<Location>; 6],
}

/// A 1-based line and column (in characters) in the layout file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Location {
    /// 1-based line.
    pub line: usize,
    /// 1-based column, counted in characters.
    pub column: usize,
}

impl Location {
    /// The location of byte `offset` in `text` (clamped to the text).
    pub fn of_offset(text: &str, offset: usize) -> Location {
        let mut offset = offset.min(text.len());
        while !text.is_char_boundary(offset) {
            offset -= 1;
        }
        let before = &text[..offset];
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        Location {
            line: before.matches('\n').count() + 1,
            column: before[line_start..].chars().count() + 1,
        }
    }
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}, column {}", self.line, self.column)
    }
}

// ---------------------------------------------------------------------------------------------
// Errors
// ---------------------------------------------------------------------------------------------

/// An error in a layout file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LayoutError {
    /// The file could not be read.
    #[error("cannot read layout file {}: {source}", path.display())]
    Io {
        /// The layout file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// The file is larger than [`MAX_LAYOUT_BYTES`]: refused before it is parsed.
    #[error(
        "{}: {bytes} bytes: a layout file may hold at most {MAX_LAYOUT_BYTES} bytes \
         ({MAX_LAYOUT_PROBES} probes); is this the layout?",
        path.display()
    )]
    TooLarge {
        /// The layout file.
        path: PathBuf,
        /// Its size.
        bytes: u64,
    },
    /// The text is not valid TOML.
    #[error("{}, {at}: TOML syntax error: {message}", file.display())]
    Syntax {
        /// The layout file.
        file: PathBuf,
        /// Where the parser stopped.
        at: Location,
        /// What the TOML parser reported.
        message: String,
    },
    /// A key is missing, unknown, of the wrong type, out of range or inconsistent.
    #[error("{}{}: key `{key}`: {problem}", file.display(), OptAt(at))]
    Key {
        /// The layout file.
        file: PathBuf,
        /// Dotted key path, e.g. `probe[2].trailing` (0-based probe index).
        key: String,
        /// Where the key (or the table that lacks it) was written, when known.
        at: Option<Location>,
        /// What is wrong (boxed to keep `Result<_, LayoutError>` small).
        problem: Box<Problem>,
    },
}

impl LayoutError {
    /// The key the error is about, if any.
    pub fn key(&self) -> Option<&str> {
        match self {
            LayoutError::Key { key, .. } => Some(key),
            _ => None,
        }
    }

    /// Where in the file the error is, if known.
    pub fn location(&self) -> Option<Location> {
        match self {
            LayoutError::Syntax { at, .. } => Some(*at),
            LayoutError::Key { at, .. } => *at,
            LayoutError::Io { .. } | LayoutError::TooLarge { .. } => None,
        }
    }

    /// What is wrong with the key, for [`LayoutError::Key`].
    pub fn problem(&self) -> Option<&Problem> {
        match self {
            LayoutError::Key { problem, .. } => Some(&**problem),
            _ => None,
        }
    }
}

struct OptAt<'a>(&'a Option<Location>);

impl fmt::Display for OptAt<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            Some(at) => write!(f, ", {at}"),
            None => Ok(()),
        }
    }
}

/// What is wrong with a key.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum Problem {
    /// A key that the format does not know.
    UnknownKey {
        /// The keys allowed at this place.
        allowed: String,
    },
    /// A required key is absent.
    Missing {
        /// What to write there (empty when the key's name says it).
        hint: &'static str,
    },
    /// The value has the wrong type (`detail` says what was expected).
    WrongType {
        /// What was found and expected.
        detail: String,
    },
    /// A value outside its allowed range or set.
    OutOfRange {
        /// The rule and the value found.
        detail: String,
    },
    /// `trailing` given without `tip_spacing_mm`.
    TrailingWithoutSpacing,
    /// `tip_spacing_mm` given without `trailing`.
    SpacingWithoutTrailing,
    /// Only one key of a level pair (`air_level` / `water_level`, or a tip's own pair) is
    /// given.
    HalfLevelPair {
        /// The key that is missing.
        missing: &'static str,
    },
    /// A channel already used by another tip.
    ChannelInUse {
        /// The channel.
        channel: usize,
        /// The key that uses it first.
        first_key: String,
        /// The line of that key, if known.
        first_line: Option<usize>,
    },
    /// A probe name already used.
    DuplicateName {
        /// The name.
        name: String,
        /// The probe that uses it first.
        first_key: String,
        /// The line of that probe, if known.
        first_line: Option<usize>,
    },
    /// No `[[probe]]` table at all.
    NoProbes,
    /// A channel index at or beyond the capture's channel count.
    ChannelBeyondCapture {
        /// The channel.
        channel: usize,
        /// Channels in the capture.
        channels: usize,
    },
    /// Values that contradict each other.
    Inconsistent {
        /// Explanation.
        detail: String,
    },
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Problem::UnknownKey { allowed } => write!(f, "unknown key (allowed here: {allowed})"),
            Problem::Missing { hint: "" } => f.write_str("required key is missing"),
            Problem::Missing { hint } => write!(f, "required key is missing; {hint}"),
            Problem::WrongType { detail } => write!(f, "wrong type: {detail}"),
            Problem::OutOfRange { detail } => write!(f, "out of range: {detail}"),
            Problem::TrailingWithoutSpacing => {
                f.write_str("a trailing tip needs `tip_spacing_mm` in the same probe")
            }
            Problem::SpacingWithoutTrailing => {
                f.write_str("`tip_spacing_mm` is given but the probe has no `trailing` tip")
            }
            Problem::HalfLevelPair { missing } => write!(
                f,
                "an air level and a water level go together: `{missing}` is missing"
            ),
            Problem::ChannelInUse {
                channel,
                first_key,
                first_line,
            } => {
                write!(f, "channel {channel} is already used by `{first_key}`")?;
                if let Some(line) = first_line {
                    write!(f, " (line {line})")?;
                }
                Ok(())
            }
            Problem::DuplicateName {
                name,
                first_key,
                first_line,
            } => {
                write!(f, "probe name \"{name}\" is already used by `{first_key}`")?;
                if let Some(line) = first_line {
                    write!(f, " (line {line})")?;
                }
                Ok(())
            }
            Problem::NoProbes => f.write_str("at least one [[probe]] table is required"),
            Problem::ChannelBeyondCapture { channel, channels } => write!(
                f,
                "channel {channel} does not exist: the capture has {channels} channel{} (0..={})",
                if *channels == 1 { "" } else { "s" },
                channels.saturating_sub(1)
            ),
            Problem::Inconsistent { detail } => f.write_str(detail),
        }
    }
}

impl Layout {
    /// Reads and parses a layout file.
    pub fn load(path: &Path) -> Result<Layout, LayoutError> {
        let io = |source| LayoutError::Io {
            path: path.to_path_buf(),
            source,
        };
        // The size is checked before anything is read.
        let file = std::fs::File::open(path).map_err(io)?;
        let bytes = file.metadata().map_err(io)?.len();
        if bytes > MAX_LAYOUT_BYTES {
            return Err(LayoutError::TooLarge {
                path: path.to_path_buf(),
                bytes,
            });
        }
        let mut text = String::new();
        std::io::Read::read_to_string(
            &mut std::io::Read::take(file, MAX_LAYOUT_BYTES + 1),
            &mut text,
        )
        .map_err(io)?;
        Layout::parse(&text, path)
    }

    /// Parses and validates layout text; `file` is used in error messages only.
    ///
    /// Limits come first: a text over [`MAX_LAYOUT_BYTES`] is refused unparsed, and a
    /// document with more than [`MAX_LAYOUT_PROBES`] probes before its probes are checked.
    /// The checks are linear in the size of the text (locations come from one line index).
    pub fn parse(text: &str, file: &Path) -> Result<Layout, LayoutError> {
        Layout::parse_counting(text, file).0
    }

    /// [`Layout::parse`], also returning the bytes scanned to compute locations.
    fn parse_counting(text: &str, file: &Path) -> (Result<Layout, LayoutError>, usize) {
        let lines = LineIndex::new(text);
        let result = Layout::parse_in(text, file, &lines);
        (result, lines.scanned.get())
    }

    fn parse_in(text: &str, file: &Path, lines: &LineIndex) -> Result<Layout, LayoutError> {
        if text.len() as u64 > MAX_LAYOUT_BYTES {
            return Err(LayoutError::TooLarge {
                path: file.to_path_buf(),
                bytes: text.len() as u64,
            });
        }
        let cx = Ctx { text, file, lines };
        // First pass: the TOML document itself, keeping spans of every key for error paths.
        let doc = DeTable::parse(text).map_err(|e| LayoutError::Syntax {
            file: file.to_path_buf(),
            at: Location::of_offset(text, e.span().map_or(0, |s| s.start)),
            message: e.message().trim().to_string(),
        })?;
        if let Some(probes) = doc.get_ref().get("probe") {
            if let DeValue::Array(a) = probes.get_ref() {
                if a.len() > MAX_LAYOUT_PROBES {
                    return Err(LayoutError::Key {
                        file: file.to_path_buf(),
                        key: "probe".into(),
                        at: Some(cx.at(probes.span())),
                        problem: Box::new(Problem::OutOfRange {
                            detail: format!(
                                "{} probes: a layout may describe at most {MAX_LAYOUT_PROBES}",
                                a.len()
                            ),
                        }),
                    });
                }
            }
        }
        // Second pass: the schema.
        let raw: RawLayout =
            toml::from_str(text).map_err(|e| schema_error(&cx, doc.get_ref(), &e))?;
        build(&cx, raw)
    }

    /// Checks every tip channel against the channel count of the capture.
    ///
    /// `file` is the layout file, for the message.
    pub fn check_channels(&self, channels: usize, file: &Path) -> Result<(), LayoutError> {
        for (i, p) in self.probes.iter().enumerate() {
            let tips = [
                ("leading", Some(p.leading), p.source.map(|s| s.leading)),
                ("trailing", p.trailing, p.source.and_then(|s| s.trailing)),
            ];
            for (what, channel, at) in tips {
                let Some(channel) = channel else { continue };
                if channel >= channels {
                    return Err(LayoutError::Key {
                        file: file.to_path_buf(),
                        key: format!("probe[{i}].{what}"),
                        at,
                        problem: Box::new(Problem::ChannelBeyondCapture { channel, channels }),
                    });
                }
            }
        }
        Ok(())
    }

    /// Check every fixed level against the capture's sample range `lo..=hi` (file units;
    /// `format` names the sample format for the message): a level the file cannot hold is
    /// a typing error, not a level.
    pub fn check_levels(
        &self,
        (lo, hi): (f64, f64),
        format: &str,
        file: &Path,
    ) -> Result<(), LayoutError> {
        for (i, p) in self.probes.iter().enumerate() {
            let pairs = [(p.levels, 0), (p.leading_levels, 2), (p.trailing_levels, 4)];
            for (pair, k) in pairs {
                let Some(l) = pair else { continue };
                for (j, v) in [(k, l.air), (k + 1, l.water)] {
                    if (lo..=hi).contains(&v) {
                        continue;
                    }
                    let name = [
                        "air_level",
                        "water_level",
                        "leading_air_level",
                        "leading_water_level",
                        "trailing_air_level",
                        "trailing_water_level",
                    ][j];
                    return Err(LayoutError::Key {
                        file: file.to_path_buf(),
                        key: format!("probe[{i}].{name}"),
                        at: p.source.and_then(|s| s.levels[j]),
                        problem: Box::new(Problem::OutOfRange {
                            detail: format!(
                                "{name} = {v} lies outside the capture's sample range \
                                 {lo}..={hi} ({format}): levels are in the file's units"
                            ),
                        }),
                    });
                }
            }
        }
        Ok(())
    }

    /// Probes grouped into stations, in increasing `x_mm`: a station takes every probe within
    /// [`STATION_TOLERANCE_MM`] downstream of its first (smallest) `x_mm`, and stands at that
    /// `x_mm`. Within a station the probe indices are ordered by increasing elevation (file
    /// order on ties).
    pub fn stations(&self) -> Vec<(f64, Vec<usize>)> {
        let mut order: Vec<usize> = (0..self.probes.len()).collect();
        order.sort_by(|&a, &b| {
            let (pa, pb) = (&self.probes[a], &self.probes[b]);
            pa.x_mm
                .total_cmp(&pb.x_mm)
                .then(pa.elevation_mm.total_cmp(&pb.elevation_mm))
                .then(a.cmp(&b))
        });
        let mut stations: Vec<(f64, Vec<usize>)> = Vec::new();
        for i in order {
            let x = self.probes[i].x_mm;
            match stations.last_mut() {
                // Within the tolerance of the station's first (smallest) x_mm.
                Some((sx, members)) if x - *sx <= STATION_TOLERANCE_MM => members.push(i),
                _ => stations.push((x, vec![i])),
            }
        }
        for (_, members) in &mut stations {
            members.sort_by(|&a, &b| {
                let (pa, pb) = (&self.probes[a], &self.probes[b]);
                pa.elevation_mm.total_cmp(&pb.elevation_mm).then(a.cmp(&b))
            });
        }
        stations
    }

    /// Every WAV channel used by a tip, ascending, without repeats.
    pub fn tip_channels(&self) -> Vec<usize> {
        let mut c: Vec<usize> = self.probes.iter().flat_map(ProbeSpec::channels).collect();
        c.sort_unstable();
        c.dedup();
        c
    }
}

#[cfg(test)]
mod tests;
