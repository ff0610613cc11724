//! The JSON output pinned to the contract (DESIGN section 7): every document is read back into
//! mirror structs that reject unknown and missing keys.

#![allow(dead_code, clippy::struct_field_names)] // the mirrors hold the contract's keys

use serde::Deserialize;

use crate::util::{Test, example_files};

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Violation {
    kind: String,
    subject: String,
    mode: String,
    t_s: Option<f64>,
    detail: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Budget {
    design: String,
    soc: f64,
    modes: Vec<BudgetMode>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct BudgetMode {
    mode: String,
    collapse: bool,
    battery: BudgetBattery,
    stages: Vec<BudgetStage>,
    loads: Vec<BudgetLoad>,
    violations: Vec<Violation>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct BudgetBattery {
    voltage_v: Option<f64>,
    open_circuit_v: f64,
    current_a: Option<f64>,
    power_w: Option<f64>,
    loss_w: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct BudgetStage {
    id: String,
    kind: String,
    state: String,
    vin_v: f64,
    iin_a: f64,
    vout_v: f64,
    iout_a: f64,
    loss_w: f64,
    efficiency: Option<f64>,
    junction_c: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct BudgetLoad {
    id: String,
    state: String,
    voltage_v: f64,
    current_a: f64,
    power_w: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Runtime {
    design: String,
    runtime_s: f64,
    ideal_runtime_s: Option<f64>,
    end: End,
    battery: RunBattery,
    stages: Vec<RunStage>,
    loads: Vec<RunLoad>,
    violations: Vec<Violation>,
    #[serde(default)]
    trace: Option<Vec<TracePoint>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct End {
    reason: String,
    soc: f64,
    mode: Option<String>,
    subject: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RunBattery {
    charge_ah: f64,
    energy_wh: f64,
    cell_energy_wh: f64,
    average_current_a: f64,
    average_power_w: f64,
    loss_wh: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RunStage {
    id: String,
    loss_wh: f64,
    average_loss_w: f64,
    peak_loss_w: f64,
    peak_mode: Option<String>,
    max_junction_c: Option<f64>,
    on_s: f64,
    dropout_s: f64,
    bypass_s: f64,
    undervoltage_s: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RunLoad {
    id: String,
    energy_wh: f64,
    on_s: f64,
    above_max_s: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct TracePoint {
    t_s: f64,
    soc: f64,
    open_circuit_v: f64,
    voltage_v: f64,
    current_a: f64,
}

const STATES: [&str; 6] = [
    "regulating",
    "dropout",
    "bypass",
    "on",
    "off",
    "undervoltage",
];
const REASONS: [&str; 6] = [
    "collapse",
    "cutoff",
    "undervoltage",
    "rail",
    "empty",
    "horizon",
];
const KINDS: [&str; 8] = [
    "pack_overcurrent",
    "pack_pulse_overcurrent",
    "stage_overcurrent",
    "overvoltage",
    "rail_high",
    "junction_hot",
    "table_extrapolated",
    "off_rail_draw",
];

fn run_on(file: &std::path::Path, args: &[&str]) -> String {
    let mut all = vec![args[0], "{file}"];
    all.extend(&args[1..]);
    all.extend(["--format", "json"]);
    Test::example(file).args(&all).expect_code(0).stdout
}

#[test]
fn budget_json_of_every_example_matches_the_contract() {
    for f in example_files() {
        let out = run_on(&f, &["budget"]);
        let b: Budget =
            serde_json::from_str(&out).unwrap_or_else(|e| panic!("{}: {e}", f.display()));
        assert!((0.0..=1.0).contains(&b.soc));
        for m in &b.modes {
            assert!(m.stages.iter().all(|s| STATES.contains(&s.state.as_str())));
            assert!(
                m.violations
                    .iter()
                    .all(|v| KINDS.contains(&v.kind.as_str()) && v.t_s.is_none())
            );
        }
    }
}

#[test]
fn runtime_json_of_every_example_matches_the_contract() {
    for f in example_files() {
        let out = run_on(&f, &["runtime", "--trace"]);
        let r: Runtime =
            serde_json::from_str(&out).unwrap_or_else(|e| panic!("{}: {e}", f.display()));
        assert!(REASONS.contains(&r.end.reason.as_str()));
        assert!(r.runtime_s > 0.0 && r.battery.charge_ah > 0.0);
        assert!(
            r.violations
                .iter()
                .all(|v| KINDS.contains(&v.kind.as_str()) && v.t_s.is_some())
        );
        // The energy from the cells is the energy at the terminals plus the pack's loss.
        let b = &r.battery;
        assert!(
            (b.cell_energy_wh - (b.energy_wh + b.loss_wh)).abs() <= 1e-9 * b.cell_energy_wh,
            "{}: {} vs {} + {}",
            f.display(),
            b.cell_energy_wh,
            b.energy_wh,
            b.loss_wh
        );
        // Times in a state fit within the time on, which fits within the runtime.
        let slack = 1e-9 * r.runtime_s;
        for s in &r.stages {
            assert!(s.on_s <= r.runtime_s + slack, "{}: {}", f.display(), s.id);
            assert!(s.dropout_s + s.bypass_s + s.undervoltage_s <= s.on_s + slack);
        }
        for l in &r.loads {
            assert!(l.above_max_s <= l.on_s + slack && l.on_s <= r.runtime_s + slack);
        }
        let trace = r.trace.expect("trace with --trace");
        assert!(!trace.is_empty());
        // Without --trace there is no `trace` key at all.
        let out = run_on(&f, &["runtime"]);
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        assert!(v.get("trace").is_none());
    }
}
