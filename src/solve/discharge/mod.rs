//! The discharge: the profile executed from the start state, repeated until the product stops
//! (DESIGN section 6).
//!
//! Within a phase the pack current is held at the operating point of the phase's start, so the
//! polarization voltage has its exact exponential update and the state of charge falls linearly;
//! long phases are cut into sub-steps small in state of charge. After each (sub-)step the
//! operating point at its end state is solved and the end conditions checked; when one holds,
//! the first failing instant inside the step is found by bisection.
//!
//! Two solvers share this machinery. The chronological reference (`exact`) executes every pass of
//! every repeat block. The fast solver, after one exact pass of a block, skips many passes at once
//! at the rates of a pass simulated at the middle of the skipped stretch (quasi-static averaging
//! over SoC), with the polarization relaxed toward its periodic value (one pass maps V_p to
//! a V_p + b with a = e^(-T/tau), so the periodic value is b / (1 - a)); it then executes the next
//! pass exactly. If that pass stops the product, the first stopping pass is found by bisection on
//! the number of skipped passes and executed exactly.

mod end;
mod skip;

use std::collections::HashSet;

use super::check::{Violation, ViolationKind, violations_where};
use super::ledger::{Ledger, TracePoint, Tracer};
use super::point::{OperatingPoint, PackState, Solution, StageState, solve_point};
use super::tolerance::{
    END_BISECT_ITER, MEAN_POINT_REL, SKIP_MAX_DS, SKIP_MIN_PASSES, STEP_MAX_DS_EXACT,
    STEP_MAX_DS_FAST, TRACE_BUCKETS, TRACE_PROBES_PER_SKIP,
};
use crate::model::{Design, Step};

/// A year of 365.25 days, s.
pub const YEAR_S: f64 = 365.25 * 86_400.0;

/// How to run a discharge.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RunOptions {
    /// Ambient temperature, °C.
    pub ambient_c: f64,
    /// Stop after this long, s (default 20 years).
    pub horizon_s: f64,
    /// Use the chronological reference (every pass executed) instead of the fast solver.
    pub exact: bool,
    /// Keep a decimated trace.
    pub trace: bool,
}

impl RunOptions {
    /// Defaults for `design`: its ambient, a 20-year horizon, the fast solver, no trace.
    pub fn for_design(design: &Design) -> Self {
        Self {
            ambient_c: design.ambient_c,
            horizon_s: 20.0 * YEAR_S,
            exact: false,
            trace: false,
        }
    }
}

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
    /// Ambient of the run, °C.
    pub ambient_c: f64,
    /// Usable charge of the pack at that ambient, C.
    pub capacity_c: f64,
    /// Energy the pack holds at open-circuit voltage from the start SoC to empty, J.
    pub stored_energy_j: f64,
}

impl RunResult {
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
/// let r = run(&d, &RunOptions::for_design(&d));
/// // Constant current: runtime = Q / I = 3600 C / 0.1 A.
/// assert_eq!(r.end.reason, EndReason::Empty);
/// assert!((r.runtime_s() - 36_000.0).abs() < 1e-6);
/// ```
pub fn run(design: &Design, opt: &RunOptions) -> RunResult {
    run_observed(design, opt, None)
}

/// [`run`], calling `progress` now and then with the share of the work done (0..1: the charge
/// used so far, or the time run against the horizon), for a progress bar.
pub fn run_observed(
    design: &Design,
    opt: &RunOptions,
    progress: Option<&dyn Fn(f64)>,
) -> RunResult {
    let mut ctx = Ctx::new(design, *opt);
    ctx.progress = progress;
    let mut sim = Sim::new(&ctx);
    let pass: f64 = design.profile.iter().map(Step::duration).sum();
    let stopped = sim.passes(&design.profile, pass, u64::MAX);
    debug_assert!(stopped);
    let end = sim.end.clone().unwrap_or(End {
        reason: EndReason::Horizon,
        t_s: sim.t,
        soc: sim.s,
        mode: None,
        subject: "battery".into(),
    });
    let pack = &design.pack;
    let s0 = pack.start_soc;
    let stored = ctx.q * f64::from(pack.series) * pack.cell.ocv.mean(0.0, s0) * s0;
    RunResult {
        end,
        ledger: sim.ledger,
        peaks: sim.peaks,
        violations: sim.violations,
        trace: sim.tracer.map(|t| t.points()).unwrap_or_default(),
        ambient_c: opt.ambient_c,
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
    i_self: f64,
    cutoff: f64,
    max_ds: f64,
    /// [mode][stage]: whether something below the stage draws in that mode.
    draws_below: Vec<Vec<bool>>,
    /// Each load's maximum supply.
    v_max: Vec<Option<f64>>,
}

impl<'a> Ctx<'a> {
    fn new(d: &'a Design, opt: RunOptions) -> Self {
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
            opt,
            q: d.pack.capacity_c(opt.ambient_c),
            pol: d.pack.polarization(opt.ambient_c),
            i_self: d.pack.self_discharge_a(),
            cutoff: d.pack.cutoff_v(),
            max_ds: if opt.exact {
                STEP_MAX_DS_EXACT
            } else {
                STEP_MAX_DS_FAST
            },
            draws_below,
            v_max: d.loads.iter().map(|l| l.v_max).collect(),
        }
    }
}

/// The state and totals of a run in progress.
#[derive(Clone)]
struct Sim<'a> {
    c: &'a Ctx<'a>,
    t: f64,
    s: f64,
    vp: f64,
    ledger: Ledger,
    peaks: Vec<Peak>,
    violations: Vec<Violation>,
    seen: HashSet<(ViolationKind, String)>,
    tracer: Option<Tracer>,
    end: Option<End>,
}

/// What one pass of a block changed.
#[derive(Clone)]
struct Delta {
    ds: f64,
    /// Polarization decay over one pass, e^(-T / tau), and its periodic value: with the same
    /// currents every pass, V_p(end) = a V_p(start) + b, so V* = b / (1 - a).
    decay: f64,
    vp_star: f64,
    ledger: Ledger,
}

struct Mark {
    s: f64,
    vp: f64,
    ledger: Ledger,
}

impl Delta {
    fn between(before: &Mark, after: &Sim, pass: f64) -> Self {
        let decay = after.c.pol.map_or(0.0, |(_, tau)| (-pass / tau).exp());
        let b = after.vp - decay * before.vp;
        Self {
            ds: before.s - after.s,
            decay,
            vp_star: if decay < 1.0 {
                b / (1.0 - decay)
            } else {
                after.vp
            },
            ledger: after.ledger.since(&before.ledger),
        }
    }
}

impl<'a> Sim<'a> {
    fn new(c: &'a Ctx<'a>) -> Self {
        let d = c.d;
        Self {
            c,
            t: 0.0,
            s: d.pack.start_soc,
            vp: 0.0,
            ledger: Ledger::new(d.stages.len(), d.loads.len()),
            peaks: vec![
                Peak {
                    loss_w: 0.0,
                    mode: None
                };
                d.stages.len()
            ],
            violations: Vec::new(),
            seen: HashSet::new(),
            tracer: c
                .opt
                .trace
                .then(|| Tracer::new(d.pack.start_soc, TRACE_BUCKETS)),
            end: None,
        }
    }

    fn mark(&self) -> Mark {
        Mark {
            s: self.s,
            vp: self.vp,
            ledger: self.ledger.clone(),
        }
    }

    fn solve(&self, mode: usize, s: f64, vp: f64) -> Solution {
        let at = PackState {
            soc: s.max(0.0),
            v_pol: Some(vp),
            ambient_c: self.c.opt.ambient_c,
        };
        solve_point(self.c.d, mode, at)
    }

    /// Rate of fall of the SoC, per second, at pack current `i` (Peukert-effective current plus
    /// self-discharge, over the usable charge).
    fn rate(&self, i: f64) -> f64 {
        (self.c.d.pack.peukert_current(i) + self.c.i_self) / self.c.q
    }

    /// State after holding current `i` (at SoC rate `rate` per second) for `dt`.
    fn evolve(&self, i: f64, rate: f64, dt: f64) -> (f64, f64) {
        let s = self.s - rate * dt;
        let vp = match self.c.pol {
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
        let s = self.s - 0.5 * rate * dt;
        let vp = match self.c.pol {
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
    fn mean_point(
        &self,
        mode: usize,
        start: &OperatingPoint,
        rate: f64,
        dt: f64,
    ) -> OperatingPoint {
        let (sm, vm) = self.mean_state(start.pack.current, rate, dt);
        // A step so short that the pack barely moves: the start point is the mean point (the
        // reference always solves the mean state).
        let rel = if self.c.opt.exact {
            0.0
        } else {
            MEAN_POINT_REL
        };
        if self.pack_shift(start, sm, vm) <= rel * start.pack.voltage.abs() {
            return start.clone();
        }
        let sol = self.solve(mode, sm, vm);
        match sol {
            Solution::Point(p) if self.condition(&p).is_none() => p,
            _ => start.clone(),
        }
    }

    fn stop(&mut self, reason: EndReason, mode: Option<usize>, subject: String) {
        self.end = Some(End {
            reason,
            t_s: self.t,
            soc: self.s.max(0.0),
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
        let found = violations_where(self.c.d, p, self.c.opt.ambient_c, &|k, s| {
            !seen.contains(&(k, s.to_string()))
        });
        for mut v in found {
            v.t_s = Some(self.t);
            if self.seen.insert((v.kind, v.subject.clone())) {
                self.violations.push(v);
            }
        }
        self.offer_trace(p, self.t, self.s);
    }

    /// Hold `mode` for `dur` seconds; true if the product stopped.
    fn hold(&mut self, mode: usize, dur: f64) -> bool {
        let mut left = dur;
        let mut next: Option<Solution> = None;
        while left > 1e-12 * dur {
            let sol = next
                .take()
                .unwrap_or_else(|| self.solve(mode, self.s, self.vp));
            if let Some((reason, subject)) = self.verdict(&sol, self.s) {
                if let Solution::Point(p) = &sol {
                    self.observe(p);
                }
                self.stop(reason, Some(mode), subject);
                return true;
            }
            let Solution::Point(p) = sol else { return true };
            self.observe(&p);
            let rate0 = self.rate(p.pack.current);
            let mut dt = left.min(self.c.opt.horizon_s - self.t);
            if rate0 > 0.0 {
                dt = dt.min(self.c.max_ds / rate0);
            }
            let pm = self.mean_point(mode, &p, rate0, dt);
            let i = pm.pack.current;
            let rate = self.rate(i);
            let (s1, vp1) = self.evolve(i, rate, dt);
            if self.surely_clear(&p, i, s1, vp1) {
                self.ledger.add_point(&pm, dt, &self.c.v_max);
                self.t += dt;
                self.s = s1;
                self.vp = vp1;
                left -= dt;
                if self.t >= self.c.opt.horizon_s * (1.0 - 1e-15) {
                    self.stop(EndReason::Horizon, Some(mode), "battery".into());
                    return true;
                }
                continue;
            }
            let end_sol = self.solve(mode, s1, vp1);
            if self.verdict(&end_sol, s1).is_some() {
                let (mut lo, mut hi) = (0.0, dt);
                for _ in 0..END_BISECT_ITER {
                    let mid = 0.5 * (lo + hi);
                    if mid <= lo || mid >= hi {
                        break;
                    }
                    let (sm, vm) = self.evolve(i, rate, mid);
                    if self.verdict(&self.solve(mode, sm, vm), sm).is_some() {
                        hi = mid;
                    } else {
                        lo = mid;
                    }
                }
                self.ledger.add_point(&pm, hi, &self.c.v_max);
                let (sh, vh) = self.evolve(i, rate, hi);
                self.t += hi;
                self.s = sh;
                self.vp = vh;
                let sol = self.solve(mode, sh, vh);
                if let Solution::Point(q) = &sol {
                    self.offer_trace(q, self.t, sh);
                }
                let (reason, subject) = self
                    .verdict(&sol, sh)
                    .unwrap_or((EndReason::Empty, "battery".into()));
                self.stop(reason, Some(mode), subject);
                return true;
            }
            self.ledger.add_point(&pm, dt, &self.c.v_max);
            self.t += dt;
            self.s = s1;
            self.vp = vp1;
            left -= dt;
            if let Solution::Point(q) = &end_sol {
                self.offer_trace(q, self.t, s1);
            }
            if self.t >= self.c.opt.horizon_s * (1.0 - 1e-15) {
                self.stop(EndReason::Horizon, Some(mode), "battery".into());
                return true;
            }
            next = Some(end_sol);
        }
        false
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
                    if self.passes(inner, pass, n as u64) {
                        return true;
                    }
                    if tail > 1e-9 * pass && self.steps(inner, tail) {
                        return true;
                    }
                    left -= total;
                }
            }
        }
        false
    }
}
