//! Wire structs of the JSON output (DESIGN section 7): SI units, key suffixes _v _a _w _s _wh _c,
//! fractions 0..1.

use serde::Serialize;

use crate::model::Design;
use crate::solve::{
    ModeBudget, RunResult, Solution, StageState, TracePoint, Violation, junction_c,
};

/// `budget --format json`.
#[derive(Debug, Serialize)]
pub struct BudgetJson {
    /// Design title.
    pub design: String,
    /// State of charge of the budget, 0..1.
    pub soc: f64,
    /// One entry per mode.
    pub modes: Vec<ModeJson>,
}

/// One mode of a budget.
#[derive(Debug, Serialize)]
pub struct ModeJson {
    /// Mode name.
    pub mode: String,
    /// Whether the pack collapses (no operating point); the figures are then null or empty.
    pub collapse: bool,
    /// The pack.
    pub battery: BatteryJson,
    /// Every stage.
    pub stages: Vec<StageJson>,
    /// Every load.
    pub loads: Vec<LoadJson>,
    /// Violations at this point.
    pub violations: Vec<ViolationJson>,
}

/// The pack at an operating point.
#[derive(Debug, Serialize)]
pub struct BatteryJson {
    /// Terminal voltage.
    pub voltage_v: Option<f64>,
    /// Open-circuit voltage.
    pub open_circuit_v: f64,
    /// Current, positive when discharging.
    pub current_a: Option<f64>,
    /// Terminal power.
    pub power_w: Option<f64>,
    /// Internal loss I x (OCV - V).
    pub loss_w: Option<f64>,
}

/// A stage at an operating point.
#[derive(Debug, Serialize)]
pub struct StageJson {
    /// Id.
    pub id: String,
    /// Kind.
    pub kind: String,
    /// State.
    pub state: String,
    /// Input voltage.
    pub vin_v: f64,
    /// Input current.
    pub iin_a: f64,
    /// Output voltage.
    pub vout_v: f64,
    /// Output current.
    pub iout_a: f64,
    /// Loss.
    pub loss_w: f64,
    /// P_out / P_in, null where off or locked out.
    pub efficiency: Option<f64>,
    /// Junction temperature, null without theta_ja.
    pub junction_c: Option<f64>,
}

/// A load at an operating point.
#[derive(Debug, Serialize)]
pub struct LoadJson {
    /// Id.
    pub id: String,
    /// State name.
    pub state: String,
    /// Rail voltage (0 when the rail is off).
    pub voltage_v: f64,
    /// Current.
    pub current_a: f64,
    /// Power.
    pub power_w: f64,
}

/// A violation.
#[derive(Debug, Serialize)]
pub struct ViolationJson {
    /// Kind.
    pub kind: String,
    /// Subject id.
    pub subject: String,
    /// Mode.
    pub mode: String,
    /// When it first happens, null for a single operating point.
    pub t_s: Option<f64>,
    /// A sentence with the numbers.
    pub detail: String,
}

impl ViolationJson {
    /// The wire form of violation `v` of design `d`.
    pub fn new(d: &Design, v: &Violation) -> Self {
        Self {
            kind: v.kind.name().into(),
            subject: v.subject.clone(),
            mode: v.mode.clone(),
            t_s: v.t_s,
            detail: super::violation_detail(d, v),
        }
    }
}

impl BudgetJson {
    /// The wire form of a budget.
    pub fn new(d: &Design, soc: f64, modes: &[ModeBudget]) -> Self {
        Self {
            design: d.title.clone(),
            soc,
            modes: modes.iter().map(|m| mode_json(d, m)).collect(),
        }
    }
}

fn mode_json(d: &Design, m: &ModeBudget) -> ModeJson {
    let name = d.modes[m.mode].name.clone();
    let violations = m
        .violations
        .iter()
        .map(|v| ViolationJson::new(d, v))
        .collect();
    match &m.solution {
        Solution::Collapse { ocv, .. } => ModeJson {
            mode: name,
            collapse: true,
            battery: BatteryJson {
                voltage_v: None,
                open_circuit_v: *ocv,
                current_a: None,
                power_w: None,
                loss_w: None,
            },
            stages: Vec::new(),
            loads: Vec::new(),
            violations,
        },
        Solution::Point(p) => ModeJson {
            mode: name,
            collapse: false,
            battery: BatteryJson {
                voltage_v: Some(p.pack.voltage),
                open_circuit_v: p.pack.ocv,
                current_a: Some(p.pack.current),
                power_w: Some(p.pack.power()),
                loss_w: Some(p.pack.loss),
            },
            stages: d
                .stages
                .iter()
                .zip(&p.stages)
                .enumerate()
                .map(|(k, (s, sp))| StageJson {
                    id: s.id.clone(),
                    kind: s.kind_name().into(),
                    state: sp.state.name().into(),
                    vin_v: sp.vin,
                    iin_a: sp.iin,
                    vout_v: sp.vout,
                    iout_a: sp.iout,
                    loss_w: sp.loss,
                    efficiency: sp.efficiency(),
                    junction_c: junction_c(d, k, sp.loss, d.ambient_c),
                })
                .collect(),
            loads: d
                .loads
                .iter()
                .zip(&p.loads)
                .map(|(l, lp)| LoadJson {
                    id: l.id.clone(),
                    state: l.state_name(lp.state).into(),
                    voltage_v: lp.voltage,
                    current_a: lp.current,
                    power_w: lp.power,
                })
                .collect(),
            violations,
        },
    }
}

/// `runtime --format json` (and each entry of `compare`).
#[derive(Debug, Serialize)]
pub struct RuntimeJson {
    /// Design title.
    pub design: String,
    /// Runtime, s.
    pub runtime_s: f64,
    /// Stored energy over the loads' mean power, s (null when the loads took nothing).
    pub ideal_runtime_s: Option<f64>,
    /// Why and when the product stopped.
    pub end: EndJson,
    /// Pack totals.
    pub battery: RunBatteryJson,
    /// Stage totals.
    pub stages: Vec<RunStageJson>,
    /// Load totals.
    pub loads: Vec<RunLoadJson>,
    /// Violations with the time they first happened.
    pub violations: Vec<ViolationJson>,
    /// The lowest and highest ambient the run saw, °C, when the design gives a climate.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ambient_range_c: Option<[f64; 2]>,
    /// Decimated trace, with `--trace`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub trace: Option<Vec<TraceJson>>,
}

/// The end of a run.
#[derive(Debug, Serialize)]
pub struct EndJson {
    /// collapse, cutoff, undervoltage, rail, empty or horizon.
    pub reason: String,
    /// State of charge then.
    pub soc: f64,
    /// Mode then.
    pub mode: Option<String>,
    /// `battery`, a stage id or a load id.
    pub subject: String,
}

/// Pack totals of a run.
#[derive(Debug, Serialize)]
pub struct RunBatteryJson {
    /// Integral of the pack current.
    pub charge_ah: f64,
    /// Energy at the pack terminals (terminal voltage x current).
    pub energy_wh: f64,
    /// Energy from the cells (open-circuit voltage x current): the energy at the terminals plus
    /// the pack's internal loss.
    pub cell_energy_wh: f64,
    /// Mean current.
    pub average_current_a: f64,
    /// Mean terminal power.
    pub average_power_w: f64,
    /// Internal loss.
    pub loss_wh: f64,
    /// Loss in the buffer capacitors, across the pack (series resistance, leakage, limiter)
    /// and on stages' rails (series resistance, leakage); only for a design with one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub buffer_loss_wh: Option<f64>,
}

/// Stage totals of a run.
#[derive(Debug, Serialize)]
pub struct RunStageJson {
    /// Id.
    pub id: String,
    /// Energy lost.
    pub loss_wh: f64,
    /// Mean loss over the run.
    pub average_loss_w: f64,
    /// Highest loss in any phase.
    pub peak_loss_w: f64,
    /// That phase's mode.
    pub peak_mode: Option<String>,
    /// Highest junction temperature (null without theta_ja).
    pub max_junction_c: Option<f64>,
    /// Time the stage was on (any state but `off`).
    pub on_s: f64,
    /// Time in dropout.
    pub dropout_s: f64,
    /// Time in bypass.
    pub bypass_s: f64,
    /// Time locked out by undervoltage.
    pub undervoltage_s: f64,
}

/// Load totals of a run.
#[derive(Debug, Serialize)]
pub struct RunLoadJson {
    /// Id.
    pub id: String,
    /// Energy taken.
    pub energy_wh: f64,
    /// Time the load was on (its rail live, its state not `off`).
    pub on_s: f64,
    /// Time it was on with its supply above its maximum.
    pub above_max_s: f64,
}

/// One trace point.
#[derive(Debug, Serialize)]
pub struct TraceJson {
    /// Time.
    pub t_s: f64,
    /// State of charge.
    pub soc: f64,
    /// Open-circuit voltage.
    pub open_circuit_v: f64,
    /// Terminal voltage.
    pub voltage_v: f64,
    /// Pack current.
    pub current_a: f64,
}

impl RuntimeJson {
    /// The wire form of a run.
    pub fn new(d: &Design, r: &RunResult, with_trace: bool) -> Self {
        let t = r.runtime_s();
        let wh = |j: f64| j / 3600.0;
        let mode_name = |m: Option<usize>| m.map(|m| d.modes[m].name.clone());
        Self {
            design: d.title.clone(),
            runtime_s: t,
            ideal_runtime_s: r.ideal_runtime_s(),
            end: EndJson {
                reason: r.end.reason.name().into(),
                soc: r.end.soc,
                mode: mode_name(r.end.mode),
                subject: r.end.subject.clone(),
            },
            battery: RunBatteryJson {
                charge_ah: r.ledger.charge_c / 3600.0,
                energy_wh: wh(r.ledger.terminal_energy_j()),
                cell_energy_wh: wh(r.ledger.cell_energy_j()),
                average_current_a: r.average_current_a(),
                average_power_w: r.average_power_w(),
                loss_wh: wh(r.ledger.pack_loss_j),
                buffer_loss_wh: (d.pack.buffer.is_some() || d.has_rail_buffers())
                    .then(|| wh(r.ledger.buffer_loss_j)),
            },
            stages: d
                .stages
                .iter()
                .enumerate()
                .map(|(k, s)| RunStageJson {
                    id: s.id.clone(),
                    loss_wh: wh(r.ledger.stage_loss_j()[k]),
                    average_loss_w: if t > 0.0 {
                        r.ledger.stage_loss_j()[k] / t
                    } else {
                        0.0
                    },
                    peak_loss_w: r.peaks[k].loss_w,
                    peak_mode: mode_name(r.peaks[k].mode),
                    max_junction_c: junction_c(d, k, r.peaks[k].loss_w, r.hottest_c()),
                    on_s: r.ledger.stage_on_s(k),
                    dropout_s: r.ledger.stage_time_s(k, StageState::Dropout),
                    bypass_s: r.ledger.stage_time_s(k, StageState::Bypass),
                    undervoltage_s: r.ledger.stage_time_s(k, StageState::Undervoltage),
                })
                .collect(),
            loads: d
                .loads
                .iter()
                .enumerate()
                .map(|(l, load)| RunLoadJson {
                    id: load.id.clone(),
                    energy_wh: wh(r.ledger.load_energy_j()[l]),
                    on_s: r.ledger.load_on_s()[l],
                    above_max_s: r.ledger.load_high_s()[l],
                })
                .collect(),
            ambient_range_c: r.ambient_range_c.map(|(lo, hi)| [lo, hi]),
            violations: r
                .violations
                .iter()
                .map(|v| ViolationJson::new(d, v))
                .collect(),
            trace: with_trace.then(|| r.trace.iter().map(TraceJson::from).collect()),
        }
    }
}

impl From<&TracePoint> for TraceJson {
    fn from(p: &TracePoint) -> Self {
        Self {
            t_s: p.t_s,
            soc: p.soc,
            open_circuit_v: p.ocv,
            voltage_v: p.voltage,
            current_a: p.current,
        }
    }
}
