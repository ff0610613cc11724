//! A buffer capacitor on a stage's output rail, recharged by the stage at its input current
//! limit: the capacitor's voltage against the energy balance of a constant-power pulse, the
//! time the stage spends at its limit, charge balance over a run, the fast solver against the
//! reference, and the blocks refused.

use joulepath::Design;
use joulepath::solve::{
    EndReason, PackState, RailBufferState, Solution, StageState, solve_point_state,
};

use crate::runtime::{assert_fast_agrees, design, exact, fast};
use crate::util::close;

/// Pack at 3.0 V (flat, no resistance, 1 mAh so that the reference runs quickly); a boost at
/// 80 % to 3.3 V whose input is limited to 10 mA, with `buffer` on its rail; a radio drawing a
/// constant 100 mW for 10 ms each second and nothing between; the radio's supply range `range`.
fn pulsed(buffer: &str, range: &str) -> String {
    format!(
        "cells:
  c: {{ capacity: 1 mAh, ocv: [[0 %, 2.9999 V], [100 %, 3.0 V]], resistance: 0 Ω, cutoff: 2.0 V }}
battery: {{ cell: c }}
stages:
  - {{ id: boost, kind: boost, input: battery, output: 3.3 V, efficiency: 80 %, input_current_limit: 10 mA, buffer: {buffer} }}
loads: [{{ id: radio, rail: boost, voltage_range: {range}, draw: {{ tx: 100 mW, idle: 0 A }} }}]
modes: {{ tx: {{ radio: tx }}, idle: {{ radio: idle }} }}
profile:
  - repeat:
      - {{ mode: tx, for: 10 ms }}
      - {{ mode: idle, for: 990 ms }}
    for: 1 h
"
    )
}

const VIN: f64 = 3.0;
const ETA: f64 = 0.8;
const LIMIT: f64 = 10e-3;
const SET: f64 = 3.3;
const P: f64 = 0.1;
const T_P: f64 = 0.01;
const C: f64 = 1e-3;

/// At its input limit the boost gives the power eta Vin L = 24 mW; a constant power P drawn from
/// the capacitor's rail then moves it by C x dx/dt = eta Vin L - P (the capacitor's energy
/// balance, d(C x^2 / 2)/dt = power in; Kirchhoff's laws, from memory), so x^2 falls linearly
/// through the pulse and rises linearly in the recharge after it.
fn x_after_pulse(t: f64) -> f64 {
    (SET * SET - 2.0 * (P - ETA * VIN * LIMIT) * t / C).sqrt()
}

#[test]
fn the_rail_falls_as_the_capacitors_energy_balance_says() {
    // 100 mW for 10 ms: x falls from 3.3 V to sqrt(10.89 - 1.52) = 3.061 V. A radio needing
    // 3.05 V runs to empty; one needing 3.07 V stops in the first pulse, at the instant x^2
    // reaches its minimum: 3.2 V after (3.3^2 - 3.2^2) C / (2 x 76 mW) = 4.276 ms.
    let x_end = x_after_pulse(T_P);
    assert!(close(x_end, 3.061_046, 1e-6), "{x_end}");
    let runs = fast(&design(&pulsed("{ capacitance: 1 mF }", "[3.05 V, 3.6 V]")));
    assert_eq!(runs.end.reason, EndReason::Empty, "{:?}", runs.end);
    let stops = fast(&design(&pulsed("{ capacitance: 1 mF }", "[3.07 V, 3.6 V]")));
    assert_eq!(stops.end.reason, EndReason::Rail, "{:?}", stops.end);
    let d = design(&pulsed("{ capacitance: 1 mF }", "[3.2 V, 3.6 V]"));
    let t_hand = (SET * SET - 3.2 * 3.2) * C / (2.0 * (P - ETA * VIN * LIMIT));
    for r in [fast(&d), exact(&d)] {
        assert_eq!(r.end.reason, EndReason::Rail, "{:?}", r.end);
        assert!(
            close(r.runtime_s(), t_hand, 1e-4),
            "{} s vs {t_hand} s",
            r.runtime_s()
        );
    }
}

#[test]
fn the_stage_sits_at_its_limit_through_the_pulse_and_the_recharge() {
    // The recharge puts back what the pulse took beyond the stage's 24 mW: (P - eta Vin L) T_p /
    // (eta Vin L) = 76 mW x 10 ms / 24 mW = 31.67 ms, at the limit all along; 41.67 ms of each
    // second in all. The cells' charge is then the loads' energy over eta Vin (energy
    // conservation): 100 mW x 10 ms / 2.4 W/A = 416.7 µA on average, and 1 mAh lasts 8640 s.
    let d = design(&pulsed("{ capacitance: 1 mF }", "[2.5 V, 3.6 V]"));
    let t_rec = (P - ETA * VIN * LIMIT) * T_P / (ETA * VIN * LIMIT);
    let mean = P * T_P / (ETA * VIN);
    for r in [fast(&d), exact(&d)] {
        assert_eq!(r.end.reason, EndReason::Empty, "{:?}", r.end);
        let limited = r.ledger.stage_time_s(0, StageState::Limited) / r.runtime_s();
        assert!(
            close(limited, T_P + t_rec, 2e-4),
            "{limited} vs {}",
            T_P + t_rec
        );
        // The pack empties somewhere within a 1-s pass: within 1 s of 8640 s.
        assert!(
            (r.runtime_s() - 3.6 / mean).abs() < 1.0,
            "{}",
            r.runtime_s()
        );
        let cell_mean = r.ledger.charge_c / r.runtime_s();
        assert!(close(cell_mean, mean, 2e-4), "{cell_mean} vs {mean}");
    }
}

#[test]
fn series_resistance_and_leakage_are_paid_for_by_the_cells() {
    // With constant efficiency the stage's output is eta times its input: eta x (the cells'
    // energy) = the loads' energy + the buffer's losses - what its store gave (energy
    // conservation). The store gives back nothing over whole pulses, so at most what one pulse
    // takes from it beyond the stage's 24 mW (76 mW x 10 ms: the run may end inside one); its
    // losses are the leakage at about the setpoint (1 µA x 3.3 V) and the series resistance's
    // I^2 R.
    let d = design(&pulsed(
        "{ capacitance: 1 mF, esr: 0.2 Ω, leakage: 1 µA }",
        "[2.5 V, 3.6 V]",
    ));
    for r in [fast(&d), exact(&d)] {
        let l = &r.ledger;
        assert_eq!(r.end.reason, EndReason::Empty, "{:?}", r.end);
        let out = l.load_energy_total() + l.buffer_loss_j - l.buffer_out_j;
        assert!(
            close(ETA * l.ocv_energy_j, out, 1e-6),
            "{} vs {out}",
            ETA * l.ocv_energy_j
        );
        assert!(
            l.buffer_loss_j > 1e-6 * 3.2 * r.runtime_s(),
            "{}",
            l.buffer_loss_j
        );
        let one_pulse = (P - ETA * VIN * LIMIT) * T_P;
        assert!(
            l.buffer_out_j.abs() <= 1.01 * one_pulse,
            "{}",
            l.buffer_out_j
        );
    }
    assert_fast_agrees(&d, "rail buffer with series resistance and leakage");
}

#[test]
fn the_point_splits_the_rails_draw_between_stage_and_capacitor() {
    let d = design(&pulsed(
        "{ capacitance: 1 mF, esr: 0.5 Ω }",
        "[2.5 V, 3.6 V]",
    ));
    let at = PackState {
        soc: 1.0,
        v_pol: None,
        ambient_c: 25.0,
    };
    let point = |mode: usize, x: f64| match solve_point_state(&d, mode, at, None, &[(0, x)]) {
        Solution::Point(p) => p,
        Solution::Collapse { .. } => panic!("collapse"),
    };
    // In the pulse at x = 3.1 V: the stage gives 24 mW / V, the radio takes 100 mW / V and
    // the capacitor the rest through 0.5 Ω: V = x - 0.5 (100 mW - 24 mW) / V, a quadratic,
    // V = (x + sqrt(x^2 - 4 x 0.5 x 76 mW)) / 2.
    let p = point(0, 3.1);
    let v = 0.5 * (3.1 + (3.1_f64 * 3.1 - 4.0 * 0.5 * 0.076).sqrt());
    let b = p.rail_buffers[0];
    assert_eq!(b.state, RailBufferState::Limited);
    assert_eq!(p.stages[0].state, StageState::Limited);
    assert!(close(b.node_voltage, v, 1e-9), "{} vs {v}", b.node_voltage);
    assert!(close(b.current, (3.1 - v) / 0.5, 1e-6), "{}", b.current);
    assert!(close(p.pack.current, LIMIT, 1e-12));
    // Idle at 3.1 V: the stage at its limit recharges it through 0.5 Ω, V = x + 0.5 I with
    // V I = 24 mW; at 3.2999 V the stage regulates and tops it up at (3.3 - x) / 0.5 = 0.2 mA.
    let p = point(1, 3.1);
    let v = 0.5 * (3.1 + (3.1_f64 * 3.1 + 4.0 * 0.5 * 0.024).sqrt());
    assert_eq!(p.rail_buffers[0].state, RailBufferState::Limited);
    assert!(close(p.rail_buffers[0].node_voltage, v, 1e-9));
    let p = point(1, 3.2999);
    assert_eq!(p.rail_buffers[0].state, RailBufferState::Topping);
    assert!(close(p.rail_buffers[0].current, -0.2e-3, 1e-6));
    // Settled, the capacitor carries nothing; the stage alone feeds the rail.
    let p = point(1, SET);
    assert_eq!(p.rail_buffers[0].state, RailBufferState::Settled);
    assert!(p.pack.current.abs() < 1e-15, "{}", p.pack.current);
}

#[test]
fn a_rail_buffer_needs_a_switching_stage_with_a_limit() {
    let cases = [
        (
            "kind: linear, input: battery, output: 2.5 V, buffer: { capacitance: 1 mF }",
            "takes no buffer capacitor",
        ),
        (
            "kind: boost, input: battery, output: 3.3 V, efficiency: 90 %, buffer: { capacitance: 1 mF }",
            "no `input_current_limit`",
        ),
        (
            "kind: boost, input: battery, output: 3.3 V, efficiency: 90 %, input_current_limit: 5 mA, buffer: { capacitance: 1 mF, current_limit: 1 mA }",
            "no current limit of its own",
        ),
        (
            "kind: boost, input: battery, output: 3.3 V, efficiency: 90 %, input_current_limit: 5 mA, buffer: { capacitance: 0 F }",
            "stages[0].buffer.capacitance",
        ),
    ];
    for (stage, wanted) in cases {
        let text = format!(
            "cells:
  c: {{ capacity: 1 mAh, ocv: [[0 %, 2.9 V], [100 %, 3.0 V]], resistance: 1 Ω, cutoff: 2.0 V }}
battery: {{ cell: c }}
stages: [{{ id: s, {stage} }}]
loads: [{{ id: l, rail: s, draw: {{ on: 1 mA }} }}]
modes: {{ on: {{ l: on }} }}
profile: [{{ mode: on, for: 1 h }}]
"
        );
        let err = Design::from_text(&text).expect_err(stage).to_string();
        assert!(err.contains(wanted), "{stage}: {err}");
    }
}
