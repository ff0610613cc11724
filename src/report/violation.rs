//! The wording of a violation: the solver gives the numbers ([`Excess`]), this module the
//! sentence shown in tables, JSON and HTML.

use crate::model::Design;
use crate::solve::{Excess, Violation};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng};

/// A sentence with the numbers of violation `v` of design `d`.
pub fn violation_detail(d: &Design, v: &Violation) -> String {
    excess_detail(d, &v.excess)
}

/// A sentence with the numbers of `e`, naming the parts of design `d` it refers to.
pub fn excess_detail(d: &Design, e: &Excess) -> String {
    match *e {
        Excess::PulseCurrent {
            current_a,
            hold_s,
            limit_a,
        } => format!(
            "the pack gives {} in pulses of up to {}, above its {} pulse limit",
            fmt_eng(current_a, "A"),
            fmt_duration(hold_s),
            fmt_eng(limit_a, "A")
        ),
        Excess::ContinuousCurrent {
            current_a,
            limit_a,
            held_beyond_pulse,
        } => continuous_detail(current_a, limit_a, held_beyond_pulse),
        Excess::StageCurrent {
            stage,
            current_a,
            limit_a,
        } => format!(
            "`{}` delivers {}, above its {} rating",
            d.stages[stage].id,
            fmt_eng(current_a, "A"),
            fmt_eng(limit_a, "A")
        ),
        Excess::BeyondTable { stage, current_a } => format!(
            "`{}` delivers {}, beyond the highest current of its efficiency table; its last efficiency is held",
            d.stages[stage].id,
            fmt_eng(current_a, "A")
        ),
        Excess::InputVoltage {
            stage,
            voltage_v,
            limit_v,
        } => format!(
            "`{}` sees {} at its input, above its {} maximum",
            d.stages[stage].id,
            fmt_eng(voltage_v, "V"),
            fmt_eng(limit_v, "V")
        ),
        Excess::Junction {
            stage,
            loss_w,
            junction_c,
            limit_c,
        } => format!(
            "`{}` dissipates {}: its junction reaches {}, above its {} limit",
            d.stages[stage].id,
            fmt_eng(loss_w, "W"),
            fmt_celsius(junction_c),
            fmt_celsius(limit_c)
        ),
        Excess::RailVoltage {
            rail,
            voltage_v,
            limit_v,
            load,
        } => format!(
            "rail `{}` is at {}, above the {} maximum of `{}`",
            d.rail_name(rail),
            fmt_eng(voltage_v, "V"),
            fmt_eng(limit_v, "V"),
            d.loads[load].id
        ),
        Excess::OffRail { rail, load, state } => format!(
            "`{}` is `{}` but its rail `{}` is off, so it draws nothing",
            d.loads[load].id,
            d.loads[load].states[state].0,
            d.rail_name(rail)
        ),
    }
}

/// The sentence of a continuous current `current_a` above the pack's `limit_a`, held
/// `(hold_s, pulse_s)`: longer than the pulses the pack may give above it, when it has a pulse
/// limit.
fn continuous_detail(
    current_a: f64,
    limit_a: f64,
    held_beyond_pulse: Option<(f64, f64)>,
) -> String {
    match held_beyond_pulse {
        Some((hold_s, pulse_s)) => format!(
            "the pack gives {} for {} at a stretch, longer than its {} pulses: \
above its {} continuous limit",
            fmt_eng(current_a, "A"),
            fmt_duration(hold_s),
            fmt_duration(pulse_s),
            fmt_eng(limit_a, "A")
        ),
        None => format!(
            "the pack gives {}, above its {} continuous limit",
            fmt_eng(current_a, "A"),
            fmt_eng(limit_a, "A")
        ),
    }
}
