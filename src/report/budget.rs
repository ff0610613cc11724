//! The budget report: the operating point of every mode as a table, JSON or CSV.

use std::io::{self, Write};

use super::json::BudgetJson;
use super::text::{Align, TextTable};
use super::{Format, caution_for, warnings, wrap, write_warnings};
use crate::model::Design;
use crate::solve::{ModeBudget, Solution, junction_c};
use crate::units::{fmt_celsius, fmt_eng, fmt_percent};

/// Write the budget of `modes` at `soc` in `format`.
pub fn write_budget(
    w: &mut dyn Write,
    d: &Design,
    soc: f64,
    modes: &[ModeBudget],
    format: Format,
) -> io::Result<()> {
    match format {
        Format::Json => {
            serde_json::to_writer_pretty(&mut *w, &BudgetJson::new(d, soc, modes))?;
            writeln!(w)
        }
        Format::Csv => write_csv(w, d, modes),
        Format::Table => write_table(w, d, soc, modes),
    }
}

fn opt_eng(x: Option<f64>, unit: &str) -> String {
    x.map_or_else(|| "—".into(), |v| fmt_eng(v, unit))
}

fn write_table(w: &mut dyn Write, d: &Design, soc: f64, modes: &[ModeBudget]) -> io::Result<()> {
    writeln!(w, "{}", d.title)?;
    writeln!(
        w,
        "budget at {} state of charge, {} ambient, polarization settled",
        fmt_percent(soc),
        fmt_celsius(d.ambient_c)
    )?;
    for m in modes {
        let mode = &d.modes[m.mode];
        writeln!(w)?;
        writeln!(w, "mode `{}`", mode.name)?;
        let p = match &m.solution {
            Solution::Collapse { ocv, resistance } => {
                writeln!(
                    w,
                    "  COLLAPSE: the pack (open circuit {}, {} inside) cannot give the power this mode demands at any voltage; at most {} is available",
                    fmt_eng(*ocv, "V"),
                    fmt_eng(*resistance, "Ω"),
                    fmt_eng(ocv * ocv / (4.0 * resistance), "W")
                )?;
                continue;
            }
            Solution::Point(p) => p,
        };
        let cutoff = d.pack.cutoff_v();
        writeln!(
            w,
            "  pack  {} at {} (open circuit {}), {} out, {} lost inside{}",
            fmt_eng(p.pack.current, "A"),
            fmt_eng(p.pack.voltage, "V"),
            fmt_eng(p.pack.ocv, "V"),
            fmt_eng(p.pack.power(), "W"),
            fmt_eng(p.pack.loss, "W"),
            if p.pack.voltage < cutoff {
                format!("; BELOW the {} pack cutoff", fmt_eng(cutoff, "V"))
            } else {
                String::new()
            }
        )?;
        if !d.stages.is_empty() {
            let mut t = TextTable::new(&[
                ("stage", Align::Left),
                ("kind", Align::Left),
                ("state", Align::Left),
                ("Vin", Align::Right),
                ("Iin", Align::Right),
                ("Vout", Align::Right),
                ("Iout", Align::Right),
                ("loss", Align::Right),
                ("eff", Align::Right),
                ("Tj", Align::Right),
            ]);
            for (k, (s, sp)) in d.stages.iter().zip(&p.stages).enumerate() {
                t.row(vec![
                    s.id.clone(),
                    s.kind.name().into(),
                    sp.state.name().into(),
                    fmt_eng(sp.vin, "V"),
                    fmt_eng(sp.iin, "A"),
                    fmt_eng(sp.vout, "V"),
                    fmt_eng(sp.iout, "A"),
                    fmt_eng(sp.loss, "W"),
                    sp.efficiency().map_or_else(|| "—".into(), fmt_percent),
                    junction_c(d, k, sp.loss, d.ambient_c).map_or_else(|| "—".into(), fmt_celsius),
                ]);
            }
            writeln!(w)?;
            t.write(w, "  ")?;
        }
        if !d.loads.is_empty() {
            let mut t = TextTable::new(&[
                ("load", Align::Left),
                ("rail", Align::Left),
                ("state", Align::Left),
                ("V", Align::Right),
                ("I", Align::Right),
                ("P", Align::Right),
                ("note", Align::Left),
            ]);
            for (l, lp) in d.loads.iter().zip(&p.loads) {
                let note = if !lp.live {
                    "rail off".to_string()
                } else if lp.state.is_some() && l.v_min.is_some_and(|v| lp.voltage < v) {
                    format!("below its {} minimum", opt_eng(l.v_min, "V"))
                } else {
                    String::new()
                };
                t.row(vec![
                    l.id.clone(),
                    d.rail_name(l.rail).into(),
                    l.state_name(lp.state).into(),
                    fmt_eng(lp.voltage, "V"),
                    fmt_eng(lp.current, "A"),
                    fmt_eng(lp.power, "W"),
                    note,
                ]);
            }
            writeln!(w)?;
            t.write(w, "  ")?;
        }
        if !m.violations.is_empty() {
            writeln!(w)?;
            writeln!(w, "  violations:")?;
            for v in &m.violations {
                writeln!(w, "  - {}: {}", v.kind.name(), v.detail)?;
            }
        }
    }
    writeln!(w)?;
    write_warnings(w, &warnings(d, d.ambient_c), 96)?;
    for line in wrap(&caution_for([d]), 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

/// CSV cell: numbers as they are, text quoted when it needs it.
fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

fn num(x: Option<f64>) -> String {
    x.map_or_else(String::new, |v| format!("{v}"))
}

fn write_csv(w: &mut dyn Write, d: &Design, modes: &[ModeBudget]) -> io::Result<()> {
    writeln!(
        w,
        "mode,element,id,kind,state,vin_v,iin_a,vout_v,iout_a,power_w,loss_w,efficiency,junction_c"
    )?;
    for m in modes {
        let mode = csv_text(&d.modes[m.mode].name);
        let p = match &m.solution {
            Solution::Collapse { ocv, .. } => {
                writeln!(w, "{mode},battery,battery,pack,collapse,{ocv},,,,,,,")?;
                continue;
            }
            Solution::Point(p) => p,
        };
        writeln!(
            w,
            "{mode},battery,battery,pack,{},{},{},{},{},{},{},,",
            if p.pack.voltage < d.pack.cutoff_v() {
                "below_cutoff"
            } else {
                "ok"
            },
            p.pack.ocv,
            p.pack.current,
            p.pack.voltage,
            p.pack.current,
            p.pack.power(),
            p.pack.loss
        )?;
        for (k, (s, sp)) in d.stages.iter().zip(&p.stages).enumerate() {
            writeln!(
                w,
                "{mode},stage,{},{},{},{},{},{},{},{},{},{},{}",
                csv_text(&s.id),
                s.kind.name(),
                sp.state.name(),
                sp.vin,
                sp.iin,
                sp.vout,
                sp.iout,
                sp.vout * sp.iout,
                sp.loss,
                num(sp.efficiency()),
                num(junction_c(d, k, sp.loss, d.ambient_c))
            )?;
        }
        for (l, lp) in d.loads.iter().zip(&p.loads) {
            writeln!(
                w,
                "{mode},load,{},load,{},{},{},,,{},,,",
                csv_text(&l.id),
                csv_text(l.state_name(lp.state)),
                lp.voltage,
                lp.current,
                lp.power
            )?;
        }
    }
    Ok(())
}
