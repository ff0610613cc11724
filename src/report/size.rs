//! The sizing report: every candidate pack ranked, the answer in a sentence, the least capacity
//! of the design's own cells. JSON and CSV come from the same row type.

use std::io::{self, Write};

use serde::Serialize;

use super::rows::{CsvRow, write_rows};
use super::text::{Align, TextTable};
use super::{Format, caution, wrap, write_warnings};
use crate::model::Chemistry;
use crate::size::{Candidate, CapacitySearch, Outcome, Sizing, end_words, fmt_cm3};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent};

/// One candidate pack, as a row of the table, of JSON `rows` and of the CSV.
#[derive(Debug, Clone, Serialize)]
pub struct SizeRow {
    /// Place in the ranking, from 1.
    pub rank: usize,
    /// The pack in short: `alkaline-aa 2S1P`.
    pub pack: String,
    /// The cell's name.
    pub cell: String,
    /// `preset` or `design`.
    pub origin: &'static str,
    /// The cell's chemistry, when known.
    pub chemistry: Option<&'static str>,
    /// Cells in series.
    pub series: u32,
    /// Strings in parallel.
    pub parallel: u32,
    /// `meets`, `short`, `no-result` or `does-not-fit`.
    pub status: &'static str,
    /// Runtime, s.
    pub runtime_s: Option<f64>,
    /// The percentile the runtime is (empty for one nominal run).
    pub percentile: Option<f64>,
    /// Why it ends.
    pub end_reason: Option<&'static str>,
    /// State of charge left then, 0..1.
    pub end_soc: Option<f64>,
    /// The mode it ends in.
    pub end_mode: Option<String>,
    /// Mass of the cells, kg.
    pub mass_kg: Option<f64>,
    /// Volume of the cells, m³.
    pub volume_m3: Option<f64>,
    /// Rated charge of the pack, Ah.
    pub charge_ah: Option<f64>,
    /// Rated energy of the pack (charge x series x nominal voltage), Wh.
    pub energy_wh: Option<f64>,
    /// Why it does not fit or gives no result.
    pub note: Option<String>,
}

impl CsvRow for SizeRow {
    const HEADER: &'static [&'static str] = &[
        "rank",
        "pack",
        "cell",
        "origin",
        "chemistry",
        "series",
        "parallel",
        "status",
        "runtime_s",
        "percentile",
        "end_reason",
        "end_soc",
        "end_mode",
        "mass_kg",
        "volume_m3",
        "charge_ah",
        "energy_wh",
        "note",
    ];
}

impl SizeRow {
    /// The row of the candidate at `rank` (from 1) against `target_s`.
    pub fn new(rank: usize, c: &Candidate, target_s: f64) -> Self {
        let run = c.run();
        let (status, note) = match &c.outcome {
            Outcome::Ran(r) if r.runtime_s >= target_s => ("meets", None),
            Outcome::Ran(_) => ("short", None),
            Outcome::NoResult(m) => ("no-result", Some(m.clone())),
            Outcome::Refused(m) => ("does-not-fit", Some(m.clone())),
        };
        Self {
            rank,
            pack: c.label(),
            cell: c.cell.clone(),
            origin: c.origin.name(),
            chemistry: c.chemistry.map(Chemistry::name),
            series: c.series,
            parallel: c.parallel,
            status,
            runtime_s: run.map(|r| r.runtime_s),
            percentile: run.and_then(|r| r.percentile),
            end_reason: run.map(|r| r.end.name()),
            end_soc: run.map(|r| r.end_soc),
            end_mode: run.and_then(|r| r.end_mode.clone()),
            mass_kg: c.mass_kg,
            volume_m3: c.volume_m3,
            charge_ah: c.charge_c.map(|q| q / 3600.0),
            energy_wh: c.energy_j.map(|e| e / 3600.0),
            note,
        }
    }
}

/// The least capacity of one of the design's own cells, in JSON.
#[derive(Debug, Clone, Serialize)]
pub struct CapacityJson {
    /// The cell.
    pub cell: String,
    /// Cells in series (the design's).
    pub series: u32,
    /// Strings in parallel (the design's).
    pub parallel: u32,
    /// The capacity as written, Ah per cell.
    pub given_ah: f64,
    /// The least capacity that meets the target, Ah per cell.
    pub needed_ah: Option<f64>,
    /// The runtime at that capacity, s.
    pub runtime_s: Option<f64>,
    /// Why it ends at that capacity.
    pub end_reason: Option<&'static str>,
    /// Halvings of the bracket.
    pub iterations: u32,
    /// Discharge runs made.
    pub runs: u32,
    /// Why none was found.
    pub note: Option<String>,
}

impl From<&CapacitySearch> for CapacityJson {
    fn from(s: &CapacitySearch) -> Self {
        Self {
            cell: s.cell.clone(),
            series: s.series,
            parallel: s.parallel,
            given_ah: s.given_c / 3600.0,
            needed_ah: s.needed_c.map(|q| q / 3600.0),
            runtime_s: s.run.as_ref().map(|r| r.runtime_s),
            end_reason: s.run.as_ref().map(|r| r.end.name()),
            iterations: s.iterations,
            runs: s.runs,
            note: s.note.clone(),
        }
    }
}

/// `size --format json`.
#[derive(Debug, Clone, Serialize)]
pub struct SizeJson {
    /// The design's title.
    pub design: String,
    /// The target runtime, s.
    pub target_s: f64,
    /// Ambient of the runs, °C.
    pub ambient_c: f64,
    /// `mass` or `volume`.
    pub rank_by: &'static str,
    /// The percentile asked for (applied only to designs with tolerances).
    pub percentile: f64,
    /// The answer in a sentence.
    pub sentence: String,
    /// The rank of the best pack that meets the target, if one does.
    pub best: Option<usize>,
    /// Every candidate, ranked.
    pub rows: Vec<SizeRow>,
    /// The least capacity of each of the design's own cells.
    pub capacity: Vec<CapacityJson>,
}

/// The rows of a sizing, ranked.
pub fn size_rows(s: &Sizing) -> Vec<SizeRow> {
    s.candidates
        .iter()
        .enumerate()
        .map(|(i, c)| SizeRow::new(i + 1, c, s.options.target_s))
        .collect()
}

/// Write a sizing in `format`.
pub fn write_size(w: &mut dyn Write, s: &Sizing, format: Format) -> io::Result<()> {
    match format {
        Format::Json => {
            let j = SizeJson {
                design: s.title.clone(),
                target_s: s.options.target_s,
                ambient_c: s.ambient_c,
                rank_by: s.options.rank_by.name(),
                percentile: s.options.percentile,
                sentence: s.sentence(),
                best: s.best().map(|_| 1),
                rows: size_rows(s),
                capacity: s.capacity.iter().map(CapacityJson::from).collect(),
            };
            serde_json::to_writer_pretty(&mut *w, &j)?;
            writeln!(w)
        }
        Format::Csv => write_rows(w, &size_rows(s)),
        Format::Table => write_table(w, s),
    }
}

/// The chemistries of the candidates, each once.
pub fn chemistries(s: &Sizing) -> Vec<Chemistry> {
    let mut out = Vec::new();
    for c in s.candidates.iter().filter_map(|c| c.chemistry) {
        if !out.contains(&c) {
            out.push(c);
        }
    }
    out
}

fn write_table(w: &mut dyn Write, s: &Sizing) -> io::Result<()> {
    let o = &s.options;
    writeln!(w, "{}", s.title)?;
    for line in wrap(
        &format!(
            "target {} at {} ambient: {} packs tried ({} cells, {} to {} in series, {} to {} in parallel), ranked by the {} of their cells",
            fmt_duration(o.target_s),
            fmt_celsius(s.ambient_c),
            s.candidates.len(),
            s.cells.len(),
            o.series.0,
            o.series.1,
            o.parallel.0,
            o.parallel.1,
            o.rank_by.name()
        ),
        96,
    ) {
        writeln!(w, "{line}")?;
    }
    for line in wrap(&s.sentence(), 96) {
        writeln!(w, "{line}")?;
    }
    writeln!(w)?;
    candidate_table(s).write(w, "  ")?;
    if !s.capacity.is_empty() {
        writeln!(w)?;
        writeln!(
            w,
            "least capacity of the design's own cells at the design's pack:"
        )?;
        for c in &s.capacity {
            for (i, line) in wrap(&capacity_sentence(c, o.target_s), 92)
                .iter()
                .enumerate()
            {
                writeln!(w, "{}{line}", if i == 0 { "  - " } else { "    " })?;
            }
        }
    }
    writeln!(w)?;
    let percentile = s
        .candidates
        .iter()
        .find_map(|c| c.run().and_then(|r| r.percentile));
    let basis = match percentile {
        Some(p) => format!(
            "Each runtime is the {} percentile of the spread over the design's tolerances",
            crate::units::fmt_sig(p, 3)
        ),
        None => "Each runtime is one run at the design's nominal values".to_string(),
    };
    for line in wrap(
        &format!(
            "Mass and volume are of the cells alone (no holder, wiring, protection or case), from each cell's `mass` and `size`; the presets' are typical datasheet values, and a cylinder's volume is its own (pi d² h / 4), not its bounding box. Packs whose cell gives no mass or size rank after those that do. Charge and energy are rated: capacity x parallel, and x series x nominal voltage. {basis}."
        ),
        96,
    ) {
        writeln!(w, "{line}")?;
    }
    writeln!(w)?;
    write_warnings(w, &s.warnings, 96)?;
    for line in wrap(&caution(&chemistries(s)), 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

/// The candidates ranked, from their [`SizeRow`]s: mass, volume, runtime against the target,
/// why each ends, charge, energy and a note.
fn candidate_table(s: &Sizing) -> TextTable {
    let mut t = TextTable::new(&[
        ("#", Align::Right),
        ("pack", Align::Left),
        ("mass", Align::Right),
        ("volume", Align::Right),
        ("runtime", Align::Right),
        ("target", Align::Left),
        ("ends by", Align::Left),
        ("charge", Align::Right),
        ("energy", Align::Right),
        ("note", Align::Left),
    ]);
    let dash = || "—".to_string();
    for (i, c) in s.candidates.iter().enumerate() {
        let row = SizeRow::new(i + 1, c, s.options.target_s);
        let run = c.run();
        t.row(vec![
            row.rank.to_string(),
            row.pack,
            c.mass_kg
                .map_or_else(|| "unknown".into(), |m| fmt_eng(m * 1e3, "g")),
            c.volume_m3
                .map_or_else(|| "unknown".into(), |v| format!("{} cm³", fmt_cm3(v))),
            run.map_or_else(dash, |r| fmt_duration(r.runtime_s)),
            match row.status {
                "meets" => "meets".into(),
                "short" => run.map_or_else(dash, |r| {
                    format!(
                        "{} short",
                        fmt_percent(1.0 - r.runtime_s / s.options.target_s)
                    )
                }),
                "no-result" => "no result".into(),
                _ => "does not fit".into(),
            },
            run.map_or_else(dash, |r| end_words(r.end).to_string()),
            c.charge_c.map_or_else(dash, |q| fmt_eng(q / 3600.0, "Ah")),
            c.energy_j.map_or_else(dash, |e| fmt_eng(e / 3600.0, "Wh")),
            row.note.unwrap_or_default(),
        ]);
    }
    t
}

/// The least capacity of one cell in a sentence.
pub fn capacity_sentence(c: &CapacitySearch, target_s: f64) -> String {
    let pack = format!("{} {}S{}P", c.cell, c.series, c.parallel);
    match (&c.needed_c, &c.run) {
        (Some(q), Some(r)) => format!(
            "`{pack}`: {} per cell lasts {} ({} times the {} the cell gives): runs {}, ends by {}; found in {} halvings, {} runs, to {}",
            fmt_eng(q / 3600.0, "Ah"),
            fmt_duration(target_s),
            crate::units::fmt_sig(q / c.given_c, 3),
            fmt_eng(c.given_c / 3600.0, "Ah"),
            fmt_duration(r.runtime_s),
            end_words(r.end),
            c.iterations,
            c.runs,
            fmt_percent(crate::size::capacity::REL_TOL)
        ),
        _ => format!(
            "`{pack}`: no capacity found ({})",
            c.note.as_deref().unwrap_or("no run gave a result")
        ),
    }
}
