//! Every numeric tolerance of the solvers, in one place.

/// Relative change of the current at which the fixed-point iteration counts as converged.
pub const FIXED_POINT_REL: f64 = 1e-13;
/// Most fixed-point iterations before the solver falls back to a scan.
pub const FIXED_POINT_MAX_ITER: usize = 60;
/// Steps of the downward scan used when the iteration does not converge. Near the maximum-power
/// limit the balancing window narrows as sqrt(1 - P / P_max); 400 steps find it down to
/// P = 0.9999 P_max.
pub const SCAN_STEPS: usize = 400;
/// Relative width at which a bisection bracket counts as a single voltage.
pub const BISECT_REL: f64 = 1e-15;
/// Most bisection steps (the bracket halves each time; 200 is far beyond f64 resolution).
pub const BISECT_MAX_ITER: usize = 200;
/// Relative energy-balance error allowed at one operating point (DESIGN section 5).
pub const ENERGY_BALANCE_REL: f64 = 1e-9;
