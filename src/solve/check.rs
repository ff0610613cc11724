//! Violations found at an operating point: limits exceeded that do not stop the product.

use super::point::OperatingPoint;
use crate::model::{Design, LossModel};

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
    /// The numbers: what was seen and the limit it passed (worded by
    /// [`crate::report::violation_detail`]).
    pub excess: Excess,
}

/// What a violation saw and the limit it passed, SI units; stages, loads, rails and states are
/// indices into the design.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Excess {
    /// The pack current in pulses above the pulse limit.
    PulseCurrent {
        /// Pack current, A.
        current_a: f64,
        /// Longest time the mode is held, s.
        hold_s: f64,
        /// Pulse limit, A.
        limit_a: f64,
    },
    /// The pack current above the continuous limit.
    ContinuousCurrent {
        /// Pack current, A.
        current_a: f64,
        /// Continuous limit, A.
        limit_a: f64,
        /// When the cell has a pulse limit and the mode is held a finite time: that time and
        /// the pulse length, s.
        held_beyond_pulse: Option<(f64, f64)>,
    },
    /// A stage's output current above its rating.
    StageCurrent {
        /// Stage index.
        stage: usize,
        /// Output current, A.
        current_a: f64,
        /// Rating, A.
        limit_a: f64,
    },
    /// A stage's output current beyond its efficiency table.
    BeyondTable {
        /// Stage index.
        stage: usize,
        /// Output current, A.
        current_a: f64,
    },
    /// A stage's input voltage above its maximum.
    InputVoltage {
        /// Stage index.
        stage: usize,
        /// Input voltage, V.
        voltage_v: f64,
        /// Maximum, V.
        limit_v: f64,
    },
    /// A stage's junction above its maximum temperature.
    Junction {
        /// Stage index.
        stage: usize,
        /// Loss, W.
        loss_w: f64,
        /// Junction temperature, °C.
        junction_c: f64,
        /// Limit, °C.
        limit_c: f64,
    },
    /// A live rail above a load's maximum supply.
    RailVoltage {
        /// Rail (0 the battery, `k + 1` stage `k`'s output).
        rail: usize,
        /// Rail voltage, V.
        voltage_v: f64,
        /// The load's maximum, V.
        limit_v: f64,
        /// Load index.
        load: usize,
    },
    /// A load in a drawing state on a rail that is off.
    OffRail {
        /// Rail.
        rail: usize,
        /// Load index.
        load: usize,
        /// The load's state.
        state: usize,
    },
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
    let mut found = Found {
        keep,
        mode: &design.modes[p.mode].name,
        out: Vec::new(),
    };
    pack_violations(design, p, &mut found);
    stage_violations(design, p, ambient_c, &mut found);
    rail_violations(design, p, &mut found);
    found.out
}

/// The violations gathered at one operating point, and which of them are wanted.
struct Found<'a> {
    /// Whether a violation of this kind on this subject is wanted.
    keep: &'a dyn Fn(ViolationKind, &str) -> bool,
    /// The name of the point's mode.
    mode: &'a str,
    /// The wanted violations found so far.
    out: Vec<Violation>,
}

impl Found<'_> {
    /// Record a violation of `kind` on `subject` if it is wanted; `excess` describes it only then.
    fn push(&mut self, kind: ViolationKind, subject: &str, excess: &dyn Fn() -> Excess) {
        if (self.keep)(kind, subject) {
            self.out.push(Violation {
                kind,
                subject: subject.to_string(),
                mode: self.mode.to_string(),
                t_s: None,
                excess: excess(),
            });
        }
    }
}

/// The pack's current against its limits. A mode held no longer than the cell's pulse length
/// is judged against the pulse limit; any other against the continuous limit.
fn pack_violations(design: &Design, p: &OperatingPoint, found: &mut Found<'_>) {
    let i = p.pack.current;
    let hold = design.modes[p.mode].longest_hold_s;
    match design.pack.max_pulse() {
        Some((max, length)) if hold <= length => {
            if i > max {
                found.push(ViolationKind::PackPulseOvercurrent, "battery", &|| {
                    Excess::PulseCurrent {
                        current_a: i,
                        hold_s: hold,
                        limit_a: max,
                    }
                });
            }
        }
        pulse => {
            if let Some(max) = design.pack.max_current_a() {
                if i > max {
                    found.push(ViolationKind::PackOvercurrent, "battery", &|| {
                        Excess::ContinuousCurrent {
                            current_a: i,
                            limit_a: max,
                            held_beyond_pulse: match pulse {
                                Some((_, length)) if hold.is_finite() => Some((hold, length)),
                                _ => None,
                            },
                        }
                    });
                }
            }
        }
    }
}

/// Each stage's output current, efficiency table, input voltage and junction temperature
/// against their limits.
fn stage_violations(design: &Design, p: &OperatingPoint, ambient_c: f64, found: &mut Found<'_>) {
    for (k, (st, sp)) in design.stages.iter().zip(&p.stages).enumerate() {
        if sp.state.is_running() {
            if let Some(max) = st.max_output_current {
                if sp.iout > max {
                    found.push(ViolationKind::StageOvercurrent, &st.id, &|| {
                        Excess::StageCurrent {
                            stage: k,
                            current_a: sp.iout,
                            limit_a: max,
                        }
                    });
                }
            }
            if matches!(st.loss, LossModel::Curves(_))
                && sp.state == super::StageState::Regulating
                && st.loss.extrapolated(sp.iout)
            {
                found.push(ViolationKind::TableExtrapolated, &st.id, &|| {
                    Excess::BeyondTable {
                        stage: k,
                        current_a: sp.iout,
                    }
                });
            }
        }
        let input_live = st.input == 0 || p.stages[st.input - 1].state.is_running();
        if input_live {
            if let Some(max) = st.input_max {
                if sp.vin > max {
                    found.push(ViolationKind::Overvoltage, &st.id, &|| {
                        Excess::InputVoltage {
                            stage: k,
                            voltage_v: sp.vin,
                            limit_v: max,
                        }
                    });
                }
            }
        }
        if let Some(tj) = junction_c(design, k, sp.loss, ambient_c) {
            if tj > st.tj_max {
                found.push(ViolationKind::JunctionHot, &st.id, &|| Excess::Junction {
                    stage: k,
                    loss_w: sp.loss,
                    junction_c: tj,
                    limit_c: st.tj_max,
                });
            }
        }
    }
}

/// Each load's supply: a live rail above the load's maximum, or a load drawing on a rail
/// that is off.
fn rail_violations(design: &Design, p: &OperatingPoint, found: &mut Found<'_>) {
    let mode = &design.modes[p.mode];
    for (rail, subject) in (0..design.tree.rails()).map(|r| (r, design.rail_name(r))) {
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
                        found.push(ViolationKind::RailHigh, subject, &|| Excess::RailVoltage {
                            rail,
                            voltage_v: v,
                            limit_v: max,
                            load: l,
                        });
                    }
                }
            } else if let Some(s) = mode.load_states[l] {
                if load.states[s].1.is_drawing() {
                    found.push(ViolationKind::OffRailDraw, &load.id, &|| Excess::OffRail {
                        rail,
                        load: l,
                        state: s,
                    });
                }
            }
        }
    }
}
