//! Solvers: the operating point of one mode at one pack state, and the checks made on it.

mod budget;
mod check;
mod point;
mod root;
pub mod tolerance;

pub use budget::{ModeBudget, budget};
pub use check::{Violation, ViolationKind, junction_c, violations};
pub use point::{
    LoadPoint, OperatingPoint, PackPoint, PackState, Solution, StagePoint, StageState, solve_point,
};
pub use root::{Settle, settle};
