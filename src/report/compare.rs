//! `compare`: the runtime analysis of several designs side by side, and in words which one wins
//! on runtime, on heat and on violations, with the facts that explain it.

use std::io::{self, Write};

use serde::Serialize;

use super::json::RuntimeJson;
use super::runtime::end_sentence;
use super::text::{Align, TextTable};
use super::{CAUTION, Format, wrap};
use crate::model::Design;
use crate::solve::{RunResult, StageState, state_index};
use crate::units::{fmt_duration, fmt_eng, fmt_percent};

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

fn write_table(w: &mut dyn Write, entries: &[Entry<'_>]) -> io::Result<()> {
    writeln!(w, "comparing {} designs", entries.len())?;
    for (i, e) in entries.iter().enumerate() {
        writeln!(w, "  {}: {} ({})", letter(i), e.design.title, e.label)?;
    }
    writeln!(w)?;
    let mut cols: Vec<(&str, Align)> = vec![("", Align::Left)];
    let names: Vec<String> = (0..entries.len()).map(letter).collect();
    for n in &names {
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
    t.row(row("energy drawn", &|e| {
        fmt_eng(e.run.ledger.energy_j / 3600.0, "Wh")
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
    t.write(w, "  ")?;

    // Loss per stage, by id, side by side.
    let mut ids: Vec<&str> = Vec::new();
    for e in entries {
        for s in &e.design.stages {
            if !ids.contains(&s.id.as_str()) {
                ids.push(&s.id);
            }
        }
    }
    if !ids.is_empty() {
        let mut cols: Vec<(&str, Align)> = vec![("stage loss", Align::Left)];
        for n in &names {
            cols.push((n.as_str(), Align::Right));
        }
        let mut t = TextTable::new(&cols);
        for id in ids {
            let mut r = vec![id.to_string()];
            for e in entries {
                r.push(e.design.stages.iter().position(|s| s.id == id).map_or_else(
                    || "—".into(),
                    |k| fmt_eng(e.run.ledger.stage_loss_j[k] / 3600.0, "Wh"),
                ));
            }
            t.row(r);
        }
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
    for line in wrap(CAUTION, 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

fn biggest(e: &Entry<'_>) -> Option<(String, f64)> {
    let l = &e.run.ledger;
    let k = (0..e.design.stages.len())
        .max_by(|&a, &b| l.stage_loss_j[a].total_cmp(&l.stage_loss_j[b]))?;
    Some((e.design.stages[k].id.clone(), l.stage_loss_j[k]))
}

/// The comparison in plain sentences: who wins on runtime, heat and violations, and why.
pub fn verdicts(entries: &[Entry<'_>]) -> Vec<String> {
    let mut out = Vec::new();
    if entries.len() < 2 {
        return out;
    }
    let name = |i: usize| format!("{} ({})", letter(i), entries[i].label);
    let best = |key: &dyn Fn(&Entry<'_>) -> f64, high: bool| {
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
    };
    // Runtime.
    let r = best(&|e| e.run.runtime_s(), true);
    let others: Vec<String> = (0..entries.len())
        .filter(|&i| i != r)
        .map(|i| {
            let ti = entries[i].run.runtime_s();
            format!(
                "{} for {} ({:+.1} %)",
                fmt_duration(ti),
                letter(i),
                100.0 * (entries[r].run.runtime_s() / ti - 1.0)
            )
        })
        .collect();
    out.push(format!(
        "on runtime, {} wins: {} against {}",
        name(r),
        fmt_duration(entries[r].run.runtime_s()),
        others.join(", ")
    ));
    for (i, e) in entries.iter().enumerate() {
        out.push(format!(
            "{} stops because {}.",
            letter(i),
            end_sentence(e.design, e.run)
        ));
    }
    // Heat.
    let h = best(&|e| total_loss(e.run), false);
    let others: Vec<String> = (0..entries.len())
        .filter(|&i| i != h)
        .map(|i| {
            format!(
                "{} in {}",
                fmt_eng(total_loss(entries[i].run) / 3600.0, "Wh"),
                letter(i)
            )
        })
        .collect();
    out.push(format!(
        "on heat, {} wastes least: {} lost in stages and pack against {}",
        name(h),
        fmt_eng(total_loss(entries[h].run) / 3600.0, "Wh"),
        others.join(", ")
    ));
    // Violations.
    let counts: Vec<usize> = entries.iter().map(|e| e.run.violations.len()).collect();
    let min = counts.iter().copied().min().unwrap_or(0);
    let fewest: Vec<usize> = (0..entries.len()).filter(|&i| counts[i] == min).collect();
    if fewest.len() == entries.len() {
        out.push(format!("on violations, they tie with {min} each"));
    } else {
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
        out.push(format!(
            "on violations, {} {} fewest: {min} against {}",
            fewest
                .iter()
                .map(|&i| name(i))
                .collect::<Vec<_>>()
                .join(" and "),
            if fewest.len() == 1 {
                "has the"
            } else {
                "have the"
            },
            worse.join(", ")
        ));
    }
    out.extend(facts(entries));
    out
}

/// Facts that explain the differences: stages out of regulation, rails above a load's maximum,
/// average converter efficiency.
fn facts(entries: &[Entry<'_>]) -> Vec<String> {
    let mut out = Vec::new();
    for (i, e) in entries.iter().enumerate() {
        let t = e.run.runtime_s();
        if t <= 0.0 {
            continue;
        }
        let l = &e.run.ledger;
        for (k, st) in e.design.stages.iter().enumerate() {
            for (state, what) in [
                (
                    StageState::Bypass,
                    "in bypass, passing the pack through instead of regulating",
                ),
                (StageState::Dropout, "in dropout, below its setpoint"),
                (StageState::Undervoltage, "locked out by undervoltage"),
            ] {
                let share = l.stage_state_s[k][state_index(state)] / t;
                if share >= 0.01 {
                    out.push(format!(
                        "in {}, `{}` spends {} of the runtime {what}",
                        letter(i),
                        st.id,
                        fmt_percent(share)
                    ));
                }
            }
            let (o, loss) = (l.stage_out_j[k], l.stage_loss_j[k]);
            if st.kind.is_switching() && o > 0.0 {
                out.push(format!(
                    "in {}, `{}` ({}) averages {} efficiency over the run",
                    letter(i),
                    st.id,
                    st.kind.name(),
                    fmt_percent(o / (o + loss))
                ));
            }
        }
        for (k, load) in e.design.loads.iter().enumerate() {
            let share = l.load_high_s[k] / t;
            if share >= 0.001 {
                out.push(format!(
                    "in {}, the supply of `{}` is above its {} maximum for {} of the runtime",
                    letter(i),
                    load.id,
                    load.v_max
                        .map_or_else(|| "rated".into(), |v| fmt_eng(v, "V")),
                    fmt_percent(share)
                ));
            }
        }
    }
    out
}

fn write_csv(w: &mut dyn Write, entries: &[Entry<'_>]) -> io::Result<()> {
    writeln!(
        w,
        "design,label,runtime_s,end_reason,end_soc,average_current_a,energy_wh,pack_loss_wh,stage_loss_wh,violations"
    )?;
    for (i, e) in entries.iter().enumerate() {
        let l = &e.run.ledger;
        writeln!(
            w,
            "{},\"{}\",{},{},{},{},{},{},{},{}",
            letter(i),
            e.label.replace('"', "\"\""),
            e.run.runtime_s(),
            e.run.end.reason.name(),
            e.run.end.soc,
            e.run.average_current_a(),
            l.energy_j / 3600.0,
            l.pack_loss_j / 3600.0,
            l.stage_loss_total() / 3600.0,
            e.run.violations.len()
        )?;
    }
    Ok(())
}
