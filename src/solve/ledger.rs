//! What a discharge run adds up: charge, energies per load, stage and the pack, peaks, and a
//! decimated trace that keeps each stretch's lowest terminal voltage.
//!
//! Two energies leave the pack, and every report names them the same way:
//! - the **energy from the cells**, the integral of open-circuit voltage x current
//!   ([`Ledger::cell_energy_j`]): what the cells give up, the pack's internal loss included;
//! - the **energy at the pack terminals**, the integral of terminal voltage x current
//!   ([`Ledger::terminal_energy_j`]): what reaches the tree (JSON `battery.energy_wh`).
//!
//! The energy from the cells = the energy at the terminals + the pack's internal loss; it is
//! also what the loads took plus every stage's loss plus the pack's loss (plus a buffer
//! capacitor's loss, less the energy it gave up from its store).

use super::point::{OperatingPoint, StageState};

/// Running totals of a discharge (SI: C, J, W).
#[derive(Debug, Clone, PartialEq)]
pub struct Ledger {
    /// Integral of the pack current, C.
    pub charge_c: f64,
    /// Energy at the pack terminals: integral of terminal voltage x current, J (what the pack
    /// delivers to the tree).
    pub energy_j: f64,
    /// Energy from the cells: integral of open-circuit voltage x current, J (the energy at the
    /// terminals plus the pack's internal loss).
    pub ocv_energy_j: f64,
    /// Internal loss of the pack, J.
    pub pack_loss_j: f64,
    /// Loss in the buffer capacitors, the one across the pack (series resistance, leakage,
    /// limiter) and those on stages' rails (series resistance, leakage), J.
    pub buffer_loss_j: f64,
    /// Energy the buffer capacitors gave up: their stored energy at the start less at the end,
    /// J (about 0 over whole pulses).
    pub buffer_out_j: f64,
    /// Stage count, load count.
    stages: usize,
    loads: usize,
    /// The per-stage and per-load totals in one allocation (a ledger is cloned for every
    /// simulated pass): each stage's loss (J), output energy (J) and time in each state (s, 7 a
    /// stage, indexed by [`state_index`]), then each load's energy (J), time on (s) and time on
    /// above its maximum supply (s). Read them with [`Ledger::stage_loss_j`] and its siblings.
    parts: Vec<f64>,
}

/// Position of a state in [`Ledger::stage_state_s`]: regulating, dropout, bypass, on, off,
/// undervoltage, limited.
pub fn state_index(s: StageState) -> usize {
    match s {
        StageState::Regulating => 0,
        StageState::Dropout => 1,
        StageState::Bypass => 2,
        StageState::On => 3,
        StageState::Off => 4,
        StageState::Undervoltage => 5,
        StageState::Limited => 6,
    }
}

impl Ledger {
    /// Zero totals for a tree of `stages` stages and `loads` loads.
    pub fn new(stages: usize, loads: usize) -> Self {
        Self {
            charge_c: 0.0,
            energy_j: 0.0,
            ocv_energy_j: 0.0,
            pack_loss_j: 0.0,
            buffer_loss_j: 0.0,
            buffer_out_j: 0.0,
            stages,
            loads,
            parts: vec![0.0; 9 * stages + 3 * loads],
        }
    }

    /// Energy lost in each stage, J.
    pub fn stage_loss_j(&self) -> &[f64] {
        &self.parts[..self.stages]
    }

    /// Energy each stage delivered at its output, J.
    pub fn stage_out_j(&self) -> &[f64] {
        &self.parts[self.stages..2 * self.stages]
    }

    /// Time stage `k` spent in each state, s, indexed by state: 0 regulating, 1 dropout,
    /// 2 bypass, 3 on, 4 off, 5 undervoltage, 6 limited.
    pub fn stage_state_s(&self, k: usize) -> &[f64] {
        let at = 2 * self.stages + 7 * k;
        &self.parts[at..at + 7]
    }

    /// Energy taken by each load, J.
    pub fn load_energy_j(&self) -> &[f64] {
        let at = 9 * self.stages;
        &self.parts[at..at + self.loads]
    }

    /// Time each load was on (its rail live, its state not `off`), s.
    pub fn load_on_s(&self) -> &[f64] {
        let at = 9 * self.stages + self.loads;
        &self.parts[at..at + self.loads]
    }

    /// Time each load was on with its rail above its maximum supply, s.
    pub fn load_high_s(&self) -> &[f64] {
        let at = 9 * self.stages + 2 * self.loads;
        &self.parts[at..at + self.loads]
    }

    /// Add operating point `p` held for `dt` seconds; `v_max` gives each load's maximum supply.
    pub fn add_point(&mut self, p: &OperatingPoint, dt: f64, v_max: &[Option<f64>]) {
        self.charge_c += p.pack.current * dt;
        self.energy_j += p.pack.power() * dt;
        self.ocv_energy_j += p.pack.ocv * p.pack.current * dt;
        self.pack_loss_j += p.pack.loss * dt;
        if let Some(b) = &p.buffer {
            self.buffer_loss_j += b.loss * dt;
            self.buffer_out_j += b.stored_power * dt;
        }
        for b in &p.rail_buffers {
            self.buffer_loss_j += b.loss * dt;
            self.buffer_out_j += b.stored_power * dt;
        }
        let (ns, nl) = (self.stages, self.loads);
        let (stage_part, load_part) = self.parts.split_at_mut(9 * ns);
        let (loss, rest) = stage_part.split_at_mut(ns);
        let (out, states) = rest.split_at_mut(ns);
        for (k, s) in p.stages.iter().enumerate().take(ns) {
            loss[k] += s.loss * dt;
            out[k] += s.vout * s.iout * dt;
            states[7 * k + state_index(s.state)] += dt;
        }
        let (energy, rest) = load_part.split_at_mut(nl);
        let (on, high) = rest.split_at_mut(nl);
        for (l, lp) in p.loads.iter().enumerate().take(nl) {
            energy[l] += lp.power * dt;
            if !lp.live || lp.state.is_none() {
                continue;
            }
            on[l] += dt;
            if v_max
                .get(l)
                .copied()
                .flatten()
                .is_some_and(|m| lp.voltage > m)
            {
                high[l] += dt;
            }
        }
    }

    /// `self + k x delta`.
    pub fn add_scaled(&mut self, delta: &Ledger, k: f64) {
        self.charge_c += k * delta.charge_c;
        self.energy_j += k * delta.energy_j;
        self.ocv_energy_j += k * delta.ocv_energy_j;
        self.pack_loss_j += k * delta.pack_loss_j;
        self.buffer_loss_j += k * delta.buffer_loss_j;
        self.buffer_out_j += k * delta.buffer_out_j;
        for (a, b) in self.parts.iter_mut().zip(&delta.parts) {
            *a += k * b;
        }
    }

    /// Energy taken by all loads, J.
    pub fn load_energy_total(&self) -> f64 {
        self.load_energy_j().iter().sum()
    }

    /// Energy lost in all stages, J.
    pub fn stage_loss_total(&self) -> f64 {
        self.stage_loss_j().iter().sum()
    }

    /// Energy from the cells, J: open-circuit voltage x current over the run, which is the
    /// energy at the terminals plus the pack's internal loss. Reports call it "from the cells".
    pub fn cell_energy_j(&self) -> f64 {
        self.ocv_energy_j
    }

    /// Energy at the pack terminals, J: terminal voltage x current over the run (JSON
    /// `battery.energy_wh`). Reports call it "at the pack terminals".
    pub fn terminal_energy_j(&self) -> f64 {
        self.energy_j
    }

    /// Share of the energy from the cells that reached the loads, 0..1 (`None` when the cells
    /// gave nothing).
    pub fn load_share_of_cell_energy(&self) -> Option<f64> {
        let from_cells = self.cell_energy_j();
        (from_cells > 0.0).then(|| self.load_energy_total() / from_cells)
    }

    /// Time stage `k` was on, s: every state but `off` (a stage in undervoltage lockout is
    /// enabled, so it counts).
    pub fn stage_on_s(&self, k: usize) -> f64 {
        let off = state_index(StageState::Off);
        (self.stage_state_s(k).iter().enumerate())
            .filter(|&(i, _)| i != off)
            .map(|(_, s)| s)
            .sum()
    }

    /// Time stage `k` spent in `state`, s.
    pub fn stage_time_s(&self, k: usize, state: StageState) -> f64 {
        self.stage_state_s(k)[state_index(state)]
    }
}

/// One point of the discharge trace.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TracePoint {
    /// Time, s.
    pub t_s: f64,
    /// State of charge, 0..1.
    pub soc: f64,
    /// Open-circuit voltage.
    pub ocv: f64,
    /// Terminal voltage.
    pub voltage: f64,
    /// Pack current.
    pub current: f64,
}

/// Keeps a few points per stretch of state of charge: the first one seen and the one with the
/// lowest terminal voltage, so that pulses' sags survive the decimation.
#[derive(Debug, Clone)]
pub struct Tracer {
    start_soc: f64,
    buckets: Vec<(Option<TracePoint>, Option<TracePoint>)>,
}

impl Tracer {
    /// A tracer with `buckets` stretches between `start_soc` and empty.
    pub fn new(start_soc: f64, buckets: usize) -> Self {
        Self {
            start_soc,
            buckets: vec![(None, None); buckets.max(1)],
        }
    }

    /// Offer a point.
    pub fn offer(&mut self, p: TracePoint) {
        let n = self.buckets.len();
        let used = if self.start_soc > 0.0 {
            ((self.start_soc - p.soc) / self.start_soc).clamp(0.0, 1.0)
        } else {
            0.0
        };
        let b = ((used * n as f64) as usize).min(n - 1);
        let (first, low) = &mut self.buckets[b];
        if first.is_none_or(|f| p.t_s < f.t_s) {
            *first = Some(p);
        }
        if low.is_none_or(|l| p.voltage < l.voltage) {
            *low = Some(p);
        }
    }

    /// The kept points in time order.
    pub fn points(&self) -> Vec<TracePoint> {
        let mut v: Vec<TracePoint> = self
            .buckets
            .iter()
            .flat_map(|(a, b)| [*a, *b])
            .flatten()
            .collect();
        v.sort_by(|a, b| a.t_s.total_cmp(&b.t_s));
        v.dedup_by(|a, b| {
            a.t_s.total_cmp(&b.t_s).is_eq() && a.voltage.total_cmp(&b.voltage).is_eq()
        });
        v
    }
}
