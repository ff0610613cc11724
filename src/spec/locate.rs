//! Where each value of a YAML document sits: a map from YAML path (`stages[2].input`) to line and
//! column, built from the event stream of a second, position-aware parser. serde gives positions
//! only for its first error; this index lets every later check name its place too.

use std::collections::HashMap;

use yaml_rust2::parser::{Event, MarkedEventReceiver, Parser};
use yaml_rust2::scanner::Marker;

use crate::error::Location;

/// Line and column of every value (and every mapping key) in a document, by YAML path. The
/// index is built the first time a place is asked for: a valid design never pays for it.
#[derive(Debug, Default, Clone)]
pub struct SourceMap {
    text: String,
    index: std::cell::OnceCell<Index>,
    overridden: Vec<String>,
}

#[derive(Debug, Default, Clone)]
struct Index {
    values: HashMap<String, Location>,
    keys: HashMap<String, Location>,
}

impl SourceMap {
    /// A map of `text`, indexed on first use; a document the position parser cannot read gives
    /// no places.
    pub fn build(text: &str) -> Self {
        Self {
            text: text.to_string(),
            index: std::cell::OnceCell::new(),
            overridden: Vec::new(),
        }
    }

    /// Mark values replaced by `--set` (index-form paths): they have no place in the file.
    pub fn set_overridden(&mut self, paths: Vec<String>) {
        self.overridden = paths;
    }

    /// Whether `path` lies in a value replaced by `--set`.
    pub fn is_overridden(&self, path: &str) -> bool {
        self.overridden.iter().any(|o| {
            path == o
                || path
                    .strip_prefix(o.as_str())
                    .is_some_and(|r| r.starts_with(['.', '[']))
        })
    }

    fn index(&self) -> &Index {
        self.index.get_or_init(|| {
            let (mut index, whole) = index_of(&self.text);
            if !whole {
                // The position parser is stricter than the reader (a tab after `key:`): what it
                // read before stopping stands, and a copy with every tab a space (one character
                // each, so columns stay) gives the places after.
                let (more, _) = index_of(&self.text.replace('\t', " "));
                for (path, at) in more.values {
                    index.values.entry(path).or_insert(at);
                }
                for (path, at) in more.keys {
                    index.keys.entry(path).or_insert(at);
                }
            }
            index
        })
    }

    /// Where the value at `path` starts.
    pub fn value(&self, path: &str) -> Option<Location> {
        self.index().values.get(path).copied()
    }

    /// Where the key of the mapping entry at `path` is written (its value's place if unknown).
    pub fn key(&self, path: &str) -> Option<Location> {
        self.index()
            .keys
            .get(path)
            .copied()
            .or_else(|| self.value(path))
    }

    /// The place of `path`, or of its nearest ancestor that has one (none for a value set on the
    /// command line).
    pub fn nearest(&self, path: &str) -> Option<Location> {
        if self.is_overridden(path) {
            return None;
        }
        let mut p = path;
        loop {
            if let Some(l) = self.value(p) {
                return Some(l);
            }
            let cut = p.rfind(['.', '['])?;
            p = &p[..cut];
        }
    }
}

/// The places the position parser finds in `text`, and whether it read the whole text.
fn index_of(text: &str) -> (Index, bool) {
    let mut rec = Recorder::default();
    let whole = Parser::new_from_str(text).load(&mut rec, false).is_ok();
    (rec.map, whole)
}

enum Frame {
    Map { path: String, key: Option<String> },
    Seq { path: String, index: usize },
}

#[derive(Default)]
struct Recorder {
    stack: Vec<Frame>,
    map: Index,
}

fn loc(m: Marker) -> Location {
    // The position parser counts lines from 1 and columns from 0.
    Location {
        line: m.line(),
        col: m.col() + 1,
    }
}

fn join(parent: &str, key: &str) -> String {
    if parent.is_empty() {
        key.to_string()
    } else {
        format!("{parent}.{key}")
    }
}

impl Recorder {
    /// The path of a value starting now, or None when the node is a mapping key.
    fn value_path(&mut self, scalar_key: Option<&str>, mark: Marker) -> Option<String> {
        match self.stack.last_mut() {
            None => Some(String::new()),
            Some(Frame::Seq { path, index }) => {
                let p = format!("{path}[{index}]");
                *index += 1;
                Some(p)
            }
            Some(Frame::Map { path, key }) => match key.take() {
                Some(k) => Some(join(path, &k)),
                None => {
                    let k = scalar_key.unwrap_or("?").to_string();
                    let at = loc(mark);
                    self.map.keys.insert(join(path, &k), at);
                    // A block mapping is marked at its first `:`; its first key is where it
                    // starts as a reader sees it.
                    if let Some(start) = self.map.values.get_mut(path.as_str()) {
                        if (at.line, at.col) < (start.line, start.col) {
                            *start = at;
                        }
                    }
                    *key = Some(k);
                    None
                }
            },
        }
    }
}

impl MarkedEventReceiver for Recorder {
    fn on_event(&mut self, ev: Event, mark: Marker) {
        match ev {
            Event::Scalar(text, ..) => {
                if let Some(p) = self.value_path(Some(&text), mark) {
                    self.map.values.insert(p, loc(mark));
                }
            }
            Event::Alias(_) => {
                if let Some(p) = self.value_path(Some("*"), mark) {
                    self.map.values.insert(p, loc(mark));
                }
            }
            Event::SequenceStart(..) | Event::MappingStart(..) => {
                // A container used as a mapping key gets a placeholder name.
                let path = self.value_path(None, mark).unwrap_or_else(|| "?".into());
                self.map.values.insert(path.clone(), loc(mark));
                self.stack.push(if matches!(ev, Event::SequenceStart(..)) {
                    Frame::Seq { path, index: 0 }
                } else {
                    Frame::Map { path, key: None }
                });
            }
            Event::SequenceEnd | Event::MappingEnd => {
                self.stack.pop();
            }
            _ => {}
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paths_of_nested_values() {
        let text = "design: x\nstages:\n  - id: a\n    input: battery\n  - id: b\n    efficiency: [[1 mA, 70 %]]\n";
        let m = SourceMap::build(text);
        assert_eq!(m.value("design"), Some(Location { line: 1, col: 9 }));
        assert_eq!(m.value("stages[1].id"), Some(Location { line: 5, col: 9 }));
        assert_eq!(m.key("stages[0].input"), Some(Location { line: 4, col: 5 }));
        assert_eq!(
            m.value("stages[1].efficiency[0][1]").map(|l| l.line),
            Some(6)
        );
        assert_eq!(m.nearest("stages[1].nothing.here").map(|l| l.line), Some(5));
        // A block mapping starts at its first key, a flow mapping at its brace.
        assert_eq!(m.value("stages[0]"), Some(Location { line: 3, col: 5 }));
        assert_eq!(m.value(""), Some(Location { line: 1, col: 1 }));
        let m = SourceMap::build(
            "a: { b: 1 }
",
        );
        assert_eq!(m.value("a"), Some(Location { line: 1, col: 4 }));
    }

    #[test]
    fn unreadable_text_keeps_the_places_before_its_error() {
        let m = SourceMap::build("a: [1, 2\n");
        assert_eq!(m.value("a"), Some(Location { line: 1, col: 4 }));
        assert_eq!(m.value("b"), None);
    }

    #[test]
    fn places_survive_a_tab_the_position_parser_refuses() {
        // The reader takes a tab after `key:`; the position parser stops there.
        let m = SourceMap::build("design:\tx\nb: 1\nc: [1, 2]\n");
        assert_eq!(m.value("b"), Some(Location { line: 2, col: 4 }));
        assert_eq!(m.value("c[1]"), Some(Location { line: 3, col: 8 }));
        assert_eq!(m.value("design"), Some(Location { line: 1, col: 9 }));
        // A long key does not stop it.
        let long = format!("{}: 1\nb: 1\n", "k".repeat(1024));
        assert_eq!(SourceMap::build(&long).value("b").map(|l| l.line), Some(2));
    }
}
