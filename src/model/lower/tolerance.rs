//! The `tolerances:` block: each path resolved to the value of the checked design it varies
//! ([`Knob`]), each spread read in that value's unit ([`Dist`]).

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::model::tolerance::{Dist, Knob, Tolerance, step};
use crate::spec::{Seg, ToleranceSpec, segments};
use crate::units::parse_fraction;
use std::fmt::Write as _;

/// Most values a design may vary.
pub(crate) const MAX_TOLERANCES: usize = 200;
/// Most choices of one `pick`.
const MAX_PICKS: usize = 1000;

const CELL_KEYS: [&str; 8] = [
    "capacity",
    "resistance",
    "self_discharge",
    "peukert",
    "cutoff",
    "rated_current",
    "polarization.resistance",
    "polarization.time_constant",
];
const STAGE_KEYS: [&str; 12] = [
    "output",
    "current",
    "headroom",
    "quiescent",
    "shutdown",
    "efficiency",
    "dropout",
    "bypass_drop",
    "on_resistance",
    "theta_ja",
    "loss.drop",
    "loss.resistance",
];
const BATTERY_KEYS: [&str; 6] = [
    "series",
    "parallel",
    "start",
    "aging.capacity",
    "aging.resistance",
    "cell.<key>",
];

fn dotted(rest: &[Seg<'_>]) -> String {
    let mut s = String::new();
    for r in rest {
        match r {
            Seg::Name(n) => {
                if !s.is_empty() {
                    s.push('.');
                }
                s.push_str(n);
            }
            Seg::Index(i) => {
                let _ = write!(s, "[{i}]");
            }
        }
    }
    s
}

/// A path that names nothing that can vary: the message and the fix.
type Miss = (String, String);

fn unknown(what: &str, got: &str, keys: &[&str]) -> Miss {
    let hint = match did_you_mean(got, keys.iter().copied()) {
        Some(s) => format!("did you mean `{s}`?"),
        None => format!("{what} that can vary: {}", backticked(keys)),
    };
    (format!("`{got}` is not a value that can vary"), hint)
}

fn cell_knob(rest: &[Seg<'_>]) -> Result<Knob, Miss> {
    let key = dotted(rest);
    Ok(match key.as_str() {
        "capacity" => Knob::CellCapacity,
        "resistance" => Knob::CellResistance,
        "self_discharge" => Knob::CellSelfDischarge,
        "peukert" => Knob::CellPeukert,
        "cutoff" => Knob::CellCutoff,
        "rated_current" => Knob::CellRatedCurrent,
        "polarization.resistance" => Knob::CellPolarizationR,
        "polarization.time_constant" => Knob::CellPolarizationTau,
        _ => return Err(unknown("the cell's values", &key, &CELL_KEYS)),
    })
}

fn stage_knob(i: usize, rest: &[Seg<'_>]) -> Result<Knob, Miss> {
    let key = dotted(rest);
    Ok(match key.as_str() {
        "output" => Knob::StageOutput(i),
        "current" => Knob::StageLedCurrent(i),
        "quiescent" => Knob::StageQuiescent(i),
        "shutdown" => Knob::StageShutdown(i),
        "efficiency" => Knob::StageEfficiency(i),
        // An LED driver's headroom is held as its dropout.
        "dropout" | "headroom" => Knob::StageDropout(i),
        "bypass_drop" => Knob::StageBypassDrop(i),
        "on_resistance" => Knob::StageOnResistance(i),
        "theta_ja" => Knob::StageThetaJa(i),
        "loss.drop" => Knob::StageLossDrop(i),
        "loss.resistance" => Knob::StageLossResistance(i),
        _ => return Err(unknown("a stage's values", &key, &STAGE_KEYS)),
    })
}

/// The item of a list named by id or `[N]`.
fn item<'s>(
    list: &str,
    seg: Option<&Seg<'_>>,
    ids: impl Iterator<Item = &'s str> + Clone,
) -> Result<usize, Miss> {
    let n = ids.clone().count();
    match seg {
        Some(Seg::Index(i)) if *i < n => Ok(*i),
        Some(Seg::Index(i)) => Err((
            format!("`{list}[{i}]` does not exist: `{list}` has {n} items"),
            format!("give an index from 0 to {}", n.saturating_sub(1)),
        )),
        Some(Seg::Name(id)) => ids.clone().position(|x| x == *id).ok_or_else(|| {
            let names: Vec<&str> = ids.collect();
            let hint = match did_you_mean(id, names.iter().copied()) {
                Some(s) => format!("did you mean `{s}`?"),
                None => format!("the {list} are {}", backticked(&names)),
            };
            (format!("there is no `{id}` in `{list}`"), hint)
        }),
        None => Err((
            format!("the path ends at `{list}`"),
            format!("name an item of `{list}` and its value, e.g. `{list}.ID.KEY`"),
        )),
    }
}

/// The value of `d` that `path` names.
pub(crate) fn knob(d: &Design, pack_cell: &str, path: &str) -> Result<Knob, Miss> {
    let segs = segments(path).map_err(|m| {
        (
            m,
            "write a path such as `loads.radio.draw.tx` or `profile[0].repeat[1].for`".to_string(),
        )
    })?;
    let top = ["ambient", "cells", "battery", "stages", "loads", "profile"];
    match segs.as_slice() {
        [Seg::Name("ambient")] => Ok(Knob::Ambient),
        [Seg::Name("cells"), Seg::Name(name), rest @ ..] => {
            if *name != pack_cell {
                return Err((
                    format!(
                        "`cells.{name}` is not the pack's cell (`{pack_cell}`): varying it changes nothing"
                    ),
                    format!("vary `cells.{pack_cell}.KEY` or `battery.cell.KEY`"),
                ));
            }
            cell_knob(rest)
        }
        [Seg::Name("battery"), Seg::Name("cell"), rest @ ..] => cell_knob(rest),
        [Seg::Name("battery"), rest @ ..] => match dotted(rest).as_str() {
            "series" => Ok(Knob::Series),
            "parallel" => Ok(Knob::Parallel),
            "start" => Ok(Knob::StartSoc),
            "aging.capacity" => Ok(Knob::AgingCapacity),
            "aging.resistance" => Ok(Knob::AgingResistance),
            k => Err(unknown("the pack's values", k, &BATTERY_KEYS)),
        },
        [Seg::Name("stages"), rest @ ..] => stages_knob(d, rest),
        [Seg::Name("loads"), rest @ ..] => loads_knob(d, rest),
        [Seg::Name("profile"), rest @ ..] => profile_knob(d, rest),
        [Seg::Name(first), ..] => {
            let hint = match did_you_mean(first, top.iter().copied()) {
                Some(s) => format!("did you mean `{s}`?"),
                None => format!("a path starts with {}", backticked(&top)),
            };
            Err((
                format!("`{first}` is not a part of the design that can vary"),
                hint,
            ))
        }
        _ => Err((
            "the path is empty".into(),
            "write a path such as `loads.radio.draw.tx`".into(),
        )),
    }
}

/// The value of a stage of `d` that `rest` (after `stages`) names: the stage by id or index,
/// then its key; an LED driver's `current` varies, not its `output`.
fn stages_knob(d: &Design, rest: &[Seg<'_>]) -> Result<Knob, Miss> {
    let i = item(
        "stages",
        rest.first(),
        d.stages.iter().map(|s| s.id.as_str()),
    )?;
    match stage_knob(i, &rest[1..]) {
        Ok(Knob::StageOutput(_)) if d.stages[i].led_current.is_some() => Err((
            format!(
                "`{}` is an LED driver: its output follows from its LED and cannot vary",
                d.stages[i].id
            ),
            "vary the driver's `current` instead".into(),
        )),
        Ok(Knob::StageLedCurrent(_)) if d.stages[i].led_current.is_none() => Err((
            format!(
                "`{}` is not an LED driver: it has no `current`",
                d.stages[i].id
            ),
            "vary `output` for a regulator's setpoint".into(),
        )),
        k => k,
    }
}

/// The value of a load of `d` that `rest` (after `loads`) names: `ID.draw.STATE`, the draw of
/// one state given as a value (not a capture, not an LED).
fn loads_knob(d: &Design, rest: &[Seg<'_>]) -> Result<Knob, Miss> {
    let l = item("loads", rest.first(), d.loads.iter().map(|x| x.id.as_str()))?;
    let load = &d.loads[l];
    match &rest[1..] {
        [Seg::Name("draw"), Seg::Name(state)]
            if load
                .captured
                .iter()
                .any(|c| load.states[c.state].0 == *state) =>
        {
            Err((
                format!(
                    "the state `{state}` of `{}` follows a capture, whose draw cannot vary",
                    load.id
                ),
                "vary the profile step's `for`, or give the state a value instead of a capture"
                    .into(),
            ))
        }
        [Seg::Name("draw"), Seg::Name(state)]
            if load
                .states
                .iter()
                .any(|(n, d)| n == state && matches!(d, Draw::Led { .. })) =>
        {
            Err((
                format!(
                    "the state `{state}` of `{}` is an LED, whose law cannot vary",
                    load.id
                ),
                "its driver holds its current: vary the driver's `current` instead".into(),
            ))
        }
        [Seg::Name("draw"), Seg::Name(state)] => load
            .states
            .iter()
            .position(|(n, _)| n == state)
            .map(|s| Knob::LoadDraw(l, s))
            .ok_or_else(|| {
                let names: Vec<&str> = load.states.iter().map(|(n, _)| n.as_str()).collect();
                let hint = match did_you_mean(state, names.iter().copied()) {
                    Some(s) => format!("did you mean `{s}`?"),
                    None => {
                        format!("the states of `{}` are {}", load.id, backticked(&names))
                    }
                };
                (format!("load `{}` has no state `{state}`", load.id), hint)
            }),
        _ => Err((
            format!(
                "`{}` is not a value of a load that can vary",
                dotted(&rest[1..])
            ),
            "vary what a load draws in one state: `loads.ID.draw.STATE`".into(),
        )),
    }
}

/// The value of a profile item of `d` that `rest` (after `profile`) names: `[i]` items through
/// `.repeat`, then `for` or `times`.
fn profile_knob(d: &Design, rest: &[Seg<'_>]) -> Result<Knob, Miss> {
    let mut at = Vec::new();
    let mut segs = rest;
    loop {
        let Some(Seg::Index(i)) = segs.first() else {
            return Err((
                "a profile item is named by its index".into(),
                "write `profile[0].for` or `profile[1].repeat[0].for`".into(),
            ));
        };
        at.push(*i);
        if step(&d.profile, &at).is_none() {
            return Err((
                format!("`profile{}` does not exist", index_text(&at)),
                "count items from 0 in the order the file gives them".into(),
            ));
        }
        let here = step(&d.profile, &at);
        if let Some(found) = captured_step_knob(d, here, &at, &segs[1..]) {
            return found;
        }
        match &segs[1..] {
            [Seg::Name("repeat"), more @ ..] => {
                if !matches!(here, Some(Step::Repeat { .. })) {
                    return Err((
                        format!("`profile{}` is no repeat block", index_text(&at)),
                        format!("vary `profile{}.for`", index_text(&at)),
                    ));
                }
                segs = more;
            }
            other => return step_knob(here, at, other),
        }
    }
}

/// A step in a mode with captures is a block of the captures' segments, which the file does
/// not write: only its duration can vary, and only when the file gives one. The value `key`
/// names of step `here` at `at` when it is such a block, none for another step.
fn captured_step_knob(
    d: &Design,
    here: Option<&Step>,
    at: &[usize],
    key: &[Seg<'_>],
) -> Option<Result<Knob, Miss>> {
    let Some(Step::Repeat { steps, until }) = here else {
        return None;
    };
    let captured = steps
        .iter()
        .all(|s| matches!(s, Step::Hold { mode, .. } if d.modes[*mode].part_of.is_some()));
    if !captured {
        return None;
    }
    Some(match (key, until) {
        ([Seg::Name("for")], RepeatUntil::Seconds(_)) => Ok(Knob::StepFor(at.to_vec())),
        ([Seg::Name("for")], RepeatUntil::Times(_)) => Err((
            format!(
                "`profile{}` lasts one capture (`for: capture`), which cannot vary",
                index_text(at)
            ),
            "give the step a duration to vary it, such as `for: 10 ms`".into(),
        )),
        _ => Err((
            format!(
                "`profile{}` is a step in a mode with a capture: only its `for` can vary",
                index_text(at)
            ),
            format!("vary `profile{}.for`", index_text(at)),
        )),
    })
}

/// The value `key` (`for` or `times`) of profile step `here` at `at`.
fn step_knob(here: Option<&Step>, at: Vec<usize>, key: &[Seg<'_>]) -> Result<Knob, Miss> {
    let times = matches!(
        here,
        Some(Step::Repeat {
            until: RepeatUntil::Times(_),
            ..
        })
    );
    match key {
        [Seg::Name("for")] if times => Err((
            format!(
                "`profile{}` runs a number of `times`, not `for` a duration",
                index_text(&at)
            ),
            format!("vary `profile{}.times`", index_text(&at)),
        )),
        [Seg::Name("for")] => Ok(Knob::StepFor(at)),
        [Seg::Name("times")] if times => Ok(Knob::RepeatTimes(at)),
        [Seg::Name("times")] => Err((
            format!("`profile{}` has no `times`", index_text(&at)),
            format!("vary `profile{}.for`", index_text(&at)),
        )),
        other => Err((
            format!(
                "`{}` is not a value of a profile item that can vary",
                dotted(other)
            ),
            "vary a duration (`.for`) or a number of passes (`.times`)".into(),
        )),
    }
}

fn index_text(at: &[usize]) -> String {
    at.iter()
        .map(|i| format!("[{i}]"))
        .collect::<Vec<_>>()
        .join(".repeat")
}

impl Lower<'_> {
    /// Every tolerance of `spec` against the checked design `d`.
    pub(super) fn tolerances(&mut self, spec: &DesignSpec, d: &Design) -> Option<Vec<Tolerance>> {
        if spec.tolerances.len() > MAX_TOLERANCES {
            self.err(
                "tolerances",
                format!(
                    "{} values vary; at most {MAX_TOLERANCES} can",
                    spec.tolerances.len()
                ),
                Some("keep the values that matter most".into()),
            );
            return None;
        }
        let pack_cell = match &spec.battery.cell {
            CellRef::Name(n) => n.as_str(),
            CellRef::Inline(_) => d.pack.cell.name.as_str(),
        };
        let mut out: Vec<Tolerance> = Vec::new();
        let mut ok = true;
        for (path, t) in &spec.tolerances {
            let at = format!("tolerances.{path}");
            let knob = match knob(d, pack_cell, path) {
                Ok(k) => k,
                Err((msg, hint)) => {
                    self.err_of(DiagnosticKind::UnknownPath, &at, msg, Some(hint));
                    ok = false;
                    continue;
                }
            };
            if let Some(other) = out.iter().find(|o| o.knob == knob) {
                self.err(
                    &at,
                    format!("`{path}` names the same value as `{}`", other.path),
                    Some("keep one of the two lines".into()),
                );
                ok = false;
                continue;
            }
            let nominal = knob.get(d);
            if !nominal.is_finite() {
                self.err(
                    &at,
                    format!("`{path}` has no single value in this design to vary"),
                    Some("a curve or table cannot vary as one number; vary a value the design gives as one number (a constant efficiency, `loss.drop`, a polarization the cell has)".into()),
                );
                ok = false;
                continue;
            }
            match self.dist(t, &knob, d, nominal, &at) {
                Some(dist) => out.push(Tolerance {
                    path: path.clone(),
                    knob,
                    dist,
                    nominal,
                }),
                None => ok = false,
            }
        }
        ok.then_some(out)
    }

    /// A value of a spread in the knob's unit (`relative`: a percentage is of `of`).
    fn spread_value(&mut self, q: &Qty, dim: Dim, of: Option<f64>, at: &str) -> Option<f64> {
        let text = q.text().trim();
        if let Some(of) = of.filter(|_| text.ends_with('%')) {
            return match parse_fraction(text) {
                Ok(f) => Some(f * of.abs()),
                Err(e) => {
                    self.err(at, e.to_string(), e.hint());
                    None
                }
            };
        }
        // A temperature band in kelvin is a difference, not an absolute temperature.
        if dim == Dim::Temperature && of.is_some() && text.ends_with('K') {
            return self.quantity(q, at, &[dim]).map(|v| v.value() + 273.15);
        }
        self.quantity(q, at, &[dim]).map(Quantity::value)
    }

    /// The spread `t` of a value `knob` of `d` (nominal `nominal`) in the value's unit: its
    /// values read and checked, those it gives as its own within the value's physical range.
    fn dist(
        &mut self,
        t: &ToleranceSpec,
        knob: &Knob,
        d: &Design,
        nominal: f64,
        at: &str,
    ) -> Option<Dist> {
        let dim = knob.dim(d);
        let dist = self.spread_dist(t, dim, nominal, at)?;
        self.own_values_physical(t, &dist, knob.range(), dim, at)
            .then_some(dist)
    }

    /// The spread `t` read in the unit of `dim`: a band `±x` around `nominal` (a normal with
    /// sigma a third of it), a normal, a uniform between two bounds or a pick among choices.
    fn spread_dist(&mut self, t: &ToleranceSpec, dim: Dim, nominal: f64, at: &str) -> Option<Dist> {
        Some(match t {
            ToleranceSpec::Band(q) => {
                let band = self.spread_value(q, dim, Some(nominal), at)?;
                if band.is_nan() || band <= 0.0 {
                    self.err(
                        at,
                        format!("the band `±{}` varies nothing", q.text()),
                        Some("give a band above zero, or remove the line".into()),
                    );
                    return None;
                }
                Dist::Normal {
                    mean: nominal,
                    sigma: band / 3.0,
                }
            }
            ToleranceSpec::Normal { mean, sigma } => {
                let mean = self.spread_value(mean, dim, None, at)?;
                let sigma = self.spread_value(sigma, dim, Some(mean), at)?;
                if sigma.is_nan() || sigma <= 0.0 {
                    self.err(
                        at,
                        "`sigma` must be above zero",
                        Some(
                            "give the standard deviation, e.g. `sigma: 4 mA` or `sigma: 5 %`"
                                .into(),
                        ),
                    );
                    return None;
                }
                Dist::Normal { mean, sigma }
            }
            ToleranceSpec::Uniform(b) => {
                if b.len() != 2 {
                    self.err(
                        at,
                        format!("a uniform spread has two bounds, found {}", b.len()),
                        Some("write `[LOW, HIGH]`, e.g. `[18 µA, 35 µA]`".into()),
                    );
                    return None;
                }
                let lo = self.spread_value(&b[0], dim, None, at)?;
                let hi = self.spread_value(&b[1], dim, None, at)?;
                if lo.partial_cmp(&hi) != Some(std::cmp::Ordering::Less) {
                    self.err(at, format!("the bounds `[{}, {}]` are not low then high", b[0].text(), b[1].text()), Some("write the lower bound first; for a fixed value, change the design instead".into()));
                    return None;
                }
                Dist::Uniform { lo, hi }
            }
            ToleranceSpec::Pick(v) => {
                if v.is_empty() || v.len() > MAX_PICKS {
                    self.err(
                        at,
                        format!("a pick has 1 to {MAX_PICKS} choices, found {}", v.len()),
                        Some("list the values, e.g. `{ pick: [1 h, 2 h, 4 h] }`".into()),
                    );
                    return None;
                }
                let mut out = Vec::with_capacity(v.len());
                for q in v {
                    out.push(self.spread_value(q, dim, None, at)?);
                }
                Dist::Pick(out)
            }
        })
    }

    /// Whether the values spread `t` gives as its own (a mean, bounds, choices; read into
    /// `dist`) are physical: within `range`, and whole where the value is; each problem
    /// reported.
    fn own_values_physical(
        &mut self,
        t: &ToleranceSpec,
        dist: &Dist,
        range: crate::model::Range,
        dim: Dim,
        at: &str,
    ) -> bool {
        // The values a spread gives as its own (a mean, bounds, choices) must be physical.
        let (own, texts): (Vec<f64>, Vec<&str>) = match (dist, t) {
            (Dist::Normal { mean, .. }, ToleranceSpec::Normal { mean: q, .. }) => {
                (vec![*mean], vec![q.text()])
            }
            (Dist::Uniform { lo, hi }, ToleranceSpec::Uniform(q)) => {
                (vec![*lo, *hi], q.iter().map(Qty::text).collect())
            }
            (Dist::Pick(v), ToleranceSpec::Pick(q)) => {
                (v.clone(), q.iter().map(Qty::text).collect())
            }
            _ => (Vec::new(), Vec::new()),
        };
        if let Some(k) = own.iter().position(|v| !range.contains(*v)) {
            self.err(
                at,
                format!(
                    "`{}` is outside what this value can be: it {}",
                    texts[k],
                    range_words(range, dim)
                ),
                Some("give values the design could have".into()),
            );
            return false;
        }
        if range.whole && own.iter().any(|v| v.fract() != 0.0) {
            self.err(
                at,
                "this value is a whole number",
                Some("give whole numbers, e.g. `{ pick: [1, 2] }`".into()),
            );
            return false;
        }
        true
    }
}

/// What a range allows, in words and in the value's unit.
fn range_words(r: crate::model::Range, dim: Dim) -> String {
    let show = |v: f64| match dim {
        Dim::Fraction => fmt_percent(v),
        Dim::Temperature => crate::units::fmt_celsius(v),
        Dim::Number => format!("{v}"),
        _ => fmt_eng(v, ""),
    };
    match (r.lo == 0.0, r.lo_closed, r.hi >= f64::MAX) {
        (true, true, true) => "cannot be negative".into(),
        (true, false, true) => "must be above zero".into(),
        (_, closed, true) => format!(
            "must be {} {}",
            if closed { "at least" } else { "above" },
            show(r.lo)
        ),
        (_, closed, false) => format!(
            "must be {} {} and at most {}",
            if closed { "at least" } else { "above" },
            show(r.lo),
            show(r.hi)
        ),
    }
}
