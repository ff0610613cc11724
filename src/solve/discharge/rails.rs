//! The buffer capacitors on stages' output rails along a step (see
//! [`crate::solve::RailBufferState`]).
//!
//! # Formula
//!
//! A capacitor C at voltage x on a stage's rail moves by its current out of the store, I:
//! C dx/dt = -I. Behind a stage at its input current limit (or off, drawing only the leakage)
//! the step holds I at its mean point, a straight line; the step is cut so that x moves by at
//! most [`RAIL_STEP_DV`] of the setpoint, and a recharge lands on the setpoint. Behind a
//! regulating stage it recharges through its series resistance R: an exponential toward the
//! setpoint with time constant R C, followed exactly, its mean over the step taken in closed
//! form (the current, linear in x, then has its exact mean). Behind a stage passing its input
//! through (dropout, bypass) it follows the rail.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::solve::RailBufferState;

/// The most buffer capacitors on stages' rails a design may have.
pub const MAX_RAIL_BUFFERS: usize = 4;

/// The most a rail capacitor's voltage moves in a step, a fraction of its stage's setpoint
/// (common practice, no source: a stage's output at its limit, about its input power over x,
/// then changes by about 1 % over a step, which the mean point takes to second order).
const RAIL_STEP_DV: f64 = 0.01;

/// Within this fraction of the setpoint a recharging capacitor is at it (a landing step's end
/// differs from the line its start planned by the curvature of the recharge).
const RAIL_SNAP: f64 = 1e-9;

/// The voltages of the buffer capacitors on stages' rails (`x`), and their stages (`k`), in
/// stage order; the first `n` are used. Small, since every step's end state carries a copy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Rails {
    x: [f64; MAX_RAIL_BUFFERS],
    k: [u32; MAX_RAIL_BUFFERS],
    n: u8,
}

impl Rails {
    /// Every rail capacitor of `d` at its stage's setpoint (charged, as at the start).
    pub(super) fn charged(d: &Design) -> Self {
        let mut r = Self {
            x: [0.0; MAX_RAIL_BUFFERS],
            k: [0; MAX_RAIL_BUFFERS],
            n: 0,
        };
        for (k, st) in d.stages().iter().enumerate() {
            let i = usize::from(r.n);
            if let (true, true, Ok(k)) = (
                st.buffer().is_some(),
                i < MAX_RAIL_BUFFERS,
                u32::try_from(k),
            ) {
                (r.x[i], r.k[i]) = (st.setpoint(), k);
                r.n += 1;
            }
        }
        r
    }

    fn len(&self) -> usize {
        usize::from(self.n)
    }

    /// (stage, voltage) pairs, the first [`Rails::len`] used.
    pub(super) fn pairs(&self) -> ([(usize, f64); MAX_RAIL_BUFFERS], usize) {
        let mut out = [(0, 0.0); MAX_RAIL_BUFFERS];
        for (o, (&k, &x)) in out.iter_mut().zip(self.k.iter().zip(&self.x)) {
            *o = (k as usize, x);
        }
        (out, self.len())
    }

    /// Whether every voltage is finite.
    pub(super) fn finite(&self) -> bool {
        self.x[..self.len()].iter().all(|x| x.is_finite())
    }

    /// Whether `other` holds the same voltages to within [`RAIL_SNAP`] of each setpoint: a
    /// pass that ends where it started.
    pub(super) fn returned(&self, other: &Self, d: &Design) -> bool {
        (0..self.len()).all(|i| {
            let set = d.stages()[self.k[i] as usize].setpoint();
            (self.x[i] - other.x[i]).abs() <= RAIL_SNAP * set
        })
    }
}

impl Sim<'_> {
    /// The rail capacitors `t` seconds into a step from their present voltages, moving as at
    /// point `p` (the step's mean point for its end, its start for its mean): `mean` gives the
    /// mean over `[0, t]` instead of the value at `t`.
    #[inline]
    pub(super) fn rails_at(&self, p: &OperatingPoint, t: f64, mean: bool) -> Rails {
        if self.c.rails {
            self.rails_moved(p, t, mean)
        } else {
            self.rx
        }
    }

    /// [`Sim::rails_at`] for a design with rail buffers.
    #[inline(never)]
    fn rails_moved(&self, p: &OperatingPoint, t: f64, mean: bool) -> Rails {
        let mut out = self.rx;
        let d = self.c.d;
        let n = out.len();
        for (slot, b) in out.x[..n].iter_mut().zip(&p.rail_buffers) {
            let x0 = *slot;
            let st = &d.stages()[b.stage];
            let set = st.setpoint();
            let Some(buf) = st.buffer() else { continue };
            *slot = match b.state {
                RailBufferState::Settled => set,
                RailBufferState::Following => b.node_voltage,
                RailBufferState::Topping => topping(x0, set, buf.esr * buf.capacitance, t, mean),
                RailBufferState::Limited | RailBufferState::Holding => {
                    let slope = -b.current / buf.capacitance;
                    // A recharge hands over to the regulating stage where the rail reaches the
                    // setpoint: the capacitor at the setpoint less the recharge current's drop
                    // across its series resistance, then an exponential (at once without one).
                    let handover = set + buf.esr * b.current;
                    let t_b = if slope > 0.0 && b.state == RailBufferState::Limited {
                        ((handover - x0) / slope).max(0.0)
                    } else {
                        f64::INFINITY
                    };
                    if t <= t_b {
                        let x = x0 + slope * if mean { 0.5 * t } else { t };
                        let x = x.clamp(0.0, set);
                        if !mean && set - x <= RAIL_SNAP * set {
                            set
                        } else {
                            x
                        }
                    } else {
                        let x_b = x0 + slope * t_b;
                        let tau = buf.esr * buf.capacitance;
                        let after = topping(x_b, set, tau, t - t_b, mean);
                        if mean {
                            (0.5 * (x0 + x_b) * t_b + after * (t - t_b)) / t
                        } else {
                            after
                        }
                    }
                }
            };
        }
        out
    }

    /// Where a rail capacitor moving along a line settles within a step of `dt` toward the
    /// voltage where the stage's output and the rail's draw balance (a limited stage feeding a
    /// draw it cannot hold, its capacitor drained to that balance): the mean voltages over the
    /// step from the exponential through the start point `start` and the first mean point
    /// `pm` at `rxm` (the capacitor's current taken linear in its voltage between them,
    /// C dx/dt = -k (x - x_eq): time constant C / k). `None` where none settles within a
    /// fifth of its time constant (the line is then good to second order).
    ///
    /// The step's end, `x0 - I(mean) dt / C`, is then the exponential's end exactly where the
    /// current is linear: a step far longer than the time constant lands on the balance
    /// instead of oscillating about it (exponential Euler; from memory).
    pub(super) fn rails_stiff_mean(
        &self,
        start: &OperatingPoint,
        pm: &OperatingPoint,
        rxm: &Rails,
        dt: f64,
    ) -> Option<Rails> {
        let d = self.c.d;
        let mut out = *rxm;
        let mut changed = false;
        let moving =
            |s: RailBufferState| matches!(s, RailBufferState::Limited | RailBufferState::Holding);
        for (i, (b0, bm)) in start.rail_buffers.iter().zip(&pm.rail_buffers).enumerate() {
            if !(moving(b0.state) && moving(bm.state)) || i >= self.rx.len() {
                continue;
            }
            let (x0, xm) = (self.rx.x[i], rxm.x[i]);
            let st = &d.stages()[b0.stage];
            let Some(buf) = st.buffer() else { continue };
            if (xm - x0).abs() <= 1e-12 * st.setpoint() {
                continue;
            }
            let k = (bm.current - b0.current) / (xm - x0);
            let tau = buf.capacitance / k;
            if k.is_nan() || k <= 0.0 || dt < 0.2 * tau {
                continue;
            }
            let x_eq = x0 - b0.current / k;
            let mean = x_eq + (x0 - x_eq) * (tau / dt) * -(-dt / tau).exp_m1();
            out.x[i] = mean.clamp(0.0, st.setpoint());
            changed = true;
        }
        changed.then_some(out)
    }

    /// `end` (the rail capacitors at the end of a step from `start` held at mean point `pm`,
    /// `dt` long) with each capacitor that drains at `start` and whose rail has collapsed at
    /// `pm` (a constant power beyond what it gives) taken at least as far down as the start's
    /// drain goes: the collapse lies within the step, and a mean point that no longer drains
    /// it would leave it where it started, step after step.
    pub(super) fn rails_past_collapse(
        &self,
        start: &OperatingPoint,
        pm: &OperatingPoint,
        dt: f64,
        mut end: Rails,
    ) -> Rails {
        let d = self.c.d;
        for (i, (b0, bm)) in start.rail_buffers.iter().zip(&pm.rail_buffers).enumerate() {
            if i >= end.len()
                || b0.state != RailBufferState::Limited
                || bm.state != RailBufferState::Holding
                || b0.current <= 0.0
            {
                continue;
            }
            let Some(buf) = d.stages()[b0.stage].buffer() else {
                continue;
            };
            let drained = (self.rx.x[i] - b0.current * dt / buf.capacitance).max(0.0);
            end.x[i] = end.x[i].min(drained);
        }
        end
    }

    /// Whether a rail capacitor moves at `p` along a line (its stage at its limit, or off):
    /// its end state then differs from the start's and must be solved.
    pub(super) fn rails_moving(p: &OperatingPoint) -> bool {
        p.rail_buffers.iter().any(|b| {
            matches!(b.state, RailBufferState::Limited | RailBufferState::Holding)
                && b.current != 0.0
        })
    }

    /// The longest step from `p` over which each rail capacitor moving along a line moves by
    /// at most [`RAIL_STEP_DV`] of its setpoint, a recharge landing on where its stage takes
    /// over again (the setpoint less the drop of the recharge current across the series
    /// resistance).
    pub(super) fn rails_step_limit(&self, p: &OperatingPoint) -> f64 {
        let d = self.c.d;
        let mut dt = f64::INFINITY;
        for (&x0, b) in self.rx.x[..self.rx.len()].iter().zip(&p.rail_buffers) {
            let st = &d.stages()[b.stage];
            let Some(buf) = st.buffer() else { continue };
            if !matches!(b.state, RailBufferState::Limited | RailBufferState::Holding) {
                continue;
            }
            let speed = b.current.abs() / buf.capacitance;
            if speed.is_nan() || speed <= 0.0 {
                continue;
            }
            let set = st.setpoint();
            let allowed = RAIL_STEP_DV * set;
            dt = dt.min(allowed / speed);
            if b.current < 0.0 {
                let gap = set + buf.esr * b.current - x0;
                if gap > 0.0 && gap <= allowed {
                    dt = dt.min(gap / speed);
                }
            }
        }
        dt
    }
}

/// A capacitor at `x0` recharged toward `set` with time constant `tau`, `t` seconds on (its
/// mean over them with `mean`); at the setpoint at once without a time constant, and exactly on
/// it within [`RAIL_SNAP`].
fn topping(x0: f64, set: f64, tau: f64, t: f64, mean: bool) -> f64 {
    let gap = set - x0;
    if tau.is_nan() || tau <= 0.0 {
        return set;
    }
    if t.is_nan() || t <= 0.0 {
        return x0;
    }
    if mean {
        return set - gap * (tau / t) * -(-t / tau).exp_m1();
    }
    let x = set - gap * (-t / tau).exp();
    if set - x <= RAIL_SNAP * set { set } else { x }
}
