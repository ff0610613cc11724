//! Reports: the tree outline, budgets as tables, JSON and CSV. Every writer takes any
//! `std::io::Write`; the library itself never prints.

pub mod budget;
pub mod cells;
pub mod compare;
pub mod heat;
pub mod html;
pub mod json;
pub mod outline;
pub mod plot;
pub mod rows;
pub mod runtime;
pub mod size;
pub mod spread;
pub mod text;
mod violation;

use std::io::{self, Write};

pub use violation::{excess_detail, violation_detail};

use crate::model::{Chemistry, Design, SelfDischargeLaw, StageKind};
use crate::units::{fmt_celsius, fmt_eng};

/// Output format of a report.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Aligned text tables with engineering units.
    Table,
    /// JSON in SI units (DESIGN section 7).
    Json,
    /// CSV in SI units.
    Csv,
}

/// The opening of every caution (DESIGN section 9): what the numbers are worth.
const CAUTION_GENERAL: &str = "Caution: these are estimates from models and datasheet values; \
confirm them on the real hardware with measurements.";

/// The closing of every caution: whose word counts, and how far the thermal estimate goes.
const CAUTION_CLOSING: &str = "In every case, defer to the cell maker's limits, safety standards \
and local codes. Junction temperatures from theta_ja are estimates for a standard test board.";

/// The caution shown with results (DESIGN section 9), for the cell chemistries of the designs
/// shown: the general part always, then one sentence per kind of cell among `chemistries`, then
/// the closing part always.
///
/// # Examples
///
/// ```
/// use joulepath::model::Chemistry;
/// use joulepath::report::caution;
/// let alkaline = caution(&[Chemistry::Alkaline]);
/// assert!(alkaline.contains("IEC 60086-5") && !alkaline.contains("Lithium"));
/// assert!(caution(&[Chemistry::LiIon]).contains("IEC 62133-2"));
/// ```
pub fn caution(chemistries: &[Chemistry]) -> String {
    let has = |f: fn(Chemistry) -> bool| chemistries.iter().any(|c| f(*c));
    let mut parts = vec![CAUTION_GENERAL];
    if has(Chemistry::is_lithium) {
        parts.push(
            "Lithium cells can overheat, vent or ignite when shorted, over-discharged, \
overcharged or loaded beyond their limits (IEC 62133-2 covers portable rechargeable lithium \
cells).",
        );
    }
    if has(|c| matches!(c, Chemistry::LiMnO2 | Chemistry::LiSoCl2)) {
        parts.push(
            "Primary lithium cells must never be charged, not even by a reverse current through \
a parallel string (IEC 60086-4 covers their safety).",
        );
    }
    if has(|c| c == Chemistry::Alkaline) {
        parts.push(
            "Alkaline cells are primary: do not recharge them. Exhausted, reversed or \
deeply discharged cells can leak caustic electrolyte, so remove them from a product that is \
stored (IEC 60086-5 covers their safety).",
        );
    }
    if has(|c| c == Chemistry::NiMh) {
        parts.push(
            "NiMH cells heat up and vent when overcharged or charged too fast: charge them only \
with a charger that ends the charge for this chemistry (IEC 62133-1 covers portable nickel \
cells).",
        );
    }
    if has(|c| c == Chemistry::LeadAcid) {
        parts.push(
            "Lead-acid batteries give off hydrogen while they charge: ventilate their enclosure \
and keep sparks away (IEC 60896 for stationary batteries, and local codes).",
        );
    }
    if has(|c| c == Chemistry::Other) {
        parts.push("For cells of any other chemistry, read the maker's safety instructions.");
    }
    parts.push(CAUTION_CLOSING);
    parts.join(" ")
}

/// The caution for the cells of `designs`.
pub fn caution_for<'a>(designs: impl IntoIterator<Item = &'a Design>) -> String {
    let chemistries: Vec<Chemistry> = designs.into_iter().map(|d| d.pack.cell.chemistry).collect();
    caution(&chemistries)
}

/// Warnings about a design run at `ambient_c`, one sentence each: the ambient outside the
/// temperature table of the cell, where the factors are held at the nearest row instead of
/// following the chemistry. A table of one row (or none) applies everywhere and gives no warning.
///
/// # Examples
///
/// ```
/// let text = r#"
/// battery: { cell: alkaline-aa }
/// loads: [{ id: lamp, rail: battery, draw: { on: 10 mA } }]
/// modes: { lit: { lamp: on } }
/// profile: [{ mode: lit, for: 1 h }]
/// "#;
/// let d = joulepath::Design::from_text(text).unwrap();
/// assert!(joulepath::report::warnings(&d, 25.0).is_empty());
/// assert!(joulepath::report::warnings(&d, -55.0)[0].contains("below"));
/// ```
pub fn warnings(d: &Design, ambient_c: f64) -> Vec<String> {
    let mut out = table_warning(d, ambient_c);
    out.extend(default_warnings(d, ambient_c));
    out.extend(rail_buffer_warnings(d, ambient_c));
    out
}

/// Warnings about buffer capacitors on stages' rails too small for a mode: with the pack full
/// and the capacitor at the setpoint, a mode where the stage is at its limit drains the
/// capacitor by the difference I between the rail's draw and what the stage gives; over the
/// mode's longest stretch T the rail falls by about I T / C + ESR I (the capacitor's charge
/// balance, held at its start: an estimate). Where that takes it below a drawing load's
/// minimum supply, the warning says so and gives C = I T / (setpoint - minimum - ESR I), the
/// capacitance that would hold it by that estimate.
fn rail_buffer_warnings(d: &Design, ambient_c: f64) -> Vec<String> {
    use crate::solve::{PackState, RailBufferState, Solution, solve_point};
    let mut out = Vec::new();
    for (k, st) in d.stages.iter().enumerate() {
        let Some(b) = st.buffer else { continue };
        for (m, mode) in d.modes.iter().enumerate() {
            let hold = mode.longest_hold_s();
            if !(mode.stage_on[k] && hold > 0.0 && hold.is_finite()) {
                continue;
            }
            let at = PackState {
                soc: 1.0,
                v_pol: None,
                ambient_c,
            };
            let Solution::Point(p) = solve_point(d, m, at) else {
                continue;
            };
            let Some(rb) = p.rail_buffers.iter().find(|r| r.stage == k) else {
                continue;
            };
            if rb.state != RailBufferState::Limited || rb.current <= 0.0 {
                continue;
            }
            let i = rb.current;
            let low = st.setpoint - i * hold / b.capacitance - b.esr * i;
            let needs = d.tree.loads_on(k + 1).iter().filter_map(|&l| {
                let load = &d.loads[l];
                let drawing = mode.load_states[l].is_some_and(|s| load.states[s].1.is_drawing());
                load.v_min
                    .filter(|&v| drawing && low < v)
                    .map(|v| (load, v))
            });
            let Some((load, v_min)) = needs.max_by(|a, b| a.1.total_cmp(&b.1)) else {
                continue;
            };
            let room = st.setpoint - v_min - b.esr * i;
            let fix = if room > 0.0 {
                format!("about {} would hold it", fmt_eng(i * hold / room, "F"))
            } else {
                "its series resistance alone drops the rail below it; a capacitor of lower ESR, \
or a higher `input_current_limit`, would hold it"
                    .to_string()
            };
            out.push(format!(
                "the buffer capacitor on `{}`'s rail falls to about {} in mode `{}`, below `{}`'s \
minimum {} (the stage at its limit gives {} less than the rail draws, for up to {}); {fix} \
(an estimate with the pack full: check with `runtime`)",
                st.id,
                fmt_eng(low.max(0.0), "V"),
                mode.name,
                load.id,
                fmt_eng(v_min, "V"),
                fmt_eng(i, "A"),
                crate::units::fmt_duration(hold)
            ));
        }
    }
    out
}

/// How far from 25 °C an ambient is taken as away from the temperature a cell's values hold
/// at, for the warnings about temperature defaults, °C (common practice, no source).
const AWAY_FROM_25_C: f64 = 5.0;

/// Warnings about defaults that quietly hold a value the design did not give, and about stages
/// that can never regulate (risky defaults, not errors):
///
/// - a custom cell (not from a preset) run more than 5 °C from 25 °C with no `self_discharge`,
///   or with no temperature table (both factors taken as at 25 °C);
/// - a self-discharge given as a plain rate, run more than 5 °C from 25 °C: it is held
///   constant, where a rate at a temperature would follow it;
/// - a buck or linear regulator whose input never rises above its setpoint + dropout (the
///   highest input: the pack's full open-circuit voltage, or what the stage above can give), and
///   a boost on the pack whose input never falls to its setpoint + bypass drop (the lowest: the
///   pack's cutoff): the stage passes its input through the whole run.
fn default_warnings(d: &Design, ambient_c: f64) -> Vec<String> {
    let mut out = Vec::new();
    let cell = &d.pack.cell;
    let away = (ambient_c - 25.0).abs() > AWAY_FROM_25_C;
    if away && !cell.from_preset {
        if cell.self_discharge_per_s == 0.0 {
            out.push(format!(
                "cell `{}` gives no `self_discharge`, so it loses no charge of its own at the \
ambient {}; give its rate at a temperature, such as `self_discharge: {{ rate: 2 %/month, at: \
25 °C }}`, which follows the ambient",
                cell.name,
                fmt_celsius(ambient_c)
            ));
        }
        if cell.temp_capacity.points().count() < 2 && cell.temp_resistance.points().count() < 2 {
            out.push(format!(
                "cell `{}` has no `temperature` table, so its capacity and resistance at the \
ambient {} are taken as at room temperature; add rows such as `{{ at: {}, capacity: 90 %, \
resistance: 150 % }}` and `{{ at: 25 °C, capacity: 100 %, resistance: 100 % }}` from the cell's \
datasheet",
                cell.name,
                fmt_celsius(ambient_c),
                fmt_celsius(ambient_c)
            ));
        }
    }
    if away
        && cell.self_discharge_per_s > 0.0
        && cell.self_discharge_law == SelfDischargeLaw::Constant
    {
        out.push(format!(
            "the self-discharge of cell `{}` is a plain rate, held at every temperature, also at \
the ambient {}; give it at its temperature, such as `self_discharge: {{ rate: ..., at: 25 °C }}`, \
to follow the ambient (it then doubles every 10 °C unless the cell says otherwise)",
            cell.name,
            fmt_celsius(ambient_c)
        ));
    }
    for st in &d.stages {
        let v_max = rail_max_v(d, st.input);
        match st.kind {
            StageKind::Buck | StageKind::Linear if v_max < st.setpoint + st.dropout => {
                out.push(format!(
                    "stage `{}` never regulates: its input is at most {}, below its setpoint {} \
plus its dropout {}, so it passes its input through the whole run; check `output` and `dropout`, \
or the stage above it",
                    st.id,
                    fmt_eng(v_max, "V"),
                    fmt_eng(st.setpoint, "V"),
                    fmt_eng(st.dropout, "V")
                ));
            }
            StageKind::Boost
                if st.input == 0 && d.pack.cutoff_v() - st.bypass_drop > st.setpoint =>
            {
                out.push(format!(
                    "stage `{}` never regulates: the pack stays above its cutoff {}, and so above \
its setpoint {} plus its bypass drop {}, so it is in bypass the whole run; check `output`, or \
the pack",
                    st.id,
                    fmt_eng(d.pack.cutoff_v(), "V"),
                    fmt_eng(st.setpoint, "V"),
                    fmt_eng(st.bypass_drop, "V")
                ));
            }
            _ => {}
        }
    }
    out
}

/// The highest voltage rail `rail` can reach: the pack's full open-circuit voltage, or what the
/// stage feeding the rail gives at most from the highest voltage of its own input.
fn rail_max_v(d: &Design, rail: usize) -> f64 {
    if rail == 0 {
        return d.pack.ocv(1.0);
    }
    let st = &d.stages[rail - 1];
    let v_in = rail_max_v(d, st.input);
    match st.kind {
        StageKind::Switch => v_in,
        StageKind::BuckBoost => st.setpoint,
        StageKind::Boost => st.setpoint.max(v_in - st.bypass_drop),
        StageKind::Buck | StageKind::Linear => st.setpoint.min(v_in - st.dropout),
    }
}

/// The warning about an ambient outside the cell's temperature table.
fn table_warning(d: &Design, ambient_c: f64) -> Vec<String> {
    let cell = &d.pack.cell;
    let table = &cell.temp_capacity;
    let mut out = Vec::new();
    if table.points().count() < 2 {
        return out;
    }
    let (lo, hi) = table.x_range();
    // With a climate, its coldest and warmest hours around this mean.
    let (cold, warm) = d.climate.as_ref().map_or((ambient_c, ambient_c), |c| {
        let (a, b) = c.range(f64::INFINITY);
        (ambient_c + a, ambient_c + b)
    });
    for (t, side, edge) in [(cold, "below", lo), (warm, "above", hi)] {
        let outside = if side == "below" { t < lo } else { t > hi };
        if !outside {
            continue;
        }
        let what = if d.climate.is_some() {
            format!("the ambient reaches {}, {side}", fmt_celsius(t))
        } else {
            format!("the ambient {} is {side}", fmt_celsius(t))
        };
        out.push(format!(
            "{what} the temperature table of cell `{}` ({} to {}): its \
capacity and resistance factors are held at their {} values, so the results there are \
uncertain; add a row at {} to the cell's `temperature` table",
            cell.name,
            fmt_celsius(lo),
            fmt_celsius(hi),
            fmt_celsius(edge),
            fmt_celsius(t),
        ));
    }
    out
}

/// Write each of `warnings` as a `warning: ` paragraph wrapped at `width` columns.
///
/// # Errors
///
/// Those of the writer.
pub fn write_warnings(w: &mut dyn Write, warnings: &[String], width: usize) -> io::Result<()> {
    for warning in warnings {
        for (i, line) in wrap(&format!("warning: {warning}"), width)
            .iter()
            .enumerate()
        {
            writeln!(w, "{}{line}", if i == 0 { "" } else { "  " })?;
        }
    }
    Ok(())
}

/// Wrap `text` at `width` columns, never separating a number from its unit.
pub fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut words: Vec<String> = Vec::new();
    for word in text.split_whitespace() {
        let is_unit =
            word.chars().count() <= 4 && !word.chars().any(|c| c.is_ascii_digit() || c == '`');
        match words.last_mut() {
            Some(prev) if is_unit && prev.ends_with(|c: char| c.is_ascii_digit()) => {
                prev.push(' ');
                prev.push_str(word);
            }
            _ => words.push(word.to_string()),
        }
    }
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in &words {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}
