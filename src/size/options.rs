//! The options of a sizing and its errors.

use std::fmt;

use super::MAX_CANDIDATES;
use crate::error::Error;
use crate::model::Design;
use crate::solve::{MAX_HORIZON_S, RunOptions, YEAR_S};
use crate::units::fmt_duration;

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
    /// tolerances (default 5): see [`super::candidate_runtime`]. Without tolerances the one nominal run
    /// decides.
    pub percentile: f64,
    /// Ambient temperature instead of the design's, °C.
    pub ambient_c: Option<f64>,
    /// Samples of the spread per candidate, when the design has tolerances (default 200).
    pub samples: usize,
    /// Seed of the spread's random draws (default 1).
    pub seed: u64,
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
            samples: 200,
            seed: 1,
        }
    }

    /// The run options of one candidate: its ambient (the design's unless given) and a horizon
    /// past the target (1.5 times the target, at least 20 years), so that a pack that meets it
    /// shows how long it lasts.
    pub fn run_options(&self, design: &Design) -> RunOptions {
        let mut o = RunOptions::for_design(design);
        if let Some(t) = self.ambient_c {
            o.ambient_c = t;
            o.climate = None;
        }
        o.horizon_s = (1.5 * self.target_s).clamp(20.0 * YEAR_S, MAX_HORIZON_S);
        o
    }
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

pub(super) fn check_options(o: &SizeOptions) -> Result<(), SizeError> {
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
