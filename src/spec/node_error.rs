//! The node deserializer's error as data: what went wrong (a value of the wrong shape, an
//! unknown key, a missing key, an unknown name) with its pieces (what was expected, what was
//! found, the key, the keys allowed), so that `words.rs` builds its messages from them. Its
//! `Display` is serde's own wording, shown only for the few problems `words.rs` does not word.

use std::cell::RefCell;
use std::fmt;

use serde::de;

/// A problem reading a node into a serde type.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct NodeError {
    /// The nested readers the problem was found in, outermost first (`efficiency curve: `).
    pub prefix: String,
    /// What went wrong.
    pub problem: Problem,
}

/// What went wrong, with its pieces.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Problem {
    /// A value of the wrong type (`value: false`) or of the right type but not allowed
    /// (`value: true`).
    Mismatch {
        /// What the file holds.
        found: Found,
        /// What the reader expected, as a noun phrase (`struct StageSpec`, `a string`, ...).
        expected: String,
        /// Serde's "invalid value" rather than "invalid type".
        value: bool,
    },
    /// A list or mapping with the wrong number of items.
    Length {
        /// How many it has.
        len: usize,
        /// What was expected.
        expected: String,
    },
    /// A key a mapping does not take.
    UnknownKey {
        /// The key.
        name: String,
        /// The keys it takes.
        known: &'static [&'static str],
    },
    /// A key a mapping needs.
    MissingKey {
        /// The key.
        name: &'static str,
    },
    /// A name that is not one of the allowed ones (a stage kind, a chemistry, ...).
    UnknownName {
        /// The name.
        name: String,
        /// The names allowed.
        known: &'static [&'static str],
    },
    /// A key given twice.
    DuplicateKey {
        /// The key.
        name: &'static str,
    },
    /// A message of a reader of this crate, already in words.
    Other(String),
}

/// The value found where another was expected.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Found {
    /// Nothing (`key:` alone).
    Nothing,
    /// `true` or `false`.
    Bool(bool),
    /// A whole number.
    Integer(i128),
    /// A number with a fraction or exponent.
    Float(f64),
    /// A text.
    Text(String),
    /// A list.
    List,
    /// A mapping.
    Mapping,
    /// A tagged value.
    Tagged,
    /// A value already described in words (see `Node::describe`), or a kind serde names that a
    /// design file cannot hold (its serde name).
    Words(String),
}

impl Found {
    fn of(u: &de::Unexpected<'_>) -> Self {
        match *u {
            de::Unexpected::Unit => Found::Nothing,
            de::Unexpected::Bool(b) => Found::Bool(b),
            de::Unexpected::Unsigned(n) => Found::Integer(i128::from(n)),
            de::Unexpected::Signed(n) => Found::Integer(i128::from(n)),
            de::Unexpected::Float(x) => Found::Float(x),
            de::Unexpected::Str(s) => Found::Text(s.to_string()),
            de::Unexpected::Seq => Found::List,
            de::Unexpected::Map => Found::Mapping,
            de::Unexpected::Enum => Found::Tagged,
            de::Unexpected::Other(s) => Found::Words(s.to_string()),
            ref other => Found::Words(other.to_string()),
        }
    }

    /// In the words of `Node::describe`: `nothing`, `the number `5``, `the text `abc``, `a
    /// list`, ...
    pub fn words(&self) -> String {
        match self {
            Found::Nothing => "nothing".into(),
            Found::Bool(b) => format!("`{b}`"),
            Found::Integer(n) => format!("the number `{n}`"),
            Found::Float(x) => format!("the number `{}`", with_point(*x)),
            // As a quoted Rust string without its quotes: escapes stay visible.
            Found::Text(s) => format!("the text `{}`", format!("{s:?}").trim_matches('"')),
            Found::List => "a list".into(),
            Found::Mapping => "a mapping".into(),
            Found::Tagged => "a tagged value".into(),
            Found::Words(w) => w.clone(),
        }
    }
}

/// A float as serde writes it in messages: with a decimal point (`5.0`) when finite.
fn with_point(x: f64) -> String {
    let s = format!("{x}");
    if x.is_finite() && !s.contains('.') {
        s + ".0"
    } else {
        s
    }
}

impl fmt::Display for Found {
    /// Serde's wording (`integer `5``, `string "a"`, `sequence`).
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Found::Nothing => f.write_str("unit value"),
            Found::Bool(b) => write!(f, "boolean `{b}`"),
            Found::Integer(n) => write!(f, "integer `{n}`"),
            Found::Float(x) => write!(f, "floating point `{}`", with_point(*x)),
            Found::Text(s) => write!(f, "string {s:?}"),
            Found::List => f.write_str("sequence"),
            Found::Mapping => f.write_str("map"),
            Found::Tagged => f.write_str("enum"),
            Found::Words(w) => f.write_str(w),
        }
    }
}

/// Serde's list of allowed names: `` `a` ``, `` `a` or `b` ``, `` one of `a`, `b`, `c` ``.
struct OneOf(&'static [&'static str]);

impl fmt::Display for OneOf {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            [] => Ok(()),
            [a] => write!(f, "`{a}`"),
            [a, b] => write!(f, "`{a}` or `{b}`"),
            names => {
                f.write_str("one of ")?;
                for (i, n) in names.iter().enumerate() {
                    if i > 0 {
                        f.write_str(", ")?;
                    }
                    write!(f, "`{n}`")?;
                }
                Ok(())
            }
        }
    }
}

impl fmt::Display for NodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.prefix)?;
        match &self.problem {
            // A reader of this crate's "expected X, found Y" (see `mismatch`).
            Problem::Mismatch {
                found: Found::Words(w),
                expected,
                value: false,
            } => write!(f, "expected {expected}, found {w}"),
            Problem::Mismatch {
                found,
                expected,
                value,
            } => {
                let what = if *value { "value" } else { "type" };
                write!(f, "invalid {what}: {found}, expected {expected}")
            }
            Problem::Length { len, expected } => {
                write!(f, "invalid length {len}, expected {expected}")
            }
            Problem::UnknownKey { name, known: [] } => {
                write!(f, "unknown field `{name}`, there are no fields")
            }
            Problem::UnknownKey { name, known } => {
                write!(f, "unknown field `{name}`, expected {}", OneOf(known))
            }
            Problem::MissingKey { name } => write!(f, "missing field `{name}`"),
            Problem::UnknownName { name, known: [] } => {
                write!(f, "unknown variant `{name}`, there are no variants")
            }
            Problem::UnknownName { name, known } => {
                write!(f, "unknown variant `{name}`, expected {}", OneOf(known))
            }
            Problem::DuplicateKey { name } => write!(f, "duplicate field `{name}`"),
            Problem::Other(m) => f.write_str(m),
        }
    }
}

impl std::error::Error for NodeError {}

impl NodeError {
    fn new(problem: Problem) -> Self {
        Self {
            prefix: String::new(),
            problem,
        }
    }
}

thread_local! {
    /// A nested reader's error on its way out through a generic `de::Error` (see `reread`).
    static PASSING: RefCell<Option<NodeError>> = const { RefCell::new(None) };
}

impl de::Error for NodeError {
    /// A message in words; or, when it is the text of a nested reader's error passed out by
    /// `reread`, that error itself with its pieces.
    fn custom<T: fmt::Display>(msg: T) -> Self {
        let msg = msg.to_string();
        let passed = PASSING.with(|p| p.borrow_mut().take());
        match passed {
            Some(e) if e.to_string() == msg => e,
            _ => NodeError::new(Problem::Other(msg)),
        }
    }

    fn invalid_type(unexp: de::Unexpected<'_>, exp: &dyn de::Expected) -> Self {
        NodeError::new(Problem::Mismatch {
            found: Found::of(&unexp),
            expected: exp.to_string(),
            value: false,
        })
    }

    fn invalid_value(unexp: de::Unexpected<'_>, exp: &dyn de::Expected) -> Self {
        NodeError::new(Problem::Mismatch {
            found: Found::of(&unexp),
            expected: exp.to_string(),
            value: true,
        })
    }

    fn invalid_length(len: usize, exp: &dyn de::Expected) -> Self {
        NodeError::new(Problem::Length {
            len,
            expected: exp.to_string(),
        })
    }

    fn unknown_variant(variant: &str, expected: &'static [&'static str]) -> Self {
        NodeError::new(Problem::UnknownName {
            name: variant.to_string(),
            known: expected,
        })
    }

    fn unknown_field(field: &str, expected: &'static [&'static str]) -> Self {
        NodeError::new(Problem::UnknownKey {
            name: field.to_string(),
            known: expected,
        })
    }

    fn missing_field(field: &'static str) -> Self {
        NodeError::new(Problem::MissingKey { name: field })
    }

    fn duplicate_field(field: &'static str) -> Self {
        NodeError::new(Problem::DuplicateKey { name: field })
    }
}

/// A value of the wrong shape, for a reader of this crate: `expected` (a noun phrase) where the
/// file holds `found` (in the words of `Node::describe`). Through the node deserializer it is a
/// [`Problem::Mismatch`] with those pieces; its text is "expected X, found Y".
pub(crate) fn mismatch<E: de::Error>(expected: &str, found: &str) -> E {
    E::invalid_type(de::Unexpected::Other(found), &expected)
}

/// `e`, found by a nested reader named `prefix`, as the error `E` of the reader around it:
/// through the node deserializer the same error with the prefix added, else its text.
pub(crate) fn pass_out<E: de::Error>(mut e: NodeError, prefix: &str) -> E {
    e.prefix.insert_str(0, prefix);
    let text = e.to_string();
    PASSING.with(|p| *p.borrow_mut() = Some(e));
    let out = E::custom(text);
    // Taken by `NodeError::custom`; left only when `E` is another error type.
    PASSING.with(|p| p.borrow_mut().take());
    out
}
