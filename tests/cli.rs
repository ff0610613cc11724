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
    let flat = o.split_whitespace().collect::<Vec<_>>().join(" ");
    // Human units with hours in parentheses beyond two days; one plain sentence for the end.
    let second = o.lines().nth(1).unwrap();
    assert!(
        second.starts_with("runtime ") && second.contains(" d (") && second.contains(" h)"),
        "{second}"
    );
    assert!(o.contains("it stops because"), "{o}");
    for frag in [
        "ideal runtime",
        "of the stored energy reached the loads",
        "pack:",
        "from the cells, of which",
        "at the pack terminals; average",
        "Tj max",
        "Caution:",
    ] {
        assert!(flat.contains(frag), "missing {frag:?} in\n{o}");
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
    assert_eq!(d.pack().cell().name(), "pouch-fit");
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

/// A one-load design on the preset `cell` at `ambient`.
fn on_preset(cell: &str, ambient: &str) -> String {
    format!(
        "design: Test beacon on a preset cell
ambient: {ambient}
battery: {{ cell: {cell}, series: 2 }}
loads:
  - {{ id: beacon, rail: battery, draw: {{ blink: 20 mA }} }}
modes: {{ on: {{ beacon: blink }} }}
profile: [{{ mode: on, for: 1 h }}]
"
    )
}

#[test]
fn the_caution_follows_the_chemistry_of_the_cells() {
    // Issue 10, item 20: the lithium caution was printed for alkaline and NiMH designs. The
    // standards named: IEC 62133-2 (portable lithium cells), IEC 60086-5 (safety of primary
    // cells with aqueous electrolyte: alkaline), IEC 62133-1 (portable nickel cells).
    let caution = |cell: &str, command: &str| {
        let out = Test::new()
            .design(&on_preset(cell, "25 °C"))
            .args(&[command, "{file}"])
            .expect_code(0);
        // Compared with line breaks removed: the caution is wrapped.
        out.stdout.split_whitespace().collect::<Vec<_>>().join(" ")
    };
    let always = [
        "Caution: these are estimates from models and datasheet values",
        "defer to the cell maker's limits, safety standards and local codes",
    ];
    for command in ["runtime", "budget", "heat"] {
        let alkaline = caution("alkaline-aa", command);
        let nimh = caution("nimh-aa", command);
        let lithium = caution("li-ion-18650", command);
        for o in [&alkaline, &nimh, &lithium] {
            for frag in always {
                assert!(o.contains(frag), "{command}: missing {frag:?} in\n{o}");
            }
        }
        for o in [&alkaline, &nimh] {
            assert!(
                !o.contains("Lithium") && !o.contains("IEC 62133-2"),
                "{command}: lithium caution for a cell without lithium:\n{o}"
            );
        }
        assert!(
            alkaline.contains("do not recharge them") && alkaline.contains("IEC 60086-5"),
            "{alkaline}"
        );
        assert!(nimh.contains("IEC 62133-1"), "{nimh}");
        assert!(
            lithium.contains("Lithium cells can overheat, vent or ignite")
                && lithium.contains("IEC 62133-2")
                && !lithium.contains("IEC 60086-5"),
            "{lithium}"
        );
    }
    // A comparison names every chemistry it shows.
    let t = Test::new().design(&on_preset("alkaline-aa", "25 °C"));
    std::fs::write(t.dir().join("b.yaml"), on_preset("li-mno2-cr2032", "25 °C")).unwrap();
    let out = t.args(&["compare", "{file}", "b.yaml"]).expect_code(0);
    let o = out.stdout.split_whitespace().collect::<Vec<_>>().join(" ");
    for frag in ["IEC 60086-5", "IEC 62133-2", "IEC 60086-4"] {
        assert!(o.contains(frag), "missing {frag:?} in\n{o}");
    }
}

#[test]
fn an_ambient_outside_the_cell_temperature_table_warns() {
    // Issue 10, item 19: outside its table a cell's factors are held at the nearest row; the
    // user is told instead of the clamp being silent. alkaline-aa's table spans -40..55 °C.
    let warning = "warning: the ambient -50.0 °C is below the temperature table of cell \
                   `alkaline-aa` (-40.0 °C to 55.0 °C)";
    let flat = |s: &str| s.split_whitespace().collect::<Vec<_>>().join(" ");
    for command in ["check", "runtime", "budget", "heat"] {
        let out = Test::new()
            .design(&on_preset("alkaline-aa", "-50 °C"))
            .args(&[command, "{file}"])
            .expect_code(0);
        let o = flat(&out.stdout);
        assert!(
            o.contains(warning),
            "{command}: missing the warning in\n{o}"
        );
        assert!(o.contains("add a row at -50.0 °C"), "{o}");
    }
    // JSON stays clean; the warning goes to standard error.
    let out = Test::new()
        .design(&on_preset("alkaline-aa", "-50 °C"))
        .args(&["runtime", "{file}", "--format", "json"])
        .expect_code(0);
    assert!(out.json()["runtime_s"].as_f64().unwrap() > 0.0);
    assert!(flat(&out.stderr).contains(warning), "{}", out.stderr);
    // `--ambient` is what counts, above the table as well.
    let out = Test::new()
        .design(&on_preset("alkaline-aa", "20 °C"))
        .args(&["runtime", "{file}", "--ambient", "70 °C"])
        .expect_code(0);
    assert!(
        flat(&out.stdout).contains("warning: the ambient 70.0 °C is above the temperature table"),
        "{}",
        out.stdout
    );
    // The HTML report carries it beside the caution.
    let t = Test::new()
        .design(&on_preset("alkaline-aa", "-50 °C"))
        .args(&["report", "{file}", "-o", "r.html"]);
    t.expect_code(0);
    let html = std::fs::read_to_string(t.dir().join("r.html")).unwrap();
    assert!(
        html.contains("Warning: the ambient -50.0 °C is below the temperature table"),
        "no warning in the HTML report"
    );
    // Inside the table: no warning.
    let out = Test::new()
        .design(&on_preset("alkaline-aa", "-35 °C"))
        .args(&["runtime", "{file}"])
        .expect_code(0);
    assert!(!out.stdout.contains("warning:"), "{}", out.stdout);
    assert!(out.stderr.is_empty(), "{}", out.stderr);
}

/// Whether `path` is a character device (Unix); false elsewhere or when it does not exist.
fn is_char_device(path: &str) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        std::fs::metadata(path).is_ok_and(|m| m.file_type().is_char_device())
    }
    #[cfg(not(unix))]
    {
        let _ = path;
        false
    }
}

#[test]
fn output_onto_a_full_device_fails_and_keeps_the_device() {
    // `/dev/full` refuses every write with "no space left on device" (Linux); it must be
    // written to, not replaced by a regular file.
    if !is_char_device("/dev/full") {
        return;
    }
    let out = Test::new()
        .design(&tree())
        .args(&["budget", "{file}", "-o", "/dev/full"])
        .expect_code(1);
    assert!(
        out.stderr.contains("cannot write `/dev/full`") && out.stderr.contains("space"),
        "{}",
        out.stderr
    );
    assert!(is_char_device("/dev/full"), "/dev/full was replaced");
    assert!(!std::path::Path::new("/dev/.full.partial").exists());
}

#[cfg(unix)]
#[test]
fn output_through_a_symlink_writes_its_target_and_keeps_the_link() {
    let t = Test::new().design(&tree()).args(&[
        "budget",
        "{file}",
        "--format",
        "json",
        "-o",
        "link.json",
    ]);
    std::fs::create_dir(t.dir().join("real")).unwrap();
    std::fs::write(t.dir().join("real/out.json"), "old").unwrap();
    std::os::unix::fs::symlink("real/out.json", t.dir().join("link.json")).unwrap();
    t.expect_code(0);
    let link = std::fs::symlink_metadata(t.dir().join("link.json")).unwrap();
    assert!(link.file_type().is_symlink(), "the link was replaced");
    let text = std::fs::read_to_string(t.dir().join("real/out.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(v["modes"].as_array().unwrap().len(), 2);
    // The temporary file lived beside the target and is gone.
    assert!(!t.dir().join("real/.out.json.partial").exists());
    assert!(!t.dir().join(".link.json.partial").exists());
}

#[cfg(unix)]
#[test]
fn a_failed_output_write_leaves_no_partial_file_and_the_old_file_whole() {
    // A file-size limit of one block makes the write fail part way (EFBIG); the shell ignores
    // SIGXFSZ so that the program sees the error instead of being killed (an ignored signal
    // stays ignored across exec).
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("schema.json"), "old").unwrap();
    let out = std::process::Command::new("sh")
        .arg("-c")
        .arg("trap '' XFSZ; ulimit -f 1; exec \"$0\" schema -o schema.json")
        .arg(env!("CARGO_BIN_EXE_joulepath"))
        .current_dir(dir.path())
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("cannot write `schema.json`"), "{stderr}");
    assert!(!dir.path().join(".schema.json.partial").exists());
    assert_eq!(
        std::fs::read_to_string(dir.path().join("schema.json")).unwrap(),
        "old"
    );
}

#[test]
fn inputs_that_are_not_regular_files_are_refused() {
    // `/dev/zero` never ends: reading it whole once grew the process to 21 GB.
    if std::path::Path::new("/dev/zero").exists() {
        let out = Test::new().args(&["check", "/dev/zero"]).expect_code(1);
        assert!(
            out.stderr.contains("`/dev/zero`") && out.stderr.contains("not a regular file"),
            "{}",
            out.stderr
        );
        let out = Test::new()
            .args(&[
                "fit-cell",
                "--curve",
                "100 mA:/dev/zero",
                "--curve",
                "1 A:/dev/zero",
            ])
            .expect_code(1);
        assert!(out.stderr.contains("not a regular file"), "{}", out.stderr);
    }
    let t = Test::new().args(&["runtime", "."]);
    let out = t.expect_code(1);
    assert!(out.stderr.contains("a directory"), "{}", out.stderr);
    // A named pipe: opening it would wait for a writer, so its kind is checked first.
    let t = Test::new().args(&["check", "pipe.yaml"]);
    let made = std::process::Command::new("mkfifo")
        .arg(t.dir().join("pipe.yaml"))
        .status()
        .is_ok_and(|s| s.success());
    if made {
        let out = t.expect_code(1);
        assert!(out.stderr.contains("not a regular file"), "{}", out.stderr);
    }
}

#[test]
fn inputs_above_64_mib_are_refused_unread() {
    let t = Test::new().args(&["check", "big.yaml"]);
    // A sparse file: 65 MiB long, nothing written.
    let f = std::fs::File::create(t.dir().join("big.yaml")).unwrap();
    f.set_len(65 * 1024 * 1024).unwrap();
    let out = t.expect_code(1);
    assert!(
        out.stderr.contains("68157440 bytes") && out.stderr.contains("64 MiB"),
        "{}",
        out.stderr
    );
    // The same for a discharge curve.
    let curve = t.dir().join("big.yaml").display().to_string();
    let out = Test::new()
        .args(&[
            "fit-cell",
            "--curve",
            &format!("100 mA:{curve}"),
            "--curve",
            &format!("1 A:{curve}"),
        ])
        .expect_code(1);
    assert!(out.stderr.contains("64 MiB"), "{}", out.stderr);
}

#[test]
fn set_variants_show_their_overrides_in_every_title() {
    let tag = "[battery.parallel=2, loads.led.draw.lit=30 mW]";
    let sets = [
        "--set",
        "battery.parallel=2",
        "--set",
        "loads.led.draw.lit=30 mW",
    ];
    let with = |args: &[&str]| -> Vec<String> {
        let mut v: Vec<String> = args.iter().map(|s| (*s).to_string()).collect();
        v.extend(sets.iter().map(|s| (*s).to_string()));
        v
    };
    let run = |args: Vec<String>| {
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        let t = Test::new().design(&tree()).args(&refs);
        let out = t.expect_code(0);
        let file = |n: &str| std::fs::read_to_string(t.dir().join(n)).unwrap_or_default();
        (out, file("p.svg"), file("r.html"))
    };
    let title = format!("Test lamp, one lithium-ion cell, buck to 3.3 V {tag}");
    let (out, _, _) = run(with(&["runtime", "{file}"]));
    assert!(
        out.stdout.starts_with(&format!("{title}\n")),
        "{}",
        out.stdout
    );
    let (out, _, _) = run(with(&["runtime", "{file}", "--format", "json"]));
    assert_eq!(out.json()["design"], title.as_str());
    let (out, _, _) = run(with(&["heat", "{file}", "--format", "json"]));
    assert_eq!(out.json()["design"], title.as_str());
    let (out, _, _) = run(with(&["budget", "{file}", "--format", "json"]));
    assert_eq!(out.json()["design"], title.as_str());
    let (_, svg, _) = run(with(&["plot", "{file}", "-o", "p.svg"]));
    assert!(
        svg.contains("[battery.parallel=2,"),
        "no overrides in the picture"
    );
    let (_, _, html) = run(with(&["report", "{file}", "-o", "r.html"]));
    assert!(
        html.contains(&format!("<h1>{title}</h1>")),
        "no overrides in the report's heading"
    );
    // Without overrides the title is the file's; compare tells the variant from the base.
    let (out, _, _) = run(vec!["runtime".into(), "{file}".into()]);
    assert!(
        out.stdout
            .starts_with("Test lamp, one lithium-ion cell, buck to 3.3 V\n")
    );
    let (out, _, _) = run(vec![
        "compare".into(),
        "{file}".into(),
        "{file}".into(),
        "--set".into(),
        "battery.parallel=2".into(),
        "--format".into(),
        "json".into(),
    ]);
    let v = out.json();
    assert_eq!(
        v["designs"][0]["design"],
        "Test lamp, one lithium-ion cell, buck to 3.3 V"
    );
    assert_eq!(
        v["designs"][1]["design"],
        "Test lamp, one lithium-ion cell, buck to 3.3 V [battery.parallel=2]"
    );
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

#[test]
fn risky_defaults_warn_on_check_but_do_not_fail_it() {
    // A custom cell at 0 °C with no self-discharge and no temperature table, and a linear
    // regulator set to 4.1 V with a 0.2 V dropout on a cell that is never above 4.2 V: three
    // warnings, exit 0. At 25 °C only the regulator is left.
    let text = |ambient: &str, extra: &str| {
        format!(
            "ambient: {ambient}\ncells:\n  c: {{ capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4.2 V]], resistance: 0.1 ohm, cutoff: 3 V{extra} }}\nbattery: {{ cell: c }}\nstages: [{{ id: ldo, kind: linear, input: battery, output: 4.1 V, dropout: 0.2 V }}]\nloads: [{{ id: mcu, rail: ldo, draw: {{ run: 5 mA }} }}]\nmodes: {{ run: {{ mcu: run }} }}\nprofile: [{{ mode: run, for: 1 h }}]\n"
        )
    };
    let flat = |s: &str| s.split_whitespace().collect::<Vec<_>>().join(" ");
    let out = Test::new()
        .design(&text("0 °C", ""))
        .args(&["check", "{file}"])
        .expect_code(0);
    let o = flat(&out.stdout);
    for frag in [
        "warning: cell `c` gives no `self_discharge`",
        "warning: cell `c` has no `temperature` table",
        "warning: stage `ldo` never regulates: its input is at most 4.20 V, below its setpoint 4.10 V plus its dropout 200 mV",
    ] {
        assert!(o.contains(frag), "missing {frag:?} in\n{o}");
    }
    let out = Test::new()
        .design(&text("25 °C", ""))
        .args(&["check", "{file}"])
        .expect_code(0);
    assert_eq!(out.stdout.matches("warning:").count(), 1, "{}", out.stdout);
    // A plain self-discharge rate away from 25 °C is held constant: said so.
    let out = Test::new()
        .design(&text("40 °C", ", self_discharge: 2 %/month"))
        .args(&["check", "{file}"])
        .expect_code(0);
    assert!(
        flat(&out.stdout).contains("warning: the self-discharge of cell `c` is a plain rate"),
        "{}",
        out.stdout
    );
    // The preset cells give both, with the rate at its temperature: no such warning.
    let out = Test::new()
        .design(&on_preset("li-socl2-aa", "60 °C"))
        .args(&["check", "{file}"])
        .expect_code(0);
    assert!(!out.stdout.contains("warning:"), "{}", out.stdout);
    // A boost on the pack set below the pack's cutoff less its bypass drop is always in bypass.
    let boost = "ambient: 25 °C\nbattery: { cell: li-ion-18650 }\nstages: [{ id: b, kind: boost, input: battery, output: 2.0 V, efficiency: 90 % }]\nloads: [{ id: mcu, rail: b, draw: { run: 5 mA } }]\nmodes: { run: { mcu: run } }\nprofile: [{ mode: run, for: 1 h }]\n";
    let out = Test::new()
        .design(boost)
        .args(&["check", "{file}"])
        .expect_code(0);
    assert!(
        flat(&out.stdout).contains("warning: stage `b` never regulates"),
        "{}",
        out.stdout
    );
}
