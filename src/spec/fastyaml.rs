//! A fast reader for the plain subset of YAML that design files are written in: block mappings
//! and sequences, one-line flow collections, plain and simply quoted scalars, comments.
//!
//! It builds the same tree the full parser's value converts to ([`Node`]), with text borrowed
//! from the file, many times faster: that matters for generated designs of thousands of stages.
//! Anything outside the subset (anchors, tags, block scalars, multi-line scalars or flow
//! collections, escapes, tabs, several documents, ...) and anything that might be an error makes
//! it give up (`None`); the caller then runs the full parser, which also gives the error
//! messages. A differential test holds the two readers to the same result on every file both
//! accept.

use std::borrow::Cow;

use serde_yaml::Value;

use super::node::Node;
use crate::hash::FastSet;

/// Read `text` if it lies in the subset; `None` where the full parser must decide.
pub(crate) fn parse(text: &str) -> Option<Node<'_>> {
    if !plain_characters(text) {
        return None;
    }
    let mut lines = Vec::with_capacity(text.len() / 24 + 1);
    for raw in text.split('\n') {
        let content = raw.trim_start_matches(' ');
        let indent = raw.len() - content.len();
        let content = content.trim_end_matches(' ');
        if content.is_empty() || content.starts_with('#') {
            continue;
        }
        if indent == 0 && (content.starts_with("---") || content.starts_with("...")) {
            return None;
        }
        lines.push(Line { indent, content });
    }
    if lines.is_empty() {
        return None;
    }
    let mut r = Reader { lines, at: 0 };
    let indent = r.lines[0].indent;
    let root = r.block(indent)?;
    (r.at == r.lines.len()).then_some(root)
}

/// No tabs, carriage returns, other control characters, byte-order marks or the line breaks
/// YAML knows beyond `\n`: the subset's lines and columns are then plain.
// Bitwise `&` and `|` on purpose: without branches the passes become vector code.
#[allow(clippy::needless_bitwise_bool)]
fn plain_characters(text: &str) -> bool {
    // Three passes without early exit, which the compiler turns into vector code: on the
    // 1.6 MB benchmark design they take a tenth of the instructions a byte loop took.
    let b = text.as_bytes();
    let b1 = b.get(1..).unwrap_or_default();
    let b2 = b.get(2..).unwrap_or_default();
    // Control characters other than `\n` (tab, CR, DEL, ...).
    let control = b.iter().fold(false, |bad, &x| {
        bad | ((x < 0x20) & (x != b'\n')) | (x == 0x7f)
    });
    // U+0080 to U+009F (C1 controls, NEL among them): C2 80 to C2 9F.
    let c1 = b.iter().zip(b1).fold(false, |bad, (&x, &y)| {
        bad | ((x == 0xc2) & (0x80..0xa0).contains(&y))
    });
    // U+2028 and U+2029 (line and paragraph separators), U+FEFF (byte-order mark).
    let other = b.iter().zip(b1).zip(b2).fold(false, |bad, ((&x, &y), &z)| {
        bad | ((x == 0xe2) & (y == 0x80) & ((z == 0xa8) | (z == 0xa9)))
            | ((x == 0xef) & (y == 0xbb) & (z == 0xbf))
    });
    !(control | c1 | other)
}

#[derive(Clone, Copy)]
struct Line<'a> {
    indent: usize,
    /// The line after its indentation, without trailing spaces; never empty or a comment.
    content: &'a str,
}

struct Reader<'a> {
    lines: Vec<Line<'a>>,
    at: usize,
}

impl<'a> Reader<'a> {
    fn current(&self) -> Option<Line<'a>> {
        self.lines.get(self.at).copied()
    }

    /// The block node whose first line is the current one, at `indent`.
    fn block(&mut self, indent: usize) -> Option<Node<'a>> {
        let line = self.current()?;
        if line.indent != indent {
            return None;
        }
        if is_entry(line.content) {
            self.sequence(indent)
        } else {
            self.mapping(indent)
        }
    }

    fn sequence(&mut self, indent: usize) -> Option<Node<'a>> {
        let mut items = Vec::new();
        while let Some(line) = self.current() {
            if line.indent < indent || (line.indent == indent && !is_entry(line.content)) {
                // The parent goes on (a key after a sequence at its own indentation).
                break;
            }
            if line.indent > indent {
                return None;
            }
            let rest = line.content[1..].trim_start_matches(' ');
            let col = indent + (line.content.len() - rest.len());
            if rest.is_empty() || rest.starts_with('#') {
                // `-` alone: the item is the block below, or null.
                self.at += 1;
                items.push(self.nested(indent, false)?);
            } else if is_entry(rest) {
                return None;
            } else if key_end(rest)?.is_some() {
                // `- key: value`: a mapping whose keys line up after the dash.
                self.lines[self.at] = Line {
                    indent: col,
                    content: rest,
                };
                items.push(self.mapping(col)?);
            } else {
                self.at += 1;
                items.push(inline(rest)?);
                self.no_continuation(indent)?;
            }
        }
        Some(Node::Seq(items))
    }

    fn mapping(&mut self, indent: usize) -> Option<Node<'a>> {
        // Room for a load's or a stage's usual keys without growing twice.
        let mut map = Keys {
            entries: Vec::with_capacity(8),
            seen: FastSet::default(),
        };
        while let Some(line) = self.current() {
            if line.indent < indent {
                break;
            }
            if line.indent > indent || is_entry(line.content) {
                return None;
            }
            let (key, rest) = split_key(line.content)?;
            self.at += 1;
            let value = if rest.is_empty() || rest.starts_with('#') {
                self.nested(indent, true)?
            } else {
                let v = inline(rest)?;
                self.no_continuation(indent)?;
                v
            };
            // A repeated key: the full parser words the error.
            map.insert(key, value)?;
        }
        Some(Node::Map(map.entries))
    }

    /// The value of a key or a dash with nothing after it on its line: the deeper block below,
    /// a sequence at the key's own indentation (allowed under a key), or null.
    fn nested(&mut self, indent: usize, under_key: bool) -> Option<Node<'a>> {
        match self.current() {
            Some(next) if next.indent > indent => self.block(next.indent),
            Some(next) if under_key && next.indent == indent && is_entry(next.content) => {
                self.sequence(indent)
            }
            _ => Some(Node::Null),
        }
    }

    /// After a one-line value, a deeper line would continue it (a multi-line scalar) or be an
    /// error: both are left to the full parser.
    fn no_continuation(&self, indent: usize) -> Option<()> {
        match self.current() {
            Some(next) if next.indent > indent => None,
            _ => Some(()),
        }
    }
}

/// A block sequence entry: `-` followed by a space or the end of the line.
fn is_entry(content: &str) -> bool {
    let b = content.as_bytes();
    b[0] == b'-' && (b.len() == 1 || b[1] == b' ')
}

/// Where the key of a block mapping entry ends (`Some(Some(i))`, the colon at `i`), no key on
/// this line (`Some(None)`), or a line the subset does not read (`None`).
fn key_end(content: &str) -> Option<Option<usize>> {
    let b = content.as_bytes();
    match b[0] {
        b'"' | b'\'' => {
            let close = quoted_end(content)?;
            let after = content[close..].trim_start_matches(' ');
            if after.starts_with(':') && (after.len() == 1 || after.as_bytes()[1] == b' ') {
                Some(Some(content.len() - after.len()))
            } else {
                Some(None)
            }
        }
        b'[' | b'{' => Some(None),
        c if starts_special(c, b.get(1).copied()) => None,
        _ => {
            for i in 0..b.len() {
                match b[i] {
                    b':' if i + 1 == b.len() || b[i + 1] == b' ' => return Some(Some(i)),
                    b'#' if b[i - 1] == b' ' => return Some(None),
                    _ => {}
                }
            }
            Some(None)
        }
    }
}

/// A block mapping entry's key and what follows its colon (trimmed).
fn split_key(content: &str) -> Option<(Node<'_>, &str)> {
    let end = key_end(content)??;
    let key_text = content[..end].trim_end_matches(' ');
    let key = if key_text.starts_with(['"', '\'']) {
        quoted(key_text)
    } else {
        resolve(key_text)?
    };
    Some((key, content[end + 1..].trim_start_matches(' ')))
}

/// A first character that starts something other than a plain scalar: anchors, aliases, tags,
/// block scalars, directives, reserved characters, and `?`, `:`, `-` as indicators.
fn starts_special(c: u8, next: Option<u8>) -> bool {
    match c {
        b'&' | b'*' | b'!' | b'|' | b'>' | b'%' | b'@' | b'`' | b',' | b']' | b'}' | b'#' => true,
        b'?' | b':' | b'-' => matches!(next, None | Some(b' ')),
        _ => false,
    }
}

/// A value that fits on its line: a flow collection, a quoted or a plain scalar, maybe
/// followed by a comment.
fn inline(rest: &str) -> Option<Node<'_>> {
    let b = rest.as_bytes();
    let (value, used) = match b[0] {
        b'[' | b'{' => {
            let mut f = Flow { s: rest, at: 0 };
            let v = f.node()?;
            (v, f.at)
        }
        b'"' | b'\'' => {
            let end = quoted_end(rest)?;
            (quoted(&rest[..end]), end)
        }
        c if starts_special(c, b.get(1).copied()) => return None,
        _ => {
            let end = rest.find(" #").unwrap_or(rest.len());
            let text = rest[..end].trim_end_matches(' ');
            if text.contains(": ") || text.ends_with(':') {
                return None;
            }
            (resolve(text)?, end)
        }
    };
    let after = rest[used..].trim_start_matches(' ');
    (after.is_empty()
        || (after.starts_with('#') && used < rest.len() && rest.as_bytes()[used] == b' '))
        .then_some(value)
}

/// The index just past the closing quote of the quoted scalar that `s` starts with; `None`
/// where it does not close on this line or holds an escape.
fn quoted_end(s: &str) -> Option<usize> {
    let b = s.as_bytes();
    let q = b[0];
    let mut i = 1;
    while i < b.len() {
        if b[i] == b'\\' && q == b'"' {
            return None;
        }
        if b[i] == q {
            if q == b'\'' && b.get(i + 1) == Some(&b'\'') {
                i += 2;
                continue;
            }
            return Some(i + 1);
        }
        i += 1;
    }
    None
}

/// The text of a complete quoted scalar (quotes included in `s`).
fn quoted(s: &str) -> Node<'_> {
    let inner = &s[1..s.len() - 1];
    Node::Str(if s.starts_with('\'') && inner.contains("''") {
        Cow::Owned(inner.replace("''", "'"))
    } else {
        Cow::Borrowed(inner)
    })
}

/// The value of a plain scalar: text, except where it could read as null, a boolean or a
/// number, which the full parser resolves so that both readers agree on every form.
fn resolve(text: &str) -> Option<Node<'_>> {
    if text.is_empty() {
        return Some(Node::Null);
    }
    if text.contains(' ') || !could_be_non_text(text) {
        return Some(Node::Str(Cow::Borrowed(text)));
    }
    // As a mapping value, so that `---` or `...` are not read as document markers.
    let Value::Mapping(m) = serde_yaml::from_str::<Value>(&format!("k: {text}")).ok()? else {
        return None;
    };
    match m.into_iter().next()?.1 {
        v @ (Value::Null | Value::Bool(_) | Value::Number(_) | Value::String(_)) => Some(v.into()),
        _ => None,
    }
}

/// Whether a plain scalar without spaces may be something other than text.
fn could_be_non_text(text: &str) -> bool {
    let first = text.as_bytes()[0];
    if first.is_ascii_digit() || matches!(first, b'+' | b'-' | b'.' | b'~') {
        return true;
    }
    ["true", "false", "null", "inf", "infinity", "nan"]
        .iter()
        .any(|w| text.eq_ignore_ascii_case(w))
}

/// A flow collection on one line.
struct Flow<'a> {
    s: &'a str,
    at: usize,
}

impl<'a> Flow<'a> {
    fn peek(&self) -> Option<u8> {
        self.s.as_bytes().get(self.at).copied()
    }

    fn spaces(&mut self) {
        while self.peek() == Some(b' ') {
            self.at += 1;
        }
    }

    fn node(&mut self) -> Option<Node<'a>> {
        match self.peek()? {
            b'[' => self.seq(),
            b'{' => self.map(),
            b'"' | b'\'' => {
                let end = self.at + quoted_end(&self.s[self.at..])?;
                let v = quoted(&self.s[self.at..end]);
                self.at = end;
                Some(v)
            }
            _ => {
                let text = self.plain()?;
                resolve(text)
            }
        }
    }

    /// A plain scalar up to the next flow indicator or `:` + space; trailing spaces trimmed.
    fn plain(&mut self) -> Option<&'a str> {
        let b = self.s.as_bytes();
        let start = self.at;
        if (starts_special(b[start], b.get(start + 1).copied()) && b[start] != b'-')
            || matches!(b[start], b'?' | b':')
        {
            return None;
        }
        if b[start] == b'-' && matches!(b.get(start + 1), None | Some(b' ' | b',' | b']' | b'}')) {
            return None;
        }
        let mut i = start;
        while i < b.len() {
            match b[i] {
                b',' | b'[' | b']' | b'{' | b'}' => break,
                b':' if matches!(b.get(i + 1), None | Some(b' ' | b',' | b']' | b'}')) => break,
                b'#' if i > start && b[i - 1] == b' ' => return None,
                b'"' | b'\'' if i == start => return None,
                _ => {}
            }
            i += 1;
        }
        self.at = i;
        Some(self.s[start..i].trim_end_matches(' '))
    }

    fn seq(&mut self) -> Option<Node<'a>> {
        self.at += 1;
        let mut items = Vec::new();
        loop {
            self.spaces();
            match self.peek()? {
                b']' => break,
                b',' => return None,
                _ => {}
            }
            items.push(self.node()?);
            self.spaces();
            match self.peek()? {
                b',' => self.at += 1,
                b']' => break,
                _ => return None,
            }
        }
        self.at += 1;
        Some(Node::Seq(items))
    }

    fn map(&mut self) -> Option<Node<'a>> {
        self.at += 1;
        let mut map = Keys::default();
        loop {
            self.spaces();
            match self.peek()? {
                b'}' => break,
                b',' | b'[' | b'{' => return None,
                _ => {}
            }
            let key = self.node()?;
            self.spaces();
            if self.peek()? != b':' {
                return None;
            }
            self.at += 1;
            if !matches!(self.peek(), Some(b' ')) {
                return None;
            }
            self.spaces();
            let value = match self.peek()? {
                b',' | b'}' => Node::Null,
                _ => self.node()?,
            };
            map.insert(key, value)?;
            self.spaces();
            match self.peek()? {
                b',' => self.at += 1,
                b'}' => break,
                _ => return None,
            }
        }
        self.at += 1;
        Some(Node::Map(map.entries))
    }
}

/// A mapping's entries as they are read, refusing a repeated key (the full parser words that
/// error).
#[derive(Default)]
struct Keys<'a> {
    entries: Vec<(Node<'a>, Node<'a>)>,
    /// For long mappings (a mode naming thousands of loads): the keys seen.
    seen: FastSet<Cow<'a, str>>,
}

impl<'a> Keys<'a> {
    fn insert(&mut self, key: Node<'a>, value: Node<'a>) -> Option<()> {
        const SHORT: usize = 12;
        let repeated = match &key {
            Node::Str(k) if self.entries.len() >= SHORT => {
                if self.seen.is_empty() {
                    self.seen = self
                        .entries
                        .iter()
                        .filter_map(|(e, _)| match e {
                            Node::Str(k) => Some(k.clone()),
                            _ => None,
                        })
                        .collect();
                }
                !self.seen.insert(k.clone())
            }
            // Short mappings, and keys that are numbers, booleans or null (rare).
            _ => self.entries.iter().any(|(e, _)| *e == key),
        };
        if repeated {
            return None;
        }
        self.entries.push((key, value));
        Some(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Both readers on `text`: the fast one either declines or agrees exactly with the full
    /// parser (serde_yaml, the reference), including key order.
    fn agrees(text: &str) -> bool {
        let fast = parse(text);
        let full = serde_yaml::from_str::<Value>(text).ok();
        match (fast, full) {
            (None, _) => true,
            (Some(f), Some(g)) => format!("{f:?}") == format!("{:?}", Node::from(g)),
            (Some(_), None) => false,
        }
    }

    #[test]
    fn reads_the_shapes_of_a_design_file() {
        let text = "\
design: Bench lamp, 1S   # title
ambient: 25 °C
cells:
  c:
    ocv:
      - [0 %, 3.0 V]
      - [100 %, 4.2 V]
    peukert: 1.05
battery: { cell: c, series: 2 }
stages:
- id: 'buck-1'
  kind: buck
  input_range: [2 V, \"5.5 V\"]
loads:
  - id: led
    draw: { on: 20 mA, dim: }
modes:
  sleep: {}
  on:
    led: on
profile:
  - repeat:
      - { mode: on, for: 1 h }
    times: 3
";
        assert!(parse(text).is_some(), "in the subset");
        assert!(agrees(text));
        let get = |n: &Node<'static>, key: &str| -> Node<'static> {
            match n {
                Node::Map(m) => m
                    .iter()
                    .find(|(k, _)| k.as_str() == Some(key))
                    .unwrap()
                    .1
                    .clone(),
                _ => panic!("not a mapping"),
            }
        };
        let first = |n: Node<'static>| match n {
            Node::Seq(items) => items[0].clone(),
            _ => panic!("not a list"),
        };
        let v: Node<'static> = Node::from(serde_yaml::from_str::<Value>(text).unwrap());
        assert_eq!(format!("{:?}", parse(text).unwrap()), format!("{v:?}"));
        assert_eq!(get(&get(&v, "battery"), "series"), Node::Number(2.into()));
        assert_eq!(
            get(&first(get(&v, "stages")), "id").as_str(),
            Some("buck-1")
        );
        assert_eq!(
            get(&get(&first(get(&v, "loads")), "draw"), "dim"),
            Node::Null
        );
        assert_eq!(
            get(&get(&get(&v, "modes"), "on"), "led").as_str(),
            Some("on")
        );
    }

    #[test]
    fn declines_what_it_does_not_read() {
        for text in [
            "a: &x 1\nb: *x\n",
            "a: |\n  text\n",
            "a: first\n  second\n",
            "a: [1,\n  2]\n",
            "a: \"esc\\n\"\n",
            "a:\tb\n",
            "---\na: 1\n",
            "a: 1\na: 2\n",
            "a: b: c\n",
            "- - 1\n",
            "? a\n: b\n",
            "a: !tag b\n",
            "a: b\u{85}c\n",
            "\u{feff}a: 1\n",
            "a: b\u{2028}c\n",
            "a: b\u{7f}\n",
            "a: b\r\n",
            "",
        ] {
            assert!(parse(text).is_none(), "{text:?}");
            assert!(agrees(text));
        }
    }

    /// Long mappings check repeated keys through a set: still declined, as in short ones.
    #[test]
    fn a_repeated_key_in_a_long_mapping_is_declined() {
        let keys: Vec<String> = (0..20).map(|i| format!("k{i}")).collect();
        let block = |extra: &[&str]| -> String {
            let all = keys.iter().map(String::as_str).chain(extra.iter().copied());
            all.map(|k| format!("{k}: 1"))
                .collect::<Vec<_>>()
                .join("\n")
                + "\n"
        };
        let flow = |extra: &[&str]| -> String {
            let all = keys.iter().map(String::as_str).chain(extra.iter().copied());
            let entries: Vec<String> = all.map(|k| format!("{k}: 1")).collect();
            format!("m: {{ {} }}\n", entries.join(", "))
        };
        for text in [block(&[]), flow(&[])] {
            assert!(parse(&text).is_some() && agrees(&text), "{text}");
        }
        for repeat in ["k3", "k19"] {
            for text in [block(&[repeat]), flow(&[repeat])] {
                assert!(parse(&text).is_none(), "{text}");
            }
        }
    }

    #[test]
    fn scalars_resolve_as_the_full_parser_does() {
        for s in [
            "1", "-2", "+3", "1.5", "1e3", ".5", "0x1f", "0o17", "1_000", ".inf", "-.inf", ".nan",
            "nan", "inf", "true", "True", "no", "off", "y", "~", "null", "NULL", "12:30", "3V",
            "-1 °C", "a#b", "1.2.3", "007", "-", "0.", "'q'", "'it''s'", "\"d\"",
        ] {
            for text in [
                format!("k: {s}\n"),
                format!("k: [{s}]\n"),
                format!("k: {{ a: {s} }}\n"),
                format!("- {s}\n"),
                format!("{s}: v\n"),
            ] {
                assert!(agrees(&text), "{text:?}");
            }
        }
    }

    /// Every design file of the project: examples are read by the fast path and agree; test
    /// files (many of them deliberately broken) agree or are declined.
    #[test]
    fn agrees_on_every_file_of_the_project() {
        fn walk(dir: &std::path::Path, out: &mut Vec<std::path::PathBuf>) {
            for e in std::fs::read_dir(dir).unwrap().flatten() {
                let p = e.path();
                if p.is_dir() {
                    walk(&p, out);
                } else if p.extension().is_some_and(|x| x == "yaml") {
                    out.push(p);
                }
            }
        }
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let mut files = Vec::new();
        walk(&root.join("examples"), &mut files);
        let examples = files.len();
        walk(&root.join("tests"), &mut files);
        assert!(examples >= 2 && files.len() > examples + 40);
        for (i, f) in files.iter().enumerate() {
            let text = std::fs::read_to_string(f).unwrap();
            assert!(agrees(&text), "{}", f.display());
            if i < examples {
                assert!(parse(&text).is_some(), "{} left the fast path", f.display());
            }
            // Every prefix cut at a line end, and every line dropped in turn, still agree.
            let lines: Vec<&str> = text.split_inclusive('\n').collect();
            for k in 0..lines.len() {
                assert!(agrees(&lines[..k].concat()), "{} cut at {k}", f.display());
                let dropped = [&lines[..k], &lines[k + 1..]].concat().concat();
                assert!(agrees(&dropped), "{} without line {k}", f.display());
            }
        }
    }

    use proptest::prelude::*;

    /// Pieces that design files and typing mistakes are made of.
    fn piece() -> impl Strategy<Value = &'static str> {
        prop::sample::select(vec![
            "a", "id", "kind", "3.3 V", "-1", "1.5", "0x10", "true", "~", "null", "on", "12:30",
            ":", ": ", "- ", "-", "#", " #c", "[", "]", "{", "}", ",", ", ", "'", "\"", "''", "&a",
            "*a", "!t", "|", ">", "?", " ", "  ", "\n", "\n  ", "\n    ", "\n- ", "µA", "%", "@",
            "`", "a: b", "[1, 2]", "{ x: 1 }", "\t", "\r\n", "---", "...",
        ])
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(4000))]

        /// Random texts from the pieces: the fast reader declines or agrees with serde_yaml.
        #[test]
        fn random_texts_agree(parts in prop::collection::vec(piece(), 0..40)) {
            let text = parts.concat();
            prop_assert!(agrees(&text), "{:?}", text);
        }

        /// Random lines of `key: value` shape at random indentation.
        #[test]
        fn random_blocks_agree(
            lines in prop::collection::vec(
                (0usize..4, any::<bool>(), piece(), piece(), piece()), 1..12)
        ) {
            let mut text = String::new();
            for (indent, dash, k, sep, v) in lines {
                text.push_str(&"  ".repeat(indent));
                if dash {
                    text.push_str("- ");
                }
                text.push_str(k);
                text.push_str(sep);
                text.push_str(v);
                text.push('\n');
            }
            prop_assert!(agrees(&text), "{:?}", text);
        }
    }

    /// A random document tree, rendered in a random mix of the styles design files use.
    #[derive(Debug, Clone)]
    enum Doc {
        Leaf(&'static str),
        Seq(Vec<Doc>),
        Map(Vec<(&'static str, Doc)>),
    }

    fn doc() -> impl Strategy<Value = Doc> {
        let scalar = prop::sample::select(vec![
            "a",
            "3.3 V",
            "-10 °C",
            "1",
            "-2",
            "1.5",
            "1e3",
            "0x1f",
            ".inf",
            "true",
            "no",
            "on",
            "~",
            "null",
            "12:30",
            "a#b",
            "'q'",
            "'it''s'",
            "\"dq\"",
            "µA",
            "buck-00001",
            "",
            "?x",
            ":x",
            "-x",
            "x:y",
            "2 %/month",
            "[]",
            "{}",
        ]);
        let key = prop::sample::select(vec![
            "id", "kind", "a b", "1", "true", "'q k'", "k-1", "null", "draw", "on", "\"dk\"",
        ]);
        scalar
            .prop_map(Doc::Leaf)
            .prop_recursive(4, 40, 5, move |inner| {
                prop_oneof![
                    prop::collection::vec(inner.clone(), 1..5).prop_map(Doc::Seq),
                    prop::collection::vec((key.clone(), inner), 1..5).prop_map(Doc::Map),
                ]
            })
    }

    struct Style<'a> {
        bits: &'a [bool],
        at: usize,
    }

    impl Style<'_> {
        fn flip(&mut self) -> bool {
            self.at += 1;
            self.bits[self.at % self.bits.len()]
        }
    }

    fn flow(d: &Doc, out: &mut String) {
        match d {
            Doc::Leaf(s) => out.push_str(s),
            Doc::Seq(items) => {
                out.push('[');
                for (i, x) in items.iter().enumerate() {
                    if i > 0 {
                        out.push_str(", ");
                    }
                    flow(x, out);
                }
                out.push(']');
            }
            Doc::Map(entries) => {
                out.push_str("{ ");
                for (i, (k, x)) in entries.iter().enumerate() {
                    if i > 0 {
                        out.push_str(", ");
                    }
                    out.push_str(k);
                    out.push_str(": ");
                    flow(x, out);
                }
                out.push_str(" }");
            }
        }
    }

    /// `d` as the value after `key:` or `-` (`first` is what starts its line).
    fn value(d: &Doc, indent: usize, st: &mut Style, out: &mut String) {
        match d {
            Doc::Leaf(_) => {
                out.push(' ');
                flow(d, out);
                if st.flip() && st.flip() {
                    out.push_str(" # note");
                }
                out.push('\n');
            }
            _ if st.flip() => {
                out.push(' ');
                flow(d, out);
                out.push('\n');
            }
            _ => {
                out.push('\n');
                block(d, indent + 2, st, out);
            }
        }
    }

    fn block(d: &Doc, indent: usize, st: &mut Style, out: &mut String) {
        let pad = " ".repeat(indent);
        match d {
            Doc::Leaf(_) => {
                out.push_str(&pad);
                flow(d, out);
                out.push('\n');
            }
            Doc::Seq(items) => {
                for x in items {
                    out.push_str(&pad);
                    out.push('-');
                    match x {
                        Doc::Map(entries) if st.flip() => {
                            // Compact: the first key on the dash's line.
                            for (i, (k, v)) in entries.iter().enumerate() {
                                if i == 0 {
                                    out.push(' ');
                                } else {
                                    out.push_str(&pad);
                                    out.push_str("  ");
                                }
                                out.push_str(k);
                                out.push(':');
                                value(v, indent + 2, st, out);
                            }
                        }
                        _ => value(x, indent, st, out),
                    }
                }
            }
            Doc::Map(entries) => {
                for (k, v) in entries {
                    out.push_str(&pad);
                    out.push_str(k);
                    out.push(':');
                    if matches!(v, Doc::Seq(_)) && st.flip() && st.flip() {
                        // A sequence at the key's own indentation.
                        out.push('\n');
                        block(v, indent, st, out);
                    } else {
                        value(v, indent, st, out);
                    }
                    if st.flip() && st.flip() && st.flip() {
                        out.push_str("\n# between\n");
                    }
                }
            }
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(3000))]

        /// Random well-formed trees in mixed styles: the fast reader reads most of them and
        /// agrees with serde_yaml on every one it reads.
        #[test]
        fn random_documents_agree(
            d in doc(),
            bits in prop::collection::vec(any::<bool>(), 1..16),
            cut in 0usize..400,
        ) {
            let mut text = String::new();
            block(&d, 0, &mut Style { bits: &bits, at: 0 }, &mut text);
            prop_assert!(agrees(&text), "{:?}", text);
            // A damaged copy: a character dropped.
            if let Some((i, _)) = text.char_indices().nth(cut % text.chars().count().max(1)) {
                let mut broken = text.clone();
                broken.remove(i);
                prop_assert!(agrees(&broken), "{:?}", broken);
            }
        }
    }

    /// The generator above is useful only if the fast reader takes most of its documents.
    #[test]
    fn random_documents_mostly_take_the_fast_path() {
        use proptest::strategy::ValueTree;
        use proptest::test_runner::TestRunner;
        let mut runner = TestRunner::deterministic();
        let (mut taken, total) = (0, 500);
        for _ in 0..total {
            let d = doc().new_tree(&mut runner).unwrap().current();
            let bits: Vec<bool> = (0..7).map(|i| (taken + i) % 3 == 0).collect();
            let mut text = String::new();
            block(&d, 0, &mut Style { bits: &bits, at: 0 }, &mut text);
            if parse(&text).is_some() {
                taken += 1;
            }
        }
        assert!(
            taken * 2 > total,
            "only {taken} of {total} read by the fast path"
        );
    }
}
