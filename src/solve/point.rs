//! One operating point: for a battery state and a mode, the voltage, current, state and loss of
//! every stage and load. Voltages flow down the tree and currents up; the pack current is
//! settled by a bracketed search ([`settle`]), and so is the output of every load switch.

use std::cell::{Cell, RefCell};

use super::root::{Settle, settle};
use crate::model::{Buffer, Design, LossMemo, LossModel, Mode, Stage, StageKind};

/// The regulation state of a stage at an operating point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StageState {
    /// Holding its setpoint.
    Regulating,
    /// A buck or linear regulator below setpoint + dropout, passing its input through.
    Dropout,
    /// A boost whose input is above setpoint + bypass drop, passing it through.
    Bypass,
    /// A load switch, closed.
    On,
    /// Turned off by the mode, or its input rail is dead.
    Off,
    /// Its input, while running, is below the minimum of its input range: locked out.
    Undervoltage,
    /// A switching stage at its input current limit: its output below its setpoint, where
    /// the input current stays at the limit (power-limited).
    Limited,
}

impl StageState {
    /// The name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            StageState::Regulating => "regulating",
            StageState::Dropout => "dropout",
            StageState::Bypass => "bypass",
            StageState::On => "on",
            StageState::Off => "off",
            StageState::Undervoltage => "undervoltage",
            StageState::Limited => "limited",
        }
    }

    /// Whether the stage passes power to its rail.
    pub fn is_running(self) -> bool {
        !matches!(self, StageState::Off | StageState::Undervoltage)
    }
}

/// A stage at an operating point (SI units).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StagePoint {
    /// State.
    pub state: StageState,
    /// Input voltage (0 when the input rail is dead).
    pub vin: f64,
    /// Input current.
    pub iin: f64,
    /// Output voltage (0 when not running).
    pub vout: f64,
    /// Output current.
    pub iout: f64,
    /// Loss, W.
    pub loss: f64,
}

impl StagePoint {
    /// A stage off, with nothing in or out (on a dead rail, or before it is recorded).
    const OFF: StagePoint = StagePoint {
        state: StageState::Off,
        vin: 0.0,
        iin: 0.0,
        vout: 0.0,
        iout: 0.0,
        loss: 0.0,
    };

    /// P_out / P_in while running and drawing; `None` otherwise.
    pub fn efficiency(&self) -> Option<f64> {
        let pin = self.vin * self.iin;
        (self.state.is_running() && pin > 0.0).then(|| self.vout * self.iout / pin)
    }
}

/// A load at an operating point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LoadPoint {
    /// State index in the load (`None` = off).
    pub state: Option<usize>,
    /// Whether its rail is live.
    pub live: bool,
    /// Rail voltage.
    pub voltage: f64,
    /// Current drawn.
    pub current: f64,
    /// Power taken.
    pub power: f64,
}

/// The pack side of an operating point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PackPoint {
    /// Open-circuit voltage.
    pub ocv: f64,
    /// Terminal voltage.
    pub voltage: f64,
    /// Current (positive = discharge).
    pub current: f64,
    /// Internal loss I (OCV - V), W.
    pub loss: f64,
}

impl PackPoint {
    /// Terminal power V x I.
    pub fn power(&self) -> f64 {
        self.voltage * self.current
    }
}

/// A solved operating point.
#[derive(Debug, Clone, PartialEq)]
pub struct OperatingPoint {
    /// Mode index.
    pub mode: usize,
    /// The pack.
    pub pack: PackPoint,
    /// Every stage, by index.
    pub stages: Vec<StagePoint>,
    /// Every load, by index.
    pub loads: Vec<LoadPoint>,
    /// The buffer capacitor across the pack, if the design has one and the point was solved
    /// with its voltage.
    pub buffer: Option<BufferPoint>,
    /// The buffer capacitors on stages' output rails, in stage order (empty without any).
    pub rail_buffers: Vec<RailBufferPoint>,
}

impl OperatingPoint {
    /// Sum of load powers plus stage losses, plus the buffers' losses less the power their
    /// capacitors give up: equals the pack's terminal power.
    pub fn delivered_plus_losses(&self) -> f64 {
        self.loads.iter().map(|l| l.power).sum::<f64>()
            + self.stages.iter().map(|s| s.loss).sum::<f64>()
            + self.buffer.map_or(0.0, |b| b.loss - b.stored_power)
            + self
                .rail_buffers
                .iter()
                .map(|b| b.loss - b.stored_power)
                .sum::<f64>()
    }

    /// The voltage and current of the node the tree draws from: the pack's terminals, or the
    /// buffer capacitor's node (its leakage included in the current).
    pub fn node(&self) -> (f64, f64) {
        self.buffer
            .map_or((self.pack.voltage, self.pack.current), |b| {
                (b.node_voltage, b.node_current)
            })
    }
}

/// How the cells feed a buffered node.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BufferRegime {
    /// Cells and capacitor share the node's current through their resistances.
    Shared,
    /// The limiter holds the cells' current at its limit; the capacitor gives the rest.
    Limited,
    /// The capacitor is above the cells and the limiter lets no current back: the cells give
    /// nothing.
    Blocked,
}

/// A buffer capacitor at an operating point (SI units).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BufferPoint {
    /// Capacitor voltage (behind its series resistance).
    pub v_cap: f64,
    /// Voltage of the node the tree draws from.
    pub node_voltage: f64,
    /// Current the node gives: the tree's and the leakage.
    pub node_current: f64,
    /// Current out of the capacitor (negative while it charges).
    pub current: f64,
    /// Loss: series resistance, leakage and the limiter's drop, W.
    pub loss: f64,
    /// Power the capacitor gives from its store (negative while it charges), W.
    pub stored_power: f64,
    /// How the cells feed the node.
    pub regime: BufferRegime,
}

/// How a buffer capacitor on a stage's output rail moves at an operating point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RailBufferState {
    /// At the setpoint, the stage regulating: it carries its leakage alone.
    Settled,
    /// Below the setpoint, the stage regulating and recharging it through its series
    /// resistance: an exponential toward the setpoint with time constant C x ESR.
    Topping,
    /// The stage at its input current limit: the capacitor gives (or takes) the difference
    /// between the stage's output and the rail's draw, its voltage a state of its own.
    Limited,
    /// The stage passes its input through (dropout, bypass): the capacitor follows the rail.
    Following,
    /// The stage off or its rail dead: the capacitor keeps its charge less its leakage.
    Holding,
}

impl RailBufferState {
    /// The name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            RailBufferState::Settled => "settled",
            RailBufferState::Topping => "topping",
            RailBufferState::Limited => "limited",
            RailBufferState::Following => "following",
            RailBufferState::Holding => "holding",
        }
    }
}

/// A buffer capacitor on a stage's output rail at an operating point (SI units).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RailBufferPoint {
    /// The stage whose output rail it is on.
    pub stage: usize,
    /// Capacitor voltage (behind its series resistance).
    pub v_cap: f64,
    /// The rail's voltage.
    pub node_voltage: f64,
    /// Current out of the capacitor's store (negative while it charges).
    pub current: f64,
    /// Loss: series resistance and leakage, W.
    pub loss: f64,
    /// Power the capacitor gives from its store (negative while it charges), W.
    pub stored_power: f64,
    /// How it moves.
    pub state: RailBufferState,
}

/// The cells and a buffer capacitor as one source for the node (see [`crate::model::Buffer`]).
#[derive(Debug, Clone, Copy)]
struct Split {
    /// The cells' open-circuit voltage less polarization, and their resistance.
    e: f64,
    r: f64,
    /// Capacitor voltage, series resistance, leakage and the limiter's limit.
    x: f64,
    rc: f64,
    leak: f64,
    limit: Option<f64>,
}

impl Split {
    /// The cells' current while they share the node's current `i` with the capacitor.
    fn shared(&self, i: f64) -> f64 {
        let rt = self.r + self.rc;
        if rt > 0.0 {
            (self.e - self.x + self.rc * i) / rt
        } else {
            i
        }
    }

    /// The node seen as a source (open-circuit voltage, resistance) in `regime`.
    fn source(&self, regime: BufferRegime) -> (f64, f64) {
        let rt = self.r + self.rc;
        match regime {
            BufferRegime::Shared if rt > 0.0 => (
                (self.x * self.r + self.e * self.rc) / rt,
                self.r * self.rc / rt,
            ),
            BufferRegime::Shared => (self.e, 0.0),
            BufferRegime::Limited => (self.x + self.rc * self.limit.unwrap_or(0.0), self.rc),
            BufferRegime::Blocked => (self.x, self.rc),
        }
    }

    /// The regime the cells' current at node current `i` calls for, and that current.
    fn regime(&self, i: f64) -> (BufferRegime, f64) {
        let ib = self.shared(i);
        match self.limit {
            Some(l) if ib > l => (BufferRegime::Limited, l),
            Some(_) if ib < 0.0 => (BufferRegime::Blocked, 0.0),
            _ => (BufferRegime::Shared, ib),
        }
    }
}

/// The state of the pack for one operating point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PackState {
    /// State of charge, 0..1.
    pub soc: f64,
    /// Polarization voltage; `None` means settled at I x R1 (steady state, as `budget` uses).
    pub v_pol: Option<f64>,
    /// Ambient temperature, °C.
    pub ambient_c: f64,
}

/// The result of solving one mode at one pack state.
#[derive(Debug, Clone, PartialEq)]
pub enum Solution {
    /// The pack cannot supply the demanded power at any terminal voltage.
    Collapse {
        /// Open-circuit voltage at the moment.
        ocv: f64,
        /// Effective source resistance.
        resistance: f64,
    },
    /// The operating point.
    Point(OperatingPoint),
}

/// Solve mode `mode` of `design` at pack state `at`.
///
/// Stages whose input, with the stage running, is below their minimum are locked out
/// (`undervoltage`) and the point is solved again without them.
///
/// # Examples
///
/// ```
/// use joulepath::solve::{PackState, Solution, solve_point};
/// let text = r#"
/// cells:
///   c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4 V]], resistance: 0.1 ohm, cutoff: 3 V }
/// battery: { cell: c }
/// stages: [{ id: ldo, kind: linear, input: battery, output: 3.3 V, quiescent: 10 µA }]
/// loads: [{ id: mcu, rail: ldo, draw: { run: 5 mA } }]
/// modes: { run: { mcu: run } }
/// profile: [{ mode: run, for: 1 h }]
/// "#;
/// let d = joulepath::Design::from_text(text).unwrap();
/// let at = PackState { soc: 1.0, v_pol: None, ambient_c: 25.0 };
/// let Solution::Point(p) = solve_point(&d, 0, at) else { panic!() };
/// // A linear regulator draws its output current plus its quiescent current.
/// assert!((p.pack.current - 5.010e-3).abs() < 1e-12);
/// ```
pub fn solve_point(design: &Design, mode: usize, at: PackState) -> Solution {
    solve_point_buffered(design, mode, at, None)
}

/// [`solve_point`] with the buffer capacitor across the pack at voltage `v_cap` (ignored for a
/// design without a buffer; `None`: the capacitor is settled and carries no current, as
/// `budget` takes it, and only its leakage is drawn).
pub fn solve_point_buffered(
    design: &Design,
    mode: usize,
    at: PackState,
    v_cap: Option<f64>,
) -> Solution {
    solve_point_state(design, mode, at, v_cap, &[])
}

/// [`solve_point_buffered`] with the buffer capacitors on stages' output rails at the voltages
/// `rails` gives, as (stage index, voltage) pairs; a buffered stage not named there has its
/// capacitor settled at the stage's setpoint.
pub fn solve_point_state(
    design: &Design,
    mode: usize,
    at: PackState,
    v_cap: Option<f64>,
    rails: &[(usize, f64)],
) -> Solution {
    // The buffers are kept per thread between points (a discharge solves thousands); a solve
    // inside a solve, should there ever be one, works in buffers of its own.
    SCRATCH.with(|cell| match cell.try_borrow_mut() {
        Ok(mut scratch) => solve_in(design, mode, at, (v_cap, rails), &mut scratch),
        Err(_) => solve_in(design, mode, at, (v_cap, rails), &mut Scratch::default()),
    })
}

/// [`solve_point_state`] in the buffers `scratch`.
fn solve_in(
    design: &Design,
    mode: usize,
    at: PackState,
    (v_cap, rails): (Option<f64>, &[(usize, f64)]),
    scratch: &mut Scratch,
) -> Solution {
    let pack = &design.pack;
    let (ocv, v_open, r) = pack_source(design, at);
    let leak = pack.buffer.map_or(0.0, |b| b.leakage);
    let split = pack.buffer.zip(v_cap).map(|(b, x)| Split {
        e: v_open,
        r,
        x,
        rc: b.esr,
        leak,
        limit: b.current_limit,
    });
    // Empty until a stage is locked out (most points have none): `Walker::is_locked`.
    let mut locked: Vec<bool> = Vec::new();
    loop {
        scratch.forget(design.tree.rails());
        let walker = Walker {
            d: design,
            mode: &design.modes[mode],
            locked: &locked,
            memo: &scratch.memo,
            losses: &scratch.losses,
            rails,
        };
        let mut demand = |v: f64| walker.current(0, v) + leak;
        let (s, regime, source) = settle_node(split.as_ref(), v_open, r, &mut demand);
        let Settle::Point {
            v_a, v_b, alpha, ..
        } = s
        else {
            return Solution::Collapse {
                ocv,
                resistance: source.1,
            };
        };
        let records = (&mut scratch.rec_a, &mut scratch.rec_b);
        let mut point = point_between(&walker, mode, ocv, (v_a, v_b, alpha), leak, records);
        if let Some(sp) = &split {
            buffered(&mut point, sp, regime);
        }
        let newly = lockouts(design, &walker, &point);
        if newly.is_empty() {
            return Solution::Point(point);
        }
        locked.resize(design.stages.len(), false);
        for k in newly {
            locked[k] = true;
        }
    }
}

/// The pack of `design` as a source at state `at`: its open-circuit voltage, and the
/// open-circuit voltage and resistance seen at its terminals (behind the polarization where
/// its voltage is given, with the polarization's resistance where it is not).
fn pack_source(design: &Design, at: PackState) -> (f64, f64, f64) {
    let pack = &design.pack;
    let ocv = pack.ocv(at.soc);
    let r0 = pack.r0(at.soc, at.ambient_c);
    let pol = pack.polarization(at.ambient_c);
    let (v_open, r) = match (at.v_pol, pol) {
        (Some(vp), _) => (ocv - vp, r0),
        (None, Some((r1, _))) => (ocv, r0 + r1),
        (None, None) => (ocv, r0),
    };
    (ocv, v_open, r)
}

/// `demand` settled on the pack (`v_open` behind `r`), or, with a buffer capacitor (`split`),
/// on its node: first with the capacitor sharing the current, then again in the regime the
/// cells' current calls for. Returns the settled point, the regime and the source (open
/// voltage, resistance) it was settled on.
fn settle_node(
    split: Option<&Split>,
    v_open: f64,
    r: f64,
    demand: &mut dyn FnMut(f64) -> f64,
) -> (Settle, BufferRegime, (f64, f64)) {
    let (mut regime, mut source) = (BufferRegime::Shared, (v_open, r));
    let mut s = match split {
        Some(sp) => {
            source = sp.source(regime);
            settle(source.0, source.1, demand)
        }
        None => settle(v_open, r, demand),
    };
    if let (Some(sp), Settle::Point { current, .. }) = (split, s) {
        // The cells' current beyond the limiter's range: settled again in the regime it
        // calls for (the node's voltage falls with its current in every regime, so one
        // change is enough).
        let wanted = sp.regime(current).0;
        if wanted != regime {
            regime = wanted;
            source = sp.source(regime);
            s = settle(source.0, source.1, demand);
        }
    }
    (s, regime, source)
}

/// The operating point of `mode` where the pack settled between `v_a` and `v_b`, blended by
/// `alpha` (a converter switching at a state boundary, time-averaged): the tree walked at
/// both voltages, with the buffer's leakage `leak` added to the pack's current.
fn point_between(
    walker: &Walker,
    mode: usize,
    ocv: f64,
    (v_a, v_b, alpha): (f64, f64, f64),
    leak: f64,
    (rec_a, rec_b): (&mut Vec<Rec>, &mut Vec<Rec>),
) -> OperatingPoint {
    let design = walker.d;
    let size = design.stages.len() + design.loads.len();
    rec_a.clear();
    rec_b.clear();
    rec_a.reserve(size);
    rec_b.reserve(size);
    if v_a.to_bits() == v_b.to_bits() {
        // One point: one walk.
        let current = walker.rail_current(0, v_a, Some(rec_a)) + leak;
        return assemble(design, mode, ocv, v_a, current, rec_a);
    }
    let ia = walker.rail_current(0, v_a, Some(rec_a));
    let ib = walker.rail_current(0, v_b, Some(rec_b));
    blend(rec_a, rec_b, alpha);
    let current = alpha * ia + (1.0 - alpha) * ib + leak;
    let voltage = alpha * v_a + (1.0 - alpha) * v_b;
    assemble(design, mode, ocv, voltage, current, rec_a)
}

/// Split the node's current of `p` between the cells and the capacitor in `regime`: the pack
/// becomes the cells' side, and the buffer point the node's.
fn buffered(p: &mut OperatingPoint, sp: &Split, regime: BufferRegime) {
    let (v, i) = (p.pack.voltage, p.pack.current);
    let ib = match regime {
        BufferRegime::Shared => sp.shared(i),
        BufferRegime::Limited => sp.limit.unwrap_or(0.0),
        BufferRegime::Blocked => 0.0,
    };
    let ic = i - ib;
    // The cells' terminals: at the node while shared, behind the limiter otherwise.
    let vb = if regime == BufferRegime::Shared {
        v
    } else {
        sp.e - sp.r * ib
    };
    p.pack.voltage = vb;
    p.pack.current = ib;
    p.pack.loss = ib * (p.pack.ocv - vb);
    p.buffer = Some(BufferPoint {
        v_cap: sp.x,
        node_voltage: v,
        node_current: i,
        current: ic,
        loss: sp.rc * ic * ic + v * sp.leak + (vb - v) * ib,
        stored_power: sp.x * ic,
        regime,
    });
}

/// Running stages whose input is below their minimum, and no stage above them is too.
fn lockouts(design: &Design, walker: &Walker, p: &OperatingPoint) -> Vec<usize> {
    let low = |k: usize| {
        let s = &p.stages[k];
        !walker.is_locked(k)
            && s.state.is_running()
            && design.stages[k].input_min.is_some_and(|m| s.vin < m)
    };
    let mut out = Vec::new();
    for k in 0..design.stages.len() {
        if !low(k) {
            continue;
        }
        let mut rail = design.stages[k].input;
        let mut ancestor_low = false;
        while rail > 0 {
            if low(rail - 1) {
                ancestor_low = true;
                break;
            }
            rail = design.stages[rail - 1].input;
        }
        if !ancestor_low {
            out.push(k);
        }
    }
    out
}

thread_local! {
    /// Scratch buffers for [`solve_point`], reused from point to point on a thread (borrowed
    /// while in use, so a nested solve would only allocate afresh).
    static SCRATCH: RefCell<Scratch> = const {
        RefCell::new(Scratch {
            rec_a: Vec::new(),
            rec_b: Vec::new(),
            memo: Vec::new(),
            losses: Vec::new(),
        })
    };
}

/// The buffers one solve works in: the records of the two walks a point is blended from, and
/// the memos of rail currents ([`Walker::memo`]) and stage losses ([`Walker::losses`]).
#[derive(Default)]
struct Scratch {
    rec_a: Vec<Rec>,
    rec_b: Vec<Rec>,
    memo: Vec<Cell<Option<(u64, f64)>>>,
    losses: Vec<Cell<LossMemo>>,
}

impl Scratch {
    /// Empty the memos for a new walker over `rails` rails (a new mode, design or set of
    /// locked-out stages changes what every rail draws; the stages are one fewer than the
    /// rails).
    fn forget(&mut self, rails: usize) {
        self.memo.clear();
        self.memo.resize(rails, Cell::new(None));
        self.losses.clear();
        self.losses.resize(rails - 1, Cell::new(LossMemo::EMPTY));
    }
}

#[derive(Debug, Clone, Copy)]
enum Rec {
    Stage(usize, StagePoint),
    Load(usize, LoadPoint),
    /// The buffer capacitor on a stage's rail, after the stage and its subtree.
    Cap(RailBufferPoint),
}

/// Weighted average of two walks of the same tree (same order of records), into the first.
fn blend(a: &mut [Rec], b: &[Rec], alpha: f64) {
    let mix = |x: f64, y: f64| alpha * x + (1.0 - alpha) * y;
    for (ra, rb) in a.iter_mut().zip(b) {
        *ra = match (&*ra, rb) {
            (Rec::Stage(k, sa), Rec::Stage(_, sb)) => {
                let state = if sa.state == sb.state {
                    sa.state
                } else if sa.state == StageState::Regulating || sb.state == StageState::Regulating {
                    StageState::Regulating
                } else {
                    sa.state
                };
                Rec::Stage(
                    *k,
                    StagePoint {
                        state,
                        vin: mix(sa.vin, sb.vin),
                        iin: mix(sa.iin, sb.iin),
                        vout: mix(sa.vout, sb.vout),
                        iout: mix(sa.iout, sb.iout),
                        loss: mix(sa.loss, sb.loss),
                    },
                )
            }
            (Rec::Load(l, la), Rec::Load(_, lb)) => Rec::Load(
                *l,
                LoadPoint {
                    state: la.state,
                    live: la.live || lb.live,
                    voltage: mix(la.voltage, lb.voltage),
                    current: mix(la.current, lb.current),
                    power: mix(la.power, lb.power),
                },
            ),
            (Rec::Cap(ca), Rec::Cap(cb)) => Rec::Cap(RailBufferPoint {
                v_cap: ca.v_cap,
                node_voltage: mix(ca.node_voltage, cb.node_voltage),
                current: mix(ca.current, cb.current),
                loss: mix(ca.loss, cb.loss),
                stored_power: mix(ca.stored_power, cb.stored_power),
                ..*ca
            }),
            (other, _) => *other,
        };
    }
}

fn assemble(
    d: &Design,
    mode: usize,
    ocv: f64,
    voltage: f64,
    current: f64,
    rec: &[Rec],
) -> OperatingPoint {
    let mut stages = vec![StagePoint::OFF; d.stages.len()];
    let mut loads = vec![
        LoadPoint {
            state: None,
            live: false,
            voltage: 0.0,
            current: 0.0,
            power: 0.0
        };
        d.loads.len()
    ];
    let mut rail_buffers = Vec::new();
    for r in rec {
        match *r {
            Rec::Stage(k, s) => stages[k] = s,
            Rec::Load(l, p) => loads[l] = p,
            Rec::Cap(c) => rail_buffers.push(c),
        }
    }
    if rail_buffers.len() > 1 {
        rail_buffers.sort_by_key(|c| c.stage);
    }
    // A point blended across a stage's state boundary: each capacitor moves as its blended
    // stage says (its currents are already the blend of the two walks').
    for c in &mut rail_buffers {
        c.state = rail_buffer_state(&stages[c.stage], c.v_cap, d.stages[c.stage].setpoint);
    }
    OperatingPoint {
        mode,
        pack: PackPoint {
            ocv,
            voltage,
            current,
            loss: current * (ocv - voltage),
        },
        stages,
        loads,
        buffer: None,
        rail_buffers,
    }
}

/// How a buffer capacitor at voltage `x` on the rail of a stage at point `sp` (setpoint
/// `setpoint`) moves: from the stage's state, a limited stage's collapsed rail holding it.
fn rail_buffer_state(sp: &StagePoint, x: f64, setpoint: f64) -> RailBufferState {
    match sp.state {
        StageState::Regulating if x >= setpoint => RailBufferState::Settled,
        StageState::Regulating => RailBufferState::Topping,
        StageState::Limited if sp.vout > 0.0 => RailBufferState::Limited,
        StageState::Dropout | StageState::Bypass => RailBufferState::Following,
        _ => RailBufferState::Holding,
    }
}

/// The buffer capacitor `b` (at voltage `x`) on the rail of a stage at point `sp`, the rail
/// drawing `draw` (its loads and the stages on it): its current is what the stage gives the rail
/// less the draw and the leakage.
fn rail_buffer_point(
    k: usize,
    b: Buffer,
    x: f64,
    setpoint: f64,
    sp: &StagePoint,
    draw: f64,
) -> RailBufferPoint {
    let state = rail_buffer_state(sp, x, setpoint);
    let (current, node) = match state {
        RailBufferState::Settled | RailBufferState::Following => (0.0, sp.vout),
        RailBufferState::Topping | RailBufferState::Limited => {
            (draw + b.leakage - sp.iout, sp.vout)
        }
        RailBufferState::Holding => (if x > 0.0 { b.leakage } else { 0.0 }, 0.0),
    };
    // Held: the leakage runs down the store inside the capacitor, at its own voltage.
    let loss = if state == RailBufferState::Holding {
        x * current
    } else {
        b.esr * current * current + node * b.leakage
    };
    RailBufferPoint {
        stage: k,
        v_cap: x,
        node_voltage: node,
        current,
        loss,
        stored_power: x * current,
        state,
    }
}

/// Walks the tree for one mode: the current a rail draws at a voltage, optionally recording
/// every stage and load on the way.
struct Walker<'a> {
    d: &'a Design,
    mode: &'a Mode,
    /// Stages locked out, by index (empty: none).
    locked: &'a [bool],
    /// Per rail, the last voltage (its bits) it was walked at without recording, and the
    /// current found. While the pack's voltage is searched, a regulator's output rail is asked
    /// for its current at the same setpoint again and again: the memo answers without walking
    /// its subtree again (the walk is a pure function of the rail and the voltage for one
    /// walker, so the answer is the same, bit for bit).
    memo: &'a [Cell<Option<(u64, f64)>>],
    /// Per stage, what its efficiency curves gave at the output current last asked for (the
    /// same current again and again while the pack's voltage is searched).
    losses: &'a [Cell<LossMemo>],
    /// The voltages of the buffer capacitors on stages' rails, (stage, voltage); a buffered
    /// stage not named has its capacitor at its setpoint.
    rails: &'a [(usize, f64)],
}

impl Walker<'_> {
    /// The voltage of the buffer capacitor on stage `k`'s rail: as given, else the stage's
    /// setpoint (settled).
    fn cap_voltage(&self, k: usize) -> f64 {
        self.rails
            .iter()
            .find(|(j, _)| *j == k)
            .map_or(self.d.stages[k].setpoint, |&(_, x)| x)
    }

    /// Whether stage `k` is locked out (`locked` is empty while none is).
    fn is_locked(&self, k: usize) -> bool {
        self.locked.get(k).copied().unwrap_or(false)
    }

    /// [`Stage::regulating_loss`] of stage `k`, its efficiency curves read through its memo.
    fn regulating_loss(&self, k: usize, vin: f64, vout: f64, iout: f64) -> f64 {
        let st = &self.d.stages[k];
        if !matches!(st.loss, LossModel::Curves(_)) {
            return st.regulating_loss(vin, vout, iout);
        }
        let mut memo = self.losses[k].get();
        let loss = st.regulating_loss_memo(vin, vout, iout, &mut memo);
        self.losses[k].set(memo);
        loss
    }

    /// Current drawn from `rail` at voltage `v` by everything on it, recording every stage and
    /// load on the way into `rec` when given.
    fn rail_current(&self, rail: usize, v: f64, rec: Option<&mut Vec<Rec>>) -> f64 {
        match rec {
            None => self.current(rail, v),
            Some(r) => self.record_rail(rail, v, r),
        }
    }

    /// Current drawn from `rail` at voltage `v`, without recording: the hot path of the
    /// search, answered from the memo where the rail was just asked the same.
    #[inline]
    fn current(&self, rail: usize, v: f64) -> f64 {
        let key = v.to_bits();
        if let Some((k, i)) = self.memo[rail].get() {
            if k == key {
                return i;
            }
        }
        let i = self.walk(rail, v);
        self.memo[rail].set(Some((key, i)));
        i
    }

    /// [`Walker::current`] walked: the sum of this mode's draws on the rail and the input
    /// currents of the stages it feeds.
    #[inline(never)]
    fn walk(&self, rail: usize, v: f64) -> f64 {
        let mut total = 0.0;
        for d in &self.mode.rail_draws[rail] {
            total += d.current(v);
        }
        for &k in self.d.tree.stages_on(rail) {
            total += self.stage_current(k, v);
        }
        total
    }

    /// Input current of stage `k` at input voltage `vin`, without recording.
    fn stage_current(&self, k: usize, vin: f64) -> f64 {
        if !self.mode.stage_on[k] || self.is_locked(k) {
            return self.d.stages[k].shutdown;
        }
        let (state, vout) = self.stage_state(k, vin);
        self.stage_figures(k, vin, state, vout, None).2
    }

    /// [`Walker::rail_current`], recording into `rec`.
    fn record_rail(&self, rail: usize, v: f64, rec: &mut Vec<Rec>) -> f64 {
        let mut total = 0.0;
        for &l in self.d.tree.loads_on(rail) {
            let state = self.mode.load_states[l];
            let (i, p) = match state {
                Some(s) => {
                    let draw = self.d.loads[l].states[s].1;
                    let i = draw.current(v);
                    (i, v.max(0.0) * i)
                }
                None => (0.0, 0.0),
            };
            total += i;
            rec.push(Rec::Load(
                l,
                LoadPoint {
                    state,
                    live: true,
                    voltage: v,
                    current: i,
                    power: p,
                },
            ));
        }
        for &k in self.d.tree.stages_on(rail) {
            total += self.record_stage(k, v, rec);
        }
        total
    }

    /// Record `rail` and everything below it as dead.
    fn dead(&self, rail: usize, rec: &mut Vec<Rec>) {
        for &l in self.d.tree.loads_on(rail) {
            rec.push(Rec::Load(
                l,
                LoadPoint {
                    state: self.mode.load_states[l],
                    live: false,
                    voltage: 0.0,
                    current: 0.0,
                    power: 0.0,
                },
            ));
        }
        for &k in self.d.tree.stages_on(rail) {
            rec.push(Rec::Stage(k, StagePoint::OFF));
            let from = rec.len();
            self.dead(k + 1, rec);
            self.record_cap(k, &StagePoint::OFF, rec, from);
        }
    }

    /// After stage `k` (at `sp`) and its subtree, recorded in `r` from `from` on: its rail's
    /// buffer capacitor, if it has one.
    fn record_cap(&self, k: usize, sp: &StagePoint, r: &mut Vec<Rec>, from: usize) {
        let st = &self.d.stages[k];
        let Some(b) = st.buffer else { return };
        let rail = k + 1;
        let mut draw = 0.0;
        for rec in &r[from..] {
            match rec {
                Rec::Load(l, lp) if self.d.loads[*l].rail == rail => draw += lp.current,
                Rec::Stage(j, sj) if self.d.stages[*j].input == rail => draw += sj.iin,
                _ => {}
            }
        }
        let x = self.cap_voltage(k);
        r.push(Rec::Cap(rail_buffer_point(k, b, x, st.setpoint, sp, draw)));
    }

    /// Input current of stage `k` at input voltage `vin`, recording it and its subtree into
    /// `r`.
    fn record_stage(&self, k: usize, vin: f64, r: &mut Vec<Rec>) -> f64 {
        let st = &self.d.stages[k];
        if !self.mode.stage_on[k] || self.is_locked(k) {
            self.record_off(k, vin, r);
            return st.shutdown;
        }
        let (state, vout) = self.stage_state(k, vin);
        // Record the stage before its subtree; its figures are filled in after the walk below.
        let slot = r.len();
        let mut point = StagePoint {
            state,
            vin,
            iin: 0.0,
            vout,
            iout: 0.0,
            loss: 0.0,
        };
        r.push(Rec::Stage(k, point));
        let (vout, iout, iin, loss) = self.stage_figures(k, vin, state, vout, Some(r));
        (point.vout, point.iout, point.iin, point.loss) = (vout, iout, iin, loss);
        r[slot] = Rec::Stage(k, point);
        if st.buffer.is_some() {
            self.record_cap(k, &point, r, slot + 1);
        }
        iin
    }

    /// Record stage `k`, off or locked out at input `vin`, drawing its shutdown current, and
    /// everything below it as dead.
    fn record_off(&self, k: usize, vin: f64, r: &mut Vec<Rec>) {
        let st = &self.d.stages[k];
        let state = if self.mode.stage_on[k] {
            StageState::Undervoltage
        } else {
            StageState::Off
        };
        let point = StagePoint {
            state,
            vin,
            iin: st.shutdown,
            vout: 0.0,
            iout: 0.0,
            loss: vin.max(0.0) * st.shutdown,
        };
        r.push(Rec::Stage(k, point));
        let from = r.len();
        self.dead(k + 1, r);
        self.record_cap(k, &point, r, from);
    }

    /// The state and output voltage of running stage `k` at input `vin`: from the input alone,
    /// then limited where a switching stage's input current limit holds it below its setpoint,
    /// and regulating where a boost's resistive bypass would sag below the setpoint.
    #[inline]
    fn stage_state(&self, k: usize, vin: f64) -> (StageState, f64) {
        let st = &self.d.stages[k];
        let (mut state, mut vout) = state_and_output(st, vin);
        if state == StageState::Regulating && st.buffer.is_some() {
            return self.buffered_state(k, vin);
        }
        if let Some(limit) = st.input_current_limit {
            if state == StageState::Regulating {
                if let Some(v) = self.limited_output(k, vin, limit) {
                    (state, vout) = (StageState::Limited, v);
                }
            }
        }
        if state == StageState::Bypass && st.bypass_resistance > 0.0 {
            // A synchronous pass-through sags with its current: the boost stays in bypass only
            // while the settled output is at or above the setpoint, and regulates below it.
            let v_pass = match settle(vout, st.bypass_resistance, &mut |v| self.current(k + 1, v)) {
                Settle::Point {
                    v_a, v_b, alpha, ..
                } => alpha * v_a + (1.0 - alpha) * v_b,
                Settle::Collapse => 0.0,
            };
            if v_pass < st.setpoint {
                (state, vout) = (StageState::Regulating, st.setpoint);
            }
        }
        (state, vout)
    }

    /// The figures of running stage `k` in `state` at input `vin` and output `vout`, walking
    /// its subtree (recorded into `rec`): the output voltage as settled, output current, input
    /// current and loss.
    #[inline]
    fn stage_figures(
        &self,
        k: usize,
        vin: f64,
        state: StageState,
        vout: f64,
        mut rec: Option<&mut Vec<Rec>>,
    ) -> (f64, f64, f64, f64) {
        let st = &self.d.stages[k];
        let out = k + 1;
        let q = st.quiescent;
        match (st.kind, state) {
            (StageKind::Switch, _) => {
                let (vout, iout) = self.pass_output(k, vin, st.on_resistance, rec.as_deref_mut());
                let iin = iout + q;
                (vout, iout, iin, vin * iin - vout * iout)
            }
            (_, StageState::Limited) if vout <= 0.0 => {
                // The output collapsed at the limit: the rail is dead and the limit current is
                // all lost in the stage (a rail capacitor keeps its charge).
                if let Some(r) = rec.as_deref_mut() {
                    self.dead(out, r);
                }
                let iin = input_limit_or_zero(st);
                (0.0, 0.0, iin, vin * iin)
            }
            (
                _,
                StageState::Limited
                | StageState::Regulating
                | StageState::Dropout
                | StageState::Bypass,
            ) if st.buffer.is_some() => self.buffered_figures(k, vin, state, vout, rec),
            (_, StageState::Bypass) if st.bypass_resistance > 0.0 => {
                // Vout = Vin - bypass_drop - Iout x bypass_resistance, settled like a switch.
                let (vout, iout) =
                    self.pass_output(k, vout, st.bypass_resistance, rec.as_deref_mut());
                let iin = iout + q;
                (vout, iout, iin, vin * iin - vout * iout)
            }
            (StageKind::Linear, _) | (_, StageState::Dropout | StageState::Bypass) => {
                let iout = self.rail_current(out, vout, rec.as_deref_mut());
                let iin = iout + q;
                (vout, iout, iin, (vin - vout) * iout + vin * q)
            }
            _ => {
                let iout = self.rail_current(out, vout, rec);
                let loss = self.regulating_loss(k, vin, vout, iout);
                let pin = vout * iout + loss;
                let iin = if vin > 0.0 {
                    pin / vin
                } else if pin > 0.0 {
                    f64::INFINITY
                } else {
                    0.0
                };
                (vout, iout, iin, loss)
            }
        }
    }

    /// The state and rail voltage of switching stage `k` at input `vin` (where its input lets it
    /// regulate) with a buffer capacitor on its rail and an input current limit:
    /// regulating at the setpoint where the limit covers the rail's draw there, the leakage and
    /// the recharge through the capacitor's series resistance; limited otherwise, at the rail
    /// voltage where the stage's output at its limit, the rail's draw and the capacitor's
    /// current balance (the capacitor's own voltage where it has no series resistance).
    #[cold]
    #[inline(never)]
    fn buffered_state(&self, k: usize, vin: f64) -> (StageState, f64) {
        let st = &self.d.stages[k];
        let (Some(b), Some(limit)) = (st.buffer, st.input_current_limit) else {
            return (StageState::Regulating, st.setpoint);
        };
        let set = st.setpoint;
        let out = k + 1;
        let x = self.cap_voltage(k).min(set);
        if b.esr <= 0.0 {
            if x <= 0.0 && !self.current(out, 0.0).is_finite() {
                // A constant power on a drained capacitor: the rail collapses.
                return (StageState::Limited, 0.0);
            }
            let fits = x >= set
                && self.current(out, set) + b.leakage <= self.output_at_limit(k, vin, set, limit);
            return if fits {
                (StageState::Regulating, set)
            } else {
                (StageState::Limited, x)
            };
        }
        let need = self.current(out, set) + b.leakage + (set - x) / b.esr;
        if need <= self.output_at_limit(k, vin, set, limit) {
            return (StageState::Regulating, set);
        }
        // The stage's surplus at rail voltage v: its output at the limit less the rail's draw,
        // the leakage and the capacitor's charging current (v - x) / ESR. It is negative at the
        // setpoint; bisection below it (NaN, a constant power at 0 V, counts as a surplus).
        // Where it is negative all the way down (a constant power beyond what the stage and
        // the capacitor give), the bisection ends at 0 V: the rail collapses.
        let surplus = |v: f64| {
            self.output_at_limit(k, vin, v, limit)
                - self.current(out, v)
                - b.leakage
                - (v - x) / b.esr
        };
        let (mut lo, mut hi) = (0.0_f64, set);
        for _ in 0..80 {
            let mid = 0.5 * (lo + hi);
            if mid <= lo || mid >= hi {
                break;
            }
            let g = surplus(mid);
            if g.is_nan() || g > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        (StageState::Limited, lo)
    }

    /// The output current of switching stage `k` at its input current limit `limit`, input
    /// `vin` and output `v`: where V I + L(Vin, V, I) = Vin x limit (false position, Illinois
    /// variant; the loss rises with the current). 0 where the limit does not cover the stage's
    /// loss at no load. Below half the setpoint the stage gives the current it gives there:
    /// a converter's output current is bounded by its switch current, and the power balance
    /// alone would give an unbounded current into a drained capacitor (common practice, no
    /// source).
    fn output_at_limit(&self, k: usize, vin: f64, v: f64, limit: f64) -> f64 {
        let p = vin * limit;
        let v = v.max(0.5 * self.d.stages[k].setpoint);
        if p.is_nan() || v.is_nan() || p <= 0.0 || v <= 0.0 {
            return 0.0;
        }
        let f = |i: f64| v * i + self.regulating_loss(k, vin, v, i) - p;
        let (mut lo, mut hi) = (0.0_f64, p / v);
        let (mut f_lo, mut f_hi) = (f(lo), f(hi));
        if f_lo.is_nan() || f_lo >= 0.0 {
            return 0.0;
        }
        if f_hi.is_nan() || f_hi <= 0.0 {
            return hi;
        }
        let mut side = 0i8;
        for _ in 0..100 {
            let mut i = (lo * f_hi - hi * f_lo) / (f_hi - f_lo);
            if i.is_nan() || i <= lo || i >= hi {
                i = 0.5 * (lo + hi);
            }
            let fi = f(i);
            if fi.is_nan() {
                break;
            }
            if fi > 0.0 {
                (hi, f_hi) = (i, fi);
                if side == 1 {
                    f_lo *= 0.5;
                }
                side = 1;
            } else {
                (lo, f_lo) = (i, fi);
                if side == -1 {
                    f_hi *= 0.5;
                }
                side = -1;
            }
            if fi.abs() <= 1e-15 * p {
                return i;
            }
            if hi - lo <= 1e-14 * hi {
                break;
            }
        }
        lo
    }

    /// The figures of switching stage `k` with a buffer capacitor on its rail, regulating or
    /// at its limit ([`Walker::buffered_state`]) with input `vin` and rail voltage `v`:
    /// regulating, the stage gives the rail's draw, the leakage and the capacitor's recharge;
    /// limited, it gives its output at the limit and draws the limit; passing its input
    /// through, the draw and the leakage.
    #[cold]
    #[inline(never)]
    fn buffered_figures(
        &self,
        k: usize,
        vin: f64,
        state: StageState,
        v: f64,
        rec: Option<&mut Vec<Rec>>,
    ) -> (f64, f64, f64, f64) {
        let st = &self.d.stages[k];
        let Some(b) = st.buffer else {
            return (v, 0.0, 0.0, 0.0);
        };
        let draw = self.rail_current(k + 1, v, rec);
        if matches!(state, StageState::Dropout | StageState::Bypass) {
            // The capacitor follows the passed-through rail: the stage gives its leakage.
            let iout = draw + b.leakage;
            let q = st.quiescent;
            let iin = iout + q;
            return (v, iout, iin, (vin - v) * iout + vin * q);
        }
        if state == StageState::Limited {
            let limit = input_limit_or_zero(st);
            let iout = self.output_at_limit(k, vin, v, limit);
            return (v, iout, limit, vin * limit - v * iout);
        }
        let x = self.cap_voltage(k).min(st.setpoint);
        let charge = if b.esr > 0.0 { (v - x) / b.esr } else { 0.0 };
        let iout = draw + b.leakage + charge;
        let loss = self.regulating_loss(k, vin, v, iout);
        let iin = if vin > 0.0 {
            (v * iout + loss) / vin
        } else {
            0.0
        };
        (v, iout, iin, loss)
    }

    /// The output voltage of switching stage `k` at input `vin` when regulating would draw more
    /// than `limit` from its input (`None` when it draws no more): the voltage where its input
    /// current, (Vout Iout + L) / Vin, is the limit, found by bisection below the setpoint (the
    /// input power rises with the output voltage for loads that draw more at a higher voltage).
    /// Where even a vanishing output draws more than the limit (constant-power loads), 0: the
    /// output collapses.
    fn limited_output(&self, k: usize, vin: f64, limit: f64) -> Option<f64> {
        let st = &self.d.stages[k];
        let out = k + 1;
        let excess = |v: f64| {
            let iout = self.current(out, v);
            v * iout + self.regulating_loss(k, vin, v, iout) - vin * limit
        };
        if vin.is_nan() || vin <= 0.0 || excess(st.setpoint) <= 0.0 {
            return None;
        }
        let (mut lo, mut hi) = (0.0_f64, st.setpoint);
        // NaN (a constant power at 0 V) counts as too much.
        let at_zero = excess(lo);
        if at_zero.is_nan() || at_zero > 0.0 {
            return Some(0.0);
        }
        // Bisection to the resolution of f64 near the setpoint (at most about 60 halvings).
        for _ in 0..80 {
            let mid = 0.5 * (lo + hi);
            if mid <= lo || mid >= hi {
                break;
            }
            if excess(mid) > 0.0 {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        Some(lo)
    }

    /// Output voltage and current of stage `k` passing `vin` through resistance `r` (a load
    /// switch's on resistance, a boost's synchronous bypass): a source resistance for its rail,
    /// settled like the pack.
    fn pass_output(&self, k: usize, vin: f64, r: f64, rec: Option<&mut Vec<Rec>>) -> (f64, f64) {
        let out = k + 1;
        let s = settle(vin, r, &mut |v| self.current(out, v));
        let Settle::Point {
            v_a,
            v_b,
            alpha,
            current,
        } = s
        else {
            if let Some(r) = rec {
                self.dead(out, r);
            }
            return (0.0, f64::INFINITY);
        };
        if let Some(r) = rec {
            if v_a.to_bits() == v_b.to_bits() {
                return (v_a, self.rail_current(out, v_a, Some(r)));
            }
            // The subtree's records at both voltages, blended in place at the end of `r`.
            let from = r.len();
            let ia = self.rail_current(out, v_a, Some(r));
            let mid = r.len();
            let ib = self.rail_current(out, v_b, Some(r));
            let (head, rb) = r.split_at_mut(mid);
            blend(&mut head[from..], rb, alpha);
            r.truncate(mid);
            return (
                alpha * v_a + (1.0 - alpha) * v_b,
                alpha * ia + (1.0 - alpha) * ib,
            );
        }
        (alpha * v_a + (1.0 - alpha) * v_b, current)
    }
}

/// The input current limit of a stage, 0 without one.
fn input_limit_or_zero(st: &Stage) -> f64 {
    st.input_current_limit.unwrap_or(0.0)
}

/// A running stage's state and output voltage at input `vin` (DESIGN section 5).
fn state_and_output(st: &Stage, vin: f64) -> (StageState, f64) {
    let pass = |drop: f64| (vin - drop).max(0.0);
    match st.kind {
        StageKind::Buck | StageKind::Linear => {
            if vin >= st.setpoint + st.dropout {
                (StageState::Regulating, st.setpoint)
            } else {
                (StageState::Dropout, pass(st.dropout))
            }
        }
        StageKind::Boost => {
            if vin - st.bypass_drop <= st.setpoint {
                (StageState::Regulating, st.setpoint)
            } else {
                (StageState::Bypass, pass(st.bypass_drop))
            }
        }
        StageKind::BuckBoost => (StageState::Regulating, st.setpoint),
        StageKind::Switch => (StageState::On, vin),
    }
}
