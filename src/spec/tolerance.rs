//! The `tolerances:` block as written: each key a path to one value of the design (the grammar
//! of `--set`, with `[N]` for list items), each value how that value spreads from unit to unit.

use std::borrow::Cow;
use std::fmt;

use schemars::{JsonSchema, Schema, SchemaGenerator, json_schema};
use serde::de::{self, Deserialize, Deserializer, MapAccess, SeqAccess, Visitor};

use super::node::mismatch;
use super::qty::Qty;

/// How one value of a design spreads, as written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ToleranceSpec {
    /// `±5 %` or `±3 mA`: normal around the design's value, the band being three standard
    /// deviations. Holds the text after the sign.
    Band(Qty),
    /// `[18 µA, 35 µA]` or `{ uniform: [...] }`: uniform between two bounds.
    Uniform(Vec<Qty>),
    /// `{ normal: 90 mA, sigma: 4 mA }`.
    Normal {
        /// The mean.
        mean: Qty,
        /// The standard deviation (a value or a percentage of the mean).
        sigma: Qty,
    },
    /// `{ pick: [1 h, 2 h, 4 h] }`: one of the values, each as likely.
    Pick(Vec<Qty>),
}

/// The signs a band may start with: `±`, `+-`, `+/-`.
const BAND_SIGNS: [&str; 3] = ["±", "+/-", "+-"];

/// The text of a band without its sign, or `None` when `text` is no band.
pub fn band_text(text: &str) -> Option<&str> {
    let t = text.trim();
    BAND_SIGNS
        .iter()
        .find_map(|s| t.strip_prefix(s))
        .map(str::trim)
}

const EXPECTED: &str = "`±5 %`, `±3 mA`, `[18 µA, 35 µA]`, `{ normal: 90 mA, sigma: 4 mA }`, `{ uniform: [-10 °C, 40 °C] }` or `{ pick: [1 h, 2 h] }`";

impl<'de> Deserialize<'de> for ToleranceSpec {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(SpecVisitor)
    }
}

struct SpecVisitor;

fn found<E: de::Error>(what: &str) -> E {
    mismatch(&format!("a spread such as {EXPECTED}"), what)
}

impl<'de> Visitor<'de> for SpecVisitor {
    type Value = ToleranceSpec;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "a spread such as {EXPECTED}")
    }

    fn visit_str<E: de::Error>(self, v: &str) -> Result<ToleranceSpec, E> {
        match band_text(v) {
            Some(rest) if !rest.is_empty() => Ok(ToleranceSpec::Band(Qty(rest.to_string()))),
            _ => Err(mismatch(
                "a band such as `±5 %` or `±3 mA` (a sign `±`, `+-` or `+/-` before the value)",
                &format!("the text `{v}`"),
            )),
        }
    }

    fn visit_u64<E: de::Error>(self, v: u64) -> Result<ToleranceSpec, E> {
        Err(found(&format!("the number `{v}`")))
    }

    fn visit_i64<E: de::Error>(self, v: i64) -> Result<ToleranceSpec, E> {
        Err(found(&format!("the number `{v}`")))
    }

    fn visit_f64<E: de::Error>(self, v: f64) -> Result<ToleranceSpec, E> {
        Err(found(&format!("the number `{v}`")))
    }

    fn visit_bool<E: de::Error>(self, v: bool) -> Result<ToleranceSpec, E> {
        Err(found(&format!("`{v}`")))
    }

    fn visit_unit<E: de::Error>(self) -> Result<ToleranceSpec, E> {
        Err(found("nothing"))
    }

    fn visit_none<E: de::Error>(self) -> Result<ToleranceSpec, E> {
        Err(found("nothing"))
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<ToleranceSpec, A::Error> {
        let mut items = Vec::new();
        while let Some(q) = seq.next_element::<Qty>()? {
            items.push(q);
        }
        Ok(ToleranceSpec::Uniform(items))
    }

    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<ToleranceSpec, A::Error> {
        let (mut normal, mut sigma, mut uniform, mut pick) = (None, None, None, None);
        while let Some(key) = map.next_key::<String>()? {
            match key.as_str() {
                "normal" => normal = Some(map.next_value::<Qty>()?),
                "sigma" => sigma = Some(map.next_value::<Qty>()?),
                "uniform" => uniform = Some(map.next_value::<Vec<Qty>>()?),
                "pick" => pick = Some(map.next_value::<Vec<Qty>>()?),
                other => {
                    return Err(de::Error::custom(format!(
                        "unknown key `{other}` in a spread: the keys are `normal` with `sigma`, `uniform` or `pick`"
                    )));
                }
            }
        }
        match (normal, sigma, uniform, pick) {
            (Some(mean), Some(sigma), None, None) => Ok(ToleranceSpec::Normal { mean, sigma }),
            (Some(_), None, None, None) => Err(de::Error::custom(
                "a normal spread needs its `sigma` too, e.g. `{ normal: 90 mA, sigma: 4 mA }`",
            )),
            (None, Some(_), None, None) => Err(de::Error::custom(
                "`sigma` goes with `normal`, e.g. `{ normal: 90 mA, sigma: 4 mA }`",
            )),
            (None, None, Some(u), None) => Ok(ToleranceSpec::Uniform(u)),
            (None, None, None, Some(p)) => Ok(ToleranceSpec::Pick(p)),
            (None, None, None, None) => Err(found("an empty mapping")),
            _ => Err(de::Error::custom(
                "a spread is one of `{ normal, sigma }`, `{ uniform }` or `{ pick }`, not several",
            )),
        }
    }
}

impl JsonSchema for ToleranceSpec {
    fn schema_name() -> Cow<'static, str> {
        "Spread".into()
    }
    fn json_schema(g: &mut SchemaGenerator) -> Schema {
        let q = g.subschema_for::<Qty>();
        json_schema!({
            "description": "How a value spreads from unit to unit: a band \"±5 %\" or \"±3 mA\" (normal, the band being 3 sigma), bounds [lo, hi] (uniform), {normal, sigma}, {uniform: [lo, hi]} or {pick: [a, b, ...]}.",
            "anyOf": [
                { "type": "string", "pattern": "^\\s*(±|\\+-|\\+/-)" },
                { "type": "array", "items": q, "minItems": 2, "maxItems": 2 },
                {
                    "type": "object",
                    "properties": { "normal": q, "sigma": q },
                    "required": ["normal", "sigma"],
                    "additionalProperties": false
                },
                {
                    "type": "object",
                    "properties": { "uniform": { "type": "array", "items": q, "minItems": 2, "maxItems": 2 } },
                    "required": ["uniform"],
                    "additionalProperties": false
                },
                {
                    "type": "object",
                    "properties": { "pick": { "type": "array", "items": q, "minItems": 1 } },
                    "required": ["pick"],
                    "additionalProperties": false
                }
            ]
        })
    }
}
