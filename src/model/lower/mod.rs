//! From the serde mirror to the checked model: quantities parsed, every rule of the design file
//! checked, every problem gathered with its YAML path.

mod capture;
mod cell;
mod cell_keys;
mod climate;
mod knob_path;
mod led;
mod loss;
mod profile;
mod stage;
mod tolerance;
mod wiring;

use cell::given_keys;

use std::collections::HashMap;
use std::fmt::Display;

use super::cell::{Cell, CellSize, Chemistry};
use super::climate::Climate;
use super::load::{Captured, Draw, Load};
use super::mode::{Mode, RepeatUntil, Step};
use super::pack::{Buffer, Pack};
use super::presets::{self, Preset};
use super::stage::{EffCurve, LossModel, Stage, StageKind};
use super::table::{Table, TableError};
use super::{BATTERY, Design};
use crate::error::{Diagnostic, DiagnosticKind, did_you_mean};
use crate::hash::FastMap;
use crate::spec::{
    AmbientSpec, CellRef, CellSpec, ChemistrySpec, DesignSpec, DrawSpec, Efficiency,
    LedTopologySpec, Partial, Qty, QuiescentFromSpec, ResistanceSpec, SourceMap, StageKindSpec,
    StageSpec, StepSpec, VinCurveSpec, backticked,
};
use crate::tree::{MAX_DEPTH, Tree, TreeError};
use crate::units::{Dim, Quantity, fmt_eng, fmt_percent, parse_quantity, physical};

/// Deepest nesting of `repeat` blocks.
const MAX_REPEAT_NESTING: usize = 16;

pub(super) fn lower(spec: &DesignSpec, source: &SourceMap) -> Result<Design, Vec<Diagnostic>> {
    let mut lw = Lower {
        source,
        diags: Vec::new(),
    };
    let design = lw.design(spec);
    if lw.diags.is_empty() {
        design.ok_or_else(Vec::new)
    } else {
        Err(lw.diags)
    }
}

/// The checker's problems with the readable parts of a file that has structural problems too:
/// none that follows from a part that could not be read, and each at its place in the file.
pub(super) fn partial(p: &Partial) -> Vec<Diagnostic> {
    let Err(diags) = lower(&p.spec, &p.source) else {
        return Vec::new();
    };
    let follows = |d: &Diagnostic| {
        let path = d.path();
        let named = d.message().split('`').skip(1).step_by(2);
        p.broken.iter().any(|b| {
            path == b
                || (b == "battery" && path.starts_with("battery"))
                || named.clone().any(|n| n == b)
        }) || p
            .misspelt
            .iter()
            .any(|(at, key)| path.starts_with(at.as_str()) && named.clone().any(|n| n == key))
    };
    diags
        .into_iter()
        .map(|d| {
            // Items dropped from a list shift the later ones: give each its index in the file.
            for (section, kept) in &p.kept {
                let Some(rest) = d
                    .path()
                    .strip_prefix(section)
                    .and_then(|r| r.strip_prefix('['))
                else {
                    continue;
                };
                let Some((k, tail)) = rest.split_once(']') else {
                    continue;
                };
                let Some(&i) = k.parse::<usize>().ok().and_then(|k| kept.get(k)) else {
                    continue;
                };
                let path = format!("{section}[{i}]{tail}");
                let at = p.source.nearest(&path);
                return Diagnostic::new(path, d.message())
                    .with_hint_opt(d.hint().map(str::to_string))
                    .at(at);
            }
            d
        })
        .filter(|d| !follows(d))
        .collect()
}

/// Check one cell alone (a built-in preset); paths start at the cell's keys (`.capacity`).
pub(super) fn lone_cell(
    name: &str,
    spec: &CellSpec,
    source: &SourceMap,
) -> Result<Cell, Vec<Diagnostic>> {
    let mut lw = Lower {
        source,
        diags: Vec::new(),
    };
    let cell = lw.cell(name, spec, "");
    match cell {
        Some(c) if lw.diags.is_empty() => Ok(c),
        _ => Err(lw.diags),
    }
}

struct Lower<'a> {
    source: &'a SourceMap,
    diags: Vec<Diagnostic>,
}

/// A value's bounds for a check: (lowest, whether the lowest is allowed, highest).
#[derive(Clone, Copy)]
enum Bound {
    AtLeastZero,
    AboveZero,
    Any,
}

impl Lower<'_> {
    fn err(&mut self, path: &str, message: impl Into<String>, hint: Option<String>) {
        self.err_of(DiagnosticKind::Invalid, path, message, hint);
    }

    /// A problem of a known kind (see [`DiagnosticKind`]).
    fn err_of(
        &mut self,
        kind: DiagnosticKind,
        path: &str,
        message: impl Into<String>,
        hint: Option<String>,
    ) {
        let at = self.source.nearest(path);
        self.diags.push(
            Diagnostic::new(path, message)
                .with_hint_opt(hint)
                .at(at)
                .with_kind(kind),
        );
    }

    /// A quantity of one of `dims`. Here and in the checks below, `path` is written out only for
    /// a message (pass `format_args!`): a valid design of thousands of stages formats none.
    fn quantity(&mut self, q: &Qty, path: impl Display, dims: &[Dim]) -> Option<Quantity> {
        match parse_quantity(q.text(), dims) {
            Ok(v) => match physical(v, q.text()) {
                Ok(()) => Some(v),
                Err(e) => {
                    self.err_of(
                        DiagnosticKind::OutOfRange,
                        &path.to_string(),
                        e.message(),
                        Some(e.hint().to_string()),
                    );
                    None
                }
            },
            Err(e) => {
                self.err_of(e.kind(), &path.to_string(), e.to_string(), e.hint());
                None
            }
        }
    }

    /// A value of one dimension within a bound.
    fn value(&mut self, q: &Qty, path: impl Display, dim: Dim, bound: Bound) -> Option<f64> {
        let v = self.quantity(q, &path, &[dim])?.value();
        let ok = match bound {
            Bound::AtLeastZero => v >= 0.0,
            Bound::AboveZero => v > 0.0,
            Bound::Any => true,
        };
        if ok {
            Some(v)
        } else {
            let (what, fix) = if matches!(bound, Bound::AtLeastZero) {
                ("cannot be negative", "give zero or a positive value")
            } else {
                ("must be above zero", "give a value above zero")
            };
            self.err_of(
                DiagnosticKind::OutOfRange,
                &path.to_string(),
                format!("{} `{}` {what}", capital(dim.noun()), q.text()),
                Some(format!("{fix}, such as `{}`", dim.example())),
            );
            None
        }
    }

    fn opt(
        &mut self,
        q: Option<&Qty>,
        path: impl Display,
        dim: Dim,
        bound: Bound,
    ) -> Option<Option<f64>> {
        match q {
            None => Some(None),
            Some(q) => self.value(q, path, dim, bound).map(Some),
        }
    }

    /// A fraction in (lo, hi] (or [lo, hi] when `lo_closed`).
    fn fraction(
        &mut self,
        q: &Qty,
        path: impl Display,
        lo: f64,
        lo_closed: bool,
        hi: f64,
    ) -> Option<f64> {
        let v = self.quantity(q, &path, &[Dim::Fraction])?.value();
        let ok = (if lo_closed { v >= lo } else { v > lo }) && v <= hi;
        if ok {
            Some(v)
        } else {
            let open = if lo_closed { "[" } else { "(" };
            self.err_of(
                DiagnosticKind::OutOfRange,
                &path.to_string(),
                format!(
                    "`{}` is outside {open}{} %, {} %]",
                    q.text(),
                    lo * 100.0,
                    hi * 100.0
                ),
                Some(format!(
                    "give a value {} {} % and at most {} %, as a percentage or a fraction of one",
                    if lo_closed { "from" } else { "above" },
                    lo * 100.0,
                    hi * 100.0
                )),
            );
            None
        }
    }

    fn count(&mut self, q: Option<&Qty>, path: impl Display, max: u64) -> Option<u64> {
        let Some(q) = q else { return Some(1) };
        let v = self.quantity(q, &path, &[Dim::Number])?.value();
        if v >= 1.0 && v.fract() == 0.0 && v <= max as f64 {
            Some(v as u64)
        } else {
            self.err_of(
                DiagnosticKind::OutOfRange,
                &path.to_string(),
                format!("`{}` is not a whole number from 1 to {max}", q.text()),
                Some(format!("give a whole number from 1 to {max}, such as `2`")),
            );
            None
        }
    }

    /// The checked design of `spec`: every section checked (each problem reported), then the
    /// parts joined (rails, LED setpoints, captures, profile, tolerances); none after an error.
    fn design(&mut self, spec: &DesignSpec) -> Option<Design> {
        let (ambient_c, climate) = self.ambient(spec);
        // Every custom cell is checked, whether used or not.
        let mut cells: HashMap<&str, Option<Cell>> = HashMap::new();
        for (name, c) in &spec.cells {
            let cell = self.cell(name, c, &format!("cells.{name}"));
            cells.insert(name.as_str(), cell);
        }
        let cell = self.pack_cell(spec, &cells);
        let pack = self.pack(spec, cell);
        let stages = self.stages(&spec.stages);
        let loads = self.loads(spec);
        self.unique_ids(spec);
        let stage_ids = index_of(spec.stages.iter().map(|s| s.id.as_str()));
        let tree = self.tree(spec, &stage_ids);
        let modes = self.modes(spec, &stage_ids);
        let (mut stages, mut loads) = (stages, loads);
        if let (Some((_, inputs, rails)), Some(st), Some(ld)) = (&tree, &mut stages, &mut loads) {
            for (s, &r) in st.iter_mut().zip(inputs) {
                s.input = r;
            }
            for (l, &r) in ld.iter_mut().zip(rails) {
                l.rail = r;
            }
        }
        let leds = match (&tree, &mut stages, &mut loads) {
            (Some((t, _, _)), Some(st), Some(ld)) => self.led_strings(spec, t, st, ld),
            _ => true,
        };
        let captured = match (&pack, &stages, &mut loads) {
            (Some(p), Some(st), Some(ld)) => {
                self.captures(spec, p, st, ld, ambient_c.unwrap_or(25.0))
            }
            _ => true,
        };
        let mut profile = self.profile(spec, modes.as_deref());
        let (tree, loads, mut modes) = (tree?.0, loads?, modes?);
        if !captured || !leds {
            return None;
        }
        if let Some(p) = &mut profile {
            if !self.expand_captures(p, &mut modes, &loads) {
                return None;
            }
        }
        for m in &mut modes {
            m.rail_draws = rail_draws(&tree, &loads, &m.load_states);
        }
        let profile = profile?;
        let holds = crate::model::longest_holds(&profile, modes.len());
        for (m, hold) in modes.iter_mut().zip(holds) {
            m.longest_hold_s = hold;
        }
        let mut design = Design {
            title: spec
                .design
                .clone()
                .unwrap_or_else(|| "untitled design".into()),
            ambient_c: ambient_c?,
            climate: climate?,
            pack: pack?,
            stages: stages?,
            loads,
            modes,
            profile,
            tree,
            tolerances: Vec::new(),
        };
        design.tolerances = self.tolerances(spec, &design)?;
        Some(design)
    }

    /// The ambient of `spec`: its temperature (25 °C by default; a climate's yearly mean) and
    /// its climate (none for a constant ambient); `None` parts after an error.
    #[allow(clippy::option_option)]
    fn ambient(&mut self, spec: &DesignSpec) -> (Option<f64>, Option<Option<Climate>>) {
        match &spec.ambient {
            None => (Some(25.0), Some(None)),
            Some(AmbientSpec::Constant(q)) => (
                self.value(q, "ambient", Dim::Temperature, Bound::Any),
                Some(None),
            ),
            Some(AmbientSpec::Climate(c)) => match self.climate(c) {
                Some((mean, climate)) => (Some(mean), Some(Some(climate))),
                None => (None, None),
            },
        }
    }

    /// The pack's cell, `battery.cell`: inline, or by name a key of `cells` (already checked,
    /// in `cells`) first, else a built-in preset.
    fn pack_cell(
        &mut self,
        spec: &DesignSpec,
        cells: &HashMap<&str, Option<Cell>>,
    ) -> Option<Cell> {
        match &spec.battery.cell {
            CellRef::Inline(c) => {
                let name = match &c.preset {
                    Some(p) if given_keys(c).is_empty() => p.clone(),
                    Some(p) => format!("{p}, modified"),
                    None => "inline".to_string(),
                };
                self.cell(&name, c, "battery.cell")
            }
            // A key of `cells` first, else a built-in preset.
            CellRef::Name(n) => match cells.get(n.as_str()) {
                Some(c) => c.clone(),
                None if Preset::text(n).is_some() => {
                    let c = CellSpec {
                        preset: Some(n.clone()),
                        ..CellSpec::default()
                    };
                    self.cell(n, &c, "battery.cell")
                }
                None => {
                    self.unknown_cell(spec, n);
                    None
                }
            },
        }
    }

    /// Report `battery.cell: n` naming neither a key of `cells` nor a preset.
    fn unknown_cell(&mut self, spec: &DesignSpec, n: &str) {
        let names: Vec<&str> = spec.cells.keys().map(String::as_str).collect();
        let mut all = names.clone();
        for p in Preset::names() {
            all.push(p);
        }
        let hint = match did_you_mean(n, all.into_iter()) {
            Some(s) => format!("did you mean `{s}`?"),
            None if names.is_empty() => {
                "define it under `cells:` (capacity, ocv, resistance, cutoff), write the cell inline, or name a built-in preset (`joulepath cells` lists them)".into()
            }
            None => format!(
                "the cells defined are {}; `joulepath cells` lists the built-in presets",
                backticked(&names)
            ),
        };
        self.err_of(
            DiagnosticKind::UnknownId,
            "battery.cell",
            format!("unknown cell `{n}`"),
            Some(hint),
        );
    }
}

/// The modes' per-rail draws again, after a load's draw changed.
pub(crate) fn refresh_draws(d: &mut Design) {
    for m in &mut d.modes {
        m.rail_draws = rail_draws(&d.tree, &d.loads, &m.load_states);
    }
}

/// For each rail, the draws of the loads on it that are not off in a mode: the solver's hot
/// loop reads them from one short array per rail.
fn rail_draws(tree: &Tree, loads: &[Load], states: &[Option<usize>]) -> Vec<Vec<Draw>> {
    (0..tree.rails())
        .map(|r| {
            tree.loads_on(r)
                .iter()
                .filter_map(|&l| states[l].map(|s| loads[l].states[s].1))
                .collect()
        })
        .collect()
}

/// Position of each id (the first, where ids repeat: duplicates are reported elsewhere).
fn index_of<'s>(ids: impl Iterator<Item = &'s str>) -> FastMap<&'s str, usize> {
    let mut map = FastMap::default();
    map.reserve(ids.size_hint().0);
    for (i, id) in ids.enumerate() {
        map.entry(id).or_insert(i);
    }
    map
}

/// The cell `over` on top of the preset `base`: every key `over` gives replaces the preset's
/// (a table or the polarization branch as a whole).
/// The physical keys a cell gives itself (not `preset` or `description`).
fn capital(s: &str) -> String {
    // "a voltage" -> "the voltage"; used as the subject of a sentence.
    let rest = s
        .strip_prefix("an ")
        .or_else(|| s.strip_prefix("a "))
        .unwrap_or(s);
    format!("the {rest}")
}
