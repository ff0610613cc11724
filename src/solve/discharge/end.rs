//! The end conditions of a run (DESIGN section 6) and the estimate that lets a step skip
//! solving its end state when it surely meets none of them.

#[allow(clippy::wildcard_imports)]
use super::*;

impl Sim<'_> {
    /// How far the pack's terminal voltage moves from operating point `p` to state (`s`, `vp`,
    /// `vb`) at `p`'s current: open-circuit voltage, ohmic drop, polarization and the buffer
    /// capacitor.
    pub(super) fn pack_shift(&self, p: &OperatingPoint, s: f64, vp: f64, vb: f64) -> f64 {
        let pack = &self.c.d.pack;
        let t = self.ambient();
        let i = p.pack.current;
        let (ocv_here, r0_here, scale) = self.pack_here(t);
        (pack.ocv(s) - ocv_here).abs()
            + (pack.r0_scaled(s, scale) - r0_here).abs() * i
            + (vp - self.vp).abs()
            + (vb - self.vb).abs()
    }

    /// The pack's open-circuit voltage and ohmic resistance at the present state of charge and
    /// ambient `t`, and the resistance's factor at `t` ([`Pack::scale_r`]), remembered until
    /// the state moves (a step reads them several times).
    ///
    /// [`Pack::scale_r`]: crate::model::Pack::scale_r
    fn pack_here(&self, t: f64) -> (f64, f64, f64) {
        let soc = self.soc();
        let (s0, t0, ocv, r0, scale) = self.here.get();
        if s0.to_bits() == soc.to_bits() && t0.to_bits() == t.to_bits() {
            return (ocv, r0, scale);
        }
        let pack = &self.c.d.pack;
        let scale = if t0.to_bits() == t.to_bits() {
            scale
        } else {
            pack.scale_r(t)
        };
        let (ocv, r0) = (pack.ocv(soc), pack.r0_scaled(soc, scale));
        self.here.set((soc, t, ocv, r0, scale));
        (ocv, r0, scale)
    }

    /// The smallest margin, in volts, between `p` and an end condition that follows the pack
    /// voltage: the pack (and a buffer's node) above its cutoff, running stages above their
    /// minimum input, drawing loads above their minimum supply. Rails behind a regulating
    /// stage only make it conservative.
    pub(super) fn voltage_margin(&self, p: &OperatingPoint) -> f64 {
        let d = self.c.d;
        let mut m = p.pack.voltage.min(p.node().0) - self.c.cutoff;
        for (st, sp) in d.stages.iter().zip(&p.stages) {
            if let (true, Some(min)) = (sp.state.is_running(), st.input_min) {
                m = m.min(sp.vin - min);
            }
        }
        for (load, lp) in d.loads.iter().zip(&p.loads) {
            let drawing = lp.state.is_some_and(|s| load.states[s].1.is_drawing());
            if let (true, true, Some(min)) = (drawing, lp.live, load.v_min) {
                m = m.min(lp.voltage - min);
            }
        }
        m
    }

    /// Whether a step from `p` (whose voltage margin is `margin`, [`Sim::voltage_margin`]) to
    /// (`s1`, `vp1`, `vb1`) at current `i` surely meets no end condition, so that its end state
    /// need not be solved: the pack stays far from its power limit (above 60 % of the
    /// open-circuit voltage, where a constant-power demand amplifies a sag at most threefold)
    /// and the estimated sag is under a quarter of the margin.
    pub(super) fn surely_clear(
        &self,
        p: &OperatingPoint,
        margin: f64,
        i: f64,
        (s1, vp1, vb1): (f64, f64, f64),
    ) -> bool {
        if s1 <= 0.0 {
            return false;
        }
        let v_open = p.pack.ocv - self.vp;
        let r0 = self.pack_here(self.ambient()).1;
        let sag = self.pack_shift(p, s1, vp1, vb1) + (i - p.pack.current).abs() * r0;
        p.pack.voltage > 0.6 * v_open && 4.0 * sag < margin
    }

    /// The end condition holding at `p`, if any, in the contract's order after collapse.
    pub(super) fn condition(&self, p: &OperatingPoint) -> Option<(EndReason, String)> {
        let d = self.c.d;
        // With a buffer capacitor the product sees its node: a capacitor drained below the
        // cutoff behind a limiter stops the run as the cells' own terminals would.
        if p.pack.voltage.min(p.node().0) < self.c.cutoff {
            return Some((EndReason::Cutoff, "battery".into()));
        }
        let below = &self.c.draws_below[p.mode];
        for (k, sp) in p.stages.iter().enumerate() {
            if sp.state == StageState::Undervoltage && below[k] {
                return Some((EndReason::Undervoltage, d.stages[k].id.clone()));
            }
        }
        for (l, lp) in p.loads.iter().enumerate() {
            let load = &d.loads[l];
            let drawing = lp.state.is_some_and(|s| load.states[s].1.is_drawing());
            if drawing && lp.live && load.v_min.is_some_and(|m| lp.voltage < m) {
                return Some((EndReason::Rail, load.id.clone()));
            }
        }
        None
    }

    pub(super) fn verdict(&self, sol: &Solution, s: f64) -> Option<(EndReason, String)> {
        match sol {
            Solution::Collapse { .. } => Some((EndReason::Collapse, "battery".into())),
            Solution::Point(p) => self
                .condition(p)
                .or_else(|| (s <= 0.0).then(|| (EndReason::Empty, "battery".into()))),
        }
    }
}
