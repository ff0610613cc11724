//! Solvers: the operating point of one mode at one pack state, and the checks made on it.

mod budget;
mod check;
mod discharge;
mod ledger;
pub mod numerics;
mod point;
mod root;
mod sum2;

pub use budget::{ModeBudget, budget};
pub use check::{Excess, Violation, ViolationKind, junction_c, violations, violations_where};
pub use discharge::{
    End, EndReason, MAX_HORIZON_S, MAX_RAIL_BUFFERS, Peak, RunCounts, RunError, RunOptions,
    RunResult, YEAR_S, run, run_counted, run_observed,
};
pub use ledger::{Ledger, TracePoint};
pub use point::{
    BufferPoint, BufferRegime, LoadPoint, OperatingPoint, PackPoint, PackState, RailBufferPoint,
    RailBufferState, Solution, StagePoint, StageState, solve_point, solve_point_buffered,
    solve_point_state,
};
pub use sum2::Sum2;
