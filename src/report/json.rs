//! Wire structs of the JSON output (DESIGN section 7): SI units, key suffixes _v _a _w _s _wh _c,
//! fractions 0..1.

use serde::Serialize;

use crate::model::Design;
use crate::solve::{ModeBudget, Solution, Violation, junction_c};

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

impl From<&Violation> for ViolationJson {
    fn from(v: &Violation) -> Self {
        Self {
            kind: v.kind.name().into(),
            subject: v.subject.clone(),
            mode: v.mode.clone(),
            t_s: v.t_s,
            detail: v.detail.clone(),
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
    let violations = m.violations.iter().map(ViolationJson::from).collect();
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
                    kind: s.kind.name().into(),
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
