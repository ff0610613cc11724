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

use std::fmt;

use crate::error::{Error, did_you_mean};
use crate::model::{CellSize, Chemistry, Design, Nominal, Preset};
use crate::solve::{EndReason, MAX_HORIZON_S, RunError, RunOptions, YEAR_S, run};
use crate::spec::{CellRef, CellSpec, DesignSpec, Qty, SourceMap};
use crate::units::{fmt_duration, fmt_eng, fmt_percent};

pub use capacity::{CapacitySearch, least_capacity};

/// Most candidate packs one sizing tries (cells x series counts x parallel counts): each is a
/// whole discharge run, so the bound keeps a sizing within minutes.
pub const MAX_CANDIDATES: usize = 500;

/// What the candidates are ranked by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RankBy {
    /// The mass of the pack's cells.
    Mass,
    /// The volume of the pack's cells.
    Volume,
}

impl RankBy {
    /// Its name in reports: `mass` or `volume`.
    pub fn name(self) -> &'static str {
        match self {
            RankBy::Mass => "mass",
            RankBy::Volume => "volume",
        }
    }
}

/// What to size for.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeOptions {
    /// The runtime a pack must reach, s.
    pub target_s: f64,
    /// The cells to try, by name (presets or keys of the design's `cells:`); `None` tries every
    /// preset and every cell of the design.
    pub cells: Option<Vec<String>>,
    /// Counts in series to try, lowest and highest (default 1 to 4).
    pub series: (u32, u32),
    /// Counts in parallel to try, lowest and highest (default 1 to 6).
    pub parallel: (u32, u32),
    /// What to rank by (default mass).
    pub rank_by: RankBy,
    /// The percentile of the runtime a pack must reach the target at, when the design has
    /// tolerances (default 5): see [`candidate_runtime`]. Without tolerances the one nominal run
    /// decides.
    pub percentile: f64,
    /// Ambient temperature instead of the design's, °C.
    pub ambient_c: Option<f64>,
}

impl SizeOptions {
    /// The defaults for a target runtime of `target_s` seconds.
    pub fn new(target_s: f64) -> Self {
        Self {
            target_s,
            cells: None,
            series: (1, 4),
            parallel: (1, 6),
            rank_by: RankBy::Mass,
            percentile: 5.0,
            ambient_c: None,
        }
    }

    /// The run options of one candidate: its ambient (the design's unless given) and a horizon
    /// past the target (1.5 times the target, at least 20 years), so that a pack that meets it
    /// shows how long it lasts.
    pub fn run_options(&self, design: &Design) -> RunOptions {
        let mut o = RunOptions::for_design(design);
        if let Some(t) = self.ambient_c {
            o.ambient_c = t;
        }
        o.horizon_s = (1.5 * self.target_s).clamp(20.0 * YEAR_S, MAX_HORIZON_S);
        o
    }
}

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
/// Today this is the nominal discharge run ([`crate::solve::run`] with
/// [`SizeOptions::run_options`]). When a design carries tolerances, this is where the P-th
/// percentile ([`SizeOptions::percentile`]) of the runtime over its Monte Carlo spread goes
/// instead, with [`CandidateRun::percentile`] set to P: the candidates and the least-capacity
/// search ([`capacity::least_capacity`]) both call this function and nothing else.
///
/// # Errors
///
/// The run's [`RunError`].
pub fn candidate_runtime(design: &Design, opts: &SizeOptions) -> Result<CandidateRun, RunError> {
    let r = run(design, &opts.run_options(design))?;
    Ok(CandidateRun {
        runtime_s: r.runtime_s(),
        end: r.end.reason,
        end_soc: r.end.soc,
        end_mode: r.end.mode.map(|m| design.modes[m].name.clone()),
        percentile: None,
    })
}

/// Where a candidate cell comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CellOrigin {
    /// A built-in preset.
    Preset,
    /// The design's own: a key of `cells:`, or the inline cell of `battery.cell`.
    Design,
}

impl CellOrigin {
    /// `preset` or `design`.
    pub fn name(self) -> &'static str {
        match self {
            CellOrigin::Preset => "preset",
            CellOrigin::Design => "design",
        }
    }
}

/// What became of a candidate.
#[derive(Debug, Clone, PartialEq)]
pub enum Outcome {
    /// It ran.
    Ran(CandidateRun),
    /// It does not fit: the checker's first message, or the part it would overload.
    Refused(String),
    /// It fits but its run gave no result (the run's message).
    NoResult(String),
}

/// One candidate pack.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// The cell's name: a preset, a key of `cells:`, or `inline`.
    pub cell: String,
    /// Where the cell comes from.
    pub origin: CellOrigin,
    /// The cell's chemistry, when known.
    pub chemistry: Option<Chemistry>,
    /// Cells in series.
    pub series: u32,
    /// Strings in parallel.
    pub parallel: u32,
    /// Mass of the pack's cells (nothing else), kg.
    pub mass_kg: Option<f64>,
    /// Volume of the pack's cells (their own volumes added), m³.
    pub volume_m3: Option<f64>,
    /// The size of one cell.
    pub cell_size: Option<CellSize>,
    /// Rated charge of the pack: parallel x the cell's rated capacity, C.
    pub charge_c: Option<f64>,
    /// Rated energy of the pack: the charge x series x the designated nominal voltage (the mean
    /// open-circuit voltage for a chemistry without one), J.
    pub energy_j: Option<f64>,
    /// What became of it.
    pub outcome: Outcome,
}

impl Candidate {
    /// The pack in short: `alkaline-aa 2S1P`.
    pub fn label(&self) -> String {
        format!("{} {}S{}P", self.cell, self.series, self.parallel)
    }

    /// Its run, if it ran.
    pub fn run(&self) -> Option<&CandidateRun> {
        match &self.outcome {
            Outcome::Ran(r) => Some(r),
            _ => None,
        }
    }

    /// Whether it runs at least `target_s`.
    pub fn meets(&self, target_s: f64) -> bool {
        self.run().is_some_and(|r| r.runtime_s >= target_s)
    }

    /// The value it is ranked by.
    pub fn metric(&self, by: RankBy) -> Option<f64> {
        match by {
            RankBy::Mass => self.mass_kg,
            RankBy::Volume => self.volume_m3,
        }
    }
}

/// The result of a sizing.
#[derive(Debug, Clone, PartialEq)]
pub struct Sizing {
    /// The design's title.
    pub title: String,
    /// The options it was sized with.
    pub options: SizeOptions,
    /// The ambient of the runs, °C.
    pub ambient_c: f64,
    /// The cells tried, in order.
    pub cells: Vec<String>,
    /// Every candidate, ranked (see the module documentation).
    pub candidates: Vec<Candidate>,
    /// The least capacity of each of the design's own cells tried.
    pub capacity: Vec<CapacitySearch>,
    /// Warnings about the cells at the ambient of the runs (each once).
    pub warnings: Vec<String>,
}

impl Sizing {
    /// The best candidate that meets the target: the first of the ranking, if it meets it.
    pub fn best(&self) -> Option<&Candidate> {
        self.candidates
            .first()
            .filter(|c| c.meets(self.options.target_s))
    }

    /// The candidate that runs longest (for when none meets the target).
    pub fn closest(&self) -> Option<&Candidate> {
        self.candidates
            .iter()
            .filter(|c| c.run().is_some())
            .max_by(|a, b| {
                let (ra, rb) = (
                    a.run().map_or(0.0, |r| r.runtime_s),
                    b.run().map_or(0.0, |r| r.runtime_s),
                );
                ra.total_cmp(&rb)
            })
    }

    /// The answer in one sentence.
    pub fn sentence(&self) -> String {
        let target = fmt_duration(self.options.target_s);
        let by = self.options.rank_by;
        let adjective = match by {
            RankBy::Mass => "lightest",
            RankBy::Volume => "smallest",
        };
        if let Some(b) = self.best() {
            let r = b.run().map_or(0.0, |r| r.runtime_s);
            let amount = match (by, b.metric(by)) {
                (RankBy::Mass, Some(m)) => format!("{} of cells", fmt_eng(m * 1e3, "g")),
                (RankBy::Volume, Some(v)) => format!("{} cm³ of cells", fmt_cm3(v)),
                (RankBy::Mass, None) => "mass unknown".to_string(),
                (RankBy::Volume, None) => "size unknown".to_string(),
            };
            return format!(
                "The {adjective} pack that lasts {target} is {} ({}): {amount}, runs {}, ends by {}.",
                b.label(),
                arrangement(b.series, b.parallel),
                fmt_duration(r),
                end_words(b.run().map_or(EndReason::Empty, |r| r.end)),
            );
        }
        match self.closest() {
            Some(c) => {
                let r = c.run().map_or(0.0, |r| r.runtime_s);
                format!(
                    "No pack of the {} tried lasts {target}: the closest, {} ({}), runs {}, {} short of it, and ends by {}.",
                    self.candidates.len(),
                    c.label(),
                    arrangement(c.series, c.parallel),
                    fmt_duration(r),
                    fmt_percent(1.0 - r / self.options.target_s),
                    end_words(c.run().map_or(EndReason::Empty, |r| r.end)),
                )
            }
            None => format!(
                "No pack of the {} tried lasts {target}: none of them fits or runs.",
                self.candidates.len()
            ),
        }
    }
}

/// `2 in series`, `3 in parallel`, `2 in series x 3 in parallel`, `a single cell`.
fn arrangement(series: u32, parallel: u32) -> String {
    match (series, parallel) {
        (1, 1) => "a single cell".to_string(),
        (s, 1) => format!("{s} in series"),
        (1, p) => format!("{p} in parallel"),
        (s, p) => format!("{s} in series x {p} in parallel"),
    }
}

/// The end reason in a few words.
pub fn end_words(e: EndReason) -> &'static str {
    match e {
        EndReason::Collapse => "voltage collapse",
        EndReason::Cutoff => "the cutoff",
        EndReason::Undervoltage => "a stage's undervoltage lockout",
        EndReason::Rail => "a load's supply below its minimum",
        EndReason::Empty => "an empty pack",
        EndReason::Horizon => "the simulation horizon (still running)",
    }
}

/// Cubic centimetres from m³, three significant digits.
pub fn fmt_cm3(m3: f64) -> String {
    crate::units::fmt_sig(m3 * 1e6, 3)
}

/// Why a sizing could not be done.
#[derive(Debug)]
pub enum SizeError {
    /// An option is out of range (the message says which and the fix).
    Options(String),
    /// A cell named in [`SizeOptions::cells`] is neither a preset nor a cell of the design.
    UnknownCell {
        /// The name.
        name: String,
        /// A did-you-mean or the list of names.
        hint: String,
    },
    /// More candidates than [`MAX_CANDIDATES`].
    TooMany {
        /// How many were asked for.
        count: usize,
    },
    /// The design as given does not pass the checker.
    Invalid(Error),
}

impl fmt::Display for SizeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SizeError::Options(m) => f.write_str(m),
            SizeError::UnknownCell { name, hint } => {
                write!(f, "unknown cell `{name}` ({hint})")
            }
            SizeError::TooMany { count } => write!(
                f,
                "{count} candidate packs (cells x series counts x parallel counts) are more than \
                 the {MAX_CANDIDATES} a sizing tries: name fewer cells with `--cells` or narrow \
                 `--series` and `--parallel`"
            ),
            SizeError::Invalid(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for SizeError {}

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
                let mut c = Candidate {
                    cell: cell.clone(),
                    origin: *origin,
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
                let s = with_pack(spec, cell, *origin, series, parallel);
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

fn check_options(o: &SizeOptions) -> Result<(), SizeError> {
    if !(o.target_s > 0.0 && o.target_s <= MAX_HORIZON_S / 1.5) {
        return Err(SizeError::Options(format!(
            "the target {} is out of range: give a runtime above zero and at most {}",
            fmt_duration(o.target_s),
            fmt_duration(MAX_HORIZON_S / 1.5)
        )));
    }
    for (what, (lo, hi)) in [("series", o.series), ("parallel", o.parallel)] {
        if lo == 0 || lo > hi {
            return Err(SizeError::Options(format!(
                "the {what} range {lo}..{hi} is empty or starts at zero: give counts from 1 up, the lower first, such as `1..4`"
            )));
        }
    }
    if !(o.percentile > 0.0 && o.percentile < 100.0) {
        return Err(SizeError::Options(format!(
            "the percentile {} is outside 0..100: give a value such as 5",
            o.percentile
        )));
    }
    if let Some(t) = o.ambient_c {
        if !(-273.15..=200.0).contains(&t) {
            return Err(SizeError::Options(format!(
                "the ambient {t} °C is outside -273.15 °C to 200 °C"
            )));
        }
    }
    Ok(())
}
