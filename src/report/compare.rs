//! `compare`: the runtime analysis of several designs side by side, and in words which one wins
//! on runtime, on heat and on violations, with the facts that explain it.

use std::io::{self, Write};

use serde::Serialize;

use super::json::RuntimeJson;
use super::rows::{CsvRow, write_rows};
use super::runtime::{end_sentence, regulation_facts};
use super::text::{Align, TextTable};
use super::{Format, caution_for, warnings, wrap, write_warnings};
use crate::model::Design;
use crate::solve::RunResult;
use crate::units::{fmt_duration, fmt_eng, fmt_percent};

/// Relative difference below which two designs are called equal rather than one declared the
/// winner (runtime, and energy lost): 1 %. The model's own uncertainty is of this order: the
/// fast solver is held to 0.2 % of the chronological simulation, and datasheet values,
/// efficiency curves and fitted cells carry more than that, so a smaller difference is not
/// evidence that one design is better.
pub const EQUAL_WITHIN: f64 = 0.01;

/// One design of a comparison: its label (file and overrides), the design and its run.
pub struct Entry<'a> {
    /// How the user named it: the file, plus `--set` overrides.
    pub label: String,
    /// The design.
    pub design: &'a Design,
    /// Its discharge.
    pub run: &'a RunResult,
}

/// `compare --format json`.
#[derive(Debug, Serialize)]
pub struct CompareJson {
    /// Each design's runtime object (DESIGN section 7).
    pub designs: Vec<RuntimeJson>,
}

fn total_loss(r: &RunResult) -> f64 {
    r.ledger.stage_loss_total() + r.ledger.pack_loss_j
}

/// Write the comparison in `format`.
pub fn write_compare(w: &mut dyn Write, entries: &[Entry<'_>], format: Format) -> io::Result<()> {
    match format {
        Format::Json => {
            let j = CompareJson {
                designs: entries
                    .iter()
                    .map(|e| RuntimeJson::new(e.design, e.run, false))
                    .collect(),
            };
            serde_json::to_writer_pretty(&mut *w, &j)?;
            writeln!(w)
        }
        Format::Csv => write_csv(w, entries),
        Format::Table => write_table(w, entries),
    }
}

fn letter(i: usize) -> String {
    char::from(b'A' + u8::try_from(i % 26).unwrap_or(0)).to_string()
}

/// The comparison as text: the designs, their figures and stage losses side by side, the
/// verdicts in words, the warnings and the caution.
fn write_table(w: &mut dyn Write, entries: &[Entry<'_>]) -> io::Result<()> {
    writeln!(w, "comparing {} designs", entries.len())?;
    for (i, e) in entries.iter().enumerate() {
        writeln!(w, "  {}: {} ({})", letter(i), e.design.title, e.label)?;
    }
    writeln!(w)?;
    let names: Vec<String> = (0..entries.len()).map(letter).collect();
    summary_table(entries, &names).write(w, "  ")?;
    if let Some(t) = stage_loss_table(entries, &names) {
        writeln!(w)?;
        t.write(w, "  ")?;
    }
    writeln!(w)?;
    writeln!(w, "in words:")?;
    for line in verdicts(entries) {
        for (i, l) in wrap(&line, 94).iter().enumerate() {
            writeln!(w, "{}{l}", if i == 0 { "- " } else { "  " })?;
        }
    }
    writeln!(w)?;
    for (i, e) in entries.iter().enumerate() {
        let found: Vec<String> = warnings(e.design, e.run.ambient_c)
            .into_iter()
            .map(|x| format!("in {}, {x}", letter(i)))
            .collect();
        write_warnings(w, &found, 96)?;
    }
    for line in wrap(&caution_for(entries.iter().map(|e| e.design)), 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

/// The designs' figures side by side, one column per design (headed by its letter in `names`).
fn summary_table(entries: &[Entry<'_>], names: &[String]) -> TextTable {
    let mut cols: Vec<(&str, Align)> = vec![("", Align::Left)];
    for n in names {
        cols.push((n.as_str(), Align::Right));
    }
    let mut t = TextTable::new(&cols);
    let row = |label: &str, f: &dyn Fn(&Entry<'_>) -> String| {
        let mut r = vec![label.to_string()];
        r.extend(entries.iter().map(f));
        r
    };
    t.row(row("runtime", &|e| fmt_duration(e.run.runtime_s())));
    t.row(row("ends by", &|e| e.run.end.reason.name().to_string()));
    t.row(row("ends at SoC", &|e| fmt_percent(e.run.end.soc)));
    t.row(row("runtime / ideal", &|e| {
        e.run
            .ideal_runtime_s()
            .map_or_else(|| "—".into(), |i| fmt_percent(e.run.runtime_s() / i))
    }));
    t.row(row("average pack current", &|e| {
        fmt_eng(e.run.average_current_a(), "A")
    }));
    t.row(row("energy from the cells", &|e| {
        fmt_eng(e.run.ledger.cell_energy_j() / 3600.0, "Wh")
    }));
    t.row(row("at the pack terminals", &|e| {
        fmt_eng(e.run.ledger.terminal_energy_j() / 3600.0, "Wh")
    }));
    t.row(row("lost in the pack", &|e| {
        fmt_eng(e.run.ledger.pack_loss_j / 3600.0, "Wh")
    }));
    t.row(row("lost in stages", &|e| {
        fmt_eng(e.run.ledger.stage_loss_total() / 3600.0, "Wh")
    }));
    t.row(row("biggest waster", &|e| {
        biggest(e).map_or_else(|| "—".into(), |(id, _)| id)
    }));
    t.row(row("violations", &|e| e.run.violations.len().to_string()));
    t
}

/// The loss of every stage id found in any design, side by side (a dash where a design has no
/// stage of that id); `None` when no design has a stage.
fn stage_loss_table(entries: &[Entry<'_>], names: &[String]) -> Option<TextTable> {
    let mut ids: Vec<&str> = Vec::new();
    for e in entries {
        for s in &e.design.stages {
            if !ids.contains(&s.id.as_str()) {
                ids.push(&s.id);
            }
        }
    }
    if ids.is_empty() {
        return None;
    }
    let mut cols: Vec<(&str, Align)> = vec![("stage loss", Align::Left)];
    for n in names {
        cols.push((n.as_str(), Align::Right));
    }
    let mut t = TextTable::new(&cols);
    for id in ids {
        let mut r = vec![id.to_string()];
        for e in entries {
            r.push(e.design.stages.iter().position(|s| s.id == id).map_or_else(
                || "—".into(),
                |k| fmt_eng(e.run.ledger.stage_loss_j()[k] / 3600.0, "Wh"),
            ));
        }
        t.row(r);
    }
    Some(t)
}

fn biggest(e: &Entry<'_>) -> Option<(String, f64)> {
    let l = &e.run.ledger;
    let k = (0..e.design.stages.len())
        .max_by(|&a, &b| l.stage_loss_j()[a].total_cmp(&l.stage_loss_j()[b]))?;
    Some((e.design.stages[k].id.clone(), l.stage_loss_j()[k]))
}

/// The comparison in plain sentences: who wins on runtime, heat and violations, and why.
pub fn verdicts(entries: &[Entry<'_>]) -> Vec<String> {
    let mut out = Vec::new();
    if entries.len() < 2 {
        return out;
    }
    out.push(runtime_verdict(entries));
    for (i, e) in entries.iter().enumerate() {
        out.push(format!(
            "{} stops because {}.",
            letter(i),
            end_sentence(e.design, e.run)
        ));
    }
    out.push(heat_verdict(entries));
    out.push(violation_verdict(entries));
    out.extend(facts(entries));
    out
}

/// How the comparison names design `i`: its letter and label.
fn entry_name(entries: &[Entry<'_>], i: usize) -> String {
    format!("{} ({})", letter(i), entries[i].label)
}

/// The design with the highest `key` when `high`, else the lowest; the last of equal ones, as
/// `Iterator::max_by` picks.
fn best(entries: &[Entry<'_>], key: &dyn Fn(&Entry<'_>) -> f64, high: bool) -> usize {
    (0..entries.len())
        .max_by(|&a, &b| {
            let (x, y) = (key(&entries[a]), key(&entries[b]));
            if high {
                x.total_cmp(&y)
            } else {
                y.total_cmp(&x)
            }
        })
        .unwrap_or(0)
}

/// Who runs longest, and by how much the others fall short.
fn runtime_verdict(entries: &[Entry<'_>]) -> String {
    let r = best(entries, &|e| e.run.runtime_s(), true);
    let runtime = |i: usize| entries[i].run.runtime_s();
    ranked(
        "on runtime",
        r,
        &|i| fmt_duration(runtime(i)),
        &|i| {
            if runtime(r) > 0.0 {
                1.0 - runtime(i) / runtime(r)
            } else {
                0.0
            }
        },
        &|i| entry_name(entries, i),
        &RankWords {
            wins: "wins",
            lead: "lead",
            worse: "shorter",
        },
        entries.len(),
    )
}

/// Who loses least energy in stages and pack, and how much more the others lose.
fn heat_verdict(entries: &[Entry<'_>]) -> String {
    let h = best(entries, &|e| total_loss(e.run), false);
    let lost = |i: usize| total_loss(entries[i].run);
    ranked(
        "on heat (energy lost in stages and pack)",
        h,
        &|i| fmt_eng(lost(i) / 3600.0, "Wh"),
        &|i| {
            if lost(h) > 0.0 {
                lost(i) / lost(h) - 1.0
            } else if lost(i) > 0.0 {
                f64::INFINITY
            } else {
                0.0
            }
        },
        &|i| entry_name(entries, i),
        &RankWords {
            wins: "wastes least",
            lead: "waste least",
            worse: "more",
        },
        entries.len(),
    )
}

/// Who has the fewest violations, against the others' counts and kinds.
fn violation_verdict(entries: &[Entry<'_>]) -> String {
    let counts: Vec<usize> = entries.iter().map(|e| e.run.violations.len()).collect();
    let min = counts.iter().copied().min().unwrap_or(0);
    let fewest: Vec<usize> = (0..entries.len()).filter(|&i| counts[i] == min).collect();
    if fewest.len() == entries.len() {
        return format!("on violations, they tie with {min} each");
    }
    let kinds = |i: usize| {
        let mut k: Vec<&str> = entries[i]
            .run
            .violations
            .iter()
            .map(|v| v.kind.name())
            .collect();
        k.dedup();
        k.join(", ")
    };
    let worse: Vec<String> = (0..entries.len())
        .filter(|i| !fewest.contains(i))
        .map(|i| format!("{} in {} ({})", counts[i], letter(i), kinds(i)))
        .collect();
    format!(
        "on violations, {} {} fewest: {min} against {}",
        fewest
            .iter()
            .map(|&i| entry_name(entries, i))
            .collect::<Vec<_>>()
            .join(" and "),
        if fewest.len() == 1 {
            "has the"
        } else {
            "have the"
        },
        worse.join(", ")
    )
}

/// The verbs of a ranking: one design ahead, or several equal at the head.
struct RankWords {
    wins: &'static str,
    lead: &'static str,
    /// How a trailing design compares with the best (`shorter`, `more`).
    worse: &'static str,
}

/// One ranking sentence. `gap(i)` is how far design `i` trails the best one `b`, as a fraction of
/// the best's figure (0 for the best). Designs within [`EQUAL_WITHIN`] of the best are equal to it; when every design is,
/// none wins.
fn ranked(
    topic: &str,
    b: usize,
    value: &dyn Fn(usize) -> String,
    gap: &dyn Fn(usize) -> f64,
    name: &dyn Fn(usize) -> String,
    words: &RankWords,
    n: usize,
) -> String {
    let limit = fmt_percent(EQUAL_WITHIN);
    let (equal, behind): (Vec<usize>, Vec<usize>) = (0..n).partition(|&i| gap(i) < EQUAL_WITHIN);
    // Each design's figure, and for all but the best how far it trails, e.g. `0.3 % shorter`.
    let each = |v: &[usize]| {
        v.iter()
            .map(|&i| {
                if i == b || !gap(i).is_finite() {
                    format!("{} for {}", value(i), letter(i))
                } else {
                    format!(
                        "{} for {} ({:.1} % {})",
                        value(i),
                        letter(i),
                        100.0 * gap(i),
                        words.worse
                    )
                }
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    if behind.is_empty() {
        return format!(
            "{topic}, the designs are equal within the model's accuracy (they differ by less than {limit}): {}",
            each(&equal)
        );
    }
    if equal.len() == 1 {
        return format!(
            "{topic}, {} {}: {} against {}",
            name(b),
            words.wins,
            value(b),
            each(&behind)
        );
    }
    format!(
        "{topic}, {} {}, equal within the model's accuracy (less than {limit} apart): {}; against {}",
        equal
            .iter()
            .map(|&i| name(i))
            .collect::<Vec<_>>()
            .join(" and "),
        words.lead,
        each(&equal),
        each(&behind)
    )
}

/// Facts that explain the differences: stages out of regulation, rails above a load's maximum
/// (each as a share of the runtime and of the time the stage or load is on), average converter
/// efficiency.
fn facts(entries: &[Entry<'_>]) -> Vec<String> {
    let mut out = Vec::new();
    for (i, e) in entries.iter().enumerate() {
        if e.run.runtime_s() <= 0.0 {
            continue;
        }
        for f in regulation_facts(e.design, e.run) {
            out.push(format!("in {}, {}", letter(i), f.sentence()));
        }
        let l = &e.run.ledger;
        for (k, st) in e.design.stages.iter().enumerate() {
            let (o, loss) = (l.stage_out_j()[k], l.stage_loss_j()[k]);
            if st.kind.is_switching() && o > 0.0 {
                out.push(format!(
                    "in {}, `{}` ({}) averages {} efficiency over the run",
                    letter(i),
                    st.id,
                    st.kind_name(),
                    fmt_percent(o / (o + loss))
                ));
            }
        }
    }
    out
}

/// One row of `compare --format csv`: one design.
#[derive(Debug, Clone, Serialize)]
pub struct CompareCsvRow {
    /// Its letter in the comparison (A, B, ...).
    pub design: String,
    /// The file and its `--set` overrides.
    pub label: String,
    /// The design's title.
    pub title: String,
    /// Runtime, s.
    pub runtime_s: f64,
    /// Why it stopped.
    pub end_reason: &'static str,
    /// State of charge then, 0..1.
    pub end_soc: f64,
    /// Mean pack current, A.
    pub average_current_a: f64,
    /// Energy at the pack terminals, Wh.
    pub energy_wh: f64,
    /// Energy from the cells (terminals + the pack's internal loss), Wh.
    pub cell_energy_wh: f64,
    /// The pack's internal loss, Wh.
    pub pack_loss_wh: f64,
    /// Loss in all stages, Wh.
    pub stage_loss_wh: f64,
    /// Number of violations.
    pub violations: usize,
}

impl CsvRow for CompareCsvRow {
    const HEADER: &'static [&'static str] = &[
        "design",
        "label",
        "title",
        "runtime_s",
        "end_reason",
        "end_soc",
        "average_current_a",
        "energy_wh",
        "cell_energy_wh",
        "pack_loss_wh",
        "stage_loss_wh",
        "violations",
    ];
}

fn write_csv(w: &mut dyn Write, entries: &[Entry<'_>]) -> io::Result<()> {
    let rows: Vec<CompareCsvRow> = entries
        .iter()
        .enumerate()
        .map(|(i, e)| {
            let l = &e.run.ledger;
            CompareCsvRow {
                design: letter(i),
                label: e.label.clone(),
                title: e.design.title.clone(),
                runtime_s: e.run.runtime_s(),
                end_reason: e.run.end.reason.name(),
                end_soc: e.run.end.soc,
                average_current_a: e.run.average_current_a(),
                energy_wh: l.terminal_energy_j() / 3600.0,
                cell_energy_wh: l.cell_energy_j() / 3600.0,
                pack_loss_wh: l.pack_loss_j / 3600.0,
                stage_loss_wh: l.stage_loss_total() / 3600.0,
                violations: e.run.violations.len(),
            }
        })
        .collect();
    write_rows(w, &rows)
}
