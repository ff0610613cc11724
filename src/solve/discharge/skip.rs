//! The fast solver's pass skipping, with error control: after an exact pass, many passes at once
//! at the mean rates of the parabola through passes simulated at the stretch's start, middle and
//! end (polarization at its periodic value at each), then the next pass executed. The stretch is
//! halved while the parabola departs from a straight line by more than a set share, and whenever
//! a simulated pass stops the product, so that the last passes before the end are always
//! executed exactly. Pass counts are `f64` (whole numbers): a profile of nanosecond steps may need
//! more passes than a `u64` holds.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::solve::numerics::{
    SKIP_BUFFER_LINEAR_REL, SKIP_BUFFER_REL_ERR, SKIP_LINEAR_REL, SKIP_MIN_PASSES_OPEN,
    SKIP_MIN_RUN_GAPS, SKIP_MIN_RUN_PASSES, SKIP_NOISE_REL, SKIP_REL_ERR,
};

impl<'a> Sim<'a> {
    /// The bend a stretch may have ([`SKIP_REL_ERR`]; tighter with a buffer capacitor).
    fn rel_err(&self) -> f64 {
        if self.c.d.pack.buffer.is_some() {
            SKIP_BUFFER_REL_ERR
        } else {
            SKIP_REL_ERR
        }
    }

    /// The difference of two nodes' falls under which a stretch is taken along their line
    /// ([`SKIP_LINEAR_REL`]; tighter with a buffer capacitor).
    fn linear_rel(&self) -> f64 {
        if self.c.d.pack.buffer.is_some() {
            SKIP_BUFFER_LINEAR_REL
        } else {
            SKIP_LINEAR_REL
        }
    }

    /// Advance `k` passes of length `pass` at the rates of `delta`.
    pub(super) fn advance(&mut self, k: f64, pass: f64, delta: &Delta) {
        let ocv_before = if self.c.d.pack.buffer.is_some() {
            self.c.d.pack.ocv(self.soc().max(0.0))
        } else {
            0.0
        };
        self.t.add(k * pass);
        self.s.add(-k * delta.ds);
        self.ledger.add_scaled(&delta.ledger, k);
        // Polarization relaxes toward its periodic value over the skipped passes.
        // V_p(k) = a^k V_p + b (1 - a^k) / (1 - a), a = e^(-T / tau): the geometric sum with
        // expm1, exact also when tau is years and a is 1 to within rounding.
        self.vp = lag(self.vp, k, delta.ln_decay, delta.offset);
        // The current the rate law sees is a first-order lag too.
        if self.c.window.is_some() {
            self.i_seen = lag(self.i_seen, k, delta.seen_ln_decay, delta.seen_offset);
        }
        // And so is the buffer capacitor's voltage less the cells' open-circuit voltage, so that
        // it follows that voltage down the stretch, lagging as in the pass: a pass's charge is
        // tiny beside the capacitor's, and starting one a few millivolts off would move it by
        // C dV.
        if self.c.d.pack.buffer.is_some() {
            let u1 = lag(
                self.vb - ocv_before,
                k,
                delta.buf_ln_decay,
                delta.buf_offset,
            );
            if k > 0.0 {
                self.vb_ln += k * delta.buf_ln_decay;
            }
            let ocv_after = self.c.d.pack.ocv(self.soc().max(0.0));
            self.vb = ocv_after + u1;
        }
    }

    /// Book the charge a buffer capacitor that started a stretch of `k` passes `u0` away from
    /// the cells' open-circuit voltage gives up (or takes) while it settles onto the periodic
    /// path of the stretch's first pass `first`: the passes' rates hold the periodic path's
    /// charge only (its drift with the cells included), and the rest, `-C (d0 - dk)` with d the
    /// distance from the periodic voltage (dk = a^k d0), comes from or goes to the cells
    /// (Kirchhoff's current law at the node). The energy goes with it at the capacitor's
    /// voltage, the difference to the open-circuit voltage being the cells' loss.
    fn settle_buffer_charge(&mut self, u0: f64, k: f64, first: &Delta) {
        let Some(c) = self.c.d.pack.buffer.map(|b| b.capacitance) else {
            return;
        };
        let Some(u_star) = first.vb_u_star_slow() else {
            // A capacitor that settles within a pass follows the cells (the pass's own end holds
            // it), and one that settles over far more passes than the stretch drifts as the
            // passes' rates already hold: nothing to book.
            return;
        };
        let d0 = u0 - u_star;
        let d1 = (k * first.buf_ln_decay).exp() * d0;
        // The cells' extra charge and its share of the state of charge, at the pass's ratio.
        let dq = -c * (d0 - d1);
        let per_c = if first.ledger.charge_c > 0.0 && first.ds > 0.0 {
            first.ds / first.ledger.charge_c
        } else {
            1.0 / self.q()
        };
        if !(dq.is_finite() && per_c.is_finite()) || k <= 0.0 {
            return;
        }
        self.s.add(-dq * per_c);
        let ocv = self.c.d.pack.ocv(self.soc().max(0.0));
        let x = ocv + u_star + d1;
        let l = &mut self.ledger;
        l.charge_c += dq;
        l.ocv_energy_j += dq * ocv;
        l.energy_j += dq * x;
        l.pack_loss_j += dq * (ocv - x);
        l.buffer_out_j -= dq * x;
    }

    /// Whether a run that stops within `within` passes of `pass` seconds from now lasts fewer
    /// than [`SKIP_MIN_RUN_PASSES`] passes of `stop_pass` seconds, those of the block the end
    /// falls in (this one or one nested in it): the end falls on one of them and one weighs
    /// more than the 0.2 % promised, so this block runs pass by pass from here.
    fn stop_soon(&self, pass: f64, within: f64, stop_pass: f64) -> bool {
        stop_pass > 0.0 && (self.now() + within * pass) / stop_pass < SKIP_MIN_RUN_PASSES
    }

    /// Whether a run that stops within `within` passes of `pass` seconds from now spans fewer
    /// than [`SKIP_MIN_RUN_GAPS`] of the block's longest stretch of plain steps, `gap`: a
    /// nested block's short passes (a burst of four pulses) may come in clusters a long step
    /// apart, and a voltage end then falls on a cluster, not on any one of those passes (a
    /// buffered design that stopped after 45 passes of 4.8 s, bursts 4.3 s apart, ran one
    /// burst longer than the reference: 2.3 %).
    fn gaps_soon(&self, pass: f64, within: f64, gap: f64) -> bool {
        gap > 0.0 && (self.now() + within * pass) / gap < SKIP_MIN_RUN_GAPS
    }

    /// Record that `probe`, a simulated pass, stopped the product within `within` passes, and
    /// the pass length of the block it stopped in (`stop_pass`); true if that makes the run
    /// short enough to go pass by pass from here ([`Sim::stop_soon`]).
    ///
    /// An empty pack's stop does not fall on a pass: the state of charge crosses zero at a time
    /// that moves with it continuously (a pulse that crosses a voltage limit once a pass moves
    /// the stop by a whole pass), so it records no pass length (0) and never makes the run
    /// go pass by pass (a handheld meter whose cells emptied in the night's sleep, a step of
    /// the profile itself, ran its last 45 days pass by pass: 1,250 points against 450).
    fn stop_found(
        &self,
        stop_within: &mut Option<f64>,
        stop_pass: &mut f64,
        probe: &Sim,
        pass: f64,
        within: f64,
    ) -> bool {
        *stop_within = Some(within);
        let empty = probe
            .end
            .as_ref()
            .is_some_and(|e| e.reason == EndReason::Empty);
        *stop_pass = if empty { 0.0 } else { probe.end_pass };
        !empty && self.stop_soon(pass, within, probe.end_pass)
    }

    /// How many passes the fast solver may skip after a pass that changed things by `delta`,
    /// with `remaining` passes of the block left and, if a skip found it, the product stopping
    /// within `stop_within` passes, in a block of passes of `stop_pass` seconds (this one or one
    /// nested in it).
    pub(super) fn plan_skip(
        &self,
        delta: &Delta,
        remaining: f64,
        pass: f64,
        steps: &[Step],
        stop_within: Option<f64>,
        stop_pass: f64,
    ) -> f64 {
        // A run of few passes (to empty at the last pass's fall, or to the stop a skip found) is
        // executed pass by pass (the innermost blocks with the reference's polarization steps):
        // its end falls on a pass, and one pass more or less would be more than the 0.2 % the
        // fast solver promises. A block holding repeat blocks skips until a skip finds where
        // the end falls: inside a nested block, the run is counted in that block's (shorter)
        // passes. Until then the end may fall in the shortest of them.
        let to_empty = if delta.ds > 0.0 {
            self.soc() / delta.ds
        } else {
            f64::INFINITY
        };
        let gap = longest_gap(steps);
        let stops_soon = stop_within.map_or_else(
            || {
                self.stop_soon(pass, to_empty, finest_pass(steps, pass))
                    || self.gaps_soon(pass, to_empty, gap)
            },
            |w| {
                self.stop_soon(pass, w, stop_pass)
                    || (stop_pass > 0.0 && self.gaps_soon(pass, w, gap))
            },
        );
        if stops_soon {
            // Where the passes hold repeat blocks, those skip on their own and the end falls on
            // one of their passes: fine polarization steps are for the innermost blocks.
            let nested = steps.iter().any(|s| matches!(s, Step::Repeat { .. }));
            // With a buffer capacitor, the reference's steps throughout: a step far longer
            // than the capacitor's time constant holds its path only approximately (whether a
            // pulse drains a capacitor behind its limiter can turn on the last millivolt). Where
            // the passes hold nested blocks, the end may still be far in steps: a budget bounds
            // them ([`Ctx::fine_nested`]).
            if self.c.d.pack.buffer.is_some() {
                if !nested {
                    self.c.fine.set(true);
                } else if !self.c.fine_nested_spent.get() && !self.c.fine.get() {
                    self.c.fine.set(true);
                    self.c.fine_nested.set(Some(self.c.work.get()));
                }
            }
            if !nested {
                self.c.fine_pol.set(true);
            }
            return 0.0;
        }
        let to_horizon = ((self.c.opt.horizon_s - self.now()) / pass).floor() - 1.0;
        let mut k = if delta.ds > 0.0 {
            // At least the shortest stretch, so that a block whose reach was cut to almost
            // nothing by an early halving tries again and grows it back.
            let by_ds = (self.c.reach(steps.as_ptr() as usize) / delta.ds)
                .floor()
                .max(SKIP_MIN_PASSES as f64);
            let by_empty = (self.soc() / delta.ds).floor() - 2.0;
            by_ds.min(by_empty)
        } else if self.c.opt.exact || delta.ds < 0.0 {
            return 0.0;
        } else {
            // Nothing changes from pass to pass: skip to the horizon.
            f64::INFINITY
        };
        k = k
            .min(to_horizon)
            .min(remaining - 1.0)
            // The pass `w - 1` in is known to stop: the stretch's end pass comes before it.
            .min(stop_within.map_or(f64::INFINITY, |w| w - 2.0));
        let k = k.floor();
        // A short stretch that finishes its block (two of a burst of four passes) is taken
        // only where a buffer capacitor settles within it: one drained across a burst of
        // pulses a third of its time constant apart is far from any periodic path (the
        // burst's charge was 0.6 % off, a whole burst of the runtime at the end).
        let finishes = k > 0.0
            && k >= remaining - 1.0
            && (self.c.d.pack.buffer.is_none() || delta.buf_ln_decay * k < -5.0);
        if k.is_finite() && (k >= SKIP_MIN_PASSES_OPEN || finishes) {
            k
        } else {
            0.0
        }
    }

    /// Execute `n` passes (a whole number, possibly infinite) of `steps`, each `pass` seconds;
    /// true if the product stopped.
    pub(super) fn passes(&mut self, steps: &[Step], pass: f64, n: f64) -> bool {
        let outer = std::mem::replace(&mut self.block_pass, pass);
        let stopped = self.passes_here(steps, pass, n);
        self.block_pass = outer;
        stopped
    }

    /// [`Sim::passes`] with the block's pass length recorded.
    fn passes_here(&mut self, steps: &[Step], pass: f64, n: f64) -> bool {
        let mut done = 0.0;
        let mut last: Option<Delta> = None;
        // Passes within which a skip found the product stopping (from the current state).
        let mut stop_within: Option<f64> = None;
        // The pass length of the block that stop falls in (this one or a nested one).
        let mut stop_pass = pass;
        // The margin the simulated pass that found that stop ended with: with the last pass's
        // own, it places the stretch that ends one pass before the stop
        // ([`Sim::aim_before_stop`]), no stretch going further while it stands. Placed afresh
        // from each pass nearer the stop (regula falsi keeping the stopping end), since a
        // margin that falls ever faster toward the end puts each estimate early.
        let mut stop_end: Option<StopMargin> = None;
        // The least voltage margin of the pass before `last`, and where that pass ended in
        // passes from the present state: with `last`'s, the line toward a voltage stop.
        let mut before: Option<(f64, f64)> = None;
        // Whether this block's stretches try two nodes first: as its last stretch measured
        // (the block runs again and again inside the passes of the blocks around it).
        let block = steps.as_ptr() as usize;
        let mut linear = self.c.linear_hint(block);
        while done < n {
            if let Some(delta) = last.as_ref() {
                let aim =
                    Self::aim_ahead(before, delta.margin, stop_within, stop_end).or_else(|| {
                        stop_within
                            .zip(stop_end)
                            .and_then(|(w, end)| self.aim_before_stop(delta.margin, w, end))
                    });
                let k = self
                    .plan_skip(delta, n - done, pass, steps, stop_within, stop_pass)
                    .min(aim.unwrap_or(f64::INFINITY));
                // Passes whose rail capacitors do not end where they started are not alike.
                let allowed = (!self.c.opt.exact || delta.ds == 0.0) && delta.rails_return;
                if allowed && k >= SKIP_MIN_PASSES as f64 {
                    let (mut found, mut end) = (None, None);
                    let skipped = self.skip(
                        steps,
                        pass,
                        k,
                        delta,
                        (&mut found, &mut stop_pass, &mut end),
                        &mut linear,
                    );
                    if !self.trace_probe {
                        self.c.set_linear_hint(block, linear);
                    }
                    match skipped {
                        None => return true,
                        Some((j, d)) => {
                            if delta.ds > 0.0 && !self.trace_probe {
                                self.c.set_reach(block, k * delta.ds, (j - 1.0) * delta.ds);
                            }
                            done += j;
                            before = last.as_ref().map(|l| (-j, l.margin));
                            last = Some(d);
                            if found.is_some() {
                                stop_end = end;
                            }
                            stop_within =
                                found.or(stop_within).map(|c| c - j).filter(|&c| c >= 1.0);
                            if stop_within.is_none() {
                                stop_end = None;
                            }
                            continue;
                        }
                    }
                }
            }
            let Some(delta) = self.run_pass(steps, pass) else {
                return true;
            };
            if !self.trace_probe && !self.c.opt.exact {
                self.c.grow_reach(block, delta.ds);
            }
            before = last.as_ref().map(|l| (-1.0, l.margin));
            last = Some(delta);
            done += 1.0;
            stop_within = stop_within.map(|c| c - 1.0).filter(|&c| c >= 1.0);
            if stop_within.is_none() {
                stop_end = None;
            }
            if let Some(report) = self.c.progress {
                let s0 = self.c.d.pack.start_soc;
                let used = if s0 > 0.0 { 1.0 - self.soc() / s0 } else { 0.0 };
                report(used.max(self.now() / self.c.opt.horizon_s).clamp(0.0, 1.0));
            }
        }
        false
    }

    /// Skip at most `k` passes, then execute one; `None` if the product stopped, else the passes
    /// done and the last pass's changes. `delta` holds the rates at the start of the stretch.
    ///
    /// The rates of a pass in the middle of the stretch carry the state to its end, where a pass
    /// is simulated too. The pass before the stretch, the middle one and the one after it give
    /// the rates at three places; the stretch is taken at the mean of the parabola through them
    /// ([`stretch_weights`]), and the parabola's departure from a straight line estimates the
    /// error: beyond [`SKIP_REL_ERR`] of a pass's fall in state of charge the stretch is
    /// halved. It is halved too whenever a simulated pass stops the product; `stop_within` then
    /// records within how many passes of the start the product stops, so the caller's next
    /// stretches end before it and the last passes run exactly (all of them, when the run is
    /// short in passes: [`Sim::stop_soon`]). The accepted stretch ends with the end pass, its
    /// state moved from the middle's rates to the parabola's.
    ///
    /// Below [`SKIP_MIN_PASSES_OPEN`] (or the stretch's own `k` where it is shorter and finishes
    /// its block) the pass is executed exactly.
    pub(super) fn skip(
        &mut self,
        steps: &[Step],
        pass: f64,
        mut k: f64,
        delta: &Delta,
        (stop_within, stop_pass, end): (&mut Option<f64>, &mut f64, &mut Option<StopMargin>),
        linear: &mut bool,
    ) -> Option<(f64, Delta)> {
        // A stretch of two finishes its block (`plan_skip`); halved ones stop at three.
        let min = SKIP_MIN_PASSES_OPEN.min(k);
        let (x0, first) = self.start_node(steps, pass, delta);
        let st = Stretch {
            steps,
            pass,
            x0,
            delta: &first,
        };
        let mut stop = StopSeen {
            within: stop_within,
            pass: stop_pass,
            start_margin: first.margin,
            end,
        };
        let mut spare = None;
        // Two nodes while the rates hold straight (again after a stop, at the shorter stretch
        // it aims at), three once they bend.
        while k >= min && !self.c.failed() {
            let seen = (&mut stop, &mut spare);
            let tried = if *linear {
                self.two_nodes(&st, k, seen, linear)
            } else {
                self.three_nodes(&st, k, seen, linear)
            };
            match tried {
                Try::Done(r) => return *r,
                Try::Again(n) => k = n,
            }
        }
        self.run_pass(steps, pass).map(|d| (1.0, d))
    }

    /// The start node of a stretch after a pass that changed things by `delta`: that pass (at
    /// -1/2), or, when its polarization, buffer voltage or rate-law current was still far from
    /// periodic, the first pass run again from the periodic values (at 1/2). Returns the
    /// node's place, in passes from the stretch's start, and its changes.
    fn start_node(&self, steps: &[Step], pass: f64, delta: &Delta) -> (f64, Delta) {
        let mut x0 = -0.5;
        let mut first = delta.clone();
        // (Only where the polarization settles within a pass or two; a slower one is followed by
        // the nodes themselves.)
        let vp_off = self.c.pol.is_some()
            && delta.decay < 0.5
            && self.pol_off_matters(self.vp - delta.vp_star, delta);
        // The same for a buffer capacitor that started the pass far from its periodic voltage
        // (drained by a block around this one): the pass's charge includes its recharge.
        let vb_off = self.c.d.pack.buffer.is_some()
            && delta.buf_ln_decay < -std::f64::consts::LN_2
            && (delta.vb_start - delta.vb_star).abs() > 1e-4 * delta.vb_star.abs();
        // And for the current the rate law sees, where its window settles within a pass and the
        // pass started far enough from its periodic value to move the pass's charge: the
        // filter's excess lasts a window, tau / T of the pass, and moves the charge by k - 1
        // times its share (the Peukert exponent k; the first pass of a run starts its filter
        // at the first step's current). A stretch's probes start from the filter's periodic
        // value at the stretch's start, which drifts with the current over the stretch: 1 % off
        // on a 5-min window in 2-h passes, a 7e-5 change of one pass's charge at k = 1.15, had
        // every day probed on the handheld meter run its first session twice.
        let seen_off = self.c.window.is_some()
            && delta.seen_ln_decay < -std::f64::consts::LN_2
            && (delta.seen_start.is_nan()
                || (delta.seen_start - delta.seen_star()).abs() / -delta.seen_ln_decay
                    * (self.c.d.pack.cell().peukert - 1.0)
                    > 1e-4 * delta.seen_star().abs());
        if vp_off || vb_off || seen_off {
            let mut again = self.clone();
            again.speculative = true;
            if vp_off {
                again.vp = delta.vp_star;
            }
            if seen_off {
                again.i_seen = delta.seen_star();
            }
            if vb_off {
                again.vb = delta.vb_star;
            }
            if let Some(r) = again.run_pass(steps, pass) {
                first = r;
                x0 = 0.5;
            }
        }
        (x0, first)
    }

    /// A simulated pass, `probe`, stopped the product `within` passes from the stretch's
    /// start. A speculative pass stops with it ([`Sim::stopped_like`]); otherwise the stop is
    /// recorded and the stretch shortened to end before the pass the stop is estimated to fall
    /// in ([`Sim::aim_before_stop`]), or to `shorter` passes where that cannot be estimated, or
    /// given up where the run is then short enough to go pass by pass ([`Sim::stop_found`]).
    fn probe_stopped(
        &mut self,
        probe: &Sim,
        stop: &mut StopSeen,
        pass: f64,
        within: f64,
        (shorter, straight): (f64, bool),
    ) -> Try {
        if self.speculative {
            return Try::Done(Box::new(self.stopped_like(probe)));
        }
        if self.stop_found(stop.within, stop.pass, probe, pass, within) {
            Try::Again(0.0)
        } else {
            *stop.end = StopMargin::of(probe);
            let aim = stop
                .end
                .and_then(|end| self.aim_before_stop(stop.start_margin, within, end));
            // At most the halved stretch, whose bend is smaller, unless the block's rates are
            // straight: near the end of a long run the stretches are held by their bend (an aim
            // of 41 days on the handheld meter was halved for it, costing a try).
            Try::Again(aim.map_or(shorter, |a| if straight { a } else { a.min(shorter) }))
        }
    }

    /// The stretch that ends one pass before the product stops, where a simulated pass
    /// `within` passes in stopped it with margin `end`: the line through the last pass (or the
    /// stretch's start node), whose margin was `margin`, and the stop crosses zero in the
    /// margin that ran out (state of charge for an empty pack, taken at the present state; the
    /// least voltage margin to an end condition, [`Sim::voltage_margin`], for a voltage end),
    /// and the stretch ends the pass before (regula falsi: halving the stretch instead took a
    /// simulated pass per halving, a third of a run's operating points near the end of a long
    /// one). A margin that falls ever faster toward the end (a cell's knee) puts the crossing
    /// early, so that the stretch falls short rather than stopping again. `None` where the
    /// margins do not bracket zero.
    fn aim_before_stop(&self, margin: f64, within: f64, end: StopMargin) -> Option<f64> {
        let (x0, m0) = if end.empty {
            // (A simulated pass stops at the start of the step that empties the pack.)
            (0.0, self.soc())
        } else {
            (-0.5, margin)
        };
        let m1 = end.margin;
        if !(m0 > 0.0 && m0.is_finite() && m1 <= 0.0 && m1.is_finite()) {
            return None;
        }
        // The probe's pass starts `within - 1` passes in; the stop lies inside it.
        let x = x0 + (within - 1.0 - x0) * m0 / (m0 - m1);
        // (`max` then `min`, not `clamp`, which panics should `within` ever be under 2.)
        Some((x.floor() - 1.0).min(within - 2.0).max(0.0))
    }

    /// The stretch that ends one pass before the product stops on a voltage, placed from the
    /// least voltage margins of the last two passes (`before`, with where that pass ended in
    /// passes from the present state, and `margin`, the last pass's): where they fall, the line
    /// through them crosses zero at the stop (a margin that falls as steadily as a cell's
    /// resistance rises gives it to within a pass or two). Where a simulated pass found the
    /// product stopping `within` passes in with margin `end`, the parabola through the three
    /// crosses zero between the last pass and that one: the line from the last pass to a
    /// stop found deep beyond it, where the margin falls ever faster, lands early, a stretch of
    /// its own for each try, and the line through the last two passes late. `None` for an
    /// empty pack and where the margins give no crossing.
    fn aim_ahead(
        before: Option<(f64, f64)>,
        margin: f64,
        within: Option<f64>,
        end: Option<StopMargin>,
    ) -> Option<f64> {
        let (xb, mb) = before?;
        if !(margin > 0.0 && margin.is_finite() && mb.is_finite() && xb < 0.0)
            || end.is_some_and(|e| e.empty)
        {
            return None;
        }
        // Each margin is placed at the end of its pass: whatever the place of a pass's deepest
        // sag within it, the same for every pass, a margin crossing zero `x` passes from now
        // stops the pass `floor(x)` in. (A stopping pass's margin is placed at its start, where
        // a stop deep beyond the last pass is found: early by at most a pass.)
        let d1 = (margin - mb) / -xb;
        let x = match within.zip(end) {
            Some((w, e)) => {
                let (xs, m1) = (w - 1.0, e.margin);
                if !(m1 <= 0.0 && m1.is_finite() && xs > 0.0) {
                    return None;
                }
                // Newton's form through (0, margin), (xs, m1) and (xb, mb); it changes sign on
                // (0, xs], where halving finds the crossing.
                let d2 = (m1 - margin) / xs;
                let c = (d2 - d1) / (xs - xb);
                let m = |x: f64| margin + d2 * x + c * x * (x - xs);
                let (mut lo, mut hi) = (0.0, xs);
                for _ in 0..64 {
                    let mid = 0.5 * (lo + hi);
                    if m(mid) > 0.0 {
                        lo = mid;
                    } else {
                        hi = mid;
                    }
                }
                // (The first place where the margin is no longer above zero, as the line's.)
                hi
            }
            None if d1 < 0.0 && d1.is_finite() => margin / -d1,
            None => return None,
        };
        let aim = (x.floor() - 1.0).max(0.0);
        Some(within.map_or(aim, |w| aim.min(w - 2.0).max(0.0)))
    }

    /// The two-node try of a stretch of `k` passes: the end pass first, reached at the start's
    /// rates. Where the rates did not move over the stretch, the line through the two nodes is
    /// the stretch (no middle pass); where they bend, `linear` is cleared and three nodes
    /// follow.
    fn two_nodes(
        &mut self,
        st: &Stretch,
        k: f64,
        (stop, spare): (&mut StopSeen, &mut Option<Spare<'a>>),
        linear: &mut bool,
    ) -> Try {
        let (delta, pass, x0) = (st.delta, st.pass, st.x0);
        let mut probe = self.clone();
        probe.speculative = true;
        probe.advance(k, pass, delta);
        let Some(rk) = probe.run_pass(st.steps, pass) else {
            return self.probe_stopped(&probe, stop, pass, k + 1.0, ((k / 2.0).floor(), true));
        };
        let flat = (rk.ds - delta.ds).abs() <= self.linear_rel() * delta.ds.abs()
            && (rk.ds > 0.0 || delta.ds <= 0.0);
        if !flat {
            // The rates bend: three nodes, whose end pass this one is (reached at the start's
            // rates, as a halved try's middle pass is).
            *linear = false;
            *spare = Some(Spare::new(k, probe, &rk));
            return Try::Again(k);
        }
        let wk = (0.5 * k - x0) / (k + 0.5 - x0);
        let rates = Delta::blend([(1.0 - wk, delta), (0.0, delta), (wk, &rk)]);
        self.c.fit.set(0.0);
        let taken = self.take_stretch(probe, st.steps, pass, k, (delta, delta), &rates, rk);
        Try::Done(Box::new(Some(taken)))
    }

    /// One three-node try of a stretch of `k` passes: the middle pass ([`Sim::middle_pass`])
    /// and the end pass ([`Sim::end_probe`]) with the start node give the parabola; the
    /// stretch is taken where its bend is allowed ([`Sim::bend_allowed`]), else halved.
    fn three_nodes(
        &mut self,
        st: &Stretch,
        k: f64,
        (stop, spare): (&mut StopSeen, &mut Option<Spare<'a>>),
        linear: &mut bool,
    ) -> Try {
        let (delta, pass) = (st.delta, st.pass);
        let h = (k / 2.0).floor();
        let (rm, mid) = match self.middle_pass(st, h, stop) {
            Ok(r) => r,
            Err(t) => return t,
        };
        // The end pass: the middle pass of the try before, where that was halved to this one
        // (it lies k passes in, reached at the start's rates) and the lagging states settle
        // within a pass (a slow one would carry the start's offsets to the end), or one reached
        // at this middle's rates.
        let settles = delta.lags_settle();
        let (probe, rk, used) = match spare.take().filter(|sp| settles && (sp.at - k).abs() < 0.5) {
            Some(sp) => (sp.sim, sp.delta, delta),
            None => {
                let mut probe = self.end_probe(st, k, h, &rm);
                let Some(rk) = probe.run_pass(st.steps, pass) else {
                    *spare = Some(Spare::new(h, mid, &rm));
                    return self.probe_stopped(&probe, stop, pass, k + 1.0, (h, false));
                };
                (probe, rk, &rm)
            }
        };
        let (w, bend) = stretch_weights(st.x0, h, k, [delta.ds, rm.ds, rk.ds]);
        if !self.bend_allowed(bend, k, rm.ds) {
            *spare = Some(Spare::new(h, mid, &rm));
            return Try::Again(h);
        }
        // The end pass was reached at the middle's rates (the midpoint rule) or, kept from the
        // try before, at the start's (`used`); move its state to the parabola's: the
        // difference is of the order of the error estimate, so the end pass's own changes
        // stand.
        let rates = Delta::blend([(w[0], delta), (w[1], &rm), (w[2], &rk)]);
        self.c.fit.set(bend / (self.rel_err() * rm.ds.abs()));
        // Whether the next stretch of this block may try two nodes.
        *linear = (rk.ds - delta.ds).abs() <= self.linear_rel() * delta.ds.abs();
        let taken = self.take_stretch(probe, st.steps, pass, k, (delta, used), &rates, rk);
        Try::Done(Box::new(Some(taken)))
    }

    /// The middle pass of a three-node try, `h` passes into the stretch at the start's rates,
    /// run again from its own periodic polarization or buffer voltage where the one it started
    /// from was far off, with the state after it; `Err` with what the try came to where it
    /// stops the product or gains charge.
    fn middle_pass(
        &mut self,
        st: &Stretch,
        h: f64,
        stop: &mut StopSeen,
    ) -> Result<(Delta, Sim<'a>), Try> {
        let (delta, pass) = (st.delta, st.pass);
        let mut mid = self.clone();
        mid.speculative = true;
        mid.advance(h, pass, delta);
        let start_mid = mid.clone();
        let Some(mut rm) = mid.run_pass(st.steps, pass) else {
            return Err(self.probe_stopped(&mid, stop, pass, h + 1.0, (h, false)));
        };
        if rm.ds.is_nan() || (rm.ds <= 0.0 && delta.ds > 0.0) {
            // A pass in the middle that gains charge cannot be extrapolated: pass by pass.
            return Err(Try::Again(0.0));
        }
        let pol_off = self.c.pol.is_some()
            && settled(&rm, h)
            && self.pol_off_matters(rm.vp_star - start_mid.vp, &rm);
        let buf_off = self.buffer_off(&rm, start_mid.vb, h);
        if pol_off || buf_off {
            // The middle pass started from the periodic polarization of the start's currents;
            // near the power limit the current is steep in V_p, so run it again from its own
            // periodic value. The same for a buffer capacitor whose periodic voltage moved
            // with the cells' resistance: each pass's charge holds C times its distance.
            let mut again = start_mid;
            if pol_off {
                again.vp = rm.vp_star;
            }
            if buf_off {
                again.vb = rm.vb_star;
            }
            let Some(r) = again.run_pass(st.steps, pass) else {
                return Err(self.probe_stopped(&again, stop, pass, h + 1.0, (h, false)));
            };
            rm = r;
            mid = again;
        }
        Ok((rm, mid))
    }

    /// The state the end pass of a stretch of `k` passes starts from, carried there at the
    /// rates of the middle pass `rm` (`h` passes in): its polarization moved toward the
    /// periodic value extrapolated along the stretch, and its buffer capacitor, less the
    /// cells' open-circuit voltage, toward the end's.
    fn end_probe(&self, st: &Stretch, k: f64, h: f64, rm: &Delta) -> Sim<'a> {
        let delta = st.delta;
        // The end pass starts from the periodic polarization extrapolated along the stretch.
        let vp_star_end = rm.vp_star + (rm.vp_star - delta.vp_star) * (k - h) / (h + 1.0);
        let mut probe = self.clone();
        probe.speculative = true;
        probe.advance(k, st.pass, rm);
        if settled(rm, k) {
            probe.vp += (vp_star_end - rm.vp_star) * (1.0 - rm.decay.powf(k));
        }
        // And the buffer's, less the open-circuit voltage, to the end's.
        if let (Some(um), Some(u0)) = (rm.vb_u_star_slow(), delta.vb_u_star_slow()) {
            let settle = -(k * rm.buf_ln_decay).exp_m1();
            probe.vb += (um - u0) * (k - h) / (h + 0.5 - st.x0) * settle;
        }
        probe
    }

    /// Whether a stretch of `k` passes whose parabola bends by `bend` (the middle pass falling
    /// by `ds_mid`) is taken: where the rates are smooth, or where the run's own stretch may
    /// spend the budget of what such stretches earned (each earns a share of what it takes).
    /// The budget is booked here.
    fn bend_allowed(&self, bend: f64, k: f64, ds_mid: f64) -> bool {
        let smooth = bend <= self.rel_err() * ds_mid.abs();
        let earned = if self.speculative {
            0.0
        } else {
            SKIP_NOISE_REL * k * ds_mid.abs()
        };
        let within_budget = !smooth && !self.speculative && bend * k <= self.c.slack.get() + earned;
        if within_budget {
            self.c.slack.set(self.c.slack.get() + earned - bend * k);
        } else if smooth {
            self.c.slack.set(self.c.slack.get() + earned);
        }
        !bend.is_nan() && (smooth || within_budget)
    }

    /// Whether a pass of `d` that started `dvp` away from its periodic polarization is to run
    /// again from that value: the distance is over 1e-3 of the periodic value, and its effect
    /// on the pass's currents, the distance over the open-circuit voltage for the share of the
    /// pass it lasts (tau / T, at most 1), is over 1e-6 (a microvolt off a 4 V cell's
    /// polarization moves nothing; near the power limit the current is steeper in the voltage,
    /// about a hundredfold at 0.9999 of it, and 1e-6 keeps that within 1e-4).
    fn pol_off_matters(&self, dvp: f64, d: &Delta) -> bool {
        let share = (1.0 / -d.ln_decay).min(1.0);
        let ocv = self.c.d.pack.ocv(self.soc().max(0.0)).abs();
        dvp.abs() > 1e-3 * d.vp_star.abs() && dvp.abs() * share > 1e-6 * ocv
    }

    /// Whether the middle pass `rm` of a stretch, started with its buffer capacitor at `vb`
    /// after `h` passes, is to run again from its own periodic voltage: the capacitor settles
    /// within the `h` passes and its distance from that voltage holds over 1e-4 of the pass's
    /// charge.
    fn buffer_off(&self, rm: &Delta, vb: f64, h: f64) -> bool {
        let Some(b) = self.c.d.pack.buffer else {
            return false;
        };
        rm.vb_u_star_slow().is_some()
            && (h * rm.buf_ln_decay).exp() < 0.05
            && b.capacitance * (rm.vb_star - vb).abs() > 1e-4 * rm.ledger.charge_c.abs()
    }

    /// Inside a speculative pass (one that only measures rates or finds that the product
    /// stops), a simulated pass of a nested block that stops the product stops the speculative
    /// pass too, without locating the end: the caller only learns that its pass stops. Returns
    /// `None` (stopped) with `probe`'s end.
    fn stopped_like(&mut self, probe: &Sim) -> Option<(f64, Delta)> {
        self.end.clone_from(&probe.end);
        self.margin = self.margin.min(probe.margin);
        self.end_pass = probe.end_pass;
        None
    }

    /// Take a stretch of `k` passes ending with the end pass run in `probe` (whose changes are
    /// `rk`), which reached it at the rates `used` from the stretch's first pass `first`: its
    /// state moves to the stretch's `rates`
    /// (the difference is of the order of the error estimate, so the end pass's own changes
    /// stand). Returns the passes done and the last pass's changes.
    #[allow(clippy::too_many_arguments)]
    fn take_stretch(
        &mut self,
        mut probe: Sim<'a>,
        steps: &[Step],
        pass: f64,
        k: f64,
        (first, used): (&Delta, &Delta),
        rates: &Delta,
        rk: Delta,
    ) -> (f64, Delta) {
        probe.s.add(-k * (rates.ds - used.ds));
        if self.c.d.pack.buffer.is_some() {
            let u0 = self.vb - self.c.d.pack.ocv(self.soc().max(0.0));
            probe.settle_buffer_charge(u0, k, first);
        }
        probe.ledger.add_scaled(&rates.ledger, k);
        probe.ledger.add_scaled(&used.ledger, -k);
        probe.trace_skipped(self, steps, pass, k, rates);
        probe.speculative = self.speculative;
        *self = probe;
        self.c.count(|c| c.skips += 1);
        (k + 1.0, rk)
    }

    /// With a trace, fill the skipped stretch: passes simulated at a few places inside it (from
    /// `base`, at the rates used for the skip) give their points to the trace and nothing else,
    /// so a run with a trace has exactly the result of one without.
    pub(super) fn trace_skipped(
        &mut self,
        base: &Sim<'a>,
        steps: &[Step],
        pass: f64,
        k: f64,
        rates: &Delta,
    ) {
        if self.tracer.is_none() || self.trace_probe {
            return;
        }
        // At least a few, and as many for each share of charge as a 4 % stretch had.
        let by_charge = (k * rates.ds * TRACE_PROBES_PER_SKIP as f64 / 0.04).ceil();
        let probes = by_charge.max(TRACE_PROBES_PER_SKIP as f64).min(k);
        let mut j = 1.0;
        while j < probes {
            let mut probe = base.clone();
            probe.trace_probe = true;
            probe.advance((j * k / probes).floor(), pass, rates);
            probe.steps(steps, pass);
            if let (Some(mine), Some(theirs)) = (&mut self.tracer, &probe.tracer) {
                for p in theirs.points() {
                    mine.offer(p);
                }
            }
            j += 1.0;
        }
    }
}

/// The fixed parts of a stretch's tries: the block's steps and pass length, and the start
/// node's place `x0` (in passes from the stretch's start) and changes `delta`.
struct Stretch<'s> {
    steps: &'s [Step],
    pass: f64,
    x0: f64,
    delta: &'s Delta,
}

/// Where a simulated pass found the product stopping: within how many passes of the present
/// state, and the pass length of the block the stop falls in.
struct StopSeen<'s> {
    within: &'s mut Option<f64>,
    pass: &'s mut f64,
    /// The least voltage margin of the stretch's start node, V (`Delta::margin`).
    start_margin: f64,
    /// The margin the stopping pass ended with, where it has one.
    end: &'s mut Option<StopMargin>,
}

/// The margin that ran out in a simulated pass that stopped the product: the state of charge
/// for an empty pack, else the least voltage margin to an end condition (negative or zero).
#[derive(Debug, Clone, Copy)]
pub(super) struct StopMargin {
    empty: bool,
    margin: f64,
}

impl StopMargin {
    /// The margin `probe` stopped with; `None` for a stop without one (a collapse).
    fn of(probe: &Sim) -> Option<Self> {
        let (empty, margin) = match probe.end.as_ref()?.reason {
            EndReason::Empty => (true, probe.soc().min(0.0)),
            EndReason::Cutoff | EndReason::Undervoltage | EndReason::Rail => (false, probe.margin),
            EndReason::Collapse | EndReason::Horizon => return None,
        };
        Some(Self { empty, margin })
    }
}

/// A pass simulated `at` passes into a stretch at the start's rates that the next try can use as
/// its end pass: the middle pass of a three-node try that was halved, or the end pass of a
/// two-node try whose rates bent. With the state after it and its changes.
struct Spare<'a> {
    at: f64,
    sim: Sim<'a>,
    delta: Delta,
}

impl<'a> Spare<'a> {
    fn new(at: f64, sim: Sim<'a>, delta: &Delta) -> Self {
        Self {
            at,
            sim,
            delta: delta.clone(),
        }
    }
}

/// What a try at a stretch of passes came to.
enum Try {
    /// Finished: `None` if the product stopped, else the passes done and the last pass's
    /// changes (boxed: a pass's changes are large beside a count).
    Done(Box<Option<(f64, Delta)>>),
    /// Try again with this many passes (below the least a stretch may have, the pass runs
    /// exactly).
    Again(f64),
}

/// Whether the polarization of passes changing by `d` settles within `n` passes.
fn settled(d: &Delta, n: f64) -> bool {
    (n * d.ln_decay).exp() < 0.05
}

/// A first-order lag after `k` passes that each take it from x to e^l x + b: e^(kl) x + b (1 -
/// e^(kl)) / (1 - e^l), the geometric sum with `expm1` (exact also when the time constant is
/// years and e^l is 1 to within rounding); b alone when the lag settles within a pass (l is
/// minus infinity).
fn lag(x: f64, k: f64, l: f64, b: f64) -> f64 {
    if l == f64::NEG_INFINITY {
        b
    } else if l == 0.0 {
        x + k * b
    } else {
        (k * l).exp() * x + b * (k * l).exp_m1() / l.exp_m1()
    }
}

/// The shortest pass of the repeat blocks in `steps` (a pass of `pass` seconds) and nested in
/// them, `pass` itself included: where the end of a run may fall.
/// The longest run of plain steps (no repeat block) in one pass of `steps`, s: 0 where every
/// step is a repeat block or none is (a block of plain steps has [`finest_pass`] for its own).
fn longest_gap(steps: &[Step]) -> f64 {
    if !steps.iter().any(|s| matches!(s, Step::Repeat { .. })) {
        return 0.0;
    }
    let (mut run, mut most) = (0.0_f64, 0.0_f64);
    for s in steps {
        match s {
            Step::Repeat { .. } => run = 0.0,
            Step::Hold { .. } => {
                run += s.duration();
                most = most.max(run);
            }
        }
    }
    most
}

fn finest_pass(steps: &[Step], pass: f64) -> f64 {
    steps.iter().fold(pass, |m, s| match s {
        Step::Repeat { steps: inner, .. } => {
            let p: f64 = inner.iter().map(Step::duration).sum();
            m.min(finest_pass(inner, p))
        }
        Step::Hold { .. } => m,
    })
}

/// Weights of the passes at the start (before the stretch at `x0` = -1/2, or its first at 1/2),
/// in the middle (at `h`) and after (at `k`) a stretch of passes 0..k for the stretch's mean
/// rate, and the size of the curvature term in it.
///
/// # Formula
///
/// Pass j covers [j, j + 1] and its changes are the rate at its middle, so the nodes are
/// x = x0, h + 1/2, k + 1/2. The mean over [0, k] of the parabola through them is
/// sum_i w_i r_i with w_i the mean of the Lagrange basis polynomial L_i over [0, k] (Simpson's
/// rule on the quadratic L_i, exact). The curvature term is that mean minus the mean of the
/// straight line through the outer nodes.
fn stretch_weights(x0: f64, h: f64, k: f64, r: [f64; 3]) -> ([f64; 3], f64) {
    let x = [x0, h + 0.5, k + 0.5];
    let basis = |i: usize, t: f64| {
        let (a, b) = ((i + 1) % 3, (i + 2) % 3);
        (t - x[a]) * (t - x[b]) / ((x[i] - x[a]) * (x[i] - x[b]))
    };
    let mean = |i: usize| (basis(i, 0.0) + 4.0 * basis(i, 0.5 * k) + basis(i, k)) / 6.0;
    let w = [mean(0), mean(1), mean(2)];
    let quad: f64 = w.iter().zip(&r).map(|(w, r)| w * r).sum();
    let line = r[0] + (r[2] - r[0]) * (0.5 * k - x[0]) / (x[2] - x[0]);
    (w, (quad - line).abs())
}

#[cfg(test)]
mod tests {
    use super::{Sim, StopMargin, stretch_weights};

    #[test]
    fn aims_follow_the_margins_line_and_parabola() {
        // A margin falling 0.05 V a pass from 0.5 V (the last pass's, placed at 0; the one ten
        // passes before at 1.0 V) crosses zero 10 passes ahead: the stop falls in pass 10, and
        // the stretch ends with pass 9. A stop found 20 passes in on the same line changes
        // nothing (the parabola through three points of a line is the line).
        let voltage = |margin| {
            Some(StopMargin {
                empty: false,
                margin,
            })
        };
        assert_eq!(
            Sim::aim_ahead(Some((-10.0, 1.0)), 0.5, None, None),
            Some(9.0)
        );
        let on_line = voltage(0.5 - 0.05 * 19.0);
        assert_eq!(
            Sim::aim_ahead(Some((-10.0, 1.0)), 0.5, Some(20.0), on_line),
            Some(9.0)
        );
        // A margin that falls ever faster (m(x) = 0.5 - 0.05 x - 0.002 x^2, from -10 to 19):
        // its zero lies at x = 7.07, so the stop falls in pass 7; the parabola finds it where
        // the line through the last two passes (at 10) would stop the stretch's end pass.
        let m = |x: f64| 0.5 - 0.05 * x - 0.002 * x * x;
        assert_eq!(
            Sim::aim_ahead(Some((-10.0, m(-10.0))), 0.5, Some(20.0), voltage(m(19.0))),
            Some(6.0)
        );
        // A rising margin gives no crossing; an empty pack's stop is left to the state of
        // charge.
        assert_eq!(Sim::aim_ahead(Some((-10.0, 0.4)), 0.5, None, None), None);
        let empty = Some(StopMargin {
            empty: true,
            margin: 0.0,
        });
        assert_eq!(
            Sim::aim_ahead(Some((-10.0, 1.0)), 0.5, Some(20.0), empty),
            None
        );
    }

    #[test]
    fn stretch_weights_integrate_quadratics_exactly() {
        // The mean over [0, k] of 2 + 3x - 0.1x^2 is 2 + 3k/2 - 0.1k^2/3.
        let f = |x: f64| 2.0 + 3.0 * x - 0.1 * x * x;
        for (h, k) in [(1.0, 3.0), (5.0, 11.0), (500.0, 1000.0)] {
            let r = [f(-0.5), f(h + 0.5), f(k + 0.5)];
            let (w, bend) = stretch_weights(-0.5, h, k, r);
            let mean: f64 = w.iter().zip(&r).map(|(w, r)| w * r).sum();
            let want = 2.0 + 1.5 * k - 0.1 * k * k / 3.0;
            assert!(
                (mean - want).abs() < 1e-9 * want.abs(),
                "{h} {k}: {mean} vs {want}"
            );
            assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-12);
            assert!(bend > 0.0);
            // A straight line has no curvature term.
            let g = |x: f64| 1.0 + 0.5 * x;
            let (_, flat) = stretch_weights(0.5, h, k, [g(0.5), g(h + 0.5), g(k + 0.5)]);
            assert!(flat < 1e-9 * g(k), "{flat}");
        }
    }
}
