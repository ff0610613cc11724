//! Sizing: the lightest (or smallest) pack that keeps a design running for a target time.
//!
//! [`size`] takes a parsed design (`spec::parse`) and tries every candidate pack: each cell
//! (every built-in preset and the design's own cells, or the ones named) in every count in
//! series and in parallel of the ranges asked. Each candidate is the design with `battery.cell`,
//! `battery.series` and `battery.parallel` replaced in the spec, checked by
//! [`Design::from_spec`] and run by [`candidate_runtime`]. A candidate the checker refuses, or
//! whose full pack voltage is above what a part on the pack's rail takes (see [`fit_problem`]),
//! is listed as not fitting with the reason. Candidates are ranked: those that meet the target
//! first, then those that run short, then those that do not fit or give no result; within each
//! group by the pack's mass (or volume), cells only, a pack whose cell gives no mass (or size)
//! after those that do. For each of the design's own cells, [`capacity::least_capacity`] also
//! finds the least capacity that meets the target at the design's series and parallel.

pub mod capacity;
mod options;
mod result;

use crate::error::did_you_mean;
use crate::model::{Design, Nominal, Preset};
use crate::solve::{EndReason, RunError, run};
use crate::spec::{CellRef, CellSpec, DesignSpec, Qty, SourceMap};
use crate::spread::{SpreadError, SpreadOptions, spread};
use crate::units::fmt_eng;

pub use capacity::{CapacitySearch, least_capacity};
pub use options::{RankBy, SizeError, SizeOptions};
pub use result::{Candidate, CellOrigin, Outcome, Sizing, end_words, fmt_cm3};

use options::check_options;

/// Most candidate packs one sizing tries (cells x series counts x parallel counts): each is a
/// whole discharge run, so the bound keeps a sizing within minutes.
pub const MAX_CANDIDATES: usize = 500;

/// The runtime of one candidate and how it ends.
#[derive(Debug, Clone, PartialEq)]
pub struct CandidateRun {
    /// The runtime the target is judged on, s.
    pub runtime_s: f64,
    /// Why it ends.
    pub end: EndReason,
    /// State of charge left at the end, 0..1.
    pub end_soc: f64,
    /// The mode it ends in.
    pub end_mode: Option<String>,
    /// The percentile `runtime_s` is, when a spread over tolerances gave it; `None` for the one
    /// nominal run.
    pub percentile: Option<f64>,
}

/// The runtime of one candidate design: the ONE place the sizing gets a runtime from.
///
/// Without tolerances, the nominal discharge run ([`crate::solve::run`] with
/// [`SizeOptions::run_options`]). With tolerances, the P-th percentile
/// ([`SizeOptions::percentile`]) of the runtime over a spread of [`SizeOptions::samples`] units
/// ([`crate::spread::spread`]), with the end of the unit nearest that percentile and
/// [`CandidateRun::percentile`] set to P. The candidates and the least-capacity search
/// ([`capacity::least_capacity`]) both call this function and nothing else.
///
/// # Errors
///
/// The run's [`RunError`].
pub fn candidate_runtime(design: &Design, opts: &SizeOptions) -> Result<CandidateRun, RunError> {
    if design.tolerances.is_empty() {
        let r = run(design, &opts.run_options(design))?;
        return Ok(CandidateRun {
            runtime_s: r.runtime_s(),
            end: r.end.reason,
            end_soc: r.end.soc,
            end_mode: r.end.mode.map(|m| design.modes[m].name.clone()),
            percentile: None,
        });
    }
    let mut d = design.clone();
    if let Some(t) = opts.ambient_c {
        // The ambient given is the centre: a varied ambient keeps its own spread.
        if !d
            .tolerances
            .iter()
            .any(|t| t.knob == crate::model::Knob::Ambient)
        {
            d.ambient_c = t;
            d.climate = None;
        }
    }
    let so = SpreadOptions {
        samples: opts.samples,
        seed: opts.seed,
        target_s: Some(opts.target_s),
        corners: false,
        run: opts.run_options(&d),
    };
    let s = spread(&d, &so).map_err(|e| match e {
        SpreadError::Nominal(e) => e,
        _ => RunError::Options {
            option: "samples",
            value: opts.samples as f64,
        },
    })?;
    let near = s.sample_near(opts.percentile);
    Ok(CandidateRun {
        runtime_s: s.percentile_s(opts.percentile),
        end: near.and_then(|o| o.end).unwrap_or(EndReason::Horizon),
        end_soc: near.and_then(|o| o.end_soc).unwrap_or(f64::NAN),
        end_mode: near
            .and_then(|o| o.end_mode)
            .map(|m| design.modes[m].name.clone()),
        percentile: Some(opts.percentile),
    })
}

/// The cells a sizing tries: (name, origin), the presets first.
fn candidate_cells(
    spec: &DesignSpec,
    opts: &SizeOptions,
) -> Result<Vec<(String, CellOrigin)>, SizeError> {
    let mut own: Vec<String> = spec.cells.keys().cloned().collect();
    if matches!(spec.battery.cell, CellRef::Inline(_)) {
        own.push("inline".to_string());
    }
    let origin_of = |n: &str| {
        if own.iter().any(|o| o == n) {
            Some(CellOrigin::Design)
        } else if Preset::text(n).is_some() {
            Some(CellOrigin::Preset)
        } else {
            None
        }
    };
    match &opts.cells {
        None => {
            let mut out: Vec<(String, CellOrigin)> = Preset::names()
                .filter(|p| !own.iter().any(|o| o == p))
                .map(|p| (p.to_string(), CellOrigin::Preset))
                .collect();
            out.extend(own.iter().map(|o| (o.clone(), CellOrigin::Design)));
            Ok(out)
        }
        Some(names) => {
            let mut out: Vec<(String, CellOrigin)> = Vec::new();
            for n in names {
                let Some(origin) = origin_of(n) else {
                    let all: Vec<&str> = own
                        .iter()
                        .map(String::as_str)
                        .chain(Preset::names().map(|p| -> &str { p }))
                        .collect();
                    let hint = did_you_mean(n, all.iter().copied()).map_or_else(
                        || format!("the cells are {}", crate::spec::backticked(&all)),
                        |s| format!("did you mean `{s}`?"),
                    );
                    return Err(SizeError::UnknownCell {
                        name: n.clone(),
                        hint,
                    });
                };
                if !out.iter().any(|(o, _)| o == n) {
                    out.push((n.clone(), origin));
                }
            }
            Ok(out)
        }
    }
}

/// The design's spec with the pack replaced: `cell` in `series` x `parallel`.
pub(crate) fn with_pack(
    spec: &DesignSpec,
    cell: &str,
    origin: CellOrigin,
    series: u32,
    parallel: u32,
) -> DesignSpec {
    let mut s = spec.clone();
    s.battery.cell = match origin {
        // Inline, so that a key of `cells:` with a preset's name cannot shadow the preset.
        CellOrigin::Preset => CellRef::Inline(Box::new(CellSpec {
            preset: Some(cell.to_string()),
            ..CellSpec::default()
        })),
        CellOrigin::Design if cell == "inline" && !spec.cells.contains_key("inline") => {
            spec.battery.cell.clone()
        }
        CellOrigin::Design => CellRef::Name(cell.to_string()),
    };
    s.battery.series = Some(Qty(series.to_string()));
    s.battery.parallel = Some(Qty(parallel.to_string()));
    // The design cell's tolerances apply to the candidate's cell (a relative band carries over
    // as it should; bounds in Ah stay as written); the counts are what the sizing varies.
    if let CellRef::Name(own) = &spec.battery.cell {
        let prefix = format!("cells.{own}.");
        s.tolerances = std::mem::take(&mut s.tolerances)
            .into_iter()
            .map(|(k, v)| match k.strip_prefix(&prefix) {
                Some(rest) => (format!("battery.cell.{rest}"), v),
                None => (k, v),
            })
            .collect();
    }
    s.tolerances
        .retain(|k, _| k != "battery.series" && k != "battery.parallel");
    s
}

/// Why a checked candidate cannot be used although the checker accepts it: its full pack
/// voltage (open-circuit, at `battery.start`) above the `input_range` maximum of a stage on the
/// pack's rail, or above the `voltage_range` maximum of a load on it. The checker only flags
/// such a design (the part is computed and reported as overvoltage); a sizing does not offer a
/// pack that would overload a part from the start.
pub fn fit_problem(d: &Design) -> Option<String> {
    let v = d.pack.ocv(d.pack.start_soc);
    for s in d.stages.iter().filter(|s| s.input == 0) {
        if let Some(max) = s.input_max.filter(|m| v > *m) {
            return Some(format!(
                "the pack's {} is above the {} input maximum of `{}`",
                fmt_eng(v, "V"),
                fmt_eng(max, "V"),
                s.id
            ));
        }
    }
    for l in d.loads.iter().filter(|l| l.rail == 0) {
        if let Some(max) = l.v_max.filter(|m| v > *m) {
            return Some(format!(
                "the pack's {} is above the {} supply maximum of `{}`",
                fmt_eng(v, "V"),
                fmt_eng(max, "V"),
                l.id
            ));
        }
    }
    None
}

/// The checker's first message, cut to about 100 characters at a word.
fn short(message: &str) -> String {
    const MAX: usize = 100;
    if message.chars().count() <= MAX {
        return message.to_string();
    }
    let mut out = String::new();
    for word in message.split(' ') {
        if out.chars().count() + word.chars().count() + 1 > MAX {
            break;
        }
        if !out.is_empty() {
            out.push(' ');
        }
        out.push_str(word);
    }
    out.push_str(" …");
    out
}

/// What a candidate's cell tells: mass, size, charge, energy of the pack.
fn fill_pack(c: &mut Candidate, d: &Design) {
    let cell = &d.pack.cell;
    let n = f64::from(c.series) * f64::from(c.parallel);
    c.chemistry = Some(cell.chemistry);
    c.mass_kg = cell.mass_kg.map(|m| m * n);
    c.cell_size = cell.size;
    c.volume_m3 = cell.size.map(|s| s.volume_m3() * n);
    let charge = f64::from(c.parallel) * cell.capacity_c;
    let nominal = Nominal::of(cell.chemistry).map_or_else(|| cell.ocv.mean(0.0, 1.0), |n| n.volts);
    c.charge_c = Some(charge);
    c.energy_j = Some(charge * f64::from(c.series) * nominal);
}

/// Size the pack of a parsed design.
///
/// # Errors
///
/// [`SizeError`]: options out of range, an unknown cell, too many candidates, or a design that
/// does not pass the checker as given.
///
/// # Examples
///
/// ```
/// use joulepath::size::{SizeOptions, size};
/// let text = r#"
/// battery: { cell: alkaline-aa }
/// loads: [{ id: lamp, rail: battery, draw: { on: 10 mA } }]
/// modes: { lit: { lamp: on } }
/// profile: [{ mode: lit, for: 1 h }]
/// "#;
/// let parsed = joulepath::spec::parse(text).unwrap();
/// // 10 mA for 200 h is 2 Ah (Q = I t): one AAA (1.2 Ah) falls short, two in parallel
/// // (2.4 Ah, 23 g) and one AA (2.5 Ah, 23 g) last; the two AAA take less room.
/// let mut opts = SizeOptions::new(200.0 * 3600.0);
/// opts.cells = Some(vec!["alkaline-aa".into(), "alkaline-aaa".into()]);
/// opts.series = (1, 1);
/// opts.parallel = (1, 2);
/// let s = size(&parsed.spec, &parsed.source, &opts).unwrap();
/// assert_eq!(s.candidates.len(), 4);
/// assert_eq!(s.best().unwrap().label(), "alkaline-aaa 1S2P");
/// assert!(!s.candidates[3].meets(opts.target_s));
/// ```
pub fn size(
    spec: &DesignSpec,
    source: &SourceMap,
    opts: &SizeOptions,
) -> Result<Sizing, SizeError> {
    size_observed(spec, source, opts, &mut |_, _| {})
}

/// [`size`], calling `progress(done, total)` after each run.
///
/// # Errors
///
/// As [`size`].
pub fn size_observed(
    spec: &DesignSpec,
    source: &SourceMap,
    opts: &SizeOptions,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Sizing, SizeError> {
    check_options(opts)?;
    let design = Design::from_spec(spec, source).map_err(SizeError::Invalid)?;
    let cells = candidate_cells(spec, opts)?;
    let (s0, s1) = opts.series;
    let (p0, p1) = opts.parallel;
    let count = cells
        .len()
        .saturating_mul((s1 - s0) as usize + 1)
        .saturating_mul((p1 - p0) as usize + 1);
    if count > MAX_CANDIDATES {
        return Err(SizeError::TooMany { count });
    }
    let own: Vec<&(String, CellOrigin)> =
        cells.iter().filter(|c| c.1 == CellOrigin::Design).collect();
    let total = count + own.len() * capacity::RUNS_ESTIMATE;
    let mut done = 0;
    let mut candidates = Vec::with_capacity(count);
    let ambient_c = opts.ambient_c.unwrap_or(design.ambient_c);
    let mut warnings: Vec<String> = Vec::new();
    for (cell, origin) in &cells {
        for series in s0..=s1 {
            for parallel in p0..=p1 {
                let c = evaluate(
                    (spec, source, opts),
                    (cell, *origin),
                    (series, parallel),
                    ambient_c,
                    &mut warnings,
                );
                candidates.push(c);
                done += 1;
                progress(done, total);
            }
        }
    }
    fill_refused(&mut candidates);
    rank(&mut candidates, opts);
    let mut searches = Vec::new();
    for (cell, origin) in own {
        let search = least_capacity(spec, source, cell, *origin, opts, &mut |k| {
            progress((done + k).min(total), total);
        });
        done += capacity::RUNS_ESTIMATE;
        searches.push(search);
    }
    Ok(Sizing {
        title: design.title,
        options: opts.clone(),
        ambient_c,
        cells: cells.into_iter().map(|c| c.0).collect(),
        candidates,
        capacity: searches,
        warnings,
    })
}

/// Candidate `cell` (from `origin`) in `series` and `parallel`: its pack's mass, size and
/// ratings, and its run, or why the checker refused it; the warnings about its design are
/// added to `warnings` (each once).
fn evaluate(
    (spec, source, opts): (&DesignSpec, &SourceMap, &SizeOptions),
    (cell, origin): (&str, CellOrigin),
    (series, parallel): (u32, u32),
    ambient_c: f64,
    warnings: &mut Vec<String>,
) -> Candidate {
    let mut c = Candidate {
        cell: cell.to_string(),
        origin,
        chemistry: None,
        series,
        parallel,
        mass_kg: None,
        volume_m3: None,
        cell_size: None,
        charge_c: None,
        energy_j: None,
        outcome: Outcome::Refused(String::new()),
    };
    let s = with_pack(spec, cell, origin, series, parallel);
    c.outcome = match Design::from_spec(&s, source) {
        Err(e) => Outcome::Refused(short(
            e.diagnostics()
                .first()
                .map_or("refused by the checker", |d| d.message()),
        )),
        Ok(d) => {
            fill_pack(&mut c, &d);
            for w in crate::report::warnings(&d, ambient_c) {
                if !warnings.contains(&w) {
                    warnings.push(w);
                }
            }
            match fit_problem(&d) {
                Some(m) => Outcome::Refused(m),
                None => match candidate_runtime(&d, opts) {
                    Ok(r) => Outcome::Ran(r),
                    Err(e) => Outcome::NoResult(short(&e.to_string())),
                },
            }
        }
    };
    c
}

/// A candidate refused by the checker still shows its cell's mass, size and ratings when
/// another candidate of the same cell was checked.
fn fill_refused(candidates: &mut [Candidate]) {
    for i in 0..candidates.len() {
        if candidates[i].chemistry.is_some() {
            continue;
        }
        let Some(k) = candidates
            .iter()
            .position(|o| o.cell == candidates[i].cell && o.chemistry.is_some())
        else {
            continue;
        };
        let (cell_kg, cell_m3, charge_per_p, energy_per_cell) = {
            let o = &candidates[k];
            let n = f64::from(o.series) * f64::from(o.parallel);
            (
                o.mass_kg.map(|m| m / n),
                o.volume_m3.map(|v| v / n),
                o.charge_c.map(|q| q / f64::from(o.parallel)),
                o.energy_j.map(|e| e / n),
            )
        };
        let (chem, size) = (candidates[k].chemistry, candidates[k].cell_size);
        let c = &mut candidates[i];
        let n = f64::from(c.series) * f64::from(c.parallel);
        c.chemistry = chem;
        c.cell_size = size;
        c.mass_kg = cell_kg.map(|m| m * n);
        c.volume_m3 = cell_m3.map(|v| v * n);
        c.charge_c = charge_per_p.map(|q| q * f64::from(c.parallel));
        c.energy_j = energy_per_cell.map(|e| e * n);
    }
}

/// Rank: meets the target, then short, then no result, then refused; within each, by the metric
/// (unknown last), then by the other metric, then fewer cells (lighter for one cell whose mass
/// is unknown), then the longer runtime.
fn rank(candidates: &mut [Candidate], opts: &SizeOptions) {
    let group = |c: &Candidate| match &c.outcome {
        Outcome::Ran(r) if r.runtime_s >= opts.target_s => 0,
        Outcome::Ran(_) => 1,
        Outcome::NoResult(_) => 2,
        Outcome::Refused(_) => 3,
    };
    let other = match opts.rank_by {
        RankBy::Mass => RankBy::Volume,
        RankBy::Volume => RankBy::Mass,
    };
    let key = |c: &Candidate, by: RankBy| c.metric(by).unwrap_or(f64::INFINITY);
    candidates.sort_by(|a, b| {
        group(a)
            .cmp(&group(b))
            .then(key(a, opts.rank_by).total_cmp(&key(b, opts.rank_by)))
            .then(key(a, other).total_cmp(&key(b, other)))
            .then((a.series * a.parallel).cmp(&(b.series * b.parallel)))
            .then({
                let ra = a.run().map_or(0.0, |r| r.runtime_s);
                let rb = b.run().map_or(0.0, |r| r.runtime_s);
                rb.total_cmp(&ra)
            })
    });
}
