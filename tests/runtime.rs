//! Runtime across the discharge against hand computations and published examples (source named
//! beside each), the fast solver against the chronological reference, and the run's energy
//! balance.

use joulepath::Design;
use joulepath::solve::{EndReason, RunOptions, RunResult, run};

use crate::util::{Test, close, example_files};

fn design(text: &str) -> Design {
    Design::from_text(text).unwrap_or_else(|e| panic!("{e}\n{text}"))
}

fn fast(d: &Design) -> RunResult {
    run(d, &RunOptions::for_design(d)).expect("the run gives a result")
}

fn exact(d: &Design) -> RunResult {
    run(d, &RunOptions::reference(d)).expect("the reference gives a result")
}

/// Energy drawn from the open-circuit voltage = load energy + stage losses + pack loss.
fn assert_energy_balance(r: &RunResult, what: &str) {
    let l = &r.ledger;
    let out = l.load_energy_total() + l.stage_loss_total() + l.pack_loss_j;
    assert!(
        (l.ocv_energy_j - out).abs() <= 1e-6 * l.ocv_energy_j.abs().max(1e-300),
        "{what}: drawn {} J vs used {out} J",
        l.ocv_energy_j
    );
}

fn one_load(cell: &str, draw: &str, profile: &str) -> String {
    format!(
        "cells:\n  c:\n{cell}\nbattery: {{ cell: c }}\nloads: [{{ id: l, rail: battery, draw: {{ on: {draw}, idle: 5 µA }} }}]\nmodes: {{ on: {{ l: on }}, idle: {{ l: idle }} }}\nprofile: {profile}\n"
    )
}

#[test]
fn constant_current_runtime_is_charge_over_current() {
    // Coulomb counting (REFERENCES C26; common practice): with a constant current on any OCV
    // curve the pack empties after Q / I: 1000 mAh / 200 mA = 18 000 s.
    let cell = "    capacity: 1000 mAh\n    ocv: [[0 %, 3.0 V], [10 %, 3.4 V], [50 %, 3.7 V], [90 %, 4.0 V], [100 %, 4.2 V]]\n    resistance: 50 mΩ\n    cutoff: 2.5 V";
    let d = design(&one_load(cell, "200 mA", "[{ mode: on, for: 1 h }]"));
    for r in [fast(&d), exact(&d)] {
        assert_eq!(r.end.reason, EndReason::Empty);
        assert!(close(r.runtime_s(), 18_000.0, 1e-9), "{}", r.runtime_s());
        assert!(close(r.ledger.charge_c, 3600.0, 1e-9));
        assert_energy_balance(&r, "constant current");
    }
}

#[test]
fn duty_cycle_average_current_published_arithmetic() {
    // REFERENCES C37 (common practice, no source: it is arithmetic): 20 mA for 10 ms in every
    // 1 s and 5 µA otherwise average 204.95 µA; 225 mAh lasts 1098 h (45.74 d).
    let cell = "    capacity: 225 mAh\n    ocv: [[0 %, 2.9 V], [100 %, 3.0 V]]\n    resistance: 0 ohm\n    cutoff: 2.0 V";
    let d = design(&one_load(
        cell,
        "20 mA",
        "[{ mode: on, for: 10 ms }, { mode: idle, for: 990 ms }]",
    ));
    let r = fast(&d);
    let i_avg = (0.020 * 0.010 + 5e-6 * 0.990) / 1.0;
    assert!(close(i_avg, 204.95e-6, 1e-12));
    assert_eq!(r.end.reason, EndReason::Empty);
    assert!(
        close(r.runtime_s(), 810.0 / i_avg, 1e-6),
        "{}",
        r.runtime_s()
    );
    assert!((r.runtime_s() / 3600.0 - 1098.0).abs() < 0.5);
    assert!(close(r.average_current_a(), i_avg, 1e-6));
}

#[test]
fn constant_power_on_a_linear_ocv() {
    // Integrating dt = Q OCV(s) ds / P over the used SoC: runtime = Q x mean OCV / P
    // = 3600 C x 3.6 V / 0.5 W = 25 920 s (from 100 % to empty, no resistance).
    let cell = "    capacity: 1 Ah\n    ocv: [[0 %, 3.0 V], [100 %, 4.2 V]]\n    resistance: 0 ohm\n    cutoff: 2.9 V";
    let d = design(&one_load(cell, "0.5 W", "[{ mode: on, for: 1 h }]"));
    let (f, e) = (fast(&d), exact(&d));
    assert_eq!(f.end.reason, EndReason::Empty);
    assert!(close(f.runtime_s(), 25_920.0, 1e-5), "{}", f.runtime_s());
    assert!(close(e.runtime_s(), 25_920.0, 1e-6), "{}", e.runtime_s());
    assert_energy_balance(&f, "constant power");
    // All the stored energy reaches the load: runtime / ideal = 1.
    assert!(close(f.ideal_runtime_s().unwrap(), f.runtime_s(), 1e-5));
}

fn peukert_runtime_h(capacity_ah: f64, rated_a: f64, k: f64, load_a: f64) -> f64 {
    let text = format!(
        "cells:\n  c: {{ capacity: {capacity_ah} Ah, rated_current: {rated_a} A, peukert: {k}, ocv: [[0 %, 12 V], [100 %, 12 V]], resistance: 0 ohm, cutoff: 10 V }}\nbattery: {{ cell: c }}\nloads: [{{ id: l, rail: battery, draw: {{ on: {load_a} A }} }}]\nmodes: {{ on: {{ l: on }} }}\nprofile: [{{ mode: on, for: 1 h }}]\n"
    );
    let r = fast(&design(&text));
    assert_eq!(r.end.reason, EndReason::Empty);
    r.runtime_s() / 3600.0
}

#[test]
fn peukert_published_examples() {
    // electrotechnik.net, "Peukert's Law and discharge of lead acid batteries" (2010), REFERENCES
    // C13: Cp = 100 Ah at 1 A, k = 1.2, 5 A -> 14.5 h (t = Cp / I^k = 14.4956 h). The
    // conservative form rated at 1 A is the same law.
    let t = peukert_runtime_h(100.0, 1.0, 1.2, 5.0);
    assert!((t - 14.5).abs() < 0.05, "{t}");
    assert!(close(t, 100.0 / 5f64.powf(1.2), 1e-9));
    // easycalculation.com, "How to Calculate Battery Capacity, Discharge Time using Peukert's
    // Law", REFERENCES C14: C = 250 Ah, I = 20 A, n = 1.3 -> T = 5.088631644 h.
    let t = peukert_runtime_h(250.0, 1.0, 1.3, 20.0);
    assert!((t - 5.088_631_644).abs() < 1e-6, "{t}");
    // Rated-time form (Peukert 1897; REFERENCES C12, from memory): C = 100 Ah at H = 20 h
    // (5 A), k = 1.2, 10 A -> t = H (C / (I H))^k = 8.706 h.
    let t = peukert_runtime_h(100.0, 5.0, 1.2, 10.0);
    assert!((t - 8.706).abs() < 5e-4, "{t}");
}

#[test]
fn peukert_gives_no_bonus_below_the_rated_current() {
    // DESIGN section 5: I_eff = I max(1, I / I_rated)^(k - 1): below the rating the pack lasts
    // exactly Q / I (100 Ah at 2.5 A: 40 h), never longer.
    let t = peukert_runtime_h(100.0, 5.0, 1.2, 2.5);
    assert!(close(t, 40.0, 1e-9), "{t}");
}

fn cold_design(ambient: &str) -> Design {
    design(&format!(
        "ambient: {ambient}\ncells:\n  c:\n    capacity: 2 Ah\n    ocv: [[0 %, 1.0 V], [100 %, 1.4 V]]\n    resistance: 30 mΩ\n    cutoff: 0.8 V\n    temperature:\n      - {{ at: 25 °C, capacity: 100 %, resistance: 100 % }}\n      - {{ at: -20 °C, capacity: 60 %, resistance: 300 % }}\nbattery: {{ cell: c }}\nloads: [{{ id: l, rail: battery, draw: {{ on: 100 mA }} }}]\nmodes: {{ on: {{ l: on }} }}\nprofile: [{{ mode: on, for: 1 h }}]\n"
    ))
}

#[test]
fn a_temperature_row_with_one_factor_leaves_the_other_to_its_own_rows() {
    // A row at 0 °C giving only the capacity is no point of the resistance table: there the
    // resistance factor is the linear interpolation of its own rows, 300 % at -20 °C and 100 %
    // at 25 °C: 300 % - 200 % x 20/45 = 211.1 % (linear interpolation, DESIGN section 4); the
    // capacity factor is the row's 80 %.
    let d = design(
        "cells:\n  c:\n    capacity: 2 Ah\n    ocv: [[0 %, 1.0 V], [100 %, 1.4 V]]\n    resistance: 30 mΩ\n    cutoff: 0.8 V\n    temperature:\n      - { at: 25 °C, capacity: 100 %, resistance: 100 % }\n      - { at: 0 °C, capacity: 80 % }\n      - { at: -20 °C, resistance: 300 % }\nbattery: { cell: c }\nloads: [{ id: l, rail: battery, draw: { on: 100 mA } }]\nmodes: { on: { l: on } }\nprofile: [{ mode: on, for: 1 h }]\n",
    );
    let c = &d.pack.cell;
    assert!((c.temp_resistance.at(0.0) - (3.0 - 2.0 * 20.0 / 45.0)).abs() < 1e-12);
    assert!((c.temp_capacity.at(0.0) - 0.8).abs() < 1e-12);
    // Capacity is held at its coldest row (80 %) below 0 °C; resistance at 300 % below -20 °C.
    assert!((c.temp_capacity.at(-20.0) - 0.8).abs() < 1e-12);
    assert!((c.temp_resistance.at(-30.0) - 3.0).abs() < 1e-12);
}

#[test]
fn temperature_derates_capacity() {
    // DESIGN section 4: factors linear in temperature between rows, held beyond them. At 2.5 °C,
    // halfway from -20 °C to 25 °C: capacity 80 %, so 0.8 x 2 Ah / 100 mA = 16 h.
    let d = cold_design("2.5 °C");
    let r = fast(&d);
    assert!(
        close(r.runtime_s(), 16.0 * 3600.0, 1e-9),
        "{}",
        r.runtime_s()
    );
    // Held below the coldest row: -40 °C is derated like -20 °C (60 %: 12 h); `--ambient`
    // overrides the design's ambient.
    let mut o = RunOptions::for_design(&d);
    o.ambient_c = -40.0;
    assert!(close(run(&d, &o).unwrap().runtime_s(), 12.0 * 3600.0, 1e-9));
    let out = Test::new()
        .design(
            &std::fs::read_to_string(crate::util::root().join("examples/field-logger.yaml"))
                .unwrap(),
        )
        .args(&[
            "runtime",
            "{file}",
            "--ambient",
            "-20 °C",
            "--format",
            "json",
        ])
        .expect_code(0);
    let cold = out.json()["runtime_s"].as_f64().unwrap();
    let out = Test::new()
        .design(
            &std::fs::read_to_string(crate::util::root().join("examples/field-logger.yaml"))
                .unwrap(),
        )
        .args(&["runtime", "{file}", "--format", "json"])
        .expect_code(0);
    assert!(cold < out.json()["runtime_s"].as_f64().unwrap());
}

#[test]
fn self_discharge_alone_empties_in_one_over_the_rate() {
    // DESIGN section 5: I_self = rate x parallel x rated capacity / 30.44 d. With no load, a
    // 3 %/month cell is empty after 1 / 0.03 months; aged to 90 % capacity, after 0.9 of that.
    let text = |aging: &str| {
        format!(
            "cells:\n  c: {{ capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4 V]], resistance: 0.1 ohm, cutoff: 2.5 V, self_discharge: 3 %/month }}\nbattery: {{ cell: c, parallel: 2{aging} }}\nloads: [{{ id: l, rail: battery, draw: {{ on: 1 A }} }}]\nmodes: {{ shelf: {{}} }}\nprofile: [{{ mode: shelf, for: 1 d }}]\n"
        )
    };
    let month = 30.44 * 86_400.0;
    let r = fast(&design(&text("")));
    assert_eq!(r.end.reason, EndReason::Empty);
    assert!(
        close(r.runtime_s(), month / 0.03, 1e-9),
        "{}",
        r.runtime_s()
    );
    let r = fast(&design(&text(", aging: { capacity: 90 % }")));
    assert!(close(r.runtime_s(), 0.9 * month / 0.03, 1e-9));
}

fn pulse_design(polarization: &str) -> Design {
    design(&format!(
        "cells:\n  coin:\n    chemistry: li-mno2\n    capacity: 2.25 mAh\n    ocv: [[0 %, 2.5 V], [100 %, 3.0 V]]\n    resistance: 20 Ω\n{polarization}    cutoff: 2.3 V\nbattery: {{ cell: coin }}\nloads:\n  - {{ id: radio, rail: battery, draw: {{ tx: 20 mA }} }}\n  - {{ id: mcu, rail: battery, draw: {{ sleep: 5 µA }} }}\nmodes: {{ pulse: {{ radio: tx }}, idle: {{ mcu: sleep }} }}\nprofile: [{{ mode: pulse, for: 10 ms }}, {{ mode: idle, for: 990 ms }}]\n"
    ))
}

#[test]
fn pulse_sag_ends_the_run_by_hand() {
    // By hand (DESIGN sections 5 and 6): the mean current is 204.95 µA (REFERENCES C37) and
    // would run the 2.25 mAh cell to empty, but each 20 mA pulse sags it by 20 mA x 20 Ω = 0.4 V
    // (Ohm's law), so it stops at the first pulse where OCV - 0.4 V < 2.3 V: OCV 2.7 V, SoC 40 %,
    // after 8.1 C x 0.6 / 204.95 µA.
    let i_avg = 0.02 * 0.01 + 5e-6 * 0.99;
    let d = pulse_design("");
    for r in [fast(&d), exact(&d)] {
        assert_eq!(r.end.reason, EndReason::Cutoff);
        assert_eq!(d.modes[r.end.mode.unwrap()].name, "pulse");
        assert!((r.end.soc - 0.4).abs() < 1e-4, "{}", r.end.soc);
        assert!(
            close(r.runtime_s(), 8.1 * 0.6 / i_avg, 1e-4),
            "{}",
            r.runtime_s()
        );
    }
    // With a 10 Ω, 5 ms polarization branch the pulse also charges V_p (exact exponential,
    // REFERENCES C27): V_p = 0.2 V + (50 µV - 0.2 V) e^-2 = 172.94 mV at the pulse's end, so the
    // run stops at OCV = 2.7 V + 172.94 mV, SoC 74.59 %, inside the pulse.
    let d = pulse_design("    polarization: { resistance: 10 Ω, time_constant: 5 ms }\n");
    let vp = 0.2 + (5e-6 * 10.0 - 0.2) * (-2f64).exp();
    let s_end = (2.7 + vp - 2.5) / 0.5;
    for r in [fast(&d), exact(&d)] {
        assert_eq!(r.end.reason, EndReason::Cutoff);
        assert!((r.end.soc - s_end).abs() < 1e-4, "{} vs {s_end}", r.end.soc);
        assert!(
            close(r.runtime_s(), 8.1 * (1.0 - s_end) / i_avg, 1e-4),
            "{}",
            r.runtime_s()
        );
        assert_energy_balance(&r, "pulses with polarization");
    }
}

#[test]
fn fast_solver_agrees_with_the_reference_on_small_examples() {
    // DESIGN section 6: the fast solver's runtime within 0.2 % of a fine chronological run, and
    // the same end reason. (The larger examples are compared in the benchmark, in release.)
    let f = example_files()
        .into_iter()
        .find(|p| p.ends_with("field-logger.yaml"))
        .unwrap();
    let d = Design::from_file(&f).unwrap();
    let (a, b) = (fast(&d), exact(&d));
    assert_eq!(a.end.reason, b.end.reason);
    assert!(
        close(a.runtime_s(), b.runtime_s(), 2e-3),
        "{} vs {}",
        a.runtime_s(),
        b.runtime_s()
    );
}

#[test]
fn every_example_runs_and_balances_energy() {
    for f in example_files() {
        let d = Design::from_file(&f).unwrap_or_else(|e| panic!("{}: {e}", f.display()));
        let r = fast(&d);
        assert!(r.runtime_s() > 0.0, "{}", f.display());
        assert_ne!(r.end.reason, EndReason::Horizon, "{}", f.display());
        assert_energy_balance(&r, &f.display().to_string());
        let ideal = r.ideal_runtime_s().unwrap();
        assert!(
            r.runtime_s() < ideal,
            "{}: runtime above the ideal",
            f.display()
        );
    }
}

#[test]
fn horizon_ends_a_run_that_would_never_stop() {
    let text = "cells:\n  c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4 V]], resistance: 0.1 ohm, cutoff: 2.5 V }\nbattery: { cell: c }\nloads: [{ id: l, rail: battery, draw: { on: 1 A } }]\nmodes: { shelf: {} }\nprofile: [{ mode: shelf, for: 1 s }]\n";
    let d = design(text);
    let r = fast(&d);
    assert_eq!(r.end.reason, EndReason::Horizon);
    assert!(close(r.runtime_s(), 20.0 * 365.25 * 86_400.0, 1e-9));
    let out = Test::new()
        .design(text)
        .args(&["runtime", "{file}", "--horizon", "90 d", "--format", "json"])
        .expect_code(0);
    let v = out.json();
    assert_eq!(v["end"]["reason"], "horizon");
    assert!(close(
        v["runtime_s"].as_f64().unwrap(),
        90.0 * 86_400.0,
        1e-9
    ));
    assert!(v["ideal_runtime_s"].is_null());
}

#[test]
fn trace_keeps_the_pulse_minima() {
    let text =
        std::fs::read_to_string(crate::util::root().join("tests/data/runtime/pulse-tag.yaml"))
            .unwrap();
    let out = Test::new()
        .design(&text)
        .args(&["runtime", "{file}", "--trace", "--format", "json"])
        .expect_code(0);
    let v = out.json();
    let trace = v["trace"].as_array().unwrap();
    assert!(
        (100..=5000).contains(&trace.len()),
        "{} points",
        trace.len()
    );
    let t: Vec<f64> = trace.iter().map(|p| p["t_s"].as_f64().unwrap()).collect();
    assert!(t.windows(2).all(|w| w[0] <= w[1]));
    // The pulses' sags survive decimation: the lowest kept voltage is the final pulse at cutoff.
    let vmin = trace
        .iter()
        .map(|p| p["voltage_v"].as_f64().unwrap())
        .fold(f64::INFINITY, f64::min);
    assert!((vmin - 2.3).abs() < 0.01, "{vmin}");
    let csv = Test::new()
        .design(&text)
        .args(&["runtime", "{file}", "--trace", "--format", "csv"])
        .expect_code(0);
    assert_eq!(
        csv.stdout.lines().next(),
        Some("t_s,soc,open_circuit_v,voltage_v,current_a")
    );
}

mod agreement {
    //! The fast solver against the chronological reference on random designs (DESIGN section 6:
    //! runtime within 0.2 %, the same end reason).

    use std::fmt::Write as _;

    use proptest::prelude::*;
    use proptest::test_runner::{Config, RngSeed};

    use super::{design, exact, fast};
    use crate::util::close;

    #[derive(Debug, Clone)]
    struct Gen {
        ocv: (f64, f64, f64),
        cut: f64,
        r: f64,
        pol: Option<(f64, f64)>,
        peukert: f64,
        self_discharge: f64,
        stage: usize,
        loads: Vec<(usize, usize, f64)>,
        phases: Vec<(Vec<bool>, f64)>,
        inner_times: u64,
    }

    fn designs() -> impl Strategy<Value = Gen> {
        (
            (2.5f64..3.2, 0.1f64..0.6, 0.0f64..0.8),
            (-1.5f64..0.5, 0.0f64..12.0),
            prop::option::of((0.1f64..3.0, 0.002f64..30.0)),
            1.0f64..1.2,
            0.0f64..5.0,
            0usize..4,
            prop::collection::vec((0usize..2, 0usize..3, 0.05f64..1.0), 1..4),
            prop::collection::vec(
                (prop::collection::vec(any::<bool>(), 4), 0.001f64..5.0),
                2..4,
            ),
            1u64..5,
        )
            .prop_map(
                |(
                    ocv,
                    (cut, r),
                    pol,
                    peukert,
                    self_discharge,
                    stage,
                    loads,
                    phases,
                    inner_times,
                )| Gen {
                    ocv,
                    cut,
                    r,
                    pol,
                    peukert,
                    self_discharge,
                    stage,
                    loads,
                    phases,
                    inner_times,
                },
            )
    }

    fn text(g: &Gen) -> String {
        let (lo, span, bend) = g.ocv;
        let hi = lo + span;
        let mid = lo + span * (0.5 + 0.4 * bend);
        let mut s = format!(
            "cells:\n  c:\n    capacity: 2 mAh\n    rated_current: 1 mA\n    peukert: {}\n    self_discharge: {} %/month\n    ocv: [[0 %, {lo} V], [30 %, {mid} V], [100 %, {hi} V]]\n    resistance: [[0 %, {} Ω], [100 %, {} Ω]]\n    cutoff: {} V\n",
            g.peukert,
            g.self_discharge,
            3.0 * g.r,
            g.r,
            lo + g.cut * span
        );
        if let Some((r1, tau)) = g.pol {
            let _ = writeln!(
                s,
                "    polarization: {{ resistance: {r1} Ω, time_constant: {tau} s }}"
            );
        }
        s.push_str("battery: { cell: c }\n");
        let stage = match g.stage {
            0 => "",
            1 => {
                "stages: [{ id: conv, kind: buck, input: battery, output: 1.8 V, efficiency: 88 %, quiescent: 5 µA }]\n"
            }
            2 => {
                "stages: [{ id: conv, kind: boost, input: battery, output: 3.3 V, efficiency: [[100 µA, 70 %], [10 mA, 90 %]], quiescent: 8 µA, input_range: [2.2 V, 5 V] }]\n"
            }
            _ => {
                "stages: [{ id: conv, kind: linear, input: battery, output: 2.0 V, quiescent: 2 µA }]\n"
            }
        };
        s.push_str(stage);
        s.push_str("loads:\n");
        for (i, (rail, kind, x)) in g.loads.iter().enumerate() {
            let rail = if *rail == 1 && g.stage > 0 {
                "conv"
            } else {
                "battery"
            };
            let draw = match kind {
                0 => format!("{} mA", 15.0 * x),
                1 => format!("{} mW", 40.0 * x),
                _ => format!("{} Ω", 100.0 / x),
            };
            let _ = writeln!(
                s,
                "  - {{ id: l{i}, rail: {rail}, draw: {{ on: {draw}, sleep: 3 µA }}, default: sleep }}"
            );
        }
        s.push_str("modes:\n");
        for (m, (on, _)) in g.phases.iter().enumerate() {
            let items: Vec<String> = (0..g.loads.len())
                .filter(|&i| on[i % on.len()])
                .map(|i| format!("l{i}: on"))
                .collect();
            let _ = writeln!(s, "  m{m}: {{ {} }}", items.join(", "));
        }
        s.push_str("profile:\n  - repeat:\n");
        for (m, (_, dur)) in g.phases.iter().enumerate().skip(1) {
            let _ = writeln!(s, "      - {{ mode: m{m}, for: {dur} s }}");
        }
        let _ = writeln!(
            s,
            "    times: {}\n  - {{ mode: m0, for: {} s }}",
            g.inner_times, g.phases[0].1
        );
        s
    }

    fn config() -> Config {
        let env = |k: &str| std::env::var(k).ok().and_then(|v| v.parse::<u64>().ok());
        Config {
            cases: env("JOULEPATH_AGREEMENT_CASES").map_or(32, |c| c as u32),
            rng_seed: RngSeed::Fixed(env("JOULEPATH_AGREEMENT_SEED").unwrap_or(0x6a6f_756c)),
            failure_persistence: None,
            ..Config::default()
        }
    }

    /// A pulsed design that ends near the pack's power limit: a constant-power burst between
    /// `frac` 0.5 and 1.1 of the maximum power the cell gives at its empty OCV (V^2 / 4R, maximum
    /// power transfer), an OCV curve that falls steeply over its last 3 %, a start state of
    /// charge anywhere from 3 % to full, and runs from tens to tens of thousands of passes (the
    /// fast solver skips from 2000 on).
    #[derive(Debug, Clone)]
    struct Edge {
        start: f64,
        frac: f64,
        r: f64,
        steep: f64,
        pol: Option<(f64, f64)>,
        burst_ms: f64,
        sleep_s: f64,
        cut: f64,
        stage: bool,
        mah: f64,
    }

    fn edges() -> impl Strategy<Value = Edge> {
        (
            0.03f64..1.0,
            0.5f64..1.1,
            5.0f64..20.0,
            0.0f64..0.6,
            prop::option::of((1.0f64..10.0, 0.01f64..20.0)),
            (2.0f64..60.0, 0.5f64..8.0),
            0.0f64..0.3,
            any::<bool>(),
            0.5f64..30.0,
        )
            .prop_map(
                |(start, frac, r, steep, pol, (burst_ms, sleep_s), cut, stage, mah)| Edge {
                    start,
                    frac,
                    r,
                    steep,
                    pol,
                    burst_ms,
                    sleep_s,
                    cut,
                    stage,
                    mah,
                },
            )
    }

    fn edge_text(g: &Edge) -> String {
        // OCV: 2.0 V at empty, 2.0 + 0.6 V at 3 % (the steep end), 3.0 V at full.
        let lo = 2.0;
        let knee = lo + g.steep;
        let p_max = lo * lo / (4.0 * g.r);
        let p = g.frac * p_max;
        let mut s = format!(
            "cells:\n  c:\n    capacity: {} mAh\n    ocv: [[0 %, {lo} V], [3 %, {knee} V], [100 %, 3.0 V]]\n    resistance: {} Ω\n    cutoff: {} V\n",
            g.mah,
            g.r,
            1.0 + g.cut
        );
        if let Some((r1, tau)) = g.pol {
            let _ = writeln!(
                s,
                "    polarization: {{ resistance: {r1} Ω, time_constant: {tau} s }}"
            );
        }
        let _ = writeln!(s, "battery: {{ cell: c, start: {} % }}", 100.0 * g.start);
        let rail = if g.stage {
            s.push_str("stages: [{ id: conv, kind: buck-boost, input: battery, output: 1.8 V, efficiency: [[100 µA, 72 %], [10 mA, 90 %]], quiescent: 4 µA }]\n");
            "conv"
        } else {
            "battery"
        };
        let _ = writeln!(
            s,
            "loads: [{{ id: radio, rail: {rail}, draw: {{ tx: {} mW, idle: 20 µA }}, default: idle }}]",
            1e3 * p * if g.stage { 0.8 } else { 1.0 }
        );
        s.push_str("modes: { burst: { radio: tx }, rest: {} }\n");
        let _ = writeln!(
            s,
            "profile:\n  - repeat:\n      - {{ mode: burst, for: {} ms }}\n      - {{ mode: rest, for: {} s }}\n    for: 1 d",
            g.burst_ms, g.sleep_s
        );
        s
    }

    fn edge_config() -> Config {
        // `JOULEPATH_AGREEMENT_CASES=2000` and a seed in `JOULEPATH_AGREEMENT_SEED` for a longer
        // search than CI's.
        let env = |k: &str| std::env::var(k).ok().and_then(|v| v.parse::<u64>().ok());
        Config {
            cases: env("JOULEPATH_AGREEMENT_CASES").map_or(48, |c| c as u32),
            rng_seed: RngSeed::Fixed(env("JOULEPATH_AGREEMENT_SEED").unwrap_or(0x6564_6765)),
            failure_persistence: None,
            ..Config::default()
        }
    }

    proptest! {
        #![proptest_config(edge_config())]

        /// The fast solver's error control, where it used to miss: any start SoC, a constant-power
        /// burst near the power limit, a steep OCV end (DESIGN section 6: within 0.2 %, the same
        /// end reason).
        #[test]
        fn fast_agrees_from_any_start_near_the_power_limit(g in edges()) {
            let t = edge_text(&g);
            let d = design(&t);
            let f = fast(&d);
            let pass = 1e-3 * g.burst_ms + g.sleep_s;
            // Keep the reference affordable.
            prop_assume!(f.runtime_s() / pass < 40_000.0);
            let e = exact(&d);
            prop_assert_eq!(f.end.reason, e.end.reason, "\n{}", t);
            prop_assert!(close(f.runtime_s(), e.runtime_s(), 2e-3), "{} vs {}\n{}", f.runtime_s(), e.runtime_s(), t);
        }
    }

    proptest! {
        #![proptest_config(config())]

        #[test]
        fn fast_agrees_with_reference(g in designs()) {
            let t = text(&g);
            let d = design(&t);
            let pass: f64 = d.profile.iter().map(joulepath::model::Step::duration).sum();
            let f = fast(&d);
            // Keep the reference affordable in a debug build.
            prop_assume!(f.runtime_s() / pass < 4000.0);
            let e = exact(&d);
            prop_assert_eq!(f.end.reason, e.end.reason, "\n{}", t);
            prop_assert!(close(f.runtime_s(), e.runtime_s(), 2e-3), "{} vs {}\n{}", f.runtime_s(), e.runtime_s(), t);
        }
    }
}
