//! The document tree the serde types are read from: scalars, lists and mappings, with text
//! borrowed from the file where the fast reader made it. It replaces the full parser's value
//! type on the hot path: no copy of every key and scalar, no hash table per mapping.

use std::borrow::Cow;
use std::fmt;

use serde::de::{self, DeserializeSeed, IntoDeserializer, MapAccess, SeqAccess, Visitor};
use serde_yaml::{Number, Value};

/// One node of a YAML document.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Node<'a> {
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

impl Node<'_> {
    pub(crate) fn as_str(&self) -> Option<&str> {
        match self {
            Node::Str(s) => Some(s),
            _ => None,
        }
    }

    /// A short description for messages.
    pub(crate) fn describe(&self) -> String {
        match self {
            Node::Null => "nothing".into(),
            Node::Bool(b) => format!("`{b}`"),
            Node::Number(n) => format!("the number `{n}`"),
            Node::Str(s) => format!("the text `{s}`"),
            Node::Seq(_) => "a list".into(),
            Node::Map(_) => "a mapping".into(),
            Node::Tagged => "a tagged value".into(),
        }
    }
}

impl From<Value> for Node<'static> {
    fn from(v: Value) -> Self {
        match v {
            Value::Null => Node::Null,
            Value::Bool(b) => Node::Bool(b),
            Value::Number(n) => Node::Number(n),
            Value::String(s) => Node::Str(Cow::Owned(s)),
            Value::Sequence(items) => Node::Seq(items.into_iter().map(Node::from).collect()),
            Value::Mapping(m) => Node::Map(
                m.into_iter()
                    .map(|(k, v)| (Node::from(k), Node::from(v)))
                    .collect(),
            ),
            Value::Tagged(_) => Node::Tagged,
        }
    }
}

/// A problem reading a node into a serde type (serde's own wording for the common ones).
#[derive(Debug)]
pub(crate) struct NodeError(String);

impl fmt::Display for NodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for NodeError {}

impl de::Error for NodeError {
    fn custom<T: fmt::Display>(msg: T) -> Self {
        NodeError(msg.to_string())
    }
}

impl<'de> de::Deserializer<'de> for &Node<'_> {
    type Error = NodeError;

    fn deserialize_any<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match self {
            Node::Null => visitor.visit_unit(),
            Node::Bool(b) => visitor.visit_bool(*b),
            Node::Number(n) => {
                if let Some(u) = n.as_u64() {
                    visitor.visit_u64(u)
                } else if let Some(i) = n.as_i64() {
                    visitor.visit_i64(i)
                } else {
                    visitor.visit_f64(n.as_f64().unwrap_or(f64::NAN))
                }
            }
            Node::Str(s) => visitor.visit_str(s),
            Node::Seq(items) => {
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
            Node::Map(entries) => {
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
            Node::Tagged => Err(de::Error::custom(
                "a tagged value (`!name ...`) is not part of a design file; remove the tag",
            )),
        }
    }

    fn deserialize_option<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match self {
            Node::Null => visitor.visit_none(),
            _ => visitor.visit_some(self),
        }
    }

    fn deserialize_bool<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match self {
            Node::Bool(b) => visitor.visit_bool(*b),
            other => Err(other.invalid_type(&visitor)),
        }
    }

    fn deserialize_string<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match self {
            Node::Str(s) => visitor.visit_str(s),
            other => Err(other.invalid_type(&visitor)),
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
        match self {
            Node::Str(_) | Node::Seq(_) => self.deserialize_any(visitor),
            other => Err(other.invalid_type(&visitor)),
        }
    }

    fn deserialize_byte_buf<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        self.deserialize_bytes(visitor)
    }

    fn deserialize_unit<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, NodeError> {
        match self {
            Node::Null => visitor.visit_unit(),
            other => Err(other.invalid_type(&visitor)),
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
        match self {
            Node::Seq(_) => self.deserialize_any(visitor),
            Node::Null => visitor.visit_seq(&mut Items { iter: [].iter() }),
            other => Err(other.invalid_type(&visitor)),
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
        match self {
            Node::Map(_) => self.deserialize_any(visitor),
            Node::Null => visitor.visit_map(&mut Entries {
                iter: [].iter(),
                value: None,
            }),
            other => Err(other.invalid_type(&visitor)),
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
        match self {
            Node::Str(s) => {
                let d: de::value::StrDeserializer<'_, NodeError> = s.as_ref().into_deserializer();
                visitor.visit_enum(d)
            }
            other => Err(de::Error::invalid_type(
                other.unexpected(),
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
        match self {
            Node::Null => de::Unexpected::Unit,
            Node::Bool(b) => de::Unexpected::Bool(*b),
            Node::Number(n) => {
                if let Some(u) = n.as_u64() {
                    de::Unexpected::Unsigned(u)
                } else if let Some(i) = n.as_i64() {
                    de::Unexpected::Signed(i)
                } else {
                    de::Unexpected::Float(n.as_f64().unwrap_or(f64::NAN))
                }
            }
            Node::Str(s) => de::Unexpected::Str(s),
            Node::Seq(_) => de::Unexpected::Seq,
            Node::Map(_) => de::Unexpected::Map,
            Node::Tagged => de::Unexpected::Enum,
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
    use crate::spec::{DesignSpec, LoadSpec};
    use serde::Deserialize;

    /// Reading a node gives what the full parser's value type gives, results and messages.
    fn same<T: for<'de> Deserialize<'de> + fmt::Debug>(yaml: &str) {
        let v: Value = serde_yaml::from_str(yaml).unwrap();
        let by_value = T::deserialize(&v).map_err(|e| e.to_string());
        let node = Node::from(v);
        let by_node = T::deserialize(&node).map_err(|e| e.to_string());
        assert_eq!(format!("{by_value:?}"), format!("{by_node:?}"), "{yaml}");
    }

    #[test]
    fn reads_as_the_full_parser_does() {
        same::<LoadSpec>("{ id: a, rail: battery, draw: { on: 5 mA, s: 2 } }");
        same::<LoadSpec>("{ id: a, rail: battery, draw: { on: 1.5 } }");
        same::<LoadSpec>("{ id: a, rail: battery, draw: { on: [1] } }");
        same::<LoadSpec>("{ id: 5, rail: battery, draw: {} }");
        same::<LoadSpec>("{ id: a, rail: battery }");
        same::<LoadSpec>("{ id: a, rail: battery, draw: {}, colour: red }");
        same::<LoadSpec>("[a, battery, null, {on: 1 mA}]");
        same::<LoadSpec>("a");
        same::<DesignSpec>(
            "battery: { cell: c, series: 2 }\nstages: [{ id: s, kind: bukc, input: battery }]\n",
        );
        same::<DesignSpec>(
            "battery: { cell: { chemistry: li-ion, capacity: 1 Ah } }\nstages: [{ id: s, kind: buck, efficiency: [[1 mA, 80 %]] }]\n",
        );
        same::<DesignSpec>("battery: { cell: [1] }\n");
        same::<DesignSpec>("battery: { cell: c }\nprofile: [{ mode: m, for: -1 }]\n");
        same::<DesignSpec>("battery: { cell: c }\nmodes: { a: { x: true } }\n");
    }
}
