//! The command line: commands, formats, output files and exit codes (DESIGN section 7).

use crate::util::{CELL, Test};

fn tree() -> String {
    format!(
        "design: Test lamp, one lithium-ion cell, buck to 3.3 V
{CELL}battery: {{ cell: test-cell, start: 80 % }}
stages:
  - {{ id: buck-3v3, kind: buck, input: battery, output: 3.3 V, efficiency: 90 %, quiescent: 20 µA }}
  - {{ id: led-switch, kind: switch, input: buck-3v3, on_resistance: 0.2 Ω }}
loads:
  - {{ id: mcu, rail: buck-3v3, draw: {{ sleep: 3 µA, run: 4 mA }}, default: sleep }}
  - {{ id: led, rail: led-switch, draw: {{ lit: 60 mW }} }}
modes:
  sleep: {{ led-switch: off }}
  glow: {{ mcu: run, led: lit }}
profile:
  - {{ mode: glow, for: 2 h }}
  - {{ mode: sleep, for: 22 h }}
"
    )
}

#[test]
fn check_prints_the_tree() {
    let out = Test::new()
        .design(&tree())
        .args(&["check", "{file}"])
        .expect_code(0);
    let o = &out.stdout;
    assert!(
        o.starts_with("Test lamp, one lithium-ion cell, buck to 3.3 V\n"),
        "{o}"
    );
    for frag in [
        "battery\n",
        "buck-3v3  buck to 3.30 V",
        "led-switch  switch, 200 mΩ on",
        "mcu  sleep 3.00 µA (default), run 4.00 mA",
        "led  lit 60.0 mW",
        "modes: sleep, glow",
    ] {
        assert!(o.contains(frag), "missing {frag:?} in\n{o}");
    }
    // The switch hangs below the buck, its load below the switch: deeper indentation each time.
    let indent = |id: &str| {
        o.lines()
            .find(|l| l.contains(&format!("{id}  ")))
            .map(|l| l.chars().take_while(|c| !c.is_alphanumeric()).count())
            .unwrap()
    };
    assert!(indent("buck-3v3") < indent("led-switch") && indent("led-switch") < indent("led"));
    assert!(out.stderr.is_empty());
}

#[test]
fn budget_table_shows_states_units_and_the_caution() {
    let out = Test::new()
        .design(&tree())
        .args(&["budget", "{file}"])
        .expect_code(0);
    let o = &out.stdout;
    for frag in [
        "budget at 80 % state of charge",
        "mode `sleep`",
        "mode `glow`",
        "regulating",
        "off",
        "on",
        "mW",
        "Caution:",
        "IEC 62133-2",
    ] {
        assert!(o.contains(frag), "missing {frag:?} in\n{o}");
    }
}

#[test]
fn budget_json_follows_the_contract() {
    let out = Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "--format", "json", "--soc", "50%"])
        .expect_code(0);
    let v = out.json();
    assert_eq!(
        v["design"],
        "Test lamp, one lithium-ion cell, buck to 3.3 V"
    );
    assert!((v["soc"].as_f64().unwrap() - 0.5).abs() < 1e-12);
    let glow = &v["modes"][1];
    assert_eq!(glow["mode"], "glow");
    for key in ["voltage_v", "open_circuit_v", "current_a", "power_w"] {
        assert!(glow["battery"][key].is_number(), "battery.{key}");
    }
    let st = &glow["stages"][0];
    for key in [
        "id",
        "kind",
        "state",
        "vin_v",
        "iin_a",
        "vout_v",
        "iout_a",
        "loss_w",
        "efficiency",
        "junction_c",
    ] {
        assert!(st.get(key).is_some(), "stages[0].{key}");
    }
    assert_eq!(glow["stages"][1]["state"], "on");
    let sleep = &v["modes"][0];
    assert_eq!(sleep["stages"][1]["state"], "off");
    assert!(sleep["stages"][1]["efficiency"].is_null());
    for key in ["id", "state", "voltage_v", "current_a", "power_w"] {
        assert!(glow["loads"][0].get(key).is_some(), "loads[0].{key}");
    }
    // OCV at 50 % of a 3.0-4.2 V straight line.
    assert!((glow["battery"]["open_circuit_v"].as_f64().unwrap() - 3.6).abs() < 1e-12);
}

#[test]
fn budget_one_mode_soc_forms_and_csv() {
    for soc in ["30%", "30 %", "0.3"] {
        let out = Test::new()
            .design(&tree())
            .args(&[
                "budget", "{file}", "--mode", "glow", "--soc", soc, "--format", "json",
            ])
            .expect_code(0);
        let v = out.json();
        assert_eq!(v["modes"].as_array().unwrap().len(), 1);
        assert!((v["soc"].as_f64().unwrap() - 0.3).abs() < 1e-12, "{soc}");
    }
    let out = Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "--format", "csv"])
        .expect_code(0);
    let mut lines = out.stdout.lines();
    assert_eq!(
        lines.next().unwrap(),
        "mode,element,id,kind,state,vin_v,iin_a,vout_v,iout_a,power_w,loss_w,efficiency,junction_c"
    );
    let rows: Vec<&str> = lines.collect();
    // Per mode: the pack, two stages, two loads.
    assert_eq!(rows.len(), 2 * 5);
    assert!(rows.iter().all(|r| r.split(',').count() == 13), "{rows:?}");
    assert!(
        rows.iter()
            .any(|r| r.starts_with("glow,stage,led-switch,switch,on,"))
    );
}

#[test]
fn output_file_is_written_whole_and_stdout_stays_empty() {
    let t = Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "--format", "json", "-o", "out.json"]);
    let out = t.expect_code(0);
    assert!(out.stdout.is_empty());
    let text = std::fs::read_to_string(t.dir().join("out.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(v["modes"].as_array().unwrap().len(), 2);
    assert!(!t.dir().join(".out.json.partial").exists());
}

#[test]
fn usage_errors_exit_2() {
    Test::new().args(&["frobnicate"]).expect_code(2);
    Test::new().args(&["budget"]).expect_code(2);
    Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "--format", "xml"])
        .expect_code(2);
    let out = Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "--mode", "glw"])
        .expect_code(2);
    assert!(
        out.stderr.contains("did you mean `glow`?"),
        "{}",
        out.stderr
    );
    Test::new().args(&["--help"]).expect_code(0);
}

#[test]
fn invalid_output_leaves_no_file() {
    let t = Test::new()
        .design("battery: {")
        .args(&["budget", "{file}", "-o", "out.txt"]);
    let out = t.expect_code(1);
    assert!(!t.dir().join("out.txt").exists());
    assert!(
        out.stderr.contains("nothing was computed"),
        "{}",
        out.stderr
    );
}

#[test]
fn readme_design_and_commands_stay_true() {
    let readme = std::fs::read_to_string(crate::util::root().join("README.md")).unwrap();
    let start = readme.find("```yaml\n").expect("a yaml block") + "```yaml\n".len();
    let end = start + readme[start..].find("```").unwrap();
    let design = joulepath::Design::from_text(&readme[start..end]);
    assert!(
        design.is_ok(),
        "the README's design is invalid: {}",
        design.unwrap_err()
    );
    // The set-up commands: exactly two, the first on a bundled example that exists.
    let setup = readme
        .split("## Set-up")
        .nth(1)
        .unwrap()
        .split("```")
        .nth(1)
        .unwrap();
    let cmds: Vec<&str> = setup.lines().filter(|l| !l.trim().is_empty()).collect();
    assert_eq!(
        cmds,
        [
            "cargo run --release -- runtime examples/wearable-band.yaml",
            "cargo test"
        ]
    );
    assert!(
        crate::util::root()
            .join("examples/handheld-meter.yaml")
            .exists()
    );
}

#[test]
fn runtime_table_speaks_plainly() {
    let out = Test::new()
        .design(&tree())
        .args(&["runtime", "{file}"])
        .expect_code(0);
    let o = &out.stdout;
    // Human units with hours in parentheses beyond two days; one plain sentence for the end.
    let second = o.lines().nth(1).unwrap();
    assert!(
        second.starts_with("runtime ") && second.contains(" d (") && second.contains(" h)"),
        "{second}"
    );
    assert!(o.contains("it stops because"), "{o}");
    for frag in [
        "ideal runtime",
        "of it reached the loads",
        "pack:",
        "drawn, average",
        "Tj max",
        "Caution:",
    ] {
        assert!(o.contains(frag), "missing {frag:?} in\n{o}");
    }
}

#[test]
fn heat_names_the_biggest_waster_first() {
    let out = Test::new()
        .design(&tree())
        .args(&["heat", "{file}"])
        .expect_code(0);
    let first = out.stdout.lines().next().unwrap();
    assert!(
        first.starts_with("`buck-3v3` wastes the most heat:"),
        "{first}"
    );
    let v = Test::new()
        .design(&tree())
        .args(&["heat", "{file}", "--format", "json"])
        .expect_code(0)
        .json();
    let rows = v["ranking"].as_array().unwrap();
    assert_eq!(rows.len(), 3, "two stages and the pack");
    let lost: Vec<f64> = rows
        .iter()
        .map(|r| r["loss_wh"].as_f64().unwrap())
        .collect();
    assert!(lost.windows(2).all(|w| w[0] >= w[1]), "ranked: {lost:?}");
    let shares: f64 = rows
        .iter()
        .map(|r| r["share_of_losses"].as_f64().unwrap())
        .sum();
    assert!((shares - 1.0).abs() < 1e-9);
}

#[test]
fn set_changes_exactly_the_named_value() {
    // `--set` on budget: the pack doubled in parallel halves its resistance; nothing else moves.
    let base = Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "--format", "json"])
        .expect_code(0)
        .json();
    let set = Test::new()
        .design(&tree())
        .args(&[
            "budget",
            "{file}",
            "--format",
            "json",
            "--set",
            "loads.led.draw.lit=30 mW",
        ])
        .expect_code(0)
        .json();
    let glow = |v: &serde_json::Value| v["modes"][1].clone();
    assert!((glow(&set)["loads"][1]["power_w"].as_f64().unwrap() - 0.030).abs() < 1e-12);
    assert!((glow(&base)["loads"][1]["power_w"].as_f64().unwrap() - 0.060).abs() < 1e-12);
    // The other load and the other mode are untouched.
    assert_eq!(glow(&set)["loads"][0], glow(&base)["loads"][0]);
    assert_eq!(set["modes"][0], base["modes"][0]);
    // A stage addressed by id, and a key the file leaves out.
    let v = Test::new()
        .design(&tree())
        .args(&[
            "budget",
            "{file}",
            "--format",
            "json",
            "--set",
            "stages.buck-3v3.efficiency=80 %",
            "--set",
            "battery.parallel=2",
        ])
        .expect_code(0)
        .json();
    assert!((v["modes"][1]["stages"][0]["efficiency"].as_f64().unwrap() - 0.8).abs() < 0.01);
}

#[test]
fn set_errors_have_the_file_quality() {
    let out = Test::new()
        .design(&tree())
        .args(&["runtime", "{file}", "--set", "loads.leds.draw.lit=1 W"])
        .expect_code(1);
    assert!(
        out.stderr.contains("no item `leds` in `loads`")
            && out.stderr.contains("did you mean `led`?"),
        "{}",
        out.stderr
    );
    let out = Test::new()
        .design(&tree())
        .args(&["heat", "{file}", "--set", "loads.led.draw.lit=30"])
        .expect_code(1);
    assert!(
        out.stderr.contains("loads[1].draw.lit") && out.stderr.contains("no unit"),
        "{}",
        out.stderr
    );
    Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "--set", "battery.parallel"])
        .expect_code(2);
}

#[test]
fn compare_agrees_with_separate_runs() {
    let t = Test::new().design(&tree());
    let alone = t
        .args(&["runtime", "{file}", "--format", "json"])
        .expect_code(0)
        .json();
    let t = Test::new().design(&tree());
    let doubled = t
        .args(&[
            "runtime",
            "{file}",
            "--format",
            "json",
            "--set",
            "battery.parallel=2",
        ])
        .expect_code(0)
        .json();
    let t = Test::new().design(&tree());
    let both = t
        .args(&[
            "compare",
            "{file}",
            "{file}",
            "--set",
            "battery.parallel=2",
            "--format",
            "json",
        ])
        .expect_code(0)
        .json();
    let d = both["designs"].as_array().unwrap();
    assert_eq!(d.len(), 2);
    assert_eq!(d[0]["runtime_s"], alone["runtime_s"]);
    assert_eq!(d[1]["runtime_s"], doubled["runtime_s"]);
    assert_eq!(d[0]["end"], alone["end"]);
    // Twice the cells, about twice the runtime.
    let ratio = d[1]["runtime_s"].as_f64().unwrap() / d[0]["runtime_s"].as_f64().unwrap();
    assert!(ratio > 1.9 && ratio < 2.2, "{ratio}");
    let table = Test::new()
        .design(&tree())
        .args(&["compare", "{file}", "{file}", "--set", "battery.parallel=2"])
        .expect_code(0);
    for frag in [
        "comparing 2 designs",
        "on runtime, B",
        "on heat",
        "on violations",
        "Caution:",
    ] {
        assert!(
            table.stdout.contains(frag),
            "missing {frag:?}\n{}",
            table.stdout
        );
    }
    Test::new()
        .design(&tree())
        .args(&["compare", "{file}"])
        .expect_code(2);
}

#[test]
fn fit_cell_prints_a_cell_the_checker_accepts() {
    let dir = crate::util::root().join("tests/data/fit");
    let low = format!("120 mA:{}", dir.join("synthetic-120mA.csv").display());
    let high = format!("600 mA:{}", dir.join("synthetic-600mA.csv").display());
    let out = Test::new()
        .args(&[
            "fit-cell",
            "--curve",
            &low,
            "--curve",
            &high,
            "--name",
            "pouch-fit",
        ])
        .expect_code(0);
    let yaml = &out.stdout;
    assert!(yaml.contains("cells:\n  pouch-fit:\n"), "{yaml}");
    assert!(
        yaml.contains("residual"),
        "the fit report follows the block: {yaml}"
    );
    // The printed block is a working `cells:` section.
    let design = format!(
        "{yaml}\nbattery: {{ cell: pouch-fit }}\nloads: [{{ id: l, rail: battery, draw: {{ on: 120 mA }} }}]\nmodes: {{ on: {{ l: on }} }}\nprofile: [{{ mode: on, for: 1 h }}]\n"
    );
    let d = joulepath::Design::from_text(&design).unwrap_or_else(|e| panic!("{e}\n{design}"));
    assert_eq!(d.pack.cell.name, "pouch-fit");
    let v = Test::new()
        .args(&[
            "fit-cell", "--curve", &low, "--curve", &high, "--format", "json",
        ])
        .expect_code(0)
        .json();
    assert!(
        v["cell"]["ocv"].is_array() && v["report"].is_object(),
        "{v}"
    );
    // One curve only, a bad CSV, a malformed --curve.
    let out = Test::new()
        .args(&["fit-cell", "--curve", &low])
        .expect_code(1);
    assert!(out.stderr.contains("two"), "{}", out.stderr);
    let bad = format!("120 mA:{}", dir.join("no-units.csv").display());
    Test::new()
        .args(&["fit-cell", "--curve", &bad, "--curve", &high])
        .expect_code(1);
    Test::new()
        .args(&["fit-cell", "--curve", "low.csv", "--curve", &high])
        .expect_code(2);
}

/// Command-line quantities are held to the same physical ranges as the design's: an ambient
/// below absolute zero or in Fahrenheit, and an absurd fit-cell current, are usage errors with a
/// fix (exit 2), never a run.
#[test]
fn command_line_quantities_are_physical() {
    let runtime = |ambient: &str| {
        Test::new()
            .design(&tree())
            .args(&["runtime", "{file}", "--ambient", ambient])
            .expect_code(2)
    };
    let out = runtime("-300 °C");
    assert!(out.stderr.contains("below absolute zero"), "{}", out.stderr);
    let out = runtime("1e6 °C");
    assert!(out.stderr.contains("above 200 °C"), "{}", out.stderr);
    let out = runtime("77 °F");
    assert!(
        out.stderr
            .contains("Fahrenheit is not accepted: 77 °F is 25 °C; write `25 °C`"),
        "{}",
        out.stderr
    );
    assert!(!out.stderr.contains("`77 °C`"), "{}", out.stderr);
    assert!(out.stdout.is_empty());
    let dir = crate::util::root().join("tests/data/fit");
    let high = format!("600 mA:{}", dir.join("synthetic-600mA.csv").display());
    let absurd = format!("1e308 A:{}", dir.join("synthetic-120mA.csv").display());
    let out = Test::new()
        .args(&["fit-cell", "--curve", &absurd, "--curve", &high])
        .expect_code(2);
    assert!(out.stderr.contains("above 10 kA"), "{}", out.stderr);
}

/// `--set` into an optional block the file leaves out (`battery.aging`) creates the block, as a
/// left-out key is created: the aged pack runs shorter, in proportion to its capacity.
#[test]
fn set_creates_an_optional_block_the_file_leaves_out() {
    let runtime = |sets: &[&str]| {
        let mut args = vec!["runtime", "{file}", "--format", "json"];
        for s in sets {
            args.extend(["--set", s]);
        }
        Test::new()
            .design(&tree())
            .args(&args)
            .expect_code(0)
            .json()["runtime_s"]
            .as_f64()
            .unwrap()
    };
    let new = runtime(&[]);
    let aged = runtime(&["battery.aging.capacity=80 %"]);
    let ratio = aged / new;
    assert!((0.7..0.9).contains(&ratio), "{aged} / {new} = {ratio}");
    // A misspelt block is still an error naming what is there.
    let out = Test::new()
        .design(&tree())
        .args(&["runtime", "{file}", "--set", "battery.agign.capacity=80 %"])
        .expect_code(1);
    assert!(
        out.stderr.contains("there is no `agign` here"),
        "{}",
        out.stderr
    );
}
