//! The tree as an indented outline: what `check` prints for a valid design.

use std::io::{self, Write};

use super::spread::fmt_value;
use crate::model::{
    Design, Dist, Draw, Knob, LossModel, RepeatUntil, Stage, StageKind, Step, Tolerance,
};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent};

/// Write the outline of `design`: the pack, then each rail with its loads and stages, then the
/// modes and the profile.
pub fn write_outline(w: &mut dyn Write, d: &Design) -> io::Result<()> {
    let p = &d.pack;
    let c = &p.cell;
    writeln!(w, "{}", d.title)?;
    writeln!(
        w,
        "pack: {} in series x {} in parallel of `{}` ({}), {} full, cutoff {}, {}, {} at 50 %, {} ambient",
        p.series,
        p.parallel,
        c.name,
        c.chemistry.name(),
        fmt_eng(p.ocv(1.0), "V"),
        fmt_eng(p.cutoff_v(), "V"),
        fmt_eng(p.capacity_c(d.ambient_c) / 3600.0, "Ah"),
        fmt_eng(p.r0(0.5, d.ambient_c), "Ω"),
        fmt_celsius(d.ambient_c)
    )?;
    if let Some(r) = d.climate.as_ref().and_then(|c| c.series()) {
        writeln!(
            w,
            "ambient: a recorded series of {} rows around that mean, {} after its last row",
            r.len(),
            if r.repeats() { "repeated" } else { "held" }
        )?;
    }
    if let Some(b) = p.buffer {
        writeln!(
            w,
            "buffer: {} across the pack, series resistance {}, leakage {}, {}",
            fmt_eng(b.capacitance, "F"),
            fmt_eng(b.esr, "Ω"),
            fmt_eng(b.leakage, "A"),
            b.current_limit.map_or_else(
                || "no current limiter".to_string(),
                |l| format!("the cells' current limited to {}", fmt_eng(l, "A"))
            )
        )?;
    }
    writeln!(w, "battery")?;
    rail(w, d, 0, "")?;
    let names: Vec<&str> = d
        .modes
        .iter()
        .filter(|m| m.in_file())
        .map(|m| m.name.as_str())
        .collect();
    writeln!(w, "modes: {}", names.join(", "))?;
    let cycle: f64 = d.profile.iter().map(Step::duration).sum();
    writeln!(
        w,
        "profile: {} (one pass {})",
        steps(d, &d.profile),
        fmt_duration(cycle)
    )?;
    if !d.tolerances.is_empty() {
        writeln!(
            w,
            "tolerances: {} values vary from unit to unit (`joulepath spread` samples them)",
            d.tolerances.len()
        )?;
        for t in &d.tolerances {
            writeln!(w, "  {}  {}", t.path, spread_text(d, t))?;
        }
    }
    Ok(())
}

/// How a value spreads, in words: `normal 45.0 mA ± 4.50 mA (3 sigma)`, `uniform 600 nA..1.20 µA`,
/// `one of 2.00 min, 5.00 min`.
pub fn spread_text(d: &Design, t: &Tolerance) -> String {
    let v = |x: f64| fmt_value(d, &t.knob, x);
    match &t.dist {
        Dist::Normal { mean, sigma } => {
            let band = fmt_value(d, &t.knob, mean + 3.0 * sigma);
            let lo = fmt_value(d, &t.knob, mean - 3.0 * sigma);
            format!(
                "normal around {}, sigma {}: {lo}..{band} (3 sigma)",
                v(*mean),
                sigma_text(d, t, *sigma)
            )
        }
        Dist::Uniform { lo, hi } => format!("uniform {}..{}", v(*lo), v(*hi)),
        Dist::Pick(c) => {
            let all: Vec<String> = c.iter().map(|x| v(*x)).collect();
            format!("one of {}", all.join(", "))
        }
    }
}

/// A standard deviation in the value's unit (a temperature difference in kelvin, not °C).
fn sigma_text(d: &Design, t: &Tolerance, sigma: f64) -> String {
    if t.knob == Knob::Ambient {
        format!("{} K", crate::units::fmt_sig(sigma, 3))
    } else {
        fmt_value(d, &t.knob, sigma)
    }
}

fn rail(w: &mut dyn Write, d: &Design, r: usize, prefix: &str) -> io::Result<()> {
    let loads = d.tree.loads_on(r);
    let stages = d.tree.stages_on(r);
    let n = loads.len() + stages.len();
    let mut i = 0;
    for &l in loads {
        i += 1;
        let (branch, _) = branches(i == n);
        let load = &d.loads[l];
        let mut draws: Vec<String> = load
            .states
            .iter()
            .take(load.file_states)
            .enumerate()
            .map(|(k, (name, draw))| {
                let mark = if load.default == Some(k) {
                    " (default)"
                } else {
                    ""
                };
                match load.captured.iter().find(|c| c.state == k) {
                    Some(c) => format!(
                        "{name} capture {} (mean {}; {} samples as {} segments, which keep the lowest terminal voltage within {}){mark}",
                        c.file,
                        draw_text(*draw),
                        c.samples,
                        c.segments.len(),
                        fmt_eng(c.bound_v.max(0.0), "V")
                    ),
                    None => format!("{name} {}{mark}", draw_text(*draw)),
                }
            })
            .collect();
        if let (Some(lo), Some(hi)) = (load.v_min, load.v_max) {
            draws.push(format!("needs {}..{}", fmt_eng(lo, "V"), fmt_eng(hi, "V")));
        }
        writeln!(w, "{prefix}{branch}{}  {}", load.id, draws.join(", "))?;
    }
    for &k in stages {
        i += 1;
        let (branch, cont) = branches(i == n);
        writeln!(
            w,
            "{prefix}{branch}{}  {}",
            d.stages[k].id,
            stage_text(&d.stages[k])
        )?;
        rail(w, d, k + 1, &format!("{prefix}{cont}"))?;
    }
    Ok(())
}

fn branches(last: bool) -> (&'static str, &'static str) {
    if last {
        ("└─ ", "   ")
    } else {
        ("├─ ", "│  ")
    }
}

fn draw_text(d: Draw) -> String {
    match d {
        Draw::Current(i) => fmt_eng(i, "A"),
        Draw::Power(p) => fmt_eng(p, "W"),
        Draw::Resistance(r) => fmt_eng(r, "Ω"),
        Draw::Led { knee, resistance } => format!(
            "LED, knee {} + {}",
            fmt_eng(knee, "V"),
            fmt_eng(resistance, "Ω")
        ),
    }
}

fn stage_text(s: &Stage) -> String {
    let mut parts = Vec::new();
    if s.kind == StageKind::Switch {
        parts.push(format!("switch, {} on", fmt_eng(s.on_resistance, "Ω")));
    } else if let Some(i) = s.led_current {
        parts.push(format!(
            "{} LED driver at {} (its LED at {})",
            s.kind.name(),
            fmt_eng(i, "A"),
            fmt_eng(s.setpoint, "V")
        ));
    } else {
        parts.push(format!("{} to {}", s.kind.name(), fmt_eng(s.setpoint, "V")));
    }
    match &s.loss {
        LossModel::Constant(e) => parts.push(format!("efficiency {}", fmt_percent(*e))),
        LossModel::Curves(c) if c.len() == 1 => parts.push("efficiency curve".into()),
        LossModel::Curves(c) => {
            parts.push(format!("efficiency curves at {} input voltages", c.len()));
        }
        LossModel::Terms { drop, resistance } => parts.push(format!(
            "loss {} x I + {} x I²",
            fmt_eng(*drop, "V"),
            fmt_eng(*resistance, "Ω")
        )),
        LossModel::None => {}
    }
    match s.kind {
        StageKind::Buck | StageKind::Linear if s.led_current.is_some() => {
            parts.push(format!("headroom {}", fmt_eng(s.dropout, "V")));
        }
        StageKind::Buck | StageKind::Linear => {
            parts.push(format!("dropout {}", fmt_eng(s.dropout, "V")));
        }
        StageKind::Boost if s.bypass_resistance > 0.0 => parts.push(format!(
            "bypass drop {} + {} x I",
            fmt_eng(s.bypass_drop, "V"),
            fmt_eng(s.bypass_resistance, "Ω")
        )),
        StageKind::Boost => parts.push(format!("bypass drop {}", fmt_eng(s.bypass_drop, "V"))),
        _ => {}
    }
    if s.quiescent > 0.0 {
        let from = if s.quiescent_from_output {
            " from its output"
        } else {
            ""
        };
        parts.push(format!("quiescent {}{from}", fmt_eng(s.quiescent, "A")));
    }
    if let Some(limit) = s.input_current_limit {
        parts.push(format!("input limit {}", fmt_eng(limit, "A")));
    }
    if let Some(b) = s.buffer {
        parts.push(format!(
            "buffer {} on its rail (series resistance {}, leakage {})",
            fmt_eng(b.capacitance, "F"),
            fmt_eng(b.esr, "Ω"),
            fmt_eng(b.leakage, "A")
        ));
    }
    if let (Some(lo), Some(hi)) = (s.input_min, s.input_max) {
        parts.push(format!("input {}..{}", fmt_eng(lo, "V"), fmt_eng(hi, "V")));
    }
    parts.join(", ")
}

/// The file's mode whose captures a block of steps is: every step a segment of that mode.
fn captured_mode(d: &Design, list: &[Step]) -> Option<usize> {
    let mut found = None;
    for s in list {
        let Step::Hold { mode, .. } = s else {
            return None;
        };
        let p = d.modes[*mode].part_of?;
        if found.is_some_and(|f| f != p) {
            return None;
        }
        found = Some(p);
    }
    found
}

fn steps(d: &Design, list: &[Step]) -> String {
    let parts: Vec<String> = list
        .iter()
        .map(|s| match s {
            Step::Hold { mode, seconds } => {
                format!("{} {}", d.modes[*mode].name, fmt_duration(*seconds))
            }
            // The segments of a mode's captures, as the file wrote the step.
            Step::Repeat {
                steps: inner,
                until,
            } if captured_mode(d, inner).is_some() => {
                let m = captured_mode(d, inner).unwrap_or(0);
                match until {
                    RepeatUntil::Times(1) => format!(
                        "{} one capture ({})",
                        d.modes[m].name,
                        fmt_duration(s.duration())
                    ),
                    _ => format!(
                        "{} {} (captured)",
                        d.modes[m].name,
                        fmt_duration(s.duration())
                    ),
                }
            }
            Step::Repeat {
                steps: inner,
                until,
            } => match until {
                RepeatUntil::Times(n) => format!("{n} x [{}]", steps(d, inner)),
                RepeatUntil::Seconds(t) => {
                    format!("[{}] for {}", steps(d, inner), fmt_duration(*t))
                }
            },
        })
        .collect();
    parts.join(", ")
}
