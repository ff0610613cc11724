//! The YAML reader: a design file's text (or a preset's, or a `--set` value) into one [`Node`]
//! tree, every node, key or value, with the place where it starts.
//!
//! The events come from `saphyr-parser` (a YAML 1.2 parser that passes the YAML test suite and
//! gives a span with every event); this module builds the tree from them without recursion, and
//! it is the one place where:
//! - plain scalars are resolved ([`resolve`]: `~`, `true`, `0x1f`, `1.5`, `.inf`, ...);
//! - aliases are copied, within a bound ([`ALIAS_NODES`]) so that an alias bomb cannot take the
//!   memory, and never deeper than the nesting bound of `depth.rs`; the copies kept for anchors
//!   are bounded too ([`ANCHOR_NODES`]);
//! - a key given twice in one mapping, a second document and a syntax error are worded, each at
//!   its place.

use std::borrow::Cow;
use std::fmt::Write as _;

use saphyr_parser::{Event, Marker, Parser, ScalarStyle, ScanError, Tag};

use super::depth::{self, MAX_DEPTH};
use super::node::{Kind, Mark, Node, Number};
use super::words;
use crate::error::{Diagnostic, Location};
use crate::hash::{FastMap, FastSet};

/// The most nodes that aliases may copy into one document, all aliases together. A design that
/// shares a curve through an anchor copies a few dozen; an alias bomb (each anchor a list of
/// aliases to the one before) would copy billions. Common practice, no source.
pub(crate) const ALIAS_NODES: usize = 100_000;

/// The most nodes that the anchors of one document may hold together (each anchored value is
/// kept as a copy for its aliases). Common practice, no source.
pub(crate) const ANCHOR_NODES: usize = 200_000;

/// Mappings with more entries than this look for a repeated key through a hash set.
const SHORT_MAP: usize = 16;

/// Read `text` (without a byte-order mark, its nesting already bounded by `depth::check`) into
/// its tree. An empty document (nothing but comments) is a null node with no place.
///
/// # Errors
///
/// A syntax error, a second document, a key given twice in a mapping (each one), an alias that
/// is unknown, contains itself or copies too much; each with its place.
pub(crate) fn read(text: &str) -> Result<Node<'static>, Vec<Diagnostic>> {
    if let Some(d) = control_character(text) {
        return Err(vec![d]);
    }
    match build(text) {
        Err(Failure::Syntax(e)) if tab_after_colon(&e) => {
            // `key:<tab>value`: YAML 1.2 allows a tab there, the parser does not. The same text
            // with such tabs made spaces (one character each: every place stays).
            let spaced = tabs_after_colons(text);
            build(&spaced).map_err(|f| f.words(text))
        }
        result => result.map_err(|f| f.words(text)),
    }
}

/// Why a text could not be read.
enum Failure {
    /// The parser's error.
    Syntax(ScanError),
    /// The parser stopped after the first document: the text holds another.
    SecondDocument,
    /// Problems found while building the tree (repeated keys, aliases).
    Found(Vec<Diagnostic>),
}

impl Failure {
    fn words(self, text: &str) -> Vec<Diagnostic> {
        match self {
            Failure::Syntax(e) => vec![syntax_error(text, &e)],
            Failure::SecondDocument => vec![words::second_document(text)],
            Failure::Found(ds) => ds,
        }
    }
}

/// The parser's error in words at its place; an unmatched bracket before it is named instead,
/// since the parser often notices one only lines later.
fn syntax_error(text: &str, e: &ScanError) -> Diagnostic {
    let at = place(*e.marker());
    if let Some((bracket, message, hint)) = depth::unmatched_bracket(text) {
        if (bracket.line, bracket.col) <= (at.line, at.col) {
            return Diagnostic::of(
                crate::error::DiagnosticKind::Syntax,
                "",
                format!("the file is not valid YAML: {message}"),
            )
            .with_hint(hint)
            .at(Some(bracket));
        }
    }
    if e.info().contains("tab") {
        if let Some(tab) = tab_in_indentation(text, at.line) {
            return Diagnostic::of(
                crate::error::DiagnosticKind::Syntax,
                "",
                "the file is not valid YAML: a tab in the indentation",
            )
            .with_hint("indent with spaces only")
            .at(Some(tab));
        }
    }
    Diagnostic::of(
        crate::error::DiagnosticKind::Syntax,
        "",
        format!("the file is not valid YAML: {}", e.info()),
    )
    .with_hint("check the indentation and the brackets near that place")
    .at(Some(at))
}

/// The first character YAML does not allow in a file (a control character other than tab and
/// line breaks, DEL, C1 controls but NEL, U+FFFE, U+FFFF), at its place; the parser would take
/// some of them into a scalar.
fn control_character(text: &str) -> Option<Diagnostic> {
    let allowed = |c: char| {
        matches!(c, '\t' | '\n' | '\r' | '\u{85}')
            || !(c.is_control() || c == '\u{fffe}' || c == '\u{ffff}')
    };
    // Bytes first: C1 controls start with 0xC2 and U+FFFE, U+FFFF with 0xEF; only a text
    // with such bytes (`µ` and `°` among them) is looked at by characters.
    if text.bytes().all(|b| {
        (b >= 0x20 && b != 0x7f && b != 0xc2 && b != 0xef) || matches!(b, b'\t' | b'\n' | b'\r')
    }) {
        return None;
    }
    let (at, c) = text.char_indices().find(|&(_, c)| !allowed(c))?;
    let line = text[..at].matches('\n').count() + 1;
    let start = text[..at].rfind('\n').map_or(0, |i| i + 1);
    let col = text[start..at].chars().count() + 1;
    Some(
        Diagnostic::of(
            crate::error::DiagnosticKind::Syntax,
            "",
            format!(
                "the file is not valid YAML: it holds the control character U+{:04X}",
                u32::from(c)
            ),
        )
        .with_hint("remove it; a design file is plain text")
        .at_line_col(line, col),
    )
}

/// A tab in the indentation of a line at or after line `from` (the parser may name the line
/// before): its place.
fn tab_in_indentation(text: &str, from: usize) -> Option<Location> {
    text.split('\n')
        .enumerate()
        .skip(from.saturating_sub(1))
        .find_map(|(n, line)| {
            let indent = line.len() - line.trim_start_matches([' ', '\t']).len();
            let col = line[..indent].find('\t')?;
            Some(Location {
                line: n + 1,
                col: col + 1,
            })
        })
}

/// The parser's place: its lines count from 1, its columns (characters) from 0.
fn place(m: Marker) -> Location {
    Location {
        line: m.line().max(1),
        col: m.col() + 1,
    }
}

fn mark(m: Marker) -> Mark {
    Mark::new(m.line().max(1), m.col() + 1)
}

fn tab_after_colon(e: &ScanError) -> bool {
    e.info().contains("':' must be followed by")
}

/// `text` with every tab that follows a `:` made a space, except on lines where a quote comes
/// before that `:` (it may be inside a quoted scalar).
fn tabs_after_colons(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for line in text.split_inclusive('\n') {
        let b = line.as_bytes();
        let mut quoted = false;
        let mut prev = 0u8;
        for (i, c) in line.char_indices() {
            let byte = b[i];
            quoted |= byte == b'\'' || byte == b'"';
            if byte == b'\t' && prev == b':' && !quoted {
                out.push(' ');
            } else {
                out.push(c);
            }
            prev = byte;
        }
    }
    out
}

/// One collection being read.
struct Frame<'a> {
    at: Mark,
    /// Its anchor (0 for none).
    anchor: usize,
    /// A tag that makes the whole value a tagged one.
    tagged: bool,
    /// Nodes in it, itself included.
    size: usize,
    /// Levels below it.
    height: usize,
    body: Body<'a>,
}

/// What a collection holds so far: its items (or entries) are those of the builder's shared
/// stack from `start` on, moved into a list of their own, exactly sized, when it ends.
enum Body<'a> {
    Seq {
        start: usize,
    },
    Map {
        start: usize,
        /// The key read, waiting for its value.
        key: Option<Node<'a>>,
        /// The text keys, once the mapping is long.
        seen: Option<FastSet<Cow<'a, str>>>,
    },
}

/// A finished node with its size (nodes) and height (levels below it).
struct Done<'a> {
    node: Node<'a>,
    size: usize,
    height: usize,
}

struct Builder<'a> {
    stack: Vec<Frame<'a>>,
    /// The items of the lists being read, innermost last.
    items: Vec<Node<'a>>,
    /// The entries of the mappings being read, innermost last.
    entries: Vec<(Node<'a>, Node<'a>)>,
    /// Anchored values by anchor id, with size and height.
    anchors: FastMap<usize, (Node<'a>, usize, usize)>,
    /// Nodes copied by aliases so far.
    copied: usize,
    /// Nodes kept for anchors so far.
    anchored: usize,
    root: Option<Done<'a>>,
    found: Vec<Diagnostic>,
}

/// The events of `text` into a tree. The tree owns its text: the parser copies nearly every
/// scalar anyway, and the tree outlives the text as the design's [`super::SourceMap`].
fn build(text: &str) -> Result<Node<'static>, Failure> {
    let mut parser = Parser::new_from_str(text);
    let mut b = Builder {
        stack: Vec::new(),
        items: Vec::new(),
        entries: Vec::new(),
        anchors: FastMap::default(),
        copied: 0,
        anchored: 0,
        root: None,
        found: Vec::new(),
    };
    let mut documents = 0;
    loop {
        let (event, span) = match parser.next_event() {
            None => break,
            Some(Ok(e)) => e,
            Some(Err(e)) => {
                // After a whole document, the parser found no start of another: the text goes
                // on at a place where a second document would have to start.
                if b.root.is_some() && b.stack.is_empty() && e.info().contains("document start") {
                    return Err(Failure::SecondDocument);
                }
                return Err(Failure::Syntax(e));
            }
        };
        let at = mark(span.start);
        match event {
            Event::StreamStart | Event::Nothing | Event::DocumentEnd => {}
            Event::StreamEnd => break,
            Event::DocumentStart(_) => {
                documents += 1;
                if documents > 1 {
                    return Err(Failure::SecondDocument);
                }
            }
            Event::Scalar(value, style, anchor, tag) => {
                let value = Cow::Owned(value.into_owned());
                let kind = match tag {
                    None if style == ScalarStyle::Plain => resolve(value),
                    None => Kind::Str(value),
                    Some(tag) => tagged_scalar(&tag, value),
                };
                let node = Node::new(kind, at);
                if anchor > 0 {
                    b.anchor(anchor, &node, 1, 0)?;
                }
                b.finish(Done {
                    node,
                    size: 1,
                    height: 0,
                });
            }
            Event::SequenceStart(anchor, tag) => b.open(at, anchor, tag.as_deref(), true),
            Event::MappingStart(anchor, tag) => b.open(at, anchor, tag.as_deref(), false),
            Event::SequenceEnd | Event::MappingEnd => b.close()?,
            Event::Alias(id) => b.alias(id, at)?,
        }
    }
    if !b.found.is_empty() {
        return Err(Failure::Found(b.found));
    }
    Ok(b.root
        .map_or_else(|| Node::new(Kind::Null, Mark::NONE), |d| d.node))
}

impl<'a> Builder<'a> {
    /// A collection starts.
    fn open(&mut self, at: Mark, anchor: usize, tag: Option<&Tag>, seq: bool) {
        let tagged = tag.is_some_and(|t| {
            !(t.is_yaml_core_schema() && t.suffix == if seq { "seq" } else { "map" })
        });
        let body = if seq {
            Body::Seq {
                start: self.items.len(),
            }
        } else {
            Body::Map {
                start: self.entries.len(),
                key: None,
                seen: None,
            }
        };
        self.stack.push(Frame {
            at,
            anchor,
            tagged,
            size: 1,
            height: 0,
            body,
        });
    }

    /// The innermost collection ends.
    fn close(&mut self) -> Result<(), Failure> {
        let Some(f) = self.stack.pop() else {
            return Ok(());
        };
        let kind = match f.body {
            Body::Seq { start } => Kind::Seq(self.items.drain(start..).collect()),
            // A key without its value cannot reach here: the parser gives every key one.
            Body::Map { start, .. } => Kind::Map(self.entries.drain(start..).collect()),
        };
        let kind = if f.tagged { Kind::Tagged } else { kind };
        let node = Node::new(kind, f.at);
        if f.anchor > 0 {
            self.anchor(f.anchor, &node, f.size, f.height)?;
        }
        self.finish(Done {
            node,
            size: f.size,
            height: f.height,
        });
        Ok(())
    }

    /// Keep a copy of the anchored value `node` for its aliases; the copies together are held
    /// to [`ANCHOR_NODES`] (a file anchoring every level of a deep nest would copy each level
    /// once per anchor above it).
    fn anchor(
        &mut self,
        id: usize,
        node: &Node<'a>,
        size: usize,
        height: usize,
    ) -> Result<(), Failure> {
        self.anchored += size;
        if self.anchored > ANCHOR_NODES {
            return Err(Failure::Found(vec![
                Diagnostic::new(
                    self.path(),
                    format!(
                        "the anchors (`&name`) of this file hold more than {ANCHOR_NODES} values"
                    ),
                )
                .with_hint("anchor only the values that an alias repeats")
                .at(node.at.location()),
            ]));
        }
        self.anchors.insert(id, (node.clone(), size, height));
        Ok(())
    }

    /// A copy of the anchored value `id` at `at`.
    fn alias(&mut self, id: usize, at: Mark) -> Result<(), Failure> {
        let Some((node, size, height)) = self.anchors.get(&id) else {
            // The parser knows the anchor, so the value is still open: it contains the alias.
            return Err(Failure::Found(vec![
                Diagnostic::new(
                    self.path(),
                    "this alias (`*name`) stands for a value that contains it",
                )
                .with_hint("an alias may only repeat a value written before it, in full")
                .at(at.location()),
            ]));
        };
        let (size, height) = (*size, *height);
        self.copied += size;
        if self.copied > ALIAS_NODES {
            return Err(Failure::Found(vec![
                Diagnostic::new(
                    self.path(),
                    format!(
                        "the aliases (`*name`) of this file repeat more than {ALIAS_NODES} values"
                    ),
                )
                .with_hint("write the values out, or use fewer aliases of large values")
                .at(at.location()),
            ]));
        }
        if self.stack.len() + height > MAX_DEPTH {
            return Err(Failure::Found(vec![
                Diagnostic::new(
                    self.path(),
                    format!(
                        "this alias nests the file too deep: more than {MAX_DEPTH} levels of lists and mappings"
                    ),
                )
                .with_hint("write the value out, or nest the anchors less")
                .at(at.location()),
            ]));
        }
        let mut node = node.clone();
        node.at = at;
        self.finish(Done { node, size, height });
        Ok(())
    }

    /// A finished node goes into the collection being read, or is the document.
    fn finish(&mut self, done: Done<'a>) {
        let Some(f) = self.stack.last_mut() else {
            self.root = Some(done);
            return;
        };
        f.size += done.size;
        f.height = f.height.max(done.height + 1);
        let (k, first) = match &mut f.body {
            Body::Seq { .. } => return self.items.push(done.node),
            Body::Map {
                key: key @ None, ..
            } => return *key = Some(done.node),
            Body::Map { start, key, seen } => {
                let k = key
                    .take()
                    .unwrap_or_else(|| Node::new(Kind::Null, Mark::NONE));
                match repeated(&self.entries[*start..], seen, &k) {
                    None => return self.entries.push((k, done.node)),
                    Some(first) => (k, first),
                }
            }
        };
        // A repeated key: reported, and its second entry left out.
        let path = self.path();
        let name = key_text(&k);
        let path = if path.is_empty() {
            name.clone()
        } else {
            format!("{path}.{name}")
        };
        let first = first
            .location()
            .map_or_else(String::new, |l| format!(" (first on line {})", l.line));
        self.found.push(
            Diagnostic::of(
                crate::error::DiagnosticKind::DuplicateKey,
                path,
                format!("the key `{name}` is given twice in one mapping{first}"),
            )
            .with_hint("keep one of the two entries")
            .at(k.at.location()),
        );
    }

    /// The YAML path of the collection being read (`stages[2]`), for messages.
    fn path(&self) -> String {
        let mut p = String::new();
        for (i, f) in self.stack.iter().enumerate() {
            match &f.body {
                Body::Seq { start } => {
                    // Its items end where those of the next list inside it start.
                    let end = self.stack[i + 1..]
                        .iter()
                        .find_map(|g| match g.body {
                            Body::Seq { start } => Some(start),
                            Body::Map { .. } => None,
                        })
                        .unwrap_or(self.items.len());
                    let _ = write!(p, "[{}]", end - start);
                }
                Body::Map { key: Some(k), .. } => {
                    if !p.is_empty() {
                        p.push('.');
                    }
                    p.push_str(&key_text(k));
                }
                Body::Map { key: None, .. } => {}
            }
        }
        p
    }
}

/// A key as written in a path or a message.
pub(crate) fn key_text(k: &Node<'_>) -> String {
    match &k.kind {
        Kind::Str(s) => s.to_string(),
        Kind::Number(n) => n.to_string(),
        Kind::Bool(b) => b.to_string(),
        Kind::Null => "~".into(),
        _ => "?".into(),
    }
}

/// Where `key` is already a key of `entries`: the mark of the first one. Long mappings keep a
/// set of their text keys.
fn repeated<'a>(
    entries: &[(Node<'a>, Node<'a>)],
    seen: &mut Option<FastSet<Cow<'a, str>>>,
    key: &Node<'a>,
) -> Option<Mark> {
    let linear = || {
        entries
            .iter()
            .find(|(k, _)| k.kind == key.kind)
            .map(|(k, _)| k.at)
    };
    if entries.len() < SHORT_MAP {
        return linear();
    }
    let Kind::Str(name) = &key.kind else {
        return linear();
    };
    let set = seen.get_or_insert_with(|| {
        entries
            .iter()
            .filter_map(|(k, _)| match &k.kind {
                Kind::Str(s) => Some(s.clone()),
                _ => None,
            })
            .collect()
    });
    if set.insert(name.clone()) {
        None
    } else {
        linear()
    }
}

/// A scalar with a tag: the core schema's own tags read as their kind, any other tag makes a
/// tagged value (refused where it is read).
fn tagged_scalar<'a>(tag: &Tag, text: Cow<'a, str>) -> Kind<'a> {
    if (tag.handle == "!" && tag.suffix.is_empty()) || (tag.handle.is_empty() && tag.suffix == "!")
    {
        // `! text`: the non-specific tag, a plain text.
        return Kind::Str(text);
    }
    if !tag.is_yaml_core_schema() {
        return Kind::Tagged;
    }
    match tag.suffix.as_str() {
        "str" => Kind::Str(text),
        "null" | "bool" | "int" | "float" => match resolve(text) {
            k @ (Kind::Null | Kind::Bool(_) | Kind::Number(_)) => k,
            _ => Kind::Tagged,
        },
        _ => Kind::Tagged,
    }
}

/// The value of a plain scalar, by the YAML 1.2 core schema: nothing (empty, `~`, `null`), a
/// boolean (`true`, `False`, ...), an integer (decimal, `0x`, `0o`, `0b`; 64 bits), a float
/// (`1.5`, `1e3`, `.inf`, `-.inf`, `.nan`), else text. A decimal with a leading zero (`007`) is
/// text, and so is an integer past 64 bits (kept as written).
pub(crate) fn resolve(text: Cow<'_, str>) -> Kind<'_> {
    let s: &str = &text;
    let Some(&first) = s.as_bytes().first() else {
        return Kind::Null;
    };
    // Only these can start anything but text; a number holds no space.
    if !(first.is_ascii_digit()
        || matches!(
            first,
            b'+' | b'-' | b'.' | b'~' | b'n' | b'N' | b't' | b'T' | b'f' | b'F'
        ))
        || s.contains(' ')
    {
        return Kind::Str(text);
    }
    match s {
        "~" | "null" | "Null" | "NULL" => return Kind::Null,
        "true" | "True" | "TRUE" => return Kind::Bool(true),
        "false" | "False" | "FALSE" => return Kind::Bool(false),
        _ => {}
    }
    if let Some(n) = integer(s) {
        return Kind::Number(n);
    }
    // An integer too long for 64 bits stays as written.
    let digits = s.strip_prefix(['-', '+']).unwrap_or(s);
    if leading_zero_digits(s) || digits.bytes().all(|b| b.is_ascii_digit()) {
        return Kind::Str(text);
    }
    match float(s) {
        Some(x) => Kind::Number(Number::Float(x)),
        None => Kind::Str(text),
    }
}

/// Digits after a leading zero (`007`, `-01`): text in YAML 1.2, not an octal number.
fn leading_zero_digits(s: &str) -> bool {
    let s = s.strip_prefix(['-', '+']).unwrap_or(s);
    s.len() > 1 && s.starts_with('0') && s[1..].bytes().all(|b| b.is_ascii_digit())
}

/// An integer of 64 bits: decimal, `0x` hexadecimal, `0o` octal, `0b` binary, with a sign.
fn integer(s: &str) -> Option<Number> {
    let (negative, body) = match s.as_bytes()[0] {
        b'-' => (true, &s[1..]),
        b'+' => (false, &s[1..]),
        _ => (false, s),
    };
    let (radix, digits) = if let Some(d) = body.strip_prefix("0x") {
        (16, d)
    } else if let Some(d) = body.strip_prefix("0o") {
        (8, d)
    } else if let Some(d) = body.strip_prefix("0b") {
        (2, d)
    } else {
        if leading_zero_digits(s) {
            return None;
        }
        (10, body)
    };
    // `from_str_radix` takes a sign of its own: only digits here.
    if digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_hexdigit()) {
        return None;
    }
    let magnitude = u64::from_str_radix(digits, radix).ok()?;
    if !negative {
        return Some(Number::PosInt(magnitude));
    }
    if magnitude == 0 {
        return Some(Number::PosInt(0));
    }
    let i = 0i64.checked_sub_unsigned(magnitude)?;
    Some(Number::NegInt(i))
}

/// A float: decimal digits with a point or an exponent (finite), or `.inf`, `-.inf`, `.nan` in
/// their three spellings each.
fn float(s: &str) -> Option<f64> {
    let unsigned = s.strip_prefix('+').unwrap_or(s);
    if unsigned.len() < s.len() && unsigned.starts_with(['+', '-']) {
        return None;
    }
    match unsigned {
        ".inf" | ".Inf" | ".INF" => return Some(f64::INFINITY),
        "-.inf" | "-.Inf" | "-.INF" => return Some(f64::NEG_INFINITY),
        ".nan" | ".NaN" | ".NAN" if unsigned.len() == s.len() => return Some(f64::NAN),
        _ => {}
    }
    // Rust also reads `inf`, `nan` and `infinity`, which YAML spells otherwise: only finite.
    unsigned.parse::<f64>().ok().filter(|x| x.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn kind(s: &str) -> Kind<'_> {
        resolve(Cow::Borrowed(s))
    }

    fn num(s: &str) -> String {
        match kind(s) {
            Kind::Number(n) => n.to_string(),
            other => panic!("{s}: {other:?}"),
        }
    }

    #[test]
    fn plain_scalars_resolve_by_the_core_schema() {
        for s in ["", "~", "null", "Null", "NULL"] {
            assert_eq!(kind(s), Kind::Null, "{s:?}");
        }
        for (s, b) in [
            ("true", true),
            ("True", true),
            ("FALSE", false),
            ("false", false),
        ] {
            assert_eq!(kind(s), Kind::Bool(b), "{s}");
        }
        for (s, n) in [
            ("1", "1"),
            ("-2", "-2"),
            ("+3", "3"),
            ("-0", "0"),
            ("0x1f", "31"),
            ("-0x10", "-16"),
            ("0o17", "15"),
            ("0b101", "5"),
            ("1.5", "1.5"),
            ("1e3", "1000.0"),
            (".5", "0.5"),
            ("1.", "1.0"),
            ("1e300", "1e300"),
            (".inf", ".inf"),
            ("-.Inf", "-.inf"),
            ("+.INF", ".inf"),
            (".nan", ".nan"),
            ("18446744073709551615", "18446744073709551615"),
            ("-9223372036854775808", "-9223372036854775808"),
        ] {
            assert_eq!(num(s), n, "{s}");
        }
        // Text: YAML 1.1's words, sexagesimal and octal forms, leading zeros, units, integers
        // past 64 bits, Rust's own spellings of infinity.
        for s in [
            "yes",
            "no",
            "on",
            "off",
            "y",
            "12:30",
            "007",
            "-01",
            "0x",
            "0X1f",
            "1_000",
            "3 V",
            "1.2.3",
            "-",
            "nan",
            "inf",
            "NaN",
            "infinity",
            "1e309",
            "+-1",
            "++1",
            "+.nan",
            "18446744073709551616",
            "-9223372036854775809",
            "a#b",
            "0x+1",
        ] {
            assert!(matches!(kind(s), Kind::Str(_)), "{s}: {:?}", kind(s));
        }
    }

    fn messages(text: &str) -> Vec<String> {
        match read(text) {
            Ok(_) => Vec::new(),
            Err(ds) => ds
                .iter()
                .map(|d| {
                    let at = d.location().map(|l| format!("{}:{}", l.line, l.col));
                    format!("{} @{}", d.message(), at.unwrap_or_default())
                })
                .collect(),
        }
    }

    #[test]
    fn every_node_has_its_place() {
        let root = read("a: 1\nb:\n  - x\n  - { c: 'q' }\n").unwrap();
        let b = root.get("b").unwrap();
        let Kind::Seq(items) = &b.kind else { panic!() };
        assert_eq!(b.at.location(), Some(Location { line: 3, col: 3 }));
        assert_eq!(items[1].at.location(), Some(Location { line: 4, col: 5 }));
        let c = items[1].get("c").unwrap();
        assert_eq!(
            (c.as_str(), c.at.location()),
            (Some("q"), Some(Location { line: 4, col: 10 }))
        );
        let Kind::Map(entries) = &root.kind else {
            panic!()
        };
        assert_eq!(
            entries[1].0.at.location(),
            Some(Location { line: 2, col: 1 })
        );
        // Nothing but comments: a null document without a place.
        let empty = read("# only a comment\n").unwrap();
        assert!(empty.is_null() && empty.at.location().is_none());
    }

    #[test]
    fn repeated_keys_are_each_reported_at_the_second() {
        let m = messages("a: 1\nb: { x: 1, x: 2 }\na: 3\n");
        assert_eq!(
            m,
            [
                "the key `x` is given twice in one mapping (first on line 2) @2:12",
                "the key `a` is given twice in one mapping (first on line 1) @3:1",
            ]
        );
        // Long mappings too (through the set), and keys of other kinds.
        let mut long = String::new();
        for i in 0..40 {
            let _ = writeln!(long, "k{i}: 1");
        }
        long.push_str("k7: 2\n1: a\n1: b\n");
        let m = messages(&long);
        assert_eq!(m.len(), 2, "{m:?}");
        assert!(m[0].contains("`k7`") && m[1].contains("`1`"), "{m:?}");
        // The path names lists by index.
        let e = read("a:\n  - x: 1\n  - [1, { y: 1, y: 2 }]\n").unwrap_err();
        assert_eq!(e[0].path(), "a[1][1].y");
        // Text and number are different keys.
        assert!(messages("'1': a\n1: b\n").is_empty());
    }

    #[test]
    fn aliases_are_copied_within_bounds() {
        let root = read("a: &c [1, 2]\nb: *c\n").unwrap();
        assert_eq!(root.get("a"), root.get("b"));
        assert_eq!(
            root.get("b").unwrap().at.location(),
            Some(Location { line: 2, col: 4 })
        );
        // A bomb: each anchor ten aliases of the one before.
        let mut bomb = String::from("a0: &a0 [x, x, x, x, x, x, x, x, x, x]\n");
        for i in 1..12 {
            let p = i - 1;
            let _ = writeln!(
                bomb,
                "a{i}: &a{i} [{}]",
                vec![format!("*a{p}"); 10].join(", ")
            );
        }
        let start = std::time::Instant::now();
        let m = messages(&bomb);
        assert!(start.elapsed() < std::time::Duration::from_secs(2));
        assert_eq!(m.len(), 1, "{m:?}");
        assert!(m[0].contains("repeat more than 100000 values"), "{m:?}");
        // Nested anchors deeper than the bound.
        let mut deep = String::from("a0: &a0 [[[[[[[[[[1]]]]]]]]]]\n");
        for i in 1..12 {
            let _ = writeln!(deep, "a{i}: &a{i} [[[[[[[[[[*a{}]]]]]]]]]]", i - 1);
        }
        let m = messages(&deep);
        assert!(
            m.iter().any(|x| x.contains("nests the file too deep")),
            "{m:?}"
        );
        // Anchors on every level of a deep nest, each copied once per anchor above it.
        let mut nest = String::from("a: ");
        for _ in 0..90 {
            nest.push_str("&x [");
        }
        nest.push_str(&"1, ".repeat(5000));
        nest.push_str(&"]".repeat(90));
        let m = messages(&nest);
        assert!(m[0].contains("hold more than 200000 values"), "{m:?}");
        // Unknown anchors are the parser's syntax errors.
        assert!(messages("a: *nowhere\n")[0].starts_with("the file is not valid YAML"));
    }

    #[test]
    fn tags_documents_tabs_and_brackets() {
        let root = read("a: !!str 5\nb: !thing x\nc: ! 7\nd: !!int 5\n").unwrap();
        assert_eq!(root.get("a").unwrap().as_str(), Some("5"));
        assert_eq!(root.get("b").unwrap().kind, Kind::Tagged);
        assert_eq!(root.get("c").unwrap().as_str(), Some("7"));
        assert_eq!(root.get("d").unwrap().kind, Kind::Number(Number::PosInt(5)));
        assert_eq!(
            read("a: !thing { b: 1 }\n").unwrap().get("a").unwrap().kind,
            Kind::Tagged
        );
        let m = messages("a: 1\n---\nb: 2\n");
        assert_eq!(
            m,
            ["the file holds more than one YAML document: line 2 starts another with `---` @2:1"]
        );
        // A tab after a key's colon is read as a space, places kept; in a quoted text it stays.
        let root = read("a:\t1\nb: 'x:\ty'\nc:\t[1, 2]\n").unwrap();
        assert_eq!(root.get("a").unwrap().kind, Kind::Number(Number::PosInt(1)));
        assert_eq!(root.get("b").unwrap().as_str(), Some("x:\ty"));
        assert_eq!(
            root.get("c").unwrap().at.location(),
            Some(Location { line: 3, col: 4 })
        );
        // A bracket that does not match is named at its place.
        assert_eq!(
            messages("a: 1\nb: { c: [1, 2}\nd: 3\n"),
            [
                "the file is not valid YAML: this `}` does not close the `[` opened at line 2, column 9 @2:14"
            ]
        );
        assert_eq!(
            messages("a: [1, 2\nb: 3\n"),
            ["the file is not valid YAML: this `[` is never closed @1:4"]
        );
        // A tab in the indentation and a control character, at their places.
        assert_eq!(
            messages("a:\n  b: c\n\tx: 1\n"),
            ["the file is not valid YAML: a tab in the indentation @3:1"]
        );
        assert_eq!(
            messages("a: 1\nb: x\u{1}y\n"),
            ["the file is not valid YAML: it holds the control character U+0001 @2:5"]
        );
        assert_eq!(
            messages("a: µ\u{9f}\n"),
            ["the file is not valid YAML: it holds the control character U+009F @1:5"]
        );
        assert!(messages("a: \u{85}x\u{e9}\n").is_empty());
        // Other syntax errors in the parser's words, at its place.
        let m = messages("a: b: c\n");
        assert!(m[0].starts_with("the file is not valid YAML: "), "{m:?}");
        assert!(m[0].ends_with("@1:5"), "{m:?}");
    }
}
