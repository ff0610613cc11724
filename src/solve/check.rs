//! Violations found at an operating point: limits exceeded that do not stop the product.

use super::point::OperatingPoint;
use crate::model::{Design, LossModel};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng};

/// What limit is exceeded.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum ViolationKind {
    /// Pack current above its continuous limit (a mode held longer than the cell's pulse
    /// length, or a cell with no pulse limit).
    PackOvercurrent,
    /// Pack current above its pulse limit, in a mode held no longer than the pulse length.
    PackPulseOvercurrent,
    /// A stage's output current above its rating.
    StageOvercurrent,
    /// A stage's input above the maximum of its input range.
    Overvoltage,
    /// A live rail above the maximum supply of a load on it.
    RailHigh,
    /// A junction temperature above its maximum.
    JunctionHot,
    /// An output current above the highest current of the efficiency table.
    TableExtrapolated,
    /// A load asking to draw on a rail that is off.
    OffRailDraw,
}

impl ViolationKind {
    /// The name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            ViolationKind::PackOvercurrent => "pack_overcurrent",
            ViolationKind::PackPulseOvercurrent => "pack_pulse_overcurrent",
            ViolationKind::StageOvercurrent => "stage_overcurrent",
            ViolationKind::Overvoltage => "overvoltage",
            ViolationKind::RailHigh => "rail_high",
            ViolationKind::JunctionHot => "junction_hot",
            ViolationKind::TableExtrapolated => "table_extrapolated",
            ViolationKind::OffRailDraw => "off_rail_draw",
        }
    }
}

/// One violation.
#[derive(Debug, Clone, PartialEq)]
pub struct Violation {
    /// What limit.
    pub kind: ViolationKind,
    /// `battery`, a stage id or a load id.
    pub subject: String,
    /// The mode it happens in.
    pub mode: String,
    /// When it first happens, s (`None` for a single operating point).
    pub t_s: Option<f64>,
    /// A sentence with the numbers.
    pub detail: String,
}

/// Junction temperature of stage `k` dissipating `loss` W: ambient + loss x theta_ja.
///
/// # Formula
///
/// Tj = Ta + P x theta_ja (JEDEC JESD51-1 definition of theta_ja; an estimate, since theta_ja
/// is measured on a standard board, JESD51-2A).
pub fn junction_c(design: &Design, k: usize, loss: f64, ambient_c: f64) -> Option<f64> {
    design.stages[k].theta_ja.map(|t| ambient_c + loss * t)
}

/// Every violation at operating point `p`.
pub fn violations(design: &Design, p: &OperatingPoint, ambient_c: f64) -> Vec<Violation> {
    violations_where(design, p, ambient_c, &|_, _| true)
}

/// The violations at operating point `p` for which `keep(kind, subject)` holds; the others are
/// not even described (the runtime asks only for those it has not seen yet).
pub fn violations_where(
    design: &Design,
    p: &OperatingPoint,
    ambient_c: f64,
    keep: &dyn Fn(ViolationKind, &str) -> bool,
) -> Vec<Violation> {
    let mode = &design.modes[p.mode];
    let mut out = Vec::new();
    let mut push = |kind, subject: &str, detail: &dyn Fn() -> String| {
        if keep(kind, subject) {
            out.push(Violation {
                kind,
                subject: subject.to_string(),
                mode: mode.name.clone(),
                t_s: None,
                detail: detail(),
            });
        }
    };
    // A mode held no longer than the cell's pulse length is judged against the pulse limit;
    // any other against the continuous limit.
    let i = p.pack.current;
    let hold = mode.longest_hold_s;
    match design.pack.max_pulse() {
        Some((max, length)) if hold <= length => {
            if i > max {
                push(ViolationKind::PackPulseOvercurrent, "battery", &|| {
                    format!(
                        "the pack gives {} in pulses of up to {}, above its {} pulse limit",
                        fmt_eng(i, "A"),
                        fmt_duration(hold),
                        fmt_eng(max, "A")
                    )
                });
            }
        }
        pulse => {
            if let Some(max) = design.pack.max_current_a() {
                if i > max {
                    push(ViolationKind::PackOvercurrent, "battery", &|| match pulse {
                        Some((_, length)) if hold.is_finite() => format!(
                            "the pack gives {} for {} at a stretch, longer than its {} pulses: \
above its {} continuous limit",
                            fmt_eng(i, "A"),
                            fmt_duration(hold),
                            fmt_duration(length),
                            fmt_eng(max, "A")
                        ),
                        _ => format!(
                            "the pack gives {}, above its {} continuous limit",
                            fmt_eng(i, "A"),
                            fmt_eng(max, "A")
                        ),
                    });
                }
            }
        }
    }
    for (k, (st, sp)) in design.stages.iter().zip(&p.stages).enumerate() {
        if sp.state.is_running() {
            if let Some(max) = st.max_output_current {
                if sp.iout > max {
                    push(ViolationKind::StageOvercurrent, &st.id, &|| {
                        format!(
                            "`{}` delivers {}, above its {} rating",
                            st.id,
                            fmt_eng(sp.iout, "A"),
                            fmt_eng(max, "A")
                        )
                    });
                }
            }
            if matches!(st.loss, LossModel::Curves(_))
                && sp.state == super::StageState::Regulating
                && st.loss.extrapolated(sp.iout)
            {
                push(ViolationKind::TableExtrapolated, &st.id, &|| {
                    format!(
                        "`{}` delivers {}, beyond the highest current of its efficiency table; its last efficiency is held",
                        st.id,
                        fmt_eng(sp.iout, "A")
                    )
                });
            }
        }
        let input_live = st.input == 0 || p.stages[st.input - 1].state.is_running();
        if input_live {
            if let Some(max) = st.input_max {
                if sp.vin > max {
                    push(ViolationKind::Overvoltage, &st.id, &|| {
                        format!(
                            "`{}` sees {} at its input, above its {} maximum",
                            st.id,
                            fmt_eng(sp.vin, "V"),
                            fmt_eng(max, "V")
                        )
                    });
                }
            }
        }
        if let Some(tj) = junction_c(design, k, sp.loss, ambient_c) {
            if tj > st.tj_max {
                push(ViolationKind::JunctionHot, &st.id, &|| {
                    format!(
                        "`{}` dissipates {}: its junction reaches {}, above its {} limit",
                        st.id,
                        fmt_eng(sp.loss, "W"),
                        fmt_celsius(tj),
                        fmt_celsius(st.tj_max)
                    )
                });
            }
        }
    }
    for (rail, subject) in (0..design.tree.rails()).map(|r| (r, design.rail_name(r).to_string())) {
        let live = rail == 0 || p.stages[rail - 1].state.is_running();
        let v = if rail == 0 {
            p.pack.voltage
        } else {
            p.stages[rail - 1].vout
        };
        for &l in design.tree.loads_on(rail) {
            let load = &design.loads[l];
            if live {
                if let Some(max) = load.v_max {
                    if v > max {
                        push(ViolationKind::RailHigh, &subject, &|| {
                            format!(
                                "rail `{subject}` is at {}, above the {} maximum of `{}`",
                                fmt_eng(v, "V"),
                                fmt_eng(max, "V"),
                                load.id
                            )
                        });
                    }
                }
            } else if let Some(s) = mode.load_states[l] {
                let (name, draw) = &load.states[s];
                if draw.is_drawing() {
                    push(ViolationKind::OffRailDraw, &load.id, &|| {
                        format!(
                            "`{}` is `{name}` but its rail `{subject}` is off, so it draws nothing",
                            load.id
                        )
                    });
                }
            }
        }
    }
    out
}
