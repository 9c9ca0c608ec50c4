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
    /// integrated across the array with it ([`crate::offline::discharge`]).
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
    Missing,
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
            Problem::Missing => f.write_str("required key is missing"),
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

// ---------------------------------------------------------------------------------------------
// Raw (as written) representation
// ---------------------------------------------------------------------------------------------

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLayout {
    flow: Spanned<RawFlow>,
    #[serde(default)]
    detector: Option<Spanned<RawDetector>>,
    #[serde(default)]
    probe: Vec<Spanned<RawProbe>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFlow {
    kind: Spanned<String>,
    phase_before_front: Option<Spanned<String>>,
    reference_depth_m: Option<Spanned<f64>>,
    water_temperature_c: Option<Spanned<f64>>,
    discharge_m2_s: Option<Spanned<f64>>,
    discharge_m3_s: Option<Spanned<f64>>,
    width_m: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDetector {
    threshold: Option<Spanned<f64>>,
    hysteresis: Option<Spanned<f64>>,
    learn_period_s: Option<Spanned<f64>>,
    rail_low: Option<Spanned<f64>>,
    rail_high: Option<Spanned<f64>>,
    min_swing: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProbe {
    name: Spanned<String>,
    elevation_mm: Spanned<f64>,
    x_mm: Option<Spanned<f64>>,
    leading: Spanned<i64>,
    trailing: Option<Spanned<i64>>,
    tip_spacing_mm: Option<Spanned<f64>>,
    air_is_high: Option<Spanned<bool>>,
    air_level: Option<Spanned<f64>>,
    water_level: Option<Spanned<f64>>,
    leading_air_level: Option<Spanned<f64>>,
    leading_water_level: Option<Spanned<f64>>,
    trailing_air_level: Option<Spanned<f64>>,
    trailing_water_level: Option<Spanned<f64>>,
    max_lag_ms: Option<Spanned<f64>>,
}

// ---------------------------------------------------------------------------------------------
// Parsing and validation
// ---------------------------------------------------------------------------------------------

/// Error construction with the file text at hand.
struct Ctx<'a> {
    text: &'a str,
    file: &'a Path,
    lines: &'a LineIndex,
}

/// Byte offsets of line starts, so that a location costs a binary search plus the
/// characters from its line start (remembered between calls on one long line), not a
/// scan from the start of the text: validation stays linear in the number of probes.
struct LineIndex {
    starts: Vec<usize>,
    /// The last location computed: (offset, column), to continue along a long line.
    last: std::cell::Cell<(usize, usize)>,
    /// Characters counted for columns so far (the linearity test reads it).
    scanned: std::cell::Cell<usize>,
}

impl LineIndex {
    fn new(text: &str) -> LineIndex {
        let starts = std::iter::once(0)
            .chain(text.match_indices('\n').map(|(i, _)| i + 1))
            .collect();
        LineIndex {
            starts,
            last: std::cell::Cell::new((0, 1)),
            scanned: std::cell::Cell::new(0),
        }
    }

    fn locate(&self, text: &str, offset: usize) -> Location {
        let mut offset = offset.min(text.len());
        while !text.is_char_boundary(offset) {
            offset -= 1;
        }
        let line = self.starts.partition_point(|&s| s <= offset);
        let start = self.starts.get(line.wrapping_sub(1)).copied().unwrap_or(0);
        let (last_off, last_col) = self.last.get();
        let (from, base) = if last_off >= start && last_off <= offset {
            (last_off, last_col)
        } else {
            (start, 1)
        };
        let column = base + text[from..offset].chars().count();
        self.scanned.set(self.scanned.get() + (offset - from));
        self.last.set((offset, column));
        Location { line, column }
    }
}

impl Ctx<'_> {
    fn at(&self, span: Range<usize>) -> Location {
        self.lines.locate(self.text, span.start)
    }

    fn err(&self, key: impl Into<String>, span: Range<usize>, problem: Problem) -> LayoutError {
        LayoutError::Key {
            file: self.file.to_path_buf(),
            key: key.into(),
            at: Some(self.at(span)),
            problem: Box::new(problem),
        }
    }

    fn range(&self, key: &str, v: &Spanned<f64>, ok: bool, rule: &str) -> Result<f64, LayoutError> {
        let x = *v.get_ref();
        if ok && x.is_finite() {
            Ok(x)
        } else {
            Err(self.err(
                key,
                v.span(),
                Problem::OutOfRange {
                    detail: format!("must be {rule} (got {x})"),
                },
            ))
        }
    }

    fn finite(&self, key: &str, v: &Spanned<f64>) -> Result<f64, LayoutError> {
        self.range(key, v, true, "a finite number")
    }

    fn positive(&self, key: &str, v: &Spanned<f64>) -> Result<f64, LayoutError> {
        self.range(key, v, *v.get_ref() > 0.0, "> 0")
    }

    fn channel(&self, key: &str, v: &Spanned<i64>) -> Result<usize, LayoutError> {
        let c = *v.get_ref();
        if (0..=MAX_CHANNEL as i64).contains(&c) {
            Ok(c as usize)
        } else {
            Err(self.err(
                key,
                v.span(),
                Problem::OutOfRange {
                    detail: format!("a channel index must be 0..={MAX_CHANNEL} (got {c})"),
                },
            ))
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

/// Turns a serde error (unknown key, missing key, wrong type) into a [`LayoutError::Key`]
/// with a key path found from the error's span.
fn schema_error(cx: &Ctx<'_>, doc: &DeTable<'_>, e: &toml::de::Error) -> LayoutError {
    let message = e.message().trim();
    let span = e.span();
    let missing = message.starts_with("missing field `");
    let path = match &span {
        // A missing key is reported on the span of the table that lacks it (an empty span at
        // the start for the document itself).
        Some(s) if missing => table_with_span(doc, s).unwrap_or_default(),
        Some(s) => path_in_table(doc, s.start).unwrap_or_default(),
        None => String::new(),
    };
    let at = span.map(|s| cx.at(s));
    let key_of = |field: &str| {
        if path.is_empty() {
            field.to_string()
        } else {
            format!("{path}.{field}")
        }
    };
    let (key, problem) = if let Some(rest) = message.strip_prefix("unknown field `") {
        let allowed = rest
            .split_once(", expected ")
            .map_or("none", |(_, list)| list)
            .trim_start_matches("one of ")
            .to_string();
        (path.clone(), Problem::UnknownKey { allowed })
    } else if let Some(rest) = message.strip_prefix("missing field `") {
        let field = rest.trim_end_matches('`');
        (key_of(field), Problem::Missing)
    } else {
        let mut detail = message
            .trim_start_matches("invalid type: ")
            .replace("expected f64", "expected a number")
            .replace("expected i64", "expected an integer")
            .replace("expected a boolean", "expected true or false");
        if path == "probe" && detail.contains("expected a sequence") {
            detail.push_str(" (write each probe as a [[probe]] table)");
        }
        (path.clone(), Problem::WrongType { detail })
    };
    LayoutError::Key {
        file: cx.file.to_path_buf(),
        key: if key.is_empty() {
            "(document)".into()
        } else {
            key
        },
        at,
        problem: Box::new(problem),
    }
}

/// The dotted key path of the table (or array-of-tables item) whose span is exactly `span`.
fn table_with_span(table: &DeTable<'_>, span: &Range<usize>) -> Option<String> {
    fn in_value(v: &Spanned<DeValue<'_>>, span: &Range<usize>) -> Option<String> {
        if v.span() == *span && v.get_ref().is_table() {
            return Some(String::new());
        }
        match v.get_ref() {
            DeValue::Table(t) => table_with_span(t, span),
            DeValue::Array(items) => items
                .iter()
                .enumerate()
                .find_map(|(i, item)| in_value(item, span).map(|sub| join_index(i, &sub))),
            _ => None,
        }
    }
    table
        .iter()
        .find_map(|(k, v)| in_value(v, span).map(|sub| join_key(k.get_ref().as_ref(), &sub)))
}

/// `name` followed by a sub-path (`""`, `"[2].x"` or `"x"`).
fn join_key(name: &str, sub: &str) -> String {
    if sub.is_empty() {
        name.to_string()
    } else if sub.starts_with('[') {
        format!("{name}{sub}")
    } else {
        format!("{name}.{sub}")
    }
}

/// `[i]` followed by a sub-path.
fn join_index(i: usize, sub: &str) -> String {
    if sub.is_empty() || sub.starts_with('[') {
        format!("[{i}]{sub}")
    } else {
        format!("[{i}].{sub}")
    }
}

fn span_holds(span: Range<usize>, pos: usize) -> bool {
    span.start <= pos && pos < span.end.max(span.start + 1)
}

/// The dotted key path of the innermost key or value whose span holds byte `pos`.
fn path_in_table(table: &DeTable<'_>, pos: usize) -> Option<String> {
    table.iter().find_map(|(k, v)| {
        let name = k.get_ref().as_ref();
        if span_holds(k.span(), pos) {
            Some(name.to_string())
        } else {
            path_in_value(v, pos).map(|sub| join_key(name, &sub))
        }
    })
}

/// Like [`path_in_table`] for a value: `Some("")` when the value itself holds `pos`.
fn path_in_value(v: &Spanned<DeValue<'_>>, pos: usize) -> Option<String> {
    let inner = match v.get_ref() {
        DeValue::Table(t) => path_in_table(t, pos),
        DeValue::Array(items) => items
            .iter()
            .enumerate()
            .find_map(|(i, item)| path_in_value(item, pos).map(|sub| join_index(i, &sub))),
        _ => None,
    };
    inner.or_else(|| span_holds(v.span(), pos).then(String::new))
}

fn build(cx: &Ctx<'_>, raw: RawLayout) -> Result<Layout, LayoutError> {
    let flow = build_flow(cx, raw.flow.into_inner())?;
    let detector = match raw.detector {
        Some(d) => build_detector(cx, d.into_inner())?,
        None => DetectorSettings::default(),
    };
    if raw.probe.is_empty() {
        return Err(LayoutError::Key {
            file: cx.file.to_path_buf(),
            key: "probe".into(),
            at: None,
            problem: Box::new(Problem::NoProbes),
        });
    }
    let mut probes: Vec<ProbeSpec> = Vec::with_capacity(raw.probe.len());
    // channel -> (key, line); name -> (key, line)
    let mut channels: HashMap<usize, (String, usize)> = HashMap::new();
    let mut names: HashMap<String, (String, usize)> = HashMap::new();
    for (i, p) in raw.probe.into_iter().enumerate() {
        let table = cx.at(p.span());
        let spec = build_probe(cx, i, table, p.into_inner(), &mut channels, &mut names)?;
        probes.push(spec);
    }
    Ok(Layout {
        flow,
        detector,
        probes,
    })
}

fn build_flow(cx: &Ctx<'_>, f: RawFlow) -> Result<Flow, LayoutError> {
    let kind = match f.kind.get_ref().as_str() {
        "steady" => FlowKind::Steady,
        "transient" => FlowKind::Transient,
        other => {
            return Err(cx.err(
                "flow.kind",
                f.kind.span(),
                Problem::OutOfRange {
                    detail: format!("must be \"steady\" or \"transient\" (got \"{other}\")"),
                },
            ))
        }
    };
    let phase_before_front = match &f.phase_before_front {
        None => Phase::Air,
        Some(s) => match s.get_ref().as_str() {
            "air" => Phase::Air,
            "water" => Phase::Water,
            other => {
                return Err(cx.err(
                    "flow.phase_before_front",
                    s.span(),
                    Problem::OutOfRange {
                        detail: format!("must be \"air\" or \"water\" (got \"{other}\")"),
                    },
                ))
            }
        },
    };
    let reference_depth_m = f
        .reference_depth_m
        .as_ref()
        .map(|v| cx.positive("flow.reference_depth_m", v))
        .transpose()?;
    let water_temperature_c = match &f.water_temperature_c {
        None => DEFAULT_WATER_TEMPERATURE_C,
        Some(v) => {
            let t = *v.get_ref();
            cx.range(
                "flow.water_temperature_c",
                v,
                (0.0..=100.0).contains(&t),
                "between 0 and 100 (degrees Celsius)",
            )?
        }
    };
    let positive =
        |key: &str, v: &Option<Spanned<f64>>| v.as_ref().map(|v| cx.positive(key, v)).transpose();
    let per_width = positive("flow.discharge_m2_s", &f.discharge_m2_s)?;
    let total = positive("flow.discharge_m3_s", &f.discharge_m3_s)?;
    let width = positive("flow.width_m", &f.width_m)?;
    let discharge_m2_s = match (per_width, total, width) {
        (q, None, None) => q,
        (None, Some(q), Some(b)) => Some(q / b),
        (Some(_), Some(_), _) => {
            let span = f.discharge_m3_s.as_ref().map(|v| v.span()).unwrap_or(0..0);
            return Err(cx.err(
                "flow.discharge_m3_s",
                span,
                Problem::OutOfRange {
                    detail: "give discharge_m2_s or discharge_m3_s, not both".into(),
                },
            ));
        }
        (None, Some(_), None) => {
            let span = f.discharge_m3_s.as_ref().map(|v| v.span()).unwrap_or(0..0);
            return Err(cx.err(
                "flow.discharge_m3_s",
                span,
                Problem::OutOfRange {
                    detail: "needs width_m, the channel width in metres".into(),
                },
            ));
        }
        (_, None, Some(_)) => {
            let span = f.width_m.as_ref().map(|v| v.span()).unwrap_or(0..0);
            return Err(cx.err(
                "flow.width_m",
                span,
                Problem::OutOfRange {
                    detail: "is only read with discharge_m3_s".into(),
                },
            ));
        }
    };
    Ok(Flow {
        kind,
        phase_before_front,
        reference_depth_m,
        water_temperature_c,
        discharge_m2_s,
    })
}

fn build_detector(cx: &Ctx<'_>, d: RawDetector) -> Result<DetectorSettings, LayoutError> {
    let mut s = DetectorSettings::default();
    if let Some(v) = &d.threshold {
        let t = *v.get_ref();
        s.threshold = cx.range("detector.threshold", v, t > 0.0 && t < 1.0, "> 0 and < 1")?;
    }
    if let Some(v) = &d.hysteresis {
        s.hysteresis = cx.finite("detector.hysteresis", v)?;
    }
    let t = s.threshold;
    let h_max = 2.0 * t.min(1.0 - t);
    let h = s.hysteresis;
    if !(h >= 0.0 && h < h_max) {
        let (key, span) = match (&d.hysteresis, &d.threshold) {
            (Some(v), _) => ("detector.hysteresis", v.span()),
            (None, Some(v)) => ("detector.threshold", v.span()),
            // The defaults are consistent; kept total for robustness.
            (None, None) => ("detector.hysteresis", 0..0),
        };
        return Err(cx.err(
            key,
            span,
            Problem::OutOfRange {
                detail: format!(
                    "hysteresis must be >= 0 and < 2 min(threshold, 1 - threshold) = {h_max} \
                     so that the band stays inside the range (threshold {t}, hysteresis {h})"
                ),
            },
        ));
    }
    if let Some(v) = &d.learn_period_s {
        s.learn_period_s = cx.positive("detector.learn_period_s", v)?;
    }
    s.rail_low = d
        .rail_low
        .as_ref()
        .map(|v| cx.finite("detector.rail_low", v))
        .transpose()?;
    s.rail_high = d
        .rail_high
        .as_ref()
        .map(|v| cx.finite("detector.rail_high", v))
        .transpose()?;
    if let (Some(lo), Some(hi), Some(v)) = (s.rail_low, s.rail_high, &d.rail_high) {
        if lo >= hi {
            return Err(cx.err(
                "detector.rail_high",
                v.span(),
                Problem::Inconsistent {
                    detail: format!("rail_high ({hi}) must be above rail_low ({lo})"),
                },
            ));
        }
    }
    s.min_swing = d
        .min_swing
        .as_ref()
        .map(|v| cx.positive("detector.min_swing", v))
        .transpose()?;
    Ok(s)
}

fn build_probe(
    cx: &Ctx<'_>,
    i: usize,
    table: Location,
    p: RawProbe,
    channels: &mut HashMap<usize, (String, usize)>,
    names: &mut HashMap<String, (String, usize)>,
) -> Result<ProbeSpec, LayoutError> {
    let key = |k: &str| format!("probe[{i}].{k}");

    // name
    let name = p.name.get_ref().clone();
    if name.trim().is_empty() || name.trim() != name || name.chars().any(char::is_control) {
        return Err(cx.err(
            key("name"),
            p.name.span(),
            Problem::OutOfRange {
                detail: "a probe name must be non-empty, without leading or trailing blanks \
                         or control characters"
                    .into(),
            },
        ));
    }
    if let Some((first_key, first_line)) = names.get(&name) {
        return Err(cx.err(
            key("name"),
            p.name.span(),
            Problem::DuplicateName {
                name,
                first_key: first_key.clone(),
                first_line: Some(*first_line),
            },
        ));
    }
    names.insert(name.clone(), (format!("probe[{i}]"), table.line));

    // geometry
    let elevation_mm = {
        let v = &p.elevation_mm;
        let x = *v.get_ref();
        cx.range(
            &key("elevation_mm"),
            v,
            (0.0..=MAX_ELEVATION_MM).contains(&x),
            &format!("0 to {MAX_ELEVATION_MM}"),
        )?
    };
    let x_mm = match &p.x_mm {
        Some(v) => cx.range(
            &key("x_mm"),
            v,
            v.get_ref().abs() <= MAX_ABS_X_MM,
            &format!("-{MAX_ABS_X_MM} to {MAX_ABS_X_MM}"),
        )?,
        None => 0.0,
    };

    // channels
    let leading = cx.channel(&key("leading"), &p.leading)?;
    let trailing = p
        .trailing
        .as_ref()
        .map(|v| cx.channel(&key("trailing"), v))
        .transpose()?;
    let tip_spacing_mm = match (&p.trailing, &p.tip_spacing_mm) {
        (Some(t), None) => {
            return Err(cx.err(key("trailing"), t.span(), Problem::TrailingWithoutSpacing))
        }
        (None, Some(s)) => {
            return Err(cx.err(
                key("tip_spacing_mm"),
                s.span(),
                Problem::SpacingWithoutTrailing,
            ))
        }
        (Some(_), Some(s)) => Some(cx.range(
            &key("tip_spacing_mm"),
            s,
            *s.get_ref() > 0.0 && *s.get_ref() <= MAX_TIP_SPACING_MM,
            &format!("> 0 and at most {MAX_TIP_SPACING_MM}"),
        )?),
        (None, None) => None,
    };
    let tips = std::iter::once((leading, "leading", p.leading.span())).chain(
        trailing
            .zip(p.trailing.as_ref())
            .map(|(c, v)| (c, "trailing", v.span())),
    );
    for (channel, what, span) in tips {
        let k = key(what);
        if let Some((first_key, first_line)) = channels.get(&channel) {
            return Err(cx.err(
                k,
                span,
                Problem::ChannelInUse {
                    channel,
                    first_key: first_key.clone(),
                    first_line: Some(*first_line),
                },
            ));
        }
        channels.insert(channel, (k, cx.at(span).line));
    }

    // levels and polarity: the probe's pair (both tips) or each tip's own pair
    let pair = |prefix: &'static str,
                a: &Option<Spanned<f64>>,
                w: &Option<Spanned<f64>>|
     -> Result<Option<(FixedLevels, Range<usize>)>, LayoutError> {
        let (ak, wk) = LEVEL_KEYS
            .iter()
            .find(|k| k.0 == prefix)
            .map_or(("air_level", "water_level"), |k| (k.1, k.2));
        match (a, w) {
            (None, None) => Ok(None),
            (Some(a), None) => {
                Err(cx.err(key(ak), a.span(), Problem::HalfLevelPair { missing: wk }))
            }
            (None, Some(w)) => {
                Err(cx.err(key(wk), w.span(), Problem::HalfLevelPair { missing: ak }))
            }
            (Some(a), Some(w)) => {
                let air = cx.finite(&key(ak), a)?;
                let water = cx.finite(&key(wk), w)?;
                if air == water {
                    return Err(cx.err(
                        key(wk),
                        w.span(),
                        Problem::Inconsistent {
                            detail: format!("{wk} must differ from {ak} (both {air})"),
                        },
                    ));
                }
                Ok(Some((FixedLevels { air, water }, w.span())))
            }
        }
    };
    let levels = pair("", &p.air_level, &p.water_level)?;
    let leading_levels = pair("leading_", &p.leading_air_level, &p.leading_water_level)?;
    let trailing_levels = pair("trailing_", &p.trailing_air_level, &p.trailing_water_level)?;
    if let (Some(_), None) = (&trailing_levels, trailing) {
        let span = trailing_levels.as_ref().map_or(0..0, |l| l.1.clone());
        return Err(cx.err(
            key("trailing_water_level"),
            span,
            Problem::Inconsistent {
                detail: "the probe has no `trailing` tip to take these levels".into(),
            },
        ));
    }
    if let (Some(_), Some((_, span))) = (
        &levels,
        leading_levels.as_ref().or(trailing_levels.as_ref()),
    ) {
        let which = if leading_levels.is_some() {
            "leading_water_level"
        } else {
            "trailing_water_level"
        };
        return Err(cx.err(
            key(which),
            span.clone(),
            Problem::Inconsistent {
                detail: "give either `air_level`/`water_level` (both tips) or each tip's \
                         own pair, not both"
                    .into(),
            },
        ));
    }
    // Every pair must read air on the same side as the polarity.
    let pairs: Vec<(&str, FixedLevels, Range<usize>)> = [
        ("", levels.clone()),
        ("leading_", leading_levels.clone()),
        ("trailing_", trailing_levels.clone()),
    ]
    .into_iter()
    .filter_map(|(k, l)| l.map(|(l, s)| (k, l, s)))
    .collect();
    let air_is_high = match (&p.air_is_high, pairs.first()) {
        (Some(v), _) => *v.get_ref(),
        (None, Some((_, l, _))) => l.air > l.water,
        (None, None) => true,
    };
    for (prefix, l, span) in &pairs {
        if (l.air > l.water) != air_is_high {
            let (k, detail) = match &p.air_is_high {
                Some(v) => (
                    "air_is_high".to_string(),
                    format!(
                        "air_is_high = {} contradicts {prefix}air_level = {} and \
                         {prefix}water_level = {}",
                        v.get_ref(),
                        l.air,
                        l.water
                    ),
                ),
                None => (
                    format!("{prefix}water_level"),
                    format!(
                        "{prefix}air_level = {} and {prefix}water_level = {} read air on the \
                         other side from the probe's other level pair",
                        l.air, l.water
                    ),
                ),
            };
            let span = match &p.air_is_high {
                Some(v) => v.span(),
                None => span.clone(),
            };
            return Err(cx.err(key(&k), span, Problem::Inconsistent { detail }));
        }
    }
    let levels = levels.map(|l| l.0);
    let leading_levels = leading_levels.map(|l| l.0);
    let trailing_levels = trailing_levels.map(|l| l.0);

    let max_lag_ms = match (&p.max_lag_ms, trailing) {
        (Some(v), None) => {
            return Err(cx.err(
                key("max_lag_ms"),
                v.span(),
                Problem::Inconsistent {
                    detail: "max_lag_ms applies to the cross-correlation of two tips, but the \
                             probe has no `trailing` tip"
                        .into(),
                },
            ))
        }
        (Some(v), Some(_)) => Some(cx.positive(&key("max_lag_ms"), v)?),
        (None, _) => None,
    };

    Ok(ProbeSpec {
        name,
        elevation_mm,
        x_mm,
        leading,
        trailing,
        tip_spacing_mm,
        air_is_high,
        levels,
        leading_levels,
        trailing_levels,
        max_lag_ms,
        source: Some(ProbeSource {
            table,
            leading: cx.at(p.leading.span()),
            trailing: p.trailing.as_ref().map(|v| cx.at(v.span())),
            levels: [
                &p.air_level,
                &p.water_level,
                &p.leading_air_level,
                &p.leading_water_level,
                &p.trailing_air_level,
                &p.trailing_water_level,
            ]
            .map(|v| v.as_ref().map(|v| cx.at(v.span()))),
        }),
    })
}

// ---------------------------------------------------------------------------------------------
// Tests
// ---------------------------------------------------------------------------------------------

#[cfg(test)]
mod tests {
    use super::*;

    const FILE: &str = "flume-b2-run14.toml";

    fn parse(text: &str) -> Result<Layout, LayoutError> {
        Layout::parse(text, Path::new(FILE))
    }

    /// Parses `text`, expects an error on `key` at `line`, returns the message.
    #[track_caller]
    fn fails(text: &str, key: &str, line: usize) -> String {
        let err = parse(text).expect_err("layout should be rejected");
        let msg = err.to_string();
        assert!(msg.contains(FILE), "no file name in: {msg}");
        assert!(
            msg.contains(&format!("`{key}`")),
            "no key `{key}` in: {msg}"
        );
        assert!(
            msg.contains(&format!("line {line},")),
            "no line {line} in: {msg}"
        );
        assert_eq!(err.key(), Some(key), "{msg}");
        assert_eq!(err.location().map(|l| l.line), Some(line), "{msg}");
        msg
    }

    const FULL: &str = r#"# flume B2, 0.5 m wide, run 14
[flow]
kind = "transient"
phase_before_front = "water"
reference_depth_m = 0.08
water_temperature_c = 17.5

[detector]
threshold = 0.45
hysteresis = 0.1
learn_period_s = 0.5
rail_low = -32000
rail_high = 32000
min_swing = 64

[[probe]]
name = "A"
elevation_mm = 24.0
x_mm = 1500
leading = 0
trailing = 1
tip_spacing_mm = 6.0
air_is_high = true
air_level = 26000
water_level = 3000
max_lag_ms = 5.0

[[probe]]
name = "B"
elevation_mm = 12
x_mm = 1500
leading = 2
air_is_high = false

[[probe]]
name = "C"
elevation_mm = 6.0
x_mm = 3000.0
leading = 5
trailing = 4
tip_spacing_mm = 4.5
air_level = -0.2
water_level = 0.6
"#;

    #[test]
    fn full_layout() {
        let l = parse(FULL).unwrap();
        assert_eq!(l.flow.kind, FlowKind::Transient);
        assert_eq!(l.flow.phase_before_front, Phase::Water);
        assert_eq!(l.flow.reference_depth_m, Some(0.08));
        assert_eq!(l.flow.water_temperature_c, 17.5);
        let d = &l.detector;
        assert_eq!(
            (d.threshold, d.hysteresis, d.learn_period_s),
            (0.45, 0.1, 0.5)
        );
        assert_eq!(
            (d.rail_low, d.rail_high, d.min_swing),
            (Some(-32000.0), Some(32000.0), Some(64.0))
        );
        assert_eq!(l.probes.len(), 3);
        let a = &l.probes[0];
        assert_eq!(a.name, "A");
        assert_eq!((a.elevation_mm, a.x_mm), (24.0, 1500.0));
        assert_eq!(
            (a.leading, a.trailing, a.tip_spacing_mm),
            (0, Some(1), Some(6.0))
        );
        assert!(a.air_is_high);
        assert_eq!(
            a.levels,
            Some(FixedLevels {
                air: 26000.0,
                water: 3000.0
            })
        );
        assert_eq!(a.max_lag_ms, Some(5.0));
        let src = a.source.unwrap();
        assert_eq!(
            (
                src.table.line,
                src.leading.line,
                src.trailing.map(|t| t.line)
            ),
            (16, 20, Some(21))
        );
        let b = &l.probes[1];
        assert_eq!((b.trailing, b.tip_spacing_mm, b.levels), (None, None, None));
        assert!(!b.air_is_high);
        // Polarity inferred from the levels.
        assert!(!l.probes[2].air_is_high);
        assert_eq!(l.stations(), vec![(1500.0, vec![1, 0]), (3000.0, vec![2])]);
        assert_eq!(l.tip_channels(), vec![0, 1, 2, 4, 5]);
        l.check_channels(6, Path::new(FILE)).unwrap();
    }

    #[test]
    fn minimal_layout_defaults() {
        let l = parse(
            "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"P1\"\nelevation_mm = 0\nleading = 3\n",
        )
        .unwrap();
        assert_eq!(
            l.flow,
            Flow {
                kind: FlowKind::Steady,
                phase_before_front: Phase::Air,
                reference_depth_m: None,
                water_temperature_c: 20.0,
                discharge_m2_s: None,
            }
        );
        assert_eq!(l.detector, DetectorSettings::default());
        let p = &l.probes[0];
        assert_eq!(
            (p.x_mm, p.leading, p.trailing, p.air_is_high),
            (0.0, 3, None, true)
        );
        assert_eq!(l.stations(), vec![(0.0, vec![0])]);
        assert_eq!(l.tip_channels(), vec![3]);
    }

    #[test]
    fn inline_tables_and_dotted_keys_are_accepted() {
        let l = parse(
            "flow.kind = \"steady\"\nprobe = [{ name = \"A\", elevation_mm = 1, leading = 0 }]\n",
        )
        .unwrap();
        assert_eq!(l.probes[0].name, "A");
    }

    #[test]
    fn serialises() {
        let l = parse(FULL).unwrap();
        let s = toml::to_string(&l).unwrap();
        assert!(s.contains("kind = \"transient\""), "{s}");
        assert!(!s.contains("source"), "{s}");
    }

    const MIN: &str =
        "[flow]\nkind = \"steady\"\n\n[[probe]]\nname = \"A\"\nelevation_mm = 10\nleading = 0\n";

    #[test]
    fn syntax_error() {
        let err = parse("[flow]\nkind = \"steady\"\n[[probe]\nname = \"A\"\n").unwrap_err();
        let msg = err.to_string();
        assert!(matches!(err, LayoutError::Syntax { .. }), "{msg}");
        assert!(msg.contains(FILE) && msg.contains("line 3,"), "{msg}");
        let err = parse("[flow]\nkind = steady\n").unwrap_err();
        assert!(err.to_string().contains("line 2,"), "{err}");
    }

    #[test]
    fn unknown_keys() {
        let m = fails(&format!("{MIN}trailling = 1\n"), "probe[0].trailling", 8);
        assert!(m.contains("unknown key") && m.contains("`trailing`"), "{m}");
        fails("[flow]\nkind = \"steady\"\nspeed = 3\n", "flow.speed", 3);
        fails(
            &format!("{MIN}[detector]\nthreshhold = 0.5\n"),
            "detector.threshhold",
            9,
        );
        fails(&format!("{MIN}\n[probes]\n"), "probes", 9);
        let text = format!("{MIN}[[probe]]\nname = \"B\"\nelevation_mm = 10\nleading = 1\nx = 2\n");
        fails(&text, "probe[1].x", 12);
    }

    #[test]
    fn missing_keys() {
        let m = fails(
            "[flow]\nkind = \"steady\"\n[[probe]]\nname = \"A\"\nleading = 0\n",
            "probe[0].elevation_mm",
            3,
        );
        assert!(m.contains("missing"), "{m}");
        let text = format!("{MIN}[[probe]]\nname = \"B\"\nelevation_mm = 10\n");
        fails(&text, "probe[1].leading", 8);
        fails("[flow]\nphase_before_front = \"air\"\n", "flow.kind", 1);
        let err = parse("[[probe]]\nname = \"A\"\nelevation_mm = 1\nleading = 0\n").unwrap_err();
        assert_eq!(err.key(), Some("flow"), "{err}");
    }

    #[test]
    fn wrong_types() {
        let m = fails(
            &MIN.replace("elevation_mm = 10", "elevation_mm = \"10\""),
            "probe[0].elevation_mm",
            6,
        );
        assert!(m.contains("expected a number"), "{m}");
        fails(
            &MIN.replace("leading = 0", "leading = 1.5"),
            "probe[0].leading",
            7,
        );
        fails(&MIN.replace("name = \"A\"", "name = 7"), "probe[0].name", 5);
        fails(
            &format!("{MIN}air_is_high = \"yes\"\n"),
            "probe[0].air_is_high",
            8,
        );
        fails("[flow]\nkind = 3\n", "flow.kind", 2);
        let m = fails(
            "[flow]\nkind = \"steady\"\n[probe]\nname = \"A\"\n",
            "probe",
            3,
        );
        assert!(m.contains("[[probe]]"), "{m}");
    }

    #[test]
    fn out_of_range_values() {
        let m = fails("[flow]\nkind = \"stationary\"\n", "flow.kind", 2);
        assert!(m.contains("\"steady\" or \"transient\""), "{m}");
        fails(
            &MIN.replace(
                "kind = \"steady\"",
                "kind = \"transient\"\nphase_before_front = \"foam\"",
            ),
            "flow.phase_before_front",
            3,
        );
        fails(
            &MIN.replace(
                "kind = \"steady\"",
                "kind = \"steady\"\nreference_depth_m = 0",
            ),
            "flow.reference_depth_m",
            3,
        );
        fails(
            &MIN.replace(
                "kind = \"steady\"",
                "kind = \"steady\"\nwater_temperature_c = nan",
            ),
            "flow.water_temperature_c",
            3,
        );
        fails(
            &MIN.replace("elevation_mm = 10", "elevation_mm = -1"),
            "probe[0].elevation_mm",
            6,
        );
        fails(
            &MIN.replace("leading = 0", "leading = -1"),
            "probe[0].leading",
            7,
        );
        fails(&format!("{MIN}x_mm = inf\n"), "probe[0].x_mm", 8);
        fails(
            &format!("{MIN}trailing = 1\ntip_spacing_mm = 0\n"),
            "probe[0].tip_spacing_mm",
            9,
        );
        fails(
            &format!("{MIN}trailing = 1\ntip_spacing_mm = 5\nmax_lag_ms = -2\n"),
            "probe[0].max_lag_ms",
            10,
        );
        fails(
            &format!("{MIN}[detector]\nthreshold = 1.0\n"),
            "detector.threshold",
            9,
        );
        fails(
            &format!("{MIN}[detector]\nlearn_period_s = 0\n"),
            "detector.learn_period_s",
            9,
        );
        fails(
            &format!("{MIN}[detector]\nmin_swing = 0\n"),
            "detector.min_swing",
            9,
        );
        fails(
            &format!("{MIN}[detector]\nrail_low = 100\nrail_high = 100\n"),
            "detector.rail_high",
            10,
        );
    }

    #[test]
    fn hysteresis_band_must_fit() {
        // 2 min(0.5, 0.5) = 1: 0.99 fits, 1.0 does not.
        parse(&format!("{MIN}[detector]\nhysteresis = 0.99\n")).unwrap();
        parse(&format!("{MIN}[detector]\nhysteresis = 0\n")).unwrap();
        fails(
            &format!("{MIN}[detector]\nhysteresis = 1.0\n"),
            "detector.hysteresis",
            9,
        );
        fails(
            &format!("{MIN}[detector]\nhysteresis = -0.1\n"),
            "detector.hysteresis",
            9,
        );
        // Threshold 0.1 leaves room for a band below 0.2; the default 0.2 does not fit.
        fails(
            &format!("{MIN}[detector]\nthreshold = 0.1\n"),
            "detector.threshold",
            9,
        );
        parse(&format!(
            "{MIN}[detector]\nthreshold = 0.1\nhysteresis = 0.15\n"
        ))
        .unwrap();
    }

    #[test]
    fn trailing_and_spacing_go_together() {
        let m = fails(&format!("{MIN}trailing = 1\n"), "probe[0].trailing", 8);
        assert!(m.contains("tip_spacing_mm"), "{m}");
        let m = fails(
            &format!("{MIN}tip_spacing_mm = 5\n"),
            "probe[0].tip_spacing_mm",
            8,
        );
        assert!(m.contains("no `trailing`"), "{m}");
        fails(&format!("{MIN}max_lag_ms = 4\n"), "probe[0].max_lag_ms", 8);
    }

    #[test]
    fn channel_used_twice() {
        let m = fails(
            &format!("{MIN}trailing = 0\ntip_spacing_mm = 5\n"),
            "probe[0].trailing",
            8,
        );
        assert!(
            m.contains("channel 0") && m.contains("probe[0].leading") && m.contains("(line 7)"),
            "{m}"
        );
        let text = format!(
            "{MIN}trailing = 1\ntip_spacing_mm = 5\n\n[[probe]]\nname = \"B\"\nelevation_mm = 20\nleading = 2\ntrailing = 1\ntip_spacing_mm = 5\n"
        );
        let m = fails(&text, "probe[1].trailing", 15);
        assert!(
            m.contains("probe[0].trailing") && m.contains("(line 8)"),
            "{m}"
        );
    }

    #[test]
    fn duplicate_names() {
        let text = format!("{MIN}\n[[probe]]\nname = \"A\"\nelevation_mm = 20\nleading = 1\n");
        let m = fails(&text, "probe[1].name", 10);
        assert!(
            m.contains("\"A\"") && m.contains("probe[0]") && m.contains("(line 4)"),
            "{m}"
        );
        fails(
            &MIN.replace("name = \"A\"", "name = \"\""),
            "probe[0].name",
            5,
        );
        fails(
            &MIN.replace("name = \"A\"", "name = \" A\""),
            "probe[0].name",
            5,
        );
    }

    /// Each tip's own level pair; the probe's pair stays accepted; mixing them, a pair for
    /// a missing trailing tip, half pairs and pairs that read air on opposite sides are
    /// refused with the key named.
    #[test]
    fn per_tip_levels() {
        const DUAL: &str = "trailing = 1\ntip_spacing_mm = 5\n";
        let l = parse(&format!(
            "{MIN}{DUAL}leading_air_level = 26000\nleading_water_level = 3000\n\
             trailing_air_level = 25100\ntrailing_water_level = 3400\n"
        ))
        .unwrap();
        let p = &l.probes[0];
        assert_eq!(
            p.tip_levels(false),
            Some(FixedLevels {
                air: 26000.0,
                water: 3000.0
            })
        );
        assert_eq!(
            p.tip_levels(true),
            Some(FixedLevels {
                air: 25100.0,
                water: 3400.0
            })
        );
        assert!(p.air_is_high);
        // Only the trailing tip fixed: the leading tip learns.
        let l = parse(&format!(
            "{MIN}{DUAL}trailing_air_level = -2000\ntrailing_water_level = 9000\n"
        ))
        .unwrap();
        assert_eq!(l.probes[0].tip_levels(false), None);
        assert!(!l.probes[0].air_is_high);
        // The probe's pair applies to both tips.
        let l = parse(&format!(
            "{MIN}{DUAL}air_level = 26000\nwater_level = 3000\n"
        ))
        .unwrap();
        assert_eq!(l.probes[0].tip_levels(true), l.probes[0].tip_levels(false));
        let m = fails(
            &format!("{MIN}{DUAL}air_level = 26000\nwater_level = 3000\nleading_air_level = 1\nleading_water_level = 2\n"),
            "probe[0].leading_water_level",
            13,
        );
        assert!(m.contains("not both"), "{m}");
        let m = fails(
            &format!("{MIN}trailing_air_level = 26000\ntrailing_water_level = 3000\n"),
            "probe[0].trailing_water_level",
            9,
        );
        assert!(m.contains("no `trailing` tip"), "{m}");
        let m = fails(
            &format!("{MIN}{DUAL}trailing_air_level = 26000\n"),
            "probe[0].trailing_air_level",
            10,
        );
        assert!(m.contains("trailing_water_level"), "{m}");
        let m = fails(
            &format!(
                "{MIN}{DUAL}leading_air_level = 26000\nleading_water_level = 3000\n\
                      trailing_air_level = 3000\ntrailing_water_level = 26000\n"
            ),
            "probe[0].trailing_water_level",
            13,
        );
        assert!(m.contains("other side"), "{m}");
        let m = fails(
            &format!("{MIN}{DUAL}air_is_high = false\ntrailing_air_level = 26000\ntrailing_water_level = 3000\n"),
            "probe[0].air_is_high",
            10,
        );
        assert!(m.contains("contradicts trailing_air_level"), "{m}");
    }

    #[test]
    fn level_pairs() {
        let m = fails(
            &format!("{MIN}air_level = 26000\n"),
            "probe[0].air_level",
            8,
        );
        assert!(m.contains("water_level"), "{m}");
        fails(
            &format!("{MIN}water_level = 3000\n"),
            "probe[0].water_level",
            8,
        );
        fails(
            &format!("{MIN}air_level = 3000\nwater_level = 3000\n"),
            "probe[0].water_level",
            9,
        );
        let m = fails(
            &format!("{MIN}air_is_high = true\nair_level = 3000\nwater_level = 26000\n"),
            "probe[0].air_is_high",
            8,
        );
        assert!(m.contains("contradicts"), "{m}");
    }

    #[test]
    fn zero_probes() {
        let err = parse("[flow]\nkind = \"steady\"\n").unwrap_err();
        assert_eq!(err.key(), Some("probe"));
        assert_eq!(err.problem(), Some(&Problem::NoProbes));
        let msg = err.to_string();
        assert!(msg.contains(FILE) && msg.contains("[[probe]]"), "{msg}");
        let err = parse("probe = []\n[flow]\nkind = \"steady\"\n").unwrap_err();
        assert_eq!(err.problem(), Some(&Problem::NoProbes));
    }

    #[test]
    fn channels_beyond_the_capture() {
        let l = parse(FULL).unwrap();
        let err = l.check_channels(5, Path::new(FILE)).unwrap_err();
        let msg = err.to_string();
        assert_eq!(err.key(), Some("probe[2].leading"), "{msg}");
        assert!(
            msg.contains("line 39,") && msg.contains("channel 5") && msg.contains("5 channels"),
            "{msg}"
        );
        let err = l.check_channels(2, Path::new(FILE)).unwrap_err();
        assert_eq!(err.key(), Some("probe[1].leading"));
        let mut l = parse(FULL).unwrap();
        l.probes[0].trailing = Some(9);
        let err = l.check_channels(6, Path::new(FILE)).unwrap_err();
        assert!(
            err.to_string().contains("probe[0].trailing") && err.to_string().contains("line 21,"),
            "{err}"
        );
        // Built in code: no line, still a message.
        l.probes[0].source = None;
        let err = l.check_channels(6, Path::new(FILE)).unwrap_err();
        assert_eq!(err.location(), None);
        assert!(
            err.to_string()
                .starts_with(&format!("{FILE}: key `probe[0].trailing`")),
            "{err}"
        );
    }

    #[test]
    fn io_error_names_the_path() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("absent.toml");
        let err = Layout::load(&path).unwrap_err();
        assert!(matches!(err, LayoutError::Io { .. }));
        assert!(err.to_string().contains("absent.toml"), "{err}");
        std::fs::write(&path, MIN).unwrap();
        assert_eq!(Layout::load(&path).unwrap().probes.len(), 1);
    }

    fn layout_of(probes: usize) -> String {
        let mut t = String::from("[flow]\nkind = \"steady\"\n");
        for i in 0..probes {
            t.push_str(&format!(
                "\n[[probe]]\nname = \"P{i}\"\nelevation_mm = 10.0\nleading = {}\n\
                 trailing = {}\ntip_spacing_mm = 5.0\n",
                2 * i,
                2 * i + 1
            ));
        }
        t
    }

    /// Validation work grows linearly with the number of probes: the bytes scanned to
    /// locate keys, counted (not timed), for 100 and 800 probes, stay within a constant of
    /// the text length (a scan from the start of the text per key grows as its square).
    #[test]
    fn validation_scans_linearly_in_the_number_of_probes() {
        for n in [100, 800] {
            let text = layout_of(n);
            let (r, scanned) = Layout::parse_counting(&text, Path::new("big.toml"));
            assert_eq!(r.unwrap().probes.len(), n);
            assert!(
                scanned <= 2 * text.len(),
                "{n} probes: {scanned} of {}",
                text.len()
            );
        }
        // One long line of inline tables: still linear.
        let mut text = String::from("probe = [");
        for i in 0..800 {
            text.push_str(&format!(
                "{{name = \"P{i}\", elevation_mm = 1.0, leading = {i}}}, "
            ));
        }
        text.push_str("]\n[flow]\nkind = \"steady\"\n");
        let (r, scanned) = Layout::parse_counting(&text, Path::new("line.toml"));
        assert_eq!(r.unwrap().probes.len(), 800);
        assert!(scanned <= 2 * text.len(), "{scanned} of {}", text.len());
    }

    #[test]
    fn limits_are_checked_before_the_probes() {
        let e = parse(&layout_of(MAX_LAYOUT_PROBES + 1))
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("key `probe`") && e.contains("at most 1024"),
            "{e}"
        );
        let big = "#".repeat(MAX_LAYOUT_BYTES as usize + 1);
        let e = parse(&big).unwrap_err();
        assert!(matches!(e, LayoutError::TooLarge { .. }), "{e}");
        // load() refuses by the file size, before reading.
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("huge.toml");
        std::fs::File::create(&p)
            .unwrap()
            .set_len(10 << 20)
            .unwrap();
        let e = Layout::load(&p).unwrap_err().to_string();
        assert!(
            e.contains("huge.toml") && e.contains("10485760 bytes"),
            "{e}"
        );
    }

    #[test]
    fn extreme_geometry_is_refused_naming_the_key() {
        let base = layout_of(1);
        let cases = [
            (
                "tip_spacing_mm = 5.0",
                "tip_spacing_mm = 1e300",
                "probe[0].tip_spacing_mm",
            ),
            (
                "elevation_mm = 10.0",
                "elevation_mm = 1e300",
                "probe[0].elevation_mm",
            ),
            (
                "elevation_mm = 10.0",
                "elevation_mm = 10.0\nx_mm = 1e30",
                "probe[0].x_mm",
            ),
            (
                "elevation_mm = 10.0",
                "elevation_mm = 10.0\nx_mm = -1e300",
                "probe[0].x_mm",
            ),
        ];
        for (from, to, key) in cases {
            let e = parse(&base.replace(from, to)).unwrap_err();
            assert_eq!(e.key(), Some(key), "{e}");
            assert!(e.location().is_some(), "{e}");
        }
    }

    #[test]
    fn probes_within_the_station_tolerance_form_one_station_ordered_by_elevation() {
        let mut t = layout_of(3);
        t = t.replacen(
            "elevation_mm = 10.0",
            "elevation_mm = 30.0\nx_mm = 600.0000001",
            1,
        );
        t = t.replacen(
            "elevation_mm = 10.0\n",
            "elevation_mm = 20.0\nx_mm = 600.0\n",
            1,
        );
        t = t.replacen(
            "elevation_mm = 10.0\n",
            "elevation_mm = 5.0\nx_mm = 601.5\n",
            1,
        );
        let l = parse(&t).unwrap();
        let st = l.stations();
        assert_eq!(st.len(), 2, "{st:?}");
        assert_eq!(st[0], (600.0, vec![1, 0]));
        assert_eq!(st[1], (601.5, vec![2]));
    }

    #[test]
    fn location_counts_characters() {
        let text = "a\nbé = 1\n";
        let at = Location::of_offset(text, text.find('=').unwrap());
        assert_eq!(at, Location { line: 2, column: 4 });
        assert_eq!(Location::of_offset(text, 1000).line, 3);
        assert_eq!(Location::of_offset("", 0), Location { line: 1, column: 1 });
    }
}
