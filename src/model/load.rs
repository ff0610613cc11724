//! Loads and what they draw.

/// What a load draws in one state; the unit in the file decides the kind.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Draw {
    /// A constant current, A.
    Current(f64),
    /// A constant power, W.
    Power(f64),
    /// A resistance, Ω: current V / R.
    Resistance(f64),
    /// An LED string on an LED driver's rail: current max(0, (V - knee) / resistance), the
    /// straight-line law of a forward-biased diode above its knee.
    Led {
        /// The string's knee voltage, V: the forward voltage where the line meets zero current.
        knee: f64,
        /// The string's dynamic resistance, Ω (above zero).
        resistance: f64,
    },
}

impl Draw {
    /// Current drawn at rail voltage `v` (a rail at or below 0 V gives a constant-power load an
    /// unbounded current, which the solver reads as a collapse).
    ///
    /// # Examples
    ///
    /// ```
    /// use joulepath::model::Draw;
    /// assert_eq!(Draw::Current(0.01).current(3.0), 0.01);
    /// assert!((Draw::Power(0.33).current(3.3) - 0.1).abs() < 1e-15);
    /// assert!((Draw::Resistance(100.0).current(3.3) - 0.033).abs() < 1e-15);
    /// // An LED with its knee at 2.75 V and 1 Ω: 350 mA at 3.1 V, none below the knee.
    /// let led = Draw::Led { knee: 2.75, resistance: 1.0 };
    /// assert!((led.current(3.1) - 0.35).abs() < 1e-12);
    /// assert_eq!(led.current(2.5), 0.0);
    /// ```
    pub fn current(self, v: f64) -> f64 {
        match self {
            Draw::Current(i) => i,
            Draw::Power(p) => {
                if p == 0.0 {
                    0.0
                } else if v > 0.0 {
                    p / v
                } else {
                    f64::INFINITY
                }
            }
            Draw::Resistance(r) => {
                if v > 0.0 {
                    v / r
                } else {
                    0.0
                }
            }
            Draw::Led { knee, resistance } => ((v - knee) / resistance).max(0.0),
        }
    }

    /// Whether the state draws anything at all.
    pub fn is_drawing(self) -> bool {
        match self {
            Draw::Current(x) | Draw::Power(x) => x > 0.0,
            Draw::Resistance(r) => r.is_finite(),
            Draw::Led { resistance, .. } => resistance.is_finite(),
        }
    }
}

/// A load on a rail.
#[derive(Debug, Clone)]
pub struct Load {
    /// Unique id.
    pub(crate) id: String,
    /// Rail: 0 the battery, `k + 1` the output of stage `k`.
    pub(crate) rail: usize,
    /// Lowest supply the load works at, V.
    pub(crate) v_min: Option<f64>,
    /// Highest supply the load tolerates, V.
    pub(crate) v_max: Option<f64>,
    /// Named states and their draws (the state `off` is implicit and draws nothing). The first
    /// `file_states` are the file's; a state that follows a capture draws the capture's mean
    /// there, and its segments are states after those, with the same name.
    pub(crate) states: Vec<(String, Draw)>,
    /// State used when a mode does not name the load (`None` = off).
    pub(crate) default: Option<usize>,
    /// How many of `states` the file gives.
    pub(crate) file_states: usize,
    /// The states that follow a capture.
    pub(crate) captured: Vec<Captured>,
}

/// A load state whose draw follows a measured capture: in a phase of a mode that puts the load
/// in it, the load takes the capture's segments in turn from the phase's start.
#[derive(Debug, Clone, PartialEq)]
pub struct Captured {
    /// The state (an index of the file's states).
    pub(crate) state: usize,
    /// The capture file as named in the design.
    pub(crate) file: String,
    /// Samples in the capture.
    pub(crate) samples: usize,
    /// Duration of one capture, s.
    pub(crate) duration_s: f64,
    /// The segments in order: duration, s, and the load state drawing that segment's mean.
    pub(crate) segments: Vec<(f64, usize)>,
    /// The tolerance on the pack's lowest terminal voltage, V.
    pub(crate) tolerance_v: f64,
    /// The bound the segments keep, V.
    pub(crate) bound_v: f64,
}

impl Load {
    /// Name of state `s` (`None` is `off`).
    pub fn state_name(&self, s: Option<usize>) -> &str {
        s.map_or("off", |k| self.states[k].0.as_str())
    }

    /// The capture state `s` follows, if it does (a file state or one of its segments).
    pub fn capture_of(&self, s: usize) -> Option<&Captured> {
        self.captured
            .iter()
            .find(|c| c.state == s || c.segments.iter().any(|&(_, k)| k == s))
    }
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Load`).
impl Load {
    /// Unique id.
    pub fn id(&self) -> &str {
        &self.id
    }

    /// Rail: 0 the battery, `k + 1` the output of stage `k`.
    pub fn rail(&self) -> usize {
        self.rail
    }

    /// Lowest supply the load works at, V.
    pub fn v_min(&self) -> Option<f64> {
        self.v_min
    }

    /// Highest supply the load tolerates, V.
    pub fn v_max(&self) -> Option<f64> {
        self.v_max
    }

    /// Named states and their draws (the state `off` is implicit and draws nothing). The first
    /// `file_states` are the file's; a state that follows a capture draws the capture's mean
    /// there, and its segments are states after those, with the same name.
    pub fn states(&self) -> &[(String, Draw)] {
        &self.states
    }

    /// State used when a mode does not name the load (`None` = off).
    pub fn default_state(&self) -> Option<usize> {
        self.default
    }

    /// How many of `states` the file gives.
    pub fn file_states(&self) -> usize {
        self.file_states
    }

    /// The states that follow a capture.
    pub fn captured(&self) -> &[Captured] {
        &self.captured
    }
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Captured`).
impl Captured {
    /// The state (an index of the file's states).
    pub fn state(&self) -> usize {
        self.state
    }

    /// The capture file as named in the design.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// Samples in the capture.
    pub fn samples(&self) -> usize {
        self.samples
    }

    /// Duration of one capture, s.
    pub fn duration_s(&self) -> f64 {
        self.duration_s
    }

    /// The segments in order: duration, s, and the load state drawing that segment's mean.
    pub fn segments(&self) -> &[(f64, usize)] {
        &self.segments
    }

    /// The tolerance on the pack's lowest terminal voltage, V.
    pub fn tolerance_v(&self) -> f64 {
        self.tolerance_v
    }

    /// The bound the segments keep, V.
    pub fn bound_v(&self) -> f64 {
        self.bound_v
    }
}
