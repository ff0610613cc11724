//! The document tree the serde types are read from: scalars, lists and mappings, each node with
//! the place in the file where it starts (`yaml.rs` builds the tree; `source.rs` keeps it to find
//! the place of a YAML path).

use std::borrow::Cow;
use std::fmt;

use serde::de::{self, DeserializeSeed, IntoDeserializer, MapAccess, SeqAccess, Visitor};
use serde::{Deserialize, Deserializer};

use super::node_error::pass_out;
pub(crate) use super::node_error::{NodeError, mismatch};
use crate::error::Location;

/// Where a node starts: line and column (in characters), both from 1. Line 0 stands for a node
/// that is not in the file (a value given by `--set`, or a copy read back by a nested reader).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub(crate) struct Mark {
    line: u32,
    col: u32,
}

impl Mark {
    /// No place in the file.
    pub(crate) const NONE: Mark = Mark { line: 0, col: 0 };

    /// Line and column from 1 (a file of more than four billion lines keeps its last place).
    pub(crate) fn new(line: usize, col: usize) -> Self {
        Self {
            line: u32::try_from(line).unwrap_or(u32::MAX),
            col: u32::try_from(col).unwrap_or(u32::MAX),
        }
    }

    /// The place, if the node is in the file.
    pub(crate) fn location(self) -> Option<Location> {
        (self.line > 0).then_some(Location {
            line: self.line as usize,
            col: self.col as usize,
        })
    }
}

/// A YAML number: an integer that fits 64 bits, or a finite float (`.inf` and `.nan` too).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Number {
    /// Zero and above.
    PosInt(u64),
    /// Below zero.
    NegInt(i64),
    /// Any other number.
    Float(f64),
}

impl fmt::Display for Number {
    /// Integers in decimal; floats in their shortest form that reads back the same, always with
    /// a `.` or an exponent (`1.0`, `1e300`), and YAML's `.inf`, `-.inf`, `.nan`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Number::PosInt(u) => write!(f, "{u}"),
            Number::NegInt(i) => write!(f, "{i}"),
            Number::Float(x) if x.is_nan() => f.write_str(".nan"),
            Number::Float(x) if x.is_infinite() => {
                f.write_str(if x < 0.0 { "-.inf" } else { ".inf" })
            }
            Number::Float(x) => f.write_str(ryu::Buffer::new().format_finite(x)),
        }
    }
}

/// One node of a YAML document and where it starts.
#[derive(Debug, Clone)]
pub(crate) struct Node<'a> {
    /// What the node holds.
    pub(crate) kind: Kind<'a>,
    /// Where it starts (a block mapping at its first key, a flow collection at its bracket).
    pub(crate) at: Mark,
}

/// What a node holds.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Kind<'a> {
    Null,
    Bool(bool),
    Number(Number),
    Str(Cow<'a, str>),
    Seq(Vec<Node<'a>>),
    /// Entries in file order; keys are unique.
    Map(Vec<(Node<'a>, Node<'a>)>),
    /// A value with a `!tag`: not part of the format, reported where it is read.
    Tagged,
}

impl PartialEq for Node<'_> {
    /// The same content, wherever it is written.
    fn eq(&self, other: &Self) -> bool {
        self.kind == other.kind
    }
}

impl<'a> Node<'a> {
    pub(crate) fn new(kind: Kind<'a>, at: Mark) -> Self {
        Self { kind, at }
    }

    /// A node that is not in the file.
    pub(crate) fn detached(kind: Kind<'a>) -> Self {
        Self::new(kind, Mark::NONE)
    }

    pub(crate) fn as_str(&self) -> Option<&str> {
        match &self.kind {
            Kind::Str(s) => Some(s),
            _ => None,
        }
    }

    pub(crate) fn is_null(&self) -> bool {
        matches!(self.kind, Kind::Null)
    }

    /// The value of the entry `key` of a mapping.
    pub(crate) fn get(&self, key: &str) -> Option<&Node<'a>> {
        match &self.kind {
            Kind::Map(m) => m
                .iter()
                .find(|(k, _)| k.as_str() == Some(key))
                .map(|e| &e.1),
            _ => None,
        }
    }

    /// A short description for messages.
    pub(crate) fn describe(&self) -> String {
        match &self.kind {
            Kind::Null => "nothing".into(),
            Kind::Bool(b) => format!("`{b}`"),
            Kind::Number(n) => format!("the number `{n}`"),
            Kind::Str(s) => format!("the text `{s}`"),
            Kind::Seq(_) => "a list".into(),
            Kind::Map(_) => "a mapping".into(),
            Kind::Tagged => "a tagged value".into(),
        }
    }

    /// A copy that owns its text, with no place (see [`Mark::NONE`]): a `--set` value.
    pub(crate) fn detach(&self) -> Node<'static> {
        let kind = match &self.kind {
            Kind::Null => Kind::Null,
            Kind::Bool(b) => Kind::Bool(*b),
            Kind::Number(n) => Kind::Number(*n),
            Kind::Str(s) => Kind::Str(Cow::Owned(s.to_string())),
            Kind::Seq(items) => Kind::Seq(items.iter().map(Node::detach).collect()),
            Kind::Map(m) => Kind::Map(m.iter().map(|(k, v)| (k.detach(), v.detach())).collect()),
            Kind::Tagged => Kind::Tagged,
        };
        Node::detached(kind)
    }
}

/// Any serde value as a tree, for the types that look at a value before choosing how to read it
/// (an efficiency: a constant, a curve or curves per input voltage); read again through the
/// tree's own `Deserializer`, so that the messages are the same.
impl<'de> Deserialize<'de> for Node<'static> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(TreeVisitor)
    }
}

struct TreeVisitor;

impl<'de> Visitor<'de> for TreeVisitor {
    type Value = Node<'static>;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("any YAML value")
    }

    fn visit_bool<E: de::Error>(self, b: bool) -> Result<Self::Value, E> {
        Ok(Node::detached(Kind::Bool(b)))
    }

    fn visit_i64<E: de::Error>(self, i: i64) -> Result<Self::Value, E> {
        let n = u64::try_from(i).map_or(Number::NegInt(i), Number::PosInt);
        Ok(Node::detached(Kind::Number(n)))
    }

    fn visit_u64<E: de::Error>(self, u: u64) -> Result<Self::Value, E> {
        Ok(Node::detached(Kind::Number(Number::PosInt(u))))
    }

    fn visit_f64<E: de::Error>(self, x: f64) -> Result<Self::Value, E> {
        Ok(Node::detached(Kind::Number(Number::Float(x))))
    }

    fn visit_str<E: de::Error>(self, s: &str) -> Result<Self::Value, E> {
        Ok(Node::detached(Kind::Str(Cow::Owned(s.to_string()))))
    }

    fn visit_string<E: de::Error>(self, s: String) -> Result<Self::Value, E> {
        Ok(Node::detached(Kind::Str(Cow::Owned(s))))
    }

    fn visit_unit<E: de::Error>(self) -> Result<Self::Value, E> {
        Ok(Node::detached(Kind::Null))
    }

    fn visit_none<E: de::Error>(self) -> Result<Self::Value, E> {
        Ok(Node::detached(Kind::Null))
    }

    fn visit_some<D: Deserializer<'de>>(self, d: D) -> Result<Self::Value, D::Error> {
        Node::deserialize(d)
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut a: A) -> Result<Self::Value, A::Error> {
        let mut items = Vec::with_capacity(a.size_hint().unwrap_or(0).min(1024));
        while let Some(x) = a.next_element::<Node<'static>>()? {
            items.push(x);
        }
        Ok(Node::detached(Kind::Seq(items)))
    }

    fn visit_map<A: MapAccess<'de>>(self, mut a: A) -> Result<Self::Value, A::Error> {
        let mut entries = Vec::with_capacity(a.size_hint().unwrap_or(0).min(1024));
        while let Some((k, v)) = a.next_entry::<Node<'static>, Node<'static>>()? {
            entries.push((k, v));
        }
        Ok(Node::detached(Kind::Map(entries)))
    }

    fn visit_enum<A: de::EnumAccess<'de>>(self, _: A) -> Result<Self::Value, A::Error> {
        Ok(Node::detached(Kind::Tagged))
    }
}

/// Read `T` from the tree `v` built by a nested reader, its errors as `E` with `prefix` before
/// them (`efficiency curve: ...`); through the node deserializer they keep their pieces.
pub(crate) fn reread<T: de::DeserializeOwned, E: de::Error>(
    v: &Node<'_>,
    prefix: &str,
) -> Result<T, E> {
    T::deserialize(v).map_err(|e| pass_out(e, prefix))
}

impl<'de> de::Deserializer<'de> for &Node<'_> {
    type Error = NodeError;

    fn deserialize_any<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Null => visitor.visit_unit(),
            Kind::Bool(b) => visitor.visit_bool(*b),
            Kind::Number(Number::PosInt(u)) => visitor.visit_u64(*u),
            Kind::Number(Number::NegInt(i)) => visitor.visit_i64(*i),
            Kind::Number(Number::Float(x)) => visitor.visit_f64(*x),
            Kind::Str(s) => visitor.visit_str(s),
            Kind::Seq(items) => {
                let mut access = Items { iter: items.iter() };
                let out = visitor.visit_seq(&mut access)?;
                match access.iter.len() {
                    0 => Ok(out),
                    _ => Err(de::Error::invalid_length(
                        items.len(),
                        &"fewer elements in sequence",
                    )),
                }
            }
            Kind::Map(entries) => {
                let mut access = Entries {
                    iter: entries.iter(),
                    value: None,
                };
                let out = visitor.visit_map(&mut access)?;
                match access.iter.len() {
                    0 => Ok(out),
                    _ => Err(de::Error::invalid_length(
                        entries.len(),
                        &"fewer elements in map",
                    )),
                }
            }
            Kind::Tagged => Err(de::Error::custom(
                "a tagged value (`!name ...`) is not part of a design file; remove the tag",
            )),
        }
    }

    fn deserialize_option<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Null => visitor.visit_none(),
            _ => visitor.visit_some(self),
        }
    }

    fn deserialize_bool<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Bool(b) => visitor.visit_bool(*b),
            _ => Err(self.invalid_type(&visitor)),
        }
    }

    fn deserialize_string<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Str(s) => visitor.visit_str(s),
            _ => Err(self.invalid_type(&visitor)),
        }
    }

    fn deserialize_str<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        self.deserialize_string(visitor)
    }

    fn deserialize_char<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        self.deserialize_string(visitor)
    }

    fn deserialize_identifier<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        self.deserialize_string(visitor)
    }

    fn deserialize_bytes<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Str(_) | Kind::Seq(_) => self.deserialize_any(visitor),
            _ => Err(self.invalid_type(&visitor)),
        }
    }

    fn deserialize_byte_buf<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        self.deserialize_bytes(visitor)
    }

    fn deserialize_unit<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Null => visitor.visit_unit(),
            _ => Err(self.invalid_type(&visitor)),
        }
    }

    fn deserialize_unit_struct<V: Visitor<'de>>(
        self,
        _name: &'static str,
        visitor: V,
    ) -> Result<V::Value, NodeError> {
        self.deserialize_unit(visitor)
    }

    fn deserialize_newtype_struct<V: Visitor<'de>>(
        self,
        _name: &'static str,
        visitor: V,
    ) -> Result<V::Value, NodeError> {
        visitor.visit_newtype_struct(self)
    }

    /// A list; nothing (`key:` alone) reads as an empty one.
    fn deserialize_seq<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Seq(_) => self.deserialize_any(visitor),
            Kind::Null => visitor.visit_seq(&mut Items { iter: [].iter() }),
            _ => Err(self.invalid_type(&visitor)),
        }
    }

    fn deserialize_tuple<V: Visitor<'de>>(
        self,
        _len: usize,
        visitor: V,
    ) -> Result<V::Value, NodeError> {
        self.deserialize_seq(visitor)
    }

    fn deserialize_tuple_struct<V: Visitor<'de>>(
        self,
        _name: &'static str,
        _len: usize,
        visitor: V,
    ) -> Result<V::Value, NodeError> {
        self.deserialize_seq(visitor)
    }

    /// A mapping; nothing reads as an empty one.
    fn deserialize_map<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Map(_) => self.deserialize_any(visitor),
            Kind::Null => visitor.visit_map(&mut Entries {
                iter: [].iter(),
                value: None,
            }),
            _ => Err(self.invalid_type(&visitor)),
        }
    }

    fn deserialize_struct<V: Visitor<'de>>(
        self,
        _name: &'static str,
        _fields: &'static [&'static str],
        visitor: V,
    ) -> Result<V::Value, NodeError> {
        self.deserialize_map(visitor)
    }

    /// A variant without data, named by text.
    fn deserialize_enum<V: Visitor<'de>>(
        self,
        _name: &'static str,
        _variants: &'static [&'static str],
        visitor: V,
    ) -> Result<V::Value, NodeError> {
        match &self.kind {
            Kind::Str(s) => {
                let d: de::value::StrDeserializer<'_, NodeError> = s.as_ref().into_deserializer();
                visitor.visit_enum(d)
            }
            _ => Err(de::Error::invalid_type(
                self.unexpected(),
                &"a Value::Tagged enum",
            )),
        }
    }

    fn deserialize_ignored_any<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        visitor.visit_unit()
    }

    serde::forward_to_deserialize_any! {
        i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64
    }
}

impl Node<'_> {
    fn unexpected(&self) -> de::Unexpected<'_> {
        match &self.kind {
            Kind::Null => de::Unexpected::Unit,
            Kind::Bool(b) => de::Unexpected::Bool(*b),
            Kind::Number(Number::PosInt(u)) => de::Unexpected::Unsigned(*u),
            Kind::Number(Number::NegInt(i)) => de::Unexpected::Signed(*i),
            Kind::Number(Number::Float(x)) => de::Unexpected::Float(*x),
            Kind::Str(s) => de::Unexpected::Str(s),
            Kind::Seq(_) => de::Unexpected::Seq,
            Kind::Map(_) => de::Unexpected::Map,
            Kind::Tagged => de::Unexpected::Enum,
        }
    }

    fn invalid_type(&self, exp: &dyn de::Expected) -> NodeError {
        de::Error::invalid_type(self.unexpected(), exp)
    }
}

struct Items<'n, 'a> {
    iter: std::slice::Iter<'n, Node<'a>>,
}

impl<'de> SeqAccess<'de> for Items<'_, '_> {
    type Error = NodeError;

    fn next_element_seed<T: DeserializeSeed<'de>>(
        &mut self,
        seed: T,
    ) -> Result<Option<T::Value>, NodeError> {
        self.iter.next().map(|n| seed.deserialize(n)).transpose()
    }

    fn size_hint(&self) -> Option<usize> {
        Some(self.iter.len())
    }
}

struct Entries<'n, 'a> {
    iter: std::slice::Iter<'n, (Node<'a>, Node<'a>)>,
    value: Option<&'n Node<'a>>,
}

impl<'de> MapAccess<'de> for Entries<'_, '_> {
    type Error = NodeError;

    fn next_key_seed<K: DeserializeSeed<'de>>(
        &mut self,
        seed: K,
    ) -> Result<Option<K::Value>, NodeError> {
        match self.iter.next() {
            Some((k, v)) => {
                self.value = Some(v);
                seed.deserialize(k).map(Some)
            }
            None => Ok(None),
        }
    }

    fn next_value_seed<V: DeserializeSeed<'de>>(&mut self, seed: V) -> Result<V::Value, NodeError> {
        match self.value.take() {
            Some(v) => seed.deserialize(v),
            None => Err(de::Error::custom("a value was read before its key")),
        }
    }

    fn size_hint(&self) -> Option<usize> {
        Some(self.iter.len())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::yaml::read;
    use crate::spec::{DesignSpec, LoadSpec};

    /// `T` read from the text's tree: its `Debug` form, or the message.
    fn reads<T: de::DeserializeOwned + fmt::Debug>(yaml: &str) -> Result<String, String> {
        let node = read(yaml).map_err(|d| format!("{d:?}"))?;
        T::deserialize(&node)
            .map(|t| format!("{t:?}"))
            .map_err(|e| e.to_string())
    }

    #[test]
    fn messages_are_serdes_own() {
        for (yaml, want) in [
            ("a", "invalid type: string \"a\", expected struct LoadSpec"),
            ("{ id: a, rail: battery }", "missing field `draw`"),
            (
                "{ id: 5, rail: battery, draw: {} }",
                "invalid type: integer `5`, expected a string",
            ),
            (
                "{ id: a, rail: battery, draw: {}, colour: red }",
                "unknown field `colour`, expected one of `id`, `rail`, `voltage_range`, `draw`, `default`",
            ),
            (
                "{ id: a, rail: battery, draw: { on: [1] } }",
                "expected a value with its unit such as `120 mA`, a capture `{ capture: FILE.csv }` or an LED `{ forward: 3 V, resistance: 1 Ω }`, found a list",
            ),
            (
                "{ id: a, rail: battery, draw: { on: !x 1 } }",
                "a tagged value (`!name ...`) is not part of a design file; remove the tag",
            ),
        ] {
            assert_eq!(reads::<LoadSpec>(yaml), Err(want.to_string()), "{yaml}");
        }
        let e = reads::<DesignSpec>(
            "battery: { cell: c }\nstages: [{ id: s, kind: bukc, input: battery }]\n",
        )
        .unwrap_err();
        assert!(
            e.starts_with("unknown variant `bukc`, expected one of `buck`"),
            "{e}"
        );
        let e = reads::<DesignSpec>("battery: { cell: [1] }\n").unwrap_err();
        assert_eq!(
            e,
            "expected a cell name or an inline cell mapping, found a list"
        );
        let e = reads::<DesignSpec>(
            "battery: { cell: c }\nstages: [{ id: s, kind: buck, input: battery, efficiency: [[1 mA, 80 %], 5] }]\n",
        )
        .unwrap_err();
        assert_eq!(
            e,
            "efficiency curve: invalid type: integer `5`, expected a sequence"
        );
    }

    #[test]
    fn numbers_read_as_they_are_written() {
        let ok = reads::<LoadSpec>(
            "{ id: a, rail: b, draw: { on: 1.5, off: 2, x: -3, y: 1e300, z: .inf } }",
        )
        .unwrap();
        for part in ["\"1.5\"", "\"2\"", "\"-3\"", "\"1e300\"", "\".inf\""] {
            assert!(ok.contains(part), "{part} in {ok}");
        }
        // A key with nothing after it reads as an empty mapping or list where one is expected.
        let d = reads::<DesignSpec>("battery: { cell: c }\nstages:\nmodes:\n").unwrap();
        assert!(d.contains("stages: []"), "{d}");
    }
}
