//! The least capacity of one of the design's own cells that meets the target at the design's
//! series and parallel counts: a bisection on the cell's `capacity`, every other key as written.
//!
//! Runtime grows with capacity (more charge at every state of charge, the same voltages), so the
//! capacities that meet the target are those above one threshold. The search brackets it (the
//! given capacity, doubled until it passes when it does not) and halves the bracket until its
//! width is under [`REL_TOL`] of its top, at most [`MAX_ITERATIONS`] times. A cell that keeps
//! `rated_current` unset has it follow the capacity (capacity / 5 h), as it would in a file.

use super::{
    CandidateRun, CellOrigin, SizeOptions, candidate_runtime, end_words, fit_problem, with_pack,
};
use crate::model::Design;
use crate::spec::{CellRef, DesignSpec, Qty, SourceMap};
use crate::units::{fmt_duration, fmt_eng};

/// Width of the final bracket, relative to its top: 0.1 %. The fast solver agrees with the
/// reference within 0.2 % of the runtime, so a finer capacity would be false precision.
pub const REL_TOL: f64 = 1e-3;

/// Most halvings of the bracket.
pub const MAX_ITERATIONS: u32 = 60;

/// Most doublings of the given capacity while looking for one that meets the target (4096
/// times the given capacity at most).
pub const MAX_DOUBLINGS: u32 = 12;

/// Runs a search typically takes, for a progress estimate.
pub const RUNS_ESTIMATE: usize = 14;

/// The largest capacity tried: the physical range of a charge (100 kAh), C.
const MAX_CAPACITY_C: f64 = 3.6e8;

/// The least capacity of one cell that meets the target.
#[derive(Debug, Clone, PartialEq)]
pub struct CapacitySearch {
    /// The cell (a key of `cells:`, or `inline`).
    pub cell: String,
    /// Cells in series (the design's).
    pub series: u32,
    /// Strings in parallel (the design's).
    pub parallel: u32,
    /// The cell's capacity as written, C (0 when the pack could not be checked).
    pub given_c: f64,
    /// The least capacity per cell found to meet the target (the top of the final bracket), C.
    pub needed_c: Option<f64>,
    /// The run at that capacity.
    pub run: Option<CandidateRun>,
    /// Halvings of the bracket.
    pub iterations: u32,
    /// Discharge runs made, doublings and the given capacity included.
    pub runs: u32,
    /// Why no capacity was found, when none was.
    pub note: Option<String>,
}

/// The spec with the capacity of `cell` set to `capacity_c` coulombs (written in Ah).
fn with_capacity(spec: &DesignSpec, cell: &str, capacity_c: f64) -> DesignSpec {
    let mut s = spec.clone();
    let q = Some(Qty(format!("{} Ah", capacity_c / 3600.0)));
    if let Some(c) = s.cells.get_mut(cell) {
        c.capacity = q;
    } else if let CellRef::Inline(c) = &mut s.battery.cell {
        c.capacity = q;
    }
    s
}

/// Find the least capacity of the design's own cell `cell` that meets `opts.target_s` at the
/// design's series and parallel counts; `progress(runs)` is called after each run.
pub fn least_capacity(
    spec: &DesignSpec,
    source: &SourceMap,
    cell: &str,
    origin: CellOrigin,
    opts: &SizeOptions,
    progress: &mut dyn FnMut(usize),
) -> CapacitySearch {
    let (series, parallel) = match Design::from_spec(spec, source) {
        Ok(d) => (d.pack.series, d.pack.parallel),
        Err(_) => (1, 1),
    };
    let base = with_pack(spec, cell, origin, series, parallel);
    let mut out = CapacitySearch {
        cell: cell.to_string(),
        series,
        parallel,
        given_c: 0.0,
        needed_c: None,
        run: None,
        iterations: 0,
        runs: 0,
        note: None,
    };
    let given = match Design::from_spec(&base, source) {
        Ok(d) => d.pack.cell.capacity_c,
        Err(e) => {
            out.note = Some(format!(
                "the pack does not pass the checker: {}",
                e.diagnostics().first().map_or("", |d| d.message())
            ));
            return out;
        }
    };
    out.given_c = given;
    // A run at one capacity: its result, or why there is none.
    let mut try_at = |capacity_c: f64, out: &mut CapacitySearch| -> Result<CandidateRun, String> {
        out.runs += 1;
        progress(out.runs as usize);
        let d =
            Design::from_spec(&with_capacity(&base, cell, capacity_c), source).map_err(|e| {
                e.diagnostics()
                    .first()
                    .map_or_else(String::new, |d| d.message().to_string())
            })?;
        if let Some(m) = fit_problem(&d) {
            return Err(m);
        }
        candidate_runtime(&d, opts).map_err(|e| e.to_string())
    };
    let meets =
        |r: &Result<CandidateRun, String>| r.as_ref().is_ok_and(|r| r.runtime_s >= opts.target_s);
    let (mut lo, mut hi, mut best) = match bracket(given, &mut try_at, &meets, &mut out) {
        Ok(b) => b,
        Err(note) => {
            out.note = Some(note);
            return out;
        }
    };
    while hi - lo > REL_TOL * hi && out.iterations < MAX_ITERATIONS {
        let mid = 0.5 * (lo + hi);
        out.iterations += 1;
        let r = try_at(mid, &mut out);
        if meets(&r) {
            hi = mid;
            best = r.ok();
        } else {
            lo = mid;
        }
    }
    out.needed_c = Some(hi);
    out.run = best;
    out
}

/// A run at one capacity, C: its result, or why there is none.
type TryAt<'a> = dyn FnMut(f64, &mut CapacitySearch) -> Result<CandidateRun, String> + 'a;

/// Capacities `(lo, hi)` that fail and meet the target, from the `given` one doubled until one
/// meets it (`lo` 0 when the given one does), with the run at `hi`; else the note on why no
/// capacity up to the largest tried does.
fn bracket(
    given: f64,
    try_at: &mut TryAt<'_>,
    meets: &dyn Fn(&Result<CandidateRun, String>) -> bool,
    out: &mut CapacitySearch,
) -> Result<(f64, f64, Option<CandidateRun>), String> {
    let first = try_at(given, out);
    if meets(&first) {
        return Ok((0.0, given, first.ok()));
    }
    let mut lo = given;
    let mut last = first;
    for k in 1..=MAX_DOUBLINGS {
        let hi = given * f64::from(1u32 << k);
        if hi > MAX_CAPACITY_C {
            break;
        }
        let r = try_at(hi, out);
        if meets(&r) {
            return Ok((lo, hi, r.ok()));
        }
        lo = hi;
        last = r;
    }
    Err(match last {
        Ok(r) => format!(
            "even {} per cell ({} times the given capacity) runs only {}, ending by {}: the capacity is not what limits this pack",
            fmt_eng(lo / 3600.0, "Ah"),
            fmt_ratio(lo / given),
            fmt_duration(r.runtime_s),
            end_words(r.end)
        ),
        Err(m) => format!(
            "no capacity up to {} gives a run: {m}",
            fmt_eng(lo / 3600.0, "Ah")
        ),
    })
}

fn fmt_ratio(x: f64) -> String {
    crate::units::fmt_sig(x, 3)
}
