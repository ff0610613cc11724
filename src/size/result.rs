//! The candidates of a sizing and its result.

use super::capacity::CapacitySearch;
use super::{CandidateRun, RankBy, SizeOptions};
use crate::model::{CellSize, Chemistry};
use crate::solve::EndReason;
use crate::units::{fmt_duration, fmt_eng, fmt_percent};

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
        // With tolerances, the target is met by all but the percentile's share of units.
        let units = self
            .candidates
            .iter()
            .find_map(|c| c.run().and_then(|r| r.percentile))
            .map(|p| {
                format!(
                    " in {} of units (its {} percentile over the tolerances)",
                    crate::units::fmt_percent(1.0 - p / 100.0),
                    ordinal(p)
                )
            })
            .unwrap_or_default();
        let target = format!("{}{units}", fmt_duration(self.options.target_s));
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

/// `5` -> `5th`, `1` -> `1st`, `2.5` -> `2.5th`.
fn ordinal(p: f64) -> String {
    let text = if p.fract() == 0.0 {
        format!("{}", p as i64)
    } else {
        format!("{p}")
    };
    let suffix = match (p.fract() == 0.0, p as i64 % 100) {
        (true, 11..=13) | (false, _) => "th",
        (true, n) => match n % 10 {
            1 => "st",
            2 => "nd",
            3 => "rd",
            _ => "th",
        },
    };
    format!("{text}{suffix}")
}
