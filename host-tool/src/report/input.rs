//! Reading a run folder: `windows.csv` (required), `profile.csv`, `fronts.csv`, `chords.csv`,
//! `chord_lengths.csv`, `flow.json` and `indicators.csv` (each optional).
//!
//! Columns are found by name, so extra columns (DESIGN.md §3 allows them at the end) and
//! columns in another order are fine; a missing column reads as empty cells. Numbers that do
//! not parse are errors naming the file, line and column, except on the last row of a file,
//! which a live session may have been writing when the archive was copied: that row is left
//! out with a note.

use super::error::ReportError;
use super::indicators::Indicators;
use indicatif::ProgressBar;
use std::collections::HashMap;
use std::fs::File;
use std::io::BufReader;
use std::path::{Path, PathBuf};

/// Windows, profile slices and fronts of one run, as read.
#[derive(Debug, Default)]
pub struct Run {
    /// The folder read.
    pub dir: PathBuf,
    /// Probes, sorted by streamwise position, then elevation, then name. Their index is the
    /// probe's colour everywhere in the report.
    pub probes: Vec<Probe>,
    /// Rows of `windows.csv`, in file order.
    pub windows: Vec<Window>,
    /// Flag names seen, bit `i` of [`Window::flags`] being `flag_names[i]`.
    pub flag_names: Vec<String>,
    /// Rows of `profile.csv` (empty when the file is missing).
    pub profile: Vec<Slice>,
    /// Rows of `fronts.csv` (empty when the file is missing).
    pub fronts: Vec<Front>,
    /// Rows of `chords.csv` (empty when the file is missing).
    pub chords: Vec<ChordBin>,
    /// Rows of `chord_lengths.csv` (empty when the file is missing).
    pub chord_lengths: Vec<ChordBin>,
    /// `flow.json` and `indicators.csv` merged (None when neither exists).
    pub indicators: Option<Indicators>,
    /// Which optional files were found (by file name).
    pub files_found: Vec<&'static str>,
    /// Which optional columns of windows.csv exist (by column name).
    pub columns: Vec<String>,
    /// Things the reader noticed: columns it does not know, rows left out.
    pub notes: Vec<String>,
}

/// One probe (a row group of windows.csv).
#[derive(Debug, Clone, PartialEq)]
pub struct Probe {
    /// Name from the layout.
    pub name: String,
    /// Tip elevation above the bed, mm (extra column `elevation_mm`).
    pub elevation_mm: Option<f64>,
    /// Streamwise position, mm (extra column `x_mm`).
    pub x_mm: Option<f64>,
    /// Station from fronts.csv.
    pub station: Option<String>,
}

/// One row of windows.csv.
#[derive(Debug, Clone, Default)]
#[allow(missing_docs)]
pub struct Window {
    /// Index into [`Run::probes`].
    pub probe: usize,
    pub start_s: Option<f64>,
    pub end_s: Option<f64>,
    pub since_front_s: Option<f64>,
    pub void_fraction: Option<f64>,
    pub count_rate_hz: Option<f64>,
    pub chord_mean_s: Option<f64>,
    pub velocity_m_s: Option<f64>,
    pub correlation_peak: Option<f64>,
    pub turbulence_intensity: Option<f64>,
    pub bubbles: Option<f64>,
    /// Bit set over [`Run::flag_names`].
    pub flags: u64,
    pub chord_median_s: Option<f64>,
    pub chord_p10_s: Option<f64>,
    pub chord_p90_s: Option<f64>,
    /// Standard deviation of C across the runs of an ensemble (`frothline ensemble`).
    pub void_fraction_spread: Option<f64>,
}

/// The column of an ensemble's windows.csv with the run-to-run spread of C.
pub const ENSEMBLE_SPREAD: &str = "void_fraction_spread";

impl Window {
    /// Window length in seconds, when both bounds are known and in order.
    pub fn duration_s(&self) -> Option<f64> {
        match (self.start_s, self.end_s) {
            (Some(a), Some(b)) if b > a => Some(b - a),
            _ => None,
        }
    }
}

/// One row of profile.csv.
#[derive(Debug, Clone, Default)]
#[allow(missing_docs)]
pub struct Slice {
    pub station: String,
    pub start_s: Option<f64>,
    pub end_s: Option<f64>,
    pub since_front_s: Option<f64>,
    pub y90_mm: Option<f64>,
    pub depth_averaged_void_fraction: Option<f64>,
    pub equivalent_depth_mm: Option<f64>,
    pub profile_exponent: Option<f64>,
    pub fit_rmse: Option<f64>,
    pub probes_used: Option<f64>,
    /// Optional extra columns `decay_c0`, `decay_cf`, `decay_tau_s` (C0, Cf, τ; also read as
    /// `decay_initial`, `decay_final`): a decay fit made by the writer (the report fits one
    /// itself when they are absent).
    pub decay: Option<(f64, f64, f64)>,
    /// Optional extra column `void_fraction_se`: the standard error of
    /// `depth_averaged_void_fraction` (drawn as a 90 % interval).
    pub void_fraction_se: Option<f64>,
    /// Optional extra column `flags`: flags of the slice's profile fit, `|`-separated.
    pub flags: Vec<String>,
    /// Optional extra column `decay_flags`: flags of the decay fit, `|`-separated.
    pub decay_flags: Vec<String>,
}

/// One row of fronts.csv.
#[derive(Debug, Clone)]
pub struct Front {
    /// Probe name.
    pub probe: String,
    /// Station name.
    pub station: String,
    /// Arrival, seconds from the start of the capture.
    pub arrival_s: Option<f64>,
}

/// One row of chords.csv (`probe,bin_lower_s,bin_upper_s,count`) or chord_lengths.csv
/// (`probe,...,bin_lower_mm,bin_upper_mm,count`): a bin of a pooled histogram.
#[derive(Debug, Clone)]
pub struct ChordBin {
    /// Index into [`Run::probes`].
    pub probe: usize,
    /// Bin lower edge: s in chords.csv, mm in chord_lengths.csv.
    pub lower: f64,
    /// Bin upper edge, in the unit of `lower`.
    pub upper: f64,
    /// Bubbles in the bin.
    pub count: f64,
}

/// Columns of windows.csv the report reads (the contract of DESIGN.md §3 and the extra
/// columns written by `windows_csv`). Any other column is ignored with a note.
const WINDOW_COLUMNS: &[&str] = crate::shared::windows_csv::COLUMNS.split_at(17).0;

/// Most flag names a run may carry; names past this share the last bit.
const MAX_FLAGS: usize = 64;

/// windows.csv files larger than this get a progress bar while they are read.
pub const PROGRESS_BYTES: u64 = 2 << 20;

/// A CSV file opened with its header mapped by column name.
struct Table {
    path: PathBuf,
    reader: csv::Reader<BufReader<File>>,
    cols: HashMap<String, usize>,
    headers: Vec<String>,
    /// Byte offset of the last line when the file does not end with a line break.
    unterminated_tail: Option<u64>,
}

/// Where the last line of `file` starts, if the file does not end with a line break.
fn unterminated_tail(file: &mut File) -> std::io::Result<Option<u64>> {
    use std::io::{Read, Seek, SeekFrom};
    let len = file.metadata()?.len();
    if len == 0 {
        return Ok(None);
    }
    let tail = len.min(1 << 16);
    file.seek(SeekFrom::Start(len - tail))?;
    let mut buf = vec![0u8; tail as usize];
    file.read_exact(&mut buf)?;
    file.seek(SeekFrom::Start(0))?;
    if buf.last() == Some(&b'\n') {
        return Ok(None);
    }
    Ok(Some(match buf.iter().rposition(|&b| b == b'\n') {
        Some(i) => len - tail + i as u64 + 1,
        None => len - tail,
    }))
}

impl Table {
    fn open(path: &Path) -> Result<Option<Table>, ReportError> {
        let mut file = match File::open(path) {
            Ok(f) => f,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
            Err(source) => {
                return Err(ReportError::Read {
                    path: path.to_path_buf(),
                    source,
                })
            }
        };
        let unterminated_tail =
            unterminated_tail(&mut file).map_err(|source| ReportError::Read {
                path: path.to_path_buf(),
                source,
            })?;
        let mut reader = csv::ReaderBuilder::new()
            .flexible(true)
            .trim(csv::Trim::All)
            .from_reader(BufReader::new(file));
        let headers: Vec<String> = reader
            .headers()
            .map_err(|e| csv_error(path, &e))?
            .iter()
            .map(|h| h.trim_start_matches('\u{feff}').to_string())
            .collect();
        let mut cols = HashMap::new();
        for (i, h) in headers.iter().enumerate() {
            cols.entry(h.clone()).or_insert(i);
        }
        Ok(Some(Table {
            path: path.to_path_buf(),
            reader,
            cols,
            headers,
            unterminated_tail,
        }))
    }

    fn col(&self, name: &str) -> Option<usize> {
        self.cols.get(name).copied()
    }

    fn require(&self, name: &str) -> Result<usize, ReportError> {
        self.col(name).ok_or_else(|| ReportError::Parse {
            path: self.path.clone(),
            line: Some(1),
            message: format!("no column `{name}` in the header"),
        })
    }

    /// Visit every row; `each` returns a message for a malformed row. A malformed last row
    /// is dropped (returned as a note); a malformed row with rows after it is an error. A
    /// last row without its line break and with fewer cells than the header is malformed
    /// (a file cut mid-row); shorter rows elsewhere are read, their missing cells empty.
    fn rows(
        &mut self,
        progress: Option<&ProgressBar>,
        mut each: impl FnMut(&csv::StringRecord) -> Result<(), String>,
    ) -> Result<Option<String>, ReportError> {
        let mut pending: Option<(u64, String)> = None;
        let mut rec = csv::StringRecord::new();
        let mut n = 0u64;
        loop {
            let line = self.reader.position().line() + 1;
            match self.reader.read_record(&mut rec) {
                Ok(false) => break,
                Ok(true) => {
                    if let Some((line, message)) = pending.take() {
                        return Err(self.parse_error(line, message));
                    }
                    if rec.iter().all(|c| c.is_empty()) {
                        continue;
                    }
                    let line = rec.position().map(|p| p.line()).unwrap_or(line);
                    let at_unterminated_end = self
                        .unterminated_tail
                        .is_some_and(|start| rec.position().is_some_and(|p| p.byte() >= start));
                    let short = at_unterminated_end && rec.len() < self.headers.len();
                    let result = if short {
                        Err(format!(
                            "{} of {} cells and no line break: the file was cut mid-row",
                            rec.len(),
                            self.headers.len()
                        ))
                    } else {
                        each(&rec)
                    };
                    if let Err(message) = result {
                        pending = Some((line, message));
                    }
                }
                Err(e) => {
                    if let Some((line, message)) = pending.take() {
                        return Err(self.parse_error(line, message));
                    }
                    pending = Some((line, e.to_string()));
                }
            }
            n += 1;
            if let Some(p) = progress {
                if n & 0xfff == 0 {
                    p.set_position(self.reader.position().byte());
                }
            }
        }
        Ok(pending.map(|(line, message)| {
            format!(
                "{}: the last row (line {line}) is incomplete and was left out ({message})",
                file_name(&self.path)
            )
        }))
    }

    fn parse_error(&self, line: u64, message: String) -> ReportError {
        ReportError::Parse {
            path: self.path.clone(),
            line: Some(line),
            message,
        }
    }
}

fn csv_error(path: &Path, e: &csv::Error) -> ReportError {
    ReportError::Parse {
        path: path.to_path_buf(),
        line: e.position().map(|p| p.line()),
        message: e.to_string(),
    }
}

fn file_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string())
}

/// The text of a cell (empty when the row is short or the column missing).
fn text(rec: &csv::StringRecord, col: Option<usize>) -> &str {
    col.and_then(|i| rec.get(i)).unwrap_or("")
}

/// Largest magnitude a number cell may hold. No quantity of these files comes near it
/// (seconds, hertz, metres per second, millimetres, counts of one run); beyond it a value
/// is damage, and axis arithmetic on it would overflow.
pub const MAX_CELL_MAGNITUDE: f64 = 1e12;

/// A number cell: empty, `NaN` and infinities read as "not computed"; a finite value beyond
/// [`MAX_CELL_MAGNITUDE`] is an error naming the column.
fn num(
    rec: &csv::StringRecord,
    col: Option<usize>,
    headers: &[String],
) -> Result<Option<f64>, String> {
    let cell = text(rec, col);
    if cell.is_empty() {
        return Ok(None);
    }
    match cell.parse::<f64>() {
        Ok(v) if v.is_finite() && v.abs() <= MAX_CELL_MAGNITUDE => Ok(Some(v)),
        Ok(v) if v.is_finite() => {
            let name = col.and_then(|i| headers.get(i)).map_or("?", |s| s.as_str());
            Err(format!(
                "column `{name}`: `{cell}` is beyond ±{MAX_CELL_MAGNITUDE:e}: not a measured \
                 value (a damaged file?)"
            ))
        }
        Ok(_) => Ok(None),
        Err(_) => {
            let name = col.and_then(|i| headers.get(i)).map_or("?", |s| s.as_str());
            Err(format!("column `{name}`: `{cell}` is not a number"))
        }
    }
}

/// Read every file of a run folder. `progress` is advanced over windows.csv's bytes.
pub fn read_run(dir: &Path, progress: &ProgressBar) -> Result<Run, ReportError> {
    let mut run = Run {
        dir: dir.to_path_buf(),
        ..Run::default()
    };
    if !dir.is_dir() {
        return Err(ReportError::Usage(format!(
            "{}: not a folder (give the --out folder of `frothline replay`)",
            dir.display()
        )));
    }
    check_manifest(dir)?;
    read_windows(&mut run, progress)?;
    read_fronts(&mut run)?;
    read_profile(&mut run)?;
    run.chords = read_bins(&mut run, "chords.csv", ("bin_lower_s", "bin_upper_s"), "s")?;
    run.chord_lengths = read_bins(
        &mut run,
        "chord_lengths.csv",
        ("bin_lower_mm", "bin_upper_mm"),
        "mm",
    )?;
    run.indicators = super::indicators::read(dir, &mut run.files_found)?;
    Ok(run)
}

/// A folder written by `replay` holds a manifest ([`crate::shared::output_set`]): every run file
/// present must be the one it lists, so a folder that mixes the files of two runs is
/// refused, naming the odd file. A folder without a manifest (written by hand or by another
/// tool) is read as it is.
fn check_manifest(dir: &Path) -> Result<(), ReportError> {
    let manifest =
        crate::shared::output_set::Manifest::read(dir).map_err(|message| ReportError::Parse {
            path: dir.join(crate::shared::output_set::MANIFEST),
            line: None,
            message,
        })?;
    let Some(m) = manifest else {
        return Ok(());
    };
    for name in crate::shared::output_set::RUN_FILES {
        if !dir.join(name).exists() {
            continue;
        }
        m.check(dir, name).map_err(|message| ReportError::Parse {
            path: dir.join(name),
            line: None,
            message: format!("{message}; replay again into an empty folder"),
        })?;
    }
    Ok(())
}

fn read_windows(run: &mut Run, progress: &ProgressBar) -> Result<(), ReportError> {
    let path = run.dir.join("windows.csv");
    let Some(mut t) = Table::open(&path)? else {
        return Err(ReportError::NoWindows {
            dir: run.dir.clone(),
        });
    };
    let size = std::fs::metadata(&path).map(|m| m.len()).unwrap_or(0);
    progress.set_length(size);
    progress.set_message("reading windows.csv");
    let probe_col = t.require("probe")?;
    let c = |name: &str| t.col(name);
    let cols = [
        c("window_start_s"),
        c("window_end_s"),
        c("since_front_s"),
        c("void_fraction"),
        c("bubble_count_rate_hz"),
        c("bubble_chord_mean_s"),
        c("interfacial_velocity_m_s"),
        c("correlation_peak"),
        c("turbulence_intensity"),
        c("bubbles"),
        c("elevation_mm"),
        c("x_mm"),
        c("bubble_chord_median_s"),
        c("bubble_chord_p10_s"),
        c("bubble_chord_p90_s"),
        c(ENSEMBLE_SPREAD),
    ];
    let flags_col = c("flags");
    run.columns = t
        .headers
        .iter()
        .filter(|h| WINDOW_COLUMNS.contains(&h.as_str()))
        .cloned()
        .collect();
    let unknown: Vec<&str> = t
        .headers
        .iter()
        .map(|h| h.as_str())
        .filter(|h| {
            !WINDOW_COLUMNS.contains(h)
                && !crate::shared::windows_csv::COLUMNS.contains(h)
                && *h != ENSEMBLE_SPREAD
        })
        .collect();
    if !unknown.is_empty() {
        run.notes.push(format!(
            "windows.csv: columns not used by this version of the report: {}",
            unknown.join(", ")
        ));
    }
    let headers = t.headers.clone();
    let mut probe_index: HashMap<String, usize> = HashMap::new();
    let mut probes: Vec<Probe> = Vec::new();
    let mut windows = Vec::new();
    let mut flag_names: Vec<String> = Vec::new();
    let note = t.rows(Some(progress), |rec| {
        let name = text(rec, Some(probe_col));
        if name.is_empty() {
            return Err("empty `probe` cell".into());
        }
        let v: Vec<Option<f64>> = cols
            .iter()
            .map(|&col| num(rec, col, &headers))
            .collect::<Result<_, _>>()?;
        let idx = match probe_index.get(name) {
            Some(&i) => i,
            None => {
                probes.push(Probe {
                    name: name.to_string(),
                    elevation_mm: None,
                    x_mm: None,
                    station: None,
                });
                probe_index.insert(name.to_string(), probes.len() - 1);
                probes.len() - 1
            }
        };
        let p = &mut probes[idx];
        p.elevation_mm = p.elevation_mm.or(v[10]);
        p.x_mm = p.x_mm.or(v[11]);
        let mut flags = 0u64;
        for f in text(rec, flags_col).split('|').map(str::trim) {
            if f.is_empty() {
                continue;
            }
            let bit = match flag_names.iter().position(|n| n == f) {
                Some(b) => b,
                None if flag_names.len() < MAX_FLAGS => {
                    flag_names.push(f.to_string());
                    flag_names.len() - 1
                }
                None => MAX_FLAGS - 1,
            };
            flags |= 1 << bit;
        }
        windows.push(Window {
            probe: idx,
            start_s: v[0],
            end_s: v[1],
            since_front_s: v[2],
            void_fraction: v[3],
            count_rate_hz: v[4],
            chord_mean_s: v[5],
            velocity_m_s: v[6],
            correlation_peak: v[7],
            turbulence_intensity: v[8],
            bubbles: v[9],
            flags,
            chord_median_s: v[12],
            chord_p10_s: v[13],
            chord_p90_s: v[14],
            void_fraction_spread: v[15],
        });
        Ok(())
    })?;
    progress.set_position(size);
    run.notes.extend(note);
    // Sort probes (x, elevation, name) so colours follow the rig, and remap windows.
    let mut order: Vec<usize> = (0..probes.len()).collect();
    order.sort_by(|&a, &b| {
        let (pa, pb) = (&probes[a], &probes[b]);
        let key = |v: Option<f64>| v.unwrap_or(f64::INFINITY);
        key(pa.x_mm)
            .total_cmp(&key(pb.x_mm))
            .then(key(pa.elevation_mm).total_cmp(&key(pb.elevation_mm)))
            .then(pa.name.cmp(&pb.name))
    });
    let mut new_index = vec![0; probes.len()];
    for (new, &old) in order.iter().enumerate() {
        new_index[old] = new;
    }
    for w in &mut windows {
        w.probe = new_index[w.probe];
    }
    run.probes = order.iter().map(|&i| probes[i].clone()).collect();
    run.windows = windows;
    run.flag_names = flag_names;
    Ok(())
}

fn read_fronts(run: &mut Run) -> Result<(), ReportError> {
    let path = run.dir.join("fronts.csv");
    let Some(mut t) = Table::open(&path)? else {
        return Ok(());
    };
    run.files_found.push("fronts.csv");
    let (pc, sc, ac) = (
        t.require("probe")?,
        t.require("station")?,
        t.col("arrival_s"),
    );
    let headers = t.headers.clone();
    let mut fronts = Vec::new();
    let note = t.rows(None, |rec| {
        fronts.push(Front {
            probe: text(rec, Some(pc)).to_string(),
            station: text(rec, Some(sc)).to_string(),
            arrival_s: num(rec, ac, &headers)?,
        });
        Ok(())
    })?;
    run.notes.extend(note);
    for f in &fronts {
        match run.probes.iter_mut().find(|p| p.name == f.probe) {
            Some(p) => {
                if p.station.is_none() {
                    p.station = Some(f.station.clone());
                }
            }
            None => run.notes.push(format!(
                "fronts.csv: probe `{}` has no rows in windows.csv",
                f.probe
            )),
        }
    }
    run.fronts = fronts;
    Ok(())
}

fn read_profile(run: &mut Run) -> Result<(), ReportError> {
    let path = run.dir.join("profile.csv");
    let Some(mut t) = Table::open(&path)? else {
        return Ok(());
    };
    run.files_found.push("profile.csv");
    let sc = t.require("station")?;
    let names = [
        "slice_start_s",
        "slice_end_s",
        "since_front_s",
        "y90_mm",
        "depth_averaged_void_fraction",
        "equivalent_depth_mm",
        "profile_exponent",
        "fit_rmse",
        "probes_used",
    ];
    let mut cols: Vec<Option<usize>> = names.iter().map(|n| t.col(n)).collect();
    for aliases in [
        &["decay_c0", "decay_initial", "decay_initial_void_fraction"][..],
        &[
            "decay_cf",
            "decay_final",
            "decay_final_level",
            "decay_final_void_fraction",
        ],
        &["decay_tau_s"],
        &["void_fraction_se"],
    ] {
        cols.push(aliases.iter().find_map(|a| t.col(a)));
    }
    let (fc, dfc) = (t.col("flags"), t.col("decay_flags"));
    let split = |cell: &str| -> Vec<String> {
        cell.split('|')
            .map(str::trim)
            .filter(|f| !f.is_empty())
            .map(String::from)
            .collect()
    };
    let headers = t.headers.clone();
    let mut slices = Vec::new();
    let note = t.rows(None, |rec| {
        let v: Vec<Option<f64>> = cols
            .iter()
            .map(|&c| num(rec, c, &headers))
            .collect::<Result<_, _>>()?;
        slices.push(Slice {
            station: text(rec, Some(sc)).to_string(),
            start_s: v[0],
            end_s: v[1],
            since_front_s: v[2],
            y90_mm: v[3],
            depth_averaged_void_fraction: v[4],
            equivalent_depth_mm: v[5],
            profile_exponent: v[6],
            fit_rmse: v[7],
            probes_used: v[8],
            decay: match (v[9], v[10], v[11]) {
                (Some(a), Some(b), Some(c)) if c > 0.0 => Some((a, b, c)),
                _ => None,
            },
            void_fraction_se: v[12].filter(|e| *e >= 0.0),
            flags: split(text(rec, fc)),
            decay_flags: split(text(rec, dfc)),
        });
        Ok(())
    })?;
    run.notes.extend(note);
    run.profile = slices;
    Ok(())
}

/// The rows of a pooled-histogram file (`file`, with edge columns `edges` in `unit`), for
/// the probes of windows.csv; empty when the file is missing.
fn read_bins(
    run: &mut Run,
    file: &'static str,
    edges: (&str, &str),
    unit: &str,
) -> Result<Vec<ChordBin>, ReportError> {
    let path = run.dir.join(file);
    let Some(mut t) = Table::open(&path)? else {
        return Ok(Vec::new());
    };
    run.files_found.push(file);
    let pc = t.require("probe")?;
    let (lc, uc, cc) = (
        Some(t.require(edges.0)?),
        Some(t.require(edges.1)?),
        Some(t.require("count")?),
    );
    let headers = t.headers.clone();
    let mut bins = Vec::new();
    let mut unknown: Vec<String> = Vec::new();
    let probes = &run.probes;
    let note = t.rows(None, |rec| {
        let name = text(rec, Some(pc));
        let (Some(lower), Some(upper), Some(count)) = (
            num(rec, lc, &headers)?,
            num(rec, uc, &headers)?,
            num(rec, cc, &headers)?,
        ) else {
            return Ok(());
        };
        if !(lower > 0.0 && upper > lower && count >= 0.0) {
            return Err(format!(
                "bin [{lower}, {upper}) {unit} with count {count}: edges must be positive and \
                 increasing, counts non-negative"
            ));
        }
        match probes.iter().position(|p| p.name == name) {
            Some(probe) => bins.push(ChordBin {
                probe,
                lower,
                upper,
                count,
            }),
            None => {
                if !unknown.iter().any(|u| u == name) {
                    unknown.push(name.to_string());
                }
            }
        }
        Ok(())
    })?;
    run.notes.extend(note);
    if !unknown.is_empty() {
        run.notes.push(format!(
            "{file}: probes with no rows in windows.csv were left out: {}",
            unknown.join(", ")
        ));
    }
    Ok(bins)
}

impl Run {
    /// True when the run is transient: a profile.csv with rows, or windows with a time since
    /// the front.
    pub fn is_transient(&self) -> bool {
        !self.profile.is_empty() || self.windows.iter().any(|w| w.since_front_s.is_some())
    }

    /// Station names in order of first appearance in profile.csv.
    pub fn stations(&self) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for s in &self.profile {
            if !out.contains(&s.station) {
                out.push(s.station.clone());
            }
        }
        out
    }

    /// Probes of a station: from fronts.csv; without it, and with a single station, every
    /// probe with a time since the front.
    pub fn station_probes(&self, station: &str) -> Vec<usize> {
        let from_fronts: Vec<usize> = (0..self.probes.len())
            .filter(|&i| self.probes[i].station.as_deref() == Some(station))
            .collect();
        if !from_fronts.is_empty() || !self.fronts.is_empty() {
            return from_fronts;
        }
        if self.stations().len() == 1 {
            return (0..self.probes.len())
                .filter(|&i| {
                    self.windows
                        .iter()
                        .any(|w| w.probe == i && w.since_front_s.is_some())
                })
                .collect();
        }
        Vec::new()
    }

    /// The names of the flags set in `bits`.
    pub fn flag_list(&self, bits: u64) -> impl Iterator<Item = &str> + '_ {
        self.flag_names
            .iter()
            .enumerate()
            .filter(move |(i, _)| bits & (1 << i) != 0)
            .map(|(_, n)| n.as_str())
    }
}
