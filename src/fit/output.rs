//! The fitted cell as a `cells:` YAML block and as JSON, and the fit report.

use std::fmt::{self, Write as _};
use std::io;

use serde::Serialize;

use super::Fit;
use crate::report::rows::{CsvRow, write_rows};
use crate::units::{fmt_eng, fmt_percent, fmt_sig};

/// The mapping of one cell under `cells: NAME:`, with every value written as in a design file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CellEntry {
    /// Chemistry name (`other` unless given).
    pub chemistry: String,
    /// Rated capacity, e.g. `612.3 mAh` (4 significant digits).
    pub capacity: String,
    /// Current of the rating, e.g. `200 mA`.
    pub rated_current: String,
    /// `[SoC, OCV]` rows, OCV to the millivolt.
    pub ocv: Vec<(String, String)>,
    /// `[SoC, R]` rows, R to 0.1 mΩ below 1 Ω, else 4 significant digits.
    pub resistance: Vec<(String, String)>,
    /// Peukert exponent, 3 decimals.
    pub peukert: f64,
    /// Cutoff voltage, to the millivolt.
    pub cutoff: String,
}

/// One curve in the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CurveReport {
    /// Curve name.
    pub name: String,
    /// Constant current, A.
    pub current_a: f64,
    /// Capacity the curve delivered, Ah.
    pub capacity_ah: f64,
    /// Capacity the fitted law gives at this current, Ah.
    pub law_capacity_ah: f64,
    /// Capacity the fitted cell delivers at this current down to the cutoff, Ah.
    pub model_capacity_ah: f64,
    /// Final voltage of the curve, V.
    pub final_v: f64,
    /// SoC of the curve's first point.
    pub soc_start: f64,
    /// SoC of the curve's last point (below 0 where it runs past empty).
    pub soc_end: f64,
    /// RMS voltage residual, V.
    pub rms_v: f64,
    /// Largest absolute voltage residual, V.
    pub max_v: f64,
}

/// How the fit went: the capacity law, coverage, residuals, each curve, each row, warnings.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitReport {
    /// Rated capacity Q, Ah.
    pub capacity_ah: f64,
    /// Current of the rating, A.
    pub rated_current_a: f64,
    /// Peukert exponent k.
    pub peukert: f64,
    /// The Peukert form used.
    pub peukert_form: String,
    /// Cutoff, V.
    pub cutoff_v: f64,
    /// Lowest SoC every curve covers.
    pub soc_min: f64,
    /// Highest SoC every curve covers.
    pub soc_max: f64,
    /// RMS voltage residual over every curve, V.
    pub residual_rms_v: f64,
    /// Largest absolute voltage residual, V.
    pub residual_max_v: f64,
    /// Points in the residuals.
    pub residual_points: usize,
    /// Each curve.
    pub curves: Vec<CurveReport>,
    /// Each row of the tables.
    pub table: Vec<super::SocPoint>,
    /// Warnings, one sentence each.
    pub warnings: Vec<String>,
}

/// The JSON form of a fit: `{"name", "cell": {...the YAML mapping...}, "report": {...}}`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitJson {
    /// Cell name (the key under `cells:`).
    pub name: String,
    /// The mapping under the name, as in the YAML block.
    pub cell: CellEntry,
    /// The fit report.
    pub report: FitReport,
}

/// The report of a fit.
pub fn report(fit: &Fit) -> FitReport {
    FitReport {
        capacity_ah: fit.capacity_c / 3600.0,
        rated_current_a: fit.rated_current_a,
        peukert: fit.peukert,
        peukert_form: "I_eff = I max(1, I / I_rated)^(k - 1)".into(),
        cutoff_v: fit.cutoff_v,
        soc_min: fit.soc_min,
        soc_max: fit.soc_max,
        residual_rms_v: fit.residual.rms_v,
        residual_max_v: fit.residual.max_v,
        residual_points: fit.residual.points,
        curves: fit
            .curves
            .iter()
            .map(|c| CurveReport {
                name: c.name.clone(),
                current_a: c.current_a,
                capacity_ah: c.capacity_c / 3600.0,
                law_capacity_ah: c.law_capacity_c / 3600.0,
                model_capacity_ah: c.model_capacity_c / 3600.0,
                final_v: c.final_v,
                soc_start: c.soc_start,
                soc_end: c.soc_end,
                rms_v: c.residual.rms_v,
                max_v: c.residual.max_v,
            })
            .collect(),
        table: fit.table.clone(),
        warnings: fit.warnings.clone(),
    }
}

/// Drops trailing zeros after a decimal point.
fn trim(text: &str) -> String {
    if text.contains('.') && !text.contains('e') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text.to_string()
    }
}

/// `value` to 4 significant digits, trailing zeros dropped.
fn sig4(value: f64) -> String {
    trim(&fmt_sig(value, 4))
}

fn soc_text(s: f64) -> String {
    format!("{} %", trim(&format!("{:.1}", s * 100.0)))
}

fn volts(v: f64) -> String {
    format!("{v:.3} V")
}

fn ohms(r: f64) -> String {
    if r < 1.0 {
        format!("{} mΩ", trim(&format!("{:.1}", r * 1000.0)))
    } else {
        format!("{} Ω", trim(&fmt_sig(r, 4)))
    }
}

fn entry(fit: &Fit) -> CellEntry {
    let rows = |y: fn(&super::SocPoint) -> String| -> Vec<(String, String)> {
        fit.table.iter().map(|p| (soc_text(p.soc), y(p))).collect()
    };
    CellEntry {
        chemistry: fit.chemistry.name().to_string(),
        capacity: capacity(fit.capacity_c),
        rated_current: current(fit.rated_current_a),
        ocv: rows(|p| volts(p.ocv_v)),
        resistance: rows(|p| ohms(p.resistance_ohm)),
        peukert: (fit.peukert * 1000.0).round() / 1000.0,
        cutoff: volts(fit.cutoff_v),
    }
}

fn capacity(q_c: f64) -> String {
    let ah = q_c / 3600.0;
    if ah >= 10.0 {
        format!("{} Ah", sig4(ah))
    } else {
        format!("{} mAh", sig4(ah * 1e3))
    }
}

fn current(i: f64) -> String {
    if i >= 1.0 {
        format!("{} A", sig4(i))
    } else if i >= 1e-3 {
        format!("{} mA", sig4(i * 1e3))
    } else {
        format!("{} µA", sig4(i * 1e6))
    }
}

/// A cell name as a YAML key: plain when it is a simple word, else double-quoted.
fn yaml_key(name: &str) -> String {
    let simple = name.starts_with(|c: char| c.is_ascii_alphabetic())
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
        && !matches!(
            name.to_ascii_lowercase().as_str(),
            "y" | "n" | "yes" | "no" | "on" | "off" | "true" | "false" | "null"
        );
    if simple {
        name.to_string()
    } else {
        serde_json::to_string(name).unwrap_or_else(|_| format!("\"{name}\""))
    }
}

/// The fitted cell as a ready `cells:` block for a design file, named `name`.
///
/// Values are rounded: OCV and cutoff to the millivolt, resistance to 0.1 mΩ (4 significant
/// digits from 1 Ω), capacity and rated current to 4 significant digits, k to 3 decimals. Rows
/// that were extrapolated, clamped or levelled carry a comment.
pub fn cell_yaml(fit: &Fit, name: &str) -> String {
    let e = entry(fit);
    let currents: Vec<String> = fit
        .curves
        .iter()
        .map(|c| fmt_eng(c.current_a, "A"))
        .collect();
    let mut out = String::new();
    let _ = writeln!(
        out,
        "# fitted from {} discharge curves ({}); voltage residual RMS {}, max {}",
        fit.curves.len(),
        currents.join(", "),
        fmt_eng(fit.residual.rms_v, "V"),
        fmt_eng(fit.residual.max_v, "V")
    );
    let _ = writeln!(out, "cells:\n  {}:", yaml_key(name));
    let _ = writeln!(out, "    chemistry: {}", e.chemistry);
    let _ = writeln!(out, "    capacity: {}", e.capacity);
    let _ = writeln!(out, "    rated_current: {}", e.rated_current);
    let _ = writeln!(out, "    ocv:");
    for ((s, v), p) in e.ocv.iter().zip(&fit.table) {
        let note = match (p.extrapolated, p.ocv_adjusted) {
            (true, _) => "  # extrapolated",
            (false, true) => "  # levelled",
            _ => "",
        };
        let _ = writeln!(out, "      - [{s}, {v}]{note}");
    }
    let _ = writeln!(out, "    resistance:");
    for ((s, r), p) in e.resistance.iter().zip(&fit.table) {
        let note = match (p.extrapolated, p.resistance_clamped) {
            (true, _) => "  # extrapolated",
            (false, true) => "  # clamped at 0",
            _ => "",
        };
        let _ = writeln!(out, "      - [{s}, {r}]{note}");
    }
    let _ = writeln!(out, "    peukert: {:.3}", e.peukert);
    let _ = writeln!(out, "    cutoff: {}", e.cutoff);
    out
}

/// The JSON form: the cell's mapping (the same values as [`cell_yaml`]) and the report.
pub fn cell_json(fit: &Fit, name: &str) -> FitJson {
    FitJson {
        name: name.to_string(),
        cell: entry(fit),
        report: report(fit),
    }
}

/// One row of `fit-cell --format csv`: one SoC point of the fitted tables, with the cell's
/// scalar values repeated on every row so that the file describes the whole cell.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitCsvRow {
    /// Cell name (the key under `cells:`).
    pub name: String,
    /// State of charge, 0..1.
    pub soc: f64,
    /// Open-circuit voltage, V.
    pub ocv_v: f64,
    /// Ohmic resistance, Ω.
    pub resistance_ohm: f64,
    /// Outside the SoC range every curve covers (OCV extrapolated, resistance held).
    pub extrapolated: bool,
    /// The OCV was levelled to keep the table non-decreasing.
    pub ocv_levelled: bool,
    /// The resistance was negative and is held at 0.
    pub resistance_clamped: bool,
    /// Rated capacity, Ah.
    pub capacity_ah: f64,
    /// Current of the rating, A.
    pub rated_current_a: f64,
    /// Peukert exponent.
    pub peukert: f64,
    /// Cutoff, V.
    pub cutoff_v: f64,
}

impl CsvRow for FitCsvRow {
    const HEADER: &'static [&'static str] = &[
        "name",
        "soc",
        "ocv_v",
        "resistance_ohm",
        "extrapolated",
        "ocv_levelled",
        "resistance_clamped",
        "capacity_ah",
        "rated_current_a",
        "peukert",
        "cutoff_v",
    ];
}

/// The rows of `fit-cell --format csv`, one per SoC point, unrounded.
pub fn cell_csv_rows(fit: &Fit, name: &str) -> Vec<FitCsvRow> {
    fit.table
        .iter()
        .map(|p| FitCsvRow {
            name: name.to_string(),
            soc: p.soc,
            ocv_v: p.ocv_v,
            resistance_ohm: p.resistance_ohm,
            extrapolated: p.extrapolated,
            ocv_levelled: p.ocv_adjusted,
            resistance_clamped: p.resistance_clamped,
            capacity_ah: fit.capacity_c / 3600.0,
            rated_current_a: fit.rated_current_a,
            peukert: fit.peukert,
            cutoff_v: fit.cutoff_v,
        })
        .collect()
}

/// Write the fitted cell as CSV (see [`FitCsvRow`]).
pub fn write_cell_csv(w: &mut dyn io::Write, fit: &Fit, name: &str) -> io::Result<()> {
    write_rows(w, &cell_csv_rows(fit, name))
}

impl fmt::Display for FitReport {
    /// A short text report: the capacity law, coverage, residuals, a line per curve, warnings.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "capacity {} at {}, Peukert exponent {:.3} ({}), cutoff {:.3} V",
            fmt_eng(self.capacity_ah, "Ah"),
            fmt_eng(self.rated_current_a, "A"),
            self.peukert,
            self.peukert_form,
            self.cutoff_v
        )?;
        writeln!(
            f,
            "SoC covered by every curve: {} to {}",
            fmt_percent(self.soc_min),
            fmt_percent(self.soc_max)
        )?;
        writeln!(
            f,
            "voltage residual: RMS {}, max {} over {} points",
            fmt_eng(self.residual_rms_v, "V"),
            fmt_eng(self.residual_max_v, "V"),
            self.residual_points
        )?;
        let width = self
            .curves
            .iter()
            .map(|c| c.name.chars().count())
            .fold(5, usize::max);
        writeln!(
            f,
            "{:<width$}  {:>9}  {:>10}  {:>10}  {:>10}  {:>9}  {:>9}",
            "curve", "current", "capacity", "law", "fitted", "RMS", "max"
        )?;
        for c in &self.curves {
            writeln!(
                f,
                "{:<width$}  {:>9}  {:>10}  {:>10}  {:>10}  {:>9}  {:>9}",
                c.name,
                fmt_eng(c.current_a, "A"),
                fmt_eng(c.capacity_ah, "Ah"),
                fmt_eng(c.law_capacity_ah, "Ah"),
                fmt_eng(c.model_capacity_ah, "Ah"),
                fmt_eng(c.rms_v, "V"),
                fmt_eng(c.max_v, "V")
            )?;
        }
        for w in &self.warnings {
            writeln!(f, "warning: {w}")?;
        }
        Ok(())
    }
}
