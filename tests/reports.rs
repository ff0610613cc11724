//! The results side of the reports: CSV that parses back whatever the ids hold, runtime CSV that
//! carries the run's end, the two energies named the same everywhere, on-time shares, and
//! comparisons that call a difference within the model's accuracy a tie.

use joulepath::units::fmt_percent;

use crate::util::{CELL, Test, close};

/// Ids, a mode and a title with commas and quotes: every CSV must quote them.
fn commas() -> String {
    format!(
        "design: \"Lamp, with a comma\"
{CELL}battery: {{ cell: test-cell, start: 80 % }}
stages:
  - id: \"buck, main\"
    kind: buck
    input: battery
    output: 3.3 V
    efficiency: 90 %
  - id: 'switch \"led\"'
    kind: switch
    input: \"buck, main\"
    on_resistance: 0.2 Ω
loads:
  - id: \"mcu, core\"
    rail: \"buck, main\"
    draw: {{ sleep: 3 µA, run: 4 mA }}
    default: sleep
  - id: led
    rail: 'switch \"led\"'
    draw: {{ lit: 60 mW }}
modes:
  sleep: {{ 'switch \"led\"': off }}
  \"glow, bright\": {{ \"mcu, core\": run, led: lit }}
profile:
  - {{ mode: \"glow, bright\", for: 2 h }}
  - {{ mode: sleep, for: 22 h }}
"
    )
}

/// Parse CSV text: the header and every record, each required to have the header's length.
fn parse(text: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let mut r = csv::ReaderBuilder::new()
        .flexible(true)
        .from_reader(text.as_bytes());
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    let rows: Vec<Vec<String>> = r
        .records()
        .map(|x| x.unwrap().iter().map(String::from).collect())
        .collect();
    for row in &rows {
        assert_eq!(row.len(), header.len(), "{row:?} under {header:?}\n{text}");
    }
    (header, rows)
}

fn column(header: &[String], name: &str) -> usize {
    header
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name} in {header:?}"))
}

fn csv_of(design: &str, args: &[&str]) -> (Vec<String>, Vec<Vec<String>>) {
    let mut all = args.to_vec();
    all.extend(["--format", "csv"]);
    parse(&Test::new().design(design).args(&all).expect_code(0).stdout)
}

#[test]
fn csv_quotes_ids_with_commas() {
    let d = commas();
    let ids = ["buck, main", "switch \"led\"", "mcu, core"];
    for args in [
        &["budget", "{file}"][..],
        &["runtime", "{file}"],
        &["heat", "{file}"],
    ] {
        let (h, rows) = csv_of(&d, args);
        let id = column(&h, "id");
        for want in ids {
            if args[0] == "heat" && want == "mcu, core" {
                continue; // heat ranks stages and the pack only
            }
            assert!(
                rows.iter().any(|r| r[id] == want),
                "{args:?}: no row with id {want:?}"
            );
        }
    }
    // The mode with a comma stays one field, in budget rows and as a stage's peak mode.
    let (h, rows) = csv_of(&d, &["budget", "{file}"]);
    let mode = column(&h, "mode");
    assert_eq!(rows.iter().filter(|r| r[mode] == "glow, bright").count(), 5);
    let (h, rows) = csv_of(&d, &["runtime", "{file}"]);
    let peak = column(&h, "peak_mode");
    assert!(rows.iter().any(|r| r[peak] == "glow, bright"), "{rows:?}");
    // compare: the title holds a comma.
    let (h, rows) = csv_of(
        &d,
        &["compare", "{file}", "{file}", "--set", "battery.parallel=2"],
    );
    let title = column(&h, "title");
    let titles: Vec<&str> = rows.iter().map(|r| r[title].as_str()).collect();
    assert_eq!(
        titles,
        [
            "Lamp, with a comma",
            "Lamp, with a comma [battery.parallel=2]"
        ]
    );
    assert_eq!(rows.len(), 2);
    // The trace parses too, five numbers a row.
    let (h, rows) = csv_of(&d, &["runtime", "{file}", "--trace"]);
    assert_eq!(
        h,
        ["t_s", "soc", "open_circuit_v", "voltage_v", "current_a"]
    );
    assert!(rows.len() > 10);
    assert!(rows.iter().flatten().all(|x| x.parse::<f64>().is_ok()));
}

#[test]
fn runtime_csv_carries_the_runtime_and_the_end() {
    let d = commas();
    let v = Test::new()
        .design(&d)
        .args(&["runtime", "{file}", "--format", "json"])
        .expect_code(0)
        .json();
    let (h, rows) = csv_of(&d, &["runtime", "{file}"]);
    let run = rows
        .iter()
        .find(|r| r[column(&h, "element")] == "run")
        .expect("a run row");
    let num = |name: &str| run[column(&h, name)].parse::<f64>().unwrap();
    assert!(close(
        num("runtime_s"),
        v["runtime_s"].as_f64().unwrap(),
        1e-12
    ));
    assert!(close(
        num("ideal_runtime_s"),
        v["ideal_runtime_s"].as_f64().unwrap(),
        1e-12
    ));
    assert!(close(
        num("end_soc"),
        v["end"]["soc"].as_f64().unwrap(),
        1e-12
    ));
    assert_eq!(run[column(&h, "end_reason")], v["end"]["reason"]);
    assert_eq!(run[column(&h, "end_subject")], v["end"]["subject"]);
    assert_eq!(run[column(&h, "end_mode")], v["end"]["mode"]);
    // The pack row: energy at the terminals and from the cells, as in JSON.
    let pack = rows
        .iter()
        .find(|r| r[column(&h, "element")] == "battery")
        .unwrap();
    let cell = pack[column(&h, "cell_energy_wh")].parse::<f64>().unwrap();
    assert!(close(
        cell,
        v["battery"]["cell_energy_wh"].as_f64().unwrap(),
        1e-12
    ));
}

#[test]
fn runtime_trace_in_a_table_says_where_the_trace_is() {
    let d = commas();
    let table = Test::new()
        .design(&d)
        .args(&["runtime", "{file}", "--trace"])
        .expect_code(0)
        .stdout;
    let points = Test::new()
        .design(&d)
        .args(&["runtime", "{file}", "--trace", "--format", "json"])
        .expect_code(0)
        .json()["trace"]
        .as_array()
        .unwrap()
        .len();
    let flat = table.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains(&format!(
            "the trace ({points} points) is not shown in a table"
        )) && flat.contains("`--trace --format csv`")
            && flat.contains("`--trace --format json`"),
        "{table}"
    );
    // Without --trace the table does not mention it.
    let plain = Test::new()
        .design(&d)
        .args(&["runtime", "{file}"])
        .expect_code(0)
        .stdout;
    assert!(!plain.contains("the trace"), "{plain}");
}

#[test]
fn fit_cell_csv_is_a_table_of_the_fitted_cell() {
    let dir = crate::util::root().join("tests/data/fit");
    let low = format!("120 mA:{}", dir.join("synthetic-120mA.csv").display());
    let high = format!("600 mA:{}", dir.join("synthetic-600mA.csv").display());
    let args = [
        "fit-cell",
        "--curve",
        &low,
        "--curve",
        &high,
        "--name",
        "pouch, fit",
    ];
    let out = Test::new()
        .args(&[&args[..], &["--format", "csv"]].concat())
        .expect_code(0)
        .stdout;
    assert!(!out.contains("cells:") && !out.starts_with('#'), "{out}");
    let (h, rows) = parse(&out);
    let v = Test::new()
        .args(&[&args[..], &["--format", "json"]].concat())
        .expect_code(0)
        .json();
    let table = v["report"]["table"].as_array().unwrap();
    assert_eq!(rows.len(), table.len());
    for (r, t) in rows.iter().zip(table) {
        assert_eq!(r[column(&h, "name")], "pouch, fit");
        for (col, key) in [
            ("soc", "soc"),
            ("ocv_v", "ocv_v"),
            ("resistance_ohm", "resistance_ohm"),
        ] {
            let x: f64 = r[column(&h, col)].parse().unwrap();
            assert!(close(x, t[key].as_f64().unwrap(), 1e-12), "{col}");
        }
        let cap: f64 = r[column(&h, "capacity_ah")].parse().unwrap();
        assert!(close(
            cap,
            v["report"]["capacity_ah"].as_f64().unwrap(),
            1e-12
        ));
    }
}

/// The first number before `unit` that `marker` follows, e.g. `7.45 Wh` after "pack: ".
fn figure_before(text: &str, marker: &str) -> String {
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    let at = flat
        .find(marker)
        .unwrap_or_else(|| panic!("no {marker:?} in\n{text}"));
    let before: Vec<&str> = flat[..at].split(' ').collect();
    // "... 7.45 Wh from the cells": the marker starts at "from", the figure is two words back.
    before[before.len() - 3..before.len() - 1].join(" ")
}

#[test]
fn energy_from_the_cells_means_the_same_in_runtime_and_heat() {
    let d = commas();
    let run = |args: &[&str]| Test::new().design(&d).args(args).expect_code(0);
    let rj = run(&["runtime", "{file}", "--format", "json"]).json();
    let hj = run(&["heat", "{file}", "--format", "json"]).json();
    let b = &rj["battery"];
    let (terminal, cell, pack_loss) = (
        b["energy_wh"].as_f64().unwrap(),
        b["cell_energy_wh"].as_f64().unwrap(),
        b["loss_wh"].as_f64().unwrap(),
    );
    // From the cells = at the terminals + the pack's internal loss, and it is what heat divides.
    assert!(close(cell, terminal + pack_loss, 1e-9));
    assert!(pack_loss > 0.0 && cell > terminal);
    assert!(close(hj["cell_energy_wh"].as_f64().unwrap(), cell, 1e-12));
    assert!(close(
        hj["terminal_energy_wh"].as_f64().unwrap(),
        terminal,
        1e-12
    ));
    for row in hj["ranking"].as_array().unwrap() {
        let share = row["share_of_cell_energy"].as_f64().unwrap();
        assert!(close(share * cell, row["loss_wh"].as_f64().unwrap(), 1e-9));
    }
    // The tables print the same figure under the same name.
    let rt = run(&["runtime", "{file}"]).stdout;
    let ht = run(&["heat", "{file}"]).stdout;
    let in_runtime = figure_before(&rt, "from the cells, of which");
    let in_heat = figure_before(&ht, "(open-circuit voltage x current:");
    assert_eq!(in_runtime, in_heat);
    assert!(in_runtime.ends_with("Wh"), "{in_runtime}");
    // The loads' share is given against both bases, each named.
    let loads: f64 = rj["loads"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["energy_wh"].as_f64().unwrap())
        .sum();
    let flat = rt.split_whitespace().collect::<Vec<_>>().join(" ");
    let of_cells = format!("{} of the energy from the cells", fmt_percent(loads / cell));
    assert!(flat.contains(&of_cells), "{of_cells:?} in\n{rt}");
    let ideal = rj["runtime_s"].as_f64().unwrap() / rj["ideal_runtime_s"].as_f64().unwrap();
    let of_stored = format!(
        "{} of the stored energy reached the loads",
        fmt_percent(ideal)
    );
    assert!(flat.contains(&of_stored), "{of_stored:?} in\n{rt}");
    assert!(!flat.contains("of it reached the loads"));
}

/// A boost always above its bypass threshold, on one hour a day, feeding a sensor whose maximum
/// supply the bypassed rail exceeds.
fn bypass_one_hour_a_day() -> String {
    "design: Bypass an hour a day
cells:
  high:
    chemistry: li-ion
    capacity: 200 mAh
    ocv: [[0 %, 3.9 V], [100 %, 4.2 V]]
    resistance: 100 mΩ
    cutoff: 3.0 V
battery: { cell: high }
stages:
  - { id: boost-3v3, kind: boost, input: battery, output: 3.3 V, efficiency: 90 % }
loads:
  - { id: sensor, rail: boost-3v3, voltage_range: [1.7 V, 3.4 V], draw: { on: 20 mA } }
  - { id: clock, rail: battery, draw: { tick: 10 µA }, default: tick }
modes:
  rest: { boost-3v3: off }
  measure: { sensor: on }
profile:
  - { mode: measure, for: 1 h }
  - { mode: rest, for: 23 h }
"
    .to_string()
}

#[test]
fn bypass_share_is_given_of_the_on_time_too() {
    let d = bypass_one_hour_a_day();
    let v = Test::new()
        .design(&d)
        .args(&["runtime", "{file}", "--format", "json"])
        .expect_code(0)
        .json();
    let t = v["runtime_s"].as_f64().unwrap();
    let s = &v["stages"][0];
    let (on, bypass) = (s["on_s"].as_f64().unwrap(), s["bypass_s"].as_f64().unwrap());
    // On one hour in 24 (the last day may be cut short), in bypass all that time.
    assert!((on / t - 1.0 / 24.0).abs() < 0.005, "{on} of {t}");
    assert!(close(bypass, on, 1e-9), "{bypass} vs {on}");
    assert!(
        s["dropout_s"].as_f64().unwrap() == 0.0 && s["undervoltage_s"].as_f64().unwrap() == 0.0
    );
    let sensor = &v["loads"][0];
    assert!(close(sensor["on_s"].as_f64().unwrap(), on, 1e-9));
    assert!(close(sensor["above_max_s"].as_f64().unwrap(), on, 1e-9));
    // The clock is on all the time and never above a maximum (it has none).
    assert!(close(v["loads"][1]["on_s"].as_f64().unwrap(), t, 1e-9));
    // The table states both shares: of the time on, and of the runtime.
    let table = Test::new()
        .design(&d)
        .args(&["runtime", "{file}"])
        .expect_code(0)
        .stdout;
    let flat = table.split_whitespace().collect::<Vec<_>>().join(" ");
    let runtime_share = fmt_percent(on / t);
    for want in [
        "`boost-3v3` is in bypass, passing the pack through instead of regulating, for "
            .to_string(),
        format!("100 % of the time it is on, {runtime_share} of the runtime"),
        "the supply of `sensor` is above its 3.40 V maximum".to_string(),
    ] {
        assert!(flat.contains(&want), "missing {want:?} in\n{table}");
    }
    // compare gives the same facts.
    let cmp = Test::new()
        .design(&d)
        .args(&["compare", "{file}", "{file}", "--set", "battery.parallel=2"])
        .expect_code(0)
        .stdout;
    let flat = cmp.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains("in A, `boost-3v3` is in bypass")
            && flat.contains(&format!(
                "100 % of the time it is on, {runtime_share} of the runtime"
            )),
        "{cmp}"
    );
}

/// One lithium-ion cell of `capacity` on a steady 100 mA load.
fn steady(capacity: &str) -> String {
    format!(
        "design: Steady load
cells:
  c:
    chemistry: li-ion
    capacity: {capacity}
    ocv: [[0 %, 3.0 V], [100 %, 4.2 V]]
    resistance: 100 mΩ
    cutoff: 3.0 V
battery: {{ cell: c }}
loads: [{{ id: l, rail: battery, draw: {{ on: 100 mA }} }}]
modes: {{ on: {{ l: on }} }}
profile: [{{ mode: on, for: 1 h }}]
"
    )
}

#[test]
fn compare_calls_runtimes_within_one_percent_equal() {
    let t = Test::new().design(&steady("1000 mAh"));
    let near = format!("{}/near.yaml", t.dir().display());
    std::fs::write(&near, steady("1004 mAh")).unwrap();
    let out = t.args(&["compare", "{file}", &near]).expect_code(0).stdout;
    let flat = out.split_whitespace().collect::<Vec<_>>().join(" ");
    // 0.4 % apart: below the model's accuracy, so no winner on runtime.
    assert!(
        flat.contains(
            "on runtime, the designs are equal within the model's accuracy (they differ by less than 1 %)"
        ) && flat.contains("(0.4 % shorter)"),
        "{out}"
    );
    assert!(
        !flat.contains("on runtime, B") && !flat.contains("wins"),
        "{out}"
    );
    // 5 % apart: a winner.
    let t = Test::new().design(&steady("1000 mAh"));
    let far = format!("{}/far.yaml", t.dir().display());
    std::fs::write(&far, steady("1050 mAh")).unwrap();
    let out = t.args(&["compare", "{file}", &far]).expect_code(0).stdout;
    let flat = out.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains("on runtime, B (") && flat.contains(" wins: "),
        "{out}"
    );
    assert!(flat.contains("(4.8 % shorter)"), "{out}");
}

#[test]
fn compare_with_three_designs_names_the_tied_leaders() {
    let t = Test::new().design(&steady("1000 mAh"));
    let dir = t.dir().display().to_string();
    std::fs::write(format!("{dir}/b.yaml"), steady("1005 mAh")).unwrap();
    std::fs::write(format!("{dir}/c.yaml"), steady("900 mAh")).unwrap();
    let b = format!("{dir}/b.yaml");
    let c = format!("{dir}/c.yaml");
    let out = t.args(&["compare", "{file}", &b, &c]).expect_code(0).stdout;
    let flat = out.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains(" and B (") && flat.contains("lead, equal within the model's accuracy"),
        "{out}"
    );
    assert!(
        flat.contains("for C (") && flat.contains("% shorter)"),
        "{out}"
    );
}
