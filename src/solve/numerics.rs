//! Every numeric tolerance of the solvers, in one place.

/// Relative change of the current at which the fixed-point iteration counts as converged.
pub const FIXED_POINT_REL: f64 = 1e-13;
/// Most fixed-point iterations before the solver falls back to a scan.
pub const FIXED_POINT_MAX_ITER: usize = 60;
/// Steps of the downward scan used when the iteration does not converge. Near the maximum-power
/// limit the balancing window narrows as sqrt(1 - P / P_max); 400 steps find it down to
/// P = 0.9999 P_max.
pub const SCAN_STEPS: usize = 400;
/// Relative width at which a bisection bracket counts as a single voltage. The demand is
/// blended across the bracket, so its width moves the result by far less than itself; at
/// 1e-15 (a few units in the last place) the last halvings only split rounding noise and took
/// three to seven more evaluations per operating point.
pub const BISECT_REL: f64 = 1e-14;
/// Most bisection steps (the bracket halves each time; 200 is far beyond f64 resolution).
pub const BISECT_MAX_ITER: usize = 200;
/// Relative energy-balance error allowed at one operating point (DESIGN section 5).
pub const ENERGY_BALANCE_REL: f64 = 1e-9;

/// Largest fall in state of charge within one held step of the fast solver (the current is that
/// of the step's mean state; 0.5 % keeps the runtime within 0.2 % of the reference).
pub const STEP_MAX_DS_FAST: f64 = 0.005;
/// The same for the chronological reference.
pub const STEP_MAX_DS_EXACT: f64 = 0.0005;
/// Largest move of the polarization voltage within one held step of the fast solver, as a share
/// of the pack voltage (a polarization time constant shorter than a pulse is followed in steps).
pub const STEP_MAX_DVP_FAST: f64 = 0.01;
/// The same for the chronological reference.
pub const STEP_MAX_DVP_EXACT: f64 = 0.001;
/// Fall in state of charge the first stretch of a repeat block may cover; each stretch taken
/// whole lets the next of the block cover twice as much, up to [`SKIP_MAX_DS`], and one that had
/// to be shortened sets the next to what it took (4 %, fixed, was the best fixed choice over
/// the bundled examples; growing from it to 16 % took 20 to 60 % fewer operating points on
/// every example).
pub const SKIP_FIRST_DS: f64 = 0.04;
/// Largest fall in state of charge the fast solver skips at once.
pub const SKIP_MAX_DS: f64 = 0.16;
/// Passes simulated inside each skipped stretch to give a trace its points there (they change
/// nothing else): at least this many, and this many for each 4 % of charge the stretch covers.
pub const TRACE_PROBES_PER_SKIP: u64 = 12;
/// Error control of a skipped stretch: the departure of the parabola through the start, middle
/// and end passes' rates from the straight line through the outer two (the difference of their
/// means over the stretch), as a share of the middle pass's fall in state of charge; beyond it
/// the stretch is halved. The stretch is then taken at the parabola's mean, whose own error is
/// of higher order, so the bend overstates it: 1e-3 (half the 0.2 % promised) took 30 % fewer
/// operating points on the handheld meter than 2e-4 did, and over 2,400 random designs against
/// the reference the largest gap stayed 1.23e-3 (the 99th percentile went from 4.0e-4 to
/// 4.6e-4).
pub const SKIP_REL_ERR: f64 = 1e-3;
/// [`SKIP_REL_ERR`] with a buffer capacitor, whose periodic voltage the passes' rates carry
/// only approximately: the tighter bound kept 6 more of 1,383 random buffered designs within
/// 0.2 % of the reference (1,353 against 1,347).
pub const SKIP_BUFFER_REL_ERR: f64 = 2e-4;
/// Share of the starting charge that the stretches of a run's own passes (not those simulated
/// to measure rates) may miss in all, when their rates do not follow a parabola: a converter at
/// the edge of regulation that flips between two states from pass to pass gives rates that no
/// halving smooths, and the stretch is taken with the curvature term as its error as long as
/// the errors so taken add up to less than this (a quarter of the 0.2 % the fast solver
/// promises).
pub const SKIP_ABS_BUDGET: f64 = 5e-4;
/// What each stretch of a run's own adds to that budget, as a share of the charge it takes: a
/// run whose rates wobble all along (a daily swing of the ambient seen through nested blocks)
/// may take each stretch within 0.1 % (common practice, no source: half the promised 0.2 %
/// less the fixed budget, spread evenly).
pub const SKIP_NOISE_REL: f64 = 1e-3;
/// A stretch is first tried with two nodes, the pass before it and its end pass: where their
/// falls in state of charge differ by less than this share, the stretch is taken along the line
/// through them (for rates that move one way, within half this share of the truth) and no middle
/// pass is run. A block whose rates bend once uses three nodes from then on. 1e-3 (was 1e-4)
/// keeps that within 0.05 %, a quarter of the promise, and took the handheld meter from 870 to
/// 654 operating points a run and the wearable band from 435 to 352.
pub const SKIP_LINEAR_REL: f64 = 1e-3;
/// [`SKIP_LINEAR_REL`] with a buffer capacitor (see [`SKIP_BUFFER_REL_ERR`]).
pub const SKIP_BUFFER_LINEAR_REL: f64 = 1e-4;
/// Fewest passes a run must be estimated to last (time so far plus state of charge over the
/// last pass's fall, in passes of the shortest repeat block nested in the skipping one, or, once
/// a skip found the end, of the block it falls in) for the fast solver to skip any: the end falls
/// on a pass, and with fewer passes one pass more or less is beyond 0.2 % of the runtime. The
/// estimate overstates runs that end on a voltage long before empty, hence the margin over 500.
pub const SKIP_MIN_RUN_PASSES: f64 = 2000.0;
/// Fewest of a block's longest stretches of plain steps between its nested repeat blocks that a
/// run must span for the block to skip: a voltage end falls on a cluster of the nested block's
/// passes, one per pass of the block, and one cluster more or less is then at most 0.2 % of the
/// runtime (common practice, no source: the promise itself, the plain steps being at most the
/// whole pass).
pub const SKIP_MIN_RUN_GAPS: f64 = 500.0;
/// Fewest passes worth skipping: two where they finish their block (a block of four passes,
/// four sessions a day, runs its first and last and skips the two between), else
/// [`SKIP_MIN_PASSES_OPEN`].
pub const SKIP_MIN_PASSES: u64 = 2;
/// Fewest passes worth skipping where more passes of the block follow (near the end of a run
/// two-pass stretches cost more simulated passes than they save).
pub const SKIP_MIN_PASSES_OPEN: f64 = 3.0;
/// A step whose pack voltage moves by less than this share takes its start point as its mean
/// point (the energy error is of this order).
pub const MEAN_POINT_REL: f64 = 1e-4;
/// Rounds of the mean point of a step with a buffer capacitor: its mean voltage from the
/// node's current, that current from the voltage (a contraction where the cells' resistance is
/// small beside the load's; three rounds take a settling capacitor to a part in 1e-6).
pub const MEAN_POINT_BUFFER_ITER: usize = 3;
/// Bisection steps locating the end inside a step (2^-60 of the step).
pub const END_BISECT_ITER: usize = 60;
/// The fast solver places the end inside a step to this share of the run's time, far below the
/// 0.2 % it promises (the reference bisects to [`END_BISECT_ITER`]): an end 794 days out found
/// to the last bit of a 0.15-s step took 60 operating points, a tenth of the run's.
pub const END_TIME_REL: f64 = 1e-10;
/// Stretches of state of charge in a trace (each keeps its first and its lowest point).
pub const TRACE_BUCKETS: usize = 800;
/// Work limit of a fast run, in operating points solved. A bundled example needs under 1e4, a
/// generated tree of 3,000 stages and 30,000 loads under 1e3; at 0.5-2 µs per point of a small
/// tree the limit ends a pathological run within seconds.
pub const WORK_LIMIT_FAST: u64 = 2_000_000;
/// Work limit of the chronological reference (it executes every pass: a year of 10 s cycles is
/// tens of millions of points).
pub const WORK_LIMIT_EXACT: u64 = 2_000_000_000;

/// Times in a row a step is cut to a quarter because the buffer's limiter took over within it
/// (six: a 4096th of the step).
pub const LIMITER_RETRIES: u32 = 6;

/// The most operating points the fast solver spends in the reference's steps once a block
/// whose passes hold nested blocks finds the end a few passes off, with a buffer across the
/// pack; then its own steps again (a capacitor behind its limiter near the knife edge can make
/// the reference's steps a thousand a second). A fifth of [`WORK_LIMIT_FAST`] (common practice,
/// no source).
pub const FINE_NESTED_BUDGET: u64 = WORK_LIMIT_FAST / 5;
