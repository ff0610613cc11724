//! `fit-cell` as a library: cells fitted from discharge curves that the model itself generated
//! (DESIGN section 5, so the true tables, resistance, k and Q are known), the two-point Peukert
//! reference example, the YAML and JSON output read back by the checker, and a corpus of bad CSV
//! files with the message each must give.

use std::fmt::Write as _;

use joulepath::Design;
use joulepath::fit::{
    Curve, Fit, FitOptions, cell_json, cell_yaml, fit, peukert_factor, peukert_from_capacities,
    peukert_from_times, read_curve, report,
};
use joulepath::solve::{EndReason, RunOptions, run};
use proptest::prelude::*;

use crate::util::close;

/// An invented cell, the truth the fit must recover.
struct Truth {
    ocv: Vec<(f64, f64)>,
    r: Vec<(f64, f64)>,
    q_mah: f64,
    rated_a: f64,
    k: f64,
}

fn lerp(t: &[(f64, f64)], s: f64) -> f64 {
    let i = t.partition_point(|p| p.0 <= s).clamp(1, t.len() - 1);
    let ((x0, y0), (x1, y1)) = (t[i - 1], t[i]);
    y0 + (y1 - y0) * (s - x0) / (x1 - x0)
}

fn truth() -> Truth {
    Truth {
        ocv: vec![
            (0.0, 3.000),
            (0.05, 3.300),
            (0.1, 3.450),
            (0.2, 3.560),
            (0.3, 3.620),
            (0.4, 3.660),
            (0.5, 3.710),
            (0.6, 3.780),
            (0.7, 3.860),
            (0.8, 3.950),
            (0.9, 4.050),
            (1.0, 4.180),
        ],
        r: vec![
            (0.0, 0.320),
            (0.1, 0.190),
            (0.2, 0.150),
            (0.5, 0.130),
            (1.0, 0.120),
        ],
        q_mah: 600.0,
        rated_a: 0.12,
        k: 1.08,
    }
}

/// A discharge from full to empty at constant `current_a` by the model itself (DESIGN section 5:
/// s = 1 - q I_eff / (I Q), V = OCV(s) - I R(s)), `rows` + 1 points skipping the first `skip`.
fn csv(t: &Truth, current_a: f64, rows: u32, skip: u32) -> String {
    let f = peukert_factor(current_a, t.rated_a, t.k);
    let mut out = String::from("capacity [mAh], voltage [V]\n");
    for n in skip..=rows {
        let s = 1.0 - f64::from(n) / f64::from(rows);
        let q = (1.0 - s) * t.q_mah / f;
        let v = lerp(&t.ocv, s) - current_a * lerp(&t.r, s);
        let _ = writeln!(out, "{q:.4}, {v:.5}");
    }
    out
}

fn curves(t: &Truth, currents: &[f64], rows: u32) -> Vec<Curve> {
    currents
        .iter()
        .map(|&i| read_curve(&csv(t, i, rows, 0), i, &format!("{} mA.csv", i * 1e3)).unwrap())
        .collect()
}

/// The curves of `curves` built as points, past the CSV reader: a model that contradicts itself
/// may give a curve whose voltage rises, which the reader refuses as a typing error.
fn curves_from_points(t: &Truth, currents: &[f64], rows: u32) -> Vec<Curve> {
    currents
        .iter()
        .map(|&i| {
            let points = csv(t, i, rows, 0)
                .lines()
                .skip(1)
                .map(|l| {
                    let (q, v) = l.split_once(", ").unwrap();
                    (q.parse::<f64>().unwrap() * 3.6, v.parse::<f64>().unwrap())
                })
                .collect();
            Curve::new(format!("{} mA", i * 1e3), i, points).unwrap()
        })
        .collect()
}

/// OCV and R within 1 % at SoC points well inside the data, k and Q within 1 %.
fn assert_recovers(f: &Fit, t: &Truth) {
    for n in 1..=9 {
        let s = f64::from(n) / 10.0;
        let (ocv, r) = (f.ocv_at(s), f.resistance_at(s));
        assert!(close(ocv, lerp(&t.ocv, s), 0.01), "OCV at {s}: {ocv}");
        assert!(close(r, lerp(&t.r, s), 0.01), "R at {s}: {r}");
    }
    assert!(close(f.peukert, t.k, 0.01), "k {}", f.peukert);
    assert!(
        close(f.capacity_c / 3.6, t.q_mah, 0.01),
        "Q {}",
        f.capacity_c
    );
    assert!(close(f.rated_current_a, t.rated_a, 1e-12));
}

fn design(yaml: &str, name: &str, draw: &str) -> Design {
    let text = format!(
        "{yaml}battery: {{ cell: {name} }}\nloads: [{{ id: lamp, rail: battery, draw: {{ on: {draw} }} }}]\nmodes: {{ lit: {{ lamp: on }} }}\nprofile: [{{ mode: lit, for: 1 h }}]\n"
    );
    Design::from_text(&text).unwrap_or_else(|e| panic!("{e}\n{text}"))
}

#[test]
fn two_currents_recover_the_model() {
    // The model itself, DESIGN section 5: two currents fix k exactly and R from two equations.
    let t = truth();
    let f = fit(&curves(&t, &[0.12, 0.6], 100), &FitOptions::default()).unwrap();
    assert_recovers(&f, &t);
    // Every grid point is covered: nothing extrapolated, nothing clamped.
    assert!(
        f.table
            .iter()
            .all(|p| !p.extrapolated && !p.resistance_clamped)
    );
    assert_eq!(f.table.len(), 21);
    assert!(f.residual.max_v < 1e-4, "{:?}", f.residual);
    // Cutoff: the lowest final voltage, that of the 600 mA curve, 3.0 V - 0.6 A x 0.32 Ω, so
    // that the fitted cell delivers both curves' capacities and warns of no shortfall.
    assert!(close(f.cutoff_v, 2.808, 1e-5), "{}", f.cutoff_v);
    assert!(
        !f.warnings.iter().any(|w| w.contains("short")),
        "{:?}",
        f.warnings
    );
    assert!(close(f.curves[0].model_capacity_c / 3.6, 600.0, 1e-3));
}

#[test]
fn three_currents_recover_the_model_by_least_squares() {
    // The model itself, DESIGN section 5, at 0.2 C, 1 C and 2 C.
    let t = truth();
    let f = fit(&curves(&t, &[0.12, 0.6, 1.2], 100), &FitOptions::default()).unwrap();
    assert_recovers(&f, &t);
    assert!(
        f.residual.rms_v < 2e-5 && f.residual.points == 303,
        "{:?}",
        f.residual
    );
    for c in &f.curves {
        assert!(close(c.law_capacity_c, c.capacity_c, 1e-5), "{}", c.name);
        assert!(c.soc_end.abs() < 1e-5 && (c.soc_start - 1.0).abs() < 1e-12);
    }
}

#[test]
fn rated_current_between_the_curves() {
    // Conservative Peukert form (DESIGN section 5): no capacity bonus below the rating, so the
    // 60 mA curve delivers Q itself when the rating is 120 mA.
    let t = truth();
    let opts = FitOptions {
        rated_current_a: Some(0.12),
        ..FitOptions::default()
    };
    let f = fit(&curves(&t, &[0.06, 0.6, 1.2], 100), &opts).unwrap();
    assert_recovers(&f, &t);
    // Rated at the lowest current instead, the law bends and k comes out different.
    let g = fit(&curves(&t, &[0.06, 0.6, 1.2], 100), &FitOptions::default()).unwrap();
    assert!((g.peukert - t.k).abs() > 0.005, "{}", g.peukert);
}

#[test]
fn peukert_two_point_reference_example() {
    // REFERENCES C15 two-point fit, k = (ln t2 - ln t1)/(ln I1 - ln I2): (5 A, 20 h) and
    // (10 A, 8.7055 h) -> k = 1.200. In capacities (C = I t) the same number comes from
    // k = 1 + ln(C1/C2)/ln(I2/I1), the conservative form the fit uses.
    let kt = peukert_from_times(5.0, 20.0, 10.0, 8.7055);
    let kc = peukert_from_capacities(5.0, 100.0, 10.0, 87.055);
    assert!((kt - 1.200).abs() < 5e-4, "{kt}");
    assert!((kt - kc).abs() < 1e-12);
    // Through the whole fit: two curves of an invented 100 Ah cell ending at those capacities.
    let shape = |i: f64, ah: f64| {
        let pts = (0..=20)
            .map(|n| {
                let x = f64::from(n) / 20.0;
                (x * ah * 3600.0, 2.1 - 0.2 * x - i * 0.01)
            })
            .collect();
        Curve::new(format!("{i} A"), i, pts).unwrap()
    };
    let f = fit(
        &[shape(5.0, 100.0), shape(10.0, 87.055)],
        &FitOptions::default(),
    )
    .unwrap();
    assert!((f.peukert - 1.200).abs() < 5e-4, "{}", f.peukert);
    assert!(close(f.capacity_c / 3600.0, 100.0, 1e-9));
    assert!(close(f.resistance_at(0.5), 0.01, 1e-6));
}

#[test]
fn yaml_is_accepted_by_the_checker_and_keeps_the_values() {
    let t = truth();
    let f = fit(&curves(&t, &[0.12, 0.6, 1.2], 100), &FitOptions::default()).unwrap();
    let yaml = cell_yaml(&f, "pouch-fit");
    assert!(
        yaml.contains("cells:\n  pouch-fit:\n    chemistry: other\n"),
        "{yaml}"
    );
    assert!(
        yaml.contains("    capacity: 600 mAh\n    rated_current: 120 mA\n"),
        "{yaml}"
    );
    assert!(yaml.contains("      - [50 %, 3.710 V]\n"), "{yaml}");
    assert!(yaml.contains("      - [50 %, 130 mΩ]\n"), "{yaml}");
    assert!(
        // The lowest final voltage: the 1.2 A curve ends at 3.0 V - 1.2 A x 0.32 Ω = 2.616 V.
        yaml.contains("    peukert: 1.080\n    cutoff: 2.616 V\n"),
        "{yaml}"
    );
    let d = design(&yaml, "pouch-fit", "120 mA");
    let cell = &d.pack().cell();
    for n in 0..=10 {
        let s = f64::from(n) / 10.0;
        assert!(
            (d.pack().ocv(s) - lerp(&t.ocv, s)).abs() <= 5e-4,
            "OCV at {s}"
        );
        if n > 0 {
            assert!(close(d.pack().r0(s, 25.0), lerp(&t.r, s), 0.01), "R at {s}");
        }
    }
    assert!(close(cell.capacity_c(), 600.0 * 3.6, 1e-3));
    assert!(close(cell.peukert(), 1.08, 1e-9));
    // A name that is not a plain word is quoted.
    let d = design(&cell_yaml(&f, "18650 no.2"), "\"18650 no.2\"", "120 mA");
    assert_eq!(d.pack().cell().name(), "18650 no.2");
}

#[test]
fn fitted_cell_runs_as_long_as_its_rated_curve() {
    // Coulomb counting on the fitted cell (DESIGN section 5): at the rated 120 mA the model
    // delivers Q = 600 mAh, 5 h, ending at the cutoff that is the curve's own final voltage.
    let t = truth();
    let f = fit(&curves(&t, &[0.12, 0.6], 100), &FitOptions::default()).unwrap();
    let d = design(&cell_yaml(&f, "c"), "c", "120 mA");
    let r = run(&d, &RunOptions::for_design(&d)).unwrap();
    assert!(
        close(r.runtime_s(), 5.0 * 3600.0, 0.005),
        "{}",
        r.runtime_s()
    );
    assert!(matches!(r.end.reason, EndReason::Cutoff | EndReason::Empty));
}

#[test]
fn json_holds_the_yaml_mapping_and_the_report() {
    let t = truth();
    let f = fit(&curves(&t, &[0.12, 0.6], 100), &FitOptions::default()).unwrap();
    let v = serde_json::to_value(cell_json(&f, "c")).unwrap();
    let yaml = cell_yaml(&f, "c");
    assert_eq!(v["cell"]["capacity"], "600 mAh");
    for row in v["cell"]["ocv"].as_array().unwrap() {
        let line = format!(
            "[{}, {}]",
            row[0].as_str().unwrap(),
            row[1].as_str().unwrap()
        );
        assert!(yaml.contains(&line), "{line}");
    }
    let rep = &v["report"];
    assert!(close(rep["capacity_ah"].as_f64().unwrap(), 0.6, 1e-4));
    assert!(close(rep["peukert"].as_f64().unwrap(), 1.08, 1e-4));
    assert!(rep["residual_rms_v"].as_f64().unwrap() < 1e-4);
    assert!(rep["soc_min"].as_f64().unwrap() < 1e-6);
    assert_eq!(rep["curves"].as_array().unwrap().len(), 2);
    assert!(rep["warnings"].is_array());
    let text = report(&f).to_string();
    assert!(
        text.contains("Peukert exponent 1.080") && text.contains("600 mA.csv"),
        "{text}"
    );
}

#[test]
fn synthetic_files_fit_to_one_percent() {
    // The CSV files were generated by the model itself (DESIGN section 5) from the same truth.
    let read = |file: &str, i: f64| {
        let path = format!("{}/tests/data/fit/{file}", env!("CARGO_MANIFEST_DIR"));
        read_curve(&std::fs::read_to_string(path).unwrap(), i, file).unwrap()
    };
    let c = [
        read("synthetic-120mA.csv", 0.12),
        read("synthetic-600mA.csv", 0.6),
    ];
    let f = fit(&c, &FitOptions::default()).unwrap();
    assert_recovers(&f, &truth());
}

#[test]
fn partial_coverage_is_extrapolated_and_flagged() {
    // Curves that start 8 % below full: the rows above are extrapolated and the YAML says so.
    let t = truth();
    let c: Vec<Curve> = [0.12, 0.6]
        .iter()
        .map(|&i| read_curve(&csv(&t, i, 100, 8), i, "part.csv").unwrap())
        .collect();
    let f = fit(&c, &FitOptions::default()).unwrap();
    assert!(close(f.soc_max, 0.92, 1e-6), "{}", f.soc_max);
    let extrapolated: Vec<f64> = f
        .table
        .iter()
        .filter(|p| p.extrapolated)
        .map(|p| p.soc)
        .collect();
    assert_eq!(extrapolated, vec![0.95, 1.0]);
    assert!(
        f.warnings.iter().any(|w| w.contains("extrapolated")),
        "{:?}",
        f.warnings
    );
    let yaml = cell_yaml(&f, "part");
    assert!(
        yaml.contains("      - [100 %, ") && yaml.contains("# extrapolated"),
        "{yaml}"
    );
    design(&yaml, "part", "100 mA");
}

#[test]
fn negative_resistance_is_clamped_and_a_falling_ocv_levelled() {
    // Invented curves that contradict the model around 50 %: the higher current reads higher
    // there, and the OCV dips. The output must still pass the checker.
    let mut t = truth();
    t.r = vec![
        (0.0, 0.3),
        (0.45, 0.1),
        (0.5, -0.05),
        (0.55, 0.1),
        (1.0, 0.1),
    ];
    t.ocv[6].1 = 3.60;
    let f = fit(
        &curves_from_points(&t, &[0.12, 0.6], 100),
        &FitOptions::default(),
    )
    .unwrap();
    let at = |s: f64| f.table.iter().find(|p| (p.soc - s).abs() < 1e-9).unwrap();
    assert!(at(0.5).resistance_clamped && at(0.5).resistance_ohm.abs() < 1e-15);
    assert!(at(0.5).ocv_adjusted && at(0.4).ocv_adjusted);
    assert!(
        f.warnings
            .iter()
            .any(|w| w.contains("negative resistance at 50 %"))
    );
    assert!(f.warnings.iter().any(|w| w.contains("levelled")));
    let yaml = cell_yaml(&f, "odd");
    assert!(
        yaml.contains("# clamped at 0") && yaml.contains("# levelled"),
        "{yaml}"
    );
    design(&yaml, "odd", "100 mA");
}

#[test]
fn bad_csv_corpus() {
    // (file, line, message fragment, hint fragment)
    let cases = [
        (
            "no-units.csv",
            Some(1),
            "`capacity` has no unit in brackets",
            "capacity [mAh]",
        ),
        (
            "capacity-not-increasing.csv",
            Some(5),
            "the capacity `200` is not above `250` on line 4",
            "sort the rows",
        ),
        (
            "too-few-points.csv",
            None,
            "only 3 data rows",
            "digitize more points",
        ),
        (
            "unknown-unit.csv",
            Some(1),
            "unknown unit `Wh` for capacity",
            "`Ah` or `mAh`",
        ),
        (
            "unit-wrong-case.csv",
            Some(1),
            "did you mean `mV`?",
            "case-sensitive",
        ),
        (
            "extra-column.csv",
            Some(1),
            "`temperature [degC]` is neither",
            "exactly two",
        ),
        (
            "not-a-number.csv",
            Some(4),
            "`3.8O` is not a number",
            "plain decimal",
        ),
        ("empty.csv", None, "the file is empty", "header row"),
        (
            "voltage-rising.csv",
            Some(5),
            "line 5: the voltage `3.95` is above the voltage of line 4",
            "order of the rows",
        ),
    ];
    for (file, line, msg, hint) in cases {
        let path = format!("{}/tests/data/fit/{file}", env!("CARGO_MANIFEST_DIR"));
        let text = std::fs::read_to_string(path).unwrap();
        let e = read_curve(&text, 0.2, file).expect_err(file);
        assert!(e.message().contains(msg), "{file}: {e}");
        assert!(e.hint().is_some_and(|h| h.contains(hint)), "{file}: {e}");
        assert_eq!(e.line(), line, "{file}: {e}");
        let d: joulepath::Diagnostic = e;
        assert_eq!(d.path(), file);
    }
}

#[test]
fn fit_needs_two_currents() {
    let t = truth();
    let one = curves(&t, &[0.12], 100);
    let e = fit(&one, &FitOptions::default()).unwrap_err();
    assert!(e.message().contains("only one curve"), "{e}");
    assert!(e.hint().is_some_and(|h| h.contains("another current")));
    let same = curves(&t, &[0.12, 0.12], 100);
    let e = fit(&same, &FitOptions::default()).unwrap_err();
    assert!(e.message().contains("same current 120 mA"), "{e}");
    let e = fit(&[], &FitOptions::default()).unwrap_err();
    assert!(e.message().contains("no curves"), "{e}");
    let opts = FitOptions {
        cutoff_v: Some(5.0),
        ..FitOptions::default()
    };
    let e = fit(&curves(&t, &[0.12, 0.6], 100), &opts).unwrap_err();
    assert!(
        e.message().contains("not below the fitted full-charge OCV"),
        "{e}"
    );
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// No text makes the reader panic.
    #[test]
    fn any_text_reads_without_panic(text in "[ -~\n\t\u{b5}\u{3a9}]{0,300}") {
        let _ = read_curve(&text, 0.2, "x.csv");
        let _ = read_curve(&format!("capacity [mAh], voltage [V]\n{text}"), 0.2, "x.csv");
    }

    /// Whatever the curves, the fit returns an error or a cell that the checker accepts.
    #[test]
    fn any_fit_is_an_error_or_a_valid_cell(
        spec in prop::collection::vec(
            (0.001f64..5.0, prop::collection::vec((0.01f64..100.0, 0.5f64..5.0), 5..30)),
            2..4,
        )
    ) {
        let curves: Vec<Curve> = spec
            .iter()
            .enumerate()
            .map(|(j, (i, steps))| {
                let mut q = 0.0;
                let pts = steps
                    .iter()
                    .map(|&(dq, v)| {
                        let p = (q * 3.6, v);
                        q += dq;
                        p
                    })
                    .collect();
                Curve::new(format!("c{j}"), *i, pts).unwrap()
            })
            .collect();
        match fit(&curves, &FitOptions::default()) {
            Ok(f) => {
                design(&cell_yaml(&f, "p"), "p", "1 mA");
            }
            Err(e) => prop_assert!(!e.message().is_empty()),
        }
    }
}
