//! The budget: the steady operating point of each mode at one state of charge.

use super::check::{Violation, violations};
use super::point::{PackState, Solution, solve_point};
use crate::model::Design;

/// One mode of a budget.
#[derive(Debug, Clone)]
pub struct ModeBudget {
    /// Mode index.
    pub mode: usize,
    /// Its operating point, or a collapse.
    pub solution: Solution,
    /// Violations at that point.
    pub violations: Vec<Violation>,
}

/// The steady operating point of each mode in `modes` at state of charge `soc`, polarization
/// settled at I x R1 (DESIGN section 5).
///
/// # Examples
///
/// ```
/// let text = r#"
/// cells:
///   c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4 V]], resistance: 0.1 ohm, cutoff: 3 V }
/// battery: { cell: c }
/// loads: [{ id: lamp, rail: battery, draw: { on: 2 ohm } }]
/// modes: { lit: { lamp: on }, dark: {} }
/// profile: [{ mode: lit, for: 1 h }]
/// "#;
/// let d = joulepath::Design::from_text(text).unwrap();
/// let b = joulepath::solve::budget(&d, 0.5, &[0, 1]);
/// let joulepath::solve::Solution::Point(p) = &b[0].solution else { panic!() };
/// // 3.5 V across 0.1 Ω + 2 Ω.
/// assert!((p.pack.current - 3.5 / 2.1).abs() < 1e-12);
/// ```
pub fn budget(design: &Design, soc: f64, modes: &[usize]) -> Vec<ModeBudget> {
    let at = PackState {
        soc,
        v_pol: None,
        ambient_c: design.ambient_c,
    };
    modes
        .iter()
        .map(|&m| {
            let solution = solve_point(design, m, at);
            let violations = match &solution {
                Solution::Point(p) => violations(design, p, design.ambient_c),
                Solution::Collapse { .. } => Vec::new(),
            };
            ModeBudget {
                mode: m,
                solution,
                violations,
            }
        })
        .collect()
}
