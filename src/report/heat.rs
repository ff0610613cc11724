//! The heat report: the stages and the pack ranked by the energy they turn into heat over the
//! runtime.

use std::fmt::Write as _;
use std::io::{self, Write};

use serde::Serialize;

use super::rows::{CsvRow, write_rows};
use super::text::{Align, TextTable};
use super::{Format, caution_for, warnings, wrap, write_warnings};
use crate::model::Design;
use crate::solve::{RunResult, junction_c};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent};

/// One place heat is made.
#[derive(Debug, Clone, Serialize)]
pub struct HeatRow {
    /// `battery` or the stage id.
    pub id: String,
    /// `pack` or the stage kind.
    pub kind: String,
    /// Energy lost, Wh.
    pub loss_wh: f64,
    /// Share of all losses (stages and pack), 0..1.
    pub share_of_losses: f64,
    /// Share of the energy from the cells (open-circuit voltage x current, the pack's internal
    /// loss included), 0..1.
    pub share_of_cell_energy: f64,
    /// Highest loss in any phase, W (for the pack: the mean; its peak is not tracked).
    pub peak_loss_w: Option<f64>,
    /// That phase's mode.
    pub peak_mode: Option<String>,
    /// Highest junction temperature (stages with theta_ja), °C.
    pub max_junction_c: Option<f64>,
}

/// `heat --format json`.
#[derive(Debug, Clone, Serialize)]
pub struct HeatJson {
    /// Design title.
    pub design: String,
    /// Runtime, s.
    pub runtime_s: f64,
    /// Energy from the cells over the run, Wh: the energy at the pack terminals plus the pack's
    /// internal loss (the base of `share_of_cell_energy`).
    pub cell_energy_wh: f64,
    /// Energy at the pack terminals over the run, Wh.
    pub terminal_energy_wh: f64,
    /// Ranked, most heat first.
    pub ranking: Vec<HeatRow>,
}

/// One row of `heat --format csv`: a [`HeatRow`] after its rank (1 for the biggest waster).
impl CsvRow for (usize, &HeatRow) {
    const HEADER: &'static [&'static str] = &[
        "rank",
        "id",
        "kind",
        "loss_wh",
        "share_of_losses",
        "share_of_cell_energy",
        "peak_loss_w",
        "peak_mode",
        "max_junction_c",
    ];
}

/// The ranking of a run: stages and the pack, most energy lost first.
pub fn heat_ranking(d: &Design, r: &RunResult) -> Vec<HeatRow> {
    let l = &r.ledger;
    let total = l.stage_loss_total() + l.pack_loss_j;
    let from_cells = l.cell_energy_j();
    let share = |x: f64, of: f64| if of > 0.0 { x / of } else { 0.0 };
    let mut rows: Vec<HeatRow> = d
        .stages
        .iter()
        .enumerate()
        .map(|(k, s)| HeatRow {
            id: s.id.clone(),
            kind: s.kind_name().into(),
            loss_wh: l.stage_loss_j()[k] / 3600.0,
            share_of_losses: share(l.stage_loss_j()[k], total),
            share_of_cell_energy: share(l.stage_loss_j()[k], from_cells),
            peak_loss_w: Some(r.peaks[k].loss_w),
            peak_mode: r.peaks[k].mode.map(|m| d.modes[m].name.clone()),
            max_junction_c: junction_c(d, k, r.peaks[k].loss_w, r.ambient_c),
        })
        .collect();
    rows.push(HeatRow {
        id: "battery".into(),
        kind: "pack".into(),
        loss_wh: l.pack_loss_j / 3600.0,
        share_of_losses: share(l.pack_loss_j, total),
        share_of_cell_energy: share(l.pack_loss_j, from_cells),
        peak_loss_w: None,
        peak_mode: None,
        max_junction_c: None,
    });
    rows.sort_by(|a, b| b.loss_wh.total_cmp(&a.loss_wh));
    rows
}

/// The answer to "which stage wastes the most heat", in one sentence.
pub fn heat_sentence(d: &Design, r: &RunResult, rows: &[HeatRow]) -> String {
    let runtime = fmt_duration(r.runtime_s());
    let top_stage = rows.iter().find(|x| x.kind != "pack");
    let pack = rows.iter().find(|x| x.kind == "pack");
    match (top_stage, pack) {
        (None, Some(p)) => format!(
            "the design has no stages: the pack's internal resistance turns {} into heat over the {runtime} runtime",
            fmt_eng(p.loss_wh, "Wh")
        ),
        (Some(s), pack) => {
            let mut text = format!(
                "`{}` wastes the most heat: {} over the {runtime} runtime, {} of all losses and {} of the energy from the cells",
                s.id,
                fmt_eng(s.loss_wh, "Wh"),
                fmt_percent(s.share_of_losses),
                fmt_percent(s.share_of_cell_energy)
            );
            if let (Some(tj), Some(st)) = (s.max_junction_c, d.stages.iter().find(|x| x.id == s.id))
            {
                let _ = write!(
                    text,
                    "; its junction reaches {} (limit {})",
                    fmt_celsius(tj),
                    fmt_celsius(st.tj_max)
                );
            }
            if let Some(p) = pack.filter(|p| p.loss_wh > s.loss_wh) {
                let _ = write!(
                    text,
                    "; the pack's own internal resistance loses more, {}",
                    fmt_eng(p.loss_wh, "Wh")
                );
            }
            text
        }
        (None, None) => "nothing in the design loses energy".into(),
    }
}

/// Write the heat ranking of a run.
pub fn write_heat(w: &mut dyn Write, d: &Design, r: &RunResult, format: Format) -> io::Result<()> {
    let rows = heat_ranking(d, r);
    match format {
        Format::Json => {
            let j = HeatJson {
                design: d.title.clone(),
                runtime_s: r.runtime_s(),
                cell_energy_wh: r.ledger.cell_energy_j() / 3600.0,
                terminal_energy_wh: r.ledger.terminal_energy_j() / 3600.0,
                ranking: rows,
            };
            serde_json::to_writer_pretty(&mut *w, &j)?;
            writeln!(w)
        }
        Format::Csv => {
            let rows: Vec<(usize, &HeatRow)> =
                rows.iter().enumerate().map(|(i, x)| (i + 1, x)).collect();
            write_rows(w, &rows)
        }
        Format::Table => {
            for line in wrap(&format!("{}.", capitalize(&heat_sentence(d, r, &rows))), 96) {
                writeln!(w, "{line}")?;
            }
            writeln!(w)?;
            let mut t = TextTable::new(&[
                ("rank", Align::Right),
                ("where", Align::Left),
                ("kind", Align::Left),
                ("lost", Align::Right),
                ("of losses", Align::Right),
                ("of cell energy", Align::Right),
                ("peak", Align::Right),
                ("in mode", Align::Left),
                ("Tj max", Align::Right),
            ]);
            for (i, x) in rows.iter().enumerate() {
                t.row(vec![
                    (i + 1).to_string(),
                    x.id.clone(),
                    x.kind.clone(),
                    fmt_eng(x.loss_wh, "Wh"),
                    fmt_percent(x.share_of_losses),
                    fmt_percent(x.share_of_cell_energy),
                    x.peak_loss_w
                        .map_or_else(|| "—".into(), |v| fmt_eng(v, "W")),
                    x.peak_mode.clone().unwrap_or_else(|| "—".into()),
                    x.max_junction_c.map_or_else(|| "—".into(), fmt_celsius),
                ]);
            }
            t.write(w, "  ")?;
            writeln!(w)?;
            writeln!(
                w,
                "{} ({}), at {} ambient.",
                d.title,
                fmt_duration(r.runtime_s()),
                fmt_celsius(r.ambient_c)
            )?;
            let l = &r.ledger;
            let note = format!(
                "Energy from the cells: {} (open-circuit voltage x current: {} at the pack terminals and {} lost inside the pack); \"of cell energy\" is a share of it.",
                fmt_eng(l.cell_energy_j() / 3600.0, "Wh"),
                fmt_eng(l.terminal_energy_j() / 3600.0, "Wh"),
                fmt_eng(l.pack_loss_j / 3600.0, "Wh")
            );
            for line in wrap(&note, 96) {
                writeln!(w, "{line}")?;
            }
            write_warnings(w, &warnings(d, r.ambient_c), 96)?;
            for line in wrap(&caution_for([d]), 96) {
                writeln!(w, "{line}")?;
            }
            Ok(())
        }
    }
}

/// `s` with its first letter in upper case.
pub(crate) fn capitalize(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}
