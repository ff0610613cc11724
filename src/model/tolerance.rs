//! Tolerances of a checked design: which value varies from unit to unit ([`Knob`]), how
//! ([`Dist`]), and within which physical range a drawn value must stay.

use super::Design;
use super::cell::Cell;
use super::load::Draw;
use super::mode::{RepeatUntil, Step};
use super::stage::LossModel;
use super::table::Table;
use crate::units::Dim;

/// How a value spreads, in SI units.
#[derive(Debug, Clone, PartialEq)]
pub enum Dist {
    /// Normal with this mean and standard deviation, truncated at three standard deviations
    /// (a part outside its band is screened out).
    Normal {
        /// Mean.
        mean: f64,
        /// Standard deviation.
        sigma: f64,
    },
    /// Uniform between two bounds.
    Uniform {
        /// Lower bound.
        lo: f64,
        /// Upper bound.
        hi: f64,
    },
    /// One of these values, each as likely.
    Pick(Vec<f64>),
}

impl Dist {
    /// The bounds a one-at-a-time swing takes: mean ± 3 sigma for a normal spread (the band of
    /// a `±` tolerance; common practice, no source), the bounds of a uniform one, the least and
    /// greatest choice of a pick.
    pub fn swing_bounds(&self) -> (f64, f64) {
        match self {
            Dist::Normal { mean, sigma } => (mean - 3.0 * sigma, mean + 3.0 * sigma),
            Dist::Uniform { lo, hi } => (*lo, *hi),
            Dist::Pick(v) => (
                v.iter().copied().fold(f64::INFINITY, f64::min),
                v.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            ),
        }
    }

    /// The mean of the distribution.
    pub fn mean(&self) -> f64 {
        match self {
            Dist::Normal { mean, .. } => *mean,
            Dist::Uniform { lo, hi } => 0.5 * (lo + hi),
            Dist::Pick(v) => v.iter().sum::<f64>() / v.len() as f64,
        }
    }
}

/// The physical range of a varied value: a drawn value outside it is drawn again (or, after
/// many tries, clipped to it).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Range {
    /// Least value.
    pub(crate) lo: f64,
    /// Whether the least value itself is allowed.
    pub(crate) lo_closed: bool,
    /// Greatest value (allowed).
    pub(crate) hi: f64,
    /// Whether values are whole numbers (counts of cells or passes).
    pub(crate) whole: bool,
}

impl Range {
    const fn new(lo: f64, lo_closed: bool, hi: f64) -> Self {
        Self {
            lo,
            lo_closed,
            hi,
            whole: false,
        }
    }

    /// Whether `v` lies in the range.
    pub fn contains(&self, v: f64) -> bool {
        v.is_finite() && (v > self.lo || (self.lo_closed && v >= self.lo)) && v <= self.hi
    }

    /// `v` moved into the range (an open lower end is approached to within a millionth of
    /// `scale`, the design's value).
    pub fn clip(&self, v: f64, scale: f64) -> f64 {
        let lo = if self.lo_closed {
            self.lo
        } else {
            self.lo + 1e-6 * scale.abs().max(f64::MIN_POSITIVE)
        };
        let v = if v.is_nan() { lo } else { v };
        let v = v.clamp(lo, self.hi.max(lo));
        if self.whole {
            v.round().max(lo.ceil())
        } else {
            v
        }
    }
}

const NON_NEGATIVE: Range = Range::new(0.0, true, f64::MAX);
const POSITIVE: Range = Range::new(0.0, false, f64::MAX);
const FRACTION: Range = Range::new(0.0, false, 1.0);
const FRACTION_CLOSED: Range = Range::new(0.0, true, 1.0);
const COUNT: Range = Range {
    lo: 1.0,
    lo_closed: true,
    hi: 1000.0,
    whole: true,
};

/// One value of a checked design that a tolerance varies.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum Knob {
    /// The ambient temperature, °C.
    Ambient,
    /// The cell's capacity, C.
    CellCapacity,
    /// The cell's resistance at 50 % SoC, Ω: a table is scaled as a whole.
    CellResistance,
    /// The cell's self-discharge, per second.
    CellSelfDischarge,
    /// The cell's Peukert exponent.
    CellPeukert,
    /// The cell's cutoff voltage, V.
    CellCutoff,
    /// The cell's rated current, A.
    CellRatedCurrent,
    /// The polarization branch's resistance, Ω.
    CellPolarizationR,
    /// The polarization branch's time constant, s.
    CellPolarizationTau,
    /// Cells in series.
    Series,
    /// Strings in parallel.
    Parallel,
    /// State of charge at the start.
    StartSoc,
    /// Capacity left after aging.
    AgingCapacity,
    /// Resistance factor of aging.
    AgingResistance,
    /// A stage's output voltage, V.
    StageOutput(usize),
    /// An LED driver's set current, A (its output voltage follows on its LED's law).
    StageLedCurrent(usize),
    /// A stage's quiescent current, A.
    StageQuiescent(usize),
    /// A stage's shutdown current, A.
    StageShutdown(usize),
    /// A stage's constant efficiency.
    StageEfficiency(usize),
    /// A stage's dropout voltage, V.
    StageDropout(usize),
    /// A stage's bypass drop, V.
    StageBypassDrop(usize),
    /// A stage's on-resistance, Ω.
    StageOnResistance(usize),
    /// A stage's junction-to-ambient thermal resistance, K/W.
    StageThetaJa(usize),
    /// A stage's proportional loss term, V.
    StageLossDrop(usize),
    /// A stage's conduction loss term, Ω.
    StageLossResistance(usize),
    /// A stage's input current limit, A.
    StageInputLimit(usize),
    /// The capacitance of the buffer capacitor on a stage's rail, F.
    StageBufferCapacitance(usize),
    /// Its series resistance, Ω.
    StageBufferEsr(usize),
    /// Its leakage current, A.
    StageBufferLeakage(usize),
    /// The capacitance of the buffer capacitor across the pack, F.
    BufferCapacitance,
    /// Its series resistance, Ω.
    BufferEsr,
    /// Its leakage current, A.
    BufferLeakage,
    /// Its limiter's limit, A.
    BufferLimit,
    /// What a load draws in one state: (load, state).
    LoadDraw(usize, usize),
    /// The duration of a profile item (a step or a repeat block), by its indices down the
    /// nesting of `repeat` blocks.
    StepFor(Vec<usize>),
    /// The number of passes of a repeat block, by its indices.
    RepeatTimes(Vec<usize>),
}

impl Knob {
    /// The kind of value, for reading a tolerance's text.
    pub fn dim(&self, d: &Design) -> Dim {
        match self {
            Knob::Ambient => Dim::Temperature,
            Knob::CellCapacity => Dim::Charge,
            Knob::CellResistance
            | Knob::CellPolarizationR
            | Knob::StageOnResistance(_)
            | Knob::StageLossResistance(_)
            | Knob::StageBufferEsr(_)
            | Knob::BufferEsr => Dim::Resistance,
            Knob::StageBufferCapacitance(_) | Knob::BufferCapacitance => Dim::Capacitance,
            Knob::CellSelfDischarge => Dim::Rate,
            Knob::CellPeukert
            | Knob::Series
            | Knob::Parallel
            | Knob::AgingResistance
            | Knob::RepeatTimes(_) => Dim::Number,
            Knob::CellCutoff
            | Knob::StageOutput(_)
            | Knob::StageDropout(_)
            | Knob::StageBypassDrop(_)
            | Knob::StageLossDrop(_) => Dim::Voltage,
            Knob::CellRatedCurrent
            | Knob::StageQuiescent(_)
            | Knob::StageShutdown(_)
            | Knob::StageLedCurrent(_)
            | Knob::StageInputLimit(_)
            | Knob::StageBufferLeakage(_)
            | Knob::BufferLeakage
            | Knob::BufferLimit => Dim::Current,
            Knob::CellPolarizationTau | Knob::StepFor(_) => Dim::Time,
            Knob::StartSoc | Knob::AgingCapacity | Knob::StageEfficiency(_) => Dim::Fraction,
            Knob::StageThetaJa(_) => Dim::ThermalResistance,
            Knob::LoadDraw(l, s) => match d.loads[*l].states[*s].1 {
                Draw::Current(_) => Dim::Current,
                Draw::Power(_) => Dim::Power,
                Draw::Resistance(_) => Dim::Resistance,
                // Never varied: the checker refuses a tolerance on an LED's draw.
                Draw::Led { .. } => Dim::Voltage,
            },
        }
    }

    /// What to do where the design lacks the part whose value this is (a buffer capacitor, a
    /// limiter, an input current limit); `None` for the other values.
    pub fn absent_hint(&self) -> Option<&'static str> {
        match self {
            Knob::BufferCapacitance | Knob::BufferEsr | Knob::BufferLeakage => Some(
                "the design has no buffer across the pack: add `battery.buffer` to vary it, or drop the line",
            ),
            Knob::BufferLimit => Some(
                "the pack's buffer has no limiter: give it a `current_limit` to vary it, or drop the line",
            ),
            Knob::StageInputLimit(_) => Some(
                "the stage has no `input_current_limit`: give it one to vary it, or drop the line",
            ),
            Knob::StageBufferCapacitance(_)
            | Knob::StageBufferEsr(_)
            | Knob::StageBufferLeakage(_) => Some(
                "the stage has no buffer on its rail: give it a `buffer` to vary it, or drop the line",
            ),
            _ => None,
        }
    }

    /// The physical range of the value.
    pub fn range(&self) -> Range {
        match self {
            Knob::Ambient => Range::new(-273.15, false, 200.0),
            Knob::CellPeukert | Knob::AgingResistance => Range::new(1.0, true, 10.0),
            Knob::Series | Knob::Parallel | Knob::RepeatTimes(_) => COUNT,
            Knob::StartSoc => FRACTION_CLOSED,
            Knob::AgingCapacity | Knob::StageEfficiency(_) => FRACTION,
            Knob::CellCapacity
            | Knob::CellPolarizationTau
            | Knob::StageOutput(_)
            | Knob::StageLedCurrent(_)
            | Knob::StageThetaJa(_)
            | Knob::CellRatedCurrent
            | Knob::StageInputLimit(_)
            | Knob::StageBufferCapacitance(_)
            | Knob::BufferCapacitance
            | Knob::BufferLimit
            | Knob::StepFor(_) => POSITIVE,
            _ => NON_NEGATIVE,
        }
    }

    /// The value in `d`, SI.
    pub fn get(&self, d: &Design) -> f64 {
        let c = &d.pack.cell;
        match self {
            Knob::Ambient => d.ambient_c,
            Knob::CellCapacity => c.capacity_c,
            Knob::CellResistance => c.resistance.at(0.5),
            Knob::CellSelfDischarge => c.self_discharge_per_s,
            Knob::CellPeukert => c.peukert,
            Knob::CellCutoff => c.cutoff_v,
            Knob::CellRatedCurrent => c.rated_current_a,
            Knob::CellPolarizationR => c.polarization.map_or(f64::NAN, |p| p.0),
            Knob::CellPolarizationTau => c.polarization.map_or(f64::NAN, |p| p.1),
            Knob::Series => f64::from(d.pack.series),
            Knob::Parallel => f64::from(d.pack.parallel),
            Knob::StartSoc => d.pack.start_soc,
            Knob::AgingCapacity => d.pack.aging_capacity,
            Knob::AgingResistance => d.pack.aging_resistance,
            Knob::StageOutput(i) => d.stages[*i].setpoint,
            Knob::StageLedCurrent(i) => d.stages[*i].led_current.unwrap_or(f64::NAN),
            Knob::StageQuiescent(i) => d.stages[*i].quiescent,
            Knob::StageShutdown(i) => d.stages[*i].shutdown,
            Knob::StageEfficiency(i) => match d.stages[*i].loss {
                LossModel::Constant(e) => e,
                _ => f64::NAN,
            },
            Knob::StageDropout(i) => d.stages[*i].dropout,
            Knob::StageBypassDrop(i) => d.stages[*i].bypass_drop,
            Knob::StageOnResistance(i) => d.stages[*i].on_resistance,
            Knob::StageThetaJa(i) => d.stages[*i].theta_ja.unwrap_or(f64::NAN),
            Knob::StageLossDrop(i) => match d.stages[*i].loss {
                LossModel::Terms { drop, .. } => drop,
                _ => f64::NAN,
            },
            Knob::StageLossResistance(i) => match d.stages[*i].loss {
                LossModel::Terms { resistance, .. } => resistance,
                _ => f64::NAN,
            },
            Knob::StageInputLimit(i) => d.stages[*i].input_current_limit.unwrap_or(f64::NAN),
            Knob::StageBufferCapacitance(i) => {
                d.stages[*i].buffer.map_or(f64::NAN, |b| b.capacitance)
            }
            Knob::StageBufferEsr(i) => d.stages[*i].buffer.map_or(f64::NAN, |b| b.esr),
            Knob::StageBufferLeakage(i) => d.stages[*i].buffer.map_or(f64::NAN, |b| b.leakage),
            Knob::BufferCapacitance => d.pack.buffer.map_or(f64::NAN, |b| b.capacitance),
            Knob::BufferEsr => d.pack.buffer.map_or(f64::NAN, |b| b.esr),
            Knob::BufferLeakage => d.pack.buffer.map_or(f64::NAN, |b| b.leakage),
            Knob::BufferLimit => d
                .pack
                .buffer
                .and_then(|b| b.current_limit)
                .unwrap_or(f64::NAN),
            Knob::LoadDraw(l, s) => match d.loads[*l].states[*s].1 {
                Draw::Current(x) | Draw::Power(x) | Draw::Resistance(x) => x,
                Draw::Led { knee, .. } => knee,
            },
            Knob::StepFor(at) => match step(&d.profile, at) {
                Some(Step::Hold { seconds, .. }) => *seconds,
                Some(Step::Repeat {
                    until: RepeatUntil::Seconds(s),
                    ..
                }) => *s,
                _ => f64::NAN,
            },
            Knob::RepeatTimes(at) => match step(&d.profile, at) {
                Some(Step::Repeat {
                    until: RepeatUntil::Times(n),
                    ..
                }) => *n as f64,
                _ => f64::NAN,
            },
        }
    }

    /// Set the value in `d` to `v` (SI, within [`Knob::range`]). A load's draw also updates the
    /// modes' per-rail draws, so the design stays consistent.
    pub(crate) fn set(&self, d: &mut Design, v: f64) {
        let c = &mut d.pack.cell;
        match self {
            Knob::Ambient => d.ambient_c = v,
            Knob::CellCapacity => c.capacity_c = v,
            Knob::CellResistance => set_resistance(c, v),
            Knob::CellSelfDischarge => c.self_discharge_per_s = v,
            Knob::CellPeukert => c.peukert = v,
            Knob::CellCutoff => c.cutoff_v = v,
            Knob::CellRatedCurrent => c.rated_current_a = v,
            Knob::CellPolarizationR => {
                if let Some(p) = &mut c.polarization {
                    p.0 = v;
                }
            }
            Knob::CellPolarizationTau => {
                if let Some(p) = &mut c.polarization {
                    p.1 = v;
                }
            }
            Knob::Series => d.pack.series = whole(v),
            Knob::Parallel => d.pack.parallel = whole(v),
            Knob::StartSoc => d.pack.start_soc = v,
            Knob::AgingCapacity => d.pack.aging_capacity = v,
            Knob::AgingResistance => d.pack.aging_resistance = v,
            Knob::StageOutput(i) => d.stages[*i].setpoint = v,
            Knob::StageLedCurrent(i) => set_led_current(d, *i, v),
            Knob::StageQuiescent(i) => d.stages[*i].quiescent = v,
            Knob::StageShutdown(i) => d.stages[*i].shutdown = v,
            Knob::StageEfficiency(i) => d.stages[*i].loss = LossModel::Constant(v),
            Knob::StageDropout(i) => d.stages[*i].dropout = v,
            Knob::StageBypassDrop(i) => d.stages[*i].bypass_drop = v,
            Knob::StageOnResistance(i) => d.stages[*i].on_resistance = v,
            Knob::StageThetaJa(i) => d.stages[*i].theta_ja = Some(v),
            Knob::StageLossDrop(i) => {
                if let LossModel::Terms { drop, .. } = &mut d.stages[*i].loss {
                    *drop = v;
                }
            }
            Knob::StageLossResistance(i) => {
                if let LossModel::Terms { resistance, .. } = &mut d.stages[*i].loss {
                    *resistance = v;
                }
            }
            Knob::StageInputLimit(i) => {
                if let Some(l) = &mut d.stages[*i].input_current_limit {
                    *l = v;
                }
            }
            Knob::StageBufferCapacitance(i) => {
                if let Some(b) = &mut d.stages[*i].buffer {
                    b.capacitance = v;
                }
            }
            Knob::StageBufferEsr(i) => {
                if let Some(b) = &mut d.stages[*i].buffer {
                    b.esr = v;
                }
            }
            Knob::StageBufferLeakage(i) => {
                if let Some(b) = &mut d.stages[*i].buffer {
                    b.leakage = v;
                }
            }
            Knob::BufferCapacitance => {
                if let Some(b) = &mut d.pack.buffer {
                    b.capacitance = v;
                }
            }
            Knob::BufferEsr => {
                if let Some(b) = &mut d.pack.buffer {
                    b.esr = v;
                }
            }
            Knob::BufferLeakage => {
                if let Some(b) = &mut d.pack.buffer {
                    b.leakage = v;
                }
            }
            Knob::BufferLimit => {
                if let Some(l) = d
                    .pack
                    .buffer
                    .as_mut()
                    .and_then(|b| b.current_limit.as_mut())
                {
                    *l = v;
                }
            }
            Knob::LoadDraw(l, s) => set_load_draw(d, *l, *s, v),
            Knob::StepFor(at) => set_step_for(d, at, v),
            Knob::RepeatTimes(at) => {
                if let Some(Step::Repeat {
                    until: RepeatUntil::Times(n),
                    ..
                }) = step_mut(&mut d.profile, at)
                {
                    *n = u64::from(whole(v));
                }
            }
        }
    }
}

/// Set LED driver `i`'s current to `v`, A, and its output to the voltage where its LED (the
/// one load on its rail) draws `v`.
fn set_led_current(d: &mut Design, i: usize, v: f64) {
    let law = d.tree.loads_on(i + 1).first().and_then(|&l| {
        d.loads[l].states.iter().find_map(|(_, draw)| match *draw {
            Draw::Led { knee, resistance } => Some((knee, resistance)),
            _ => None,
        })
    });
    let st = &mut d.stages[i];
    st.led_current = Some(v);
    if let Some((knee, r)) = law {
        st.setpoint = knee + v * r;
    }
}

/// Set the draw of state `s` of load `l` to `v` (in the draw's own kind: current, power or
/// resistance) and refresh the modes' per-rail draws.
fn set_load_draw(d: &mut Design, l: usize, s: usize, v: f64) {
    let draw = &mut d.loads[l].states[s].1;
    *draw = match *draw {
        Draw::Current(_) => Draw::Current(v),
        Draw::Power(_) => Draw::Power(v),
        Draw::Resistance(_) => Draw::Resistance(v),
        // Never reached: the checker refuses a tolerance on an LED's draw (its driver's
        // setpoint follows from it).
        led @ Draw::Led { .. } => led,
    };
    super::lower::refresh_draws(d);
}

/// Set the cell's resistance at half charge to `v`, Ω, scaling its whole table (a table that
/// is zero there becomes the constant `v`).
fn set_resistance(c: &mut Cell, v: f64) {
    let now = c.resistance.at(0.5);
    if now > 0.0 {
        let k = v / now;
        if let Ok(t) = Table::new(c.resistance.points().map(|(x, y)| (x, y * k)).collect()) {
            c.resistance = t;
        }
    } else {
        c.resistance = Table::constant(v);
    }
}

/// Set the length of the profile step at `at` to `v`, s, and each mode's longest hold with it.
fn set_step_for(d: &mut Design, at: &[usize], v: f64) {
    match step_mut(&mut d.profile, at) {
        Some(Step::Hold { seconds, .. }) => *seconds = v,
        Some(Step::Repeat {
            until: RepeatUntil::Seconds(s),
            ..
        }) => *s = v,
        _ => {}
    }
    // How long each mode is held decides which of the cell's limits applies.
    let holds = super::longest_holds(&d.profile, d.modes.len());
    for (m, hold) in d.modes.iter_mut().zip(holds) {
        m.longest_hold_s = hold;
    }
}

fn whole(v: f64) -> u32 {
    v.round().clamp(1.0, 1000.0) as u32
}

/// The profile item at `at` (indices down the nesting of repeat blocks).
pub(super) fn step<'a>(profile: &'a [Step], at: &[usize]) -> Option<&'a Step> {
    let (&first, rest) = at.split_first()?;
    let s = profile.get(first)?;
    if rest.is_empty() {
        return Some(s);
    }
    match s {
        Step::Repeat { steps, .. } => step(steps, rest),
        Step::Hold { .. } => None,
    }
}

fn step_mut<'a>(profile: &'a mut [Step], at: &[usize]) -> Option<&'a mut Step> {
    let (&first, rest) = at.split_first()?;
    let s = profile.get_mut(first)?;
    if rest.is_empty() {
        return Some(s);
    }
    match s {
        Step::Repeat { steps, .. } => step_mut(steps, rest),
        Step::Hold { .. } => None,
    }
}

/// One value of a design that spreads from unit to unit.
#[derive(Debug, Clone, PartialEq)]
pub struct Tolerance {
    /// The path as written in `tolerances:`.
    pub(crate) path: String,
    /// The value varied.
    pub(crate) knob: Knob,
    /// How it spreads (SI).
    pub(crate) dist: Dist,
    /// The design's own value (SI).
    pub(crate) nominal: f64,
}

impl Tolerance {
    /// The bounds of the one-at-a-time swing, within the value's physical range.
    pub fn swing_bounds(&self) -> (f64, f64) {
        let (lo, hi) = self.dist.swing_bounds();
        let r = self.knob.range();
        let fit = |v: f64| {
            if r.contains(v) {
                v
            } else {
                r.clip(v, self.nominal)
            }
        };
        (fit(lo), fit(hi))
    }
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Range`).
impl Range {
    /// Least value.
    pub fn lo(&self) -> f64 {
        self.lo
    }

    /// Whether the least value itself is allowed.
    pub fn lo_closed(&self) -> bool {
        self.lo_closed
    }

    /// Greatest value (allowed).
    pub fn hi(&self) -> f64 {
        self.hi
    }

    /// Whether values are whole numbers (counts of cells or passes).
    pub fn whole(&self) -> bool {
        self.whole
    }
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Tolerance`).
impl Tolerance {
    /// The path as written in `tolerances:`.
    pub fn path(&self) -> &str {
        &self.path
    }

    /// The value varied.
    pub fn knob(&self) -> &Knob {
        &self.knob
    }

    /// How it spreads (SI).
    pub fn dist(&self) -> &Dist {
        &self.dist
    }

    /// The design's own value (SI).
    pub fn nominal(&self) -> f64 {
        self.nominal
    }
}
