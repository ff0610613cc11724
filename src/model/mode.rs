//! Operating modes and the duty profile.

/// One operating mode: the state of every load and which stages run.
#[derive(Debug, Clone)]
pub struct Mode {
    /// Name.
    pub(crate) name: String,
    /// State of each load, by load index (`None` = off).
    pub(crate) load_states: Vec<Option<usize>>,
    /// Whether each stage is enabled, by stage index.
    pub(crate) stage_on: Vec<bool>,
    /// For each rail, the draws of its loads that are on in this mode (derived from
    /// `load_states` when the design is checked).
    pub(crate) rail_draws: Vec<Vec<super::Draw>>,
    /// The longest time the profile holds this mode at a stretch, s (see [`longest_holds`]):
    /// a cell's pulse limit applies to a mode held no longer than the cell's pulse length.
    pub(crate) longest_hold_s: f64,
    /// For a segment of a capture (made by the checker: the same name and states as its mode,
    /// with the captured loads in one segment's draw), the mode of the file it is part of.
    pub(crate) part_of: Option<usize>,
}

impl Mode {
    /// Whether the file names this mode (not a segment of a capture).
    pub fn in_file(&self) -> bool {
        self.part_of.is_none()
    }
}

/// For each of `modes` modes, the longest time `profile` holds it at a stretch, s: the sum of
/// consecutive steps of that mode within one list of steps, the last and first steps of a
/// list joined (every list repeats: a repeat block, and the profile itself until the product
/// stops). A list that holds one mode only holds it without end (infinite), and so does a mode
/// the profile never holds (its operating point, as in `budget`, is judged as continuous).
/// Steps of the same mode on either side of a nested block's edge are not joined.
///
/// # Examples
///
/// ```
/// use joulepath::model::{RepeatUntil, Step, longest_holds};
/// let hold = |mode, seconds| Step::Hold { mode, seconds };
/// let burst = Step::Repeat {
///     steps: vec![hold(0, 0.005), hold(1, 0.995)],
///     until: RepeatUntil::Times(10),
/// };
/// let profile = vec![burst, hold(1, 60.0), hold(1, 30.0)];
/// assert_eq!(longest_holds(&profile, 3), vec![0.005, 90.0, f64::INFINITY]);
/// ```
pub fn longest_holds(profile: &[Step], modes: usize) -> Vec<f64> {
    let mut longest = vec![0.0_f64; modes];
    list_holds(profile, &mut longest);
    for l in &mut longest {
        if *l == 0.0 {
            *l = f64::INFINITY;
        }
    }
    longest
}

fn list_holds(steps: &[Step], longest: &mut [f64]) {
    let mode_of = |s: &Step| match s {
        Step::Hold { mode, .. } => Some(*mode),
        Step::Repeat { .. } => None,
    };
    if let Some(first) = steps.first().and_then(mode_of) {
        if steps.iter().all(|s| mode_of(s) == Some(first)) {
            longest[first] = f64::INFINITY;
            return;
        }
    }
    // Runs of one mode, in order; the first run joins the last when they are the same mode.
    let mut runs: Vec<(Option<usize>, f64)> = Vec::new();
    for s in steps {
        match s {
            Step::Hold { mode, seconds } => match runs.last_mut() {
                Some((Some(m), t)) if m == mode => *t += seconds,
                _ => runs.push((Some(*mode), *seconds)),
            },
            Step::Repeat { steps: inner, .. } => {
                list_holds(inner, longest);
                runs.push((None, 0.0));
            }
        }
    }
    if runs.len() > 1 {
        if let (Some((Some(a), ta)), Some((Some(b), _))) = (runs.first().copied(), runs.last()) {
            if a == *b {
                if let Some(r) = runs.last_mut() {
                    r.1 += ta;
                }
            }
        }
    }
    for (m, t) in runs {
        if let Some(m) = m {
            longest[m] = longest[m].max(t);
        }
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

/// Read access to the checked values (the fields stay private: only the checker builds a `Mode`).
impl Mode {
    /// Name.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// State of each load, by load index (`None` = off).
    pub fn load_states(&self) -> &[Option<usize>] {
        &self.load_states
    }

    /// Whether each stage is enabled, by stage index.
    pub fn stage_on(&self) -> &[bool] {
        &self.stage_on
    }

    /// For each rail, the draws of its loads that are on in this mode (derived from
    /// `load_states` when the design is checked).
    pub fn rail_draws(&self) -> &[Vec<super::Draw>] {
        &self.rail_draws
    }

    /// The longest time the profile holds this mode at a stretch, s (see [`longest_holds`]):
    /// a cell's pulse limit applies to a mode held no longer than the cell's pulse length.
    pub fn longest_hold_s(&self) -> f64 {
        self.longest_hold_s
    }

    /// For a segment of a capture (made by the checker: the same name and states as its mode,
    /// with the captured loads in one segment's draw), the mode of the file it is part of.
    pub fn part_of(&self) -> Option<usize> {
        self.part_of
    }
}
