//! The result of a fit: the fitted cell, its tables, and how well it matches each curve.

use super::peukert_factor;
use crate::model::{Cell, Chemistry, Table};

/// One row of the fitted tables.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SocPoint {
    /// State of charge, 0..1.
    pub soc: f64,
    /// Open-circuit voltage, V.
    pub ocv_v: f64,
    /// Ohmic resistance, Ω.
    pub resistance_ohm: f64,
    /// Outside the SoC range the curves share: OCV extrapolated linearly, resistance held.
    pub extrapolated: bool,
    /// The least-squares resistance was negative and is held at 0.
    pub resistance_clamped: bool,
    /// The OCV was changed to keep the table non-decreasing.
    pub ocv_adjusted: bool,
}

/// Root-mean-square and largest absolute difference between measured and modelled voltage.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Residual {
    /// Root mean square, V.
    pub rms_v: f64,
    /// Largest absolute value, V.
    pub max_v: f64,
    /// Points compared.
    pub points: usize,
}

impl Residual {
    pub(super) fn from_errors(errors: &[f64]) -> Self {
        if errors.is_empty() {
            return Self::default();
        }
        let sum: f64 = errors.iter().map(|e| e * e).sum();
        Self {
            rms_v: (sum / errors.len() as f64).sqrt(),
            max_v: errors.iter().fold(0.0, |m, e| m.max(e.abs())),
            points: errors.len(),
        }
    }
}

/// How the fitted cell reproduces one curve.
#[derive(Debug, Clone, PartialEq)]
pub struct CurveFit {
    /// The curve's name.
    pub name: String,
    /// Its constant current, A.
    pub current_a: f64,
    /// Capacity it delivered (its last point), C.
    pub capacity_c: f64,
    /// Capacity the fitted law gives at its current, Q / f(I), C.
    pub law_capacity_c: f64,
    /// Capacity the fitted cell delivers at its current before the cutoff or empty, C.
    pub model_capacity_c: f64,
    /// Its final voltage, V.
    pub final_v: f64,
    /// SoC of its first point in the fitted cell.
    pub soc_start: f64,
    /// SoC of its last point in the fitted cell (below 0 where it runs past empty).
    pub soc_end: f64,
    /// Voltage residual over its points with SoC in 0..1.
    pub residual: Residual,
}

/// A fitted cell: capacity law, OCV and resistance tables, cutoff, and how well they match.
///
/// # Formula
///
/// V_j(q) = OCV(s) - I_j R(s), s = 1 - q max(1, I_j / I_rated)^(k - 1) / Q (DESIGN section 5,
/// no polarization).
#[derive(Debug, Clone)]
pub struct Fit {
    /// Rated capacity Q, C.
    pub capacity_c: f64,
    /// Current of the capacity rating, A.
    pub rated_current_a: f64,
    /// Peukert exponent k (conservative form), 1 to 2.
    pub peukert: f64,
    /// Cutoff voltage, V.
    pub cutoff_v: f64,
    /// Chemistry to write.
    pub chemistry: Chemistry,
    /// OCV and resistance rows, SoC increasing, from 0 % to 100 %.
    pub table: Vec<SocPoint>,
    /// Lowest SoC every curve covers.
    pub soc_min: f64,
    /// Highest SoC every curve covers.
    pub soc_max: f64,
    /// One entry per curve, in the order given.
    pub curves: Vec<CurveFit>,
    /// Voltage residual over every curve.
    pub residual: Residual,
    /// What the user should know: extrapolation, clamping, smoothing, mismatches.
    pub warnings: Vec<String>,
    pub(super) ocv: Table,
    pub(super) resistance: Table,
}

impl Fit {
    /// Fitted OCV at SoC `s` (0..1), V.
    pub fn ocv_at(&self, s: f64) -> f64 {
        self.ocv.at(s)
    }

    /// Fitted resistance at SoC `s` (0..1), Ω.
    pub fn resistance_at(&self, s: f64) -> f64 {
        self.resistance.at(s)
    }

    /// Terminal voltage of the fitted cell at SoC `s` and constant current `current_a`, V.
    pub fn voltage_at(&self, s: f64, current_a: f64) -> f64 {
        self.ocv.at(s) - current_a * self.resistance.at(s)
    }

    /// The fitted cell as a model [`Cell`] (no polarization, self-discharge or temperature
    /// effect), unrounded.
    pub fn to_cell(&self, name: &str) -> Cell {
        Cell {
            name: name.to_string(),
            chemistry: self.chemistry,
            capacity_c: self.capacity_c,
            rated_current_a: self.rated_current_a,
            ocv: self.ocv.clone(),
            resistance: self.resistance.clone(),
            polarization: None,
            peukert: self.peukert,
            rate_window_s: self.chemistry.rate_window_s(),
            cutoff_v: self.cutoff_v,
            max_current_a: None,
            max_pulse: None,
            from_preset: false,
            self_discharge_per_s: 0.0,
            self_discharge_ref_c: 25.0,
            self_discharge_law: crate::model::SelfDischargeLaw::Constant,
            temp_capacity: Table::constant(1.0),
            temp_resistance: Table::constant(1.0),
            mass_kg: None,
            size: None,
        }
    }

    /// Charge the fitted cell delivers from full at constant `current_a` before its terminal
    /// voltage falls below the cutoff or it is empty, C.
    pub fn delivered_c(&self, current_a: f64) -> f64 {
        let f = peukert_factor(current_a, self.rated_current_a, self.peukert);
        let v = |s: f64| self.voltage_at(s, current_a) - self.cutoff_v;
        let knots: Vec<f64> = self.table.iter().rev().map(|p| p.soc).collect();
        let mut stop = 0.0;
        if v(1.0) < 0.0 {
            stop = 1.0;
        } else {
            for w in knots.windows(2) {
                let (a, b) = (w[0], w[1]);
                if v(b) < 0.0 {
                    stop = a + (b - a) * v(a) / (v(a) - v(b));
                    break;
                }
            }
        }
        (1.0 - stop) * self.capacity_c / f
    }
}
