//! A cell fitted from discharge curves at constant current (`fit-cell`).
//!
//! A datasheet gives terminal voltage against delivered capacity at a few constant currents, not
//! an OCV table. This module reads such curves ([`read_curve`]), fits the cell model of DESIGN
//! section 5 to them ([`fit`]) and writes the result as a `cells:` block ([`cell_yaml`]), a
//! report ([`report`]) and JSON ([`cell_json`]).
//!
//! # Model
//!
//! A curve at constant current I_j obeys (DESIGN section 5, no polarization):
//!
//! V_j(q) = OCV(s) - I_j R(s), s = 1 - q f(I_j) / Q, f(I) = max(1, I / I_rated)^(k - 1)
//!
//! where q is the delivered charge, Q the rated capacity and k the Peukert exponent in its
//! conservative form (I_eff = I f(I)). Each curve is taken to end at s = 0: the capacity it
//! delivers is C_j = Q / f(I_j).
//!
//! # Steps
//!
//! 1. Q and k from the delivered capacities C_j: least squares on ln C_j = ln Q - (k - 1)
//!    max(0, ln(I_j / I_rated)), I_rated the lowest current unless given. With two currents the
//!    line passes through both points and k is the two-point formula
//!    ([`peukert_from_capacities`], equal to [`peukert_from_times`]). A k below 1 is held at 1.
//! 2. At each SoC point of a grid (default every 5 %) inside the range every curve covers, each
//!    curve's voltage is interpolated at q = (1 - s) Q / f(I_j), and OCV(s), R(s) solve
//!    V_j = OCV - I_j R by least squares. A negative R is clamped to 0 and flagged.
//! 3. Grid points outside the covered range are extrapolated (OCV linearly from the two nearest
//!    fitted points, R held) and flagged; the OCV column is made non-decreasing (the checker's
//!    rule) by the least-squares monotone fit, and adjusted points are flagged.
//! 4. The cutoff is the lowest of the curves' final voltages unless given, so that the fitted
//!    cell delivers every curve's capacity.
//!
//! # Examples
//!
//! ```
//! use joulepath::fit::{FitOptions, fit, read_curve};
//! // Two synthetic curves of one cell: OCV 3.0 V at 0 % to 4.0 V at 100 %, R = 0.1 Ω, k = 1.
//! let csv = |i: f64| {
//!     let mut t = String::from("capacity [mAh], voltage [V]\n");
//!     for n in 0..=10 {
//!         let s = 1.0 - f64::from(n) / 10.0;
//!         t += &format!("{}, {}\n", 100.0 * f64::from(n), 3.0 + s - i * 0.1);
//!     }
//!     t
//! };
//! let a = read_curve(&csv(0.2), 0.2, "low.csv").unwrap();
//! let b = read_curve(&csv(1.0), 1.0, "high.csv").unwrap();
//! let f = fit(&[a, b], &FitOptions::default()).unwrap();
//! assert!((f.capacity_c / 3.6 - 1000.0).abs() < 1e-6);
//! assert!((f.ocv_at(0.5) - 3.5).abs() < 1e-9);
//! assert!((f.resistance_at(0.5) - 0.1).abs() < 1e-9);
//! ```

mod curve;
mod fitted;
pub(crate) mod header;
mod output;
mod peukert;
mod soc;

pub use curve::{Curve, read_curve};
pub use fitted::{CurveFit, Fit, Residual, SocPoint};
pub use output::{
    CellEntry, CurveReport, FitCsvRow, FitJson, FitReport, cell_csv_rows, cell_json, cell_yaml,
    report, write_cell_csv,
};
pub use peukert::{peukert_factor, peukert_from_capacities, peukert_from_times};
pub use soc::fit;

use crate::error::Diagnostic;
use crate::model::Chemistry;

/// Choices of the fit; [`FitOptions::default`] suits a typical datasheet.
#[derive(Debug, Clone, PartialEq)]
pub struct FitOptions {
    /// Current of the capacity rating, A; default the lowest current of the curves.
    pub rated_current_a: Option<f64>,
    /// End-of-discharge voltage, V; default the lowest of the curves' final voltages.
    pub cutoff_v: Option<f64>,
    /// Spacing of the SoC grid, as a fraction (0.005 to 0.5); default 0.05 (every 5 %).
    pub soc_step: f64,
    /// Chemistry written into the cell; default [`Chemistry::Other`].
    pub chemistry: Option<Chemistry>,
}

impl Default for FitOptions {
    fn default() -> Self {
        Self {
            rated_current_a: None,
            cutoff_v: None,
            soc_step: 0.05,
            chemistry: None,
        }
    }
}

/// Why curves cannot be read or fitted: a [`Diagnostic`] whose path is the file or curve
/// concerned (empty for the fit as a whole), with the line and column where one place is at
/// fault.
///
/// # Examples
///
/// ```
/// let e = joulepath::fit::read_curve("", 0.2, "low.csv").unwrap_err();
/// assert!(e.message().contains("empty"));
/// assert_eq!(e.path(), "low.csv");
/// ```
pub type FitError = Diagnostic;
