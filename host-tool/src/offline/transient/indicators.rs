//! The flow indicators of a transient replay (front celerity, depths, void fractions) and
//! their JSON form with floats in their shortest round-trip text.

use super::TransientRun;
use crate::shared::hydraulics;

/// Flow indicators of a transient run (DESIGN.md §1: compare runs by their Reynolds number).
#[derive(Debug, Clone, PartialEq)]
pub struct FlowIndicators {
    /// Water temperature, °C.
    pub water_temperature_c: f64,
    /// Density, kg/m³ (Kell 1975).
    pub density_kg_m3: Option<f64>,
    /// Dynamic viscosity, Pa s (Kestin et al. 1978).
    pub viscosity_pa_s: Option<f64>,
    /// Kinematic viscosity, m²/s.
    pub kinematic_viscosity_m2_s: Option<f64>,
    /// The reference depth of the layout, m.
    pub reference_depth_m: Option<f64>,
    /// The front's reference velocity, m/s, and where it came from.
    pub reference_velocity: Option<(f64, &'static str)>,
    /// `rho U d / mu` with the reference velocity and depth.
    pub reynolds: Option<f64>,
    /// The scale-effect caution, when due.
    pub caution: Option<String>,
}

/// The flow indicators: water properties at the layout's temperature, the front celerity
/// measured between the stations (or, with one station, Ritter's ideal dam-break celerity
/// `2 sqrt(g d)` of the reference depth, marked as such), its Reynolds number over the
/// reference depth, and the caution of [`hydraulics::scale_effect_caution`].
pub fn flow_indicators(run: &TransientRun) -> FlowIndicators {
    let t = run.layout.flow.water_temperature_c;
    let d = run.layout.flow.reference_depth_m;
    let velocity = match run.celerity() {
        Some(c) => Some((
            c,
            "front celerity measured between the first and last stations",
        )),
        None => d.and_then(hydraulics::ritter_front_celerity).map(|c| {
            (
                c,
                "Ritter's ideal dam-break celerity 2 sqrt(g d) of the reference depth (one \
                 station: no measured celerity)",
            )
        }),
    };
    let reynolds = match (velocity, d) {
        (Some((u, _)), Some(d)) => hydraulics::reynolds(u, d, t),
        _ => None,
    };
    FlowIndicators {
        water_temperature_c: t,
        density_kg_m3: hydraulics::water_density(t),
        viscosity_pa_s: hydraulics::water_viscosity(t),
        kinematic_viscosity_m2_s: hydraulics::water_kinematic_viscosity(t),
        reference_depth_m: d,
        reference_velocity: velocity,
        reynolds,
        caution: hydraulics::scale_effect_caution(reynolds.unwrap_or(f64::NAN)),
    }
}

/// serde_json's pretty printer, with floating-point numbers written in Rust's shortest
/// round-trip form (`16`, `0.0000011096…`): the form flow.json has always had, and one every
/// JSON reader takes.
struct ShortestFloats(serde_json::ser::PrettyFormatter<'static>);

impl serde_json::ser::Formatter for ShortestFloats {
    fn write_f64<W: ?Sized + std::io::Write>(&mut self, w: &mut W, v: f64) -> std::io::Result<()> {
        write!(w, "{v}")
    }
    fn begin_array<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_array(w)
    }
    fn end_array<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_array(w)
    }
    fn begin_array_value<W: ?Sized + std::io::Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.0.begin_array_value(w, first)
    }
    fn end_array_value<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_array_value(w)
    }
    fn begin_object<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_object(w)
    }
    fn end_object<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_object(w)
    }
    fn begin_object_key<W: ?Sized + std::io::Write>(
        &mut self,
        w: &mut W,
        first: bool,
    ) -> std::io::Result<()> {
        self.0.begin_object_key(w, first)
    }
    fn begin_object_value<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.begin_object_value(w)
    }
    fn end_object_value<W: ?Sized + std::io::Write>(&mut self, w: &mut W) -> std::io::Result<()> {
        self.0.end_object_value(w)
    }
}

impl FlowIndicators {
    /// `flow.json` (a flat object, the keys `crate::report::indicators` knows, plus
    /// `reference_velocity_source` and `scale_effect_caution` as texts), keys in this order.
    pub fn to_json(&self, description: &str) -> String {
        use serde_json::{Map, Value};
        let mut fields = Map::new();
        fields.insert("description".into(), Value::from(description));
        let mut num = |k: &str, v: Option<f64>| {
            if let Some(v) = v.filter(|v| v.is_finite()) {
                fields.insert(k.into(), Value::from(v));
            }
        };
        num("water_temperature_c", Some(self.water_temperature_c));
        num("water_density_kg_m3", self.density_kg_m3);
        num("dynamic_viscosity_pa_s", self.viscosity_pa_s);
        num("kinematic_viscosity_m2_s", self.kinematic_viscosity_m2_s);
        num(
            "reference_velocity_m_s",
            self.reference_velocity.map(|v| v.0),
        );
        num("reference_depth_m", self.reference_depth_m);
        num("reynolds_number", self.reynolds);
        if let Some((_, src)) = self.reference_velocity {
            fields.insert("reference_velocity_source".into(), Value::from(src));
        }
        if let Some(c) = &self.caution {
            fields.insert("scale_effect_caution".into(), Value::from(c.as_str()));
        }
        let mut out = Vec::new();
        let fmt = ShortestFloats(serde_json::ser::PrettyFormatter::new());
        let mut ser = serde_json::Serializer::with_formatter(&mut out, fmt);
        serde::Serialize::serialize(&fields, &mut ser).expect("a map of strings and numbers");
        let mut text = String::from_utf8(out).expect("serde_json writes UTF-8");
        text.push('\n');
        text
    }
}
