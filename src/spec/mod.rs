//! The design file as written: serde types mirroring the YAML, read section by section so that
//! every structural problem of a file is reported at once, each with its YAML path and place.
//!
//! One reader (`yaml.rs`, on the events of `saphyr-parser`) turns the text into a tree of nodes,
//! each with its line and column (`node.rs`); `--set` overrides edit that tree
//! (`overrides.rs`); the serde types are read from it through the tree's own `Deserializer`; the
//! places of every value by YAML path (`SourceMap`, `source.rs`) are taken from the same tree.
//! This is the only module that uses the YAML parser: built-in presets are read through it too.

mod depth;
mod design;
mod node;
mod node_error;
mod overrides;
mod path;
mod qty;
mod source;
mod tolerance;
mod words;
mod yaml;

use indexmap::IndexMap;
use serde::Deserialize;
use serde::de::DeserializeOwned;

use node::{Kind, Node};

pub use design::{
    AgingSpec, AmbientSpec, BatterySpec, BufferSpec, CellRef, CellSpec, ChemistrySpec, ClimateSpec,
    DesignSpec, LedTopologySpec, LoadSpec, LossSpec, PolarizationSpec, QuiescentFromSpec,
    StageKindSpec, StageSpec, StepSpec, TemperatureRowSpec,
};
pub use overrides::Override;
pub use path::{Seg, segments};
pub use qty::{
    CaptureScale, CaptureSpec, DrawSpec, Efficiency, LedSpec, Qty, ResistanceSpec,
    SelfDischargeRateSpec, SelfDischargeSpec, VinCurveSpec,
};
pub use source::SourceMap;
pub use tolerance::{ToleranceSpec, band_text};

use crate::error::{Diagnostic, did_you_mean};

const TOP_KEYS: [&str; 9] = [
    "design",
    "ambient",
    "cells",
    "battery",
    "stages",
    "loads",
    "modes",
    "profile",
    "tolerances",
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

/// What a file with structural problems still holds, for the checker to look at too: every
/// part that could be read, and what could not.
#[derive(Debug, Clone)]
pub struct Partial {
    /// The parts that could be read (a pack that could not be read is an empty placeholder).
    pub spec: DesignSpec,
    /// Line and column of every value, by YAML path.
    pub source: SourceMap,
    /// Names of the parts that could not be read: ids of stages and loads, names of cells and
    /// modes, and sections (`battery`, `profile`, ...). A checker message about them follows
    /// from a problem already reported.
    pub broken: Vec<String>,
    /// For each list section, the index in the file of each item that was read.
    pub kept: Vec<(&'static str, Vec<usize>)>,
    /// Keys misspelt, as (path of their mapping, key meant): the checker's words about the
    /// key meant there follow from the misspelling.
    pub misspelt: Vec<(String, String)>,
}

/// As [`parse_with`], and on failure also what could be read.
///
/// # Errors
///
/// Every structural problem found, and the parts read despite them (none when the text is not
/// YAML at all).
pub fn parse_partial(
    text: &str,
    overrides: &[Override],
) -> Result<Parsed, (Vec<Diagnostic>, Option<Box<Partial>>)> {
    // A byte-order mark is no part of the text (an editor's "UTF-8 with BOM").
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    // Bounded before any reader recurses into it.
    if let Some(d) = depth::check(text) {
        return Err((vec![d], None));
    }
    let mut root = yaml::read(text).map_err(|d| (d, None))?;
    let mut replaced = Vec::new();
    let mut errors = Vec::new();
    for o in overrides {
        match overrides::apply(&mut root, o) {
            Ok(path) => replaced.push(path),
            Err(d) => errors.push(d),
        }
    }
    if !errors.is_empty() {
        return Err((errors, None));
    }
    read(root, replaced)
}

/// Read one cell from YAML text holding the keys of a `cells:` entry (how the built-in presets
/// are stored), with the places of its values.
///
/// # Errors
///
/// Each problem in words, with its line and column.
pub(crate) fn read_cell(text: &str) -> Result<(CellSpec, SourceMap), String> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let said = |ds: Vec<Diagnostic>| {
        ds.iter()
            .map(ToString::to_string)
            .collect::<Vec<_>>()
            .join("; ")
    };
    if let Some(d) = depth::check(text) {
        return Err(said(vec![d]));
    }
    let source = SourceMap::of(yaml::read(text).map_err(said)?);
    let root = source.tree();
    match CellSpec::deserialize(root) {
        Ok(cell) => Ok((cell, source)),
        Err(e) => {
            let at = root.at.location().map_or_else(String::new, |l| {
                format!(" (the cell starts at line {}, column {})", l.line, l.col)
            });
            Err(format!("{e}{at}"))
        }
    }
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
    parse_partial(text, overrides).map_err(|(d, _)| d)
}

/// The serde types from the document tree; `replaced` are the paths `--set` gave.
fn read(
    root: Node<'static>,
    replaced: Vec<String>,
) -> Result<Parsed, (Vec<Diagnostic>, Option<Box<Partial>>)> {
    let mut source = SourceMap::of(root);
    source.set_overridden(replaced);
    let mut r = Reader {
        source: &source,
        diags: Vec::new(),
        broken: Vec::new(),
        kept: Vec::new(),
        misspelt: Vec::new(),
    };
    let spec = r.read_design(source.tree());
    let Reader {
        diags,
        broken,
        kept,
        misspelt,
        ..
    } = r;
    match spec {
        Some(spec) if diags.is_empty() => Ok(Parsed { spec, source }),
        Some(spec) => Err((
            diags,
            Some(Box::new(Partial {
                spec,
                source,
                broken,
                kept,
                misspelt,
            })),
        )),
        None => Err((diags, None)),
    }
}

struct Reader<'a> {
    source: &'a SourceMap,
    diags: Vec<Diagnostic>,
    /// What could not be read (see [`Partial::broken`]).
    broken: Vec<String>,
    /// The file index of every item read, per list section.
    kept: Vec<(&'static str, Vec<usize>)>,
    /// See [`Partial::misspelt`].
    misspelt: Vec<(String, String)>,
}

impl Reader<'_> {
    /// A problem that leaves the whole section `name` unread.
    fn push_broken(&mut self, name: &str, message: String, hint: Option<String>) {
        self.broken.push(name.to_string());
        self.push(name, message, hint);
    }

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
        let mut err = match T::deserialize(v) {
            Ok(t) => return Some(t),
            Err(e) => e,
        };
        let path = path.to_string();
        // Every unknown key of a mapping is reported, not only the first; without them the
        // part is read again so that its other problems are found and it reaches the checker.
        let mut cleaned: Option<Node<'_>> = None;
        for _ in 0..8 {
            let at = cleaned.as_ref().unwrap_or(v);
            let Some(next) = self.unknown_keys(&path, &err, at) else {
                break;
            };
            match T::deserialize(&next) {
                Ok(t) => return Some(t),
                Err(e) => err = e,
            }
            cleaned = Some(next);
        }
        let at = cleaned.as_ref().unwrap_or(v);
        self.serde_error(&path, &err, at);
        // Checker messages about this item follow from the problem just reported.
        if let Kind::Map(m) = &at.kind {
            let id = m.iter().find(|(k, _)| k.as_str() == Some("id"));
            if let Some(id) = id.and_then(|(_, x)| x.as_str()) {
                self.broken.push(id.to_string());
            }
        }
        None
    }

    fn read_design(&mut self, root: &Node<'_>) -> Option<DesignSpec> {
        let Kind::Map(map) = &root.kind else {
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
        let mut sections = self.top_sections(map);
        let design = match sections.shift_remove("design") {
            Some(v) if !v.is_null() => self.part::<String>("design", v),
            _ => None,
        };
        let ambient = match sections.shift_remove("ambient") {
            Some(v) if !v.is_null() => self.part::<AmbientSpec>("ambient", v),
            _ => None,
        };
        let cells = self.map_section::<CellSpec>(&mut sections, "cells");
        let battery = match sections.shift_remove("battery") {
            Some(v) => self.part::<BatterySpec>("battery", v),
            None if self.broken.iter().any(|b| b == "battery") => None,
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
        let tolerances = self.map_section::<ToleranceSpec>(&mut sections, "tolerances");
        Some(DesignSpec {
            design,
            ambient,
            cells,
            battery: battery.unwrap_or_else(|| {
                // A placeholder: the checker's words about it are left out (see `Partial`).
                self.broken.push("battery".into());
                BatterySpec {
                    cell: CellRef::Name(String::new()),
                    series: None,
                    parallel: None,
                    start: None,
                    aging: None,
                    buffer: None,
                }
            }),
            stages,
            loads,
            modes,
            profile,
            tolerances,
        })
    }

    /// The top-level sections of the design by key, in file order; a key that is not a name
    /// or not a section is reported and left out.
    fn top_sections<'n>(
        &mut self,
        map: &'n [(Node<'n>, Node<'n>)],
    ) -> IndexMap<String, &'n Node<'n>> {
        let mut sections: IndexMap<String, &Node<'_>> = IndexMap::new();
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
                    Some(s) => {
                        // The section meant is as good as missing.
                        self.broken.push(s.to_string());
                        format!("did you mean `{s}`?")
                    }
                    None => format!("the top-level keys are {}", backticked(&TOP_KEYS)),
                };
                let location = self.source.key(&key);
                self.diags.push(
                    Diagnostic::of(
                        crate::error::DiagnosticKind::UnknownKey,
                        key.clone(),
                        format!("unknown key `{key}`"),
                    )
                    .with_hint(hint)
                    .at(location),
                );
                continue;
            }
            sections.insert(key, v);
        }
        sections
    }

    fn list_section<T: DeserializeOwned>(
        &mut self,
        sections: &mut IndexMap<String, &Node<'_>>,
        name: &'static str,
    ) -> Vec<T> {
        let section = sections.shift_remove(name);
        match section.map(|n| &n.kind) {
            None | Some(Kind::Null) => Vec::new(),
            Some(Kind::Seq(items)) => {
                let mut out = Vec::with_capacity(items.len());
                let mut kept = Vec::new();
                for (i, v) in items.iter().enumerate() {
                    if let Some(t) = self.part::<T>(format_args!("{name}[{i}]"), v) {
                        out.push(t);
                        kept.push(i);
                    }
                }
                if kept.len() < items.len() {
                    self.broken.push(name.to_string());
                    self.kept.push((name, kept));
                }
                out
            }
            Some(_) => {
                self.broken.push(name.to_string());
                self.push(
                    name,
                    format!(
                        "`{name}` must be a list (items starting with `- `), found {}",
                        section.map(Node::describe).unwrap_or_default()
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
        sections: &mut IndexMap<String, &Node<'_>>,
        name: &str,
    ) -> IndexMap<String, T> {
        let mut out = IndexMap::new();
        let section = sections.shift_remove(name);
        match section.map(|n| &n.kind) {
            None | Some(Kind::Null) => {}
            Some(Kind::Map(m)) => {
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
                    match self.part::<T>(format_args!("{name}.{key}"), v) {
                        Some(t) => {
                            out.insert(key, t);
                        }
                        None => self.broken.push(key),
                    }
                }
            }
            Some(_) => self.push_broken(
                name,
                format!(
                    "`{name}` must be a mapping of names, found {}",
                    section.map(Node::describe).unwrap_or_default()
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
    match &v.kind {
        Kind::Str(s) if s == text => Some(String::new()),
        Kind::Map(m) => m.iter().find_map(|(k, x)| {
            let key = k.as_str()?;
            value_path(x, text).map(|p| format!(".{key}{p}"))
        }),
        Kind::Seq(items) => items
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
