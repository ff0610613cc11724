//! Value types of the design file that take more than one shape: a quantity (text or number),
//! an efficiency (constant, one curve, curves per input voltage) and a resistance (one value or a
//! table). Each is read from a YAML value by hand so that its error says what shapes are allowed.

use std::borrow::Cow;

use schemars::{JsonSchema, Schema, SchemaGenerator, json_schema};
use serde::{Deserialize, Deserializer};

use super::node::{Kind, Node, Number, mismatch, reread};

/// A quantity as written: `"120 mA"`, or a plain number where one is allowed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Qty(pub String);

impl Qty {
    /// The text as written (a YAML number becomes its decimal text).
    pub fn text(&self) -> &str {
        &self.0
    }
}

fn scalar_text(v: &Node<'_>) -> Option<String> {
    match &v.kind {
        Kind::Str(s) => Some(s.to_string()),
        Kind::Number(n) => Some(n.to_string()),
        _ => None,
    }
}

impl<'de> Deserialize<'de> for Qty {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(QtyVisitor)
    }
}

/// Reads a quantity straight from text (one copy) or a number; anything else is described as
/// `Node::describe` does.
struct QtyVisitor;

impl QtyVisitor {
    fn wrong<E: serde::de::Error>(found: &str) -> E {
        mismatch("a value with its unit such as `120 mA`", found)
    }
}

impl<'de> serde::de::Visitor<'de> for QtyVisitor {
    type Value = Qty;

    fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("a value with its unit such as `120 mA`")
    }

    fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Qty, E> {
        Ok(Qty(v.to_string()))
    }

    fn visit_string<E: serde::de::Error>(self, v: String) -> Result<Qty, E> {
        Ok(Qty(v))
    }

    // Numbers read as the tree writes them (`1.0`, `1e300`, `.inf`).
    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Qty, E> {
        Ok(Qty(Number::PosInt(v).to_string()))
    }

    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Qty, E> {
        let n = u64::try_from(v).map_or(Number::NegInt(v), Number::PosInt);
        Ok(Qty(n.to_string()))
    }

    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<Qty, E> {
        Ok(Qty(Number::Float(v).to_string()))
    }

    fn visit_bool<E: serde::de::Error>(self, v: bool) -> Result<Qty, E> {
        Err(Self::wrong(&format!("`{v}`")))
    }

    fn visit_unit<E: serde::de::Error>(self) -> Result<Qty, E> {
        Err(Self::wrong("nothing"))
    }

    fn visit_none<E: serde::de::Error>(self) -> Result<Qty, E> {
        Err(Self::wrong("nothing"))
    }

    fn visit_seq<A: serde::de::SeqAccess<'de>>(self, _: A) -> Result<Qty, A::Error> {
        Err(Self::wrong("a list"))
    }

    fn visit_map<A: serde::de::MapAccess<'de>>(self, _: A) -> Result<Qty, A::Error> {
        Err(Self::wrong("a mapping"))
    }

    fn visit_enum<A: serde::de::EnumAccess<'de>>(self, _: A) -> Result<Qty, A::Error> {
        Err(Self::wrong("a tagged value"))
    }
}

impl JsonSchema for Qty {
    fn schema_name() -> Cow<'static, str> {
        "Quantity".into()
    }
    fn json_schema(_: &mut SchemaGenerator) -> Schema {
        json_schema!({
            "description": "A number and its unit, e.g. \"3.3 V\", \"120 mA\", \"2.5 µA\", \"50 mΩ\", \"25 °C\", \"91 %\", \"3 %/month\"; plain numbers only where dimensionless.",
            "anyOf": [
                { "type": "string", "pattern": "^\\s*[-+]?(\\d+\\.?\\d*|\\.\\d+)([eE][-+]?\\d+)?\\s*\\S*\\s*$" },
                { "type": "number" }
            ]
        })
    }
}

/// One efficiency curve measured at an input voltage.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct VinCurveSpec {
    /// Input voltage of the curve.
    pub vin: Qty,
    /// `[[output current, efficiency], ...]`.
    pub curve: Vec<Vec<Qty>>,
}

/// The efficiency of a switching stage.
#[derive(Debug, Clone)]
pub enum Efficiency {
    /// One number for every load: `90 %` or `0.9`.
    Constant(Qty),
    /// One curve against output current: `[[1 mA, 72 %], [10 mA, 84 %]]`.
    Curve(Vec<Vec<Qty>>),
    /// One curve per input voltage: `[{vin: 2 V, curve: [...]}, ...]`.
    PerVin(Vec<VinCurveSpec>),
}

impl<'de> Deserialize<'de> for Efficiency {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = Node::deserialize(d)?;
        if let Some(t) = scalar_text(&v) {
            return Ok(Efficiency::Constant(Qty(t)));
        }
        let Kind::Seq(items) = &v.kind else {
            return Err(mismatch(
                "`90 %`, a curve `[[1 mA, 72 %], ...]` or curves per input voltage",
                &v.describe(),
            ));
        };
        if items.iter().any(|x| matches!(x.kind, Kind::Map(_))) {
            reread(&v, "efficiency curves per input voltage: ").map(Efficiency::PerVin)
        } else {
            reread(&v, "efficiency curve: ").map(Efficiency::Curve)
        }
    }
}

impl JsonSchema for Efficiency {
    fn schema_name() -> Cow<'static, str> {
        "Efficiency".into()
    }
    fn json_schema(g: &mut SchemaGenerator) -> Schema {
        let q = g.subschema_for::<Qty>();
        let per_vin = g.subschema_for::<VinCurveSpec>();
        json_schema!({
            "description": "A constant efficiency (\"90 %\" or 0.9), one curve [[output current, efficiency], ...], or a list of {vin, curve}.",
            "anyOf": [
                q,
                { "type": "array", "items": { "type": "array", "items": q, "minItems": 2, "maxItems": 2 } },
                { "type": "array", "items": per_vin }
            ]
        })
    }
}

/// A cell's internal resistance: one value or a table against state of charge.
#[derive(Debug, Clone)]
pub enum ResistanceSpec {
    /// The same at every state of charge.
    Constant(Qty),
    /// `[[SoC, R], ...]`.
    Table(Vec<Vec<Qty>>),
}

impl<'de> Deserialize<'de> for ResistanceSpec {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = Node::deserialize(d)?;
        if let Some(t) = scalar_text(&v) {
            return Ok(ResistanceSpec::Constant(Qty(t)));
        }
        if matches!(v.kind, Kind::Seq(_)) {
            return reread(&v, "resistance table: ").map(ResistanceSpec::Table);
        }
        Err(mismatch(
            "a resistance such as `150 mΩ` or a table `[[SoC, R], ...]`",
            &v.describe(),
        ))
    }
}

impl JsonSchema for ResistanceSpec {
    fn schema_name() -> Cow<'static, str> {
        "CellResistance".into()
    }
    fn json_schema(g: &mut SchemaGenerator) -> Schema {
        let q = g.subschema_for::<Qty>();
        json_schema!({
            "description": "Ohmic internal resistance: one value (\"150 mΩ\") or a table [[SoC, R], ...].",
            "anyOf": [
                q,
                { "type": "array", "items": { "type": "array", "items": q, "minItems": 2, "maxItems": 2 } }
            ]
        })
    }
}

/// A cell's self-discharge: one rate held at every temperature, or a rate at a reference
/// temperature with its temperature dependence.
#[derive(Debug, Clone)]
pub enum SelfDischargeSpec {
    /// `3 %/month`: the same rate at every temperature.
    Constant(Qty),
    /// `{ rate: 1 %/year, at: 20 °C, doubles_every: 10 °C }`.
    AtTemperature(SelfDischargeRateSpec),
}

/// A self-discharge rate at a reference temperature, and how it changes with temperature: it
/// doubles every `doubles_every`, or follows the Arrhenius law with `activation_energy`; with
/// neither, the chemistry's default.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SelfDischargeRateSpec {
    /// The rate at `at`, e.g. `1 %/year`.
    pub rate: Qty,
    /// The temperature of `rate` (default 25 °C).
    #[serde(default)]
    pub at: Option<Qty>,
    /// The rise in temperature that doubles the rate, e.g. `10 °C`.
    #[serde(default)]
    pub doubles_every: Option<Qty>,
    /// Activation energy of the Arrhenius law, e.g. `50 kJ/mol`.
    #[serde(default)]
    pub activation_energy: Option<Qty>,
}

impl SelfDischargeSpec {
    /// The rate as written.
    pub fn rate(&self) -> &Qty {
        match self {
            SelfDischargeSpec::Constant(q) => q,
            SelfDischargeSpec::AtTemperature(s) => &s.rate,
        }
    }
}

/// How a capture with a voltage column scales with the rail's voltage.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum CaptureScale {
    /// The captured current whatever the rail's voltage.
    Current,
    /// The captured power (voltage x current of each sample): the current is P / V of the rail.
    Power,
}

/// A load state whose draw follows a measured capture.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CaptureSpec {
    /// The CSV file, relative to the design file's directory: `time [ms], current [mA]`, and
    /// optionally `voltage [V]`.
    pub capture: String,
    /// With a voltage column: `current` (draw the captured current) or `power` (draw the
    /// captured power); required then, refused without one.
    #[serde(default)]
    pub scale: Option<CaptureScale>,
    /// How far the compressed capture may move the pack's lowest terminal voltage (default
    /// `5 mV`).
    #[serde(default)]
    pub tolerance: Option<Qty>,
}

/// An LED (or a series string of them) on an LED driver's rail: its forward voltage at a
/// current and its dynamic resistance.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LedSpec {
    /// Forward voltage of one LED at the current `at`, e.g. `3.0 V`.
    pub forward: Qty,
    /// Dynamic resistance of one LED above its knee (the slope of its I-V curve), e.g. `1.2 Ω`.
    pub resistance: Qty,
    /// The current `forward` is given at (default: the driver's set current).
    #[serde(default)]
    pub at: Option<Qty>,
    /// LEDs in series in the string (default 1).
    #[serde(default)]
    pub count: Option<Qty>,
}

/// What a load draws in one state: a current, a power or a resistance, a capture, or an LED.
#[derive(Debug, Clone)]
pub enum DrawSpec {
    /// `6 mA`, `20 mW`, `1 kΩ`.
    Value(Qty),
    /// `{ capture: adv.csv }`.
    Capture(CaptureSpec),
    /// `{ forward: 3.0 V, resistance: 1.2 Ω }`, on an LED driver's rail.
    Led(LedSpec),
}

impl DrawSpec {
    /// The value, when the draw is one.
    pub fn value(&self) -> Option<&Qty> {
        match self {
            DrawSpec::Value(q) => Some(q),
            DrawSpec::Capture(_) | DrawSpec::Led(_) => None,
        }
    }
}

impl<'de> Deserialize<'de> for SelfDischargeSpec {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = Node::deserialize(d)?;
        if let Some(t) = scalar_text(&v) {
            return Ok(SelfDischargeSpec::Constant(Qty(t)));
        }
        if matches!(v.kind, Kind::Map(_)) {
            return reread(&v, "").map(SelfDischargeSpec::AtTemperature);
        }
        Err(mismatch(
            "a rate such as `3 %/month` or `{ rate: 1 %/year, at: 20 °C }`",
            &v.describe(),
        ))
    }
}

impl From<Qty> for DrawSpec {
    fn from(q: Qty) -> Self {
        DrawSpec::Value(q)
    }
}

impl<'de> Deserialize<'de> for DrawSpec {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = Node::deserialize(d)?;
        if let Some(t) = scalar_text(&v) {
            return Ok(DrawSpec::Value(Qty(t)));
        }
        if let Kind::Map(entries) = &v.kind {
            // An LED names its forward voltage; any other mapping is read as a capture.
            let led = entries
                .iter()
                .any(|(k, _)| matches!(&k.kind, Kind::Str(s) if s == "forward"));
            return if led {
                reread(&v, "").map(DrawSpec::Led)
            } else {
                reread(&v, "").map(DrawSpec::Capture)
            };
        }
        Err(mismatch(
            "a value with its unit such as `120 mA`, a capture `{ capture: FILE.csv }` or an LED `{ forward: 3 V, resistance: 1 Ω }`",
            &v.describe(),
        ))
    }
}

impl JsonSchema for SelfDischargeSpec {
    fn schema_name() -> Cow<'static, str> {
        "SelfDischarge".into()
    }
    fn json_schema(g: &mut SchemaGenerator) -> Schema {
        let q = g.subschema_for::<Qty>();
        let at = g.subschema_for::<SelfDischargeRateSpec>();
        json_schema!({
            "description": "Self-discharge of the rated capacity: one rate held at every temperature (\"3 %/month\"), or { rate, at, doubles_every | activation_energy } that follows the temperature.",
            "anyOf": [q, at]
        })
    }
}

impl JsonSchema for DrawSpec {
    fn schema_name() -> Cow<'static, str> {
        "Draw".into()
    }
    fn json_schema(g: &mut SchemaGenerator) -> Schema {
        let q = g.subschema_for::<Qty>();
        let c = g.subschema_for::<CaptureSpec>();
        let led = g.subschema_for::<LedSpec>();
        json_schema!({
            "description": "What the load draws in this state: a current (\"6 mA\"), a power (\"20 mW\"), a resistance (\"1 kΩ\"), a measured capture {capture: FILE.csv}, or an LED on an LED driver's rail {forward, resistance, at, count}.",
            "anyOf": [q, c, led]
        })
    }
}

/// The duration of a profile step: a quantity, or `capture` (exactly one capture of the mode).
pub(crate) fn step_for_schema(g: &mut SchemaGenerator) -> Schema {
    let q = g.subschema_for::<Qty>();
    json_schema!({
        "description": "How long: a duration such as \"10 s\", or `capture` (a step whose mode follows a capture lasts exactly one capture).",
        "anyOf": [q, { "const": "capture" }]
    })
}
