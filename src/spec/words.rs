//! The deserializer's errors in plain words, built from their pieces ([`NodeError`]): nothing
//! found where serde expected `struct CellSpec` becomes "`cell` is empty: it needs a cell name
//! or a cell mapping", with a fix, at the key that holds the wrong value. Every unknown key of a mapping is reported (the
//! deserializer stops at the first), and a text that holds several documents is told where the
//! second starts.

use super::node::{Kind, Node, NodeError};
use super::node_error::Problem;
use super::{Reader, backticked, value_path};
use crate::error::{Diagnostic, did_you_mean};

/// A shape problem in words: where (below the item the deserializer read), what, and the fix.
pub(super) struct Worded {
    /// The path below the item, such as `.rail` (empty for the item itself).
    pub below: String,
    pub message: String,
    pub hint: String,
}

/// A value of the wrong shape at `path` in plain words: `found` (in the words of
/// [`Node::describe`]) where the reader expected `expected` (serde's noun phrase, such as
/// `struct StageSpec`, or a reader's own); the place is the first value below `v` that `found`
/// describes.
pub(super) fn reword(path: &str, found: &str, expected: &str, v: &Node<'_>) -> Worded {
    let below = locate(v, found).unwrap_or_default();
    let full = format!("{path}{below}");
    let key = last_key(&full);
    let (noun, hint) = expected_words(expected, key);
    let message = if found == "nothing" {
        format!("`{key}` is empty: it needs {noun}")
    } else {
        format!("`{key}` must be {noun}, not {found}")
    };
    Worded {
        below,
        message,
        hint,
    }
}

/// The last key of a path (`battery.cell` -> `cell`, `stages[2]` -> `stages[2]`).
fn last_key(path: &str) -> &str {
    let key = path.rsplit('.').next().unwrap_or(path);
    if key.is_empty() { "the file" } else { key }
}

/// What is expected, as a noun and a fix.
fn expected_words(e: &str, key: &str) -> (String, String) {
    let pair = |n: &str, h: &str| (n.to_string(), h.to_string());
    match e.trim() {
        "struct StageSpec" => pair(
            "a stage (a mapping of its keys)",
            "write the stage as `{ id: buck-3v3, kind: buck, input: battery, output: 3.3 V, efficiency: 90 % }`",
        ),
        "struct LoadSpec" => pair(
            "a load (a mapping of its keys)",
            "write the load as `{ id: mcu, rail: battery, draw: { run: 6 mA } }`",
        ),
        "struct StepSpec" => pair(
            "a profile step",
            "write the step as `{ mode: NAME, for: 1 h }` or `{ repeat: [...], times: N }`",
        ),
        "struct BatterySpec" => pair("the pack's mapping", "write `battery: { cell: NAME }`"),
        "struct CellSpec" => pair(
            "a cell mapping",
            "give the cell's keys (`capacity`, `ocv`, `resistance`, `cutoff`) or `preset: NAME`",
        ),
        "struct PolarizationSpec" => pair(
            "a polarization branch",
            "write `{ resistance: 60 mΩ, time_constant: 20 s }`",
        ),
        "struct AgingSpec" => pair(
            "aging factors",
            "write `{ capacity: 90 %, resistance: 130 % }`",
        ),
        "struct BufferSpec" => pair(
            "a buffer capacitor",
            "write `{ capacitance: 470 µF, esr: 0.2 Ω, leakage: 1 µA, current_limit: 2 mA }`",
        ),
        "struct TemperatureRowSpec" => pair(
            "a temperature row",
            "write `{ at: -20 °C, capacity: 55 %, resistance: 300 % }`",
        ),
        "struct VinCurveSpec" => pair(
            "an efficiency curve at an input voltage",
            "write `{ vin: 3 V, curve: [[1 mA, 75 %], [100 mA, 90 %]] }`",
        ),
        "struct LossSpec" => pair("loss terms", "write `{ drop: 0.05 V, resistance: 0.25 Ω }`"),
        "a string" if key == "design" => pair("a title", "write a one-line title"),
        "a string" => pair("a name", "write a name, such as `mcu` or `battery`"),
        "a sequence" => pair(
            "a list",
            "write the items in brackets, `[a, b]`, or on lines starting with `- `",
        ),
        "a map" => pair(
            "a mapping",
            "write the entries as `{ key: value }` or on indented `key: value` lines",
        ),
        "a value with its unit such as `120 mA`" => pair(
            "a value with its unit",
            "write a number and its unit, such as `120 mA`",
        ),
        e if e.contains("cell name") => pair(
            "a cell name or a cell mapping",
            "give a preset name (`joulepath cells` lists them), a key of `cells`, or a cell mapping",
        ),
        e if e.contains("enum") || e.contains("tag") => match key {
            "kind" => pair(
                "a stage kind",
                "write one of `buck`, `boost`, `buck-boost`, `linear` or `switch`",
            ),
            "chemistry" => pair(
                "a chemistry",
                "write one of `li-ion`, `lifepo4`, `nimh`, `alkaline`, `li-mno2`, `li-socl2`, `lead-acid` or `other`",
            ),
            _ => pair("a name", "write one of the names allowed here"),
        },
        other => (other.to_string(), format!("write {other} here")),
    }
}

/// The path below `v` of the first value the words `found` describe (none for lists and
/// mappings, which the words do not tell apart).
fn locate(v: &Node<'_>, found: &str) -> Option<String> {
    if matches!(found, "a list" | "a mapping") {
        return None;
    }
    path_to(v, &|n| n.describe() == found)
}

/// The path from `v` to the first node (itself, then its children in order, depth first) that
/// `hit` accepts: `""` for `v` itself, else `.key` and `[i]` parts.
fn path_to(v: &Node<'_>, hit: &dyn Fn(&Node<'_>) -> bool) -> Option<String> {
    if hit(v) {
        return Some(String::new());
    }
    match &v.kind {
        Kind::Map(m) => m.iter().find_map(|(k, x)| {
            let key = k.as_str()?;
            path_to(x, hit).map(|p| format!(".{key}{p}"))
        }),
        Kind::Seq(items) => items
            .iter()
            .enumerate()
            .find_map(|(i, x)| path_to(x, hit).map(|p| format!("[{i}]{p}"))),
        _ => None,
    }
}

impl Reader<'_> {
    /// When `err` is an unknown key of a mapping inside `v`, report every unknown key of that
    /// mapping and return `v` without them.
    pub(super) fn unknown_keys<'n>(
        &mut self,
        path: &str,
        err: &NodeError,
        v: &Node<'n>,
    ) -> Option<Node<'n>> {
        let Problem::UnknownKey { name, known } = &err.problem else {
            return None;
        };
        let expected: &[&str] = known;
        let below = map_with_key(v, name)?;
        let map_path = format!("{path}{below}");
        let mut unknown = Vec::new();
        if let Some(Kind::Map(m)) = node_at(v, &below).map(|n| &n.kind) {
            for (k, _) in m {
                if let Some(k) = k.as_str() {
                    if !expected.contains(&k) {
                        unknown.push(k.to_string());
                    }
                }
            }
        }
        for k in &unknown {
            let key_path = if map_path.is_empty() {
                k.clone()
            } else {
                format!("{map_path}.{k}")
            };
            let hint = match did_you_mean(k, expected.iter().copied()) {
                Some(s) => {
                    self.misspelt.push((map_path.clone(), s.to_string()));
                    format!("did you mean `{s}`?")
                }
                None => format!("the keys allowed here are {}", backticked(expected)),
            };
            let location = self
                .source
                .key(&key_path)
                .or(self.source.nearest(&map_path));
            self.diags.push(
                Diagnostic::of(
                    crate::error::DiagnosticKind::UnknownKey,
                    key_path,
                    format!("unknown key `{k}`"),
                )
                .with_hint(hint)
                .at(location),
            );
        }
        Some(without_keys(v, &below, &unknown))
    }

    /// A deserializer's error about the value `v` at `path` as a diagnostic in plain words with
    /// a fix (a nested reader's name before it is left out, except for a problem said in
    /// serde's words).
    pub(super) fn serde_error(&mut self, path: &str, err: &NodeError, v: &Node<'_>) {
        match &err.problem {
            Problem::UnknownKey { name, known } => {
                let key_path = if path.is_empty() {
                    name.clone()
                } else {
                    format!("{path}.{name}")
                };
                let hint = match did_you_mean(name, known.iter().copied()) {
                    Some(s) => format!("did you mean `{s}`?"),
                    None => format!("the keys allowed here are {}", backticked(known)),
                };
                let location = self.source.key(&key_path).or(self.source.nearest(path));
                self.diags.push(
                    Diagnostic::of(
                        crate::error::DiagnosticKind::UnknownKey,
                        key_path,
                        format!("unknown key `{name}`"),
                    )
                    .with_hint(hint)
                    .at(location),
                );
            }
            Problem::MissingKey { name } => {
                self.push(
                    path,
                    format!("`{name}` is missing"),
                    Some(format!("add `{name}:` here")),
                );
            }
            Problem::UnknownName { name, known } => {
                let hint = match did_you_mean(name, known.iter().copied()) {
                    Some(s) => format!("did you mean `{s}`?"),
                    None => format!("use one of {}", backticked(known)),
                };
                // Name the key holding the value (`stages[0].kind`), not only the item.
                let at =
                    value_path(v, name).map_or_else(|| path.to_string(), |p| format!("{path}{p}"));
                self.push(&at, format!("unknown value `{name}`"), Some(hint));
            }
            Problem::Mismatch {
                found, expected, ..
            } => {
                let w = reword(path, &found.words(), expected, v);
                self.push(&format!("{path}{}", w.below), w.message, Some(w.hint));
            }
            Problem::Length { .. } | Problem::DuplicateKey { .. } | Problem::Other(_) => self.push(
                path,
                err.to_string(),
                Some("see examples/ for the shape of each part of a design".into()),
            ),
        }
    }
}

/// The path below `v` of the first mapping that has the key `key`.
pub(super) fn map_with_key(v: &Node<'_>, key: &str) -> Option<String> {
    path_to(
        v,
        &|n| matches!(&n.kind, Kind::Map(m) if m.iter().any(|(k, _)| k.as_str() == Some(key))),
    )
}

/// The steps of a path below a node: `.key` and `[i]`.
fn steps(below: &str) -> Vec<&str> {
    below
        .split_inclusive(['.', '['])
        .map(|s| s.trim_end_matches(['.', '[']).trim_end_matches(']'))
        .filter(|s| !s.is_empty())
        .collect()
}

/// One step down from `v`: a key of a mapping or an index of a list.
fn child<'v, 'n>(v: &'v Node<'n>, step: &str) -> Option<&'v Node<'n>> {
    match &v.kind {
        Kind::Map(_) => v.get(step),
        Kind::Seq(items) => items.get(step.parse::<usize>().ok()?),
        _ => None,
    }
}

/// The node at the path `below` of `v`.
pub(super) fn node_at<'v, 'n>(v: &'v Node<'n>, below: &str) -> Option<&'v Node<'n>> {
    steps(below).into_iter().try_fold(v, child)
}

/// A copy of `v` whose mapping at `below` lacks the keys `keys`.
pub(super) fn without_keys<'n>(v: &Node<'n>, below: &str, keys: &[String]) -> Node<'n> {
    fn go<'n>(v: &Node<'n>, steps: &[&str], keys: &[String]) -> Node<'n> {
        let kind = match (&v.kind, steps.split_first()) {
            (Kind::Map(m), None) => Kind::Map(
                m.iter()
                    .filter(|(k, _)| !k.as_str().is_some_and(|k| keys.iter().any(|x| x == k)))
                    .cloned()
                    .collect(),
            ),
            (Kind::Map(m), Some((step, rest))) => Kind::Map(
                m.iter()
                    .map(|(k, x)| {
                        if k.as_str() == Some(step) {
                            (k.clone(), go(x, rest, keys))
                        } else {
                            (k.clone(), x.clone())
                        }
                    })
                    .collect(),
            ),
            (Kind::Seq(items), Some((step, rest))) => Kind::Seq(
                items
                    .iter()
                    .enumerate()
                    .map(|(i, x)| {
                        if step.parse::<usize>().ok() == Some(i) {
                            go(x, rest, keys)
                        } else {
                            x.clone()
                        }
                    })
                    .collect(),
            ),
            _ => return v.clone(),
        };
        Node::new(kind, v.at)
    }
    go(v, &steps(below), keys)
}

/// Where a text the full parser reads as several documents starts its second: a `---` or
/// `...` line, or else the first line indented less than the first line of the file.
pub(super) fn second_document(text: &str) -> Diagnostic {
    let content = |l: &&str| {
        let t = l.trim_start_matches(' ');
        !t.is_empty() && !t.starts_with('#')
    };
    let lines: Vec<&str> = text.split('\n').map(|l| l.trim_end_matches('\r')).collect();
    let first = lines.iter().position(&content);
    let indent = |l: &str| l.len() - l.trim_start_matches(' ').len();
    let marker = lines
        .iter()
        .enumerate()
        .skip(first.map_or(0, |f| f + 1))
        .find(|(_, l)| l.starts_with("---") || l.starts_with("..."));
    if let Some((n, l)) = marker {
        return Diagnostic::of(
            crate::error::DiagnosticKind::Syntax,
            "",
            format!(
                "the file holds more than one YAML document: line {} starts another with `{}`",
                n + 1,
                &l[..3]
            ),
        )
        .with_hint("a design is one document: remove that line, or split the file in two")
        .at_line_col(n + 1, 1);
    }
    let Some(f) = first else {
        return Diagnostic::of(
            crate::error::DiagnosticKind::Syntax,
            "",
            "the file holds more than one YAML document",
        )
        .with_hint("a design is one document: keep one");
    };
    let i0 = indent(lines[f]);
    match lines.iter().enumerate().skip(f + 1).find(|(_, l)| content(l) && indent(l) < i0) {
        Some((n, l)) => Diagnostic::of(
        crate::error::DiagnosticKind::Syntax,
            "",
            format!(
                "line {} is indented less than the first line (line {}, indented {i0} spaces), so the file reads as two documents",
                n + 1,
                f + 1
            ),
        )
        .with_hint("start the top-level keys at the first column, each alike")
        .at_line_col(n + 1, indent(l) + 1),
        None => Diagnostic::of(crate::error::DiagnosticKind::Syntax, "", "the file holds more than one YAML document")
            .with_hint("a design is one document: keep one")
            .at_line_col(f + 1, 1),
    }
}

#[cfg(test)]
mod tests {
    use crate::spec::parse;

    /// The messages of a broken file, joined.
    fn messages(text: &str) -> String {
        let ds = parse(text).expect_err(text);
        ds.iter()
            .map(|d| format!("{}: {} ({})", d.path(), d.message(), d.hint().unwrap_or("")))
            .collect::<Vec<_>>()
            .join("\n")
    }

    #[test]
    fn a_mapping_of_two_keys_knows_both() {
        // Serde writes two allowed names as "`a` or `b`"; the keys come from the error's data,
        // so both are known (the words once read them as one name, and called the good keys
        // unknown).
        let m = messages("battery: { cell: c, aging: { capacity: 90 %, foo: 1 } }\n");
        assert!(m.contains("battery.aging.foo: unknown key `foo`"), "{m}");
        assert!(!m.contains("unknown key `capacity`"), "{m}");
        let m = messages(
            "battery: { cell: c }\nstages: [{ id: b, kind: boost, input: battery, output: 3.3 V, efficiency: 85 %, quiescent_from: outptu }]\n",
        );
        assert!(
            m.contains("unknown value `outptu` (did you mean `output`?)"),
            "{m}"
        );
    }

    #[test]
    fn shapes_are_said_in_plain_words() {
        for (text, want) in [
            (
                "battery: { cell: }\n",
                "battery.cell: `cell` is empty: it needs a cell name or a cell mapping (give a preset name",
            ),
            (
                "battery: { cell: c }\nloads: [{ id: a, rail: , draw: { on: 1 mA } }]\n",
                "loads[0].rail: `rail` is empty: it needs a name",
            ),
            (
                "battery: { cell: c }\nstages: [abc]\n",
                "stages[0]: `stages[0]` must be a stage (a mapping of its keys), not the text `abc`",
            ),
            (
                "battery: { cell: c, aging: 5 }\n",
                "battery.aging: `aging` must be aging factors, not the number `5`",
            ),
            (
                "battery: { cell: c }\nprofile: [5]\n",
                "profile[0]: `profile[0]` must be a profile step, not the number `5`",
            ),
            (
                "battery: { cell: c }\nstages: [{ id: s, kind: 5, input: battery }]\n",
                "stages[0].kind: `kind` must be a stage kind, not the number `5` (write one of `buck`",
            ),
        ] {
            let m = messages(text);
            assert!(m.contains(want), "{text}\n{m}");
            for jargon in ["invalid type", "unit value", "struct", "Spec", "sequence"] {
                assert!(!m.contains(jargon), "{text}\n{m}");
            }
        }
    }
}
