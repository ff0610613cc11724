//! The buffer capacitor across the pack along a step: its voltage follows the node's current
//! held over the step, region by region of the limiter (see [`crate::model::Buffer`]).
//!
//! # Formula
//!
//! With the cells at E behind R, the capacitor at x behind Rc, the node giving I and the
//! limiter holding the cells' current to [0, L]: the cells give (E - x + Rc I) / (R + Rc) while
//! that lies in [0, L] (shared), and C dx/dt = (x* - x) / (R + Rc) with x* = E - R I: an
//! exponential toward x* with time constant C (R + Rc). Above x_b = E + Rc I the cells give
//! nothing and x falls at I / C; below x_l = E + Rc I - (R + Rc) L they give L and x moves at
//! (L - I) / C. Over any stretch the cells' charge is I t - C (x(0) - x(t)) (the capacitor's
//! charge balance, Kirchhoff's current law). The path moves one way, so it crosses at most two
//! region boundaries.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::model::Buffer;

/// Sub-steps over which a nonlinear rate law is averaged along a buffered step.
const RATE_SUB_STEPS: usize = 20;
/// Of those, the sub-steps over the capacitor's settling where it settles within the step.
const RATE_SETTLE_SUB_STEPS: usize = 12;

/// The circuit of a step: the cells, the capacitor and the node's current held.
#[derive(Debug, Clone, Copy)]
pub(super) struct CapStep {
    /// The cells' open-circuit voltage less polarization, and their resistance.
    pub e: f64,
    pub r: f64,
    /// The node's current (the tree's and the leakage).
    pub i: f64,
    /// How fast the cells' side moves along the step, V/s: the open-circuit voltage falling
    /// with the charge drawn, less the growth of R I and of the polarization. `e` is taken
    /// at the step's start and moves at this rate, so that a capacitor settling within the
    /// step follows it (lagging by `drift` x its time constant) instead of a voltage held.
    pub drift: f64,
    /// The polarization (R1, its time constant, its voltage at the step's start) where it
    /// moves with the capacitor within the step and no limiter splits the path: the two are
    /// then solved together ([`CapStep::coupled`]) and `e` is the open-circuit voltage alone.
    pub pol: Option<(f64, f64, f64)>,
    pub b: Buffer,
}

/// A 2 x 2 matrix, row by row.
type Mat2 = [[f64; 2]; 2];

/// e^(A t) for a 2 x 2 matrix with real eigenvalues (an RC network's), from its trace and
/// determinant: e^(s t) (cosh(q t) I + sinh(q t) / q (A - s I)) with s the mean eigenvalue and
/// q half their distance (Cayley-Hamilton; Moler & Van Loan, "Nineteen dubious ways to compute
/// the exponential of a matrix", 2003, section 3, from memory), each exponential taken on its
/// own so that a stiff pair neither overflows nor cancels.
fn exp2(a: Mat2, t: f64) -> Mat2 {
    let s = 0.5 * (a[0][0] + a[1][1]);
    let det = a[0][0] * a[1][1] - a[0][1] * a[1][0];
    let q = (s * s - det).max(0.0).sqrt();
    let (e1, e2) = (((s + q) * t).exp(), ((s - q) * t).exp());
    let ch = 0.5 * (e1 + e2);
    let sh_q = if q * t > 1e-6 {
        0.5 * (e1 - e2) / q
    } else {
        t * (s * t).exp() * (1.0 + (q * t).powi(2) / 6.0)
    };
    [
        [ch + sh_q * (a[0][0] - s), sh_q * a[0][1]],
        [sh_q * a[1][0], ch + sh_q * (a[1][1] - s)],
    ]
}

fn mul2(m: Mat2, v: [f64; 2]) -> [f64; 2] {
    [
        m[0][0] * v[0] + m[0][1] * v[1],
        m[1][0] * v[0] + m[1][1] * v[1],
    ]
}

fn inv2(a: Mat2) -> Mat2 {
    let det = a[0][0] * a[1][1] - a[0][1] * a[1][0];
    [
        [a[1][1] / det, -a[0][1] / det],
        [-a[1][0] / det, a[0][0] / det],
    ]
}

/// Where the capacitor's voltage is moving, in a region of the limiter.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Region {
    /// Exponential toward x* with this time constant (0: at once).
    Shared { target: f64, tau: f64 },
    /// A straight line at this slope, V/s.
    Ramp { slope: f64 },
}

impl CapStep {
    pub(super) fn rt(&self) -> f64 {
        self.r + self.b.esr
    }

    /// The boundaries x_l (the cells at the limit below it) and x_b (the cells cut off above
    /// it); infinite without a limiter.
    fn bounds(&self, t0: f64) -> (f64, f64) {
        match self.b.current_limit {
            Some(l) => {
                let top = self.e + self.drift * t0 + self.b.esr * self.i;
                (top - self.rt() * l, top)
            }
            None => (f64::NEG_INFINITY, f64::INFINITY),
        }
    }

    /// The current that moves the capacitor behind limit `l`, for step control: the node's
    /// distance from the limit, at least a hundredth of the node's current (common practice,
    /// no source: a margin for a current that grows as the node falls).
    fn ramp_current(&self, l: f64) -> f64 {
        (self.i - l).abs().max(0.01 * self.i.abs())
    }

    /// The region boundary (x_l or x_b, `t0` seconds into the step) nearest to `x`.
    fn boundary_near(&self, x: f64, t0: f64) -> f64 {
        let (lo, hi) = self.bounds(t0);
        let near = if (x - lo).abs() <= (x - hi).abs() {
            lo
        } else {
            hi
        };
        if near.is_finite() { near } else { x }
    }

    /// The region at capacitor voltage `x`, `t0` seconds into the step, and how long the path
    /// stays in it (infinite when it never leaves; the boundaries are held where they are at
    /// `t0`). A shared region's target is the one at `t0`.
    fn region(&self, x: f64, t0: f64) -> (Region, f64) {
        let c = self.b.capacitance;
        let (lo, hi) = self.bounds(t0);
        let target = self.e + self.drift * t0 - self.r * self.i;
        let limit = self.b.current_limit.unwrap_or(f64::INFINITY);
        if x > hi {
            // Cut off: the capacitor alone feeds the node, down to x_b.
            let slope = -self.i / c;
            let t = if slope < 0.0 {
                (hi - x) / slope
            } else {
                f64::INFINITY
            };
            return (Region::Ramp { slope }, t);
        }
        // At x_l to within rounding (where a shared stretch ended) with the node taking more
        // than the limit: the limiter holds from here (else the path would stall there).
        let at_lo = x <= lo + 1e-12 * (lo.abs() + 1.0);
        if x < lo || (at_lo && self.i > limit) {
            let slope = (limit - self.i) / c;
            let t = if slope > 0.0 {
                (lo - x) / slope
            } else {
                f64::INFINITY
            };
            return (Region::Ramp { slope }, t.max(0.0));
        }
        let tau = c * self.rt();
        // Toward x*, which lies below x_l when the node takes more than the limit: the path
        // reaches x_l and the limiter takes over.
        let t = if target < lo && tau > 0.0 {
            tau * ((x - target) / (lo - target)).ln()
        } else {
            f64::INFINITY
        };
        (Region::Shared { target, tau }, t.max(0.0))
    }

    /// The capacitor's and the polarization's voltages after `t` from `x0` and the
    /// polarization's voltage at the step's start, and their means over `t`, where the two
    /// move together (`pol` set, no limiter), and the log of d x(t) / d x0.
    ///
    /// # Formula
    ///
    /// With the node drawing I, the cells at E behind R0 and R1 || tau, the capacitor behind
    /// Rc: its current is (E - v - R0 I - x) / (R0 + Rc) (Kirchhoff's laws), so
    /// C dx/dt = (E - v - R0 I - x) / (R0 + Rc) and tau dv/dt = R1 (I + that current) - v: a
    /// linear system y' = A y + b with equilibrium x* = E - (R0 + R1) I, v* = R1 I, moving at
    /// p1 = (g, 0) as E drifts. Its solution is y(t) = y*(t) + A^-1 p1 + e^(A t) d0 with
    /// d0 = y0 - y*(0) - A^-1 p1 (linear ODE with a ramp forcing), and its mean over t follows
    /// from the integral of e^(A t), A^-1 (e^(A t) - I).
    pub(super) fn coupled(&self, x0: f64, t: f64) -> Option<([f64; 2], [f64; 2], f64)> {
        let (r1, tau, v0) = self.pol?;
        let rs = self.r + self.b.esr;
        let c = self.b.capacitance;
        if !(rs > 0.0 && c > 0.0 && tau > 0.0 && t > 0.0) {
            return None;
        }
        let a: Mat2 = [
            [-1.0 / (c * rs), -1.0 / (c * rs)],
            [-r1 / (rs * tau), -(1.0 + r1 / rs) / tau],
        ];
        let ai = inv2(a);
        let star = [self.e - (self.r + r1) * self.i, r1 * self.i];
        let p1 = [self.drift, 0.0];
        let lag = mul2(ai, p1);
        let d0 = [x0 - star[0] - lag[0], v0 - star[1] - lag[1]];
        let m = exp2(a, t);
        let dt_ = mul2(m, d0);
        let end = [
            star[0] + p1[0] * t + lag[0] + dt_[0],
            star[1] + lag[1] + dt_[1],
        ];
        let moved = mul2(ai, [dt_[0] - d0[0], dt_[1] - d0[1]]);
        let mean = [
            star[0] + 0.5 * p1[0] * t + lag[0] + moved[0] / t,
            star[1] + lag[1] + moved[1] / t,
        ];
        let ok = end.iter().chain(&mean).all(|v| v.is_finite());
        ok.then(|| (end, mean, m[0][0].max(f64::MIN_POSITIVE).ln()))
    }

    /// The capacitor voltage after `dt` from `x0`, its time average over the step, and the
    /// log of d x(dt) / d x0 (the time spent shared over -tau: the straight lines keep a
    /// change as it is).
    pub(super) fn path(&self, x0: f64, dt: f64) -> (f64, f64, f64) {
        if dt <= 0.0 {
            return (x0, x0, 0.0);
        }
        if let Some((end, mean, ln)) = self.coupled(x0, dt) {
            return (end[0], mean[0], ln);
        }
        let (mut x, mut left, mut area, mut ln) = (x0, dt, 0.0, 0.0);
        let g = self.drift;
        for round in 0..4 {
            let (region, stay) = self.region(x, dt - left);
            // The last round takes the rest of the step in its region (the path has crossed
            // every boundary it can by then).
            let on_boundary = round < 3 && stay < left;
            let seg = if on_boundary { stay } else { left };
            match region {
                Region::Ramp { slope } => {
                    area += x * seg + 0.5 * slope * seg * seg;
                    x += slope * seg;
                }
                Region::Shared { target, tau } => {
                    // Toward a target moving at g from `target`: x follows it g tau behind,
                    // x(t) = T(t) - g tau + (x0 - T(0) + g tau) e^(-t / tau) (a first-order lag
                    // on a ramp; textbook linear ODE).
                    let ramp = target * seg + 0.5 * g * seg * seg;
                    ln -= if tau > 0.0 { seg / tau } else { f64::INFINITY };
                    if tau > 0.0 {
                        let gap = x - target + g * tau;
                        area += ramp - g * tau * seg + gap * tau * -(-seg / tau).exp_m1();
                        x = target + g * seg - g * tau + gap * (-seg / tau).exp();
                    } else {
                        area += ramp;
                        x = target + g * seg;
                    }
                }
            }
            left -= seg;
            if left <= 0.0 {
                break;
            }
            if on_boundary {
                // The segment ended on a boundary: start the next one on it exactly.
                x = self.boundary_near(x, dt - left);
            }
        }
        (x, area / dt, ln)
    }

    /// The longest step from `x0` over which the capacitor voltage moves by at most `allowed`
    /// volts (and, with `cut`, that ends where the path leaves its region), except that a
    /// capacitor settling far within the step (over 20 time constants, as the polarization)
    /// is not followed: the step's mean averages its transient.
    pub(super) fn step_limit(&self, x0: f64, dt: f64, allowed: f64, cut: bool) -> f64 {
        if allowed.is_nan() || allowed <= 0.0 {
            return f64::INFINITY;
        }
        let (region, stay) = self.region(x0, 0.0);
        // Where the rate law is not linear in the current, a step does not straddle the
        // limiter's boundaries: the cells' current jumps there (the limit, or nothing), and
        // the law taken on the step's mean current would miss the mean of its own values.
        if cut && stay.is_finite() && stay > 1e-9 * dt && stay < dt {
            return stay;
        }
        match region {
            Region::Shared { target, tau } => {
                let gap = (x0 - target).abs();
                if stay.is_infinite() && dt > 20.0 * tau {
                    return f64::INFINITY;
                }
                if gap <= allowed {
                    // Up to the limiter's boundary, and on along its straight line for the move
                    // allowed there (steps would shrink toward the boundary otherwise).
                    let ramp = self.b.current_limit.map_or(f64::INFINITY, |l| {
                        allowed * self.b.capacitance / self.ramp_current(l)
                    });
                    return (stay + ramp).max(f64::MIN_POSITIVE);
                }
                (-tau * (-allowed / gap).ln_1p()).max(f64::MIN_POSITIVE)
            }
            Region::Ramp { slope } => {
                // Near the limit a node whose current grows as its voltage falls (a constant
                // power) drains the capacitor ever faster: the move is judged at the larger of
                // the current's distance from the limit and a hundredth of it.
                let drain = match self.b.current_limit {
                    Some(l) if slope < 0.0 && self.i > l => {
                        self.ramp_current(l) / self.b.capacitance
                    }
                    _ => slope.abs(),
                };
                let by_move = if drain == 0.0 {
                    f64::INFINITY
                } else {
                    allowed / drain
                };
                // A ramp that ends at its boundary within the allowed move: the step may run on
                // into the next region, whose limit the next step applies.
                by_move.max(f64::MIN_POSITIVE)
            }
        }
    }
}

impl Sim<'_> {
    /// The circuit of a step of `dt` from operating point `p` (its node current held), with
    /// the cells' open-circuit voltage less polarization and their resistance now; `None`
    /// without a buffer. Over a step far longer than the polarization's time constant (as in
    /// [`Sim::polarization_step`]) the polarization settles with the capacitor: the cells are
    /// then their open-circuit voltage behind R0 + R1.
    pub(super) fn cap_step(&self, p: &OperatingPoint, dt: f64) -> Option<CapStep> {
        let b = self.c.d.pack.buffer?;
        let pack = &self.c.d.pack;
        let t = self.ambient();
        let i = p.buffer.map_or(p.pack.current, |bp| bp.node_current);
        let s0 = self.soc().max(0.0);
        let r0 = pack.r0(s0, t);
        let settled = self.pol().filter(|&(_, tau)| dt > 20.0 * tau);
        // A polarization that moves within the step, without a limiter: solved with the
        // capacitor (they trade charge through R0 + Rc faster than either settles alone).
        let pol = match (self.pol(), settled) {
            (Some((r1, tau)), None) if b.current_limit.is_none() => Some((r1, tau, self.vp)),
            _ => None,
        };
        let (e, r) = match (self.pol(), settled) {
            (Some((r1, _)), Some(_)) => (pack.ocv(s0), r0 + r1),
            _ if pol.is_some() => (pack.ocv(s0), r0),
            _ => (pack.ocv(s0) - self.vp, r0),
        };
        let mut cs = CapStep {
            e,
            r,
            i,
            drift: 0.0,
            pol,
            b,
        };
        // Where the cells' side is at the step's end, at the rate the node's current draws.
        let drift = if dt > 0.0 && dt.is_finite() {
            // The cells' mean current over the step (the capacitor takes or gives the rest of
            // the node's) draws the charge and drives the polarization: from the charge
            // balance of the path without drift. The current of `p` itself is that of an
            // instant, which after a change of mode holds the capacitor's recharge: over a
            // step far longer than the capacitor's time constant it would move the cells'
            // side by tens of millivolts that never happen.
            let x1 = cs.path(self.vb, dt).0;
            let i_cells = i - b.capacitance * (self.vb - x1) / dt;
            let i_cells = if i_cells.is_finite() {
                i_cells
            } else {
                p.pack.current
            };
            let rate = self.rate(i_cells, dt);
            let s1 = (s0 - rate * dt).max(0.0);
            let (e1, r1_) = match (self.pol(), settled) {
                (Some((r1, _)), Some(_)) => (pack.ocv(s1), pack.r0(s1, t) + r1),
                (Some(_), None) if pol.is_none() => (
                    pack.ocv(s1) - self.evolve(i_cells, rate, dt).1,
                    pack.r0(s1, t),
                ),
                _ => (pack.ocv(s1), pack.r0(s1, t)),
            };
            let g = ((e1 - e) - i * (r1_ - r)) / dt;
            if g.is_finite() { g } else { 0.0 }
        } else {
            0.0
        };
        cs.drift = drift;
        Some(cs)
    }

    /// The capacitor voltage after `dt` at `p`'s node current, the cells' mean current over
    /// the step (from the capacitor's charge balance), the log of the path's decay
    /// ([`CapStep::path`]) and, where it moves with the capacitor ([`CapStep::coupled`]), the
    /// polarization's voltage; the voltage now and `p`'s pack current without a buffer.
    pub(super) fn cap_after(&self, p: &OperatingPoint, dt: f64) -> (f64, f64, f64, Option<f64>) {
        match self.cap_step(p, dt) {
            Some(cs) if dt > 0.0 => {
                let (x1, ln, vp) = match cs.coupled(self.vb, dt) {
                    Some((end, _, ln)) => (end[0], ln, Some(end[1])),
                    None => {
                        let (x1, _, ln) = cs.path(self.vb, dt);
                        (x1, ln, None)
                    }
                };
                (x1, cs.i - cs.b.capacitance * (self.vb - x1) / dt, ln, vp)
            }
            _ => (self.vb, p.pack.current, 0.0, None),
        }
    }

    /// Whether the rate law is not linear in the instantaneous current (Peukert without a rate
    /// window), so that a step's mean current does not stand for its charge.
    fn rate_law_nonlinear(&self) -> bool {
        self.c.window.is_none() && self.c.d.pack.cell().peukert() > 1.0
    }

    /// The rate of fall of the state of charge over a step of `dt` from `p` whose cells give
    /// `i` on the mean: [`Sim::rate`] of `i`, except where a buffer capacitor moves the cells'
    /// current along the step and the rate law is not linear in it (Peukert without a rate
    /// window). The law is then averaged over the path's own currents, taken on sixteen
    /// sub-steps from the capacitor's charge balance: the law of the mean current would
    /// understate a current that swings (the law is convex).
    pub(super) fn rate_on_path(&self, p: &OperatingPoint, i: f64, dt: f64) -> f64 {
        let cs = match self.cap_step(p, dt) {
            Some(cs) if self.rate_law_nonlinear() && dt > 0.0 && dt.is_finite() => cs,
            _ => return self.rate(i, dt),
        };
        let c = cs.b.capacitance;
        // Where the capacitor settles well within the step (a pulse or a rest far longer than
        // its time constant C (R0 + Rc)), the sub-steps follow its settling: twelve over its
        // first six time constants, eight over the rest of the step (equal sixteenths of a
        // 4.6-s rest after a pulse put its whole recharge, some ten milliseconds at 16 mA, in
        // the first at 0.5 mA: the law, convex, then weighed the recharge 0.93 instead of 1.3,
        // and a design 0.5 mV from its cutoff ran a pulse longer than the reference).
        let tau = c * cs.rt();
        let settle = 6.0 * tau;
        let at = |j: usize| -> f64 {
            if settle > 0.0 && settle < dt {
                if j <= RATE_SETTLE_SUB_STEPS {
                    settle * j as f64 / RATE_SETTLE_SUB_STEPS as f64
                } else {
                    let k = (j - RATE_SETTLE_SUB_STEPS) as f64;
                    settle + (dt - settle) * k / (RATE_SUB_STEPS - RATE_SETTLE_SUB_STEPS) as f64
                }
            } else {
                dt * j as f64 / RATE_SUB_STEPS as f64
            }
        };
        let (mut x, mut t, mut sum) = (self.vb, 0.0, 0.0);
        for j in 1..=RATE_SUB_STEPS {
            let tj = if j == RATE_SUB_STEPS { dt } else { at(j) };
            let h = tj - t;
            if h > 0.0 {
                let next = cs.path(self.vb, tj).0;
                sum += self.rate(cs.i - c * (x - next) / h, h) * h;
                x = next;
            }
            t = tj;
        }
        let mean = sum / dt;
        if mean.is_finite() {
            mean
        } else {
            self.rate(i, dt)
        }
    }

    /// Make the mean point `m` of a step of `dt` that takes the capacitor from its voltage now
    /// to `x1` hold the step's totals: the cells' mean current `i`, the energy the capacitor
    /// gave from its store, C (x0^2 - x1^2) / 2, and as the buffer's loss what closes the
    /// step's energy balance. That loss holds the series resistance, the leakage, the limiter
    /// and the loss of recharging the capacitor through the cells' resistance (C dV^2 / 2 for
    /// each recharge by dV, however the resistance; textbook RC charging), which currents
    /// averaged over the step would miss.
    pub(super) fn buffer_step(&self, m: &mut OperatingPoint, i: f64, x1: f64, dt: f64) {
        let Some(c) = self.c.d.pack.buffer.map(|b| b.capacitance) else {
            return;
        };
        m.pack.current = i;
        m.pack.loss = i * (m.pack.ocv - m.pack.voltage);
        let tree: f64 = m.loads.iter().map(|l| l.power).sum::<f64>()
            + m.stages.iter().map(|s| s.loss).sum::<f64>();
        let stored = if dt > 0.0 {
            0.5 * c * (self.vb - x1) * (self.vb + x1) / dt
        } else {
            0.0
        };
        let vb = m.pack.voltage;
        if let Some(b) = &mut m.buffer {
            b.current = b.node_current - i;
            b.stored_power = stored;
            b.loss = vb * i + stored - tree;
        }
    }

    /// The capacitor's mean voltage over a step of `dt` from `p` (the voltage now without a
    /// buffer) and, where it moves with the capacitor ([`CapStep::coupled`]), the
    /// polarization's.
    pub(super) fn cap_mean(&self, p: &OperatingPoint, dt: f64) -> (f64, Option<f64>) {
        let Some(cs) = self.cap_step(p, dt) else {
            return (self.vb, None);
        };
        match cs.coupled(self.vb, dt) {
            Some((_, mean, _)) => (mean[0], Some(mean[1])),
            None => (cs.path(self.vb, dt).1, None),
        }
    }

    /// The longest step from `p` that keeps the capacitor's move within the polarization's
    /// allowance (infinite without a buffer).
    pub(super) fn cap_step_limit(&self, p: &OperatingPoint, dt: f64) -> f64 {
        self.cap_step(p, dt).map_or(f64::INFINITY, |cs| {
            // A move dx of the capacitor moves the cells' current by dx / (R + Rc), and their
            // terminal voltage, polarization included, by that times R0 + R1.
            let r_cells =
                self.c.d.pack.r0(self.soc(), self.ambient()) + self.pol().map_or(0.0, |(r1, _)| r1);
            let rt = cs.rt();
            let scale = if r_cells > rt && rt > 0.0 {
                rt / r_cells
            } else {
                1.0
            };
            // The allowance scales with the cells' open-circuit voltage, not the node's, which
            // a drained capacitor takes to nothing (steps would shrink to nothing with it).
            let allowed = self.c.max_dvp() * p.pack.ocv.max(p.node().0).abs() * scale;
            cs.step_limit(self.vb, dt, allowed, self.rate_law_nonlinear())
        })
    }
}

#[cfg(test)]
mod tests {
    use super::CapStep;
    use crate::model::Buffer;

    fn step(limit: Option<f64>, i: f64) -> CapStep {
        CapStep {
            e: 3.0,
            r: 10.0,
            i,
            drift: 0.0,
            pol: None,
            b: Buffer {
                capacitance: 1e-3,
                esr: 0.5,
                leakage: 0.0,
                current_limit: limit,
            },
        }
    }

    /// Without a limiter the capacitor relaxes toward E - R I with time constant C (R + Rc):
    /// the RC charging law V(t) = V_inf + (V_0 - V_inf) e^(-t / RC) (Alexander & Sadiku,
    /// Fundamentals of Electric Circuits, 5th ed., section 7.2, from memory).
    #[test]
    fn recharge_is_the_rc_exponential() {
        let s = step(None, 1e-3);
        let tau = 1e-3 * 10.5;
        let target = 3.0 - 10.0 * 1e-3;
        for &t in &[1e-4, 5e-3, 0.02, 0.5] {
            let (x, mean, _) = s.path(2.5, t);
            let want = target + (2.5 - target) * (-t / tau).exp();
            assert!((x - want).abs() < 1e-12, "{t}: {x} vs {want}");
            let want_mean = target + (2.5 - target) * tau / t * (1.0 - (-t / tau).exp());
            assert!((mean - want_mean).abs() < 1e-12);
        }
    }

    /// Through a limiter the capacitor first charges at (L - I) / C, a straight line, then
    /// relaxes exponentially once the cells' current falls below the limit.
    #[test]
    fn limited_recharge_is_a_ramp_then_the_exponential() {
        let s = step(Some(2e-3), 0.5e-3);
        // x_l = E + Rc I - (R + Rc) L = 3 + 0.25e-3 - 10.5 x 2e-3.
        let xl = 3.0 + 0.5 * 0.5e-3 - 10.5 * 2e-3;
        let slope = (2e-3 - 0.5e-3) / 1e-3;
        let t_ramp = (xl - 2.0) / slope;
        let (x, _, _) = s.path(2.0, 0.5 * t_ramp);
        assert!((x - (2.0 + slope * 0.5 * t_ramp)).abs() < 1e-12);
        let tau = 1e-3 * 10.5;
        let target = 3.0 - 10.0 * 0.5e-3;
        let (x, _, _) = s.path(2.0, t_ramp + tau);
        let want = target + (xl - target) * (-1.0_f64).exp();
        assert!((x - want).abs() < 1e-9, "{x} vs {want}");
    }

    /// The capacitor and the polarization solved together match a classical fourth-order
    /// Runge-Kutta integration of the same two equations (Kirchhoff's laws at the node), end
    /// and mean, with the cells' side drifting (a stiff pair: 0.1 ms against 20 ms).
    #[test]
    fn coupled_capacitor_and_polarization_match_runge_kutta() {
        let mut cs = step(None, 30e-3);
        cs.r = 2.0;
        cs.drift = -0.05;
        cs.b.capacitance = 100e-6;
        let (r1, tau, v0) = (5.0, 0.02, 0.01);
        cs.pol = Some((r1, tau, v0));
        let rs = cs.r + cs.b.esr;
        let f = |t: f64, y: [f64; 2]| {
            let e = cs.e + cs.drift * t;
            let ic = (e - y[1] - cs.r * cs.i - y[0]) / rs;
            [ic / cs.b.capacitance, (r1 * (cs.i + ic) - y[1]) / tau]
        };
        let t_end = 0.05;
        let n = 200_000;
        let h = t_end / f64::from(n);
        let (mut y, mut t, mut area) = ([2.9, v0], 0.0, [0.0, 0.0]);
        for _ in 0..n {
            let k1 = f(t, y);
            let k2 = f(
                t + h / 2.0,
                [y[0] + h / 2.0 * k1[0], y[1] + h / 2.0 * k1[1]],
            );
            let k3 = f(
                t + h / 2.0,
                [y[0] + h / 2.0 * k2[0], y[1] + h / 2.0 * k2[1]],
            );
            let k4 = f(t + h, [y[0] + h * k3[0], y[1] + h * k3[1]]);
            let next = [
                y[0] + h / 6.0 * (k1[0] + 2.0 * k2[0] + 2.0 * k3[0] + k4[0]),
                y[1] + h / 6.0 * (k1[1] + 2.0 * k2[1] + 2.0 * k3[1] + k4[1]),
            ];
            // Trapezoids for the means.
            area[0] += 0.5 * h * (y[0] + next[0]);
            area[1] += 0.5 * h * (y[1] + next[1]);
            y = next;
            t += h;
        }
        let (end, mean, _) = cs.coupled(2.9, t_end).expect("a solution");
        for k in 0..2 {
            assert!((end[k] - y[k]).abs() < 1e-9, "{k}: {} vs {}", end[k], y[k]);
            assert!((mean[k] - area[k] / t_end).abs() < 1e-8, "{k}: {}", mean[k]);
        }
    }

    /// A node taking more than the limit drains the capacitor at (I - L) / C for ever.
    #[test]
    fn a_load_above_the_limit_drains_the_capacitor() {
        let s = step(Some(2e-3), 12e-3);
        let (x, mean, _) = s.path(2.9, 0.1);
        // 2.9 V lies below x_l = 3 + 0.5 x 12e-3 - 10.5 x 2e-3 = 2.985 V: the cells give the
        // limit and the capacitor falls at (12 - 2) mA / 1 mF = 10 V/s.
        assert!((x - 1.9).abs() < 1e-12, "{x}");
        assert!((mean - 2.4).abs() < 1e-12, "{mean}");
        // From above x_l it first relaxes toward x* = 2.88 V, reaches x_l, then ramps.
        let (x, _, _) = s.path(3.0, 0.1);
        assert!(x < 1.9 + 0.115 && x > 1.9 + 0.05, "{x}");
    }
}
