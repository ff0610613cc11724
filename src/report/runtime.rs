//! The runtime report: how long, why it stops, where the energy went.

use std::io::{self, Write};

use super::json::RuntimeJson;
use super::text::{Align, TextTable};
use super::{Format, caution_for, warnings, wrap, write_warnings};
use crate::model::Design;
use crate::solve::{EndReason, RunResult, junction_c};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent};

/// Write the result of a run in `format`; with `trace`, JSON adds the trace and CSV is the trace.
pub fn write_runtime(
    w: &mut dyn Write,
    d: &Design,
    r: &RunResult,
    format: Format,
    trace: bool,
) -> io::Result<()> {
    match format {
        Format::Json => {
            serde_json::to_writer_pretty(&mut *w, &RuntimeJson::new(d, r, trace))?;
            writeln!(w)
        }
        Format::Csv if trace => write_trace_csv(w, r),
        Format::Csv => write_csv(w, d, r),
        Format::Table => write_table(w, d, r),
    }
}

/// The end of a run in one plain sentence.
pub fn end_sentence(d: &Design, r: &RunResult) -> String {
    let e = &r.end;
    let mode = e
        .mode
        .map_or_else(String::new, |m| format!(" in mode `{}`", d.modes[m].name));
    let soc = fmt_percent(e.soc);
    match e.reason {
        EndReason::Collapse => format!(
            "the pack could no longer give the power the tree demands{mode} (voltage collapse) with {soc} charge left"
        ),
        EndReason::Cutoff => format!(
            "the pack's voltage under load fell below its {} cutoff{mode} with {soc} charge left",
            fmt_eng(d.pack.cutoff_v(), "V")
        ),
        EndReason::Undervoltage => {
            let min = d
                .stages
                .iter()
                .find(|s| s.id == e.subject)
                .and_then(|s| s.input_min);
            format!(
                "the input of `{}` fell below its {} minimum (undervoltage lockout){mode} with {soc} charge left",
                e.subject,
                min.map_or_else(|| "rated".into(), |v| fmt_eng(v, "V"))
            )
        }
        EndReason::Rail => {
            let min = d
                .loads
                .iter()
                .find(|l| l.id == e.subject)
                .and_then(|l| l.v_min);
            format!(
                "the supply of `{}` fell below its {} minimum{mode} with {soc} charge left",
                e.subject,
                min.map_or_else(|| "rated".into(), |v| fmt_eng(v, "V"))
            )
        }
        EndReason::Empty => "the pack is empty (0 % state of charge)".to_string(),
        EndReason::Horizon => format!(
            "it was still running when the simulation stopped at {}, with {soc} charge left",
            fmt_duration(e.t_s)
        ),
    }
}

fn write_table(w: &mut dyn Write, d: &Design, r: &RunResult) -> io::Result<()> {
    let t = r.runtime_s();
    writeln!(w, "{}", d.title)?;
    writeln!(
        w,
        "runtime {} at {} ambient",
        fmt_duration(t),
        fmt_celsius(r.ambient_c)
    )?;
    for line in wrap(&format!("it stops because {}.", end_sentence(d, r)), 96) {
        writeln!(w, "{line}")?;
    }
    if let Some(ideal) = r.ideal_runtime_s() {
        writeln!(
            w,
            "ideal runtime {} (the stored energy at the loads' mean power): {} of it reached the loads",
            fmt_duration(ideal),
            fmt_percent(t / ideal)
        )?;
    }
    let l = &r.ledger;
    writeln!(w)?;
    writeln!(
        w,
        "pack: {} and {} drawn, average {} and {}, {} lost inside",
        fmt_eng(l.charge_c / 3600.0, "Ah"),
        fmt_eng(l.energy_j / 3600.0, "Wh"),
        fmt_eng(r.average_current_a(), "A"),
        fmt_eng(r.average_power_w(), "W"),
        fmt_eng(l.pack_loss_j / 3600.0, "Wh")
    )?;
    if !d.loads.is_empty() {
        let total = l.load_energy_total();
        let mut tl = TextTable::new(&[
            ("load", Align::Left),
            ("energy", Align::Right),
            ("share", Align::Right),
            ("average", Align::Right),
        ]);
        for (k, load) in d.loads.iter().enumerate() {
            let e = l.load_energy_j[k];
            tl.row(vec![
                load.id.clone(),
                fmt_eng(e / 3600.0, "Wh"),
                if total > 0.0 {
                    fmt_percent(e / total)
                } else {
                    "—".into()
                },
                fmt_eng(if t > 0.0 { e / t } else { 0.0 }, "W"),
            ]);
        }
        writeln!(w)?;
        tl.write(w, "  ")?;
    }
    if !d.stages.is_empty() {
        let mut ts = TextTable::new(&[
            ("stage", Align::Left),
            ("loss", Align::Right),
            ("average", Align::Right),
            ("peak", Align::Right),
            ("in mode", Align::Left),
            ("Tj max", Align::Right),
            ("limit", Align::Right),
        ]);
        for (k, s) in d.stages.iter().enumerate() {
            let peak = r.peaks[k];
            ts.row(vec![
                s.id.clone(),
                fmt_eng(l.stage_loss_j[k] / 3600.0, "Wh"),
                fmt_eng(if t > 0.0 { l.stage_loss_j[k] / t } else { 0.0 }, "W"),
                fmt_eng(peak.loss_w, "W"),
                peak.mode
                    .map_or_else(|| "—".into(), |m| d.modes[m].name.clone()),
                junction_c(d, k, peak.loss_w, r.ambient_c).map_or_else(|| "—".into(), fmt_celsius),
                fmt_celsius(s.tj_max),
            ]);
        }
        writeln!(w)?;
        ts.write(w, "  ")?;
    }
    if !r.violations.is_empty() {
        writeln!(w)?;
        writeln!(w, "violations (each at the time it first happened):")?;
        for v in &r.violations {
            writeln!(
                w,
                "  - {} after {} in `{}`: {}",
                v.kind.name(),
                fmt_duration(v.t_s.unwrap_or(0.0)),
                v.mode,
                v.detail
            )?;
        }
    }
    writeln!(w)?;
    write_warnings(w, &warnings(d, r.ambient_c), 96)?;
    for line in wrap(&caution_for([d]), 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

fn write_csv(w: &mut dyn Write, d: &Design, r: &RunResult) -> io::Result<()> {
    let t = r.runtime_s();
    let l = &r.ledger;
    writeln!(
        w,
        "element,id,energy_wh,loss_wh,average_loss_w,peak_loss_w,peak_mode,max_junction_c"
    )?;
    writeln!(
        w,
        "battery,battery,{},{},{},,,",
        l.energy_j / 3600.0,
        l.pack_loss_j / 3600.0,
        if t > 0.0 { l.pack_loss_j / t } else { 0.0 }
    )?;
    for (k, s) in d.stages.iter().enumerate() {
        let p = r.peaks[k];
        writeln!(
            w,
            "stage,{},,{},{},{},{},{}",
            s.id,
            l.stage_loss_j[k] / 3600.0,
            if t > 0.0 { l.stage_loss_j[k] / t } else { 0.0 },
            p.loss_w,
            p.mode.map_or_else(String::new, |m| d.modes[m].name.clone()),
            junction_c(d, k, p.loss_w, r.ambient_c).map_or_else(String::new, |v| v.to_string())
        )?;
    }
    for (k, load) in d.loads.iter().enumerate() {
        writeln!(w, "load,{},{},,,,,", load.id, l.load_energy_j[k] / 3600.0)?;
    }
    Ok(())
}

fn write_trace_csv(w: &mut dyn Write, r: &RunResult) -> io::Result<()> {
    writeln!(w, "t_s,soc,open_circuit_v,voltage_v,current_a")?;
    for p in &r.trace {
        writeln!(
            w,
            "{},{},{},{},{}",
            p.t_s, p.soc, p.ocv, p.voltage, p.current
        )?;
    }
    Ok(())
}
