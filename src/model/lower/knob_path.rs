//! The paths of the `tolerances:` block: each resolved to the value of the checked design it
//! names ([`Knob`]), or a message and a fix saying why it names nothing that can vary.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::model::tolerance::{Knob, step};
use crate::spec::{Seg, segments};
use std::fmt::Write as _;

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
const STAGE_KEYS: [&str; 16] = [
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
    "input_current_limit",
    "buffer.capacitance",
    "buffer.esr",
    "buffer.leakage",
];
const BATTERY_KEYS: [&str; 10] = [
    "series",
    "parallel",
    "start",
    "aging.capacity",
    "aging.resistance",
    "buffer.capacitance",
    "buffer.esr",
    "buffer.leakage",
    "buffer.current_limit",
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
        "input_current_limit" => Knob::StageInputLimit(i),
        "buffer.capacitance" => Knob::StageBufferCapacitance(i),
        "buffer.esr" => Knob::StageBufferEsr(i),
        "buffer.leakage" => Knob::StageBufferLeakage(i),
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
pub(super) fn knob(d: &Design, pack_cell: &str, path: &str) -> Result<Knob, Miss> {
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
            "buffer.capacitance" => Ok(Knob::BufferCapacitance),
            "buffer.esr" => Ok(Knob::BufferEsr),
            "buffer.leakage" => Ok(Knob::BufferLeakage),
            "buffer.current_limit" => Ok(Knob::BufferLimit),
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
