//! The budget report: the operating point of every mode as a table, JSON or CSV.

use std::io::{self, Write};

use serde::Serialize;

use super::json::{BudgetJson, LoadJson, ModeJson, StageJson};
use super::rows::{CsvRow, write_rows};
use super::text::{Align, TextTable};
use super::{Format, caution_for, warnings, wrap, write_warnings};
use crate::model::Design;
use crate::solve::{ModeBudget, OperatingPoint, Solution};
use crate::units::{fmt_celsius, fmt_eng, fmt_percent};

/// Write the budget of `modes` at `soc` in `format`. The rows are built once
/// ([`BudgetJson::new`]: the pack, each stage and each load of every mode); the JSON is those
/// rows, the CSV a flat view of them ([`budget_csv_rows`]) and the text table reads them too.
pub fn write_budget(
    w: &mut dyn Write,
    d: &Design,
    soc: f64,
    modes: &[ModeBudget],
    format: Format,
) -> io::Result<()> {
    let rows = BudgetJson::new(d, soc, modes);
    match format {
        Format::Json => {
            serde_json::to_writer_pretty(&mut *w, &rows)?;
            writeln!(w)
        }
        Format::Csv => write_rows(w, &budget_csv_rows(d, &rows)),
        Format::Table => write_table(w, d, modes, &rows),
    }
}

fn opt_eng(x: Option<f64>, unit: &str) -> String {
    x.map_or_else(|| "—".into(), |v| fmt_eng(v, unit))
}

/// The text table of the budget: a heading, then each mode from its rows (`rows.modes`, in the
/// order of `modes`), then the warnings and the caution.
fn write_table(
    w: &mut dyn Write,
    d: &Design,
    modes: &[ModeBudget],
    rows: &BudgetJson,
) -> io::Result<()> {
    writeln!(w, "{}", d.title)?;
    writeln!(
        w,
        "budget at {} state of charge, {} ambient, polarization settled",
        fmt_percent(rows.soc),
        fmt_celsius(d.ambient_c)
    )?;
    for (m, mj) in modes.iter().zip(&rows.modes) {
        writeln!(w)?;
        writeln!(w, "mode `{}`", mj.mode)?;
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
        write_mode(w, d, p, mj)?;
    }
    writeln!(w)?;
    write_warnings(w, &warnings(d, d.ambient_c), 96)?;
    for line in wrap(&caution_for([d]), 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

/// One mode with an operating point `p` in the text table: the pack's line, the stage and load
/// tables and the violations, from the mode's rows `mj`.
fn write_mode(w: &mut dyn Write, d: &Design, p: &OperatingPoint, mj: &ModeJson) -> io::Result<()> {
    let b = &mj.battery;
    let cutoff = d.pack.cutoff_v();
    writeln!(
        w,
        "  pack  {} at {} (open circuit {}), {} out, {} lost inside{}",
        opt_eng(b.current_a, "A"),
        opt_eng(b.voltage_v, "V"),
        fmt_eng(b.open_circuit_v, "V"),
        opt_eng(b.power_w, "W"),
        opt_eng(b.loss_w, "W"),
        if b.voltage_v.is_some_and(|v| v < cutoff) {
            format!("; BELOW the {} pack cutoff", fmt_eng(cutoff, "V"))
        } else {
            String::new()
        }
    )?;
    if !mj.stages.is_empty() {
        writeln!(w)?;
        stage_table(&mj.stages).write(w, "  ")?;
    }
    if !mj.loads.is_empty() {
        writeln!(w)?;
        load_table(d, p, &mj.loads).write(w, "  ")?;
    }
    if !mj.violations.is_empty() {
        writeln!(w)?;
        writeln!(w, "  violations:")?;
        for v in &mj.violations {
            writeln!(w, "  - {}: {}", v.kind, v.detail)?;
        }
    }
    Ok(())
}

/// The stages of one mode from their rows: state, voltages, currents, loss, efficiency,
/// junction.
fn stage_table(rows: &[StageJson]) -> TextTable {
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
    for s in rows {
        t.row(vec![
            s.id.clone(),
            s.kind.clone(),
            s.state.clone(),
            fmt_eng(s.vin_v, "V"),
            fmt_eng(s.iin_a, "A"),
            fmt_eng(s.vout_v, "V"),
            fmt_eng(s.iout_a, "A"),
            fmt_eng(s.loss_w, "W"),
            s.efficiency.map_or_else(|| "—".into(), fmt_percent),
            s.junction_c.map_or_else(|| "—".into(), fmt_celsius),
        ]);
    }
    t
}

/// The loads of one mode from their rows: rail, state, supply, current, power and a note (the
/// rail off, or the supply below the load's minimum, from the operating point `p`).
fn load_table(d: &Design, p: &OperatingPoint, rows: &[LoadJson]) -> TextTable {
    let mut t = TextTable::new(&[
        ("load", Align::Left),
        ("rail", Align::Left),
        ("state", Align::Left),
        ("V", Align::Right),
        ("I", Align::Right),
        ("P", Align::Right),
        ("note", Align::Left),
    ]);
    for ((l, lp), row) in d.loads.iter().zip(&p.loads).zip(rows) {
        let note = if !lp.live {
            "rail off".to_string()
        } else if lp.state.is_some() && l.v_min.is_some_and(|v| row.voltage_v < v) {
            format!("below its {} minimum", opt_eng(l.v_min, "V"))
        } else {
            String::new()
        };
        t.row(vec![
            row.id.clone(),
            d.rail_name(l.rail).into(),
            row.state.clone(),
            fmt_eng(row.voltage_v, "V"),
            fmt_eng(row.current_a, "A"),
            fmt_eng(row.power_w, "W"),
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

/// The rows of `budget --format csv`: a flat view of the budget's rows `b` (one computation for
/// the JSON, the CSV and the text table), the pack, each stage and each load of every mode.
pub fn budget_csv_rows(d: &Design, b: &BudgetJson) -> Vec<BudgetCsvRow> {
    let cutoff = d.pack.cutoff_v();
    let mut rows = Vec::new();
    for m in &b.modes {
        rows.push(pack_csv_row(m, cutoff));
        rows.extend(m.stages.iter().map(|s| BudgetCsvRow {
            mode: m.mode.clone(),
            element: "stage",
            id: s.id.clone(),
            kind: s.kind.clone(),
            state: s.state.clone(),
            vin_v: Some(s.vin_v),
            iin_a: Some(s.iin_a),
            vout_v: Some(s.vout_v),
            iout_a: Some(s.iout_a),
            power_w: Some(s.vout_v * s.iout_a),
            loss_w: Some(s.loss_w),
            efficiency: s.efficiency,
            junction_c: s.junction_c,
        }));
        rows.extend(m.loads.iter().map(|l| BudgetCsvRow {
            mode: m.mode.clone(),
            element: "load",
            id: l.id.clone(),
            kind: "load".into(),
            state: l.state.clone(),
            vin_v: Some(l.voltage_v),
            iin_a: Some(l.current_a),
            power_w: Some(l.power_w),
            ..BudgetCsvRow::default()
        }));
    }
    rows
}

/// The pack's CSV row of mode `m`: its state `collapse`, `below_cutoff` (under the pack's
/// `cutoff`) or `ok`, its
/// open-circuit voltage in `vin_v` and, with an operating point, its current in `iin_a` and
/// `iout_a`, terminal voltage in `vout_v`, power and internal loss.
fn pack_csv_row(m: &ModeJson, cutoff: f64) -> BudgetCsvRow {
    let b = &m.battery;
    let state = if m.collapse {
        "collapse"
    } else if b.voltage_v.is_some_and(|v| v < cutoff) {
        "below_cutoff"
    } else {
        "ok"
    };
    BudgetCsvRow {
        mode: m.mode.clone(),
        element: "battery",
        id: "battery".into(),
        kind: "pack".into(),
        state: state.into(),
        vin_v: Some(b.open_circuit_v),
        iin_a: b.current_a,
        vout_v: b.voltage_v,
        iout_a: b.current_a,
        power_w: b.power_w,
        loss_w: b.loss_w,
        ..BudgetCsvRow::default()
    }
}
