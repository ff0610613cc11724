//! The discharge: the profile executed from the start state, repeated until the product stops
//! (DESIGN section 6).
//!
//! Within a phase a step holds the pack current of the operating point at the step's mean state
//! (mid-step SoC, time-averaged polarization), so the polarization voltage has its exact
//! exponential update and the state of charge falls linearly; steps are cut small in state of
//! charge and in the polarization's move. After each step the operating point at its end state
//! is solved and the end conditions checked; when one holds, the first failing instant inside
//! the step is found by bisection.
//!
//! Two solvers share this machinery. The chronological reference (`exact`) executes every pass of
//! every repeat block. The fast solver executes a pass, then skips stretches of passes at rates
//! taken from passes simulated at the stretch's start, middle and end (start and end alone where
//! those two agree: the rates did not move), with the polarization at
//! its periodic value (one pass maps V_p to a V_p + b with a = e^(-T/tau), so the periodic value
//! is b / (1 - a)), and executes the pass after each stretch. A stretch is halved where those
//! rates bend too much and wherever a simulated pass stops the product, so the last passes before
//! the end are executed; a run of few passes is executed pass by pass, the polarization at the
//! reference's step sizes (`skip.rs`).

mod buffer;
mod end;
mod rails;
mod skip;

pub use rails::MAX_RAIL_BUFFERS;
use rails::Rails;

use std::borrow::Cow;
use std::cell::{Cell, RefCell};
use std::fmt;
use std::rc::Rc;

use super::check::{Violation, ViolationKind, violations_where};
use super::ledger::{Ledger, TracePoint, Tracer};
use super::numerics::{
    END_BISECT_ITER, END_TIME_REL, FINE_NESTED_BUDGET, LIMITER_RETRIES, MEAN_POINT_BUFFER_ITER,
    MEAN_POINT_REL, SKIP_ABS_BUDGET, SKIP_FIRST_DS, SKIP_MAX_DS, SKIP_MIN_PASSES,
    SKIP_MIN_PASSES_OPEN, STEP_MAX_DS_EXACT, STEP_MAX_DS_FAST, STEP_MAX_DVP_EXACT,
    STEP_MAX_DVP_FAST, TRACE_BUCKETS, TRACE_PROBES_PER_SKIP, WORK_LIMIT_EXACT, WORK_LIMIT_FAST,
};
use super::point::{
    OperatingPoint, PackState, RailBufferState, Solution, StageState, solve_point_state,
};
use super::sum2::Sum2;
use crate::hash::{FastMap, FastSet};
use crate::model::{Climate, Design, Step};

/// A year of 365.25 days, s.
pub const YEAR_S: f64 = 365.25 * 86_400.0;

/// The longest horizon a run accepts: 1,000 years (20 years is the default; no product's
/// battery outlives a millennium, and the bound keeps every pass count and time in range).
pub const MAX_HORIZON_S: f64 = 1000.0 * YEAR_S;

/// How to run a discharge.
#[derive(Debug, Clone, PartialEq)]
pub struct RunOptions {
    /// Ambient temperature, °C (its mean, with a climate).
    pub ambient_c: f64,
    /// How the ambient moves around `ambient_c` along the run (none: constant).
    pub climate: Option<Climate>,
    /// Stop after this long, s (default 20 years).
    pub horizon_s: f64,
    /// Use the chronological reference (every pass executed) instead of the fast solver.
    pub exact: bool,
    /// Keep a decimated trace.
    pub trace: bool,
    /// Most operating points the run may solve (every probe and bisection step counts); past it
    /// the run stops with [`RunError::WorkLimit`]. With the tree's size bounded by the input
    /// file's, this bounds the time of every run whatever the design.
    pub work_limit: u64,
}

impl RunOptions {
    /// Defaults for `design`: its ambient, a 20-year horizon, the fast solver, no trace.
    pub fn for_design(design: &Design) -> Self {
        Self {
            ambient_c: design.ambient_c,
            climate: design.climate.clone(),
            horizon_s: 20.0 * YEAR_S,
            exact: false,
            trace: false,
            work_limit: WORK_LIMIT_FAST,
        }
    }

    /// The chronological reference for `design` (every pass executed), with its larger work
    /// limit.
    pub fn reference(design: &Design) -> Self {
        Self {
            exact: true,
            work_limit: WORK_LIMIT_EXACT,
            ..Self::for_design(design)
        }
    }
}

/// Why a run gave no result.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum RunError {
    /// The options are out of range: a horizon that is not a positive duration up to
    /// [`MAX_HORIZON_S`], or an ambient that is not a finite temperature above absolute zero.
    Options {
        /// Which option.
        option: &'static str,
        /// Its value (SI).
        value: f64,
    },
    /// A quantity of the simulation became NaN or infinite: the design's values are beyond what
    /// the models can compute with (the checker bounds them; a library caller may not have).
    NonFinite {
        /// What became non-finite.
        what: &'static str,
        /// Time, s.
        t_s: f64,
        /// Mode then.
        mode: usize,
    },
    /// The run needed more work than [`RunOptions::work_limit`].
    WorkLimit {
        /// The limit, operating points.
        limit: u64,
        /// Simulated time reached, s.
        t_s: f64,
    },
}

impl fmt::Display for RunError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RunError::Options { option, value } => write!(
                f,
                "the {option} {value} is out of range: give a horizon above zero and at most 1000 \
                 years, and an ambient between -273.15 °C and 200 °C"
            ),
            RunError::NonFinite { what, t_s, .. } => write!(
                f,
                "the simulation stopped at t = {t_s:.6e} s because the {what} became infinite or \
                 not a number: some value of the design is beyond what the models can compute \
                 with; check the magnitudes of capacities, currents, voltages and resistances"
            ),
            RunError::WorkLimit { limit, t_s } => write!(
                f,
                "the simulation gave up at t = {t_s:.6e} s after {limit} solved operating points: \
                 the profile's steps are too short against the time the \
                 product runs; lengthen the shortest steps, put them in a `repeat` block, or \
                 shorten the horizon"
            ),
        }
    }
}

impl std::error::Error for RunError {}

/// Why the product stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EndReason {
    /// No operating point: the pack cannot give the demanded power.
    Collapse,
    /// Pack terminal voltage under load below the pack cutoff.
    Cutoff,
    /// An enabled stage's input below its minimum while something below it draws.
    Undervoltage,
    /// A drawing load's rail below its minimum supply.
    Rail,
    /// State of charge reached 0 %.
    Empty,
    /// Still running at the horizon.
    Horizon,
}

impl EndReason {
    /// The name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            EndReason::Collapse => "collapse",
            EndReason::Cutoff => "cutoff",
            EndReason::Undervoltage => "undervoltage",
            EndReason::Rail => "rail",
            EndReason::Empty => "empty",
            EndReason::Horizon => "horizon",
        }
    }
}

/// The moment the product stops.
#[derive(Debug, Clone, PartialEq)]
pub struct End {
    /// Why.
    pub reason: EndReason,
    /// When, s from the start.
    pub t_s: f64,
    /// State of charge then.
    pub soc: f64,
    /// Mode then.
    pub mode: Option<usize>,
    /// `battery`, the stage id or the load id.
    pub subject: String,
}

/// A stage's highest loss over the run and the mode it happened in.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Peak {
    /// Loss, W.
    pub loss_w: f64,
    /// Mode.
    pub mode: Option<usize>,
}

/// The result of a discharge run.
#[derive(Debug, Clone)]
pub struct RunResult {
    /// The end.
    pub end: End,
    /// Totals over the run.
    pub ledger: Ledger,
    /// Each stage's peak loss.
    pub peaks: Vec<Peak>,
    /// Violations, each at the time it first happened.
    pub violations: Vec<Violation>,
    /// Decimated trace (empty unless asked for).
    pub trace: Vec<TracePoint>,
    /// Ambient of the run, °C (its mean, with a climate).
    pub ambient_c: f64,
    /// The lowest and highest ambient the run saw, °C, when it follows a climate.
    pub ambient_range_c: Option<(f64, f64)>,
    /// Usable charge of the pack at that ambient, C.
    pub capacity_c: f64,
    /// Energy the pack holds at open-circuit voltage from the start SoC to empty, J.
    pub stored_energy_j: f64,
}

impl RunResult {
    /// The hottest ambient of the run, °C: the top of its range with a climate (a stage's
    /// junction temperature at its peak loss is judged against it, conservatively).
    pub fn hottest_c(&self) -> f64 {
        self.ambient_range_c.map_or(self.ambient_c, |(_, hi)| hi)
    }

    /// Runtime, s.
    pub fn runtime_s(&self) -> f64 {
        self.end.t_s
    }

    /// Stored energy over the loads' mean power in this run (`None` if the loads took nothing).
    pub fn ideal_runtime_s(&self) -> Option<f64> {
        let p = self.ledger.load_energy_total() / self.end.t_s;
        (p > 0.0 && self.end.t_s > 0.0).then(|| self.stored_energy_j / p)
    }

    /// Mean pack current.
    pub fn average_current_a(&self) -> f64 {
        if self.end.t_s > 0.0 {
            self.ledger.charge_c / self.end.t_s
        } else {
            0.0
        }
    }

    /// Mean pack terminal power.
    pub fn average_power_w(&self) -> f64 {
        if self.end.t_s > 0.0 {
            self.ledger.energy_j / self.end.t_s
        } else {
            0.0
        }
    }
}

/// Run the discharge of `design`.
///
/// # Examples
///
/// ```
/// use joulepath::solve::{RunOptions, EndReason, run};
/// let text = r#"
/// cells:
///   c: { capacity: 1 Ah, ocv: [[0 %, 3.6 V], [100 %, 4.0 V]], resistance: 0 ohm, cutoff: 3 V }
/// battery: { cell: c }
/// loads: [{ id: l, rail: battery, draw: { on: 100 mA } }]
/// modes: { run: { l: on } }
/// profile: [{ mode: run, for: 1 h }]
/// "#;
/// let d = joulepath::Design::from_text(text).unwrap();
/// let r = run(&d, &RunOptions::for_design(&d)).unwrap();
/// // Constant current: runtime = Q / I = 3600 C / 0.1 A.
/// assert_eq!(r.end.reason, EndReason::Empty);
/// assert!((r.runtime_s() - 36_000.0).abs() < 1e-6);
/// ```
///
/// # Errors
///
/// [`RunError`] when the options are out of range, a quantity of the simulation stops being
/// finite, or the run needs more work than `opt.work_limit`.
pub fn run(design: &Design, opt: &RunOptions) -> Result<RunResult, RunError> {
    run_observed(design, opt, None)
}

/// [`run`], calling `progress` now and then with the share of the work done (0..1: the charge
/// used so far, or the time run against the horizon), for a progress bar.
///
/// # Errors
///
/// As [`run`].
pub fn run_observed(
    design: &Design,
    opt: &RunOptions,
    progress: Option<&dyn Fn(f64)>,
) -> Result<RunResult, RunError> {
    run_inner(design, opt, progress).0
}

/// How much work a run did, for benchmarks and profiling: what [`run_counted`] returns beside
/// the result.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
#[non_exhaustive]
pub struct RunCounts {
    /// Operating points solved (the work the limit bounds; trace probes do not count).
    pub points: u64,
    /// Passes of repeat blocks executed, the speculative ones included.
    pub passes: u64,
    /// Of those, passes simulated only to measure a skipped stretch's rates.
    pub speculative_passes: u64,
    /// Skipped stretches taken.
    pub skips: u64,
    /// Held steps taken (every probe included).
    pub steps: u64,
}

/// [`run`], also returning the work it did ([`RunCounts`]).
///
/// # Errors
///
/// As [`run`].
pub fn run_counted(design: &Design, opt: &RunOptions) -> (Result<RunResult, RunError>, RunCounts) {
    run_inner(design, opt, None)
}

fn run_inner(
    design: &Design,
    opt: &RunOptions,
    progress: Option<&dyn Fn(f64)>,
) -> (Result<RunResult, RunError>, RunCounts) {
    let mut counts = RunCounts::default();
    let r = run_counting(design, opt, progress, &mut counts);
    (r, counts)
}

/// A run with progress reported to `progress`, its counts written to `counts`.
fn run_counting(
    design: &Design,
    opt: &RunOptions,
    progress: Option<&dyn Fn(f64)>,
    counts: &mut RunCounts,
) -> Result<RunResult, RunError> {
    check_options(opt)?;
    let mut ctx = Ctx::new(design, opt);
    ctx.progress = progress;
    let mut sim = Sim::new(&ctx);
    let stopped = run_profile(&mut sim, design, opt);
    *counts = RunCounts {
        points: ctx.work.get(),
        ..ctx.counts.get()
    };
    if let Some(e) = ctx.fault.borrow_mut().take() {
        return Err(e);
    }
    if !stopped {
        // Every pass ran and the product still runs: only possible when the profile's pass
        // has no duration left, which the checker forbids.
        return Err(RunError::NonFinite {
            what: "profile duration",
            t_s: sim.t.value(),
            mode: 0,
        });
    }
    Ok(run_result(sim, &ctx, design, opt))
}

/// Refuse run options out of range: the horizon, and the ambient with the climate's swing.
fn check_options(opt: &RunOptions) -> Result<(), RunError> {
    if !(opt.horizon_s > 0.0 && opt.horizon_s <= MAX_HORIZON_S) {
        return Err(RunError::Options {
            option: "horizon",
            value: opt.horizon_s,
        });
    }
    if !(opt.ambient_c >= -273.15 && opt.ambient_c <= 200.0) {
        return Err(RunError::Options {
            option: "ambient",
            value: opt.ambient_c,
        });
    }
    // A climate moved (by `--set` or a spread) must stay physical too.
    if let Some(c) = &opt.climate {
        let (lo, hi) = c.range(f64::INFINITY);
        for value in [opt.ambient_c + lo, opt.ambient_c + hi] {
            if !(-273.15..=200.0).contains(&value) {
                return Err(RunError::Options {
                    option: "ambient",
                    value,
                });
            }
        }
    }
    Ok(())
}

/// Run `design`'s profile, repeated until the product stops; true if it stopped.
fn run_profile(sim: &mut Sim, design: &Design, opt: &RunOptions) -> bool {
    let pass: f64 = design.profile.iter().map(Step::duration).sum();
    // With a daily swing of the ambient, a profile far shorter than a day runs in blocks of
    // about a day: the rates of a whole day are smooth from one day to the next, those of a
    // single pass swing with the time of day (no stretch could skip across them).
    let per_day = (86_400.0 / pass).round();
    let daily = opt.climate.as_ref().is_some_and(|c| c.daily_range_c > 0.0) && per_day >= 2.0;
    let days = [Step::Repeat {
        steps: if daily {
            design.profile.clone()
        } else {
            Vec::new()
        },
        until: crate::model::RepeatUntil::Times(per_day.max(1.0) as u64),
    }];
    if daily {
        sim.passes(&days, per_day * pass, f64::INFINITY)
    } else {
        sim.passes(&design.profile, pass, f64::INFINITY)
    }
}

/// The result of a run that stopped: its end (the horizon where none was recorded), totals,
/// peaks, violations and trace, the ambient and the pack's stored energy.
fn run_result(sim: Sim, ctx: &Ctx, design: &Design, opt: &RunOptions) -> RunResult {
    let end = sim.end.clone().unwrap_or(End {
        reason: EndReason::Horizon,
        t_s: sim.t.value(),
        soc: sim.soc(),
        mode: None,
        subject: "battery".into(),
    });
    let t_end = end.t_s;
    let pack = &design.pack;
    let s0 = pack.start_soc;
    let stored = ctx.q * f64::from(pack.series) * pack.cell.ocv.mean(0.0, s0) * s0;
    RunResult {
        end,
        ledger: sim.ledger,
        peaks: sim.peaks,
        violations: Rc::unwrap_or_clone(sim.violations),
        trace: sim.tracer.map(|t| t.points()).unwrap_or_default(),
        ambient_c: opt.ambient_c,
        ambient_range_c: opt.climate.as_ref().map(|c| {
            let (lo, hi) = c.range(t_end);
            (opt.ambient_c + lo, opt.ambient_c + hi)
        }),
        capacity_c: ctx.q,
        stored_energy_j: stored,
    }
}

/// What does not change during a run.
struct Ctx<'a> {
    d: &'a Design,
    progress: Option<&'a dyn Fn(f64)>,
    opt: RunOptions,
    q: f64,
    pol: Option<(f64, f64)>,
    /// Time constant of the filter through which the rate law sees the pack current, s; `None`
    /// where the law sees the current of the instant (a window of zero, or no rate effect).
    window: Option<f64>,
    i_self: f64,
    /// Whether a stage has a buffer capacitor on its rail (all the rails' work is skipped
    /// without one).
    rails: bool,
    cutoff: f64,
    /// Whether steps are as fine as the reference's: always in the reference, and in the fast
    /// solver once the end is found within a step (the instant is then found as there).
    fine: Cell<bool>,
    /// With a buffer across the pack, the work count at which the planning of a block whose
    /// passes hold nested blocks found the end a few passes off and took the reference's steps
    /// (`None`: it has not), and whether that has used up its budget
    /// ([`FINE_NESTED_BUDGET`]): it then gives the fast solver's steps back for good.
    fine_nested: Cell<Option<u64>>,
    fine_nested_spent: Cell<bool>,
    /// Whether the polarization is followed in the reference's steps while the state of charge
    /// keeps the fast solver's: once the run is found to last few passes, executed pass by pass
    /// (a polarization time constant shorter than a pulse near the power limit then weighs in
    /// the runtime, where the fall in state of charge per step does not: over 3,600 random
    /// designs, the largest gap to the reference went from 1.23e-3 to 1.35e-3 and the
    /// headlamp example took 7 times fewer steps).
    fine_pol: Cell<bool>,
    /// [mode][stage]: whether something below the stage draws in that mode.
    draws_below: Vec<Vec<bool>>,
    /// Each load's maximum supply.
    v_max: Vec<Option<f64>>,
    /// Operating points solved so far, shared by every probe of the run.
    work: Cell<u64>,
    /// Why the run cannot go on; once set, every step stops at once.
    fault: RefCell<Option<RunError>>,
    /// Passes, skips and steps done so far (points are `work`).
    counts: Cell<RunCounts>,
    /// Repeat blocks (by the address of their steps) whose last stretch bent, so that their
    /// next one takes three nodes at once (`Sim::skip`).
    bent: RefCell<FastSet<usize>>,
    /// Repeat blocks (by the address of their steps) and the fall in state of charge their next
    /// stretch may cover: it grows while stretches are taken whole and shrinks to what was taken
    /// when one is halved (`Sim::passes`).
    reach: RefCell<FastMap<usize, f64>>,
    /// The last stretch taken: its curvature term as a share of what it may be (0 for a
    /// stretch taken along a line), for [`Ctx::set_reach`].
    fit: Cell<f64>,
    /// What is left of the run's budget of state of charge that stretches whose rates do not
    /// lie on a parabola may be taken with ([`SKIP_ABS_BUDGET`] of the starting charge).
    slack: Cell<f64>,
}

impl<'a> Ctx<'a> {
    fn new(d: &'a Design, opt: &RunOptions) -> Self {
        let draws_below = d
            .modes
            .iter()
            .map(|m| {
                let mut below = vec![false; d.stages.len()];
                for &k in d.tree.down_order().iter().rev() {
                    let rail = k + 1;
                    let loads = d.tree.loads_on(rail).iter().any(|&l| {
                        m.load_states[l].is_some_and(|s| d.loads[l].states[s].1.is_drawing())
                    });
                    let stages = d.tree.stages_on(rail).iter().any(|&j| {
                        below[j]
                            || (m.stage_on[j] && d.stages[j].quiescent > 0.0)
                            || (!m.stage_on[j] && d.stages[j].shutdown > 0.0)
                    });
                    below[k] = loads || stages;
                }
                below
            })
            .collect();
        Self {
            d,
            progress: None,
            opt: opt.clone(),
            q: d.pack.capacity_c(opt.ambient_c),
            pol: d.pack.polarization(opt.ambient_c),
            window: (d.pack.cell.peukert > 1.0 && d.pack.cell.rate_window_s > 0.0)
                .then_some(d.pack.cell.rate_window_s),
            i_self: d.pack.self_discharge_a(opt.ambient_c),
            rails: d.has_rail_buffers(),
            cutoff: d.pack.cutoff_v(),
            fine: Cell::new(opt.exact),
            fine_nested: Cell::new(None),
            fine_nested_spent: Cell::new(false),
            fine_pol: Cell::new(false),
            draws_below,
            v_max: d.loads.iter().map(|l| l.v_max).collect(),
            work: Cell::new(0),
            fault: RefCell::new(None),
            counts: Cell::new(RunCounts::default()),
            bent: RefCell::new(FastSet::default()),
            reach: RefCell::new(FastMap::default()),
            fit: Cell::new(0.0),
            slack: Cell::new(SKIP_ABS_BUDGET * d.pack.start_soc),
        }
    }

    /// Largest fall in state of charge within one held step.
    fn max_ds(&self) -> f64 {
        if self.fine.get() {
            STEP_MAX_DS_EXACT
        } else {
            STEP_MAX_DS_FAST
        }
    }

    /// Largest move of the polarization voltage within one step, as a share of the pack voltage.
    fn max_dvp(&self) -> f64 {
        if self.fine.get() || self.fine_pol.get() {
            STEP_MAX_DVP_EXACT
        } else {
            STEP_MAX_DVP_FAST
        }
    }

    /// Record why the run stops without a result (the first reason wins).
    fn fail(&self, e: RunError) {
        let mut f = self.fault.borrow_mut();
        if f.is_none() {
            *f = Some(e);
        }
    }

    fn failed(&self) -> bool {
        self.fault.borrow().is_some()
    }

    /// Whether the next stretch of `block` tries two nodes first.
    fn linear_hint(&self, block: usize) -> bool {
        !self.bent.borrow().contains(&block)
    }

    /// The fall in state of charge the next stretch of `block` may cover.
    fn reach(&self, block: usize) -> f64 {
        self.reach
            .borrow()
            .get(&block)
            .copied()
            .unwrap_or(SKIP_FIRST_DS)
    }

    /// After a stretch of `block` planned to cover `planned` of charge took `taken`: the next
    /// may cover more (up to [`SKIP_MAX_DS`]) if it was taken whole, else what was taken.
    fn set_reach(&self, block: usize, planned: f64, taken: f64) {
        let next = if taken >= planned {
            // Twice as far after a straight stretch; after a curved one, as far as an error
            // growing like the stretch's length allows, at most twice.
            let fit = self.fit.get();
            let grow = if fit > 0.0 {
                (0.8 / fit).clamp(1.0, 2.0)
            } else {
                2.0
            };
            (grow * planned.max(self.reach(block))).min(SKIP_MAX_DS)
        } else {
            taken.clamp(1e-9, SKIP_MAX_DS)
        };
        self.reach.borrow_mut().insert(block, next);
    }

    /// After `block` ran a pass exactly that fell by `ds`: where its reach holds less than the
    /// least stretch, it grows by that pass, so that a block cut to almost nothing by a halving
    /// (at a jump in the rates) tries a stretch again after a few passes rather than never.
    fn grow_reach(&self, block: usize, ds: f64) {
        if ds > 0.0 && self.reach(block) < SKIP_MIN_PASSES_OPEN * ds {
            let next = (self.reach(block) + ds).min(SKIP_MAX_DS);
            self.reach.borrow_mut().insert(block, next);
        }
    }

    /// Record whether the last stretch of `block` was straight.
    fn set_linear_hint(&self, block: usize, linear: bool) {
        let mut bent = self.bent.borrow_mut();
        if linear {
            bent.remove(&block);
        } else {
            bent.insert(block);
        }
    }

    /// Change the counts of work done.
    fn count(&self, f: impl FnOnce(&mut RunCounts)) {
        let mut c = self.counts.get();
        f(&mut c);
        self.counts.set(c);
    }
}

/// The state and totals of a run in progress.
#[derive(Clone)]
struct Sim<'a> {
    c: &'a Ctx<'a>,
    /// Time and state of charge, each a compensated sum so that steps of any length add up.
    t: Sum2,
    s: Sum2,
    vp: f64,
    /// The pack current as the rate law sees it: filtered over the cell's rate window, from
    /// the current of the run's first step (NaN before it; unused without a window).
    i_seen: f64,
    /// The current of the run's first step, where the filter started (NaN before it): the
    /// first pass's lag starts there.
    seen_first: f64,
    /// The buffer capacitor's voltage (0 without a buffer).
    vb: f64,
    /// The log of how much a change of the capacitor's voltage at the start of the current pass
    /// survives to now, d vb / d vb(start): -t / (C (R0 + Rc)) summed over the time shared with
    /// the cells, nothing over the limiter's straight lines (the flow's own sensitivity, f(x1) /
    /// f(x0) of a one-dimensional flow whose speed is continuous across the regions).
    vb_ln: f64,
    /// The voltages of the buffer capacitors on stages' rails.
    rx: Rails,
    ledger: Ledger,
    peaks: Vec<Peak>,
    /// Violations so far and the (kind, subject) pairs among them, shared between a run and its
    /// probes until one adds to them (a probe is a cheap copy).
    violations: Rc<Vec<Violation>>,
    seen: Rc<FastMap<ViolationKind, FastSet<String>>>,
    tracer: Option<Tracer>,
    /// A trace probe: it only gives points to the trace, does not probe again inside its skips
    /// and its solves do not count toward the work limit (they are at most a fixed multiple of
    /// the run's own).
    trace_probe: bool,
    /// A pass simulated to measure a skipped stretch's rates: an end it meets only tells the
    /// skip where the end lies.
    speculative: bool,
    end: Option<End>,
    /// Pass length of the innermost repeat block being run (the profile's, at the top), and of
    /// the one the product stopped in: the end falls on one of its passes.
    block_pass: f64,
    end_pass: f64,
    /// The least voltage margin to an end condition ([`Sim::voltage_margin`]) at the points of
    /// the current pass so far, the one it stopped at included (infinite before the first).
    margin: f64,
    /// The pack's open-circuit voltage and ohmic resistance at the present state, read by
    /// [`Sim::pack_shift`] several times a step: (state of charge, ambient, OCV, R0, the factor of
    /// the resistance table at the ambient).
    here: std::cell::Cell<(f64, f64, f64, f64, f64)>,
}

/// The cells' side of a step held at its mean point: the cells' current and the rate of
/// discharge it gives.
#[derive(Clone, Copy)]
struct Held {
    i: f64,
    rate: f64,
}

/// The state some time into a step: state of charge, polarization voltage, the buffer
/// capacitor's voltage and the log of the decay its path had ([`Sim::vb_ln`]).
#[derive(Clone, Copy)]
struct StepEnd {
    s: f64,
    vp: f64,
    x: f64,
    ln: f64,
    /// The buffer capacitors on stages' rails.
    rx: Rails,
}

/// What one pass of a block changed.
#[derive(Clone)]
struct Delta {
    ds: f64,
    /// Polarization decay over one pass, e^(-T / tau), and its periodic value: with the same
    /// currents every pass, V_p(end) = a V_p(start) + b, so V* = b / (1 - a).
    decay: f64,
    vp_star: f64,
    /// -T / tau (0 without polarization) and the pass's offset b, for the polarization after k
    /// passes without cancellation when tau is far longer than a pass.
    ln_decay: f64,
    offset: f64,
    /// The same two for the current the rate law sees (`Sim::i_seen`).
    seen_ln_decay: f64,
    seen_offset: f64,
    /// The current the rate law saw at the start of the pass (NaN before the first step).
    seen_start: f64,
    /// The same two for the buffer capacitor's voltage (`Sim::vb`) less the cells'
    /// open-circuit voltage.
    buf_ln_decay: f64,
    buf_offset: f64,
    /// The buffer's periodic voltage at the start of a pass, b / (1 - a), and its voltage at
    /// the start of this pass.
    vb_star: f64,
    vb_start: f64,
    /// The pass's least voltage margin to an end condition, V ([`Sim::margin`]).
    margin: f64,
    /// Whether the buffer capacitors on stages' rails ended the pass where they started it
    /// (recharged): only then are the passes alike and a stretch of them may be skipped.
    rails_return: bool,
    ledger: Ledger,
}

impl Delta {
    /// The rate law's filtered current at the start of a pass with the same currents every
    /// pass, b / (1 - a); NaN without a window.
    fn seen_star(&self) -> f64 {
        self.seen_offset / -self.seen_ln_decay.exp_m1()
    }

    /// The buffer capacitor's periodic voltage less the cells' open-circuit voltage, b / (1 - a)
    /// in the lag's coordinate; `None` without a buffer or where it settles over far more
    /// passes than a stretch (a of 1 to within 1e-9).
    fn vb_u_star(&self) -> Option<f64> {
        let l = self.buf_ln_decay;
        (l < -1e-9 && self.buf_offset.is_finite()).then(|| self.buf_offset / -l.exp_m1())
    }

    /// Whether every lagging state (polarization, the rate law's filtered current, a buffer
    /// capacitor) settles within a pass: the state a pass ends in then does not carry the
    /// offsets of the passes before it.
    fn lags_settle(&self) -> bool {
        self.decay < 0.5 && self.seen_ln_decay < -std::f64::consts::LN_2 && self.buf_ln_decay < -5.0
    }

    /// [`Delta::vb_u_star`] where the capacitor is a state of its own across passes: it keeps
    /// over e^-5 of a change through a pass. One that settles within a pass follows the
    /// cells (their polarization included) and its periodic voltage is theirs: the stretch's
    /// rates and the pass's end already hold it.
    fn vb_u_star_slow(&self) -> Option<f64> {
        if self.buf_ln_decay > -5.0 {
            self.vb_u_star()
        } else {
            None
        }
    }

    /// The weighted sum of three passes' changes (weights summing to 1); polarization as in the
    /// last (the end of a stretch, where the state lands).
    fn blend(parts: [(f64, &Delta); 3]) -> Delta {
        let mut ledger = parts[1].1.ledger.clone();
        ledger.add_scaled(&parts[1].1.ledger, parts[1].0 - 1.0);
        ledger.add_scaled(&parts[0].1.ledger, parts[0].0);
        ledger.add_scaled(&parts[2].1.ledger, parts[2].0);
        Delta {
            ds: parts.iter().map(|(w, d)| w * d.ds).sum(),
            decay: parts[2].1.decay,
            vp_star: parts[2].1.vp_star,
            ln_decay: parts[2].1.ln_decay,
            offset: parts[2].1.offset,
            seen_ln_decay: parts[2].1.seen_ln_decay,
            seen_offset: parts[2].1.seen_offset,
            seen_start: parts[2].1.seen_start,
            buf_ln_decay: parts[2].1.buf_ln_decay,
            buf_offset: parts[2].1.buf_offset,
            vb_star: parts[2].1.vb_star,
            vb_start: parts[2].1.vb_start,
            margin: parts[2].1.margin,
            rails_return: parts.iter().all(|(_, d)| d.rails_return),
            ledger,
        }
    }

    /// The changes of a pass of length `pass` that started at (`s0`, `vp0`, `seen0`: the
    /// current the rate law saw, `vb0`: the buffer's voltage, `vb_ln`: the log of its decay
    /// over the pass) and ended in `after`, with
    /// `ledger` the pass's own totals.
    fn of(
        s0: Sum2,
        (vp0, seen0, vb0, vb_ln): (f64, f64, f64, f64),
        after: &Sim,
        pass: f64,
        (ledger, rails_return): (Ledger, bool),
    ) -> Self {
        // The buffer's decay over the pass is the one its path had (`Sim::vb_ln`): e^(-T / (C
        // (R + Rc))) while shared with the cells throughout, 1 along a limiter's straight lines.
        let buf_ln_decay = if after.c.d.pack.buffer.is_some() {
            vb_ln
        } else {
            f64::NEG_INFINITY
        };
        // The lag is taken on the capacitor's voltage less the cells' open-circuit voltage,
        // u = x - OCV(s): u1 = a u0 + b_u with b_u = x1 - a x0 + a OCV0 - OCV1. A stretch then
        // follows the open-circuit voltage down, lagging behind its fall as the pass did.
        let (ocv0, ocv1) = if after.c.d.pack.buffer.is_some() {
            let pack = &after.c.d.pack;
            (
                pack.ocv(s0.value().max(0.0)),
                pack.ocv(after.soc().max(0.0)),
            )
        } else {
            (0.0, 0.0)
        };
        let a = buf_ln_decay.exp();
        let buf_offset = after.vb - a * vb0 + a * ocv0 - ocv1;
        let vb_star = if buf_ln_decay < -1e-9 {
            ocv0 + buf_offset / -buf_ln_decay.exp_m1()
        } else {
            after.vb
        };
        let seen_ln_decay = after.c.window.map_or(f64::NEG_INFINITY, |tau| -pass / tau);
        // Before the first step the filter had no value: it starts at the first step's current
        // (`Sim::seen_first`).
        let seen_start = seen0;
        let seen0 = match (seen0.is_nan(), after.seen_first.is_nan()) {
            (false, _) => seen0,
            (true, false) => after.seen_first,
            (true, true) => after.i_seen,
        };
        let seen_offset = after.i_seen - seen_ln_decay.exp() * seen0;
        let ln_decay = after
            .c
            .pol
            .map_or(f64::NEG_INFINITY, |(_, tau)| -pass / tau);
        let decay = ln_decay.exp();
        let b = after.vp - decay * vp0;
        Self {
            ds: s0.minus(after.s),
            decay,
            ln_decay,
            offset: b,
            seen_ln_decay,
            seen_offset,
            seen_start,
            buf_ln_decay,
            buf_offset,
            vb_star,
            vb_start: vb0,
            vp_star: if decay < 1.0 {
                b / (1.0 - decay)
            } else {
                after.vp
            },
            margin: after.margin,
            rails_return,
            ledger,
        }
    }
}

impl<'a> Sim<'a> {
    fn new(c: &'a Ctx<'a>) -> Self {
        let d = c.d;
        Self {
            c,
            t: Sum2::new(0.0),
            s: Sum2::new(d.pack.start_soc),
            vp: 0.0,
            i_seen: f64::NAN,
            seen_first: f64::NAN,
            // The capacitor starts charged to the cells' open-circuit voltage.
            vb: if d.pack.buffer.is_some() {
                d.pack.ocv(d.pack.start_soc)
            } else {
                0.0
            },
            vb_ln: 0.0,
            rx: Rails::charged(d),
            ledger: Ledger::new(d.stages.len(), d.loads.len()),
            peaks: vec![
                Peak {
                    loss_w: 0.0,
                    mode: None
                };
                d.stages.len()
            ],
            violations: Rc::default(),
            seen: Rc::default(),
            tracer: c
                .opt
                .trace
                .then(|| Tracer::new(d.pack.start_soc, TRACE_BUCKETS)),
            trace_probe: false,
            speculative: false,
            end: None,
            block_pass: f64::INFINITY,
            end_pass: f64::INFINITY,
            margin: f64::INFINITY,
            here: std::cell::Cell::new((f64::NAN, f64::NAN, 0.0, 0.0, 0.0)),
        }
    }

    /// The ambient now, °C.
    fn ambient(&self) -> f64 {
        match &self.c.opt.climate {
            Some(c) => self.c.opt.ambient_c + c.deviation(self.now()),
            None => self.c.opt.ambient_c,
        }
    }

    /// Usable charge of the pack at the ambient now, C.
    fn q(&self) -> f64 {
        if self.c.opt.climate.is_some() {
            self.c.d.pack.capacity_c(self.ambient())
        } else {
            self.c.q
        }
    }

    /// Self-discharge current at the ambient now, A.
    fn i_self(&self) -> f64 {
        if self.c.opt.climate.is_some() {
            self.c.d.pack.self_discharge_a(self.ambient())
        } else {
            self.c.i_self
        }
    }

    /// The polarization branch (resistance, time constant) at the ambient now.
    fn pol(&self) -> Option<(f64, f64)> {
        if self.c.opt.climate.is_some() {
            self.c.d.pack.polarization(self.ambient())
        } else {
            self.c.pol
        }
    }

    /// State of charge now.
    fn soc(&self) -> f64 {
        self.s.value()
    }

    /// Time now, s.
    fn now(&self) -> f64 {
        self.t.value()
    }

    /// Run one pass of `steps` (`pass` seconds) with its own ledger, so that its totals are
    /// exact however small against the run's; `None` if the product stopped in it.
    fn run_pass(&mut self, steps: &[Step], pass: f64) -> Option<Delta> {
        let (s0, vp0, seen0, vb0) = (self.s, self.vp, self.i_seen, self.vb);
        let rx0 = self.rx;
        let ln_outer = std::mem::replace(&mut self.vb_ln, 0.0);
        let margin_outer = std::mem::replace(&mut self.margin, f64::INFINITY);
        let speculative = self.speculative;
        self.c.count(|c| {
            c.passes += 1;
            c.speculative_passes += u64::from(speculative);
        });
        let fresh = Ledger::new(self.c.d.stages.len(), self.c.d.loads.len());
        let total = std::mem::replace(&mut self.ledger, fresh);
        let stopped = self.steps(steps, pass);
        let local = std::mem::replace(&mut self.ledger, total);
        self.ledger.add_scaled(&local, 1.0);
        let ln = self.vb_ln;
        self.vb_ln = ln_outer + ln;
        let back = !self.c.rails || rx0.returned(&self.rx, self.c.d);
        let delta =
            (!stopped).then(|| Delta::of(s0, (vp0, seen0, vb0, ln), self, pass, (local, back)));
        self.margin = self.margin.min(margin_outer);
        delta
    }

    fn solve(&self, mode: usize, s: f64, vp: f64, vb: f64) -> Solution {
        self.solve_rails(mode, s, vp, vb, &self.rx)
    }

    /// [`Sim::solve`] with the rail capacitors at `rx`.
    #[inline]
    fn solve_rails(&self, mode: usize, s: f64, vp: f64, vb: f64, rx: &Rails) -> Solution {
        let c = self.c;
        if !self.trace_probe {
            c.work.set(c.work.get().saturating_add(1));
        }
        let at = PackState {
            soc: s.max(0.0),
            v_pol: Some(vp),
            ambient_c: self.ambient(),
        };
        let vb = self.c.d.pack.buffer.map(|_| vb);
        if !c.rails {
            return solve_point_state(self.c.d, mode, at, vb, &[]);
        }
        let (pairs, n) = rx.pairs();
        solve_point_state(self.c.d, mode, at, vb, &pairs[..n])
    }

    /// Rate of fall of the SoC, per second, at pack current `i` held for `dt` (Peukert-effective
    /// current plus self-discharge, over the usable charge). The rate law sees the current
    /// through the cell's rate window: its mean over the step, `i` itself without a window.
    fn rate(&self, i: f64, dt: f64) -> f64 {
        let seen = match self.c.window {
            Some(tau) if !self.i_seen.is_nan() => {
                if dt > 0.0 {
                    // The time average over the step of a first-order lag toward i.
                    i + (self.i_seen - i) * (tau / dt) * -(-dt / tau).exp_m1()
                } else {
                    self.i_seen
                }
            }
            _ => i,
        };
        (self.c.d.pack.peukert_current_seen(i, seen) + self.i_self()) / self.q()
    }

    /// The current the rate law sees after holding `i` for `dt`.
    fn seen_after(&self, i: f64, dt: f64) -> f64 {
        match self.c.window {
            Some(tau) => {
                let from = if self.i_seen.is_nan() { i } else { self.i_seen };
                i + (from - i) * (-dt / tau).exp()
            }
            None => self.i_seen,
        }
    }

    /// State after holding current `i` (at SoC rate `rate` per second) for `dt`.
    fn evolve(&self, i: f64, rate: f64, dt: f64) -> (f64, f64) {
        let s = self.soc() - rate * dt;
        let vp = match self.pol() {
            Some((r1, tau)) => {
                let e = (-dt / tau).exp();
                self.vp * e + i * r1 * (1.0 - e)
            }
            None => 0.0,
        };
        (s, vp)
    }

    /// The mean state over a step of `dt` at current `i`: SoC at mid-step and the exact time
    /// average of the exponential polarization voltage.
    fn mean_state(&self, i: f64, rate: f64, dt: f64) -> (f64, f64) {
        let s = self.soc() - 0.5 * rate * dt;
        let vp = match self.pol() {
            Some((r1, tau)) if dt > 0.0 => {
                let inf = i * r1;
                inf + (self.vp - inf) * (tau / dt) * -(-dt / tau).exp_m1()
            }
            _ => self.vp,
        };
        (s, vp)
    }

    /// The operating point at the mean state of a step of `dt` starting at `start`: the step's
    /// current and its totals come from it, which makes the stepping second-order (midpoint)
    /// accurate. Where the mean state already meets an end condition (the step crosses it), the
    /// start point is used, so that the crossing is found inside the step.
    fn mean_point<'p>(
        &self,
        mode: usize,
        start: &'p OperatingPoint,
        rate: f64,
        dt: f64,
    ) -> Cow<'p, OperatingPoint> {
        let (sm, mut vm) = self.mean_state(start.pack.current, rate, dt);
        let (xm, v_cap) = self.cap_mean(start, dt);
        if let Some(v) = v_cap {
            vm = v;
        }
        // A step so short that the pack barely moves: the start point is the mean point (the
        // reference always solves the mean state).
        let rel = if self.c.fine.get() {
            0.0
        } else {
            MEAN_POINT_REL
        };
        let rails_still = !self.c.rails
            || start
                .rail_buffers
                .iter()
                .all(|b| b.state == RailBufferState::Settled);
        if rails_still && self.pack_shift(start, sm, vm, xm) <= rel * start.pack.voltage.abs() {
            return Cow::Borrowed(start);
        }
        let mut rxm = self.rails_at(start, dt, true);
        let mut sol = self.solve_rails(mode, sm, vm, xm, &rxm);
        // A rail capacitor settling toward a balance within the step: its mean from the
        // exponential through the two points (see [`Sim::rails_stiff_mean`]).
        if let (true, Solution::Point(p)) = (self.c.rails, &sol) {
            if let Some(rx) = self.rails_stiff_mean(start, p, &rxm, dt) {
                rxm = rx;
                sol = self.solve_rails(mode, sm, vm, xm, &rxm);
            }
        }
        // With a buffer capacitor, its mean voltage follows from the node's current and that
        // current from the voltage: the start's current is the first guess, then the mean
        // point's own (a capacitor settling within the step sits where the node draws what
        // the cells give at the step's own current, not the start's).
        if self.c.d.pack.buffer.is_some() {
            let mut x = xm;
            for _ in 0..MEAN_POINT_BUFFER_ITER {
                let Solution::Point(p) = &sol else { break };
                let (next, v) = self.cap_mean(p, dt);
                if !next.is_finite() || (next - x).abs() <= 1e-9 * x.abs() {
                    break;
                }
                x = next;
                let v = v.unwrap_or(vm);
                sol = self.solve_rails(mode, sm, v, x, &rxm);
            }
        }
        match sol {
            // With a buffer the start point's current is the capacitor's transient, no stand-in
            // for the step: the mean point holds even where it meets an end condition (the
            // crossing is then found inside the step from its settled path).
            Solution::Point(p)
                if self.condition(&p).is_none() || self.c.d.pack.buffer.is_some() =>
            {
                Cow::Owned(p)
            }
            _ => Cow::Borrowed(start),
        }
    }

    fn stop(&mut self, reason: EndReason, mode: Option<usize>, subject: String) {
        self.end_pass = self.block_pass;
        self.end = Some(End {
            reason,
            t_s: self.now(),
            soc: self.soc().max(0.0),
            mode,
            subject,
        });
    }

    fn offer_trace(&mut self, p: &OperatingPoint, t: f64, s: f64) {
        if let Some(tr) = &mut self.tracer {
            tr.offer(TracePoint {
                t_s: t,
                soc: s,
                ocv: p.pack.ocv,
                voltage: p.pack.voltage,
                current: p.pack.current,
            });
        }
    }

    /// Peaks, violations and the trace at an operating point the run passes through.
    fn observe(&mut self, p: &OperatingPoint) {
        for (peak, sp) in self.peaks.iter_mut().zip(&p.stages) {
            if sp.loss > peak.loss_w {
                *peak = Peak {
                    loss_w: sp.loss,
                    mode: Some(p.mode),
                };
            }
        }
        let seen = &self.seen;
        let found = violations_where(self.c.d, p, self.ambient(), &|k, s| {
            !seen.get(&k).is_some_and(|subjects| subjects.contains(s))
        });
        for mut v in found {
            v.t_s = Some(self.now());
            let subjects = Rc::make_mut(&mut self.seen).entry(v.kind).or_default();
            if subjects.insert(v.subject.clone()) {
                Rc::make_mut(&mut self.violations).push(v);
            }
        }
        self.offer_trace(p, self.now(), self.soc());
    }

    /// The longest step from `p` over which the polarization voltage moves by at most
    /// `max_dvp` of the pack voltage: with V_p relaxing toward I R1, the change over dt is
    /// |I R1 - V_p| (1 - e^(-dt / tau)). A strong, fast polarization branch under a pulse is then
    /// followed in several steps rather than one held current.
    ///
    /// A time constant far below the step (`dt` over 20 tau) is not followed: the transient is a
    /// small part of the step, and the step's mean polarization already averages it.
    fn polarization_step(&self, p: &OperatingPoint, dt: f64) -> f64 {
        let Some((r1, tau)) = self.pol() else {
            return f64::INFINITY;
        };
        if dt > 20.0 * tau {
            return f64::INFINITY;
        }
        let gap = (p.pack.current * r1 - self.vp).abs();
        let allowed = self.c.max_dvp() * p.pack.voltage.abs();
        if gap <= allowed || !(gap.is_finite() && allowed > 0.0) {
            return f64::INFINITY;
        }
        -tau * (-allowed / gap).ln_1p()
    }

    /// Whether the run must stop without a result: a fault already recorded, the work limit
    /// reached, or a non-finite state. Records the reason.
    fn halted(&self, mode: usize) -> bool {
        let c = self.c;
        if c.failed() {
            return true;
        }
        if c.work.get() > c.opt.work_limit {
            c.fail(RunError::WorkLimit {
                limit: c.opt.work_limit,
                t_s: self.now(),
            });
            return true;
        }
        let what = if !self.soc().is_finite() {
            "state of charge"
        } else if !self.vp.is_finite() {
            "polarization voltage"
        } else if !self.vb.is_finite() || !self.rx.finite() {
            "buffer capacitor voltage"
        } else if !self.now().is_finite() {
            "time"
        } else {
            return false;
        };
        c.fail(RunError::NonFinite {
            what,
            t_s: self.now(),
            mode,
        });
        true
    }

    /// Refuse a non-finite pack current or rate of discharge (true: the run halts).
    fn refuse_non_finite(&self, mode: usize, i: f64, rate: f64) -> bool {
        if i.is_finite() && rate.is_finite() {
            return false;
        }
        self.c.fail(RunError::NonFinite {
            what: if i.is_finite() {
                "rate of discharge"
            } else {
                "pack current"
            },
            t_s: self.now(),
            mode,
        });
        true
    }

    /// Hold `mode` for `dur` seconds; true if the product stopped.
    fn hold(&mut self, mode: usize, dur: f64) -> bool {
        let mut left = dur;
        let mut next: Option<Solution> = None;
        // A shorter step after one whose end found the buffer's limiter taking over, and how
        // many times in a row ([`Sim::limiter_engages`]).
        let (mut cap_dt, mut cap_retries) = (f64::INFINITY, 0u32);
        while left > 1e-12 * dur {
            let Some((p, margin)) = self.step_start(mode, next.take()) else {
                return true;
            };
            let rate0 = self.rate(p.pack.current, 0.0);
            if self.refuse_non_finite(mode, p.pack.current, rate0) {
                return true;
            }
            let dt = self.step_length(&p, rate0, left, cap_dt);
            let mut pm = self.mean_point(mode, &p, rate0, dt);
            let (held, mut end) = self.step_path(&mut pm, dt);
            if self.c.rails {
                end.rx = self.rails_past_collapse(&p, &pm, dt, end.rx);
            }
            if self.refuse_non_finite(mode, held.i, held.rate) {
                return true;
            }
            let StepEnd {
                s: s1,
                vp: vp1,
                x: x1,
                rx: rx1,
                ..
            } = end;
            let i = held.i;
            let watch = self.limiter_may_engage(&pm);
            if watch.is_none()
                && !(self.c.rails && Self::rails_moving(&p))
                && self.surely_clear(&p, margin, i, (s1, vp1, x1))
            {
                self.take_step(&pm, held, dt, end);
                left -= dt;
                if self.past_horizon(mode) {
                    return true;
                }
                continue;
            }
            let end_sol = self.solve_rails(mode, s1, vp1, x1, &rx1);
            if cap_retries < LIMITER_RETRIES
                && watch.is_some_and(|l| Self::limiter_engages(&end_sol, l))
            {
                // The node's current crossed the limit within the step (a constant power as
                // the cells fall): the capacitor starts to drain there, which the step's held
                // current misses. Shorter steps find where.
                cap_dt = 0.25 * dt;
                cap_retries += 1;
                drop(pm);
                next = Some(Solution::Point(p));
                continue;
            }
            (cap_dt, cap_retries) = (f64::INFINITY, 0);
            if let Solution::Point(q) = &end_sol {
                // The end of a pulse: a pass's least margin lies at a step's end.
                self.margin = self.margin.min(self.voltage_margin(q));
            }
            if let Some((reason, subject)) = self.verdict(&end_sol, s1) {
                if self.speculative && !self.trace_probe {
                    // A pass simulated to measure rates only tells its caller that it stops
                    // (and in which block), and by how much: where within the step does not
                    // matter there.
                    self.stop(reason, Some(mode), subject);
                    return true;
                }
                if !self.speculative && !self.c.fine.get() {
                    // The end lies in this step: from here on, steps as fine as the reference's,
                    // so that the instant is found as it would be there. The step is taken again.
                    self.c.fine.set(true);
                    continue;
                }
                self.stop_within(mode, &pm, held, dt);
                return true;
            }
            self.take_step(&pm, held, dt, end);
            left -= dt;
            if let Solution::Point(q) = &end_sol {
                self.offer_trace(q, self.now(), s1);
            }
            if self.past_horizon(mode) {
                return true;
            }
            next = Some(end_sol);
        }
        false
    }

    /// The operating point a step of `mode` starts from (`next`, the last step's end, or the
    /// present state solved afresh), observed, with its voltage margin
    /// ([`Sim::voltage_margin`]); `None` where the product stops there (the stop is recorded).
    fn step_start(&mut self, mode: usize, next: Option<Solution>) -> Option<(OperatingPoint, f64)> {
        if self.halted(mode) {
            return None;
        }
        self.c.count(|c| c.steps += 1);
        let sol = next.unwrap_or_else(|| self.solve(mode, self.soc(), self.vp, self.vb));
        let margin = match &sol {
            Solution::Point(p) => self.voltage_margin(p),
            Solution::Collapse { .. } => f64::INFINITY,
        };
        self.margin = self.margin.min(margin);
        if let Some((reason, subject)) = self.verdict(&sol, self.soc()) {
            if let Solution::Point(p) = &sol {
                self.observe(p);
            }
            self.stop(reason, Some(mode), subject);
            return None;
        }
        let Solution::Point(p) = sol else { return None };
        self.observe(&p);
        Some((p, margin))
    }

    /// The length of a step from start point `p` (discharging at `rate0`) with `left` seconds
    /// of the phase to go: no further than the horizon, and shortened to the step allowances
    /// of the state of charge, the polarization, the buffer capacitor, the ambient and
    /// `cap_dt` (the limiter's retries).
    fn step_length(&self, p: &OperatingPoint, rate0: f64, left: f64, cap_dt: f64) -> f64 {
        let c = self.c;
        if let Some(from) = c.fine_nested.get() {
            if c.work.get().saturating_sub(from) > FINE_NESTED_BUDGET {
                // The reference's steps cost more here than the fast solver may spend: its own
                // steps again (the end is then found as before).
                c.fine.set(false);
                c.fine_nested.set(None);
                c.fine_nested_spent.set(true);
            }
        }
        let mut dt = left.min(self.c.opt.horizon_s - self.now());
        if rate0 > 0.0 {
            dt = dt.min(self.c.max_ds() / rate0);
        }
        dt = dt.min(self.polarization_step(p, dt));
        dt = dt.min(self.cap_step_limit(p, dt));
        if self.c.rails {
            dt = dt.min(self.rails_step_limit(p));
        }
        // The ambient is held over a step: at most an hour with a daily swing.
        if let Some(c) = &self.c.opt.climate {
            dt = dt.min(c.step_s());
        }
        dt.min(cap_dt)
    }

    /// What a step of `dt` at mean point `pm` holds and where it ends. With a buffer the
    /// cells' current over the step follows from the capacitor's path, and `pm` takes the
    /// step's totals ([`Sim::buffer_step`]).
    fn step_path(&self, pm: &mut Cow<'_, OperatingPoint>, dt: f64) -> (Held, StepEnd) {
        let (x, i, ln, _) = self.cap_after(pm, dt);
        if pm.buffer.is_some() {
            self.buffer_step(pm.to_mut(), i, x, dt);
        }
        let rate = self.rate_on_path(pm, i, dt);
        let (s, mut vp) = self.evolve(i, rate, dt);
        // The polarization moved with the capacitor is taken from `pm` holding the step's
        // totals (its cells' mean current sets the drift), as the end search's states are.
        if let (_, _, _, Some(v)) = self.cap_after(pm, dt) {
            vp = v;
        }
        let rx = self.rails_at(pm, dt, false);
        (Held { i, rate }, StepEnd { s, vp, x, ln, rx })
    }

    /// The state `dt` into a step held at mean point `pm` and `held`: the state of charge, the
    /// polarization (moved with the capacitor where it has one) and the capacitor's path.
    fn step_end(&self, pm: &OperatingPoint, held: Held, dt: f64) -> StepEnd {
        let (s, mut vp) = self.evolve(held.i, held.rate, dt);
        let (x, _, ln, v_cap) = self.cap_after(pm, dt);
        if let Some(v) = v_cap {
            vp = v;
        }
        let rx = self.rails_at(pm, dt, false);
        StepEnd { s, vp, x, ln, rx }
    }

    /// Take a step of `dt` held at mean point `pm` and `held`, ending at `end`: the ledger's
    /// totals, time, state of charge, polarization, capacitor and the current seen by the
    /// rate's window move on.
    fn take_step(&mut self, pm: &OperatingPoint, held: Held, dt: f64, end: StepEnd) {
        self.ledger.add_point(pm, dt, &self.c.v_max);
        self.t.add(dt);
        self.s.add(-held.rate * dt);
        self.vp = end.vp;
        self.vb = end.x;
        self.vb_ln += end.ln;
        self.rx = end.rx;
        if self.i_seen.is_nan() {
            self.seen_first = held.i;
        }
        self.i_seen = self.seen_after(held.i, dt);
    }

    /// Whether the run has reached its horizon; the stop is then recorded.
    fn past_horizon(&mut self, mode: usize) -> bool {
        if self.now() >= self.c.opt.horizon_s * (1.0 - 1e-15) {
            self.stop(EndReason::Horizon, Some(mode), "battery".into());
            return true;
        }
        false
    }

    /// The product stops within a step of `dt` held at mean point `pm` and `held`: the first
    /// failing instant is bisected, the step is taken up to it and the stop recorded with the
    /// reason found there.
    fn stop_within(&mut self, mode: usize, pm: &OperatingPoint, held: Held, dt: f64) {
        let (mut lo, mut hi) = (0.0, dt);
        let tol = if self.c.opt.exact {
            0.0
        } else {
            END_TIME_REL * (self.now() + dt)
        };
        for _ in 0..END_BISECT_ITER {
            let mid = 0.5 * (lo + hi);
            if mid <= lo || mid >= hi || hi - lo <= tol {
                break;
            }
            let m = self.step_end(pm, held, mid);
            if self
                .verdict(&self.solve_rails(mode, m.s, m.vp, m.x, &m.rx), m.s)
                .is_some()
            {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        let end = self.step_end(pm, held, hi);
        self.take_step(pm, held, hi, end);
        let sol = self.solve_rails(mode, end.s, end.vp, end.x, &end.rx);
        if let Solution::Point(q) = &sol {
            self.offer_trace(q, self.now(), end.s);
        }
        let (reason, subject) = self
            .verdict(&sol, end.s)
            .unwrap_or((EndReason::Empty, "battery".into()));
        self.stop(reason, Some(mode), subject);
    }

    /// The buffer's current limit where a step from mean point `p` is to be watched for the
    /// node's current crossing it: a limiter, and the node taking no more than the limit at
    /// `p` (the step's held current then drains nothing).
    fn limiter_may_engage(&self, p: &OperatingPoint) -> Option<f64> {
        let limit = self.c.d.pack.buffer?.current_limit?;
        p.buffer.filter(|b| b.node_current <= limit).map(|_| limit)
    }

    /// Whether the node takes more than `limit` at `sol`.
    fn limiter_engages(sol: &Solution, limit: f64) -> bool {
        matches!(sol, Solution::Point(q) if q.buffer.is_some_and(|b| b.node_current > limit))
    }

    /// Execute `steps` for at most `budget` seconds; true if the product stopped.
    fn steps(&mut self, steps: &[Step], budget: f64) -> bool {
        let mut left = budget;
        for st in steps {
            if left <= 1e-12 * budget {
                break;
            }
            match st {
                Step::Hold { mode, seconds } => {
                    let d = seconds.min(left);
                    if self.hold(*mode, d) {
                        return true;
                    }
                    left -= d;
                }
                Step::Repeat { steps: inner, .. } => {
                    let pass: f64 = inner.iter().map(Step::duration).sum();
                    let total = st.duration().min(left);
                    let n = ((total / pass) * (1.0 + 1e-12)).floor();
                    let tail = (total - n * pass).max(0.0);
                    if self.passes(inner, pass, n) {
                        return true;
                    }
                    // The last pass, cut short where the block's duration ends (however short
                    // against a pass: a block shorter than its body runs part of one pass).
                    if tail > 1e-12 * total && self.steps(inner, tail) {
                        return true;
                    }
                    left -= total;
                }
            }
        }
        false
    }
}
