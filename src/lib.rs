//! joulepath: the operating point of every stage of a battery-powered product's power tree,
//! its runtime across the discharge, and where the energy goes.
//!
//! Data flows one way: text -> [`spec`] (serde mirror) -> [`model`] (checked physics) +
//! [`tree`] (the graph and its walk order) -> [`solve`] (operating points) -> [`report`]
//! (tables, JSON, CSV); [`size`] tries packs against a target runtime. The library never prints; reports write to any `std::io::Write`.
//!
//! The one call for most uses is [`run_text`]: a design file's text in, its checked model and
//! its discharge out. [`spread::spread`] runs the same design across its units' tolerances.
//!
//! ```
//! let text = r#"
//! design: Pocket lamp
//! cells:
//!   c: { capacity: 1 Ah, ocv: [[0 %, 3.0 V], [100 %, 4.2 V]], resistance: 0.1 ohm, cutoff: 3.0 V }
//! battery: { cell: c }
//! loads: [{ id: lamp, rail: battery, draw: { on: 100 mA } }]
//! modes: { lit: { lamp: on } }
//! profile: [{ mode: lit, for: 1 h }]
//! "#;
//! let run = joulepath::run_text(text).unwrap();
//! // 1 Ah at 100 mA, down to the cutoff: a little under 10 h (the 10 mV the resistance takes
//! // from the open-circuit voltage ends it just before the cell is empty).
//! let hours = run.result.runtime_s() / 3600.0;
//! assert!(hours > 9.9 && hours <= 10.0, "{hours}");
//! assert_eq!(run.result.end.reason.name(), "cutoff");
//! ```

pub mod capture;
pub mod error;
pub mod fit;
mod hash;
pub mod model;
pub mod report;
pub mod size;
pub mod solve;
pub mod spec;
pub mod spread;
pub mod tree;
pub mod units;

pub use error::{Diagnostic, DiagnosticKind, Error, Location};
pub use model::Design;

/// A design read, checked and run to its end with the default options (its own ambient, a
/// 20-year horizon, the fast solver).
#[derive(Debug, Clone)]
pub struct Run {
    /// The checked design.
    pub design: Design,
    /// Its discharge.
    pub result: solve::RunResult,
}

/// Read, check and run a design file's text: the one call a notebook or another program needs.
///
/// # Errors
///
/// [`Error::Invalid`] with every problem of the file, or [`Error::Run`] when the discharge gives
/// no result.
pub fn run_text(yaml: &str) -> Result<Run, Error> {
    let design = Design::from_text(yaml)?;
    let result = solve::run(&design, &solve::RunOptions::for_design(&design))?;
    Ok(Run { design, result })
}
