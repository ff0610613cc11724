//! Operating modes and the duty profile.

/// One operating mode: the state of every load and which stages run.
#[derive(Debug, Clone)]
pub struct Mode {
    /// Name.
    pub name: String,
    /// State of each load, by load index (`None` = off).
    pub load_states: Vec<Option<usize>>,
    /// Whether each stage is enabled, by stage index.
    pub stage_on: Vec<bool>,
    /// For each rail, the draws of its loads that are on in this mode (derived from
    /// `load_states` when the design is checked).
    pub rail_draws: Vec<Vec<super::Draw>>,
    /// For a segment of a capture (made by the checker: the same name and states as its mode,
    /// with the captured loads in one segment's draw), the mode of the file it is part of.
    pub part_of: Option<usize>,
}

impl Mode {
    /// Whether the file names this mode (not a segment of a capture).
    pub fn in_file(&self) -> bool {
        self.part_of.is_none()
    }
}

/// One item of the profile.
#[derive(Debug, Clone, PartialEq)]
pub enum Step {
    /// A mode held for a duration, s.
    Hold {
        /// Mode index.
        mode: usize,
        /// Duration, s.
        seconds: f64,
    },
    /// A block of steps repeated `times` times, or until `seconds` have passed (the last pass
    /// cut short where the duration ends).
    Repeat {
        /// The block.
        steps: Vec<Step>,
        /// How long it runs.
        until: RepeatUntil,
    },
}

/// How long a repeat block runs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RepeatUntil {
    /// A number of passes.
    Times(u64),
    /// A total duration, s.
    Seconds(f64),
}

impl Step {
    /// Duration of one execution of this item, s.
    pub fn duration(&self) -> f64 {
        match self {
            Step::Hold { seconds, .. } => *seconds,
            Step::Repeat { steps, until } => match until {
                RepeatUntil::Seconds(s) => *s,
                RepeatUntil::Times(n) => *n as f64 * steps.iter().map(Step::duration).sum::<f64>(),
            },
        }
    }
}
