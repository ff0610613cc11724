//! Where each value of a design sits: YAML paths (`stages[2].input`) to line and column, taken
//! from the places the reader gave every node of the tree. serde gives no places; this index lets
//! every later check (the checker's messages) name its place too.

use super::node::{Kind, Mark, Node};
use super::yaml::key_text;
use crate::error::Location;

/// Line and column of every value (and every mapping key) in a document, by YAML path.
#[derive(Debug, Default, Clone)]
pub struct SourceMap {
    /// The tree's skeleton, breadth first: the children of a node are next to each other.
    places: Vec<Place>,
    /// The mapping keys, one after another (each [`Place::key`] is a range of it).
    keys: String,
    overridden: Vec<String>,
}

#[derive(Debug, Clone, Copy)]
struct Place {
    at: Mark,
    /// Where its key is written, for an entry of a mapping.
    key_at: Mark,
    /// Its key in [`SourceMap::keys`], for an entry of a mapping.
    key: (u32, u32),
    /// Its children in [`SourceMap::places`]: first and count.
    children: (u32, u32),
    /// A list, whose children are found by index (else a mapping or a scalar).
    list: bool,
}

impl SourceMap {
    /// The places of the tree `root`.
    pub(crate) fn of(root: &Node<'_>) -> Self {
        let mut map = Self::default();
        let place = |at, key_at, key| Place {
            at,
            key_at,
            key,
            children: (0, 0),
            list: false,
        };
        map.places.push(place(root.at, Mark::NONE, (0, 0)));
        // Breadth first: the nodes whose children are still to be laid out, in order.
        let mut queue = std::collections::VecDeque::from([root]);
        let mut i = 0;
        while let Some(node) = queue.pop_front() {
            let first = u32::try_from(map.places.len()).unwrap_or(u32::MAX);
            match &node.kind {
                Kind::Seq(items) => {
                    map.places[i].list = true;
                    for x in items {
                        map.places.push(place(x.at, Mark::NONE, (0, 0)));
                        queue.push_back(x);
                    }
                }
                Kind::Map(entries) => {
                    for (k, v) in entries {
                        let start = map.keys.len();
                        match &k.kind {
                            Kind::Str(s) => map.keys.push_str(s),
                            _ => map.keys.push_str(&key_text(k)),
                        }
                        let range = (
                            u32::try_from(start).unwrap_or(u32::MAX),
                            u32::try_from(map.keys.len() - start).unwrap_or(0),
                        );
                        map.places.push(place(v.at, k.at, range));
                        queue.push_back(v);
                    }
                }
                _ => {}
            }
            let last = u32::try_from(map.places.len()).unwrap_or(u32::MAX);
            map.places[i].children = (first, last - first);
            i += 1;
        }
        map
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

    fn key_of(&self, p: &Place) -> &str {
        let (start, len) = (p.key.0 as usize, p.key.1 as usize);
        self.keys.get(start..start + len).unwrap_or("")
    }

    /// The place of the node at `path` (`""` for the document).
    fn find(&self, path: &str) -> Option<&Place> {
        let mut p = self.places.first()?;
        let mut rest = path;
        let mut top = true;
        while !rest.is_empty() {
            let (first, count) = (p.children.0 as usize, p.children.1 as usize);
            let children = self.places.get(first..first + count)?;
            if let Some(r) = rest.strip_prefix('[') {
                let (index, after) = r.split_once(']')?;
                if !p.list {
                    return None;
                }
                p = children.get(index.parse::<usize>().ok()?)?;
                rest = after;
                top = false;
                continue;
            }
            if p.list {
                return None;
            }
            // A key, after the `.` that follows a parent's key or index.
            let r = if top { rest } else { rest.strip_prefix('.')? };
            // The longest key that fits: `a.b` before `a` (keys may hold dots).
            let (child, after) = children
                .iter()
                .filter_map(|c| {
                    let after = r.strip_prefix(self.key_of(c))?;
                    (after.is_empty() || after.starts_with(['.', '['])).then_some((c, after))
                })
                .min_by_key(|(_, after)| after.len())?;
            p = child;
            rest = after;
            top = false;
        }
        Some(p)
    }

    /// Where the value at `path` starts.
    pub fn value(&self, path: &str) -> Option<Location> {
        self.find(path).and_then(|p| p.at.location())
    }

    /// Where the key of the mapping entry at `path` is written (its value's place if unknown).
    pub fn key(&self, path: &str) -> Option<Location> {
        self.find(path)
            .and_then(|p| p.key_at.location().or(p.at.location()))
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
        SourceMap::of(&read(text).unwrap())
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
