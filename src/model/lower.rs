//! From the serde mirror to the checked model: quantities parsed, every rule of the design file
//! checked, every problem gathered with its YAML path.

use std::collections::HashMap;

use super::curve::{Table, TableError};
use super::load::{Draw, Load};
use super::mode::{Mode, RepeatUntil, Step};
use super::pack::{Cell, Chemistry, Pack};
use super::presets::{self, Preset};
use super::stage::{EffCurve, LossModel, Stage, StageKind};
use super::{BATTERY, Design};
use crate::error::{Diagnostic, did_you_mean};
use crate::spec::{
    CellRef, CellSpec, ChemistrySpec, DesignSpec, Efficiency, Qty, ResistanceSpec, SourceMap,
    StageKindSpec, StageSpec, StepSpec, backticked,
};
use crate::tree::{MAX_DEPTH, Tree, TreeError};
use crate::units::{Dim, Quantity, fmt_eng, fmt_percent, parse_quantity};

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
        let at = self.source.nearest(path);
        self.diags
            .push(Diagnostic::new(path, message).with_hint_opt(hint).at(at));
    }

    fn quantity(&mut self, q: &Qty, path: &str, dims: &[Dim]) -> Option<Quantity> {
        match parse_quantity(q.text(), dims) {
            Ok(v) => Some(v),
            Err(e) => {
                self.err(path, e.to_string(), e.hint());
                None
            }
        }
    }

    /// A value of one dimension within a bound.
    fn value(&mut self, q: &Qty, path: &str, dim: Dim, bound: Bound) -> Option<f64> {
        let v = self.quantity(q, path, &[dim])?.value();
        let ok = match bound {
            Bound::AtLeastZero => v >= 0.0,
            Bound::AboveZero => v > 0.0,
            Bound::Any => true,
        };
        if ok {
            Some(v)
        } else {
            let what = if matches!(bound, Bound::AtLeastZero) {
                "cannot be negative"
            } else {
                "must be above zero"
            };
            self.err(
                path,
                format!("{} `{}` {what}", capital(dim.noun()), q.text()),
                None,
            );
            None
        }
    }

    fn opt(&mut self, q: Option<&Qty>, path: &str, dim: Dim, bound: Bound) -> Option<Option<f64>> {
        match q {
            None => Some(None),
            Some(q) => self.value(q, path, dim, bound).map(Some),
        }
    }

    /// A fraction in (lo, hi] (or [lo, hi] when `lo_closed`).
    fn fraction(&mut self, q: &Qty, path: &str, lo: f64, lo_closed: bool, hi: f64) -> Option<f64> {
        let v = self.quantity(q, path, &[Dim::Fraction])?.value();
        let ok = (if lo_closed { v >= lo } else { v > lo }) && v <= hi;
        if ok {
            Some(v)
        } else {
            let open = if lo_closed { "[" } else { "(" };
            self.err(
                path,
                format!(
                    "`{}` is outside {open}{} %, {} %]",
                    q.text(),
                    lo * 100.0,
                    hi * 100.0
                ),
                None,
            );
            None
        }
    }

    fn count(&mut self, q: Option<&Qty>, path: &str, max: u64) -> Option<u64> {
        let Some(q) = q else { return Some(1) };
        let v = self.quantity(q, path, &[Dim::Number])?.value();
        if v >= 1.0 && v.fract() == 0.0 && v <= max as f64 {
            Some(v as u64)
        } else {
            self.err(
                path,
                format!("`{}` is not a whole number from 1 to {max}", q.text()),
                None,
            );
            None
        }
    }

    fn design(&mut self, spec: &DesignSpec) -> Option<Design> {
        let ambient_c = match &spec.ambient {
            None => Some(25.0),
            Some(q) => self.value(q, "ambient", Dim::Temperature, Bound::Any),
        };
        // Every custom cell is checked, whether used or not.
        let mut cells: HashMap<&str, Option<Cell>> = HashMap::new();
        for (name, c) in &spec.cells {
            let cell = self.cell(name, c, &format!("cells.{name}"));
            cells.insert(name.as_str(), cell);
        }
        let cell = match &spec.battery.cell {
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
                    self.err("battery.cell", format!("unknown cell `{n}`"), Some(hint));
                    None
                }
            },
        };
        let pack = self.pack(spec, cell);
        let stages = self.stages(&spec.stages);
        let loads = self.loads(spec);
        self.unique_ids(spec);
        let tree = self.tree(spec);
        let modes = self.modes(spec);
        let (mut stages, mut loads) = (stages, loads);
        if let (Some((_, inputs, rails)), Some(st), Some(ld)) = (&tree, &mut stages, &mut loads) {
            for (s, &r) in st.iter_mut().zip(inputs) {
                s.input = r;
            }
            for (l, &r) in ld.iter_mut().zip(rails) {
                l.rail = r;
            }
        }
        let profile = self.profile(spec, modes.as_deref());
        let (tree, loads, mut modes) = (tree?.0, loads?, modes?);
        for m in &mut modes {
            m.rail_draws = rail_draws(&tree, &loads, &m.load_states);
        }
        Some(Design {
            title: spec
                .design
                .clone()
                .unwrap_or_else(|| "untitled design".into()),
            ambient_c: ambient_c?,
            pack: pack?,
            stages: stages?,
            loads,
            modes,
            profile: profile?,
            tree,
        })
    }

    fn soc_table(
        &mut self,
        rows: &[Vec<Qty>],
        path: &str,
        dim: Dim,
        bound: Bound,
    ) -> Option<Table> {
        let mut pts = Vec::new();
        let mut ok = true;
        for (i, row) in rows.iter().enumerate() {
            let p = format!("{path}[{i}]");
            if row.len() != 2 {
                self.err(
                    &p,
                    format!("a row has {} values, not 2", row.len()),
                    Some(format!("write each row as `[SoC, {}]`", dim.example())),
                );
                ok = false;
                continue;
            }
            let s = self.fraction(&row[0], &format!("{p}[0]"), 0.0, true, 1.0);
            let v = self.value(&row[1], &format!("{p}[1]"), dim, bound);
            match (s, v) {
                (Some(s), Some(v)) => pts.push((s, v)),
                _ => ok = false,
            }
        }
        if !ok {
            return None;
        }
        let has = |x: f64| pts.iter().any(|p| (p.0 - x).abs() < 1e-12);
        if !has(0.0) || !has(1.0) {
            self.err(
                path,
                "a state-of-charge table needs a point at 0 % and one at 100 %".to_string(),
                Some("add the missing end rows".into()),
            );
            return None;
        }
        let repeated = pts.iter().enumerate().find_map(|(i, a)| {
            pts[..i]
                .iter()
                .position(|b| b.0.total_cmp(&a.0).is_eq())
                .map(|j| (j, i, a.0))
        });
        match Table::new(pts) {
            Ok(t) => Some(t),
            Err(TableError::Repeated(_)) => {
                let (j, i, soc) = repeated.unwrap_or((0, 0, 0.0));
                self.err(
                    &format!("{path}[{i}]"),
                    format!(
                        "rows {j} and {i} of the table both give the state of charge {}",
                        fmt_percent(soc)
                    ),
                    Some("keep one row per SoC".into()),
                );
                None
            }
            Err(_) => {
                self.err(path, "the table is empty", None);
                None
            }
        }
    }

    /// A cell: a custom one, or a built-in preset with the keys `c` gives overriding its own.
    fn cell(&mut self, name: &str, c: &CellSpec, path: &str) -> Option<Cell> {
        let Some(p) = &c.preset else {
            return self.custom_cell(name, c, path);
        };
        let base = match presets::spec(p) {
            Some(Ok(base)) => base,
            Some(Err(message)) => {
                self.err(&format!("{path}.preset"), message, None);
                return None;
            }
            None => {
                self.err(
                    &format!("{path}.preset"),
                    format!("unknown cell preset `{p}`"),
                    Some(Preset::suggestion(p)),
                );
                return None;
            }
        };
        let merged = overlay(c, &base);
        let before = self.diags.len();
        let cell = self.custom_cell(name, &merged, path);
        // A problem with a value the preset gave (a rule across keys, such as the cutoff against
        // an overriding OCV table) says where that value came from.
        let given = given_keys(c);
        for d in &mut self.diags[before..] {
            let key = d
                .path()
                .strip_prefix(path)
                .unwrap_or("")
                .trim_start_matches('.')
                .split(['.', '['])
                .next()
                .unwrap_or("");
            if !key.is_empty() && !given.contains(&key) {
                *d = Diagnostic::new(
                    d.path(),
                    format!("{} (`{key}` comes from preset `{p}`)", d.message()),
                )
                .with_hint(match d.hint() {
                    Some(h) => format!("{h}; give `{key}:` here to replace the preset's"),
                    None => format!("give `{key}:` here to replace the preset's"),
                })
                .at(d.location());
            }
        }
        cell
    }

    /// A cell from its own keys (a custom cell, or a preset merged with its overrides).
    fn custom_cell(&mut self, name: &str, c: &CellSpec, path: &str) -> Option<Cell> {
        let missing = |lw: &mut Self, key: &str, example: &str| {
            lw.err(
                path,
                format!("cell `{name}` has no `{key}`"),
                Some(format!("add `{key}: {example}`")),
            );
        };
        let ocv = match &c.ocv {
            Some(rows) => {
                let t =
                    self.soc_table(rows, &format!("{path}.ocv"), Dim::Voltage, Bound::AboveZero);
                if let Some(t) = &t {
                    if !t.is_non_decreasing() {
                        self.err(
                            &format!("{path}.ocv"),
                            format!("the open-circuit voltage of cell `{name}` falls as the state of charge rises"),
                            Some("check the rows for a typing error: OCV must not fall from one SoC to a higher one".into()),
                        );
                        return None;
                    }
                }
                t
            }
            None => {
                missing(self, "ocv", "[[0 %, 3.0 V], [100 %, 4.2 V]]");
                None
            }
        };
        let capacity = match &c.capacity {
            Some(q) => {
                match self.quantity(q, &format!("{path}.capacity"), &[Dim::Charge, Dim::Energy]) {
                    Some(v) if v.value() > 0.0 => Some(v),
                    Some(_) => {
                        self.err(
                            &format!("{path}.capacity"),
                            "the capacity must be above zero",
                            None,
                        );
                        None
                    }
                    None => None,
                }
            }
            None => {
                missing(self, "capacity", "600 mAh");
                None
            }
        };
        // A capacity in Wh becomes charge through the mean OCV over the full range.
        let capacity_c = match (capacity, &ocv) {
            (Some(q), _) if q.dim() == Dim::Charge => Some(q.value()),
            (Some(q), Some(t)) => Some(q.value() / t.mean(0.0, 1.0)),
            _ => None,
        };
        let resistance = match &c.resistance {
            Some(ResistanceSpec::Constant(q)) => self
                .value(
                    q,
                    &format!("{path}.resistance"),
                    Dim::Resistance,
                    Bound::AtLeastZero,
                )
                .map(Table::constant),
            Some(ResistanceSpec::Table(rows)) => self.soc_table(
                rows,
                &format!("{path}.resistance"),
                Dim::Resistance,
                Bound::AtLeastZero,
            ),
            None => {
                missing(self, "resistance", "150 mΩ");
                None
            }
        };
        let cutoff = match &c.cutoff {
            Some(q) => self.value(q, &format!("{path}.cutoff"), Dim::Voltage, Bound::AboveZero),
            None => {
                missing(self, "cutoff", "3.0 V");
                None
            }
        };
        if let (Some(cut), Some(t)) = (cutoff, &ocv) {
            if cut >= t.at(1.0) {
                self.err(
                    &format!("{path}.cutoff"),
                    format!(
                        "the cutoff {} is not below the full-charge OCV {}",
                        fmt_eng(cut, "V"),
                        fmt_eng(t.at(1.0), "V")
                    ),
                    Some("the cutoff is the end-of-discharge voltage under load".into()),
                );
            }
        }
        let rated = match (&c.rated_current, capacity_c) {
            (Some(q), _) => self.value(
                q,
                &format!("{path}.rated_current"),
                Dim::Current,
                Bound::AboveZero,
            ),
            (None, Some(cap)) => Some(cap / (5.0 * 3600.0)),
            (None, None) => None,
        };
        let polarization = match &c.polarization {
            None => Some(None),
            Some(p) => {
                let r = self.value(
                    &p.resistance,
                    &format!("{path}.polarization.resistance"),
                    Dim::Resistance,
                    Bound::AtLeastZero,
                );
                let tau = self.value(
                    &p.time_constant,
                    &format!("{path}.polarization.time_constant"),
                    Dim::Time,
                    Bound::AboveZero,
                );
                r.zip(tau).map(Some)
            }
        };
        let peukert = match &c.peukert {
            None => Some(1.0),
            Some(q) => match self.quantity(q, &format!("{path}.peukert"), &[Dim::Number]) {
                Some(k) if (1.0..=2.0).contains(&k.value()) => Some(k.value()),
                Some(_) => {
                    self.err(
                        &format!("{path}.peukert"),
                        format!("the Peukert exponent `{}` is outside [1, 2]", q.text()),
                        Some("typical values are 1.0 to 1.3; 1 means no rate effect".into()),
                    );
                    None
                }
                None => None,
            },
        };
        let max_current = self.opt(
            c.max_current.as_ref(),
            &format!("{path}.max_current"),
            Dim::Current,
            Bound::AboveZero,
        );
        let self_discharge = self.opt(
            c.self_discharge.as_ref(),
            &format!("{path}.self_discharge"),
            Dim::Rate,
            Bound::AtLeastZero,
        );
        let temps = self.temperature(c, path);
        let (temp_capacity, temp_resistance) = temps?;
        Some(Cell {
            name: name.to_string(),
            chemistry: chemistry(c.chemistry),
            capacity_c: capacity_c?,
            rated_current_a: rated?,
            ocv: ocv?,
            resistance: resistance?,
            polarization: polarization?,
            peukert: peukert?,
            cutoff_v: cutoff?,
            max_current_a: max_current?,
            self_discharge_per_s: self_discharge?.unwrap_or(0.0),
            temp_capacity,
            temp_resistance,
        })
    }

    fn temperature(&mut self, c: &CellSpec, path: &str) -> Option<(Table, Table)> {
        let Some(rows) = &c.temperature else {
            return Some((Table::constant(1.0), Table::constant(1.0)));
        };
        let mut cap = Vec::new();
        let mut res = Vec::new();
        let mut ok = true;
        for (i, row) in rows.iter().enumerate() {
            let p = format!("{path}.temperature[{i}]");
            let at = self.value(&row.at, &format!("{p}.at"), Dim::Temperature, Bound::Any);
            let cf = match &row.capacity {
                None => Some(1.0),
                Some(q) => self.fraction(q, &format!("{p}.capacity"), 0.0, false, 2.0),
            };
            let rf = match &row.resistance {
                None => Some(1.0),
                Some(q) => self.fraction(q, &format!("{p}.resistance"), 0.0, false, 100.0),
            };
            match (at, cf, rf) {
                (Some(t), Some(cf), Some(rf)) => {
                    cap.push((t, cf));
                    res.push((t, rf));
                }
                _ => ok = false,
            }
        }
        if !ok {
            return None;
        }
        match (Table::new(cap), Table::new(res)) {
            (Ok(a), Ok(b)) => Some((a, b)),
            _ => {
                self.err(
                    &format!("{path}.temperature"),
                    "the temperature table is empty or gives the same temperature twice",
                    Some("keep one row per temperature".into()),
                );
                None
            }
        }
    }

    fn pack(&mut self, spec: &DesignSpec, cell: Option<Cell>) -> Option<Pack> {
        let b = &spec.battery;
        let series = self.count(b.series.as_ref(), "battery.series", 1000);
        let parallel = self.count(b.parallel.as_ref(), "battery.parallel", 1000);
        let start = match &b.start {
            None => Some(1.0),
            Some(q) => self.fraction(q, "battery.start", 0.0, true, 1.0),
        };
        let (mut ac, mut ar) = (Some(1.0), Some(1.0));
        if let Some(a) = &b.aging {
            if let Some(q) = &a.capacity {
                ac = self.fraction(q, "battery.aging.capacity", 0.0, false, 1.0);
            }
            if let Some(q) = &a.resistance {
                ar = self.fraction(q, "battery.aging.resistance", 0.0, false, 100.0);
            }
        }
        Some(Pack {
            cell: cell?,
            series: u32::try_from(series?).ok()?,
            parallel: u32::try_from(parallel?).ok()?,
            start_soc: start?,
            aging_capacity: ac?,
            aging_resistance: ar?,
        })
    }

    fn range(&mut self, v: Option<&Vec<Qty>>, path: &str) -> Option<(Option<f64>, Option<f64>)> {
        let Some(v) = v else {
            return Some((None, None));
        };
        if v.len() != 2 {
            self.err(
                path,
                format!("a range has {} values, not 2", v.len()),
                Some("write `[min, max]`, e.g. `[1.7 V, 3.6 V]`".into()),
            );
            return None;
        }
        let lo = self.value(
            &v[0],
            &format!("{path}[0]"),
            Dim::Voltage,
            Bound::AtLeastZero,
        );
        let hi = self.value(&v[1], &format!("{path}[1]"), Dim::Voltage, Bound::AboveZero);
        let (lo, hi) = (lo?, hi?);
        if lo >= hi {
            self.err(
                path,
                format!(
                    "the minimum {} is not below the maximum {}",
                    fmt_eng(lo, "V"),
                    fmt_eng(hi, "V")
                ),
                Some("write `[min, max]`".into()),
            );
            return None;
        }
        Some((Some(lo), Some(hi)))
    }

    fn stages(&mut self, specs: &[StageSpec]) -> Option<Vec<Stage>> {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, s) in specs.iter().enumerate() {
            match self.stage(s, &format!("stages[{i}]")) {
                Some(st) => out.push(st),
                None => ok = false,
            }
        }
        ok.then_some(out)
    }

    fn not_for(&mut self, present: bool, path: &str, key: &str, kind: &str, which: &str) {
        if present {
            self.err(
                &format!("{path}.{key}"),
                format!("`{key}` does not apply to a {kind} stage"),
                Some(format!("`{key}` applies to {which}; remove it here")),
            );
        }
    }

    fn stage(&mut self, s: &StageSpec, path: &str) -> Option<Stage> {
        let kind = match s.kind {
            StageKindSpec::Buck => StageKind::Buck,
            StageKindSpec::Boost => StageKind::Boost,
            StageKindSpec::BuckBoost => StageKind::BuckBoost,
            StageKindSpec::Linear => StageKind::Linear,
            StageKindSpec::Switch => StageKind::Switch,
        };
        let kn = kind.name();
        let before = self.diags.len();
        let setpoint = match (&s.output, kind) {
            (Some(_), StageKind::Switch) => {
                self.err(
                    &format!("{path}.output"),
                    "a switch has no setpoint: its output follows its input",
                    Some("remove `output`".into()),
                );
                None
            }
            (None, StageKind::Switch) => Some(0.0),
            (Some(q), _) => {
                self.value(q, &format!("{path}.output"), Dim::Voltage, Bound::AboveZero)
            }
            (None, _) => {
                self.err(
                    path,
                    format!("the {kn} stage `{}` has no `output` setpoint", s.id),
                    Some("add e.g. `output: 3.3 V`".into()),
                );
                None
            }
        };
        let loss = self.loss_model(s, kind, path);
        let quiescent = self.opt(
            s.quiescent.as_ref(),
            &format!("{path}.quiescent"),
            Dim::Current,
            Bound::AtLeastZero,
        );
        let shutdown = self.opt(
            s.shutdown.as_ref(),
            &format!("{path}.shutdown"),
            Dim::Current,
            Bound::AtLeastZero,
        );
        let range = self.range(s.input_range.as_ref(), &format!("{path}.input_range"));
        let max_out = self.opt(
            s.max_output_current.as_ref(),
            &format!("{path}.max_output_current"),
            Dim::Current,
            Bound::AboveZero,
        );
        let dropout_default = match kind {
            StageKind::Linear => 0.2,
            _ => 0.1,
        };
        let takes_dropout = matches!(kind, StageKind::Buck | StageKind::Linear);
        self.not_for(
            !takes_dropout && s.dropout.is_some(),
            path,
            "dropout",
            kn,
            "buck and linear stages",
        );
        self.not_for(
            kind != StageKind::Boost && s.bypass_drop.is_some(),
            path,
            "bypass_drop",
            kn,
            "boost stages",
        );
        self.not_for(
            kind != StageKind::Switch && s.on_resistance.is_some(),
            path,
            "on_resistance",
            kn,
            "switch stages",
        );
        let dropout = self.opt(
            s.dropout.as_ref(),
            &format!("{path}.dropout"),
            Dim::Voltage,
            Bound::AtLeastZero,
        );
        let bypass = self.opt(
            s.bypass_drop.as_ref(),
            &format!("{path}.bypass_drop"),
            Dim::Voltage,
            Bound::AtLeastZero,
        );
        let ron = match (&s.on_resistance, kind) {
            (None, StageKind::Switch) => {
                self.err(
                    path,
                    format!("the switch `{}` has no `on_resistance`", s.id),
                    Some("add e.g. `on_resistance: 80 mΩ`".into()),
                );
                None
            }
            (q, _) => self.opt(
                q.as_ref(),
                &format!("{path}.on_resistance"),
                Dim::Resistance,
                Bound::AtLeastZero,
            ),
        };
        let theta = self.opt(
            s.theta_ja.as_ref(),
            &format!("{path}.theta_ja"),
            Dim::ThermalResistance,
            Bound::AboveZero,
        );
        let tj_max = self.opt(
            s.tj_max.as_ref(),
            &format!("{path}.tj_max"),
            Dim::Temperature,
            Bound::Any,
        );
        if s.id.trim().is_empty() {
            self.err(
                &format!("{path}.id"),
                "the id is empty",
                Some("give the stage a short name such as `buck-3v3`".into()),
            );
        }
        if self.diags.len() > before {
            return None;
        }
        let (input_min, input_max) = range?;
        Some(Stage {
            id: s.id.clone(),
            kind,
            input: 0,
            setpoint: setpoint?,
            loss: loss?,
            quiescent: quiescent?.unwrap_or(0.0),
            shutdown: shutdown?.unwrap_or(0.0),
            input_min,
            input_max,
            max_output_current: max_out?,
            dropout: dropout?.unwrap_or(dropout_default),
            bypass_drop: bypass?.unwrap_or(0.4),
            on_resistance: ron?.unwrap_or(0.0),
            theta_ja: theta?,
            tj_max: tj_max?.unwrap_or(125.0),
        })
    }

    fn loss_model(&mut self, s: &StageSpec, kind: StageKind, path: &str) -> Option<LossModel> {
        if !kind.is_switching() {
            for (present, key) in [
                (s.efficiency.is_some(), "efficiency"),
                (s.loss.is_some(), "loss"),
            ] {
                if present {
                    self.err(
                        &format!("{path}.{key}"),
                        format!(
                            "a {} stage takes no `{key}`: its loss follows from its currents",
                            kind.name()
                        ),
                        Some(format!("remove `{key}`")),
                    );
                }
            }
            return Some(LossModel::None);
        }
        match (&s.efficiency, &s.loss) {
            (Some(_), Some(_)) => {
                self.err(
                    path,
                    format!(
                        "the {} stage `{}` has both `efficiency` and `loss`",
                        kind.name(),
                        s.id
                    ),
                    Some("keep exactly one of `efficiency` and `loss`".into()),
                );
                None
            }
            (None, None) => {
                self.err(
                    path,
                    format!("the {} stage `{}` has neither `efficiency` nor `loss`", kind.name(), s.id),
                    Some("add `efficiency: 90 %`, an efficiency curve, or `loss: { drop: 0.05 V, resistance: 0.2 Ω }`".into()),
                );
                None
            }
            (None, Some(l)) => {
                let drop = self.opt(
                    l.drop.as_ref(),
                    &format!("{path}.loss.drop"),
                    Dim::Voltage,
                    Bound::AtLeastZero,
                );
                let r = self.opt(
                    l.resistance.as_ref(),
                    &format!("{path}.loss.resistance"),
                    Dim::Resistance,
                    Bound::AtLeastZero,
                );
                Some(LossModel::Terms {
                    drop: drop?.unwrap_or(0.0),
                    resistance: r?.unwrap_or(0.0),
                })
            }
            (Some(Efficiency::Constant(q)), None) => self
                .fraction(q, &format!("{path}.efficiency"), 0.0, false, 1.0)
                .map(LossModel::Constant),
            (Some(Efficiency::Curve(rows)), None) => {
                let c = self.curve(rows, &format!("{path}.efficiency"))?;
                Some(LossModel::Curves(vec![(None, c)]))
            }
            (Some(Efficiency::PerVin(list)), None) => {
                let mut curves = Vec::new();
                for (i, vc) in list.iter().enumerate() {
                    let p = format!("{path}.efficiency[{i}]");
                    let v =
                        self.value(&vc.vin, &format!("{p}.vin"), Dim::Voltage, Bound::AboveZero);
                    let c = self.curve(&vc.curve, &format!("{p}.curve"));
                    if let (Some(v), Some(c)) = (v, c) {
                        curves.push((Some(v), c));
                    }
                }
                if curves.len() != list.len() {
                    return None;
                }
                if curves.is_empty() {
                    self.err(
                        &format!("{path}.efficiency"),
                        "the list of efficiency curves is empty",
                        None,
                    );
                    return None;
                }
                curves.sort_by(|a, b| a.0.unwrap_or(0.0).total_cmp(&b.0.unwrap_or(0.0)));
                if curves.windows(2).any(|w| w[0].0 == w[1].0) {
                    self.err(
                        &format!("{path}.efficiency"),
                        "two efficiency curves are at the same input voltage",
                        Some("keep one curve per `vin`".into()),
                    );
                    return None;
                }
                Some(LossModel::Curves(curves))
            }
        }
    }

    fn curve(&mut self, rows: &[Vec<Qty>], path: &str) -> Option<EffCurve> {
        let mut pts = Vec::new();
        let mut ok = true;
        for (i, row) in rows.iter().enumerate() {
            let p = format!("{path}[{i}]");
            if row.len() != 2 {
                self.err(
                    &p,
                    format!("a row has {} values, not 2", row.len()),
                    Some(
                        "write each row as `[output current, efficiency]`, e.g. `[10 mA, 84 %]`"
                            .into(),
                    ),
                );
                ok = false;
                continue;
            }
            let i_out = self.value(&row[0], &format!("{p}[0]"), Dim::Current, Bound::AboveZero);
            let eta = self.fraction(&row[1], &format!("{p}[1]"), 0.0, false, 1.0);
            match (i_out, eta) {
                (Some(a), Some(b)) => pts.push((a, b)),
                _ => ok = false,
            }
        }
        if !ok {
            return None;
        }
        match EffCurve::new(&pts) {
            Ok(c) => Some(c),
            Err(e) => {
                self.err(
                    path,
                    e,
                    Some(
                        "give each output current once, e.g. `[[1 mA, 72 %], [10 mA, 84 %]]`"
                            .into(),
                    ),
                );
                None
            }
        }
    }

    fn loads(&mut self, spec: &DesignSpec) -> Option<Vec<Load>> {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, l) in spec.loads.iter().enumerate() {
            let path = format!("loads[{i}]");
            let before = self.diags.len();
            let range = self.range(l.voltage_range.as_ref(), &format!("{path}.voltage_range"));
            let mut states = Vec::new();
            if l.draw.is_empty() {
                self.err(
                    &format!("{path}.draw"),
                    format!("the load `{}` has no states", l.id),
                    Some("add e.g. `draw: { run: 6 mA }`".into()),
                );
            }
            for (name, q) in &l.draw {
                let p = format!("{path}.draw.{name}");
                if name == "off" {
                    self.err(
                        &p,
                        "`off` is a state every load has, drawing nothing",
                        Some("name this state differently".into()),
                    );
                    continue;
                }
                let Some(v) = self.quantity(q, &p, &[Dim::Current, Dim::Power, Dim::Resistance])
                else {
                    continue;
                };
                let draw = match v.dim() {
                    Dim::Current => Draw::Current(v.value()),
                    Dim::Power => Draw::Power(v.value()),
                    _ => Draw::Resistance(v.value()),
                };
                let bad = match draw {
                    Draw::Resistance(r) => r <= 0.0,
                    Draw::Current(x) | Draw::Power(x) => x < 0.0,
                };
                if bad {
                    self.err(
                        &p,
                        format!("the draw `{}` must be above zero", q.text()),
                        None,
                    );
                    continue;
                }
                states.push((name.clone(), draw));
            }
            let default = match l.default.as_deref() {
                None | Some("off") => None,
                Some(d) => {
                    let k = states.iter().position(|(n, _)| n == d);
                    if k.is_none() {
                        self.unknown_state(&format!("{path}.default"), &l.id, d, &states);
                    }
                    k
                }
            };
            if l.id.trim().is_empty() {
                self.err(
                    &format!("{path}.id"),
                    "the id is empty",
                    Some("give the load a short name such as `mcu`".into()),
                );
            }
            if self.diags.len() > before {
                ok = false;
                continue;
            }
            let (v_min, v_max) = range?;
            out.push(Load {
                id: l.id.clone(),
                rail: 0,
                v_min,
                v_max,
                states,
                default,
            });
        }
        ok.then_some(out)
    }

    fn unknown_state(&mut self, path: &str, load: &str, state: &str, states: &[(String, Draw)]) {
        let names: Vec<&str> = states.iter().map(|s| s.0.as_str()).chain(["off"]).collect();
        let hint = match did_you_mean(state, names.iter().copied()) {
            Some(s) => format!(
                "did you mean `{s}`? The states of `{load}` are {}",
                backticked(&names)
            ),
            None => format!("the states of `{load}` are {}", backticked(&names)),
        };
        self.err(
            path,
            format!("the load `{load}` has no state `{state}`"),
            Some(hint),
        );
    }

    fn unique_ids(&mut self, spec: &DesignSpec) {
        let mut seen: HashMap<&str, String> = HashMap::new();
        let ids = spec
            .stages
            .iter()
            .enumerate()
            .map(|(i, s)| (s.id.as_str(), format!("stages[{i}].id")))
            .chain(
                spec.loads
                    .iter()
                    .enumerate()
                    .map(|(i, l)| (l.id.as_str(), format!("loads[{i}].id"))),
            );
        for (id, path) in ids {
            if id == BATTERY {
                self.err(
                    &path,
                    "`battery` is reserved for the pack's own rail",
                    Some("choose another id".into()),
                );
            } else if let Some(first) = seen.get(id) {
                let msg = format!("the id `{id}` is used twice (first at {first})");
                self.err(
                    &path,
                    msg,
                    Some("ids must be unique across stages and loads".into()),
                );
            } else {
                seen.insert(id, path);
            }
        }
    }

    /// The rail called `name`: 0 for the battery, `k + 1` for stage `k`.
    fn rail(
        &mut self,
        spec: &DesignSpec,
        stage_ids: &HashMap<&str, usize>,
        name: &str,
        path: &str,
    ) -> Option<usize> {
        if name == BATTERY {
            return Some(0);
        }
        if let Some(&k) = stage_ids.get(name) {
            return Some(k + 1);
        }
        let hint = if spec.loads.iter().any(|l| l.id == name) {
            format!("`{name}` is a load; a rail is `battery` or a stage id")
        } else {
            let names: Vec<&str> = std::iter::once(BATTERY)
                .chain(spec.stages.iter().map(|s| s.id.as_str()))
                .collect();
            match did_you_mean(name, names.iter().copied()) {
                Some(s) => format!("did you mean `{s}`?"),
                None => format!("the rails are {}", backticked(&names)),
            }
        };
        self.err(path, format!("unknown rail `{name}`"), Some(hint));
        None
    }

    fn tree(&mut self, spec: &DesignSpec) -> Option<(Tree, Vec<usize>, Vec<usize>)> {
        let stage_ids = index_of(spec.stages.iter().map(|s| s.id.as_str()));
        let mut ok = true;
        let mut inputs = Vec::new();
        for (i, s) in spec.stages.iter().enumerate() {
            match self.rail(spec, &stage_ids, &s.input, &format!("stages[{i}].input")) {
                Some(r) if r == i + 1 => {
                    self.err(
                        &format!("stages[{i}].input"),
                        format!("the stage `{}` feeds itself", s.id),
                        Some("its input must be `battery` or another stage".into()),
                    );
                    ok = false;
                }
                Some(r) => inputs.push(r),
                None => ok = false,
            }
        }
        let mut rails = Vec::new();
        for (i, l) in spec.loads.iter().enumerate() {
            match self.rail(spec, &stage_ids, &l.rail, &format!("loads[{i}].rail")) {
                Some(r) => rails.push(r),
                None => ok = false,
            }
        }
        if !ok {
            return None;
        }
        match Tree::build(&inputs, &rails) {
            Ok(t) => Some((t, inputs, rails)),
            Err(errs) => {
                for e in errs {
                    match e {
                        TreeError::Cycle(stages) => {
                            let mut names: Vec<&str> =
                                stages.iter().map(|&k| spec.stages[k].id.as_str()).collect();
                            names.push(names[0]);
                            self.err(
                                &format!("stages[{}].input", stages[0]),
                                format!("stages feed each other in a loop: {}", names.join(" -> ")),
                                Some("every chain of stages must start at `battery`".into()),
                            );
                        }
                        TreeError::TooDeep(k) => self.err(
                            &format!("stages[{k}].input"),
                            format!(
                                "the chain of stages down to `{}` is deeper than {MAX_DEPTH}",
                                spec.stages[k].id
                            ),
                            None,
                        ),
                    }
                }
                None
            }
        }
    }

    fn modes(&mut self, spec: &DesignSpec) -> Option<Vec<Mode>> {
        if spec.modes.is_empty() {
            self.err("", "the design has no `modes`", Some("add at least one, e.g. `modes: { run: {} }` (loads then take their `default` state)".into()));
            return None;
        }
        let load_ids = index_of(spec.loads.iter().map(|l| l.id.as_str()));
        let stage_ids = index_of(spec.stages.iter().map(|s| s.id.as_str()));
        // States are indexed as in the lowered load: file order, `off` excluded.
        let defaults: Vec<Option<usize>> = spec
            .loads
            .iter()
            .map(|l| {
                let d = l.default.as_ref()?;
                l.draw.keys().filter(|k| *k != "off").position(|s| s == d)
            })
            .collect();
        let mut out = Vec::new();
        let mut ok = true;
        for (name, entries) in &spec.modes {
            let mut load_states = defaults.clone();
            let mut stage_on = vec![true; spec.stages.len()];
            for (key, value) in entries.iter().flatten() {
                let p = format!("modes.{name}.{key}");
                if let Some(&li) = load_ids.get(key.as_str()) {
                    let l = &spec.loads[li];
                    if value == "off" {
                        load_states[li] = None;
                        continue;
                    }
                    let states: Vec<&String> = l.draw.keys().filter(|k| *k != "off").collect();
                    if let Some(k) = states.iter().position(|s| *s == value) {
                        load_states[li] = Some(k);
                    } else {
                        let named: Vec<(String, Draw)> = states
                            .iter()
                            .map(|s| ((*s).clone(), Draw::Current(0.0)))
                            .collect();
                        self.unknown_state(&p, key, value, &named);
                        ok = false;
                    }
                } else if let Some(&si) = stage_ids.get(key.as_str()) {
                    match value.as_str() {
                        "off" => stage_on[si] = false,
                        "on" => stage_on[si] = true,
                        _ => {
                            self.err(
                                &p,
                                format!("a stage is `on` or `off` in a mode, not `{value}`"),
                                Some(format!("write `{key}: off` to turn the stage off")),
                            );
                            ok = false;
                        }
                    }
                } else {
                    let names: Vec<&str> = spec
                        .loads
                        .iter()
                        .map(|l| l.id.as_str())
                        .chain(spec.stages.iter().map(|s| s.id.as_str()))
                        .collect();
                    let hint = match did_you_mean(key, names.iter().copied()) {
                        Some(s) => format!("did you mean `{s}`?"),
                        None => {
                            "a mode names loads (with a state) and stages (with `off`)".to_string()
                        }
                    };
                    self.err(
                        &p,
                        format!("mode `{name}` names `{key}`, which is neither a load nor a stage"),
                        Some(hint),
                    );
                    ok = false;
                }
            }
            out.push(Mode {
                name: name.clone(),
                load_states,
                stage_on,
                rail_draws: Vec::new(),
            });
        }
        ok.then_some(out)
    }

    fn profile(&mut self, spec: &DesignSpec, modes: Option<&[Mode]>) -> Option<Vec<Step>> {
        if spec.profile.is_empty() {
            self.err(
                "profile",
                "the profile is empty",
                Some("add at least one step, e.g. `profile: [{ mode: run, for: 1 h }]`".into()),
            );
            return None;
        }
        let names: Vec<&str> = spec.modes.keys().map(String::as_str).collect();
        let steps = self.steps(&spec.profile, "profile", &names, 0);
        modes?;
        steps
    }

    fn steps(
        &mut self,
        items: &[StepSpec],
        path: &str,
        modes: &[&str],
        depth: usize,
    ) -> Option<Vec<Step>> {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, s) in items.iter().enumerate() {
            match self.step(s, &format!("{path}[{i}]"), modes, depth) {
                Some(st) => out.push(st),
                None => ok = false,
            }
        }
        ok.then_some(out)
    }

    fn duration(&mut self, q: &Qty, path: &str) -> Option<f64> {
        let v = self.value(q, path, Dim::Time, Bound::AtLeastZero)?;
        if v == 0.0 {
            self.err(
                path,
                "a profile step cannot last zero time",
                Some("give a duration above zero or remove the step".into()),
            );
            return None;
        }
        Some(v)
    }

    fn step(&mut self, s: &StepSpec, path: &str, modes: &[&str], depth: usize) -> Option<Step> {
        match (&s.mode, &s.repeat) {
            (Some(_), Some(_)) => {
                self.err(
                    path,
                    "a step has both `mode` and `repeat`",
                    Some(
                        "a step is `{ mode: NAME, for: TIME }` or `{ repeat: [...], times: N }`"
                            .into(),
                    ),
                );
                None
            }
            (None, None) => {
                self.err(
                    path,
                    "a step has neither `mode` nor `repeat`",
                    Some("write `{ mode: NAME, for: TIME }`".into()),
                );
                None
            }
            (Some(m), None) => {
                if s.times.is_some() {
                    self.err(
                        &format!("{path}.times"),
                        "`times` belongs to a `repeat` block",
                        Some("remove it".into()),
                    );
                }
                let mode = modes.iter().position(|n| n == m);
                // With no modes at all, that one problem is already reported.
                if mode.is_none() && !modes.is_empty() {
                    let hint = match did_you_mean(m, modes.iter().copied()) {
                        Some(x) => format!("did you mean `{x}`?"),
                        None => format!("the modes are {}", backticked(modes)),
                    };
                    self.err(
                        &format!("{path}.mode"),
                        format!("unknown mode `{m}`"),
                        Some(hint),
                    );
                }
                let seconds = match &s.duration {
                    Some(q) => self.duration(q, &format!("{path}.for")),
                    None => {
                        self.err(
                            path,
                            format!("the step in mode `{m}` has no duration"),
                            Some("add `for:`, e.g. `for: 10 s`".into()),
                        );
                        None
                    }
                };
                Some(Step::Hold {
                    mode: mode?,
                    seconds: seconds?,
                })
            }
            (None, Some(inner)) => {
                if depth >= MAX_REPEAT_NESTING {
                    self.err(
                        path,
                        format!("`repeat` blocks are nested deeper than {MAX_REPEAT_NESTING}"),
                        None,
                    );
                    return None;
                }
                if inner.is_empty() {
                    self.err(
                        &format!("{path}.repeat"),
                        "the `repeat` block is empty",
                        Some("list the steps to repeat".into()),
                    );
                    return None;
                }
                let steps = self.steps(inner, &format!("{path}.repeat"), modes, depth + 1);
                let until = match (&s.duration, &s.times) {
                    (Some(_), Some(_)) => {
                        self.err(
                            path,
                            "a `repeat` block has both `for` and `times`",
                            Some("keep one of them".into()),
                        );
                        None
                    }
                    (None, None) => {
                        self.err(
                            path,
                            "a `repeat` block has neither `for` nor `times`",
                            Some("add `times: N` or `for: TIME`".into()),
                        );
                        None
                    }
                    (Some(q), None) => self
                        .duration(q, &format!("{path}.for"))
                        .map(RepeatUntil::Seconds),
                    (None, Some(q)) => self
                        .count(Some(q), &format!("{path}.times"), 1_000_000_000)
                        .map(RepeatUntil::Times),
                };
                Some(Step::Repeat {
                    steps: steps?,
                    until: until?,
                })
            }
        }
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
fn index_of<'s>(ids: impl Iterator<Item = &'s str>) -> HashMap<&'s str, usize> {
    let mut map = HashMap::new();
    for (i, id) in ids.enumerate() {
        map.entry(id).or_insert(i);
    }
    map
}

/// The cell `over` on top of the preset `base`: every key `over` gives replaces the preset's
/// (a table or the polarization branch as a whole).
fn overlay(over: &CellSpec, base: &CellSpec) -> CellSpec {
    let pick = |a: &Option<Qty>, b: &Option<Qty>| a.clone().or_else(|| b.clone());
    CellSpec {
        preset: None,
        description: over
            .description
            .clone()
            .or_else(|| base.description.clone()),
        chemistry: over.chemistry.or(base.chemistry),
        capacity: pick(&over.capacity, &base.capacity),
        rated_current: pick(&over.rated_current, &base.rated_current),
        ocv: over.ocv.clone().or_else(|| base.ocv.clone()),
        resistance: over.resistance.clone().or_else(|| base.resistance.clone()),
        polarization: over
            .polarization
            .clone()
            .or_else(|| base.polarization.clone()),
        peukert: pick(&over.peukert, &base.peukert),
        cutoff: pick(&over.cutoff, &base.cutoff),
        max_current: pick(&over.max_current, &base.max_current),
        self_discharge: pick(&over.self_discharge, &base.self_discharge),
        temperature: over
            .temperature
            .clone()
            .or_else(|| base.temperature.clone()),
    }
}

/// The physical keys a cell gives itself (not `preset` or `description`).
fn given_keys(c: &CellSpec) -> Vec<&'static str> {
    [
        ("chemistry", c.chemistry.is_some()),
        ("capacity", c.capacity.is_some()),
        ("rated_current", c.rated_current.is_some()),
        ("ocv", c.ocv.is_some()),
        ("resistance", c.resistance.is_some()),
        ("polarization", c.polarization.is_some()),
        ("peukert", c.peukert.is_some()),
        ("cutoff", c.cutoff.is_some()),
        ("max_current", c.max_current.is_some()),
        ("self_discharge", c.self_discharge.is_some()),
        ("temperature", c.temperature.is_some()),
    ]
    .into_iter()
    .filter_map(|(k, given)| given.then_some(k))
    .collect()
}

fn chemistry(c: Option<ChemistrySpec>) -> Chemistry {
    match c.unwrap_or(ChemistrySpec::Other) {
        ChemistrySpec::LiIon => Chemistry::LiIon,
        ChemistrySpec::Lifepo4 => Chemistry::LiFePo4,
        ChemistrySpec::Nimh => Chemistry::NiMh,
        ChemistrySpec::Alkaline => Chemistry::Alkaline,
        ChemistrySpec::LiMno2 => Chemistry::LiMnO2,
        ChemistrySpec::LiSocl2 => Chemistry::LiSoCl2,
        ChemistrySpec::LeadAcid => Chemistry::LeadAcid,
        ChemistrySpec::Other => Chemistry::Other,
    }
}

fn capital(s: &str) -> String {
    // "a voltage" -> "the voltage"; used as the subject of a sentence.
    let rest = s
        .strip_prefix("an ")
        .or_else(|| s.strip_prefix("a "))
        .unwrap_or(s);
    format!("the {rest}")
}
