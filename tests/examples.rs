//! The bundled example designs (`examples/*.yaml`): every one is valid, solves in every mode with
//! an exact energy balance, and carries the schema line; plus one hand-computed figure per
//! example, with the formula's source named beside it.

use std::path::Path;

use joulepath::Design;
use joulepath::solve::{OperatingPoint, PackState, Solution, solve_point};
use serde_json::Value;

use crate::util::{Test, close, example_files, root};

/// The first line every example starts with, for editor completion and validation.
const SCHEMA_LINE: &str = "# yaml-language-server: $schema=../schemas/design.schema.json";

/// Stage states allowed in `budget` JSON (DESIGN section 7).
const STATES: [&str; 6] = [
    "regulating",
    "dropout",
    "bypass",
    "on",
    "off",
    "undervoltage",
];

/// States of charge at which the library's operating points are checked.
const SOCS: [f64; 7] = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 1.0];

fn text(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn design(path: &Path) -> Design {
    Design::from_file(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn example(name: &str) -> std::path::PathBuf {
    root().join("examples").join(name)
}

/// `budget --format json` of an example, at its start SoC; exit code 0 required.
fn budget_json(path: &Path) -> Value {
    Test::example(path)
        .args(&["budget", "{file}", "--format", "json"])
        .expect_code(0)
        .json()
}

/// The JSON object of mode `mode`.
fn mode<'a>(json: &'a Value, mode: &str) -> &'a Value {
    json["modes"]
        .as_array()
        .expect("modes")
        .iter()
        .find(|m| m["mode"] == mode)
        .unwrap_or_else(|| panic!("no mode `{mode}` in {json}"))
}

/// The entry with `id` in the list `key` (`stages` or `loads`) of a mode.
fn item<'a>(m: &'a Value, key: &str, id: &str) -> &'a Value {
    m[key]
        .as_array()
        .expect(key)
        .iter()
        .find(|s| s["id"] == id)
        .unwrap_or_else(|| panic!("no {key} `{id}` in {m}"))
}

fn num(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("`{key}` is not a number in {v}"))
}

/// The library's operating point of `mode_name` at `soc`; a collapse fails the test.
fn point(d: &Design, mode_name: &str, soc: f64) -> OperatingPoint {
    let m = d.mode_index(mode_name).expect("mode");
    match solve_point(
        d,
        m,
        PackState {
            soc,
            v_pol: None,
            ambient_c: d.ambient_c(),
        },
    ) {
        Solution::Point(p) => p,
        Solution::Collapse { .. } => panic!("`{}` collapses in `{mode_name}` at {soc}", d.title()),
    }
}

#[test]
fn there_are_at_least_two_examples() {
    let files = example_files();
    assert!(files.len() >= 2, "examples/: {files:?}");
}

#[test]
fn every_example_starts_with_the_schema_line() {
    for f in example_files() {
        let t = text(&f);
        assert_eq!(t.lines().next(), Some(SCHEMA_LINE), "{}", f.display());
    }
}

#[test]
fn every_example_checks_and_prints_its_tree() {
    for f in example_files() {
        let d = design(&f);
        let out = Test::example(&f).args(&["check", "{file}"]).expect_code(0);
        for id in d
            .stages()
            .iter()
            .map(joulepath::model::Stage::id)
            .chain(d.loads().iter().map(joulepath::model::Load::id))
        {
            assert!(
                out.stdout.contains(id),
                "{}: `{id}` not in\n{}",
                f.display(),
                out.stdout
            );
        }
    }
}

#[test]
fn every_example_budget_balances_energy_in_every_mode() {
    for f in example_files() {
        let d = design(&f);
        let json = budget_json(&f);
        let modes = json["modes"].as_array().expect("modes");
        assert_eq!(modes.len(), d.file_modes().len(), "{}", f.display());
        for m in modes {
            let name = m["mode"].as_str().expect("mode name");
            assert_eq!(m["collapse"], false, "{}: `{name}` collapses", f.display());
            let b = &m["battery"];
            let terminal = num(b, "voltage_v") * num(b, "current_a");
            let loads: f64 = m["loads"]
                .as_array()
                .expect("loads")
                .iter()
                .map(|l| num(l, "power_w"))
                .sum();
            let stages = m["stages"].as_array().expect("stages");
            let losses: f64 = stages.iter().map(|s| num(s, "loss_w")).sum();
            assert!(
                close(terminal, loads + losses, 1e-9),
                "{} `{name}`: V x I = {terminal} W, loads + losses = {} W",
                f.display(),
                loads + losses
            );
            for s in stages {
                let state = s["state"].as_str().expect("state");
                assert!(
                    STATES.contains(&state),
                    "{} `{name}`: state `{state}`",
                    f.display()
                );
            }
        }
    }
}

#[test]
fn every_example_balances_energy_across_the_discharge() {
    for f in example_files() {
        let d = design(&f);
        for m in d.modes() {
            for soc in SOCS {
                let p = point(&d, m.name(), soc);
                let (a, b) = (p.pack.power(), p.delivered_plus_losses());
                assert!(
                    close(a, b, 1e-9),
                    "{} `{}` at {soc}: V x I = {a} W, loads + losses = {b} W",
                    f.display(),
                    m.name()
                );
            }
        }
    }
}

/// Handheld meter, mode `measure`: the linear regulator's input current is its output current
/// plus its quiescent current (DESIGN section 5, linear: input current = Iout + quiescent):
///   Iout = mcu `run` = 3.2 mA, Iin = 3.2 mA + 15 µA = 3.215 mA.
/// It drops 3.3 V - 1.8 V in regulation, so its loss (energy balance of the stage) is
///   L = 3.3 V x 3.215 mA - 1.8 V x 3.2 mA = 10.6095 mW - 5.76 mW = 4.8495 mW.
#[test]
fn meter_linear_regulator_draws_output_plus_quiescent() {
    let json = budget_json(&example("handheld-meter.yaml"));
    let ldo = item(mode(&json, "measure"), "stages", "ldo-1v8");
    assert_eq!(ldo["state"], "regulating");
    assert!(close(num(ldo, "iout_a"), 3.2e-3, 1e-9), "{ldo}");
    assert!(close(num(ldo, "iin_a"), 3.215e-3, 1e-9), "{ldo}");
    assert!(close(num(ldo, "vout_v"), 1.8, 1e-12), "{ldo}");
    assert!(close(num(ldo, "loss_w"), 4.8495e-3, 1e-9), "{ldo}");
}

/// Wearable band, mode `track`: the load switch sits on the buck's regulated 1.8 V and carries the
/// heart-rate sensor's 1.4 mA (DESIGN section 5, switch: Vout = Vin - Iout x on_resistance, the
/// drop by Ohm's law; input current = Iout + quiescent):
///   Vout = 1.8 V - 1.4 mA x 0.25 Ω = 1.8 V - 0.35 mV = 1.79965 V
///   Iin  = 1.4 mA + 0.5 µA = 1.4005 mA
///   loss = 1.8 V x 1.4005 mA - 1.79965 V x 1.4 mA = 2.52090 mW - 2.51951 mW = 1.39 µW
#[test]
fn wearable_load_switch_drops_iout_times_on_resistance() {
    let json = budget_json(&example("wearable-band.yaml"));
    let track = mode(&json, "track");
    let sw = item(track, "stages", "hr-switch");
    assert_eq!(sw["state"], "on");
    assert!(close(num(sw, "vin_v"), 1.8, 1e-12), "{sw}");
    assert!(close(num(sw, "vout_v"), 1.79965, 1e-9), "{sw}");
    assert!(close(num(sw, "iin_a"), 1.4005e-3, 1e-9), "{sw}");
    assert!(close(num(sw, "loss_w"), 1.39e-6, 1e-6), "{sw}");
    let sensor = item(track, "loads", "hr-sensor");
    assert!(close(num(sensor, "voltage_v"), 1.79965, 1e-9), "{sensor}");
    // At night (`rest`) the switch is off: it draws its 10 nA shutdown current and its sensor
    // nothing.
    let rest = mode(&json, "rest");
    let sw = item(rest, "stages", "hr-switch");
    assert_eq!(sw["state"], "off");
    assert!(close(num(sw, "iin_a"), 10e-9, 1e-9), "{sw}");
    assert!(num(item(rest, "loads", "hr-sensor"), "current_a").abs() < 1e-30);
}

/// Field logger, mode `log`: the buck-boost has a constant efficiency of 88 % plus a quiescent
/// current of 35 µA (DESIGN section 5: L = P_out (1/eta - 1) + Vin x quiescent, i.e. from the
/// definition of efficiency P_in = P_out / eta + Vin x quiescent):
///   Iout  = mcu 4.5 mA + probe 8 mA + flash 12 mA = 24.5 mA
///   P_out = 3.3 V x 24.5 mA = 80.85 mW;  P_out / 0.88 = 91.875 mW
///   Iin   = 91.875 mW / Vin + 35 µA,  L = 11.025 mW + Vin x 35 µA.
/// The heater is a 33 Ω resistor on the pack (Ohm's law): I = V / 33 Ω, P = V^2 / 33 Ω.
#[test]
fn logger_buck_boost_follows_its_constant_efficiency() {
    let json = budget_json(&example("field-logger.yaml"));
    let log = mode(&json, "log");
    let bb = item(log, "stages", "bb-3v3");
    assert_eq!(bb["state"], "regulating");
    let vin = num(bb, "vin_v");
    assert!(close(num(bb, "iout_a"), 24.5e-3, 1e-9), "{bb}");
    assert!(
        close(num(bb, "iin_a"), 91.875e-3 / vin + 35e-6, 1e-9),
        "{bb}"
    );
    assert!(
        close(num(bb, "loss_w"), 11.025e-3 + vin * 35e-6, 1e-9),
        "{bb}"
    );
    let v = num(&log["battery"], "voltage_v");
    let heater = item(log, "loads", "heater");
    assert!(close(num(heater, "current_a"), v / 33.0, 1e-9), "{heater}");
    assert!(
        close(num(heater, "power_w"), v * v / 33.0, 1e-9),
        "{heater}"
    );
}
