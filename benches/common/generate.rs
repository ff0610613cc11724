//! Generated designs for the benchmarks: a realistic mix of stages and loads, `10 n` loads on
//! `n` stages, deterministic for each `n`.

use std::fmt::Write as _;

// ---------------------------------------------------------------------------------------------
// The generated design.

/// A small deterministic generator (xorshift), so every run builds the same trees.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        self.0 = x;
        x
    }

    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }

    /// Uniform in [lo, hi).
    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * ((self.next() >> 11) as f64 / (1u64 << 53) as f64)
    }
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Kind {
    Buck,
    Boost,
    BuckBoost,
    Linear,
    Switch,
}

impl Kind {
    fn name(self) -> &'static str {
        match self {
            Kind::Buck => "buck",
            Kind::Boost => "boost",
            Kind::BuckBoost => "buck-boost",
            Kind::Linear => "linear",
            Kind::Switch => "switch",
        }
    }
}

struct Plan {
    id: String,
    kind: Kind,
    /// Input rail: 0 the battery, `k + 1` stage `k`.
    input: usize,
    /// Nominal input voltage.
    vin: f64,
    /// Nominal output voltage.
    vout: f64,
    level: usize,
}

/// Standard rail voltages, highest first.
const LADDER: [f64; 9] = [5.0, 3.3, 2.8, 2.5, 1.8, 1.5, 1.2, 1.0, 0.9];
/// Nominal pack voltage (4 cells in series near mid charge).
const PACK_V: f64 = 14.8;

/// Voltages a stage can regulate to from `vin`, keeping `headroom` for dropout.
fn below(vin: f64, headroom: f64) -> Vec<f64> {
    LADDER
        .iter()
        .copied()
        .filter(|&v| v <= vin - headroom)
        .collect()
}

/// The stages of a tree of `n`: a few converters on the pack, bucks, buck-boosts, boosts and
/// linear regulators below them, and load switches at the leaves; up to four levels deep.
fn plan(n: usize, rng: &mut Rng) -> Vec<Plan> {
    let l1 = (n / 40).max(3).min(n);
    let l2 = (n * 22 / 100).min(n - l1);
    let l4 = (n * 30 / 100).min(n - l1 - l2);
    let l3 = n - l1 - l2 - l4;
    let mut out: Vec<Plan> = Vec::with_capacity(n);
    let push =
        |out: &mut Vec<Plan>, kind: Kind, input: usize, vin: f64, vout: f64, level: usize| {
            let k = out.len();
            out.push(Plan {
                id: format!("{}-{:05}", kind.name(), k),
                kind,
                input,
                vin,
                vout,
                level,
            });
        };
    // Level 1, on the pack.
    for i in 0..l1 {
        let (kind, vout) = match i % 4 {
            0 => (Kind::Buck, 5.0),
            1 => (Kind::Buck, 3.3),
            2 => (Kind::BuckBoost, 12.0),
            _ => (Kind::Boost, 24.0),
        };
        push(&mut out, kind, 0, PACK_V, vout, 1);
    }
    // Levels 2 to 4: each stage hangs on a stage of the level above (never on a switch).
    for (level, count) in [(2, l2), (3, l3), (4, l4)] {
        let parents: Vec<usize> = (0..out.len())
            .filter(|&k| out[k].level == level - 1 && out[k].kind != Kind::Switch)
            .collect();
        let parents = if parents.is_empty() {
            (0..out.len())
                .filter(|&k| out[k].kind != Kind::Switch)
                .collect()
        } else {
            parents
        };
        for i in 0..count {
            let p = parents[(i * 7 + rng.below(3)) % parents.len()];
            let vp = out[p].vout;
            let pick = rng.below(10);
            let (kind, vout) = match level {
                2 => {
                    if vp >= 12.0 {
                        if pick < 3 {
                            (Kind::BuckBoost, 5.0)
                        } else {
                            choose(Kind::Buck, vp, 0.5, rng)
                        }
                    } else if vp <= 3.3 && pick < 2 {
                        (Kind::Boost, 5.0)
                    } else if pick < 6 {
                        choose(Kind::Linear, vp, 0.4, rng)
                    } else {
                        choose(Kind::Buck, vp, 0.5, rng)
                    }
                }
                3 => {
                    if pick < 6 {
                        choose(Kind::Linear, vp, 0.4, rng)
                    } else if pick < 9 {
                        choose(Kind::Buck, vp, 0.5, rng)
                    } else {
                        (Kind::Switch, vp)
                    }
                }
                _ => {
                    if pick < 6 {
                        (Kind::Switch, vp)
                    } else {
                        choose(Kind::Linear, vp, 0.4, rng)
                    }
                }
            };
            push(&mut out, kind, p + 1, vp, vout, level);
        }
    }
    out
}

/// A regulator of `kind` from `vin`, or a load switch where no setpoint leaves the headroom.
fn choose(kind: Kind, vin: f64, headroom: f64, rng: &mut Rng) -> (Kind, f64) {
    let c = below(vin, headroom);
    if c.is_empty() {
        (Kind::Switch, vin)
    } else {
        (kind, c[rng.below(c.len().min(3))])
    }
}

fn volts(v: f64) -> String {
    format!("{} V", round3(v))
}

fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}

/// A measured-looking efficiency curve: low at light load, peaking near 100 mA, easing off above.
fn curve(rng: &mut Rng, shift: f64) -> String {
    let peak = rng.range(88.0, 94.0) - shift;
    let points = [
        (1.0, peak - rng.range(16.0, 22.0)),
        (10.0, peak - rng.range(6.0, 9.0)),
        (100.0, peak),
        (1000.0, peak - rng.range(2.0, 5.0)),
    ];
    let mut s = String::from("[");
    for (i, (ma, eta)) in points.iter().enumerate() {
        if i > 0 {
            s.push_str(", ");
        }
        let _ = write!(s, "[{ma} mA, {eta:.1} %]");
    }
    s.push(']');
    s
}

/// The design text of a tree of `n` stages and `10 n` loads.
pub fn generate(n: usize) -> String {
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15 ^ n as u64);
    let stages = plan(n, &mut rng);
    let mut t = String::with_capacity(n * 2200);
    let _ = writeln!(
        t,
        "design: Generated field station, {n} stages and {} loads on a 4S10P pack",
        10 * n
    );
    t.push_str("ambient: 25 °C\n\n");

    // A lithium-ion cell with an 11-point OCV table.
    t.push_str("cells:\n  station-cell-3000:\n    chemistry: li-ion\n    capacity: 3000 mAh\n");
    t.push_str("    rated_current: 600 mA\n    ocv:\n");
    let ocv = [
        3.00, 3.30, 3.45, 3.55, 3.62, 3.68, 3.74, 3.82, 3.92, 4.05, 4.18,
    ];
    for (i, v) in ocv.iter().enumerate() {
        let _ = writeln!(t, "      - [{} %, {v:.2} V]", i * 10);
    }
    t.push_str(
        "    resistance:\n      - [0 %, 45 mΩ]\n      - [20 %, 28 mΩ]\n      - [100 %, 22 mΩ]\n",
    );
    t.push_str("    polarization: { resistance: 12 mΩ, time_constant: 25 s }\n");
    t.push_str("    peukert: 1.03\n    cutoff: 3.0 V\n    max_current: 10 A\n    self_discharge: 2 %/month\n");
    t.push_str("    temperature:\n");
    t.push_str("      - { at: -10 °C, capacity: 80 %, resistance: 220 % }\n");
    t.push_str("      - { at: 25 °C, capacity: 100 %, resistance: 100 % }\n\n");
    t.push_str(
        "battery:\n  cell: station-cell-3000\n  series: 4\n  parallel: 10\n  start: 100 %\n\n",
    );

    // Stages.
    t.push_str("stages:\n");
    for (k, s) in stages.iter().enumerate() {
        let input = if s.input == 0 {
            "battery".to_string()
        } else {
            stages[s.input - 1].id.clone()
        };
        let _ = writeln!(
            t,
            "  - id: {}\n    kind: {}\n    input: {input}",
            s.id,
            s.kind.name()
        );
        if s.kind != Kind::Switch {
            let _ = writeln!(t, "    output: {}", volts(s.vout));
        }
        match s.kind {
            Kind::Buck | Kind::Boost | Kind::BuckBoost => {
                match k % 4 {
                    0 => {
                        let _ = writeln!(t, "    efficiency: {:.1} %", rng.range(84.0, 95.0));
                    }
                    1 => {
                        let _ = writeln!(t, "    efficiency: {}", curve(&mut rng, 0.0));
                    }
                    2 => {
                        t.push_str("    efficiency:\n");
                        for (vin, shift) in [(0.85 * s.vin, 0.0), (1.15 * s.vin, 2.0)] {
                            let _ = writeln!(
                                t,
                                "      - vin: {}\n        curve: {}",
                                volts(vin),
                                curve(&mut rng, shift)
                            );
                        }
                    }
                    _ => {
                        let _ = writeln!(
                            t,
                            "    loss: {{ drop: {:.0} mV, resistance: {:.0} mΩ }}",
                            rng.range(20.0, 80.0),
                            rng.range(50.0, 300.0)
                        );
                    }
                }
                let _ = writeln!(
                    t,
                    "    quiescent: {:.1} µA\n    shutdown: 0.2 µA",
                    rng.range(5.0, 60.0)
                );
            }
            Kind::Linear => {
                let _ = writeln!(
                    t,
                    "    quiescent: {:.1} µA\n    shutdown: 0.1 µA",
                    rng.range(1.0, 50.0)
                );
            }
            Kind::Switch => {
                let _ = writeln!(
                    t,
                    "    on_resistance: {:.0} mΩ\n    quiescent: 0.5 µA\n    shutdown: 0.05 µA",
                    rng.range(40.0, 200.0)
                );
            }
        }
        match s.kind {
            Kind::Buck => {
                let _ = writeln!(t, "    dropout: {:.2} V", rng.range(0.08, 0.2));
            }
            Kind::Linear => {
                let _ = writeln!(t, "    dropout: {:.2} V", rng.range(0.1, 0.3));
            }
            Kind::Boost => t.push_str("    bypass_drop: 0.3 V\n"),
            _ => {}
        }
        if s.kind != Kind::Switch {
            let _ = writeln!(
                t,
                "    input_range: [{}, {}]",
                volts(0.5 * s.vin),
                volts(1.6 * s.vin)
            );
        }
        if s.level <= 2 {
            let _ = writeln!(t, "    theta_ja: {:.0} °C/W", rng.range(30.0, 90.0));
        }
    }

    // Loads: ten per stage, spread over every rail; a few straight on the pack.
    t.push_str("\nloads:\n");
    let loads = 10 * n;
    for l in 0..loads {
        let rail = if l % 97 == 0 { 0 } else { l % n + 1 };
        let rail_name = if rail == 0 {
            "battery"
        } else {
            stages[rail - 1].id.as_str()
        };
        let rail_v = if rail == 0 {
            PACK_V
        } else {
            stages[rail - 1].vout
        };
        let _ = writeln!(t, "  - id: load-{l:06}\n    rail: {rail_name}");
        if l % 5 == 0 {
            let _ = writeln!(
                t,
                "    voltage_range: [{}, {}]",
                volts(0.6 * rail_v),
                volts(1.4 * rail_v)
            );
        }
        let sleep = format!("{:.1} µA", rng.range(0.5, 15.0));
        let run = match l % 3 {
            0 => format!("{:.2} mA", rng.range(0.1, 1.5)),
            1 => format!("{:.2} mW", rng.range(0.5, 4.0)),
            // A resistive load drawing about 0.2 to 1 mA at its rail's voltage.
            _ => format!("{:.2} kΩ", rail_v / rng.range(0.2, 1.0)),
        };
        let peak = format!("{:.1} mW", rng.range(3.0, 10.0));
        let _ = writeln!(
            t,
            "    draw: {{ sleep: {sleep}, run: {run}, peak: {peak} }}"
        );
        if l % 4 != 3 {
            t.push_str("    default: sleep\n");
        }
    }

    // Modes: everything asleep; half the loads running; a burst; a standby that shuts down part
    // of the tree.
    t.push_str("\nmodes:\n  sleep: {}\n  active:\n");
    for l in (0..loads).step_by(2) {
        let _ = writeln!(t, "    load-{l:06}: run");
    }
    t.push_str("  burst:\n");
    for l in 0..loads {
        if l % 7 == 0 {
            let _ = writeln!(t, "    load-{l:06}: peak");
        } else if l % 3 == 0 {
            let _ = writeln!(t, "    load-{l:06}: run");
        }
    }
    t.push_str("  standby:\n");
    for (k, s) in stages.iter().enumerate() {
        let off = (s.level == 1 && k % 2 == 1) || (s.kind == Kind::Switch && k % 3 == 0);
        if off {
            let _ = writeln!(t, "    {}: off", s.id);
        }
    }

    t.push_str(concat!(
        "\nprofile:\n",
        "  - repeat:\n",
        "      - { mode: burst, for: 20 ms }\n",
        "      - { mode: active, for: 2 s }\n",
        "      - { mode: sleep, for: 30 s }\n",
        "    for: 8 h\n",
        "  - { mode: standby, for: 16 h }\n",
    ));
    t
}
