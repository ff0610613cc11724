//! The runtime report: how long, why it stops, where the energy went.

use std::io::{self, Write};

use serde::Serialize;

use super::json::{RuntimeJson, TraceJson};
use super::rows::{CsvRow, write_rows};
use super::text::{Align, TextTable};
use super::{Format, caution_for, warnings, wrap, write_warnings};
use crate::model::Design;
use crate::solve::{EndReason, RunResult, StageState};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent};

/// Least share of its on-time a stage spends out of regulation, or a load above its maximum
/// supply, for the reports to state it (smaller shares are noise of the averaging).
pub const FACT_SHARE: f64 = 0.01;

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
        Format::Csv if trace => write_rows(w, &trace_rows(r)),
        Format::Csv => write_rows(w, &runtime_csv_rows(d, r)),
        Format::Table => write_table(w, d, r, trace),
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
        EndReason::Cutoff if d.pack.buffer().is_some() => format!(
            "the voltage under load, at the buffer capacitor's node or at the cells, fell below the pack's {} cutoff{mode} with {soc} charge left",
            fmt_eng(d.pack.cutoff_v(), "V")
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

fn write_table(w: &mut dyn Write, d: &Design, r: &RunResult, trace: bool) -> io::Result<()> {
    write_headline(w, d, r)?;
    writeln!(w)?;
    for sentence in energy_sentences(d, r) {
        for line in wrap(&sentence, 96) {
            writeln!(w, "{line}")?;
        }
    }
    if !d.loads.is_empty() {
        writeln!(w)?;
        load_table(d, r).write(w, "  ")?;
    }
    if !d.stages.is_empty() {
        writeln!(w)?;
        stage_table(d, r).write(w, "  ")?;
    }
    let facts = regulation_facts(d, r);
    if !facts.is_empty() {
        writeln!(w)?;
        writeln!(w, "out of regulation or above a load's maximum:")?;
        for f in &facts {
            for (i, line) in wrap(&f.sentence(), 92).iter().enumerate() {
                writeln!(w, "{}{line}", if i == 0 { "  - " } else { "    " })?;
            }
        }
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
                super::violation_detail(d, v)
            )?;
        }
    }
    if trace {
        writeln!(w)?;
        for line in wrap(&trace_note(r), 96) {
            writeln!(w, "{line}")?;
        }
    }
    writeln!(w)?;
    write_warnings(w, &warnings(d, r.ambient_c), 96)?;
    for line in wrap(&caution_for([d]), 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

/// The title, the runtime and its ambient, why it stops and the ideal runtime.
fn write_headline(w: &mut dyn Write, d: &Design, r: &RunResult) -> io::Result<()> {
    let t = r.runtime_s();
    writeln!(w, "{}", d.title)?;
    match r.ambient_range_c {
        Some((lo, hi)) => writeln!(
            w,
            "runtime {} at {} to {} ambient (mean {})",
            fmt_duration(t),
            fmt_celsius(lo),
            fmt_celsius(hi),
            fmt_celsius(r.ambient_c)
        )?,
        None => writeln!(
            w,
            "runtime {} at {} ambient",
            fmt_duration(t),
            fmt_celsius(r.ambient_c)
        )?,
    }
    for line in wrap(&format!("it stops because {}.", end_sentence(d, r)), 96) {
        writeln!(w, "{line}")?;
    }
    if let Some(ideal) = r.ideal_runtime_s() {
        for line in wrap(
            &format!(
                "ideal runtime {} (the stored energy at the loads' mean power): {} of the stored energy reached the loads",
                fmt_duration(ideal),
                fmt_percent(t / ideal)
            ),
            96,
        ) {
            writeln!(w, "{line}")?;
        }
    }
    Ok(())
}

/// The loads' energy over the run: each load's total, share and mean power.
fn load_table(d: &Design, r: &RunResult) -> TextTable {
    let (t, l) = (r.runtime_s(), &r.ledger);
    let total = l.load_energy_total();
    let mut tl = TextTable::new(&[
        ("load", Align::Left),
        ("energy", Align::Right),
        ("share", Align::Right),
        ("average", Align::Right),
    ]);
    for (k, load) in d.loads.iter().enumerate() {
        let e = l.load_energy_j()[k];
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
    tl
}

/// The stages' losses over the run, from the rows of the JSON form, with each stage's
/// junction limit.
fn stage_table(d: &Design, r: &RunResult) -> TextTable {
    let mut ts = TextTable::new(&[
        ("stage", Align::Left),
        ("loss", Align::Right),
        ("average", Align::Right),
        ("peak", Align::Right),
        ("in mode", Align::Left),
        ("Tj max", Align::Right),
        ("limit", Align::Right),
    ]);
    let rows = super::json::RuntimeJson::new(d, r, false).stages;
    for (s, row) in d.stages.iter().zip(rows) {
        ts.row(vec![
            row.id,
            fmt_eng(row.loss_wh, "Wh"),
            fmt_eng(row.average_loss_w, "W"),
            fmt_eng(row.peak_loss_w, "W"),
            row.peak_mode.unwrap_or_else(|| "—".into()),
            row.max_junction_c.map_or_else(|| "—".into(), fmt_celsius),
            fmt_celsius(s.tj_max),
        ]);
    }
    ts
}

/// Where the energy went, in the names every report uses: the energy from the cells (open-circuit
/// voltage x current, the pack's internal loss included) and the energy at the pack terminals.
pub fn energy_sentences(d: &Design, r: &RunResult) -> Vec<String> {
    let l = &r.ledger;
    let wh = |j: f64| fmt_eng(j / 3600.0, "Wh");
    let mut out = vec![format!(
        "pack: {} drawn; {} from the cells, of which {} lost inside the pack and {} at the pack terminals; average {} and {} at the terminals",
        fmt_eng(l.charge_c / 3600.0, "Ah"),
        wh(l.cell_energy_j()),
        wh(l.pack_loss_j),
        wh(l.terminal_energy_j()),
        fmt_eng(r.average_current_a(), "A"),
        fmt_eng(r.average_power_w(), "W"),
    )];
    if l.buffer_loss_j != 0.0 || l.buffer_out_j != 0.0 {
        let limiter = "series resistance, leakage, limiter, recharging through the cells";
        let (what, how, whose) = match (d.pack.buffer().is_some(), d.has_rail_buffers()) {
            (true, false) => ("the buffer capacitor", limiter, "its"),
            (false, _) => (
                "the buffer capacitors on the stages' rails",
                "series resistance, leakage",
                "their",
            ),
            (true, true) => ("the buffer capacitors", limiter, "their"),
        };
        out.push(format!(
            "{what} lost {} ({how}) and gave {} from {whose} store",
            wh(l.buffer_loss_j),
            wh(l.buffer_out_j)
        ));
    }
    if let Some(share) = l.load_share_of_cell_energy() {
        out.push(format!(
            "the loads took {}: {} of the energy from the cells",
            wh(l.load_energy_total()),
            fmt_percent(share)
        ));
    }
    out
}

/// What the table says when `--trace` was given: the trace is in JSON and CSV only.
fn trace_note(r: &RunResult) -> String {
    format!(
        "the trace ({} points) is not shown in a table: use `--trace --format csv` for the trace alone or `--trace --format json` for the result with its trace",
        r.trace.len()
    )
}

/// What a fact is about: a stage's state, or a load's supply above its maximum.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FactKind {
    /// A stage in this state (dropout, bypass or undervoltage).
    Stage(StageState),
    /// A load's live rail above its maximum supply while the load is on.
    AboveMax,
}

/// A stage out of regulation, or a load supplied above its maximum, for a share of the run.
#[derive(Debug, Clone, PartialEq)]
pub struct Fact {
    /// What.
    pub kind: FactKind,
    /// The stage or load id.
    pub id: String,
    /// The load's maximum supply, V (for [`FactKind::AboveMax`]).
    pub v_max: Option<f64>,
    /// Time in that condition, s.
    pub time_s: f64,
    /// Share of the runtime, 0..1.
    pub of_runtime: f64,
    /// Share of the time the stage or load was on, 0..1.
    pub of_on_time: f64,
}

impl Fact {
    /// The fact in words, with its share of the runtime and of the on-time.
    pub fn sentence(&self) -> String {
        let what = match self.kind {
            FactKind::Stage(StageState::Bypass) => format!(
                "`{}` is in bypass, passing the pack through instead of regulating,",
                self.id
            ),
            FactKind::Stage(StageState::Dropout) => {
                format!("`{}` is in dropout, below its setpoint,", self.id)
            }
            FactKind::Stage(StageState::Limited) => format!(
                "`{}` is at its input current limit, its output below its setpoint,",
                self.id
            ),
            FactKind::Stage(_) => format!("`{}` is locked out by undervoltage", self.id),
            FactKind::AboveMax => format!(
                "the supply of `{}` is above its {} maximum",
                self.id,
                self.v_max
                    .map_or_else(|| "rated".into(), |v| fmt_eng(v, "V"))
            ),
        };
        format!(
            "{what} for {}: {} of the time it is on, {} of the runtime",
            fmt_duration(self.time_s),
            fmt_percent(self.of_on_time),
            fmt_percent(self.of_runtime)
        )
    }
}

/// Every stage in dropout, bypass or undervoltage, and every load above its maximum supply, for
/// at least [`FACT_SHARE`] of the time it was on; each with its share of the runtime and of its
/// on-time (a stage on for 3.5 % of the runtime and in bypass all that time is in bypass 100 % of
/// its on-time).
pub fn regulation_facts(d: &Design, r: &RunResult) -> Vec<Fact> {
    let t = r.runtime_s();
    let l = &r.ledger;
    let mut out = Vec::new();
    if t <= 0.0 {
        return out;
    }
    let mut push = |kind, id: &str, v_max, time_s: f64, on_s: f64| {
        if on_s > 0.0 && time_s / on_s >= FACT_SHARE {
            out.push(Fact {
                kind,
                id: id.to_string(),
                v_max,
                time_s,
                of_runtime: time_s / t,
                of_on_time: (time_s / on_s).min(1.0),
            });
        }
    };
    for (k, st) in d.stages.iter().enumerate() {
        for state in [
            StageState::Bypass,
            StageState::Dropout,
            StageState::Limited,
            StageState::Undervoltage,
        ] {
            push(
                FactKind::Stage(state),
                &st.id,
                None,
                l.stage_time_s(k, state),
                l.stage_on_s(k),
            );
        }
    }
    for (k, load) in d.loads.iter().enumerate() {
        push(
            FactKind::AboveMax,
            &load.id,
            load.v_max,
            l.load_high_s()[k],
            l.load_on_s()[k],
        );
    }
    out
}

/// One row of `runtime --format csv`: the run (`element` `run`: runtime and end), the pack, a
/// stage or a load. Fields that do not apply to the element are empty.
#[derive(Debug, Clone, Default, Serialize)]
pub struct RuntimeCsvRow {
    /// `run`, `battery`, `stage` or `load`.
    pub element: &'static str,
    /// `battery`, the stage id or the load id (empty for the run).
    pub id: String,
    /// Runtime, s.
    pub runtime_s: Option<f64>,
    /// Stored energy over the loads' mean power, s.
    pub ideal_runtime_s: Option<f64>,
    /// Why the product stopped.
    pub end_reason: Option<&'static str>,
    /// State of charge then, 0..1.
    pub end_soc: Option<f64>,
    /// Mode then.
    pub end_mode: Option<String>,
    /// `battery`, a stage id or a load id.
    pub end_subject: Option<String>,
    /// Pack: integral of the current, Ah.
    pub charge_ah: Option<f64>,
    /// Pack: energy at the terminals; load: energy taken, Wh.
    pub energy_wh: Option<f64>,
    /// Pack: energy from the cells (terminals + internal loss), Wh.
    pub cell_energy_wh: Option<f64>,
    /// Energy lost, Wh.
    pub loss_wh: Option<f64>,
    /// Mean loss over the run, W.
    pub average_loss_w: Option<f64>,
    /// Highest loss in any phase, W.
    pub peak_loss_w: Option<f64>,
    /// That phase's mode.
    pub peak_mode: Option<String>,
    /// Highest junction temperature, °C.
    pub max_junction_c: Option<f64>,
    /// Time the stage or load was on, s.
    pub on_s: Option<f64>,
    /// Time the stage was in dropout, s.
    pub dropout_s: Option<f64>,
    /// Time the stage was in bypass, s.
    pub bypass_s: Option<f64>,
    /// Time the stage was locked out by undervoltage, s.
    pub undervoltage_s: Option<f64>,
    /// Time the load was on with its supply above its maximum, s.
    pub above_max_s: Option<f64>,
}

impl CsvRow for RuntimeCsvRow {
    const HEADER: &'static [&'static str] = &[
        "element",
        "id",
        "runtime_s",
        "ideal_runtime_s",
        "end_reason",
        "end_soc",
        "end_mode",
        "end_subject",
        "charge_ah",
        "energy_wh",
        "cell_energy_wh",
        "loss_wh",
        "average_loss_w",
        "peak_loss_w",
        "peak_mode",
        "max_junction_c",
        "on_s",
        "dropout_s",
        "bypass_s",
        "undervoltage_s",
        "above_max_s",
    ];
}

/// The rows of `runtime --format csv`: the run, the pack, each stage, each load, taken from
/// the JSON form of the run (one computation for both outputs).
pub fn runtime_csv_rows(d: &Design, r: &RunResult) -> Vec<RuntimeCsvRow> {
    let j = super::json::RuntimeJson::new(d, r, false);
    let mut rows = vec![
        RuntimeCsvRow {
            element: "run",
            runtime_s: Some(j.runtime_s),
            ideal_runtime_s: j.ideal_runtime_s,
            end_reason: Some(r.end.reason.name()),
            end_soc: Some(j.end.soc),
            end_mode: j.end.mode,
            end_subject: Some(j.end.subject),
            ..RuntimeCsvRow::default()
        },
        RuntimeCsvRow {
            element: "battery",
            id: "battery".into(),
            charge_ah: Some(j.battery.charge_ah),
            energy_wh: Some(j.battery.energy_wh),
            cell_energy_wh: Some(j.battery.cell_energy_wh),
            loss_wh: Some(j.battery.loss_wh),
            average_loss_w: Some(if j.runtime_s > 0.0 {
                r.ledger.pack_loss_j / j.runtime_s
            } else {
                0.0
            }),
            ..RuntimeCsvRow::default()
        },
    ];
    rows.extend(j.stages.into_iter().map(|s| RuntimeCsvRow {
        element: "stage",
        id: s.id,
        loss_wh: Some(s.loss_wh),
        average_loss_w: Some(s.average_loss_w),
        peak_loss_w: Some(s.peak_loss_w),
        peak_mode: s.peak_mode,
        max_junction_c: s.max_junction_c,
        on_s: Some(s.on_s),
        dropout_s: Some(s.dropout_s),
        bypass_s: Some(s.bypass_s),
        undervoltage_s: Some(s.undervoltage_s),
        ..RuntimeCsvRow::default()
    }));
    rows.extend(j.loads.into_iter().map(|l| RuntimeCsvRow {
        element: "load",
        id: l.id,
        energy_wh: Some(l.energy_wh),
        on_s: Some(l.on_s),
        above_max_s: Some(l.above_max_s),
        ..RuntimeCsvRow::default()
    }));
    rows
}

impl CsvRow for TraceJson {
    const HEADER: &'static [&'static str] =
        &["t_s", "soc", "open_circuit_v", "voltage_v", "current_a"];
}

/// The rows of `runtime --trace --format csv`: the decimated trace.
pub fn trace_rows(r: &RunResult) -> Vec<TraceJson> {
    r.trace.iter().map(TraceJson::from).collect()
}
