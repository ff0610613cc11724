//! The budget report: the operating point of every mode as a table, JSON or CSV.

use std::io::{self, Write};

use serde::Serialize;

use super::json::BudgetJson;
use super::rows::{CsvRow, write_rows};
use super::text::{Align, TextTable};
use super::{Format, caution_for, warnings, wrap, write_warnings};
use crate::model::Design;
use crate::solve::{ModeBudget, OperatingPoint, Solution, junction_c};
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
        Format::Csv => write_rows(w, &budget_csv_rows(d, modes)),
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
            writeln!(w)?;
            stage_table(d, p).write(w, "  ")?;
        }
        if !d.loads.is_empty() {
            writeln!(w)?;
            load_table(d, p).write(w, "  ")?;
        }
        if !m.violations.is_empty() {
            writeln!(w)?;
            writeln!(w, "  violations:")?;
            for v in &m.violations {
                writeln!(
                    w,
                    "  - {}: {}",
                    v.kind.name(),
                    super::violation_detail(d, v)
                )?;
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

/// The stages at operating point `p`: state, voltages, currents, loss, efficiency, junction.
fn stage_table(d: &Design, p: &OperatingPoint) -> TextTable {
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
            s.kind_name().into(),
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
    t
}

/// The loads at operating point `p`: rail, state, supply, current, power and a note.
fn load_table(d: &Design, p: &OperatingPoint) -> TextTable {
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
    t
}

/// One row of `budget --format csv`: the pack, a stage or a load in one mode. A load's supply
/// voltage and current are in `vin_v` and `iin_a`. The pack's row
/// holds its open-circuit voltage in `vin_v`, its current in `iin_a` and `iout_a`, its terminal
/// voltage in `vout_v`, its terminal power in `power_w` and its internal loss in `loss_w`.
#[derive(Debug, Clone, Default, Serialize)]
pub struct BudgetCsvRow {
    /// Mode name.
    pub mode: String,
    /// `battery`, `stage` or `load`.
    pub element: &'static str,
    /// `battery`, the stage id or the load id.
    pub id: String,
    /// `pack`, the stage kind or `load`.
    pub kind: String,
    /// Stage state, load state, or for the pack `ok`, `below_cutoff` or `collapse`.
    pub state: String,
    /// Input voltage, V.
    pub vin_v: Option<f64>,
    /// Input current, A.
    pub iin_a: Option<f64>,
    /// Output voltage, V.
    pub vout_v: Option<f64>,
    /// Output current, A.
    pub iout_a: Option<f64>,
    /// Output power, W.
    pub power_w: Option<f64>,
    /// Loss, W.
    pub loss_w: Option<f64>,
    /// P_out / P_in.
    pub efficiency: Option<f64>,
    /// Junction temperature, °C.
    pub junction_c: Option<f64>,
}

impl CsvRow for BudgetCsvRow {
    const HEADER: &'static [&'static str] = &[
        "mode",
        "element",
        "id",
        "kind",
        "state",
        "vin_v",
        "iin_a",
        "vout_v",
        "iout_a",
        "power_w",
        "loss_w",
        "efficiency",
        "junction_c",
    ];
}

/// The rows of `budget --format csv`.
pub fn budget_csv_rows(d: &Design, modes: &[ModeBudget]) -> Vec<BudgetCsvRow> {
    let mut rows = Vec::new();
    for m in modes {
        let mode = d.modes[m.mode].name.clone();
        let pack = |state: &str| BudgetCsvRow {
            mode: mode.clone(),
            element: "battery",
            id: "battery".into(),
            kind: "pack".into(),
            state: state.into(),
            ..BudgetCsvRow::default()
        };
        let p = match &m.solution {
            Solution::Collapse { ocv, .. } => {
                rows.push(BudgetCsvRow {
                    vin_v: Some(*ocv),
                    ..pack("collapse")
                });
                continue;
            }
            Solution::Point(p) => p,
        };
        let state = if p.pack.voltage < d.pack.cutoff_v() {
            "below_cutoff"
        } else {
            "ok"
        };
        rows.push(BudgetCsvRow {
            vin_v: Some(p.pack.ocv),
            iin_a: Some(p.pack.current),
            vout_v: Some(p.pack.voltage),
            iout_a: Some(p.pack.current),
            power_w: Some(p.pack.power()),
            loss_w: Some(p.pack.loss),
            ..pack(state)
        });
        for (k, (s, sp)) in d.stages.iter().zip(&p.stages).enumerate() {
            rows.push(BudgetCsvRow {
                mode: mode.clone(),
                element: "stage",
                id: s.id.clone(),
                kind: s.kind_name().into(),
                state: sp.state.name().into(),
                vin_v: Some(sp.vin),
                iin_a: Some(sp.iin),
                vout_v: Some(sp.vout),
                iout_a: Some(sp.iout),
                power_w: Some(sp.vout * sp.iout),
                loss_w: Some(sp.loss),
                efficiency: sp.efficiency(),
                junction_c: junction_c(d, k, sp.loss, d.ambient_c),
            });
        }
        for (l, lp) in d.loads.iter().zip(&p.loads) {
            rows.push(BudgetCsvRow {
                mode: mode.clone(),
                element: "load",
                id: l.id.clone(),
                kind: "load".into(),
                state: l.state_name(lp.state).into(),
                vin_v: Some(lp.voltage),
                iin_a: Some(lp.current),
                power_w: Some(lp.power),
                ..BudgetCsvRow::default()
            });
        }
    }
    rows
}
