//! `joulepath cells`: the built-in cell presets, all of them in one table or one in full.

use std::io::{self, Write};

use serde::Serialize;

use super::Format;
use super::rows::{CsvRow, write_rows};
use super::text::{Align, TextTable};
use crate::model::{Cell, MONTH_S, Nominal, Preset, SelfDischargeLaw};
use crate::units::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent, fmt_sig};

/// Days in the year of the per-year self-discharge shown beside the monthly rate.
const YEAR_DAYS: f64 = 365.25;

/// `cells --format json` (DESIGN section 7).
#[derive(Debug, Clone, Serialize)]
pub struct CellsJson {
    /// One entry per preset listed.
    pub cells: Vec<CellJson>,
}

/// One preset in `cells --format json`.
#[derive(Debug, Clone, Serialize)]
pub struct CellJson {
    /// Preset name.
    pub name: String,
    /// Chemistry, as written in design files.
    pub chemistry: String,
    /// Designated nominal voltage of the chemistry (IEC 60086-1, IEC 61960-3, ...), V.
    pub nominal_v: f64,
    /// Mean open-circuit voltage over 0..100 % SoC, V.
    pub mean_ocv_v: f64,
    /// Rated capacity, Ah.
    pub capacity_ah: f64,
    /// Rated capacity x nominal voltage, Wh.
    pub energy_wh: f64,
    /// End-of-discharge voltage under load, V.
    pub cutoff_v: f64,
}

impl CellJson {
    /// The summary of a preset.
    pub fn of(p: &Preset) -> Self {
        Self {
            name: p.name.to_string(),
            chemistry: p.cell.chemistry.name().to_string(),
            nominal_v: p.nominal_v(),
            mean_ocv_v: p.mean_ocv_v(),
            capacity_ah: p.capacity_ah(),
            energy_wh: p.energy_wh(),
            cutoff_v: p.cell.cutoff_v,
        }
    }
}

/// Write the list of presets: name, chemistry, designated nominal voltage, mean open-circuit
/// voltage, capacity, energy, cutoff.
///
/// # Examples
///
/// ```
/// use joulepath::model::Preset;
/// use joulepath::report::{Format, cells::write_cells};
/// let mut out = Vec::new();
/// write_cells(&mut out, &Preset::all().unwrap(), Format::Json).unwrap();
/// let v: serde_json::Value = serde_json::from_slice(&out).unwrap();
/// assert_eq!(v["cells"][0]["name"], "alkaline-aa");
/// ```
pub fn write_cells(w: &mut dyn Write, presets: &[Preset], format: Format) -> io::Result<()> {
    match format {
        Format::Json => json(w, presets),
        Format::Csv => csv(w, presets),
        Format::Table => {
            writeln!(w, "Built-in cell presets")?;
            writeln!(w)?;
            let mut t = TextTable::new(&[
                ("name", Align::Left),
                ("chemistry", Align::Left),
                ("nominal", Align::Right),
                ("mean OCV", Align::Right),
                ("capacity", Align::Right),
                ("energy", Align::Right),
                ("cutoff", Align::Right),
            ]);
            for p in presets {
                t.row(vec![
                    p.name.to_string(),
                    p.cell.chemistry.name().to_string(),
                    fmt_eng(p.nominal_v(), "V"),
                    fmt_eng(p.mean_ocv_v(), "V"),
                    fmt_eng(p.capacity_ah(), "Ah"),
                    fmt_eng(p.energy_wh(), "Wh"),
                    fmt_eng(p.cell.cutoff_v, "V"),
                ]);
            }
            t.write(w, "  ")?;
            writeln!(w)?;
            for line in [
                "Values per cell. Nominal: the designated voltage of the chemistry (IEC 60086-1 for",
                "primary cells, IEC 61951-2 for NiMH, IEC 61960-3 for lithium-ion); mean OCV: the mean",
                "open-circuit voltage over 0..100 % state of charge, which the simulation uses; energy:",
                "capacity x nominal, as cells are rated. `joulepath cells NAME` shows a preset in full;",
                "use one as `battery: { cell: NAME }` or override its keys with",
                "`{ preset: NAME, capacity: ... }`.",
            ] {
                writeln!(w, "{line}")?;
            }
            Ok(())
        }
    }
}

/// Write one preset in full: every parameter with its unit, the OCV curve with the resistance at
/// each of its points, and where the origins of the values are. JSON and CSV give the summary of
/// [`write_cells`] with this one entry.
pub fn write_cell(w: &mut dyn Write, p: &Preset, format: Format) -> io::Result<()> {
    match format {
        Format::Json => json(w, std::slice::from_ref(p)),
        Format::Csv => csv(w, std::slice::from_ref(p)),
        Format::Table => table(w, p),
    }
}

fn json(w: &mut dyn Write, presets: &[Preset]) -> io::Result<()> {
    let j = CellsJson {
        cells: presets.iter().map(CellJson::of).collect(),
    };
    serde_json::to_writer_pretty(&mut *w, &j)?;
    writeln!(w)
}

impl CsvRow for CellJson {
    const HEADER: &'static [&'static str] = &[
        "name",
        "chemistry",
        "nominal_v",
        "mean_ocv_v",
        "capacity_ah",
        "energy_wh",
        "cutoff_v",
    ];
}

fn csv(w: &mut dyn Write, presets: &[Preset]) -> io::Result<()> {
    let rows: Vec<CellJson> = presets.iter().map(CellJson::of).collect();
    write_rows(w, &rows)
}

/// One preset in full: its facts as a two-column list, its OCV curve and where the values come
/// from.
fn table(w: &mut dyn Write, p: &Preset) -> io::Result<()> {
    let c = &p.cell;
    writeln!(w, "{}: {}", p.name, p.description)?;
    writeln!(w)?;
    let mut t = TextTable::new(&[("", Align::Left), ("", Align::Left)]);
    let facts = [energy_facts(p), electrical_facts(c), physical_facts(c)];
    for (k, v) in facts.into_iter().flatten() {
        t.row(vec![k.to_string(), v]);
    }
    // The header row of this two-column list is blank: skip it.
    let mut list = Vec::new();
    t.write(&mut list, "  ")?;
    let list = String::from_utf8_lossy(&list);
    for line in list.lines().skip(1) {
        writeln!(w, "{line}")?;
    }
    writeln!(w)?;
    write_curve(w, c)?;
    writeln!(
        w,
        "The source and status of every value are given beside it in presets/{}.yaml.",
        p.name
    )
}

/// The first lines of a preset in full: chemistry, capacity, voltages, energy and cutoff.
fn energy_facts(p: &Preset) -> Vec<(&'static str, String)> {
    let c = &p.cell;
    let nominal = Nominal::of(c.chemistry).map_or_else(
        || {
            format!(
                "{} (no designated voltage: the mean open-circuit voltage)",
                fmt_eng(p.nominal_v(), "V")
            )
        },
        |n| format!("{} (designated: {})", fmt_eng(n.volts, "V"), n.source),
    );
    vec![
        ("chemistry", c.chemistry.name().to_string()),
        (
            "capacity",
            format!(
                "{}, rated at {}",
                fmt_eng(p.capacity_ah(), "Ah"),
                fmt_eng(c.rated_current_a, "A")
            ),
        ),
        ("nominal voltage", nominal),
        (
            "mean OCV",
            format!(
                "{} (mean open-circuit voltage over 0..100 %)",
                fmt_eng(p.mean_ocv_v(), "V")
            ),
        ),
        (
            "energy",
            format!(
                "{} (capacity x nominal voltage); {} at the mean open-circuit voltage",
                fmt_eng(p.energy_wh(), "Wh"),
                fmt_eng(p.capacity_ah() * p.mean_ocv_v(), "Wh")
            ),
        ),
        (
            "open circuit",
            format!(
                "{} full, {} empty",
                fmt_eng(c.ocv.at(1.0), "V"),
                fmt_eng(c.ocv.at(0.0), "V")
            ),
        ),
        ("cutoff", format!("{} under load", fmt_eng(c.cutoff_v, "V"))),
    ]
}

/// The middle lines of a preset in full: resistance, polarization, rate law, current limits
/// and self-discharge.
fn electrical_facts(c: &Cell) -> Vec<(&'static str, String)> {
    let polarization = c.polarization.map_or_else(
        || "none".to_string(),
        |(r, tau)| format!("{}, time constant {}", fmt_eng(r, "Ω"), fmt_eng(tau, "s")),
    );
    let mut facts = vec![
        ("resistance", resistance_words(c)),
        ("polarization", polarization),
        ("Peukert exponent", fmt_sig(c.peukert, 3)),
    ];
    if c.peukert > 1.0 {
        let window = if c.rate_window_s > 0.0 {
            format!(
                "{} (the law sees the current averaged over it)",
                fmt_duration(c.rate_window_s)
            )
        } else {
            "none (the law sees the current of each instant)".to_string()
        };
        facts.push(("rate window", window));
    }
    facts.push((
        "max current",
        c.max_current_a.map_or_else(
            || "no limit given".to_string(),
            |i| format!("{} continuous", fmt_eng(i, "A")),
        ),
    ));
    if let Some((i, t)) = c.max_pulse {
        facts.push((
            "max pulse current",
            format!("{} in pulses of up to {}", fmt_eng(i, "A"), fmt_duration(t)),
        ));
    }
    facts.push(("self-discharge", self_discharge_words(c)));
    facts
}

/// The last lines of a preset in full: mass, size and the temperature table.
fn physical_facts(c: &Cell) -> Vec<(&'static str, String)> {
    let mut facts = vec![
        (
            "mass",
            c.mass_kg.map_or_else(
                || "not given".to_string(),
                |m| format!("{} (typical)", fmt_eng(m * 1e3, "g")),
            ),
        ),
        (
            "size",
            c.size.map_or_else(
                || "not given".to_string(),
                |s| format!("{}, {} cm³", s.describe(), fmt_sig(s.volume_m3() * 1e6, 3)),
            ),
        ),
    ];
    for (i, (t, f)) in c.temp_capacity.points().enumerate() {
        let line = format!(
            "{}: capacity {}, resistance {}",
            fmt_celsius(t),
            fmt_percent(f),
            fmt_percent(c.temp_resistance.at(t))
        );
        facts.push((if i == 0 { "temperature" } else { "" }, line));
    }
    facts
}

/// The cell's resistance in words: one value, or its range by state of charge.
fn resistance_words(c: &Cell) -> String {
    let (r_lo, r_hi) = c
        .resistance
        .points()
        .fold((f64::INFINITY, 0.0_f64), |(lo, hi), (_, r)| {
            (lo.min(r), hi.max(r))
        });
    if r_hi > r_lo {
        format!(
            "{} to {}, by state of charge (below)",
            fmt_eng(r_lo, "Ω"),
            fmt_eng(r_hi, "Ω")
        )
    } else {
        fmt_eng(r_lo, "Ω")
    }
}

/// The cell's self-discharge in words: the rate and how it follows the temperature.
fn self_discharge_words(c: &Cell) -> String {
    let per_month = c.self_discharge_per_s * MONTH_S;
    let per_year = c.self_discharge_per_s * YEAR_DAYS * 86_400.0;
    let rate = if per_year < 1.0 {
        format!(
            "{}/month ({}/year) of the rated capacity",
            fmt_percent(per_month),
            fmt_percent(per_year)
        )
    } else {
        // A fast rate: the linear model empties the cell within the year.
        format!("{}/month of the rated capacity", fmt_percent(per_month))
    };
    let law = match c.self_discharge_law {
        _ if c.self_discharge_per_s == 0.0 => String::new(),
        SelfDischargeLaw::Constant => ", at every temperature".to_string(),
        SelfDischargeLaw::Doubling { every_k } => format!(
            " at {}, doubling every {} °C",
            fmt_celsius(c.self_discharge_ref_c),
            fmt_sig(every_k, 3).trim_end_matches(".0")
        ),
        SelfDischargeLaw::Arrhenius { ea_j_per_mol } => format!(
            " at {}, Arrhenius with {} kJ/mol",
            fmt_celsius(c.self_discharge_ref_c),
            fmt_sig(ea_j_per_mol / 1000.0, 3)
        ),
    };
    format!("{rate}{law}")
}

/// The open-circuit voltage and resistance against state of charge, full first.
fn write_curve(w: &mut dyn Write, c: &Cell) -> io::Result<()> {
    let mut curve = TextTable::new(&[
        ("SoC", Align::Right),
        ("OCV", Align::Right),
        ("resistance", Align::Right),
    ]);
    for (s, v) in c.ocv.points().collect::<Vec<_>>().into_iter().rev() {
        curve.row(vec![
            fmt_percent(s),
            fmt_eng(v, "V"),
            fmt_eng(c.resistance.at(s), "Ω"),
        ]);
    }
    curve.write(w, "  ")?;
    writeln!(w)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_csv_has_a_header_for_every_field() {
        // The header once lacked `mean_ocv_v`, and `cells --format csv` failed on every row.
        let presets = Preset::all().unwrap();
        let mut out = Vec::new();
        write_cells(&mut out, &presets, Format::Csv).unwrap();
        let text = String::from_utf8(out).unwrap();
        let mut lines = text.lines();
        assert_eq!(
            lines.next(),
            Some("name,chemistry,nominal_v,mean_ocv_v,capacity_ah,energy_wh,cutoff_v")
        );
        assert_eq!(lines.count(), presets.len());
    }
}
