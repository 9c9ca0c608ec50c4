//! Flow indicators: water temperature and properties, reference scales, Reynolds number.
//!
//! Two small optional files in the run folder carry them (a later module will write them; a
//! person may write them by hand):
//!
//! `flow.json`, one flat JSON object; every key is optional, unknown keys are shown as they
//! are, nested objects are flattened as `outer.inner`:
//!
//! ```json
//! {
//!   "description": "flume B2, run 14: dam-break surge on a dry bed",
//!   "water_temperature_c": 17.5,
//!   "water_density_kg_m3": 998.7,
//!   "dynamic_viscosity_pa_s": 0.00108,
//!   "kinematic_viscosity_m2_s": 1.08e-6,
//!   "surface_tension_n_m": 0.0732,
//!   "reference_velocity_m_s": 1.2,
//!   "reference_depth_m": 0.05,
//!   "reynolds_number": 55500,
//!   "froude_number": 1.71,
//!   "morton_number": 2.9e-11
//! }
//! ```
//!
//! `indicators.csv`, one indicator a row, header `name,value,unit` (a fourth column `note`
//! is optional); names as the JSON keys above:
//!
//! ```text
//! name,value,unit
//! water_temperature_c,17.5,degC
//! reynolds_number,55500,
//! ```
//!
//! When both exist, `flow.json` wins for a key given twice. Missing dimensionless numbers are
//! computed from the values given, and marked so: Reynolds ρUd/μ (or Ud/ν), Froude U/√(gd),
//! Morton gμ⁴/(ρσ³).

use super::error::ReportError;
use std::path::Path;

/// Standard gravity, m/s².
const G: f64 = 9.80665;

/// A value: a number or a text.
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    /// A number.
    Number(f64),
    /// Anything else, as text.
    Text(String),
}

/// One indicator.
#[derive(Debug, Clone, PartialEq)]
pub struct Indicator {
    /// The key (`reynolds_number`).
    pub key: String,
    /// A label for people (`Reynolds number ρUd/μ`).
    pub label: String,
    /// The value.
    pub value: Value,
    /// Unit for people (empty for dimensionless numbers and texts).
    pub unit: String,
    /// Where it came from: `flow.json`, `indicators.csv` or `computed here`.
    pub source: &'static str,
    /// An optional note from indicators.csv.
    pub note: String,
}

/// The indicators of a run.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Indicators {
    /// In display order: known keys first (in the order of [`KNOWN`]), then the others.
    pub entries: Vec<Indicator>,
}

/// Known keys: (key, label, unit).
pub const KNOWN: &[(&str, &str, &str)] = &[
    ("description", "Run", ""),
    ("water_temperature_c", "Water temperature", "°C"),
    ("water_density_kg_m3", "Water density ρ", "kg/m³"),
    ("dynamic_viscosity_pa_s", "Dynamic viscosity μ", "Pa·s"),
    ("kinematic_viscosity_m2_s", "Kinematic viscosity ν", "m²/s"),
    ("surface_tension_n_m", "Surface tension σ", "N/m"),
    ("reference_velocity_m_s", "Reference velocity U", "m/s"),
    ("reference_depth_m", "Reference depth d", "m"),
    ("reynolds_number", "Reynolds number ρUd/μ", ""),
    ("froude_number", "Froude number U/√(gd)", ""),
    ("morton_number", "Morton number gμ⁴/(ρσ³)", ""),
];

impl Indicators {
    /// The number under `key`.
    pub fn number(&self, key: &str) -> Option<f64> {
        self.entries
            .iter()
            .find_map(|e| match (&e.value, e.key == key) {
                (Value::Number(v), true) => Some(*v),
                _ => None,
            })
    }

    /// The Reynolds number, given or computed.
    pub fn reynolds(&self) -> Option<f64> {
        self.number("reynolds_number")
    }

    fn has(&self, key: &str) -> bool {
        self.entries.iter().any(|e| e.key == key)
    }

    fn push(&mut self, key: &str, value: Value, source: &'static str, unit: &str, note: &str) {
        if self.has(key) {
            return;
        }
        let known = KNOWN.iter().find(|k| k.0 == key);
        self.entries.push(Indicator {
            key: key.to_string(),
            label: known.map_or_else(|| key.to_string(), |k| k.1.to_string()),
            value,
            unit: known.map_or_else(|| unit.to_string(), |k| k.2.to_string()),
            source,
            note: note.to_string(),
        });
    }

    /// Add the dimensionless numbers that can be computed from the values given.
    fn complete(&mut self) {
        let n = |k: &str| self.number(k);
        let (rho, mu, nu) = (
            n("water_density_kg_m3"),
            n("dynamic_viscosity_pa_s"),
            n("kinematic_viscosity_m2_s"),
        );
        let (u, d, sigma) = (
            n("reference_velocity_m_s"),
            n("reference_depth_m"),
            n("surface_tension_n_m"),
        );
        let re = match (rho, u, d, mu, nu) {
            (Some(rho), Some(u), Some(d), Some(mu), _) if mu > 0.0 => Some(rho * u * d / mu),
            (_, Some(u), Some(d), _, Some(nu)) if nu > 0.0 => Some(u * d / nu),
            _ => None,
        };
        let fr = match (u, d) {
            (Some(u), Some(d)) if d > 0.0 => Some(u / (G * d).sqrt()),
            _ => None,
        };
        let mo = match (rho, mu, sigma) {
            (Some(rho), Some(mu), Some(s)) if rho > 0.0 && s > 0.0 => {
                Some(G * mu.powi(4) / (rho * s.powi(3)))
            }
            _ => None,
        };
        for (key, v) in [
            ("reynolds_number", re),
            ("froude_number", fr),
            ("morton_number", mo),
        ] {
            if let Some(v) = v {
                self.push(key, Value::Number(v), "computed here", "", "");
            }
        }
        // Known keys first, in table order; others after, in file order.
        let rank = |k: &str| KNOWN.iter().position(|x| x.0 == k).unwrap_or(KNOWN.len());
        self.entries.sort_by_key(|e| rank(&e.key));
    }
}

/// The entries of a `flow.json` object in file order, nested objects flattened to
/// `outer.inner` keys: numbers stay numbers; strings, booleans and arrays become text (an
/// array as its JSON text); `null` is skipped.
fn flatten_json(
    object: &serde_json::Map<String, serde_json::Value>,
    prefix: &str,
    out: &mut Vec<(String, Value)>,
) {
    use serde_json::Value as J;
    for (k, v) in object {
        let key = if prefix.is_empty() {
            k.clone()
        } else {
            format!("{prefix}.{k}")
        };
        match v {
            J::Null => {}
            J::Object(inner) => flatten_json(inner, &key, out),
            J::Number(n) => match n.as_f64().filter(|x| x.is_finite()) {
                Some(x) => out.push((key, Value::Number(x))),
                None => out.push((key, Value::Text(n.to_string()))),
            },
            J::String(t) => out.push((key, Value::Text(t.clone()))),
            other => out.push((key, Value::Text(other.to_string()))),
        }
    }
}

/// Read `flow.json` and `indicators.csv` from `dir` (None when neither exists).
pub fn read(dir: &Path, found: &mut Vec<&'static str>) -> Result<Option<Indicators>, ReportError> {
    let mut ind = Indicators::default();
    let mut any = false;
    let json_path = dir.join("flow.json");
    if let Some(text) = read_optional(&json_path)? {
        any = true;
        found.push("flow.json");
        let doc: serde_json::Value =
            serde_json::from_str(&text).map_err(|e| ReportError::Parse {
                path: json_path.clone(),
                line: Some(e.line() as u64),
                message: e.to_string(),
            })?;
        let serde_json::Value::Object(top) = doc else {
            return Err(ReportError::Parse {
                path: json_path,
                line: Some(1),
                message: "flow.json must hold one JSON object".into(),
            });
        };
        let mut entries = Vec::new();
        flatten_json(&top, "", &mut entries);
        for (k, v) in entries {
            ind.push(&k, v, "flow.json", "", "");
        }
    }
    let csv_path = dir.join("indicators.csv");
    if let Some(text) = read_optional(&csv_path)? {
        any = true;
        found.push("indicators.csv");
        let mut r = csv::ReaderBuilder::new()
            .flexible(true)
            .trim(csv::Trim::All)
            .from_reader(text.as_bytes());
        let headers = r.headers().map_err(|e| ReportError::Parse {
            path: csv_path.clone(),
            line: Some(1),
            message: e.to_string(),
        })?;
        let col = |n: &str| headers.iter().position(|h| h == n);
        let (Some(nc), Some(vc)) = (col("name"), col("value")) else {
            return Err(ReportError::Parse {
                path: csv_path,
                line: Some(1),
                message: "the header must hold `name` and `value` (and optionally `unit`, `note`)"
                    .into(),
            });
        };
        let (uc, oc) = (col("unit"), col("note"));
        for rec in r.records() {
            let rec = rec.map_err(|e| ReportError::Parse {
                path: csv_path.clone(),
                line: e.position().map(|p| p.line()),
                message: e.to_string(),
            })?;
            let get = |c: Option<usize>| c.and_then(|c| rec.get(c)).unwrap_or("");
            let name = get(Some(nc));
            if name.is_empty() {
                continue;
            }
            let raw = get(Some(vc));
            let value = match raw.parse::<f64>() {
                Ok(v) if v.is_finite() => Value::Number(v),
                _ => Value::Text(raw.to_string()),
            };
            ind.push(name, value, "indicators.csv", get(uc), get(oc));
        }
    }
    if !any {
        return Ok(None);
    }
    ind.complete();
    Ok(Some(ind))
}

fn read_optional(path: &Path) -> Result<Option<String>, ReportError> {
    match std::fs::read_to_string(path) {
        Ok(t) => Ok(Some(t)),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
        Err(source) => Err(ReportError::Read {
            path: path.to_path_buf(),
            source,
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn flat(doc: &str) -> Vec<(String, Value)> {
        let serde_json::Value::Object(top) = serde_json::from_str(doc).unwrap() else {
            panic!("not an object: {doc}");
        };
        let mut out = Vec::new();
        flatten_json(&top, "", &mut out);
        out
    }

    #[test]
    fn flow_json_scalars_nested_objects_and_arrays_flatten_in_file_order() {
        let doc = r#"{ "z": 1.5e3, "b": "x\"y\u00e9\ud83d\ude00", "c": {"d": -0.25, "e": null},
                       "f": [1, {"g": 2}], "h": true, "i": 0 }"#;
        let num = Value::Number;
        let txt = |s: &str| Value::Text(s.into());
        assert_eq!(
            flat(doc),
            vec![
                ("z".into(), num(1500.0)),
                ("b".into(), txt("x\"yé😀")),
                ("c.d".into(), num(-0.25)),
                ("f".into(), txt("[1,{\"g\":2}]")),
                ("h".into(), txt("true")),
                ("i".into(), num(0.0)),
            ]
        );
        assert_eq!(flat("{}"), vec![]);
    }

    #[test]
    fn a_broken_flow_json_is_an_error_that_names_its_line() {
        for (doc, line) in [
            ("{\n\"a\": 1,\n\"b\": 01\n}", 3),
            ("{\"a\": 1,}", 1),
            ("[1]", 1),
            ("{\"a\": 1} x", 1),
            ("{\n\"a\": \"open", 2),
        ] {
            let dir = tempfile::tempdir().unwrap();
            std::fs::write(dir.path().join("flow.json"), doc).unwrap();
            match read(dir.path(), &mut Vec::new()) {
                Err(ReportError::Parse { line: got, .. }) => {
                    assert_eq!(got, Some(line), "{doc}")
                }
                other => panic!("{doc}: {other:?}"),
            }
        }
    }

    #[test]
    fn reynolds_froude_and_morton_are_computed_when_missing() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(
            dir.path().join("flow.json"),
            r#"{"water_density_kg_m3": 1000, "dynamic_viscosity_pa_s": 0.001,
                "surface_tension_n_m": 0.072,
                "reference_velocity_m_s": 2.0, "reference_depth_m": 0.1, "extra": {"a": 1}}"#,
        )
        .unwrap();
        let mut found = Vec::new();
        let ind = read(dir.path(), &mut found).unwrap().unwrap();
        // rho U d / mu = 1000 * 2 * 0.1 / 0.001
        assert!((ind.reynolds().unwrap() - 2.0e5).abs() < 1e-6);
        let fr = ind.number("froude_number").unwrap();
        assert!((fr - 2.0 / (G * 0.1f64).sqrt()).abs() < 1e-12);
        // g mu^4 / (rho sigma^3) for water near 20 °C is about 2.6e-11 (order of magnitude).
        let mo = ind.number("morton_number").unwrap();
        assert!(mo > 1e-11 && mo < 1e-10, "{mo}");
        assert_eq!(ind.number("extra.a"), Some(1.0));
        assert_eq!(found, ["flow.json"]);
    }

    #[test]
    fn csv_indicators_and_json_priority() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("flow.json"), r#"{"reynolds_number": 5e4}"#).unwrap();
        std::fs::write(
            dir.path().join("indicators.csv"),
            "name,value,unit,note\nreynolds_number,9e9,,ignored\npump_setting,low,,by hand\n",
        )
        .unwrap();
        let mut found = Vec::new();
        let ind = read(dir.path(), &mut found).unwrap().unwrap();
        assert_eq!(ind.reynolds(), Some(5e4));
        let pump = ind
            .entries
            .iter()
            .find(|e| e.key == "pump_setting")
            .unwrap();
        assert_eq!(pump.value, Value::Text("low".into()));
        assert_eq!(pump.note, "by hand");
    }

    #[test]
    fn no_files_no_indicators_and_bad_json_names_the_file() {
        let dir = tempfile::tempdir().unwrap();
        assert_eq!(read(dir.path(), &mut Vec::new()).unwrap(), None);
        std::fs::write(dir.path().join("flow.json"), "{ nope").unwrap();
        let e = read(dir.path(), &mut Vec::new()).unwrap_err().to_string();
        assert!(e.contains("flow.json"), "{e}");
    }
}
