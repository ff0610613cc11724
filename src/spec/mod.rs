//! The design file as written: serde types mirroring the YAML, read section by section so that
//! every structural problem of a file is reported at once, each with its YAML path and place.
//! This is the only module that uses the YAML parser.

mod depth;
mod design;
mod fastyaml;
mod locate;
mod node;
mod overrides;
mod qty;
mod words;

use indexmap::IndexMap;
use serde::de::DeserializeOwned;
use serde_yaml::Value;

use node::Node;

pub use design::{
    AgingSpec, BatterySpec, CellRef, CellSpec, ChemistrySpec, DesignSpec, LoadSpec, LossSpec,
    PolarizationSpec, StageKindSpec, StageSpec, StepSpec, TemperatureRowSpec,
};
pub use locate::SourceMap;
pub use overrides::Override;
pub use qty::{Efficiency, Qty, ResistanceSpec, VinCurveSpec};

use crate::error::{Diagnostic, Location, did_you_mean};

const TOP_KEYS: [&str; 8] = [
    "design", "ambient", "cells", "battery", "stages", "loads", "modes", "profile",
];

/// A parsed design file and the places of its values.
#[derive(Debug, Clone)]
pub struct Parsed {
    /// The file's content as serde types.
    pub spec: DesignSpec,
    /// Line and column of every value, by YAML path.
    pub source: SourceMap,
}

/// Read a design file's text into its serde mirror.
///
/// # Errors
///
/// Every structural problem found (YAML syntax, unknown keys, wrong shapes, missing keys), each
/// with its YAML path and, where known, line and column.
///
/// # Examples
///
/// ```
/// let text = "battery: { cell: c }\nloads: [{ id: l, rail: battery, draw: { on: 1 mA } }]\n";
/// let parsed = joulepath::spec::parse(text).unwrap();
/// assert_eq!(parsed.spec.loads[0].id, "l");
/// ```
pub fn parse(text: &str) -> Result<Parsed, Vec<Diagnostic>> {
    parse_with(text, &[])
}

/// Read a design file's text with `--set` overrides applied first.
///
/// # Errors
///
/// As [`parse`], plus every override whose path does not exist.
///
/// # Examples
///
/// ```
/// use joulepath::spec::{Override, parse_with};
/// let text = "battery: { cell: c, parallel: 1 }\n";
/// let p = parse_with(text, &[Override::parse("battery.parallel=3").unwrap()]).unwrap();
/// assert_eq!(p.spec.battery.parallel.unwrap().text(), "3");
/// ```
pub fn parse_with(text: &str, overrides: &[Override]) -> Result<Parsed, Vec<Diagnostic>> {
    // A byte-order mark is no part of the text (an editor's "UTF-8 with BOM").
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    // Bounded before any reader recurses into it.
    if let Some(d) = depth::check(text) {
        return Err(vec![d]);
    }
    // The fast reader where the file allows and nothing is overridden; else the full parser.
    let fast = if overrides.is_empty() {
        fastyaml::parse(text)
    } else {
        None
    };
    if let Some(root) = fast {
        return read(text, root, Vec::new());
    }
    let mut root: Value = match serde_yaml::from_str(text) {
        Ok(v) => v,
        Err(e) => {
            let location = e.location().map(|l| Location {
                line: l.line(),
                col: l.column(),
            });
            let msg = e.to_string();
            if msg.contains("more than one document") {
                return Err(vec![second_document(text)]);
            }
            // serde_yaml appends " at line L column C"; the place is shown separately.
            let msg = msg.split(" at line ").next().unwrap_or(&msg).to_string();
            return Err(vec![
                Diagnostic::new("", format!("the file is not valid YAML: {msg}"))
                    .with_hint("check the indentation and the brackets near that place")
                    .at(location),
            ]);
        }
    };
    let mut replaced = Vec::new();
    let mut errors = Vec::new();
    for o in overrides {
        match overrides::apply(&mut root, o) {
            Ok(path) => replaced.push(path),
            Err(d) => errors.push(d),
        }
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    read(text, Node::from(root), replaced)
}

/// Where a text the full parser reads as several documents starts its second: a `---` or
/// `...` line, or else the first line indented less than the first line of the file.
fn second_document(text: &str) -> Diagnostic {
    let content = |l: &&str| {
        let t = l.trim_start_matches(' ');
        !t.is_empty() && !t.starts_with('#')
    };
    let lines: Vec<&str> = text.split('\n').map(|l| l.trim_end_matches('\r')).collect();
    let first = lines.iter().position(|l| content(l));
    let indent = |l: &str| l.len() - l.trim_start_matches(' ').len();
    let marker = lines
        .iter()
        .enumerate()
        .skip(first.map_or(0, |f| f + 1))
        .find(|(_, l)| l.starts_with("---") || l.starts_with("..."));
    if let Some((n, l)) = marker {
        return Diagnostic::new(
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
        return Diagnostic::new("", "the file holds more than one YAML document")
            .with_hint("a design is one document: keep one");
    };
    let i0 = indent(lines[f]);
    match lines.iter().enumerate().skip(f + 1).find(|(_, l)| content(l) && indent(l) < i0) {
        Some((n, l)) => Diagnostic::new(
            "",
            format!(
                "line {} is indented less than the first line (line {}, indented {i0} spaces), so the file reads as two documents",
                n + 1,
                f + 1
            ),
        )
        .with_hint("start the top-level keys at the first column, each alike")
        .at_line_col(n + 1, indent(l) + 1),
        None => Diagnostic::new("", "the file holds more than one YAML document")
            .with_hint("a design is one document: keep one")
            .at_line_col(f + 1, 1),
    }
}

/// The serde types from the document tree; `replaced` are the paths `--set` gave.
fn read(text: &str, root: Node<'_>, replaced: Vec<String>) -> Result<Parsed, Vec<Diagnostic>> {
    let mut source = SourceMap::build(text);
    source.set_overridden(replaced);
    let mut r = Reader {
        source: &source,
        diags: Vec::new(),
    };
    let spec = r.read_design(root);
    match spec {
        Some(spec) if r.diags.is_empty() => Ok(Parsed { spec, source }),
        _ => Err(r.diags),
    }
}

struct Reader<'a> {
    source: &'a SourceMap,
    diags: Vec<Diagnostic>,
}

impl Reader<'_> {
    fn push(&mut self, path: &str, message: String, hint: Option<String>) {
        let location = self.source.nearest(path);
        self.diags.push(
            Diagnostic::new(path, message)
                .with_hint_opt(hint)
                .at(location),
        );
    }

    /// Deserialize one part, turning a serde error into a diagnostic at `path` (written only
    /// then: a list of ten thousand items reads without formatting ten thousand paths).
    fn part<T: DeserializeOwned>(
        &mut self,
        path: impl std::fmt::Display,
        v: &Node<'_>,
    ) -> Option<T> {
        match T::deserialize(v) {
            Ok(t) => Some(t),
            Err(e) => {
                self.serde_error(&path.to_string(), &e.to_string(), v);
                None
            }
        }
    }

    fn serde_error(&mut self, path: &str, msg: &str, v: &Node<'_>) {
        if let Some(rest) = msg.strip_prefix("unknown field `") {
            let name = rest.split('`').next().unwrap_or("");
            let expected: Vec<&str> = rest
                .split("expected one of ")
                .nth(1)
                .or_else(|| rest.split("expected ").nth(1))
                .map(|s| s.split(", ").map(|w| w.trim_matches('`')).collect())
                .unwrap_or_default();
            let key_path = if path.is_empty() {
                name.to_string()
            } else {
                format!("{path}.{name}")
            };
            let hint = match did_you_mean(name, expected.iter().copied()) {
                Some(s) => format!("did you mean `{s}`?"),
                None => format!("the keys allowed here are {}", backticked(&expected)),
            };
            let location = self.source.key(&key_path).or(self.source.nearest(path));
            self.diags.push(
                Diagnostic::new(key_path, format!("unknown key `{name}`"))
                    .with_hint(hint)
                    .at(location),
            );
            return;
        }
        if let Some(rest) = msg.strip_prefix("missing field `") {
            let name = rest.split('`').next().unwrap_or("");
            self.push(
                path,
                format!("`{name}` is missing"),
                Some(format!("add `{name}:` here")),
            );
            return;
        }
        if let Some(rest) = msg.strip_prefix("unknown variant `") {
            let name = rest.split('`').next().unwrap_or("");
            let expected: Vec<&str> = rest
                .split("expected one of ")
                .nth(1)
                .or_else(|| rest.split("expected ").nth(1))
                .map(|s| s.split(", ").map(|w| w.trim_matches('`')).collect())
                .unwrap_or_default();
            let hint = match did_you_mean(name, expected.iter().copied()) {
                Some(s) => format!("did you mean `{s}`?"),
                None => format!("use one of {}", backticked(&expected)),
            };
            // Name the key holding the value (`stages[0].kind`), not only the item.
            let at = value_path(v, name).map_or_else(|| path.to_string(), |p| format!("{path}{p}"));
            self.push(&at, format!("unknown value `{name}`"), Some(hint));
            return;
        }
        // A nested reader's prefix (`efficiency curve: ...`) before a message handled above.
        if let Some((_, rest)) = msg.split_once(": ") {
            if ["unknown field `", "missing field `", "unknown variant `"]
                .iter()
                .any(|p| rest.starts_with(p))
            {
                return self.serde_error(path, rest, v);
            }
        }
        match words::reword(path, msg, v) {
            Some(w) => self.push(&format!("{path}{}", w.below), w.message, Some(w.hint)),
            None => self.push(
                path,
                msg.to_string(),
                Some("see examples/ for the shape of each part of a design".into()),
            ),
        }
    }

    fn read_design(&mut self, root: Node<'_>) -> Option<DesignSpec> {
        let Node::Map(map) = root else {
            self.push(
                "",
                format!(
                    "a design file is a mapping of `battery`, `stages`, `loads`, `modes` and `profile`, but this file holds {}",
                    root.describe()
                ),
                Some("see examples/ for a complete design".into()),
            );
            return None;
        };
        let mut sections: IndexMap<String, Node<'_>> = IndexMap::new();
        for (k, v) in map {
            let Some(key) = k.as_str().map(str::to_string) else {
                self.push(
                    "",
                    format!("a top-level key must be a name, found {}", k.describe()),
                    Some(format!("the top-level keys are {}", backticked(&TOP_KEYS))),
                );
                continue;
            };
            if !TOP_KEYS.contains(&key.as_str()) {
                let hint = match did_you_mean(&key, TOP_KEYS.iter().copied()) {
                    Some(s) => format!("did you mean `{s}`?"),
                    None => format!("the top-level keys are {}", backticked(&TOP_KEYS)),
                };
                let location = self.source.key(&key);
                self.diags.push(
                    Diagnostic::new(key.clone(), format!("unknown key `{key}`"))
                        .with_hint(hint)
                        .at(location),
                );
                continue;
            }
            sections.insert(key, v);
        }
        let design = match sections.shift_remove("design") {
            None | Some(Node::Null) => None,
            Some(v) => self.part::<String>("design", &v),
        };
        let ambient = match sections.shift_remove("ambient") {
            None | Some(Node::Null) => None,
            Some(v) => self.part::<Qty>("ambient", &v),
        };
        let cells = self.map_section::<CellSpec>(&mut sections, "cells");
        let battery = match sections.shift_remove("battery") {
            Some(v) => self.part::<BatterySpec>("battery", &v),
            None => {
                self.push(
                    "",
                    "the design has no `battery`".into(),
                    Some("add `battery: { cell: NAME }` with a cell of `cells`".into()),
                );
                None
            }
        };
        let stages = self.list_section::<StageSpec>(&mut sections, "stages");
        let loads = self.list_section::<LoadSpec>(&mut sections, "loads");
        let modes = self.map_section::<Option<IndexMap<String, String>>>(&mut sections, "modes");
        let profile = self.list_section::<StepSpec>(&mut sections, "profile");
        Some(DesignSpec {
            design,
            ambient,
            cells,
            battery: battery?,
            stages,
            loads,
            modes,
            profile,
        })
    }

    fn list_section<T: DeserializeOwned>(
        &mut self,
        sections: &mut IndexMap<String, Node<'_>>,
        name: &str,
    ) -> Vec<T> {
        match sections.shift_remove(name) {
            None | Some(Node::Null) => Vec::new(),
            Some(Node::Seq(items)) => items
                .iter()
                .enumerate()
                .filter_map(|(i, v)| self.part::<T>(format_args!("{name}[{i}]"), v))
                .collect(),
            Some(other) => {
                self.push(
                    name,
                    format!(
                        "`{name}` must be a list (items starting with `- `), found {}",
                        other.describe()
                    ),
                    Some(format!(
                        "write each item of `{name}` on a line starting with `- `"
                    )),
                );
                Vec::new()
            }
        }
    }

    fn map_section<T: DeserializeOwned>(
        &mut self,
        sections: &mut IndexMap<String, Node<'_>>,
        name: &str,
    ) -> IndexMap<String, T> {
        let mut out = IndexMap::new();
        match sections.shift_remove(name) {
            None | Some(Node::Null) => {}
            Some(Node::Map(m)) => {
                for (k, v) in m {
                    let Some(key) = k.as_str().map(str::to_string) else {
                        self.push(
                            name,
                            format!("a name in `{name}` must be text, found {}", k.describe()),
                            Some(
                                "use a name such as `sleep`; quote it if it looks like a number"
                                    .into(),
                            ),
                        );
                        continue;
                    };
                    if let Some(t) = self.part::<T>(format_args!("{name}.{key}"), &v) {
                        out.insert(key, t);
                    }
                }
            }
            Some(other) => self.push(
                name,
                format!(
                    "`{name}` must be a mapping of names, found {}",
                    other.describe()
                ),
                Some(format!(
                    "write each entry of `{name}` as `NAME: ...` on its own indented line"
                )),
            ),
        }
        out
    }
}

/// The path, below `v`, of the first text value equal to `text` (`.kind`, `[2].chemistry`).
fn value_path(v: &Node<'_>, text: &str) -> Option<String> {
    match v {
        Node::Str(s) if s == text => Some(String::new()),
        Node::Map(m) => m.iter().find_map(|(k, x)| {
            let key = k.as_str()?;
            value_path(x, text).map(|p| format!(".{key}{p}"))
        }),
        Node::Seq(items) => items
            .iter()
            .enumerate()
            .find_map(|(i, x)| value_path(x, text).map(|p| format!("[{i}]{p}"))),
        _ => None,
    }
}

/// `a`, `b` and `c`.
pub(crate) fn backticked<S: AsRef<str>>(names: &[S]) -> String {
    let quoted: Vec<String> = names.iter().map(|n| format!("`{}`", n.as_ref())).collect();
    match quoted.len() {
        0 => String::new(),
        1 => quoted[0].clone(),
        n => format!("{} or {}", quoted[..n - 1].join(", "), quoted[n - 1]),
    }
}

/// The JSON Schema of the design file, generated from the serde types (what `joulepath schema`
/// prints and `schemas/design.schema.json` holds).
pub fn design_schema() -> String {
    let schema = schemars::schema_for!(DesignSpec);
    let mut text = serde_json::to_string_pretty(&schema).unwrap_or_default();
    text.push('\n');
    text
}
