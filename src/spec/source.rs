//! Where each value of a design sits: YAML paths (`stages[2].input`) to line and column, read
//! from the places the reader gave every node of the tree. serde gives no places; this index lets
//! every later check (the checker's messages) name its place too.

use std::borrow::Cow;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use super::node::{Kind, Mark, Node};
use super::yaml::key_text;
use crate::capture::{Capture, read_capture_file};
use crate::error::{Diagnostic, Location};
use crate::hash::FastMap;
use crate::model::{Recorded, read_ambient_file};

/// Line and column of every value (and every mapping key) in a document, by YAML path: the
/// document's tree itself, kept after the serde types were read from it (a place is looked up
/// only for a message, by walking down the path).
#[derive(Debug, Clone)]
pub struct SourceMap {
    root: Node<'static>,
    overridden: Vec<String>,
    /// The directory files named in the design (captures, a recorded ambient) are read from; none for text that
    /// did not come from a file.
    base_dir: Option<PathBuf>,
    /// Captures read so far, by path, shared by clones (the pack candidates of `size` read each
    /// file once).
    captures: Arc<Mutex<CaptureCache>>,
    /// Recorded ambients read so far, by path and whether they repeat, shared by clones.
    ambients: Arc<Mutex<AmbientCache>>,
}

type CaptureCache = FastMap<PathBuf, Result<Arc<Capture>, Diagnostic>>;
type AmbientCache = FastMap<(PathBuf, bool), Result<(f64, Arc<Recorded>), Vec<Diagnostic>>>;

impl Default for SourceMap {
    /// No places at all.
    fn default() -> Self {
        Self::of(Node::detached(Kind::Null))
    }
}

impl SourceMap {
    /// The places of the tree `root`.
    pub(crate) fn of(root: Node<'static>) -> Self {
        Self {
            root,
            overridden: Vec::new(),
            base_dir: None,
            captures: Arc::default(),
            ambients: Arc::default(),
        }
    }

    /// Read files the design names (captures, a recorded ambient) relative to `dir`: the design file's directory.
    pub fn set_base_dir(&mut self, dir: impl Into<PathBuf>) {
        self.base_dir = Some(dir.into());
    }

    /// The directory files named in the design are read from, if the text came from a file.
    pub fn base_dir(&self) -> Option<&Path> {
        self.base_dir.as_deref()
    }

    /// The capture `file` (relative to the base directory), read once and kept.
    ///
    /// # Errors
    ///
    /// No base directory (the text did not come from a file), or the reader's error.
    pub fn capture(&self, file: &str) -> Result<Arc<Capture>, Diagnostic> {
        let Some(dir) = &self.base_dir else {
            return Err(Diagnostic::new(
                file,
                format!("the capture `{file}` cannot be read: the design was not read from a file"),
            )
            .with_hint("read the design from its file (the command line does), or give its directory (`Design::from_text_in`)"));
        };
        let path = dir.join(file);
        let mut cache = self
            .captures
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        cache
            .entry(path.clone())
            .or_insert_with(|| read_capture_file(&path, false).map(Arc::new))
            .clone()
    }

    /// The recorded ambient `file` (relative to the base directory): its mean and the series
    /// around it, read once and kept.
    ///
    /// # Errors
    ///
    /// No base directory (the text did not come from a file), or the reader's errors.
    pub fn ambient(
        &self,
        file: &str,
        repeat: bool,
    ) -> Result<(f64, Arc<Recorded>), Vec<Diagnostic>> {
        let Some(dir) = &self.base_dir else {
            return Err(vec![Diagnostic::new(
                file,
                "cannot be read: the design was not read from a file",
            )
            .with_hint("read the design from its file (the command line does), or give its directory (`Design::from_text_in`)")]);
        };
        let path = dir.join(file);
        let mut cache = self
            .ambients
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        cache
            .entry((path.clone(), repeat))
            .or_insert_with(|| read_ambient_file(&path, repeat).map(|(m, r)| (m, Arc::new(r))))
            .clone()
    }

    /// The document's tree.
    pub(crate) fn tree(&self) -> &Node<'static> {
        &self.root
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

    /// The node at `path` (`""` for the document) and where its key is written.
    fn find(&self, path: &str) -> Option<(&Node<'static>, Mark)> {
        let mut node = &self.root;
        let mut key_at = Mark::NONE;
        let mut rest = path;
        let mut top = true;
        while !rest.is_empty() {
            if let Some(r) = rest.strip_prefix('[') {
                let (index, after) = r.split_once(']')?;
                let Kind::Seq(items) = &node.kind else {
                    return None;
                };
                node = items.get(index.parse::<usize>().ok()?)?;
                key_at = Mark::NONE;
                rest = after;
                top = false;
                continue;
            }
            let Kind::Map(entries) = &node.kind else {
                return None;
            };
            // A key, after the `.` that follows a parent's key or index.
            let r = if top { rest } else { rest.strip_prefix('.')? };
            // The longest key that fits: `a.b` before `a` (keys may hold dots).
            let (k, v, after) = entries
                .iter()
                .filter_map(|(k, v)| {
                    let name = match &k.kind {
                        Kind::Str(s) => Cow::Borrowed(s.as_ref()),
                        _ => Cow::Owned(key_text(k)),
                    };
                    let after = r.strip_prefix(name.as_ref())?;
                    (after.is_empty() || after.starts_with(['.', '['])).then_some((k, v, after))
                })
                .min_by_key(|(_, _, after)| after.len())?;
            node = v;
            key_at = k.at;
            rest = after;
            top = false;
        }
        Some((node, key_at))
    }

    /// Where the value at `path` starts.
    pub fn value(&self, path: &str) -> Option<Location> {
        self.find(path).and_then(|(n, _)| n.at.location())
    }

    /// Where the key of the mapping entry at `path` is written (its value's place if unknown).
    pub fn key(&self, path: &str) -> Option<Location> {
        self.find(path)
            .and_then(|(n, key_at)| key_at.location().or(n.at.location()))
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spec::yaml::read;

    fn map(text: &str) -> SourceMap {
        SourceMap::of(read(text).unwrap())
    }

    #[test]
    fn paths_of_nested_values() {
        let text = "design: x\nstages:\n  - id: a\n    input: battery\n  - id: b\n    efficiency: [[1 mA, 70 %]]\n";
        let m = map(text);
        assert_eq!(m.value("design"), Some(Location { line: 1, col: 9 }));
        assert_eq!(m.value("stages[1].id"), Some(Location { line: 5, col: 9 }));
        assert_eq!(m.key("stages[0].input"), Some(Location { line: 4, col: 5 }));
        assert_eq!(
            m.value("stages[1].efficiency[0][1]"),
            Some(Location { line: 6, col: 25 })
        );
        assert_eq!(m.nearest("stages[1].nothing.here").map(|l| l.line), Some(5));
        // A block mapping starts at its first key, a flow mapping at its brace.
        assert_eq!(m.value("stages[0]"), Some(Location { line: 3, col: 5 }));
        assert_eq!(m.value(""), Some(Location { line: 1, col: 1 }));
        assert_eq!(
            map("a: { b: 1 }\n").value("a"),
            Some(Location { line: 1, col: 4 })
        );
        // Paths that do not exist.
        for p in [
            "stages[2]",
            "stages.id",
            "design[0]",
            "stages[x]",
            "nothing",
        ] {
            assert_eq!(m.value(p), None, "{p}");
        }
    }

    #[test]
    fn keys_with_dots_and_keys_that_are_prefixes() {
        let m = map("a: 1\na.b: 2\nab: 3\n");
        assert_eq!(m.value("a.b").map(|l| l.line), Some(2));
        assert_eq!(m.value("ab").map(|l| l.line), Some(3));
        assert_eq!(m.value("a").map(|l| l.line), Some(1));
    }

    #[test]
    fn places_survive_a_tab_after_a_key() {
        let m = map("design:\tx\nb: 1\nc: [1, 2]\n");
        assert_eq!(m.value("b"), Some(Location { line: 2, col: 4 }));
        assert_eq!(m.value("c[1]"), Some(Location { line: 3, col: 8 }));
        assert_eq!(m.value("design"), Some(Location { line: 1, col: 9 }));
        // Columns count characters, not bytes.
        let m = map("a: µA\nb: [°C, x]\n");
        assert_eq!(m.value("b[1]"), Some(Location { line: 2, col: 9 }));
    }

    #[test]
    fn overridden_values_have_no_place() {
        let mut m = map("battery: { cell: c }\n");
        m.set_overridden(vec!["battery.cell".into()]);
        assert_eq!(m.nearest("battery.cell"), None);
        assert_eq!(m.nearest("battery.cell.x"), None);
        assert!(m.nearest("battery").is_some());
    }
}
