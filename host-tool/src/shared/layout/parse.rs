//! Reading a layout's TOML: the raw (as written) tables with their spans, then every
//! check that can be made without the capture, each error naming the file, the key, the
//! line and the column.

use super::*;

// ---------------------------------------------------------------------------------------------
// Raw (as written) representation
// ---------------------------------------------------------------------------------------------

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawLayout {
    pub(super) flow: Spanned<RawFlow>,
    #[serde(default)]
    pub(super) detector: Option<Spanned<RawDetector>>,
    #[serde(default)]
    pub(super) probe: Vec<Spanned<RawProbe>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawFlow {
    pub(super) kind: Spanned<String>,
    pub(super) phase_before_front: Option<Spanned<String>>,
    pub(super) reference_depth_m: Option<Spanned<f64>>,
    pub(super) water_temperature_c: Option<Spanned<f64>>,
    pub(super) discharge_m2_s: Option<Spanned<f64>>,
    pub(super) discharge_m3_s: Option<Spanned<f64>>,
    pub(super) width_m: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawDetector {
    pub(super) threshold: Option<Spanned<f64>>,
    pub(super) hysteresis: Option<Spanned<f64>>,
    pub(super) learn_period_s: Option<Spanned<f64>>,
    pub(super) rail_low: Option<Spanned<f64>>,
    pub(super) rail_high: Option<Spanned<f64>>,
    pub(super) min_swing: Option<Spanned<f64>>,
    pub(super) near_wake_ms: Option<Spanned<f64>>,
    pub(super) near_wake_chord_fraction: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawProbe {
    pub(super) name: Spanned<String>,
    pub(super) elevation_mm: Spanned<f64>,
    pub(super) x_mm: Option<Spanned<f64>>,
    pub(super) leading: Spanned<i64>,
    pub(super) trailing: Option<Spanned<i64>>,
    pub(super) tip_spacing_mm: Option<Spanned<f64>>,
    pub(super) air_is_high: Option<Spanned<bool>>,
    pub(super) air_level: Option<Spanned<f64>>,
    pub(super) water_level: Option<Spanned<f64>>,
    pub(super) leading_air_level: Option<Spanned<f64>>,
    pub(super) leading_water_level: Option<Spanned<f64>>,
    pub(super) trailing_air_level: Option<Spanned<f64>>,
    pub(super) trailing_water_level: Option<Spanned<f64>>,
    pub(super) max_lag_ms: Option<Spanned<f64>>,
}

// ---------------------------------------------------------------------------------------------
// Parsing and validation
// ---------------------------------------------------------------------------------------------

/// Error construction with the file text at hand.
pub(super) struct Ctx<'a> {
    pub(super) text: &'a str,
    pub(super) file: &'a Path,
    pub(super) lines: &'a LineIndex,
}

/// Byte offsets of line starts, so that a location costs a binary search plus the
/// characters from its line start (remembered between calls on one long line), not a
/// scan from the start of the text: validation stays linear in the number of probes.
pub(super) struct LineIndex {
    pub(super) starts: Vec<usize>,
    /// The last location computed: (offset, column), to continue along a long line.
    pub(super) last: std::cell::Cell<(usize, usize)>,
    /// Characters counted for columns so far (the linearity test reads it).
    pub(super) scanned: std::cell::Cell<usize>,
}

impl LineIndex {
    pub(super) fn new(text: &str) -> LineIndex {
        let starts = std::iter::once(0)
            .chain(text.match_indices('\n').map(|(i, _)| i + 1))
            .collect();
        LineIndex {
            starts,
            last: std::cell::Cell::new((0, 1)),
            scanned: std::cell::Cell::new(0),
        }
    }

    pub(super) fn locate(&self, text: &str, offset: usize) -> Location {
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
    pub(super) fn at(&self, span: Range<usize>) -> Location {
        self.lines.locate(self.text, span.start)
    }

    pub(super) fn err(
        &self,
        key: impl Into<String>,
        span: Range<usize>,
        problem: Problem,
    ) -> LayoutError {
        LayoutError::Key {
            file: self.file.to_path_buf(),
            key: key.into(),
            at: Some(self.at(span)),
            problem: Box::new(problem),
        }
    }

    pub(super) fn range(
        &self,
        key: &str,
        v: &Spanned<f64>,
        ok: bool,
        rule: &str,
    ) -> Result<f64, LayoutError> {
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

    pub(super) fn finite(&self, key: &str, v: &Spanned<f64>) -> Result<f64, LayoutError> {
        self.range(key, v, true, "a finite number")
    }

    pub(super) fn positive(&self, key: &str, v: &Spanned<f64>) -> Result<f64, LayoutError> {
        self.range(key, v, *v.get_ref() > 0.0, "> 0")
    }

    pub(super) fn channel(&self, key: &str, v: &Spanned<i64>) -> Result<usize, LayoutError> {
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

/// Turns a serde error (unknown key, missing key, wrong type) into a [`LayoutError::Key`]
/// with a key path found from the error's span.
pub(super) fn schema_error(cx: &Ctx<'_>, doc: &DeTable<'_>, e: &toml::de::Error) -> LayoutError {
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
        let hint = missing_hint(&path, field);
        (key_of(field), Problem::Missing { hint })
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

/// What to write for a required key that a layout typed by hand leaves out.
fn missing_hint(path: &str, field: &str) -> &'static str {
    match (path, field) {
        ("", "flow") => {
            "say what was recorded with a `[flow]` table holding `kind = \"steady\"` (a \
             statistically steady flow) or `kind = \"transient\"` (a front passing the probes)"
        }
        ("flow", "kind") => "`kind = \"steady\"` or `kind = \"transient\"`",
        (p, "name") if p.starts_with("probe") => "a name for the probe, such as `name = \"P1\"`",
        (p, "elevation_mm") if p.starts_with("probe") => {
            "the tip's height above the bed in mm, such as `elevation_mm = 12.0`"
        }
        (p, "leading") if p.starts_with("probe") => {
            "the WAV channel of the leading tip (0 for the first), such as `leading = 0`"
        }
        _ => "",
    }
}

/// The dotted key path of the table (or array-of-tables item) whose span is exactly `span`.
pub(super) fn table_with_span(table: &DeTable<'_>, span: &Range<usize>) -> Option<String> {
    pub(super) fn in_value(v: &Spanned<DeValue<'_>>, span: &Range<usize>) -> Option<String> {
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
pub(super) fn join_key(name: &str, sub: &str) -> String {
    if sub.is_empty() {
        name.to_string()
    } else if sub.starts_with('[') {
        format!("{name}{sub}")
    } else {
        format!("{name}.{sub}")
    }
}

/// `[i]` followed by a sub-path.
pub(super) fn join_index(i: usize, sub: &str) -> String {
    if sub.is_empty() || sub.starts_with('[') {
        format!("[{i}]{sub}")
    } else {
        format!("[{i}].{sub}")
    }
}

pub(super) fn span_holds(span: Range<usize>, pos: usize) -> bool {
    span.start <= pos && pos < span.end.max(span.start + 1)
}

/// The dotted key path of the innermost key or value whose span holds byte `pos`.
pub(super) fn path_in_table(table: &DeTable<'_>, pos: usize) -> Option<String> {
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
pub(super) fn path_in_value(v: &Spanned<DeValue<'_>>, pos: usize) -> Option<String> {
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

pub(super) fn build(cx: &Ctx<'_>, raw: RawLayout) -> Result<Layout, LayoutError> {
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

pub(super) fn build_flow(cx: &Ctx<'_>, f: RawFlow) -> Result<Flow, LayoutError> {
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
    let refuse = |key: &str, v: &Option<Spanned<f64>>, detail: &str| {
        let span = v.as_ref().map(|v| v.span()).unwrap_or(0..0);
        Err(cx.err(
            key,
            span,
            Problem::OutOfRange {
                detail: detail.into(),
            },
        ))
    };
    let discharge_m2_s = match (per_width, total, width) {
        (q, None, None) => q,
        (None, Some(q), Some(b)) => Some(q / b),
        (Some(_), Some(_), _) => {
            return refuse(
                "flow.discharge_m3_s",
                &f.discharge_m3_s,
                "give discharge_m2_s or discharge_m3_s, not both",
            )
        }
        (None, Some(_), None) => {
            return refuse(
                "flow.discharge_m3_s",
                &f.discharge_m3_s,
                "needs width_m, the channel width in metres",
            )
        }
        (_, None, Some(_)) => {
            return refuse(
                "flow.width_m",
                &f.width_m,
                "is only read with discharge_m3_s",
            )
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

pub(super) fn build_detector(
    cx: &Ctx<'_>,
    d: RawDetector,
) -> Result<DetectorSettings, LayoutError> {
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
    if let (Some(_), Some(v)) = (&d.near_wake_ms, &d.near_wake_chord_fraction) {
        return Err(cx.err(
            "detector.near_wake_chord_fraction",
            v.span(),
            Problem::Inconsistent {
                detail: "give near_wake_ms or near_wake_chord_fraction, not both".into(),
            },
        ));
    }
    if let Some(v) = &d.near_wake_ms {
        let x = *v.get_ref();
        s.near_wake_ms = Some(cx.range(
            "detector.near_wake_ms",
            v,
            x > 0.0 && x <= 1000.0,
            "> 0 and <= 1000",
        )?);
    }
    if let Some(v) = &d.near_wake_chord_fraction {
        let x = *v.get_ref();
        s.near_wake_chord_fraction = Some(cx.range(
            "detector.near_wake_chord_fraction",
            v,
            (0.001..=60.0).contains(&x),
            ">= 0.001 and <= 60",
        )?);
    }
    Ok(s)
}

pub(super) fn build_probe(
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
